//! The judge: message -> features -> `p_junk` and reasons, against the
//! current model, from any number of request tasks at once.
//!
//! Scoring never waits for learning. The model is kept twice ("left-right"):
//! readers load the front copy through an [`ArcSwap`] (no lock), while the
//! learner (the only writer) applies a batch of feedback to the back copy,
//! publishes it as the new front, waits until no reader still holds the
//! old front, and applies the same batch to it so that it becomes the next
//! back copy. Both copies see the same rows in the same order, so they stay
//! bit-identical; the price is twice the model's memory.
//!
//! Feature extraction needs scratch buffers, so extractors are kept in a
//! small pool; a request takes one for the few microseconds of scoring and
//! puts it back (the pool's lock is never held across an `.await`).

use std::sync::{Arc, Mutex};

use arc_swap::ArcSwap;
use chaffgate_model::Model;
use chaffgate_text::{Extractor, FeatureSettings, Features, HashKey, Message};
use serde::Serialize;
use sha2::{Digest, Sha256};

/// One published copy of the model and the feedback it includes.
pub struct Snapshot {
    pub model: Model,
    /// The last feedback sequence number applied (0: none).
    pub model_seq: i64,
}

/// A feature that pushed `p_junk`, by readable name, with its signed
/// contribution to the margin `w . x`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Reason {
    pub feature: String,
    pub contribution: f64,
}

/// What scoring one message gives.
#[derive(Debug, Clone)]
pub struct Judgement {
    pub p_junk: f64,
    pub reasons: Vec<Reason>,
    pub model_seq: i64,
    /// Hex SHA-256 of the message's normalised content (field by field).
    pub content_sha256: String,
    /// `(slot, w_i * x_i)` of every feature, ascending by slot, when asked
    /// for (feature tallies); empty otherwise.
    pub contributions: Vec<(u32, f64)>,
}

pub struct Judge {
    front: ArcSwap<Snapshot>,
    settings: FeatureSettings,
    key: HashKey,
    extractors: Mutex<Vec<Scratch>>,
}

/// An extractor with its feature buffer.
struct Scratch {
    extractor: Extractor,
    features: Features,
}

impl Judge {
    /// A judge serving `model`, which must have been trained with these
    /// feature settings and key.
    pub fn new(model: Model, model_seq: i64, settings: FeatureSettings, key: HashKey) -> Judge {
        Judge {
            front: ArcSwap::from_pointee(Snapshot { model, model_seq }),
            settings,
            key,
            extractors: Mutex::new(Vec::new()),
        }
    }

    pub fn settings(&self) -> &FeatureSettings {
        &self.settings
    }

    pub fn key(&self) -> &HashKey {
        &self.key
    }

    /// The model copy readers currently see.
    pub fn snapshot(&self) -> Arc<Snapshot> {
        self.front.load_full()
    }

    /// Publishes `next` as the front copy and returns the previous front.
    /// Only the learner calls this.
    pub fn publish(&self, next: Arc<Snapshot>) -> Arc<Snapshot> {
        self.front.swap(next)
    }

    fn take_scratch(&self) -> Scratch {
        let pooled = match self.extractors.lock() {
            Ok(mut pool) => pool.pop(),
            Err(poisoned) => poisoned.into_inner().pop(),
        };
        pooled.unwrap_or_else(|| Scratch {
            extractor: Extractor::new(self.settings.clone(), self.key.clone()),
            features: Features::default(),
        })
    }

    fn put_scratch(&self, scratch: Scratch) {
        let mut pool = match self.extractors.lock() {
            Ok(pool) => pool,
            Err(poisoned) => poisoned.into_inner(),
        };
        // Keep as many as there were concurrent requests, within reason.
        if pool.len() < 64 {
            pool.push(scratch);
        }
    }

    /// Scores one message with the current model and names up to
    /// `reason_count` reasons.
    pub fn judge(&self, message: &Message, reason_count: usize) -> Judgement {
        self.judge_with(message, reason_count, false)
    }

    /// Like [`Judge::judge`]; with `has_contributions` the judgement also
    /// carries every feature's contribution from the same model snapshot.
    pub fn judge_with(
        &self,
        message: &Message,
        reason_count: usize,
        has_contributions: bool,
    ) -> Judgement {
        let snapshot = self.front.load();
        let mut scratch = self.take_scratch();
        scratch.extractor.extract(message, &mut scratch.features);
        let x = scratch.features.as_slice();
        let p_junk = snapshot.model.predict(x);
        let reasons = if reason_count == 0 {
            Vec::new()
        } else {
            let top = snapshot.model.explain(x, reason_count);
            name_contributions(&mut scratch.extractor, message, &top)
        };
        let contributions = if has_contributions {
            x.iter()
                .map(|&(index, value)| (index, snapshot.model.weight(index) * f64::from(value)))
                .collect()
        } else {
            Vec::new()
        };
        let content_sha256 = content_digest(&mut scratch.extractor, message);
        let model_seq = snapshot.model_seq;
        self.put_scratch(scratch);
        Judgement {
            p_junk,
            reasons,
            model_seq,
            content_sha256,
            contributions,
        }
    }

    /// The feature vector of `message`, for the learner.
    pub fn features_into(&self, message: &Message, out: &mut Features) {
        let mut scratch = self.take_scratch();
        scratch.extractor.extract(message, out);
        self.put_scratch(scratch);
    }
}

