//! Counters exported at `GET /metrics` in the Prometheus text exposition
//! format (version 0.0.4).

use std::fmt::Write;
use std::sync::atomic::{AtomicU64, Ordering};

use chaffgate_store::{Label, Verdict};

use crate::audit::BatchFigures;

#[derive(Default)]
pub struct Metrics {
    verdict_junk: AtomicU64,
    verdict_review: AtomicU64,
    verdict_fine: AtomicU64,
    audit_batches: AtomicU64,
    audit_rows: AtomicU64,
    audit_commit_us: AtomicU64,
    feedback_junk: AtomicU64,
    feedback_fine: AtomicU64,
}

impl Metrics {
    pub fn count_verdict(&self, verdict: Verdict) {
        let counter = match verdict {
            Verdict::Junk => &self.verdict_junk,
            Verdict::Review => &self.verdict_review,
            Verdict::Fine => &self.verdict_fine,
        };
        counter.fetch_add(1, Ordering::Relaxed);
    }

    pub fn count_feedback(&self, label: Label) {
        let counter = match label {
            Label::Junk => &self.feedback_junk,
            Label::Fine => &self.feedback_fine,
        };
        counter.fetch_add(1, Ordering::Relaxed);
    }

    pub fn count_audit_batch(&self, figures: BatchFigures) {
        self.audit_batches.fetch_add(1, Ordering::Relaxed);
        self.audit_rows
            .fetch_add(figures.rows as u64, Ordering::Relaxed);
        self.audit_commit_us
            .fetch_add(figures.commit_us, Ordering::Relaxed);
    }

    /// The exposition text.
    pub fn render(&self) -> String {
        let mut out = String::new();
        let junk = self.verdict_junk.load(Ordering::Relaxed);
        let review = self.verdict_review.load(Ordering::Relaxed);
        let fine = self.verdict_fine.load(Ordering::Relaxed);
        let batches = self.audit_batches.load(Ordering::Relaxed);
        let rows = self.audit_rows.load(Ordering::Relaxed);
        let commit_seconds = self.audit_commit_us.load(Ordering::Relaxed) as f64 / 1e6;
        let feedback_junk = self.feedback_junk.load(Ordering::Relaxed);
        let feedback_fine = self.feedback_fine.load(Ordering::Relaxed);
        let _ = writeln!(
            out,
            "# HELP chaffgate_decisions_total Decisions made, by verdict.\n\
             # TYPE chaffgate_decisions_total counter\n\
             chaffgate_decisions_total{{verdict=\"junk\"}} {junk}\n\
             chaffgate_decisions_total{{verdict=\"review\"}} {review}\n\
             chaffgate_decisions_total{{verdict=\"fine\"}} {fine}\n\
             # HELP chaffgate_audit_batches_total Audit log transactions committed.\n\
             # TYPE chaffgate_audit_batches_total counter\n\
             chaffgate_audit_batches_total {batches}\n\
             # HELP chaffgate_audit_rows_total Decision rows committed to the audit log.\n\
             # TYPE chaffgate_audit_rows_total counter\n\
             chaffgate_audit_rows_total {rows}\n\
             # HELP chaffgate_audit_commit_seconds_total Time spent committing audit batches.\n\
             # TYPE chaffgate_audit_commit_seconds_total counter\n\
             chaffgate_audit_commit_seconds_total {commit_seconds}\n\
             # HELP chaffgate_feedback_total Feedback rows recorded, by label.\n\
             # TYPE chaffgate_feedback_total counter\n\
             chaffgate_feedback_total{{label=\"junk\"}} {feedback_junk}\n\
             chaffgate_feedback_total{{label=\"fine\"}} {feedback_fine}"
        );
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exposition_lists_counters_with_help_and_type() {
        let metrics = Metrics::default();
        metrics.count_verdict(Verdict::Junk);
        metrics.count_verdict(Verdict::Junk);
        metrics.count_audit_batch(BatchFigures {
            rows: 3,
            commit_us: 1500,
        });
        let text = metrics.render();
        assert!(text.contains("chaffgate_decisions_total{verdict=\"junk\"} 2\n"));
        assert!(text.contains("chaffgate_audit_rows_total 3\n"));
        assert!(text.contains("chaffgate_audit_commit_seconds_total 0.0015"));
        // Every sample line follows a TYPE line for its metric family.
        for line in text.lines().filter(|l| !l.starts_with('#')) {
            let name = line.split(['{', ' ']).next().unwrap();
            assert!(text.contains(&format!("# TYPE {name} ")), "{line}");
        }
    }
}
