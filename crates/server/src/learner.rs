//! The learner: the one task that changes weights, strictly in feedback
//! sequence order.
//!
//! The feedback log in the database is the source of truth. The learner
//! reads the rows after the last one it applied, turns each row's message
//! into features, and applies the update rule to the back copy of the model;
//! then it publishes that copy to the scorers and brings the other copy up
//! to date (see `judge` for the left-right scheme). Since it only ever reads
//! committed rows in `seq` order, the model is a deterministic function of
//! the log: `chaffgate rebuild`, which replays the whole log into a fresh
//! model with the same key and settings, gives bit-identical weights.
//!
//! It wakes when a feedback handler signals a new row, and also on a timer
//! (so rows appended by another process are picked up). It writes a
//! checkpoint after `checkpoint_every_updates` updates or
//! `checkpoint_every` time with updates, and at shutdown, keeping the
//! newest `keep_checkpoints` files. On start it replays the log after the
//! loaded checkpoint before the service reports ready.

use std::collections::HashMap;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, AtomicI64, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use chaffgate_model::Model;
use chaffgate_store::{FeedbackRow, FeedbackSeq, Label, NewCheckpoint, Store};
use chaffgate_text::{Extractor, Features, Message};
use tokio::sync::{mpsc, oneshot};
use tokio::task::JoinHandle;

use crate::judge::{Judge, Snapshot};
use crate::model_file::{load_model_file, save_model_file};
use crate::state::now_ms;

/// Rows read from the log per step.
const ROWS_PER_STEP: u32 = 512;
/// Most feature names remembered for naming top weights.
const NAME_BOOK_CAPACITY: usize = 200_000;

#[derive(Debug, Clone)]
pub struct LearnerSettings {
    /// Folder the checkpoint files go to.
    pub checkpoint_dir: PathBuf,
    /// Write a checkpoint after this many applied rows.
    pub checkpoint_every_updates: u64,
    /// ... or after this long with at least one applied row.
    pub checkpoint_every: Duration,
    /// Checkpoint files kept (older ones are deleted).
    pub keep_checkpoints: usize,
    /// How often the log is polled without a wake-up.
    pub poll_every: Duration,
}

/// What the learner has done, readable by handlers.
#[derive(Default)]
pub struct LearnerStatus {
    applied_seq: AtomicI64,
    is_caught_up: AtomicBool,
    names: Mutex<HashMap<u32, String>>,
}

impl LearnerStatus {
    /// The last feedback row applied to the published model.
    pub fn applied_seq(&self) -> i64 {
        self.applied_seq.load(Ordering::Acquire)
    }

    /// Whether the start-up replay has finished.
    pub fn is_caught_up(&self) -> bool {
        self.is_caught_up.load(Ordering::Acquire)
    }

    /// The readable name of a slot, if a learnt message had a feature
    /// there. Several names in one slot are joined with ` | `.
    pub fn name_of(&self, index: u32) -> Option<String> {
        let names = match self.names.lock() {
            Ok(names) => names,
            Err(poisoned) => poisoned.into_inner(),
        };
        names.get(&index).cloned()
    }

    fn remember_names(&self, named: Vec<chaffgate_text::NamedFeature>) {
        let mut names = match self.names.lock() {
            Ok(names) => names,
            Err(poisoned) => poisoned.into_inner(),
        };
        for feature in named {
            let is_full = names.len() >= NAME_BOOK_CAPACITY;
            match names.get_mut(&feature.index) {
                Some(existing) => {
                    let already = existing.split(" | ").any(|n| n == feature.name);
                    if !already && existing.len() < 200 {
                        existing.push_str(" | ");
                        existing.push_str(&feature.name);
                    }
                }
                None if !is_full => {
                    names.insert(feature.index, feature.name);
                }
                None => {}
            }
        }
    }
}

/// What the learner can be asked to do.
pub enum LearnerCommand {
    /// A feedback row was committed: catch up.
    Wake,
    /// Return to a checkpoint: un-learn (revoke) every feedback row after
    /// it and serve its weights.
    Rollback {
        checkpoint_id: i64,
        done_tx: oneshot::Sender<Result<RollbackReport, RollbackError>>,
    },
}

