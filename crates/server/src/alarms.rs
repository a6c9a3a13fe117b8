//! Live drift alarms: Page-Hinkley change detectors over the daemon's own
//! streams, exported as Prometheus gauges.
//!
//! Two streams are watched:
//!
//! * `p_junk`: the `p_junk` of every decision, fed by the audit writer in
//!   the order it receives them (one lock per batch, off the request
//!   path). A shift either way means the mix of messages, or the model,
//!   changed.
//! * `feedback_error`: `|label - p_junk|` of each decision when a moderator
//!   first labels it (`label` 1 for junk, 0 for fine), fed by the feedback
//!   route. A rise means the decisions are getting worse. Corrections,
//!   repeats and inline messages (which have no decision) are not fed.
//!
//! When a detector fires, its alarm count goes up, the time is kept, and
//! the detector is reset so that it watches for the next shift from the
//! new level. The alarm gauge stays at 1 for `hold` after the last alarm
//! and then returns to 0 on its own; nothing else clears it. The state is
//! in memory only: a restart starts every detector afresh with the gauge
//! at 0.
//!
//! Exported families (label `detector` = `p_junk` or `feedback_error`):
//!
//! | family | type | meaning |
//! | --- | --- | --- |
//! | `chaffgate_drift_alarm` | gauge | 1 within `hold` of the last alarm, else 0 |
//! | `chaffgate_drift_statistic` | gauge | the Page-Hinkley statistic since the last reset, compared with `lambda` |
//! | `chaffgate_drift_samples` | gauge | samples since the last reset |
//! | `chaffgate_drift_mean` | gauge | mean of those samples |
//! | `chaffgate_drift_alarms_total` | counter | alarms fired since start |
//! | `chaffgate_drift_last_alarm_timestamp_seconds` | gauge | Unix time of the last alarm (0: none yet) |

use std::fmt::Write;
use std::sync::Mutex;
use std::time::Duration;

use chaffgate_metrics::{Direction, MetricsError, PageHinkley, PageHinkleyParams};

/// Checked settings of both detectors and the alarm hold time.
#[derive(Debug, Clone, PartialEq)]
pub struct AlarmSettings {
    p_junk: PageHinkley,
    feedback_error: PageHinkley,
    hold: Duration,
}

impl AlarmSettings {
    /// Errors: [`MetricsError::InvalidParameter`] when a detector's `delta`
    /// or `lambda` is out of range.
    pub fn new(
        p_junk: PageHinkleyParams,
        feedback_error: PageHinkleyParams,
        hold: Duration,
    ) -> Result<AlarmSettings, MetricsError> {
        Ok(AlarmSettings {
            p_junk: PageHinkley::new(p_junk)?,
            feedback_error: PageHinkley::new(feedback_error)?,
            hold,
        })
    }

    /// Settings of the `p_junk` detector.
    pub fn p_junk(&self) -> PageHinkleyParams {
        self.p_junk.params()
    }

    /// Settings of the `feedback_error` detector.
    pub fn feedback_error(&self) -> PageHinkleyParams {
        self.feedback_error.params()
    }

    pub fn hold(&self) -> Duration {
        self.hold
    }
}

/// The defaults of `config/chaffgate.toml`, chosen by the synthetic
/// streams in this module's tests (`p_junk`) and in
/// `crates/metrics/tests/page_hinkley_streams.rs` (`feedback_error`).
pub const DEFAULT_P_JUNK: PageHinkleyParams = PageHinkleyParams {
    delta: 0.05,
    lambda: 50.0,
    min_samples: 100,
    direction: Direction::Either,
};

/// See [`DEFAULT_P_JUNK`].
pub const DEFAULT_FEEDBACK_ERROR: PageHinkleyParams = PageHinkleyParams {
    delta: 0.04,
    lambda: 10.0,
    min_samples: 30,
    direction: Direction::Increase,
};

/// Alarm gauge hold time by default: an hour.
pub const DEFAULT_HOLD: Duration = Duration::from_secs(3600);