/// Attaches readable names to explained slots. Names that share one hashed
/// slot are joined with ` | `; a slot with no name found shows its number.
pub fn name_contributions(
    extractor: &mut Extractor,
    message: &Message,
    top: &[chaffgate_model::Contribution],
) -> Vec<Reason> {
    let wanted: Vec<u32> = top.iter().map(|c| c.index).collect();
    let named = extractor.extract_named_for(message, &wanted);
    top.iter()
        .map(|contribution| {
            let names: Vec<&str> = named
                .iter()
                .filter(|n| n.index == contribution.index)
                .map(|n| n.name.as_str())
                .collect();
            let feature = if names.is_empty() {
                let index = contribution.index;
                format!("slot {index}")
            } else {
                names.join(" | ")
            };
            Reason {
                feature,
                contribution: contribution.contribution,
            }
        })
        .collect()
}

/// SHA-256 over the normalised fields, each introduced by its name and
/// ended by a 0x1E byte, so that moving text between fields changes the
/// digest. `meta` is included as `key=value` pairs in key order.
pub fn content_digest(extractor: &mut Extractor, message: &Message) -> String {
    let mut hasher = Sha256::new();
    for (field, text) in [
        ("subject", &message.subject),
        ("body", &message.body),
        ("sender", &message.sender),
        ("channel", &message.channel),
    ] {
        if let Some(text) = text {
            hasher.update(field.as_bytes());
            hasher.update(b"=");
            hasher.update(extractor.normalize(text).as_bytes());
            hasher.update([0x1e]);
        }
    }
    for (key, value) in &message.meta {
        let value = serde_json::to_string(value).unwrap_or_default();
        hasher.update(b"meta:");
        hasher.update(key.as_bytes());
        hasher.update(b"=");
        hasher.update(value.as_bytes());
        hasher.update([0x1e]);
    }
    lower_hex(&hasher.finalize())
}

/// Lowercase hex of a digest, as the database stores digests.
pub fn lower_hex(bytes: &[u8]) -> String {
    let mut hex = String::with_capacity(bytes.len() * 2);
    for byte in bytes {
        hex.push(char::from_digit(u32::from(byte >> 4), 16).unwrap_or('0'));
        hex.push(char::from_digit(u32::from(byte & 0x0f), 16).unwrap_or('0'));
    }
    hex
}

#[cfg(test)]
mod tests {
    use super::*;
    use chaffgate_model::UpdateRule;

    fn judge() -> Judge {
        let settings = FeatureSettings {
            bits: 16,
            ..FeatureSettings::default()
        };
        let rule = UpdateRule::Ftrl {
            alpha: 0.5,
            beta: 0.01,
            l1: 0.0,
            l2: 0.0,
        };
        let model = Model::new(16, rule).unwrap();
        Judge::new(model, 0, settings, HashKey::from_bytes([7; 16]))
    }

    fn message(body: &str) -> Message {
        Message {
            body: Some(body.to_owned()),
            ..Message::default()
        }
    }

    #[test]
    fn an_empty_model_gives_one_half() {
        // sigma(0) = 1/2 (common practice, no source).
        let judgement = judge().judge(&message("hello"), 5);
        assert_eq!(judgement.p_junk, 0.5);
        assert_eq!(judgement.model_seq, 0);
    }

    #[test]
    fn published_snapshot_is_what_readers_see() {
        let judge = judge();
        let x = {
            let mut features = Features::default();
            judge.features_into(&message("claim your prize"), &mut features);
            features.as_slice().to_vec()
        };
        let mut model = judge.snapshot().model.clone();
        for _ in 0..20 {
            model.learn(&x, true);
        }
        let old = judge.publish(Arc::new(Snapshot {
            model,
            model_seq: 20,
        }));
        assert_eq!(old.model_seq, 0);
        let judgement = judge.judge(&message("claim your prize"), 3);
        assert!(judgement.p_junk > 0.9, "{}", judgement.p_junk);
        assert_eq!(judgement.model_seq, 20);
        assert_eq!(judgement.reasons.len(), 3);
        assert!(judgement.reasons[0].contribution > 0.0);
        assert!(judgement.contributions.is_empty());
        // The contributions add up to the margin: logit(p_junk) (the
        // logistic function's inverse, common practice, no source).
        let full = judge.judge_with(&message("claim your prize"), 3, true);
        assert_eq!(full.contributions.len(), x.len());
        assert!(full.contributions.windows(2).all(|w| w[0].0 < w[1].0));
        let margin: f64 = full.contributions.iter().map(|c| c.1).sum();
        let logit = (full.p_junk / (1.0 - full.p_junk)).ln();
        assert!((margin - logit).abs() < 1e-9, "{margin} vs {logit}");
        assert!(
            full.contributions
                .iter()
                .any(|c| c.1 == full.reasons[0].contribution)
        );
    }

    #[test]
    fn digest_depends_on_field_and_normalised_text() {
        let judge = judge();
        let a = judge.judge(&message("Hello"), 0).content_sha256;
        let b = judge.judge(&message("HELLO"), 0).content_sha256;
        let subject = Message {
            subject: Some("Hello".to_owned()),
            ..Message::default()
        };
        let c = judge.judge(&subject, 0).content_sha256;
        assert_eq!(a.len(), 64);
        assert_eq!(a, b, "case folding is part of normalisation");
        assert_ne!(a, c);
    }
}