/// What a rollback did.
#[derive(Debug, Clone, serde::Serialize)]
pub struct RollbackReport {
    /// The checkpoint returned to.
    pub checkpoint_id: i64,
    /// The model now includes the log up to this row.
    pub model_seq: i64,
    /// Feedback rows after it, now revoked (skipped by every replay).
    pub revoked_rows: u64,
    /// The checkpoint written for the rolled-back model.
    pub new_checkpoint: String,
}

#[derive(Debug, thiserror::Error)]
pub enum RollbackError {
    /// No live checkpoint has this id.
    #[error("no checkpoint with id {0}")]
    UnknownCheckpoint(i64),
    /// The checkpoint file is missing, damaged or from another key.
    #[error("checkpoint {id} cannot be used: {problem}")]
    Unusable { id: i64, problem: String },
    /// The database failed.
    #[error(transparent)]
    Store(#[from] chaffgate_store::StoreError),
}

/// One row turned into what the update needs.
pub struct Example {
    x: Vec<(u32, f32)>,
    is_junk: bool,
}

/// Parses a feedback row's message. A row whose message no longer parses
/// (it cannot happen for rows this service wrote) is learnt as an empty
/// message: the same choice `rebuild` makes, so both stay identical.
pub fn row_message(row: &FeedbackRow) -> Message {
    match serde_json::from_str(&row.message_json) {
        Ok(message) => message,
        Err(err) => {
            let seq = row.seq.0;
            tracing::error!(seq, error = %err, "feedback row holds an unreadable message; learning it as empty");
            Message::default()
        }
    }
}

/// Turns feedback rows into examples, in order.
pub fn examples_from_rows(extractor: &mut Extractor, rows: &[FeedbackRow]) -> Vec<Example> {
    let mut features = Features::default();
    rows.iter()
        .map(|row| {
            extractor.extract(&row_message(row), &mut features);
            Example {
                x: features.as_slice().to_vec(),
                is_junk: row.label == Label::Junk,
            }
        })
        .collect()
}

/// Applies examples to a model, in order: the one place feedback becomes
/// weight changes (used by the live learner on both its copies and by
/// `rebuild`).
pub fn learn_examples(model: &mut Model, examples: &[Example]) {
    for example in examples {
        model.learn(&example.x, example.is_junk);
    }
}

pub struct Learner {
    judge: Arc<Judge>,
    store: Store,
    settings: LearnerSettings,
    status: Arc<LearnerStatus>,
    back: Option<Model>,
    extractor: Extractor,
    applied_seq: i64,
    updates_since_checkpoint: u64,
    last_checkpoint: Instant,
}

impl Learner {
    /// `back` must be identical to the judge's current front model, which
    /// includes the log up to `applied_seq`.
    pub fn new(
        judge: Arc<Judge>,
        store: Store,
        settings: LearnerSettings,
        back: Model,
        applied_seq: i64,
    ) -> Learner {
        let extractor = Extractor::new(judge.settings().clone(), judge.key().clone());
        let status = Arc::new(LearnerStatus::default());
        status.applied_seq.store(applied_seq, Ordering::Release);
        Learner {
            judge,
            store,
            settings,
            status,
            back: Some(back),
            extractor,
            applied_seq,
            updates_since_checkpoint: 0,
            last_checkpoint: Instant::now(),
        }
    }

    pub fn status(&self) -> Arc<LearnerStatus> {
        Arc::clone(&self.status)
    }

