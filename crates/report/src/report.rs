//! The drift report: what changed between a baseline window and a current
//! window, as one serialisable value.
//!
//! Field names are part of the JSON interface of `chaffgate drift --json`
//! and `GET /v1/reports/drift`: they only ever gain new fields, never
//! change. Times are given twice, as `*_ms` (milliseconds since the Unix
//! epoch) and as RFC 3339 text in UTC. A figure that cannot exist (a rate
//! over nothing, an ROC area without both labels) is `null`, never NaN.
//! The report carries its own reading aid in [`Help`].

use chaffgate_metrics::{Calibration, PsiBand, PsiBin};
use chaffgate_store::FeatureDrift;
use serde::Serialize;

use crate::settings::{DetectorSettings, VerdictThresholds};

/// Everything a drift report says. Built by [`crate::build`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DriftReport {
    /// What each part of the report means, and where its cut-offs come from.
    pub help: Help,
    /// End of the current window (excluded), ms.
    pub at_ms: i64,
    /// The same, RFC 3339.
    pub at: String,
    /// The channel the report is limited to; `null` for all channels.
    pub channel: Option<String>,
    /// The two windows.
    pub windows: Windows,
    /// The settings the figures were computed with.
    pub settings: SettingsUsed,
    /// Figures over all the report's decisions (only the chosen channel's,
    /// when `channel` is set).
    pub overall: ScopeReport,
    /// The same figures for each channel seen in either window, by name;
    /// empty when the report is limited to one channel.
    pub channels: Vec<ScopeReport>,
    /// Change alarms over both windows, in time order.
    pub alarms: Vec<Alarm>,
    /// Moderators' feedback and the model's history in each window.
    pub activity: Activity,
    /// Drift of single features between the windows, from the feature
    /// tallies of the report's channel (or of all channels): the
    /// [`crate::FEATURE_DRIFT_TOP`] names whose share of sampled messages
    /// rose and fell most, and the largest contributions in the current
    /// window. `null` when neither window has a tally.
    pub features: Option<FeatureDrift>,
}

/// Which of the two windows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum WindowName {
    /// The earlier window, the reference.
    Baseline,
    /// The later window, ending at the report's `at`.
    Current,
}

impl WindowName {
    /// The name as in the JSON form.
    pub fn as_str(self) -> &'static str {
        match self {
            WindowName::Baseline => "baseline",
            WindowName::Current => "current",
        }
    }
}

/// The two windows of the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Windows {
    /// The reference window, just before the current one.
    pub baseline: Window,
    /// The window ending at `at`.
    pub current: Window,
}

/// One window: `[start, end)` by the time decisions were made.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Window {
    /// Start (included), ms.
    pub start_ms: i64,
    /// Start, RFC 3339.
    pub start: String,
    /// End (excluded), ms.
    pub end_ms: i64,
    /// End, RFC 3339.
    pub end: String,
    /// Length as asked, e.g. `7d`.
    pub length: String,
    /// Width of the window's time buckets, whole UTC hours (`1h`) for
    /// windows up to two days, else UTC days (`1d`); the first and last
    /// bucket are cut to the window.
    pub bucket: String,
    /// The bucket width in ms.
    pub bucket_ms: i64,
}

/// The settings used, echoed so that a report can be read on its own.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SettingsUsed {
    /// Edges of the `p_junk` bins of the stability index, lowest first.
    pub psi_bin_edges: Vec<f64>,
    /// Target false-junk rate of the threshold advice.
    pub false_junk_target: f64,
    /// Detector over overturned verdicts.
    pub error_detector: DetectorSettings,
    /// Detector over mean `p_junk`.
    pub p_junk_detector: DetectorSettings,
    /// Decisions per sample of the `p_junk` detector (at least).
    pub p_junk_block: u32,
}

/// The report's figures for one set of decisions: all of them, or one
/// channel's.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ScopeReport {
    /// The channel; `null` for all the report's decisions.
    pub channel: Option<String>,
    /// The thresholds this scope's verdicts are compared with: the
    /// channel's own, else the default channel's.
    pub thresholds: VerdictThresholds,
    /// How the spread of `p_junk` and the verdict mix moved.
    pub scores: ScoreShift,
    /// How well verdicts held up against moderators' labels.
    pub quality: QualityShift,
    /// The junk threshold the current window's labels support.
    pub threshold_advice: ThresholdAdvice,
}

/// Score distribution of both windows and the shift between them.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ScoreShift {
    /// Population stability index of the current window's `p_junk` against
    /// the baseline's; `null` when either window has no decision.
    pub psi: Option<f64>,
    /// How to read `psi`: `stable` below 0.1, `moderate` to 0.25, `large`
    /// from 0.25.
    pub psi_band: Option<PsiBand>,
    /// Each bin's counts, shares and part of `psi`; empty with `psi`.
    pub psi_bins: Vec<PsiBin>,
    /// The baseline window.
    pub baseline: ScoreWindow,
    /// The current window.
    pub current: ScoreWindow,
}

