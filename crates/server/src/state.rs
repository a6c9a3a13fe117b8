//! `AppState`: what every handler can reach. Cheap to clone (one `Arc`).

use std::sync::Arc;
use std::time::{SystemTime, UNIX_EPOCH};

use chaffgate_store::Store;
use tokio::sync::mpsc;

use crate::alarms::DriftAlarms;
use crate::audit::AuditJob;
use crate::auth::TokenBook;
use crate::judge::Judge;
use crate::learner::{LearnerCommand, LearnerStatus};
use crate::metrics::Metrics;
use crate::settings::ServerSettings;
use crate::tally::TallyFeed;

#[derive(Clone)]
pub struct AppState {
    inner: Arc<Inner>,
}

struct Inner {
    settings: ServerSettings,
    judge: Arc<Judge>,
    store: Store,
    audit_tx: mpsc::Sender<AuditJob>,
    metrics: Arc<Metrics>,
    learner: Arc<LearnerStatus>,
    learner_tx: mpsc::Sender<LearnerCommand>,
    tokens: Arc<TokenBook>,
    tally: TallyFeed,
    alarms: Arc<DriftAlarms>,
}

/// Everything an [`AppState`] holds, gathered by `start`.
pub struct StateParts {
    pub settings: ServerSettings,
    pub judge: Arc<Judge>,
    pub store: Store,
    pub audit_tx: mpsc::Sender<AuditJob>,
    pub metrics: Arc<Metrics>,
    pub learner: Arc<LearnerStatus>,
    pub learner_tx: mpsc::Sender<LearnerCommand>,
    pub tokens: Arc<TokenBook>,
    pub tally: TallyFeed,
    pub alarms: Arc<DriftAlarms>,
}

impl AppState {
    pub fn new(parts: StateParts) -> AppState {
        let StateParts {
            settings,
            judge,
            store,
            audit_tx,
            metrics,
            learner,
            learner_tx,
            tokens,
            tally,
            alarms,
        } = parts;
        AppState {
            inner: Arc::new(Inner {
                settings,
                judge,
                store,
                audit_tx,
                metrics,
                learner,
                learner_tx,
                tokens,
                tally,
                alarms,
            }),
        }
    }

    pub fn settings(&self) -> &ServerSettings {
        &self.inner.settings
    }

    pub fn judge(&self) -> &Judge {
        &self.inner.judge
    }

    pub fn store(&self) -> &Store {
        &self.inner.store
    }

    pub fn audit_tx(&self) -> &mpsc::Sender<AuditJob> {
        &self.inner.audit_tx
    }

    pub fn metrics(&self) -> &Metrics {
        &self.inner.metrics
    }

    /// Ready once the learner has replayed the feedback log.
    pub fn is_ready(&self) -> bool {
        self.inner.learner.is_caught_up()
    }

    pub fn tokens(&self) -> &TokenBook {
        &self.inner.tokens
    }

    pub fn learner(&self) -> &LearnerStatus {
        &self.inner.learner
    }

    /// The request side of feature tallies.
    pub fn tally(&self) -> &TallyFeed {
        &self.inner.tally
    }

    /// The live drift detectors.
    pub fn alarms(&self) -> &DriftAlarms {
        &self.inner.alarms
    }

    /// Tells the learner a feedback row was committed. A wake-up already
    /// pending covers this one too.
    pub fn wake_learner(&self) {
        let _ = self.inner.learner_tx.try_send(LearnerCommand::Wake);
    }

    /// The learner's command channel (for model operations).
    pub fn learner_tx(&self) -> &mpsc::Sender<LearnerCommand> {
        &self.inner.learner_tx
    }

    /// A new time-ordered decision id (a ULID).
    pub fn next_decision_id(&self) -> String {
        ulid::Ulid::new().to_string()
    }
}

/// Milliseconds since the Unix epoch (0 if the clock is before it).
pub fn now_ms() -> i64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map(|d| i64::try_from(d.as_millis()).unwrap_or(i64::MAX))
        .unwrap_or(0)
}