    /// Runs until `commands_rx` is closed, then catches up, checkpoints and
    /// ends.
    pub fn spawn(mut self, mut commands_rx: mpsc::Receiver<LearnerCommand>) -> JoinHandle<()> {
        tokio::spawn(async move {
            if let Err(err) = self.catch_up().await {
                tracing::error!(error = %err, "replaying the feedback log failed");
            }
            self.status.is_caught_up.store(true, Ordering::Release);
            let applied_seq = self.applied_seq;
            tracing::info!(applied_seq, "learner caught up with the feedback log");
            let mut poll = tokio::time::interval(self.settings.poll_every);
            poll.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
            loop {
                tokio::select! {
                    command = commands_rx.recv() => match command {
                        None => break,
                        Some(LearnerCommand::Wake) => {}
                        Some(LearnerCommand::Rollback { checkpoint_id, done_tx }) => {
                            let result = self.rollback(checkpoint_id).await;
                            let _ = done_tx.send(result);
                            continue;
                        }
                    },
                    _ = poll.tick() => {}
                }
                if let Err(err) = self.catch_up().await {
                    tracing::error!(error = %err, "learning from the feedback log failed; retrying later");
                }
                let is_due = self.updates_since_checkpoint
                    >= self.settings.checkpoint_every_updates
                    || (self.updates_since_checkpoint > 0
                        && self.last_checkpoint.elapsed() >= self.settings.checkpoint_every);
                if is_due {
                    self.checkpoint("periodic").await;
                }
            }
            if let Err(err) = self.catch_up().await {
                tracing::error!(error = %err, "final catch-up failed");
            }
            if self.updates_since_checkpoint > 0 {
                self.checkpoint("shutdown").await;
            }
            tracing::debug!("learner stopped");
        })
    }

    /// Applies every committed row after `applied_seq`.
    async fn catch_up(&mut self) -> Result<(), chaffgate_store::StoreError> {
        loop {
            let rows = self
                .store
                .feedback_after(FeedbackSeq(self.applied_seq), ROWS_PER_STEP)
                .await?;
            let Some(last) = rows.last() else {
                return Ok(());
            };
            let last_seq = last.seq.0;
            self.apply_and_publish(&rows, last_seq).await;
        }
    }

    /// Left-right step: update the back copy, publish it, reclaim the old
    /// front once no scorer holds it, and update that too.
    async fn apply_and_publish(&mut self, rows: &[FeedbackRow], last_seq: i64) {
        let examples = examples_from_rows(&mut self.extractor, rows);
        for row in rows {
            self.status
                .remember_names(self.extractor.extract_named(&row_message(row)));
        }
        let Some(mut back) = self.back.take() else {
            return;
        };
        learn_examples(&mut back, &examples);
        let published = Arc::new(Snapshot {
            model: back,
            model_seq: last_seq,
        });
        let mut old = self.judge.publish(published);
        // Wait for scorers still reading the old front (microseconds).
        let mut model = loop {
            match Arc::try_unwrap(old) {
                Ok(snapshot) => break snapshot.model,
                Err(still_shared) => {
                    old = still_shared;
                    tokio::time::sleep(Duration::from_micros(50)).await;
                }
            }
        };
        learn_examples(&mut model, &examples);
        self.back = Some(model);
        self.applied_seq = last_seq;
        self.status.applied_seq.store(last_seq, Ordering::Release);
        self.updates_since_checkpoint += examples.len() as u64;
    }