/// Decisions of one window, by score and verdict.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ScoreWindow {
    /// Decisions made in the window.
    pub decisions: u64,
    /// Mean `p_junk`; `null` without decisions.
    pub mean_p_junk: Option<f64>,
    /// Decisions per `p_junk` bin (the bins of `settings.psi_bin_edges`).
    pub bin_counts: Vec<u64>,
    /// Verdicts given.
    pub verdicts: VerdictMix,
    /// The oldest and newest model (by the last feedback seq it had
    /// learnt) that judged a decision of the window; `null` without
    /// decisions.
    pub model_seq_min: Option<i64>,
    /// See `model_seq_min`.
    pub model_seq_max: Option<i64>,
    /// The verdict mix per time bucket, oldest first; empty buckets
    /// included.
    pub over_time: Vec<VerdictBucket>,
}

/// Verdict counts and shares.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct VerdictMix {
    /// Judged junk.
    pub junk: u64,
    /// Held for review.
    pub review: u64,
    /// Judged fine.
    pub fine: u64,
    /// `junk / all`; `null` without decisions.
    pub junk_share: Option<f64>,
    /// `review / all`.
    pub review_share: Option<f64>,
    /// `fine / all`.
    pub fine_share: Option<f64>,
}

/// The verdict mix of one time bucket.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerdictBucket {
    /// Start (included), ms.
    pub start_ms: i64,
    /// Start, RFC 3339.
    pub start: String,
    /// End (excluded), ms; the last bucket ends with its window.
    pub end_ms: i64,
    /// Decisions made in the bucket.
    pub decisions: u64,
    /// Their verdicts.
    pub verdicts: VerdictMix,
}

/// Verdict quality in both windows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QualityShift {
    /// The baseline window.
    pub baseline: QualityWindow,
    /// The current window.
    pub current: QualityWindow,
}

/// How a window's decisions fared with moderators. A decision counts when
/// it has a standing label: its latest feedback row that is not revoked,
/// given at any time up to the report (a correction overrides the label it
/// corrects).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QualityWindow {
    /// Decisions with a standing label.
    pub labelled: u64,
    /// Of those, labelled junk.
    pub labelled_junk: u64,
    /// Of those, labelled fine.
    pub labelled_fine: u64,
    /// Verdicts the labels overturned, and review items.
    pub overturns: Overturns,
    /// ROC area of `p_junk` against the labels; `null` unless both labels
    /// occur.
    pub roc_auc: Option<f64>,
    /// Mean log loss; `null` without labels.
    pub log_loss: Option<f64>,
    /// Brier score (mean squared error of `p_junk`); `null` without labels.
    pub brier: Option<f64>,
    /// Reliability table over 10 equal bins with the expected calibration
    /// error; `null` without labels.
    pub calibration: Option<Calibration>,
    /// Labelled decisions and overturns per time bucket, oldest first.
    pub over_time: Vec<QualityBucket>,
}

/// Verdicts a label contradicts, and labels on review items.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Overturns {
    /// Labelled fine but judged junk: a message wrongly hidden.
    pub fine_judged_junk: u64,
    /// Labelled junk but judged fine: junk that got through.
    pub junk_judged_fine: u64,
    /// Held for review and labelled junk.
    pub review_labelled_junk: u64,
    /// Held for review and labelled fine.
    pub review_labelled_fine: u64,
    /// `fine_judged_junk / labelled_fine`: the false-junk rate.
    pub false_junk_rate: Option<f64>,
    /// `junk_judged_fine / labelled_junk`: the missed-junk rate.
    pub missed_junk_rate: Option<f64>,
    /// `(fine_judged_junk + junk_judged_fine) / labelled`.
    pub overturn_rate: Option<f64>,
    /// `(review_labelled_junk + review_labelled_fine) / labelled`.
    pub review_rate: Option<f64>,
}

/// Labelled decisions of one time bucket.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct QualityBucket {
    /// Start (included), ms.
    pub start_ms: i64,
    /// Start, RFC 3339.
    pub start: String,
    /// End (excluded), ms.
    pub end_ms: i64,
    /// Decisions made in the bucket that have a standing label.
    pub labelled: u64,
    /// Of those, overturned (fine judged junk or junk judged fine).
    pub overturned: u64,
    /// `overturned / labelled`.
    pub overturn_rate: Option<f64>,
}

