//! The audit writer: the one task that writes decision rows.
//!
//! Request handlers send their decision row over a bounded channel and, in
//! `after_commit` mode, wait on a oneshot for the commit. The writer takes
//! whatever is queued (up to `max_batch_rows`) and commits it in one
//! transaction, so under load one fsync covers many decisions (group
//! commit) while a lone request still commits at once. When every sender
//! is dropped, the writer commits what is left and ends: a queued decision
//! is never dropped at shutdown.

use std::time::Instant;

use chaffgate_store::{NewDecision, Store};
use tokio::sync::{mpsc, oneshot};
use tokio::task::JoinHandle;

/// One decision row to write, and where to report its commit.
pub struct AuditJob {
    pub row: NewDecision,
    pub committed_tx: Option<oneshot::Sender<Result<(), String>>>,
}

/// Figures about one committed batch, for metrics.
#[derive(Debug, Clone, Copy)]
pub struct BatchFigures {
    pub rows: usize,
    pub commit_us: u64,
}

/// Starts the writer; it ends after `jobs_rx` is closed and drained.
/// `on_batch` sees each batch's rows, in the order received, and figures
/// once the commit was tried (it feeds metrics and the `p_junk` drift
/// detector, so it must be quick).
pub fn spawn_writer(
    store: Store,
    max_batch_rows: usize,
    mut jobs_rx: mpsc::Receiver<AuditJob>,
    on_batch: impl Fn(&[NewDecision], BatchFigures) + Send + 'static,
) -> JoinHandle<()> {
    tokio::spawn(async move {
        let max_batch_rows = max_batch_rows.max(1);
        let mut jobs: Vec<AuditJob> = Vec::with_capacity(max_batch_rows);
        let mut rows: Vec<NewDecision> = Vec::with_capacity(max_batch_rows);
        loop {
            jobs.clear();
            if jobs_rx.recv_many(&mut jobs, max_batch_rows).await == 0 {
                break;
            }
            rows.clear();
            let mut replies = Vec::with_capacity(jobs.len());
            for job in jobs.drain(..) {
                rows.push(job.row);
                replies.push(job.committed_tx);
            }
            let started = Instant::now();
            let result = store.insert_decisions(&rows).await;
            let commit_us = u64::try_from(started.elapsed().as_micros()).unwrap_or(u64::MAX);
            on_batch(
                &rows,
                BatchFigures {
                    rows: rows.len(),
                    commit_us,
                },
            );
            let outcome = match &result {
                Ok(()) => Ok(()),
                Err(err) => {
                    tracing::error!(error = %err, rows = rows.len(), "audit batch failed to commit");
                    Err(err.to_string())
                }
            };
            for reply in replies.into_iter().flatten() {
                // The requester may have gone (client hung up); the row is
                // committed either way.
                let _ = reply.send(outcome.clone());
            }
        }
        tracing::debug!("audit writer drained and stopped");
    })
}
