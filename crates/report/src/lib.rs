//! Drift reports: what changed between a baseline window and a current
//! window of the audit log, and whether the model kept up.
//!
//! Owns the report engine behind `chaffgate drift` and
//! `GET /v1/reports/drift`. [`build`] reads the store (the audit log, the
//! feedback log, checkpoints and model events) and returns a
//! [`DriftReport`], which serialises to JSON and renders as terminal tables
//! ([`DriftReport::to_text`]). It covers, per window, over all channels and
//! per channel:
//!
//! 1. the spread of `p_junk` (population stability index over fixed bins)
//!    and the verdict mix over time;
//! 2. quality from moderators' labels: overturned verdicts, ROC area, log
//!    loss, Brier score, calibration;
//! 3. threshold advice for a target false-junk rate;
//! 4. feature drift: which feature names rose or fell in share of sampled
//!    messages, from the store's feature tallies;
//! 5. Page-Hinkley alarms over overturned verdicts and over mean `p_junk`;
//! 6. learning activity: feedback per moderator and label, corrections,
//!    revocations, checkpoints and model events.
//!
//! What must stay true: the report is a function of the database and the
//! [`ReportRequest`]; it never reads the clock (callers pass `at_ms`), and
//! every figure comes from `chaffgate-metrics` rather than being computed
//! again here. Windows are by the time each decision was made.
//!
//! [`time`] reads window lengths (`7d`, `24h`, `90m`, `3600s`) and points in
//! time (RFC 3339 or epoch milliseconds) for both surfaces.

mod build;
mod error;
mod render;
mod report;
mod settings;
pub mod time;

pub use build::{FEATURE_DRIFT_TOP, build};
pub use chaffgate_store::{ContributionRank, FeatureDrift, ShareChange};
pub use error::ReportError;
pub use report::{
    Activity, ActivityWindow, Alarm, CheckpointEntry, Detector, DriftReport, Help, ModelEventEntry,
    ModeratorActivity, OperatingPoint, Overturns, QualityBucket, QualityShift, QualityWindow,
    ScopeReport, ScoreShift, ScoreWindow, SettingsUsed, Shift, ThresholdAdvice, VerdictBucket,
    VerdictMix, Window, WindowName, Windows,
};
pub use settings::{
    DEFAULT_BASELINE, DEFAULT_CURRENT, DetectorSettings, MAX_PSI_BINS, ReportRequest,
    ReportSettings, VerdictThresholds,
};