/// What the current window's labels say about the junk threshold.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ThresholdAdvice {
    /// Labelled junk in the current window.
    pub labelled_junk: u64,
    /// Labelled fine in the current window.
    pub labelled_fine: u64,
    /// The false-junk rate the advice keeps to.
    pub false_junk_target: f64,
    /// Labelled fine needed before one message wrongly judged junk stays
    /// within the target (`ceil(1 / target)`); with fewer, the advice can
    /// only be "no fine message judged junk". `null` for a target of 0.
    pub fine_needed: Option<u64>,
    /// The configured junk threshold's figures.
    pub configured: Option<OperatingPoint>,
    /// The configured review threshold's figures: how much junk is at
    /// least held for review, and how much fine is held with it.
    pub configured_review: Option<OperatingPoint>,
    /// The lowest threshold whose false-junk rate stays within the target
    /// (the one catching the most junk); its `threshold` is `null` when
    /// even the highest score would break the target, i.e. judge nothing
    /// junk.
    pub advised: Option<OperatingPoint>,
    /// Whether the advice differs materially from the configuration: the
    /// configured threshold breaks the target, or the advised one catches
    /// at least 5 percentage points more of the labelled junk.
    pub differs: bool,
    /// Why there is no advice, when there is none.
    pub note: Option<String>,
}

/// Figures of one junk threshold on the current window's labels.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct OperatingPoint {
    /// `p_junk` at or above which a message counts as judged junk; `null`
    /// for "none".
    pub threshold: Option<f64>,
    /// Labelled fine at or above the threshold.
    pub fine_judged_junk: u64,
    /// Labelled junk at or above the threshold.
    pub junk_caught: u64,
    /// `fine_judged_junk / labelled_fine`.
    pub false_junk_rate: f64,
    /// `junk_caught / labelled_junk`: the share of junk it catches.
    pub junk_caught_share: f64,
}

/// Which change detector fired.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Detector {
    /// Page-Hinkley over labelled decisions in time order, 1 for an
    /// overturned verdict and 0 otherwise.
    FeedbackErrors,
    /// Page-Hinkley over the mean `p_junk` of blocks of whole UTC hours in
    /// time order.
    PJunk,
}

impl Detector {
    /// The name as in the JSON form.
    pub fn as_str(self) -> &'static str {
        match self {
            Detector::FeedbackErrors => "feedback_errors",
            Detector::PJunk => "p_junk",
        }
    }
}

/// Which way the watched mean moved.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Shift {
    /// It rose: more overturned verdicts, or higher scores.
    Rise,
    /// It fell: lower scores.
    Fall,
}

impl Shift {
    /// The name as in the JSON form.
    pub fn as_str(self) -> &'static str {
        match self {
            Shift::Rise => "rise",
            Shift::Fall => "fall",
        }
    }
}

/// A change detector's alarm.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Alarm {
    /// Which detector.
    pub detector: Detector,
    /// The channel whose stream it watched; `null` for all the report's
    /// decisions.
    pub channel: Option<String>,
    /// When it fired: the time of the labelled decision that tipped it, or
    /// the last millisecond of the hour block that did, ms.
    pub at_ms: i64,
    /// The same, RFC 3339.
    pub at: String,
    /// The window that time falls in.
    pub window: WindowName,
    /// Which way the mean moved.
    pub shift: Shift,
    /// The detector's statistic when it fired (above its `lambda`).
    pub statistic: f64,
    /// Samples it had counted since it started or last fired.
    pub samples: u64,
    /// Their running mean when it fired.
    pub mean: f64,
}

/// Feedback and model history of both windows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Activity {
    /// Feedback appended in the baseline window.
    pub baseline: ActivityWindow,
    /// Feedback appended in the current window.
    pub current: ActivityWindow,
    /// Checkpoints written in either window, oldest first.
    pub checkpoints: Vec<CheckpointEntry>,
    /// Model events (rollbacks, rebuilds) in either window, oldest first.
    pub model_events: Vec<ModelEventEntry>,
}

/// Feedback rows appended in one window, by their own time.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ActivityWindow {
    /// Every row.
    pub feedback: u64,
    /// Labelled junk.
    pub junk: u64,
    /// Labelled fine.
    pub fine: u64,
    /// Corrections of an earlier label.
    pub corrections: u64,
    /// Rows revoked since (un-learned).
    pub revoked: u64,
    /// Rows about inline messages rather than decisions.
    pub inline: u64,
    /// The same per moderator, by name.
    pub by_moderator: Vec<ModeratorActivity>,
}

/// One moderator's feedback in a window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModeratorActivity {
    /// Who.
    pub moderator: String,
    /// Every row.
    pub feedback: u64,
    /// Labelled junk.
    pub junk: u64,
    /// Labelled fine.
    pub fine: u64,
    /// Corrections.
    pub corrections: u64,
    /// Revoked since.
    pub revoked: u64,
}

