//! The daemon's settings, as typed values checked by the binary's config
//! loader. Nothing here reads files or the environment.

use std::collections::BTreeMap;
use std::net::SocketAddr;
use std::time::Duration;

use chaffgate_mail::MailLimits;
use chaffgate_store::Verdict;

use crate::alarms::AlarmSettings;
use crate::tally::TallySettings;

/// Everything the HTTP layer and its background tasks need to know.
#[derive(Debug, Clone)]
pub struct ServerSettings {
    /// Where to listen (the binary binds it; kept for the start-up log).
    pub listen: SocketAddr,
    /// Largest request body accepted; larger ones answer 413.
    pub max_body_bytes: usize,
    /// Most messages in one `POST /v1/score/batch`.
    pub max_batch: usize,
    /// Largest total text (subject, body, sender, meta) of one message.
    pub max_message_bytes: usize,
    /// How many reasons each decision carries.
    pub reasons: usize,
    /// The audit log's settings.
    pub audit: AuditSettings,
    /// Verdict thresholds per channel; `default` always present.
    pub channels: Channels,
    /// Feature tallies for drift reports.
    pub tally: TallySettings,
    /// Live drift alarms.
    pub alarms: AlarmSettings,
    /// What drift reports use unless a request says otherwise.
    pub reports: crate::reports::ReportDefaults,
    /// Caps on reading the raw mail of a score request.
    pub mail: MailLimits,
}

/// When the answer to a score request is sent.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AckMode {
    /// After the decision row is committed: an acknowledged decision is
    /// never lost.
    AfterCommit,
    /// As soon as the row is queued for the writer: faster, but a crash can
    /// lose the last queued rows.
    AfterQueue,
}

#[derive(Debug, Clone)]
pub struct AuditSettings {
    /// Store the message text in the decision row (otherwise only its
    /// SHA-256 digest).
    pub keep_text: bool,
    pub ack: AckMode,
    /// Most decision rows committed in one transaction.
    pub max_batch_rows: usize,
    /// How long the input of a decision is kept so that feedback on it can
    /// recompute its features; feedback after this answers 410.
    pub feedback_window: Duration,
    /// Whether score requests may say when their message arrived
    /// (`received_at_ms`); that time then becomes the decision's time.
    pub accept_client_time: bool,
}

/// `p_junk` thresholds for one channel.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Thresholds {
    /// At or above: `junk`.
    pub junk: f64,
    /// At or above (and below `junk`): `review`.
    pub review: f64,
}

impl Thresholds {
    pub fn verdict(&self, p_junk: f64) -> Verdict {
        if p_junk >= self.junk {
            Verdict::Junk
        } else if p_junk >= self.review {
            Verdict::Review
        } else {
            Verdict::Fine
        }
    }
}

/// The name of the channel whose thresholds apply when a message names no
/// channel or one without thresholds of its own.
pub const DEFAULT_CHANNEL: &str = "default";

/// Thresholds by channel name.
#[derive(Debug, Clone)]
pub struct Channels {
    by_name: BTreeMap<String, Thresholds>,
    fallback: Thresholds,
}

impl Channels {
    /// `default` is the fallback for unnamed and unknown channels.
    pub fn new(by_name: BTreeMap<String, Thresholds>, default: Thresholds) -> Channels {
        Channels {
            by_name,
            fallback: default,
        }
    }

    /// The channel name a decision is recorded under and its thresholds.
    pub fn resolve<'a>(&'a self, channel: Option<&'a str>) -> (&'a str, Thresholds) {
        match channel {
            Some(name) => match self.by_name.get(name) {
                Some(thresholds) => (name, *thresholds),
                None => (name, self.fallback),
            },
            None => (DEFAULT_CHANNEL, self.fallback),
        }
    }
}

impl ServerSettings {
    /// Settings for tests and a fresh machine: loopback, a review band.
    pub fn for_tests() -> ServerSettings {
        ServerSettings {
            listen: SocketAddr::from(([127, 0, 0, 1], 0)),
            max_body_bytes: 1 << 20,
            max_batch: 100,
            max_message_bytes: 256 * 1024,
            reasons: 8,
            audit: AuditSettings {
                keep_text: false,
                ack: AckMode::AfterCommit,
                max_batch_rows: 512,
                feedback_window: Duration::from_secs(30 * 24 * 3600),
                accept_client_time: false,
            },
            channels: Channels::new(
                BTreeMap::new(),
                Thresholds {
                    junk: 0.9,
                    review: 0.4,
                },
            ),
            tally: TallySettings::default(),
            alarms: AlarmSettings::default(),
            reports: crate::reports::ReportDefaults::default(),
            mail: MailLimits::default(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unknown_channels_use_default_thresholds_but_keep_their_name() {
        let mut named = BTreeMap::new();
        named.insert(
            "tickets".to_owned(),
            Thresholds {
                junk: 0.99,
                review: 0.5,
            },
        );
        let channels = Channels::new(
            named,
            Thresholds {
                junk: 0.9,
                review: 0.4,
            },
        );
        assert_eq!(channels.resolve(None).0, "default");
        assert_eq!(channels.resolve(Some("tickets")).1.junk, 0.99);
        let (name, thresholds) = channels.resolve(Some("comments"));
        assert_eq!((name, thresholds.junk), ("comments", 0.9));
        assert_eq!(thresholds.verdict(0.95), Verdict::Junk);
        assert_eq!(thresholds.verdict(0.5), Verdict::Review);
        assert_eq!(thresholds.verdict(0.1), Verdict::Fine);
    }
}