impl Default for AlarmSettings {
    fn default() -> AlarmSettings {
        AlarmSettings {
            // In range, as `bad_settings_are_refused` checks.
            p_junk: PageHinkley::new(DEFAULT_P_JUNK).expect("default p_junk settings are valid"),
            feedback_error: PageHinkley::new(DEFAULT_FEEDBACK_ERROR)
                .expect("default feedback_error settings are valid"),
            hold: DEFAULT_HOLD,
        }
    }
}

#[derive(Debug)]
struct AlarmState {
    detector: PageHinkley,
    alarms: u64,
    last_alarm_ms: Option<i64>,
}

/// One watched stream.
#[derive(Debug)]
pub struct DriftAlarm {
    name: &'static str,
    hold_ms: i64,
    state: Mutex<AlarmState>,
}

/// What a detector shows at one moment.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AlarmView {
    pub is_raised: bool,
    pub statistic: f64,
    pub samples: u64,
    pub mean: f64,
    pub alarms: u64,
    pub last_alarm_ms: Option<i64>,
}

impl DriftAlarm {
    fn new(name: &'static str, detector: PageHinkley, hold: Duration) -> DriftAlarm {
        DriftAlarm {
            name,
            hold_ms: i64::try_from(hold.as_millis()).unwrap_or(i64::MAX),
            state: Mutex::new(AlarmState {
                detector,
                alarms: 0,
                last_alarm_ms: None,
            }),
        }
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, AlarmState> {
        match self.state.lock() {
            Ok(state) => state,
            Err(poisoned) => poisoned.into_inner(),
        }
    }

    /// Feeds samples in order, at `now_ms`; returns how many alarms fired.
    pub fn observe(&self, samples: impl IntoIterator<Item = f64>, now_ms: i64) -> u64 {
        let mut state = self.lock();
        let mut fired = 0;
        for x in samples {
            if state.detector.update(x) {
                state.detector.reset();
                state.alarms += 1;
                state.last_alarm_ms = Some(now_ms);
                fired += 1;
            }
        }
        drop(state);
        if fired > 0 {
            tracing::warn!(
                detector = self.name,
                "drift alarm: the stream's mean shifted"
            );
        }
        fired
    }

    /// The detector's state at `now_ms`.
    pub fn view(&self, now_ms: i64) -> AlarmView {
        let state = self.lock();
        let is_raised = state
            .last_alarm_ms
            .is_some_and(|at| now_ms < at.saturating_add(self.hold_ms));
        AlarmView {
            is_raised,
            statistic: state.detector.statistic(),
            samples: state.detector.samples(),
            mean: state.detector.mean(),
            alarms: state.alarms,
            last_alarm_ms: state.last_alarm_ms,
        }
    }
}

/// One exported family: name, type, help text and how to read the value.
struct Family {
    name: &'static str,
    kind: &'static str,
    help: &'static str,
    value: fn(&AlarmView) -> f64,
}

/// Both detectors.
#[derive(Debug)]
pub struct DriftAlarms {
    pub p_junk: DriftAlarm,
    pub feedback_error: DriftAlarm,
}

impl DriftAlarms {
    pub fn new(settings: &AlarmSettings) -> DriftAlarms {
        DriftAlarms {
            p_junk: DriftAlarm::new("p_junk", settings.p_junk.clone(), settings.hold),
            feedback_error: DriftAlarm::new(
                "feedback_error",
                settings.feedback_error.clone(),
                settings.hold,
            ),
        }
    }