/// A checkpoint written in one of the windows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CheckpointEntry {
    /// Its id.
    pub id: i64,
    /// When it was written, ms.
    pub at_ms: i64,
    /// The same, RFC 3339.
    pub at: String,
    /// The window that time falls in.
    pub window: WindowName,
    /// The last feedback seq the saved model includes.
    pub last_seq: i64,
    /// Examples the saved model had learnt from.
    pub examples_seen: i64,
    /// Why it was written.
    pub reason: String,
    /// Whether its file has been deleted since.
    pub is_deleted: bool,
}

/// A model event recorded in one of the windows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelEventEntry {
    /// Its id.
    pub id: i64,
    /// When, ms.
    pub at_ms: i64,
    /// The same, RFC 3339.
    pub at: String,
    /// The window that time falls in.
    pub window: WindowName,
    /// What happened, e.g. `rollback`.
    pub kind: String,
    /// Its details as recorded.
    pub detail: serde_json::Value,
}

/// The report's reading aid: one sentence or two per part.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Help {
    /// How the windows are laid out.
    pub windows: &'static str,
    /// What the stability index measures.
    pub psi: &'static str,
    /// Where the bands come from.
    pub psi_band: &'static str,
    /// What the verdict mix shows.
    pub verdicts: &'static str,
    /// How labels are matched to decisions.
    pub quality: &'static str,
    /// What counts as overturned.
    pub overturns: &'static str,
    /// How the threshold advice is found, and what `differs` means.
    pub threshold_advice: &'static str,
    /// What the detectors watch and when they fire.
    pub alarms: &'static str,
    /// What activity counts.
    pub activity: &'static str,
    /// Where `features` comes from and how to read it.
    pub features: &'static str,
    /// A caution for whoever acts on the report.
    pub caution: &'static str,
}

impl Help {
    /// The help every report carries.
    pub const TEXT: Help = Help {
        windows: "Two adjacent windows by the time decisions were made: the current window ends \
                  at `at`, the baseline window ends where the current one starts. Buckets are \
                  UTC hours for windows up to two days, else UTC days; the first and last are \
                  cut to the window.",
        psi: "Population stability index of p_junk, current window against baseline, over the \
              equal-width bins in settings.psi_bin_edges: sum over bins of (c - b) * ln(c / b), \
              with each share smoothed by 1e-4. It needs no labels, so it warns before \
              moderators catch up. It is noisy with few decisions per window.",
        psi_band: "stable below 0.1, moderate from 0.1 to 0.25, large from 0.25: common practice \
                   in credit-scoring model monitoring, with no single source; a reading aid, \
                   not a statistical test.",
        verdicts: "Shares of junk, review and fine verdicts per window and per time bucket.",
        quality: "A decision counts as labelled when it has a standing label: its latest \
                  feedback that is not revoked, given at any time up to now (a correction \
                  overrides the label it corrects). ROC area, log loss, Brier score and the \
                  10-bin reliability table with its expected calibration error compare p_junk \
                  with those labels.",
        overturns: "Overturned: labelled fine but judged junk (false junk), or labelled junk \
                    but judged fine (missed junk). Review items were meant for a person to \
                    decide and count apart, as review_labelled_junk / review_labelled_fine.",
        threshold_advice: "From the current window's labelled decisions: the lowest junk \
                           threshold whose false-junk rate (labelled fine at or above it, over \
                           all labelled fine) stays within false_junk_target, and the share of \
                           labelled junk it catches, beside the configured threshold's figures. \
                           differs is true when the configured threshold breaks the target, or \
                           the advised one catches at least 5 percentage points more of the \
                           labelled junk. With fewer labelled fine than fine_needed the advice \
                           can only avoid every false junk seen.",
        alarms: "Page-Hinkley change detectors, replayed in time order over both windows. \
                 feedback_errors watches labelled decisions, 1 for an overturned verdict and 0 \
                 otherwise, and fires when that rate rises. p_junk watches the mean p_junk of \
                 consecutive UTC hours, merged until a block holds p_junk_block decisions, and \
                 fires when it rises or falls. A detector starts afresh after each alarm. delta is the change tolerated, lambda \
                 the evidence needed; see settings.",
        activity: "Feedback rows by the time they were given, per label, moderator and kind; \
                   revoked rows were un-learned since. Checkpoints and model events show the \
                   model's version history in the windows.",
        features: "Feature tallies count readable feature names in a sample of scored \
                   messages per bucket (an hour by default; see [tally]). A share is the \
                   messages with the name over the messages sampled in the window; rising and \
                   falling list the largest changes of share from baseline to current, among \
                   names seen in at least min_messages sampled messages of one window. Counts \
                   are estimates that may be slightly high. top_contributions sums each name's \
                   push on the margin in the current window. null when neither window has a \
                   tally.",
        caution: "Automatic filtering can hide a message that mattered. Keep a review band, let \
                  people release what was held, and check overturned verdicts before moving a \
                  threshold.",
    };
}
