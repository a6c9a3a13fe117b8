//! Counters and histograms exported at `GET /metrics` in the Prometheus
//! text exposition format (version 0.0.4).
//!
//! Request counts and latencies are kept per route (the route pattern, not
//! the raw path, so ids do not multiply series) and status code. Latency,
//! audit commit time and audit batch size are histograms with fixed
//! buckets; learner figures are gauges read when the page is rendered.

use std::collections::BTreeMap;
use std::fmt::Write;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, RwLock};
use std::time::Duration;

use chaffgate_store::{Label, Verdict};

use crate::audit::BatchFigures;

/// Upper bounds (seconds) of the request and commit latency buckets.
const LATENCY_BUCKETS: [f64; 12] = [
    0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5,
];
/// Upper bounds of the audit batch size buckets (rows).
const BATCH_BUCKETS: [f64; 9] = [1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0, 128.0, 512.0];

/// A cumulative histogram with fixed bucket bounds.
#[derive(Debug, Clone)]
struct Histogram {
    bounds: &'static [f64],
    /// Observations at or below each bound (not yet cumulative).
    counts: Vec<u64>,
    count: u64,
    sum: f64,
}

impl Histogram {
    fn new(bounds: &'static [f64]) -> Histogram {
        Histogram {
            bounds,
            counts: vec![0; bounds.len()],
            count: 0,
            sum: 0.0,
        }
    }

    fn observe(&mut self, value: f64) {
        if let Some(at) = self.bounds.iter().position(|bound| value <= *bound) {
            self.counts[at] += 1;
        }
        self.count += 1;
        self.sum += value;
    }

    /// Writes the `_bucket`, `_sum` and `_count` lines; `labels` is either
    /// empty or ends with a comma.
    fn render(&self, out: &mut String, name: &str, labels: &str) {
        let mut cumulative = 0;
        for (bound, count) in self.bounds.iter().zip(&self.counts) {
            cumulative += count;
            let _ = writeln!(out, "{name}_bucket{{{labels}le=\"{bound}\"}} {cumulative}");
        }
        let count = self.count;
        let sum = self.sum;
        let _ = writeln!(out, "{name}_bucket{{{labels}le=\"+Inf\"}} {count}");
        let bare = labels.trim_end_matches(',');
        let braces = if bare.is_empty() {
            String::new()
        } else {
            format!("{{{bare}}}")
        };
        let _ = writeln!(out, "{name}_sum{braces} {sum}");
        let _ = writeln!(out, "{name}_count{braces} {count}");
    }
}

/// A request latency histogram updated with atomics only, so that the
/// request path never waits on a lock once its series exists.
struct AtomicLatency {
    counts: [AtomicU64; LATENCY_BUCKETS.len()],
    count: AtomicU64,
    sum_us: AtomicU64,
}

impl AtomicLatency {
    fn new() -> AtomicLatency {
        AtomicLatency {
            counts: std::array::from_fn(|_| AtomicU64::new(0)),
            count: AtomicU64::new(0),
            sum_us: AtomicU64::new(0),
        }
    }

    fn observe(&self, elapsed: Duration) {
        let seconds = elapsed.as_secs_f64();
        if let Some(at) = LATENCY_BUCKETS.iter().position(|bound| seconds <= *bound) {
            self.counts[at].fetch_add(1, Ordering::Relaxed);
        }
        self.count.fetch_add(1, Ordering::Relaxed);
        let micros = u64::try_from(elapsed.as_micros()).unwrap_or(u64::MAX);
        self.sum_us.fetch_add(micros, Ordering::Relaxed);
    }

    fn snapshot(&self) -> Histogram {
        Histogram {
            bounds: &LATENCY_BUCKETS,
            counts: self
                .counts
                .iter()
                .map(|c| c.load(Ordering::Relaxed))
                .collect(),
            count: self.count.load(Ordering::Relaxed),
            sum: self.sum_us.load(Ordering::Relaxed) as f64 / 1e6,
        }
    }
}

/// Learner figures read at render time.
#[derive(Debug, Clone, Copy, Default)]
pub struct LearnerGauges {
    pub model_seq: i64,
    pub committed_seq: i64,
    pub lag_ms: i64,
}