    /// Serves the checkpoint's weights and revokes the feedback after it, so
    /// that the model stays what the log (minus revoked rows) gives.
    async fn rollback(&mut self, checkpoint_id: i64) -> Result<RollbackReport, RollbackError> {
        let rows = self.store.list_checkpoints().await?;
        let row = rows
            .into_iter()
            .find(|row| row.id == checkpoint_id)
            .ok_or(RollbackError::UnknownCheckpoint(checkpoint_id))?;
        let path = self.settings.checkpoint_dir.join(&row.file_name);
        let loaded = tokio::task::spawn_blocking(move || load_model_file(&path))
            .await
            .map_err(|err| RollbackError::Unusable {
                id: checkpoint_id,
                problem: err.to_string(),
            })?
            .map_err(|err| RollbackError::Unusable {
                id: checkpoint_id,
                problem: err.to_string(),
            })?;
        if loaded.key.key_id() != self.judge.key().key_id()
            || &loaded.settings != self.judge.settings()
        {
            return Err(RollbackError::Unusable {
                id: checkpoint_id,
                problem: "it was made with another hash key or other feature settings".to_owned(),
            });
        }
        let seq = loaded.last_seq;
        let revoked_rows = self
            .store
            .revoke_feedback_after(FeedbackSeq(seq), now_ms())
            .await?;
        let back = loaded.model.clone();
        let old = self.judge.publish(Arc::new(Snapshot {
            model: loaded.model,
            model_seq: seq,
        }));
        drop(old);
        self.back = Some(back);
        self.applied_seq = seq;
        self.status.applied_seq.store(seq, Ordering::Release);
        self.checkpoint("rollback").await;
        let new_checkpoint = self
            .store
            .list_checkpoints()
            .await?
            .into_iter()
            .next()
            .map(|row| row.file_name)
            .unwrap_or_default();
        let detail = serde_json::json!({
            "checkpoint_id": checkpoint_id,
            "model_seq": seq,
            "revoked_rows": revoked_rows,
        });
        self.store
            .record_model_event("rollback", &detail.to_string(), now_ms())
            .await?;
        tracing::warn!(checkpoint_id, seq, revoked_rows, "model rolled back");
        Ok(RollbackReport {
            checkpoint_id,
            model_seq: seq,
            revoked_rows,
            new_checkpoint,
        })
    }

    /// Writes the back copy (identical to the front) as a checkpoint,
    /// records it, and deletes the oldest beyond `keep_checkpoints`.
    async fn checkpoint(&mut self, reason: &str) {
        let Some(model) = self.back.take() else {
            return;
        };
        let seq = self.applied_seq;
        let created_at_ms = now_ms();
        let file_name = format!("ckpt-{seq:012}-{created_at_ms}.cgm");
        let path = self.settings.checkpoint_dir.join(&file_name);
        let settings = self.judge.settings().clone();
        let key = self.judge.key().clone();
        let examples_seen = i64::try_from(model.examples_seen()).unwrap_or(i64::MAX);
        let (model, written) = match tokio::task::spawn_blocking(move || {
            let written = save_model_file(&path, &model, &settings, &key, seq);
            (model, written)
        })
        .await
        {
            Ok(pair) => pair,
            Err(err) => {
                // The model went with the panicked task; nothing more can
                // be learnt safely.
                tracing::error!(error = %err, "checkpoint writer panicked");
                return;
            }
        };
        self.back = Some(model);
        if let Err(err) = written {
            tracing::error!(error = %err, "writing a checkpoint failed; will retry");
            return;
        }
        self.updates_since_checkpoint = 0;
        self.last_checkpoint = Instant::now();
        let row = NewCheckpoint {
            created_at_ms,
            file_name: file_name.clone(),
            last_seq: FeedbackSeq(seq),
            examples_seen,
            reason: reason.to_owned(),
        };
        if let Err(err) = self.store.record_checkpoint(&row).await {
            tracing::error!(error = %err, "recording a checkpoint failed");
            return;
        }
        tracing::info!(file_name, seq, reason, "checkpoint written");
        self.prune_checkpoints().await;
    }

    async fn prune_checkpoints(&self) {
        let rows = match self.store.list_checkpoints().await {
            Ok(rows) => rows,
            Err(err) => {
                tracing::warn!(error = %err, "listing checkpoints to prune failed");
                return;
            }
        };
        for row in rows.iter().skip(self.settings.keep_checkpoints.max(1)) {
            let path = self.settings.checkpoint_dir.join(&row.file_name);
            match std::fs::remove_file(&path) {
                Ok(()) => {}
                Err(err) if err.kind() == std::io::ErrorKind::NotFound => {}
                Err(err) => {
                    tracing::warn!(path = %path.display(), error = %err, "deleting an old checkpoint failed");
                    continue;
                }
            }
            if let Err(err) = self.store.mark_checkpoint_deleted(row.id, now_ms()).await {
                tracing::warn!(error = %err, "marking a checkpoint deleted failed");
            }
        }
    }
}