    /// Writes the families in the module docs, Prometheus text format.
    pub fn render(&self, out: &mut String, now_ms: i64) {
        let views = [
            ("p_junk", self.p_junk.view(now_ms)),
            ("feedback_error", self.feedback_error.view(now_ms)),
        ];
        let families = [
            Family {
                name: "chaffgate_drift_alarm",
                kind: "gauge",
                help: "1 while a drift alarm is held (after a detector fired), else 0.",
                value: |v| if v.is_raised { 1.0 } else { 0.0 },
            },
            Family {
                name: "chaffgate_drift_statistic",
                kind: "gauge",
                help: "Page-Hinkley statistic since the detector's last reset.",
                value: |v| v.statistic,
            },
            Family {
                name: "chaffgate_drift_samples",
                kind: "gauge",
                help: "Samples since the detector's last reset.",
                value: |v| v.samples as f64,
            },
            Family {
                name: "chaffgate_drift_mean",
                kind: "gauge",
                help: "Mean of the samples since the detector's last reset.",
                value: |v| v.mean,
            },
            Family {
                name: "chaffgate_drift_alarms_total",
                kind: "counter",
                help: "Drift alarms fired since start.",
                value: |v| v.alarms as f64,
            },
            Family {
                name: "chaffgate_drift_last_alarm_timestamp_seconds",
                kind: "gauge",
                help: "Unix time of the last drift alarm (0: none since start).",
                value: |v| v.last_alarm_ms.map_or(0.0, |ms| ms as f64 / 1000.0),
            },
        ];
        for Family {
            name: family,
            kind,
            help,
            value,
        } in families
        {
            let _ = writeln!(out, "# HELP {family} {help}\n# TYPE {family} {kind}");
            for (detector, view) in &views {
                let value = value(view);
                let _ = writeln!(out, "{family}{{detector=\"{detector}\"}} {value}");
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn settings(hold_secs: u64) -> AlarmSettings {
        let quick = PageHinkleyParams {
            delta: 0.1,
            lambda: 1.0,
            min_samples: 0,
            direction: Direction::Increase,
        };
        AlarmSettings::new(quick, quick, Duration::from_secs(hold_secs)).unwrap()
    }

    #[test]
    fn an_alarm_resets_the_detector_and_holds_the_gauge() {
        let alarms = DriftAlarms::new(&settings(10));
        // The hand-worked stream of the metrics crate's Page-Hinkley tests
        // (delta 0.1, lambda 1) fires on its fifth sample.
        assert_eq!(alarms.p_junk.observe([0.0, 0.0, 1.0, 1.0], 1_000), 0);
        assert!(!alarms.p_junk.view(1_000).is_raised);
        assert_eq!(alarms.p_junk.observe([1.0], 2_000), 1);
        let view = alarms.p_junk.view(2_000);
        assert!(view.is_raised);
        assert_eq!((view.samples, view.statistic, view.alarms), (0, 0.0, 1));
        assert_eq!(view.last_alarm_ms, Some(2_000));
        // Held for 10 s, then down by itself; the count stays.
        assert!(alarms.p_junk.view(11_999).is_raised);
        let later = alarms.p_junk.view(12_000);
        assert!(!later.is_raised);
        assert_eq!(later.alarms, 1);
        // The other detector is untouched.
        assert_eq!(alarms.feedback_error.view(2_000).alarms, 0);
    }

    #[test]
    fn exposition_names_both_detectors() {
        let alarms = DriftAlarms::new(&settings(10));
        alarms.p_junk.observe([0.0, 0.0, 1.0, 1.0, 1.0], 1_500);
        let mut out = String::new();
        alarms.render(&mut out, 2_000);
        assert!(
            out.contains("chaffgate_drift_alarm{detector=\"p_junk\"} 1\n"),
            "{out}"
        );
        assert!(out.contains("chaffgate_drift_alarm{detector=\"feedback_error\"} 0\n"));
        assert!(out.contains("chaffgate_drift_alarms_total{detector=\"p_junk\"} 1\n"));
        assert!(
            out.contains("chaffgate_drift_last_alarm_timestamp_seconds{detector=\"p_junk\"} 1.5\n")
        );
        assert!(out.contains("# TYPE chaffgate_drift_alarms_total counter\n"));
    }

    #[test]
    fn bad_settings_are_refused() {
        let bad = PageHinkleyParams {
            lambda: 0.0,
            ..DEFAULT_P_JUNK
        };
        assert!(AlarmSettings::new(bad, DEFAULT_FEEDBACK_ERROR, DEFAULT_HOLD).is_err());
        assert_eq!(AlarmSettings::default().p_junk(), DEFAULT_P_JUNK);
    }
}
