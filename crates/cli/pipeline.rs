//! The scoring pipeline: message -> features -> `p_junk`, and learning from a label.
//!
//! Joins the text crate's extractor to the model and owns the reusable
//! feature buffer, so that scoring and learning allocate nothing per message
//! once warm. Also the only place that reads and writes model files, since a
//! model is useless without the hash key and feature settings it was
//! trained with: both travel in the checkpoint header.

use std::path::Path;

use anyhow::{Context, bail};
use chaffgate_model::{CheckpointHeader, Model, UpdateRule, read_checkpoint, write_checkpoint};
use chaffgate_text::{Extractor, FeatureSettings, Features, HashKey, Message};
use serde::Serialize;

pub struct Pipeline {
    extractor: Extractor,
    model: Model,
    key: HashKey,
    features: Features,
    last_seq: u64,
}

/// A feature that pushed `p_junk`, with its readable name and signed
/// contribution to the margin `w . x`.
#[derive(Debug, Clone, Serialize)]
pub struct Reason {
    pub feature: String,
    pub contribution: f64,
}

impl Pipeline {
    /// An empty model: every message scores `p_junk = 0.5` until it learns.
    pub fn new(settings: FeatureSettings, rule: UpdateRule, key: HashKey) -> anyhow::Result<Self> {
        let model = Model::new(settings.bits, rule).context("creating the model")?;
        Ok(Pipeline {
            extractor: Extractor::new(settings, key.clone()),
            model,
            key,
            features: Features::default(),
            last_seq: 0,
        })
    }

    pub fn model(&self) -> &Model {
        &self.model
    }

    pub fn settings(&self) -> &FeatureSettings {
        self.extractor.settings()
    }

    /// `p_junk` of one message under the current weights.
    pub fn score(&mut self, message: &Message) -> f64 {
        self.extractor.extract(message, &mut self.features);
        self.model.predict(self.features.as_slice())
    }

    /// Learns from one labelled message; returns `p_junk` as it was before
    /// the update (what progressive validation records).
    pub fn learn(&mut self, message: &Message, is_junk: bool) -> f64 {
        self.extractor.extract(message, &mut self.features);
        self.model.learn(self.features.as_slice(), is_junk)
    }

    /// The `limit` features that pushed this message's `p_junk` most, by
    /// readable name. Names that share one hashed slot are joined with ` | `.
    pub fn reasons(&mut self, message: &Message, limit: usize) -> Vec<Reason> {
        self.extractor.extract(message, &mut self.features);
        let top = self.model.explain(self.features.as_slice(), limit);
        let named = self.extractor.extract_named(message);
        top.into_iter()
            .map(|contribution| {
                let names: Vec<&str> = named
                    .iter()
                    .filter(|n| n.index == contribution.index)
                    .map(|n| n.name.as_str())
                    .collect();
                let feature = if names.is_empty() {
                    format!("slot {}", contribution.index)
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

    /// Writes the model with its hash key and feature settings.
    pub fn save(&self, path: &Path) -> anyhow::Result<()> {
        let extractor = serde_json::to_string(self.extractor.settings())
            .context("encoding feature settings")?;
        let header = CheckpointHeader {
            key_id: self.key.key_id(),
            hash_key: *self.key.as_bytes(),
            last_seq: self.last_seq,
            extractor,
        };
        write_checkpoint(path, &self.model, &header)
            .with_context(|| format!("writing model {}", path.display()))
    }

    /// Reads a model written by [`Pipeline::save`].
    pub fn open(path: &Path) -> anyhow::Result<Self> {
        let (model, header) =
            read_checkpoint(path).with_context(|| format!("loading model {}", path.display()))?;
        let settings: FeatureSettings = serde_json::from_str(&header.extractor)
            .with_context(|| format!("reading feature settings in model {}", path.display()))?;
        if let Err(problems) = settings.validate() {
            let list: Vec<String> = problems.iter().map(|p| p.to_string()).collect();
            bail!(
                "model {} has invalid feature settings: {}",
                path.display(),
                list.join("; ")
            );
        }
        if settings.bits != model.bits() {
            bail!(
                "model {} is inconsistent: features use {} bits, weights {}",
                path.display(),
                settings.bits,
                model.bits()
            );
        }
        let key = HashKey::from_bytes(header.hash_key);
        if key.key_id() != header.key_id {
            bail!(
                "model {} is inconsistent: its hash key does not match its key id",
                path.display()
            );
        }
        Ok(Pipeline {
            extractor: Extractor::new(settings, key.clone()),
            model,
            key,
            features: Features::default(),
            last_seq: header.last_seq,
        })
    }
}