pub struct Metrics {
    verdict_junk: AtomicU64,
    verdict_review: AtomicU64,
    verdict_fine: AtomicU64,
    feedback_junk: AtomicU64,
    feedback_fine: AtomicU64,
    /// (route, status) -> latency histogram.
    requests: RwLock<BTreeMap<(String, u16), Arc<AtomicLatency>>>,
    audit_commit: Mutex<Histogram>,
    audit_batch_rows: Mutex<Histogram>,
}

impl Default for Metrics {
    fn default() -> Metrics {
        Metrics {
            verdict_junk: AtomicU64::new(0),
            verdict_review: AtomicU64::new(0),
            verdict_fine: AtomicU64::new(0),
            feedback_junk: AtomicU64::new(0),
            feedback_fine: AtomicU64::new(0),
            requests: RwLock::new(BTreeMap::new()),
            audit_commit: Mutex::new(Histogram::new(&LATENCY_BUCKETS)),
            audit_batch_rows: Mutex::new(Histogram::new(&BATCH_BUCKETS)),
        }
    }
}

fn lock<T>(mutex: &Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    match mutex.lock() {
        Ok(guard) => guard,
        Err(poisoned) => poisoned.into_inner(),
    }
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

    pub fn observe_request(&self, route: &str, status: u16, elapsed: Duration) {
        let series = {
            let requests = match self.requests.read() {
                Ok(requests) => requests,
                Err(poisoned) => poisoned.into_inner(),
            };
            requests.get(&(route.to_owned(), status)).cloned()
        };
        let series = match series {
            Some(series) => series,
            None => {
                let mut requests = match self.requests.write() {
                    Ok(requests) => requests,
                    Err(poisoned) => poisoned.into_inner(),
                };
                Arc::clone(
                    requests
                        .entry((route.to_owned(), status))
                        .or_insert_with(|| Arc::new(AtomicLatency::new())),
                )
            }
        };
        series.observe(elapsed);
    }

    pub fn count_audit_batch(&self, figures: BatchFigures) {
        lock(&self.audit_commit).observe(figures.commit_us as f64 / 1e6);
        lock(&self.audit_batch_rows).observe(figures.rows as f64);
    }

    /// The exposition text.
    pub fn render(&self, learner: LearnerGauges) -> String {
        let mut out = String::new();
        let junk = self.verdict_junk.load(Ordering::Relaxed);
        let review = self.verdict_review.load(Ordering::Relaxed);
        let fine = self.verdict_fine.load(Ordering::Relaxed);
        let feedback_junk = self.feedback_junk.load(Ordering::Relaxed);
        let feedback_fine = self.feedback_fine.load(Ordering::Relaxed);
        let _ = writeln!(
            out,
            "# HELP chaffgate_decisions_total Decisions made, by verdict.\n\
             # TYPE chaffgate_decisions_total counter\n\
             chaffgate_decisions_total{{verdict=\"junk\"}} {junk}\n\
             chaffgate_decisions_total{{verdict=\"review\"}} {review}\n\
             chaffgate_decisions_total{{verdict=\"fine\"}} {fine}\n\
             # HELP chaffgate_feedback_total Feedback rows recorded, by label.\n\
             # TYPE chaffgate_feedback_total counter\n\
             chaffgate_feedback_total{{label=\"junk\"}} {feedback_junk}\n\
             chaffgate_feedback_total{{label=\"fine\"}} {feedback_fine}"
        );
        let LearnerGauges {
            model_seq,
            committed_seq,
            lag_ms,
        } = learner;
        let lag_rows = (committed_seq - model_seq).max(0);
        let lag_seconds = lag_ms as f64 / 1000.0;
        let _ = writeln!(
            out,
            "# HELP chaffgate_model_seq Last feedback row the scoring model includes.\n\
             # TYPE chaffgate_model_seq gauge\n\
             chaffgate_model_seq {model_seq}\n\
             # HELP chaffgate_feedback_committed_seq Last feedback row committed to the log.\n\
             # TYPE chaffgate_feedback_committed_seq gauge\n\
             chaffgate_feedback_committed_seq {committed_seq}\n\
             # HELP chaffgate_learner_lag_rows Committed feedback rows not yet learnt.\n\
             # TYPE chaffgate_learner_lag_rows gauge\n\
             chaffgate_learner_lag_rows {lag_rows}\n\
             # HELP chaffgate_learner_lag_seconds How long the oldest unlearnt row has waited.\n\
             # TYPE chaffgate_learner_lag_seconds gauge\n\
             chaffgate_learner_lag_seconds {lag_seconds}"
        );
        let _ = writeln!(
            out,
            "# HELP chaffgate_http_request_duration_seconds Time to answer, by route and status.\n\
             # TYPE chaffgate_http_request_duration_seconds histogram"
        );
        let series: Vec<((String, u16), Arc<AtomicLatency>)> = match self.requests.read() {
            Ok(requests) => requests
                .iter()
                .map(|(k, v)| (k.clone(), Arc::clone(v)))
                .collect(),
            Err(poisoned) => poisoned
                .into_inner()
                .iter()
                .map(|(k, v)| (k.clone(), Arc::clone(v)))
                .collect(),
        };
        for ((route, status), latency) in series {
            let labels = format!("route=\"{route}\",status=\"{status}\",");
            latency
                .snapshot()
                .render(&mut out, "chaffgate_http_request_duration_seconds", &labels);
        }
        let _ = writeln!(
            out,
            "# HELP chaffgate_audit_commit_seconds Time to commit one audit batch.\n\
             # TYPE chaffgate_audit_commit_seconds histogram"
        );
        lock(&self.audit_commit).render(&mut out, "chaffgate_audit_commit_seconds", "");
        let _ = writeln!(
            out,
            "# HELP chaffgate_audit_batch_rows Decision rows per audit commit (group commit).\n\
             # TYPE chaffgate_audit_batch_rows histogram"
        );
        lock(&self.audit_batch_rows).render(&mut out, "chaffgate_audit_batch_rows", "");
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exposition_has_counters_gauges_and_cumulative_histograms() {
        let metrics = Metrics::default();
        metrics.count_verdict(Verdict::Junk);
        metrics.count_verdict(Verdict::Junk);
        metrics.count_audit_batch(BatchFigures {
            rows: 3,
            commit_us: 1500,
        });
        metrics.observe_request("/v1/score", 200, Duration::from_micros(700));
        metrics.observe_request("/v1/score", 200, Duration::from_millis(20));
        let text = metrics.render(LearnerGauges {
            model_seq: 5,
            committed_seq: 7,
            lag_ms: 250,
        });
        assert!(text.contains("chaffgate_decisions_total{verdict=\"junk\"} 2\n"));
        assert!(text.contains("chaffgate_learner_lag_rows 2\n"));
        assert!(text.contains("chaffgate_learner_lag_seconds 0.25\n"));
        // Buckets are cumulative and end with +Inf = count (Prometheus
        // exposition format, histogram rules).
        let route = "route=\"/v1/score\",status=\"200\"";
        assert!(text.contains(&format!("_bucket{{{route},le=\"0.0005\"}} 0\n")));
        assert!(text.contains(&format!("_bucket{{{route},le=\"0.001\"}} 1\n")));
        assert!(text.contains(&format!("_bucket{{{route},le=\"0.025\"}} 2\n")));
        assert!(text.contains(&format!("_bucket{{{route},le=\"+Inf\"}} 2\n")));
        assert!(text.contains(&format!("_count{{{route}}} 2\n")));
        assert!(text.contains("chaffgate_audit_batch_rows_bucket{le=\"4\"} 1\n"));
        assert!(text.contains("chaffgate_audit_commit_seconds_count 1\n"));
        // Every sample belongs to a family announced by a TYPE line.
        for line in text.lines().filter(|l| !l.starts_with('#')) {
            let name = line.split(['{', ' ']).next().unwrap();
            let family = name
                .trim_end_matches("_bucket")
                .trim_end_matches("_sum")
                .trim_end_matches("_count");
            assert!(
                text.contains(&format!("# TYPE {name} "))
                    || text.contains(&format!("# TYPE {family} ")),
                "{line}"
            );
        }
    }
}
