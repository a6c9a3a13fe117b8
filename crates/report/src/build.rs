//! Building a [`DriftReport`] from the audit and feedback logs.
//!
//! Eight reads, run side by side on the store's pool: decision tallies per
//! UTC hour, channel and verdict (with `p_junk` bin counts) for each
//! window, the labelled decisions themselves, feedback tallies,
//! checkpoints, model events and the feature tallies of both windows. Everything else happens here, in memory,
//! in one pass over those rows per figure; the figures themselves come from
//! `chaffgate-metrics`.
//!
//! Time buckets are whole UTC hours (windows up to two days) or UTC days,
//! the first and last cut to the window: a window from 10:37 starts with a
//! bucket 10:37 to 11:00. The `p_junk` detector's samples are built from
//! whole hours too, so its alarm times are the last millisecond of an hour
//! (or of the window).
//!
//! What must stay true: the report is a function of the database and the
//! request alone. Nothing here reads the clock, and rows are visited in an
//! order fixed by the queries (time, then id or channel name), so the same
//! database and request give the same report, alarms included.

use std::collections::BTreeMap;

use chaffgate_metrics::{
    Calibration, Direction, MetricsError, PageHinkley, ScoreBins, brier_score, calibration,
    confusion, junk_recall_at_false_junk_rate, log_loss, psi, psi_band, roc_auc,
};
use chaffgate_store::{
    FeatureDrift, FeatureTally, FeedbackKind, FeedbackTally, HOUR_MS, HourTally, Label,
    LabelledDecision, Store, Verdict, feature_drift,
};

use crate::error::ReportError;
use crate::report::{
    Activity, ActivityWindow, Alarm, CheckpointEntry, Detector, DriftReport, Help, ModelEventEntry,
    ModeratorActivity, OperatingPoint, Overturns, QualityBucket, QualityShift, QualityWindow,
    ScopeReport, ScoreShift, ScoreWindow, SettingsUsed, Shift, ThresholdAdvice, VerdictBucket,
    VerdictMix, Window, WindowName, Windows,
};
use crate::settings::{ReportRequest, ReportSettings, VerdictThresholds, validate};
use crate::time::{format_span, rfc3339, span_ms};

const DAY_MS: i64 = 24 * HOUR_MS;

/// Windows up to this long get hourly buckets, longer ones daily.
const HOURLY_UP_TO_MS: i64 = 2 * DAY_MS;

/// `differs` when the advised threshold catches at least this share more
/// of the labelled junk than the configured one: 1/20, five percentage
/// points. A product choice (no source): less moves with a handful of
/// labels, more would hide a real gain.
const MATERIAL_GAIN_DENOMINATOR: u64 = 20;

/// Names listed in each of the report's feature lists (rising, falling,
/// largest contributions): enough to spot a new campaign's words, few
/// enough to read at a glance. A product choice, no source.
pub const FEATURE_DRIFT_TOP: usize = 20;

/// Builds the drift report `request` asks for from `store`.
///
/// Errors: [`ReportError::InvalidRequest`] listing every setting out of
/// range, [`ReportError::Store`] when a read fails.
pub async fn build(store: &Store, request: &ReportRequest) -> Result<DriftReport, ReportError> {
    validate(request)?;
    let layout = Layout::new(request);
    let settings = &request.settings;
    let bins = ScoreBins::uniform(settings.psi_bins).map_err(metric("the p_junk bins"))?;
    let edges = bins.edges();
    let inner_edges = &edges[1..edges.len() - 1];
    let channel = request.channel.as_deref();
    let (start, split, end) = (
        layout.baseline_start_ms,
        layout.current_start_ms,
        layout.end_ms,
    );

    // Each window is read in two halves on two connections, so that the
    // scan of a long baseline uses both cores of a small machine.
    let [b1, b2] = halves(start, split);
    let [c1, c2] = halves(split, end);
    let (b1, b2, c1, c2, labelled, feedback, checkpoints, events, tally_b, tally_c) = tokio::try_join!(
        store.hour_tallies(b1.0, b1.1, inner_edges, channel),
        store.hour_tallies(b2.0, b2.1, inner_edges, channel),
        store.hour_tallies(c1.0, c1.1, inner_edges, channel),
        store.hour_tallies(c2.0, c2.1, inner_edges, channel),
        store.labelled_decisions(start, end, channel),
        store.feedback_tallies(start, split, end, channel),
        store.checkpoints_between(start, end),
        store.model_events_between(start, end),
        store.feature_tally(channel, start, split),
        store.feature_tally(channel, split, end),
    )?;
    let baseline_tallies: Vec<HourTally> = b1.into_iter().chain(b2).collect();
    let current_tallies: Vec<HourTally> = c1.into_iter().chain(c2).collect();

    // Gather each scope's rows: all of them, and each channel's.
    let mut overall = ScopeRows::new(&layout, bins.bin_count());
    let mut by_channel: BTreeMap<String, ScopeRows> = BTreeMap::new();
    for (name, tallies) in [
        (WindowName::Baseline, &baseline_tallies),
        (WindowName::Current, &current_tallies),
    ] {
        for tally in tallies {
            overall.add_tally(name, tally, &layout);
            by_channel
                .entry(tally.channel.clone())
                .or_insert_with(|| ScopeRows::new(&layout, bins.bin_count()))
                .add_tally(name, tally, &layout);
        }
    }
    for row in &labelled {
        overall.add_labelled(row, &layout);
        by_channel
            .entry(row.channel.clone())
            .or_insert_with(|| ScopeRows::new(&layout, bins.bin_count()))
            .add_labelled(row, &layout);
    }

    let overall_name = request.channel.clone();
    let overall_report = scope_report(
        overall_name.clone(),
        &overall,
        settings.thresholds(channel),
        &layout,
        &bins,
        settings,
    )?;
    let mut channels = Vec::new();
    if request.channel.is_none() {
        for (name, rows) in &by_channel {
            channels.push(scope_report(
                Some(name.clone()),
                rows,
                settings.thresholds(Some(name)),
                &layout,
                &bins,
                settings,
            )?);
        }
    }

    let mut alarms = error_alarms(&labelled, overall_name.as_deref(), &layout, settings)?;
    let hours = baseline_tallies.iter().chain(&current_tallies);
    alarms.extend(p_junk_alarms(
        hours,
        overall_name.as_deref(),
        &layout,
        settings,
    )?);
    alarms.sort_by(|a, b| {
        (a.at_ms, a.detector as u8, &a.channel).cmp(&(b.at_ms, b.detector as u8, &b.channel))
    });

    let activity = Activity {
        baseline: activity_window(&feedback, false),
        current: activity_window(&feedback, true),
        checkpoints: checkpoints
            .into_iter()
            .map(|row| CheckpointEntry {
                id: row.id,
                at_ms: row.created_at_ms,
                at: rfc3339(row.created_at_ms),
                window: layout.window_of(row.created_at_ms),
                last_seq: row.last_seq.0,
                examples_seen: row.examples_seen,
                reason: row.reason,
                is_deleted: row.deleted_at_ms.is_some(),
            })
            .collect(),
        model_events: events
            .into_iter()
            .map(|row| ModelEventEntry {
                id: row.id,
                at_ms: row.created_at_ms,
                at: rfc3339(row.created_at_ms),
                window: layout.window_of(row.created_at_ms),
                kind: row.kind,
                // The schema checks json_valid(detail); text is the fallback
                // should that ever not hold.
                detail: serde_json::from_str(&row.detail_json)
                    .unwrap_or(serde_json::Value::String(row.detail_json)),
            })
            .collect(),
    };

    Ok(DriftReport {
        help: Help::TEXT,
        at_ms: request.at_ms,
        at: rfc3339(request.at_ms),
        channel: request.channel.clone(),
        windows: Windows {
            baseline: layout.window(WindowName::Baseline, request),
            current: layout.window(WindowName::Current, request),
        },
        settings: SettingsUsed {
            psi_bin_edges: edges.to_vec(),
            false_junk_target: settings.false_junk_target,
            error_detector: settings.error_detector,
            p_junk_detector: settings.p_junk_detector,
            p_junk_block: settings.p_junk_block,
        },
        overall: overall_report,
        channels,
        alarms,
        activity,
        features: features(&tally_b, &tally_c),
    })
}

/// Feature drift between the windows' tallies; `None` when neither window
/// has one. A tally counts in the window its bucket starts in.
fn features(baseline: &FeatureTally, current: &FeatureTally) -> Option<FeatureDrift> {
    let is_empty = |tally: &FeatureTally| tally.sampled_messages == 0 && tally.features.is_empty();
    if is_empty(baseline) && is_empty(current) {
        return None;
    }
    Some(feature_drift(baseline, current, FEATURE_DRIFT_TOP))
}

/// `[from, until)` cut in two at the UTC hour nearest below its middle
/// (the first half empty when the range lies within one hour).
fn halves(from: i64, until: i64) -> [(i64, i64); 2] {
    let middle = from + (until - from) / 2;
    let cut = (middle.div_euclid(HOUR_MS) * HOUR_MS).clamp(from, until);
    [(from, cut), (cut, until)]
}

/// Where the windows and their buckets lie.
struct Layout {
    baseline_start_ms: i64,
    current_start_ms: i64,
    end_ms: i64,
    baseline_bucket_ms: i64,
    current_bucket_ms: i64,
}

impl Layout {
    fn new(request: &ReportRequest) -> Layout {
        let end_ms = request.at_ms;
        // Windows are clamped at the epoch: nothing was decided before it.
        let current_start_ms = (end_ms - span_ms(request.current)).max(0);
        let baseline_start_ms = (current_start_ms - span_ms(request.baseline)).max(0);
        let bucket = |span| {
            if span_ms(span) <= HOURLY_UP_TO_MS {
                HOUR_MS
            } else {
                DAY_MS
            }
        };
        Layout {
            baseline_start_ms,
            current_start_ms,
            end_ms,
            baseline_bucket_ms: bucket(request.baseline),
            current_bucket_ms: bucket(request.current),
        }
    }

    fn window_of(&self, at_ms: i64) -> WindowName {
        if at_ms < self.current_start_ms {
            WindowName::Baseline
        } else {
            WindowName::Current
        }
    }

    /// `(start, end, bucket width)` of a window.
    fn bounds(&self, name: WindowName) -> (i64, i64, i64) {
        match name {
            WindowName::Baseline => (
                self.baseline_start_ms,
                self.current_start_ms,
                self.baseline_bucket_ms,
            ),
            WindowName::Current => (self.current_start_ms, self.end_ms, self.current_bucket_ms),
        }
    }

    /// The UTC hour or day boundary at or before a window's start, where
    /// its buckets are counted from.
    fn first_boundary(&self, name: WindowName) -> i64 {
        let (start, _, width) = self.bounds(name);
        start.div_euclid(width) * width
    }

    fn bucket_count(&self, name: WindowName) -> usize {
        let (start, end, width) = self.bounds(name);
        if end <= start {
            return 0;
        }
        let first = self.first_boundary(name);
        usize::try_from((end - first + width - 1) / width).unwrap_or(0)
    }

    /// The bucket holding time `at_ms` of a window.
    fn bucket_of(&self, name: WindowName, at_ms: i64) -> usize {
        let (_, _, width) = self.bounds(name);
        let index = usize::try_from((at_ms - self.first_boundary(name)) / width).unwrap_or(0);
        index.min(self.bucket_count(name).saturating_sub(1))
    }

    /// `(start, end)` of bucket `index` of a window, cut to the window.
    fn bucket_bounds(&self, name: WindowName, index: usize) -> (i64, i64) {
        let (start, end, width) = self.bounds(name);
        let offset = i64::try_from(index).unwrap_or(i64::MAX / 2 / width);
        let bucket_start = self.first_boundary(name) + offset * width;
        (bucket_start.max(start), (bucket_start + width).min(end))
    }

    fn window(&self, name: WindowName, request: &ReportRequest) -> Window {
        let (start_ms, end_ms, bucket_ms) = self.bounds(name);
        let span = match name {
            WindowName::Baseline => request.baseline,
            WindowName::Current => request.current,
        };
        Window {
            start_ms,
            start: rfc3339(start_ms),
            end_ms,
            end: rfc3339(end_ms),
            length: format_span(span),
            bucket: if bucket_ms == HOUR_MS { "1h" } else { "1d" }.to_owned(),
            bucket_ms,
        }
    }
}

/// Index 0 for the baseline, 1 for the current window.
fn side(is_current: bool) -> usize {
    usize::from(is_current)
}

const WINDOWS: [WindowName; 2] = [WindowName::Baseline, WindowName::Current];

/// Verdict counts as `[junk, review, fine]`.
type VerdictCounts = [u64; 3];

fn verdict_index(verdict: Verdict) -> usize {
    match verdict {
        Verdict::Junk => 0,
        Verdict::Review => 1,
        Verdict::Fine => 2,
    }
}

/// One scope's rows, per window.
struct ScopeRows {
    bin_counts: [Vec<u64>; 2],
    p_junk_sums: [f64; 2],
    model_seq: [Option<(i64, i64)>; 2],
    buckets: [Vec<VerdictCounts>; 2],
    labelled: [Vec<Labelled>; 2],
}

/// A labelled decision reduced to what the figures need.
#[derive(Debug, Clone, Copy)]
struct Labelled {
    p_junk: f64,
    is_junk: bool,
    verdict: Verdict,
    bucket: usize,
}

impl ScopeRows {
    fn new(layout: &Layout, bin_count: usize) -> ScopeRows {
        let buckets = |name| vec![[0; 3]; layout.bucket_count(name)];
        ScopeRows {
            bin_counts: [vec![0; bin_count], vec![0; bin_count]],
            p_junk_sums: [0.0; 2],
            model_seq: [None; 2],
            buckets: [buckets(WindowName::Baseline), buckets(WindowName::Current)],
            labelled: [Vec::new(), Vec::new()],
        }
    }

    fn add_tally(&mut self, name: WindowName, tally: &HourTally, layout: &Layout) {
        let w = side(name == WindowName::Current);
        let count = tally.count.unsigned_abs();
        for (sum, bin_count) in self.bin_counts[w].iter_mut().zip(&tally.bin_counts) {
            *sum += bin_count.unsigned_abs();
        }
        self.p_junk_sums[w] += tally.p_junk_sum;
        let (low, high) = (tally.model_seq_min.0, tally.model_seq_max.0);
        self.model_seq[w] = Some(match self.model_seq[w] {
            Some((min, max)) => (min.min(low), max.max(high)),
            None => (low, high),
        });
        if self.buckets[w].is_empty() {
            // A window of zero length holds no decision; nothing to place.
            return;
        }
        // Buckets are whole hours or days, so an hour lies in one bucket.
        let (start, _, _) = layout.bounds(name);
        let bucket = layout.bucket_of(name, (tally.hour * HOUR_MS).max(start));
        self.buckets[w][bucket][verdict_index(tally.verdict)] += count;
    }

    fn add_labelled(&mut self, row: &LabelledDecision, layout: &Layout) {
        let name = layout.window_of(row.created_at_ms);
        let bucket = layout.bucket_of(name, row.created_at_ms);
        let w = side(name == WindowName::Current);
        self.labelled[w].push(Labelled {
            p_junk: row.p_junk,
            is_junk: row.label == Label::Junk,
            verdict: row.verdict,
            bucket,
        });
    }
}

fn metric(what: &'static str) -> impl Fn(MetricsError) -> ReportError {
    move |source| ReportError::Metric { what, source }
}

#[expect(
    clippy::cast_precision_loss,
    reason = "decision counts are far below 2^53"
)]
fn ratio(part: u64, whole: u64) -> Option<f64> {
    (whole > 0).then(|| part as f64 / whole as f64)
}

fn verdict_mix(counts: VerdictCounts) -> VerdictMix {
    let all = counts.iter().sum();
    VerdictMix {
        junk: counts[0],
        review: counts[1],
        fine: counts[2],
        junk_share: ratio(counts[0], all),
        review_share: ratio(counts[1], all),
        fine_share: ratio(counts[2], all),
    }
}

fn scope_report(
    channel: Option<String>,
    rows: &ScopeRows,
    thresholds: VerdictThresholds,
    layout: &Layout,
    bins: &ScoreBins,
    settings: &ReportSettings,
) -> Result<ScopeReport, ReportError> {
    let [baseline, current] = WINDOWS.map(|name| score_window(rows, name, layout));
    // PSI depends on the bin counts alone, so each decision stands in for
    // itself by its bin's lower edge (which lies in that bin); the metrics
    // crate then bins and compares exactly as it would the scores.
    let (psi_value, psi_bins) = if baseline.decisions > 0 && current.decisions > 0 {
        let sample = |counts: &[u64]| -> Vec<f64> {
            let mut sample = Vec::new();
            for (bin, &count) in counts.iter().enumerate() {
                let lower = bins.edges()[bin];
                sample.extend(std::iter::repeat_n(
                    lower,
                    usize::try_from(count).unwrap_or(0),
                ));
            }
            sample
        };
        let report = psi(
            &sample(&baseline.bin_counts),
            &sample(&current.bin_counts),
            bins,
        )
        .map_err(metric("the population stability index"))?;
        (Some(report.psi), report.bins)
    } else {
        (None, Vec::new())
    };
    let quality = QualityShift {
        baseline: quality_window(&rows.labelled[0], WindowName::Baseline, layout)?,
        current: quality_window(&rows.labelled[1], WindowName::Current, layout)?,
    };
    let threshold_advice = advise(&rows.labelled[1], thresholds, settings.false_junk_target)?;
    Ok(ScopeReport {
        channel,
        thresholds,
        scores: ScoreShift {
            psi: psi_value,
            psi_band: psi_value.map(psi_band),
            psi_bins,
            baseline,
            current,
        },
        quality,
        threshold_advice,
    })
}

fn score_window(rows: &ScopeRows, name: WindowName, layout: &Layout) -> ScoreWindow {
    let w = side(name == WindowName::Current);
    let buckets = &rows.buckets[w];
    let mut total: VerdictCounts = [0; 3];
    for counts in buckets {
        for (sum, count) in total.iter_mut().zip(counts) {
            *sum += count;
        }
    }
    let decisions: u64 = rows.bin_counts[w].iter().sum();
    #[expect(
        clippy::cast_precision_loss,
        reason = "decision counts are far below 2^53"
    )]
    let mean_p_junk = (decisions > 0).then(|| rows.p_junk_sums[w] / decisions as f64);
    let over_time = buckets
        .iter()
        .enumerate()
        .map(|(index, counts)| {
            let (start_ms, end_ms) = layout.bucket_bounds(name, index);
            VerdictBucket {
                start_ms,
                start: rfc3339(start_ms),
                end_ms,
                decisions: counts.iter().sum(),
                verdicts: verdict_mix(*counts),
            }
        })
        .collect();
    ScoreWindow {
        decisions,
        mean_p_junk,
        bin_counts: rows.bin_counts[w].clone(),
        verdicts: verdict_mix(total),
        model_seq_min: rows.model_seq[w].map(|(min, _)| min),
        model_seq_max: rows.model_seq[w].map(|(_, max)| max),
        over_time,
    }
}

/// Whether a label overturns a verdict: fine judged junk, or junk judged
/// fine. Review verdicts are never overturned; a person was to decide.
fn is_overturned(row: &Labelled) -> bool {
    matches!(
        (row.is_junk, row.verdict),
        (false, Verdict::Junk) | (true, Verdict::Fine)
    )
}

fn quality_window(
    rows: &[Labelled],
    name: WindowName,
    layout: &Layout,
) -> Result<QualityWindow, ReportError> {
    let mut overturns = Overturns {
        fine_judged_junk: 0,
        junk_judged_fine: 0,
        review_labelled_junk: 0,
        review_labelled_fine: 0,
        false_junk_rate: None,
        missed_junk_rate: None,
        overturn_rate: None,
        review_rate: None,
    };
    let mut bucket_counts = vec![(0_u64, 0_u64); layout.bucket_count(name)];
    let mut labelled_junk = 0;
    for row in rows {
        labelled_junk += u64::from(row.is_junk);
        match (row.is_junk, row.verdict) {
            (false, Verdict::Junk) => overturns.fine_judged_junk += 1,
            (true, Verdict::Fine) => overturns.junk_judged_fine += 1,
            (true, Verdict::Review) => overturns.review_labelled_junk += 1,
            (false, Verdict::Review) => overturns.review_labelled_fine += 1,
            _ => {}
        }
        if let Some(bucket) = bucket_counts.get_mut(row.bucket) {
            bucket.0 += 1;
            bucket.1 += u64::from(is_overturned(row));
        }
    }
    let labelled = rows.len() as u64;
    let labelled_fine = labelled - labelled_junk;
    overturns.false_junk_rate = ratio(overturns.fine_judged_junk, labelled_fine);
    overturns.missed_junk_rate = ratio(overturns.junk_judged_fine, labelled_junk);
    overturns.overturn_rate = ratio(
        overturns.fine_judged_junk + overturns.junk_judged_fine,
        labelled,
    );
    overturns.review_rate = ratio(
        overturns.review_labelled_junk + overturns.review_labelled_fine,
        labelled,
    );

    let p_junk: Vec<f64> = rows.iter().map(|row| row.p_junk).collect();
    let is_junk: Vec<bool> = rows.iter().map(|row| row.is_junk).collect();
    let (roc, loss, brier, table) = if rows.is_empty() {
        (None, None, None, None)
    } else {
        let roc = if labelled_junk > 0 && labelled_fine > 0 {
            Some(roc_auc(&p_junk, &is_junk).map_err(metric("the ROC area"))?)
        } else {
            None
        };
        (
            roc,
            Some(log_loss(&p_junk, &is_junk).map_err(metric("the log loss"))?),
            Some(brier_score(&p_junk, &is_junk).map_err(metric("the Brier score"))?),
            Some(
                calibration(&p_junk, &is_junk, Calibration::DEFAULT_BINS)
                    .map_err(metric("the reliability table"))?,
            ),
        )
    };
    let over_time = bucket_counts
        .iter()
        .enumerate()
        .map(|(index, &(labelled, overturned))| {
            let (start_ms, end_ms) = layout.bucket_bounds(name, index);
            QualityBucket {
                start_ms,
                start: rfc3339(start_ms),
                end_ms,
                labelled,
                overturned,
                overturn_rate: ratio(overturned, labelled),
            }
        })
        .collect();
    Ok(QualityWindow {
        labelled,
        labelled_junk,
        labelled_fine,
        overturns,
        roc_auc: roc,
        log_loss: loss,
        brier,
        calibration: table,
        over_time,
    })
}

fn advise(
    rows: &[Labelled],
    thresholds: VerdictThresholds,
    target: f64,
) -> Result<ThresholdAdvice, ReportError> {
    let junk = rows.iter().filter(|row| row.is_junk).count() as u64;
    let fine = rows.len() as u64 - junk;
    #[expect(
        clippy::cast_possible_truncation,
        clippy::cast_sign_loss,
        reason = "the target is in (0, 1), so 1 / target is a positive number that fits"
    )]
    let fine_needed = (target > 0.0).then(|| (1.0 / target).ceil() as u64);
    let mut advice = ThresholdAdvice {
        labelled_junk: junk,
        labelled_fine: fine,
        false_junk_target: target,
        fine_needed,
        configured: None,
        configured_review: None,
        advised: None,
        differs: false,
        note: None,
    };
    if junk == 0 || fine == 0 {
        advice.note = Some(format!(
            "needs labelled junk and labelled fine in the current window; it has {junk} junk \
             and {fine} fine"
        ));
        return Ok(advice);
    }
    let p_junk: Vec<f64> = rows.iter().map(|row| row.p_junk).collect();
    let is_junk: Vec<bool> = rows.iter().map(|row| row.is_junk).collect();
    let point = |threshold: f64| -> Result<OperatingPoint, ReportError> {
        let counts =
            confusion(&p_junk, &is_junk, threshold).map_err(metric("counts at a threshold"))?;
        Ok(OperatingPoint {
            threshold: Some(threshold),
            fine_judged_junk: counts.fine_flagged,
            junk_caught: counts.junk_caught,
            false_junk_rate: ratio(counts.fine_flagged, fine).unwrap_or(0.0),
            junk_caught_share: ratio(counts.junk_caught, junk).unwrap_or(0.0),
        })
    };
    let configured = point(thresholds.junk)?;
    let best = junk_recall_at_false_junk_rate(&p_junk, &is_junk, target)
        .map_err(metric("the threshold advice"))?;
    let advised = if best.threshold.is_finite() {
        point(best.threshold)?
    } else {
        OperatingPoint {
            threshold: None,
            fine_judged_junk: 0,
            junk_caught: 0,
            false_junk_rate: 0.0,
            junk_caught_share: 0.0,
        }
    };
    let breaks_target = configured.false_junk_rate > target;
    let gain = advised.junk_caught.saturating_sub(configured.junk_caught);
    advice.differs = breaks_target || gain * MATERIAL_GAIN_DENOMINATOR >= junk;
    advice.configured = Some(configured);
    advice.configured_review = Some(point(thresholds.review)?);
    advice.advised = Some(advised);
    Ok(advice)
}

/// Runs one detector per stream key over `samples` (key, time, value) in
/// order, and lists its alarms. A detector starts afresh after each alarm.
fn run_detectors<'a>(
    samples: impl Iterator<Item = (Option<&'a str>, i64, f64)>,
    detector: Detector,
    direction: Direction,
    settings: crate::settings::DetectorSettings,
    layout: &Layout,
) -> Result<Vec<Alarm>, ReportError> {
    let fresh =
        PageHinkley::new(settings.params(direction)).map_err(metric("a change detector"))?;
    let mut detectors: BTreeMap<Option<&str>, PageHinkley> = BTreeMap::new();
    let mut alarms = Vec::new();
    for (key, at_ms, value) in samples {
        let ph = detectors.entry(key).or_insert_with(|| fresh.clone());
        if ph.update(value) {
            let shift = if ph.rise_statistic() >= ph.fall_statistic() {
                Shift::Rise
            } else {
                Shift::Fall
            };
            alarms.push(Alarm {
                detector,
                channel: key.map(str::to_owned),
                at_ms,
                at: rfc3339(at_ms),
                window: layout.window_of(at_ms),
                shift,
                statistic: ph.statistic(),
                samples: ph.samples(),
                mean: ph.mean(),
            });
            ph.reset();
        }
    }
    Ok(alarms)
}

/// Alarms over overturned verdicts: one sample per labelled decision, in
/// the order decisions were made, for the report's scope and (when the
/// report covers all channels) for each channel.
fn error_alarms(
    labelled: &[LabelledDecision],
    scope: Option<&str>,
    layout: &Layout,
    settings: &ReportSettings,
) -> Result<Vec<Alarm>, ReportError> {
    let per_channel = scope.is_none();
    let samples = labelled.iter().flat_map(|row| {
        let error = if is_overturned(&Labelled {
            p_junk: row.p_junk,
            is_junk: row.label == Label::Junk,
            verdict: row.verdict,
            bucket: 0,
        }) {
            1.0
        } else {
            0.0
        };
        let own = per_channel.then_some((Some(row.channel.as_str()), row.created_at_ms, error));
        std::iter::once((scope, row.created_at_ms, error)).chain(own)
    });
    run_detectors(
        samples,
        Detector::FeedbackErrors,
        Direction::Increase,
        settings.error_detector,
        layout,
    )
}

/// Alarms over mean `p_junk`: consecutive UTC hours are merged into
/// blocks of at least `p_junk_block` decisions, and each block's mean is
/// one sample, timed at the last millisecond of its last hour (or of the
/// current window). `hours` are both windows' tallies; the hour that holds
/// the window boundary comes in two parts and counts as one.
fn p_junk_alarms<'a>(
    hours: impl Iterator<Item = &'a HourTally>,
    scope: Option<&'a str>,
    layout: &Layout,
    settings: &ReportSettings,
) -> Result<Vec<Alarm>, ReportError> {
    // Per hour, per stream: (decisions, p_junk sum).
    let per_channel = scope.is_none();
    let mut by_hour: BTreeMap<i64, BTreeMap<Option<&str>, (i64, f64)>> = BTreeMap::new();
    for tally in hours {
        let streams = by_hour.entry(tally.hour).or_default();
        let all = streams.entry(scope).or_default();
        all.0 += tally.count;
        all.1 += tally.p_junk_sum;
        if per_channel {
            let own = streams.entry(Some(tally.channel.as_str())).or_default();
            own.0 += tally.count;
            own.1 += tally.p_junk_sum;
        }
    }
    let block = i64::from(settings.p_junk_block);
    let mut filling: BTreeMap<Option<&str>, (i64, f64)> = BTreeMap::new();
    let mut samples: Vec<(Option<&str>, i64, f64)> = Vec::new();
    for (hour, streams) in by_hour {
        let last_ms = ((hour + 1) * HOUR_MS).min(layout.end_ms) - 1;
        for (key, (count, sum)) in streams {
            let open = filling.entry(key).or_default();
            open.0 += count;
            open.1 += sum;
            if open.0 >= block {
                #[expect(
                    clippy::cast_precision_loss,
                    reason = "decision counts are far below 2^53"
                )]
                let mean = open.1 / open.0 as f64;
                samples.push((key, last_ms, mean));
                *open = (0, 0.0);
            }
        }
    }
    run_detectors(
        samples.into_iter(),
        Detector::PJunk,
        Direction::Either,
        settings.p_junk_detector,
        layout,
    )
}

fn activity_window(tallies: &[FeedbackTally], is_current: bool) -> ActivityWindow {
    let mut window = ActivityWindow {
        feedback: 0,
        junk: 0,
        fine: 0,
        corrections: 0,
        revoked: 0,
        inline: 0,
        by_moderator: Vec::new(),
    };
    let mut moderators: BTreeMap<&str, ModeratorActivity> = BTreeMap::new();
    for tally in tallies.iter().filter(|t| t.is_current == is_current) {
        let count = tally.count.unsigned_abs();
        let is_junk = tally.label == Label::Junk;
        let is_correction = tally.kind == FeedbackKind::Correction;
        window.feedback += count;
        window.junk += if is_junk { count } else { 0 };
        window.fine += if is_junk { 0 } else { count };
        window.corrections += if is_correction { count } else { 0 };
        window.revoked += if tally.is_revoked { count } else { 0 };
        window.inline += if tally.is_on_decision { 0 } else { count };
        let entry = moderators
            .entry(tally.moderator.as_str())
            .or_insert_with(|| ModeratorActivity {
                moderator: tally.moderator.clone(),
                feedback: 0,
                junk: 0,
                fine: 0,
                corrections: 0,
                revoked: 0,
            });
        entry.feedback += count;
        entry.junk += if is_junk { count } else { 0 };
        entry.fine += if is_junk { 0 } else { count };
        entry.corrections += if is_correction { count } else { 0 };
        entry.revoked += if tally.is_revoked { count } else { 0 };
    }
    window.by_moderator = moderators.into_values().collect();
    window
}

#[cfg(test)]
mod tests {
    //! Hand-worked reports on tiny windows. Every expected figure below is
    //! worked out by hand from the definitions in the report's `help` and
    //! in `chaffgate-metrics` (no outside source).

    use std::time::Duration;

    use chaffgate_metrics::PsiBand;
    use chaffgate_store::{
        DecisionId, FeedbackImport, FeedbackKind, FeedbackSeq, NewCheckpoint, NewDecision,
        PartFeature, TallyPart,
    };
    use tempfile::TempDir;

    use super::*;
    use crate::settings::DetectorSettings;

    /// 2027-01-15T08:00:00Z (GNU date: `date -u -d @1800000000`), a whole
    /// UTC hour.
    const T0: i64 = 1_800_000_000_000;
    const MINUTE: i64 = 60_000;

    async fn scratch() -> (TempDir, Store) {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(&dir.path().join("chaffgate.db")).await.unwrap();
        (dir, store)
    }

    fn decision(n: i64, at_ms: i64, channel: &str, p_junk: f64) -> NewDecision {
        let verdict = VerdictThresholds::default();
        let verdict = if p_junk >= verdict.junk {
            Verdict::Junk
        } else if p_junk >= verdict.review {
            Verdict::Review
        } else {
            Verdict::Fine
        };
        NewDecision {
            // Digits are Crockford base-32 too: a well-formed id.
            id: DecisionId::new(format!("{n:026}")),
            created_at_ms: at_ms,
            channel: channel.to_owned(),
            client_ref: None,
            content_sha256: format!("{n:064x}"),
            content: None,
            p_junk,
            verdict,
            model_seq: FeedbackSeq(n),
            reasons_json: "[]".to_owned(),
            latency_us: 10,
            input: None,
        }
    }

    fn feedback(
        at_ms: i64,
        on: Option<&NewDecision>,
        label: Label,
        moderator: &str,
    ) -> FeedbackImport {
        FeedbackImport {
            created_at_ms: at_ms,
            decision_id: on.map(|d| d.id.clone()),
            message_json: "{}".to_owned(),
            label,
            moderator: moderator.to_owned(),
            kind: FeedbackKind::Label,
            revoked_at_ms: None,
        }
    }

    /// Baseline [T0, T0 + 2h), current [T0 + 2h, T0 + 3h), two p_junk bins.
    fn request() -> ReportRequest {
        let mut request = ReportRequest::at(T0 + 180 * MINUTE);
        request.baseline = Duration::from_secs(2 * 3600);
        request.current = Duration::from_secs(3600);
        request.settings.psi_bins = 2;
        request
    }

    /// Eight decisions in the windows, one just before and one at `at`
    /// (both outside), labels with a correction, a revocation and inline
    /// feedback, a checkpoint and a model event.
    async fn small_world() -> (TempDir, Store) {
        let (dir, store) = scratch().await;
        let d = [
            decision(1, T0 + 10 * MINUTE, "mail", 0.1),
            decision(2, T0 + 20 * MINUTE, "tickets", 0.2),
            decision(3, T0 + 70 * MINUTE, "mail", 0.6),
            decision(4, T0 + 80 * MINUTE, "mail", 0.9),
            decision(5, T0 + 125 * MINUTE, "mail", 0.3),
            decision(6, T0 + 130 * MINUTE, "tickets", 0.5),
            decision(7, T0 + 135 * MINUTE, "mail", 0.7),
            decision(8, T0 + 140 * MINUTE, "mail", 1.0),
            decision(9, T0 - 1, "mail", 0.99),
            decision(10, T0 + 180 * MINUTE, "mail", 0.99),
        ];
        store.insert_decisions(&d).await.unwrap();
        let mut revoked = feedback(T0 + 25 * MINUTE, Some(&d[1]), Label::Junk, "ben");
        revoked.revoked_at_ms = Some(T0 + 150 * MINUTE);
        let mut correction = feedback(T0 + 121 * MINUTE, Some(&d[3]), Label::Junk, "ana");
        correction.kind = FeedbackKind::Correction;
        let rows = [
            feedback(T0 + 30 * MINUTE, Some(&d[0]), Label::Fine, "ana"),
            revoked,
            feedback(T0 + 75 * MINUTE, Some(&d[2]), Label::Junk, "ana"),
            feedback(T0 + 85 * MINUTE, Some(&d[3]), Label::Fine, "ben"),
            correction,
            feedback(T0 + 160 * MINUTE, Some(&d[4]), Label::Junk, "ana"),
            feedback(T0 + 161 * MINUTE, Some(&d[5]), Label::Fine, "ben"),
            feedback(T0 + 162 * MINUTE, Some(&d[6]), Label::Junk, "ana"),
            feedback(T0 + 163 * MINUTE, Some(&d[7]), Label::Junk, "ana"),
            feedback(T0 + 170 * MINUTE, None, Label::Junk, "cy"),
            // On a decision outside the windows: not a labelled decision.
            feedback(T0 + 171 * MINUTE, Some(&d[8]), Label::Fine, "cy"),
        ];
        store.insert_feedback_rows(&rows).await.unwrap();
        for (id, at_ms) in [(1, T0 - 5), (2, T0 + 90 * MINUTE)] {
            store
                .record_checkpoint(&NewCheckpoint {
                    created_at_ms: at_ms,
                    file_name: format!("model-{id}.ckpt"),
                    last_seq: FeedbackSeq(id),
                    examples_seen: id,
                    reason: "periodic".to_owned(),
                })
                .await
                .unwrap();
        }
        store
            .record_model_event("rollback", r#"{"to_checkpoint":2}"#, T0 + 165 * MINUTE)
            .await
            .unwrap();
        (dir, store)
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() < 1e-9
    }

    #[tokio::test]
    async fn scores_and_verdicts_by_hand() {
        let (_dir, store) = small_world().await;
        let report = build(&store, &request()).await.unwrap();
        assert_eq!(report.windows.baseline.start, "2027-01-15T08:00:00.000Z");
        assert_eq!(report.windows.current.start_ms, T0 + 120 * MINUTE);
        assert_eq!(report.windows.current.end, "2027-01-15T11:00:00.000Z");
        assert_eq!(report.windows.baseline.length, "2h");
        assert_eq!(report.settings.psi_bin_edges, [0.0, 0.5, 1.0]);

        let scores = &report.overall.scores;
        let (b, c) = (&scores.baseline, &scores.current);
        assert_eq!((b.decisions, c.decisions), (4, 4));
        // Baseline 0.1 0.2 0.6 0.9, current 0.3 0.5 0.7 1.0 (0.5 is in the
        // upper bin): the two samples of the metrics crate's hand-worked
        // PSI, 0.274586, and "large" from 0.25.
        assert_eq!(b.bin_counts, [2, 2]);
        assert_eq!(c.bin_counts, [1, 3]);
        let psi = scores.psi.unwrap();
        assert!((psi - 0.274_586).abs() < 1e-6, "psi = {psi}");
        assert_eq!(scores.psi_band, Some(PsiBand::Large));
        assert!(close(b.mean_p_junk.unwrap(), 0.45));
        assert!(close(c.mean_p_junk.unwrap(), 0.625));
        assert_eq!(
            (b.verdicts.junk, b.verdicts.review, b.verdicts.fine),
            (1, 1, 2)
        );
        assert_eq!(
            (c.verdicts.junk, c.verdicts.review, c.verdicts.fine),
            (1, 2, 1)
        );
        assert_eq!((b.model_seq_min, b.model_seq_max), (Some(1), Some(4)));
        // Hourly buckets: the baseline's two hours, the current one hour.
        let hours: Vec<(u64, u64, u64)> = b
            .over_time
            .iter()
            .map(|bucket| {
                (
                    bucket.verdicts.junk,
                    bucket.verdicts.review,
                    bucket.verdicts.fine,
                )
            })
            .collect();
        assert_eq!(hours, [(0, 0, 2), (1, 1, 0)]);
        assert_eq!(b.over_time[1].start, "2027-01-15T09:00:00.000Z");
        assert_eq!(c.over_time.len(), 1);
        assert_eq!(c.over_time[0].verdicts.review_share, Some(0.5));

        // Per channel: mail has the same bin shares in both windows (PSI
        // exactly 0); tickets moves its one decision from the lower bin to
        // the upper: 2 ln(1.0001 / 0.0001) = 18.42088.
        assert_eq!(report.channels.len(), 2);
        let mail = &report.channels[0];
        assert_eq!(mail.channel.as_deref(), Some("mail"));
        assert_eq!(mail.scores.psi, Some(0.0));
        let tickets = &report.channels[1];
        assert!((tickets.scores.psi.unwrap() - 18.420_88).abs() < 1e-4);

        let text = report.to_text();
        for line in [
            "drift report at 2027-01-15T11:00:00.000Z (all channels)",
            "population stability index 0.2746 (large)",
            "0.00-0.50               2          1",
            "missed-junk rate",
            "advised          0.7000",
            "tickets",
            "== alarms ==\nnone",
        ] {
            assert!(text.contains(line), "{line:?} missing in\n{text}");
        }
        store.close().await;
    }

    #[tokio::test]
    async fn quality_and_advice_by_hand() {
        let (_dir, store) = small_world().await;
        let report = build(&store, &request()).await.unwrap();
        let q = &report.overall.quality;
        // Baseline: d1 fine (judged fine), d3 junk (review), d4 junk after
        // its correction (judged junk); d2's only label is revoked.
        assert_eq!(
            (
                q.baseline.labelled,
                q.baseline.labelled_junk,
                q.baseline.labelled_fine
            ),
            (3, 2, 1)
        );
        assert_eq!(q.baseline.overturns.fine_judged_junk, 0);
        assert_eq!(q.baseline.overturns.review_labelled_junk, 1);
        assert_eq!(q.baseline.overturns.overturn_rate, Some(0.0));
        assert_eq!(q.baseline.roc_auc, Some(1.0));
        // Current: d5 junk judged fine (missed), d6 fine in review, d7 junk
        // in review, d8 junk judged junk.
        let current = &q.current;
        assert_eq!((current.labelled_junk, current.labelled_fine), (3, 1));
        assert_eq!(current.overturns.junk_judged_fine, 1);
        assert!(close(
            current.overturns.missed_junk_rate.unwrap(),
            1.0 / 3.0
        ));
        assert_eq!(current.overturns.overturn_rate, Some(0.25));
        assert_eq!(current.overturns.review_rate, Some(0.5));
        // Junk 0.3, 0.7, 1.0 against fine 0.5: two pairs of three won.
        assert!(close(current.roc_auc.unwrap(), 2.0 / 3.0));
        // (0.7² + 0.5² + 0.3² + 0²) / 4 = 0.83 / 4.
        assert!(close(current.brier.unwrap(), 0.2075));
        // -(ln 0.3 + ln 0.5 + ln 0.7 + ln 1) / 4.
        let loss = -(0.3_f64.ln() + 0.5_f64.ln() + 0.7_f64.ln()) / 4.0;
        assert!(close(current.log_loss.unwrap(), loss));
        assert_eq!(current.calibration.as_ref().unwrap().bins.len(), 10);
        assert_eq!(current.over_time[0].overturned, 1);

        // Advice at a 0.1% target on the current window: the one fine (0.5)
        // may not be flagged, so the lowest threshold is 0.7, catching 2 of
        // 3 junk; the configured 0.9 catches 1 of 3, so 1/3 more: differs.
        let advice = &report.overall.threshold_advice;
        assert_eq!(advice.fine_needed, Some(1000));
        let advised = advice.advised.unwrap();
        assert_eq!(advised.threshold, Some(0.7));
        assert_eq!((advised.junk_caught, advised.fine_judged_junk), (2, 0));
        let configured = advice.configured.unwrap();
        assert_eq!(configured.threshold, Some(0.9));
        assert!(close(configured.junk_caught_share, 1.0 / 3.0));
        assert!(advice.differs);
        // The review threshold 0.4 holds the fine one and two junk.
        let review = advice.configured_review.unwrap();
        assert_eq!((review.fine_judged_junk, review.junk_caught), (1, 2));
        // Tickets has one labelled fine and no junk in the current window.
        let tickets = &report.channels[1].threshold_advice;
        assert!(tickets.advised.is_none() && tickets.note.is_some());
        store.close().await;
    }

    #[tokio::test]
    async fn activity_by_hand() {
        let (_dir, store) = small_world().await;
        let report = build(&store, &request()).await.unwrap();
        let activity = &report.activity;
        let b = &activity.baseline;
        assert_eq!(
            (
                b.feedback,
                b.junk,
                b.fine,
                b.corrections,
                b.revoked,
                b.inline
            ),
            (4, 2, 2, 0, 1, 0)
        );
        let c = &activity.current;
        assert_eq!(
            (
                c.feedback,
                c.junk,
                c.fine,
                c.corrections,
                c.revoked,
                c.inline
            ),
            (7, 5, 2, 1, 0, 1)
        );
        let names: Vec<(&str, u64)> = c
            .by_moderator
            .iter()
            .map(|m| (m.moderator.as_str(), m.feedback))
            .collect();
        assert_eq!(names, [("ana", 4), ("ben", 1), ("cy", 2)]);
        assert_eq!(activity.checkpoints.len(), 1);
        assert_eq!(activity.checkpoints[0].window, WindowName::Baseline);
        assert_eq!(activity.model_events.len(), 1);
        assert_eq!(
            activity.model_events[0].detail,
            serde_json::json!({"to_checkpoint": 2})
        );
        assert_eq!(activity.model_events[0].window, WindowName::Current);
        assert!(report.features.is_none());
        assert!(report.alarms.is_empty());
        store.close().await;
    }

    #[tokio::test]
    async fn one_channel_only() {
        let (_dir, store) = small_world().await;
        let mut request = request();
        request.channel = Some("tickets".to_owned());
        let report = build(&store, &request).await.unwrap();
        assert!(report.channels.is_empty());
        assert_eq!(report.overall.channel.as_deref(), Some("tickets"));
        assert_eq!(report.overall.scores.baseline.decisions, 1);
        assert_eq!(report.overall.quality.current.labelled_fine, 1);
        // Feedback on tickets decisions only: the revoked label and d6's.
        assert_eq!(report.activity.baseline.feedback, 1);
        assert_eq!(report.activity.current.feedback, 1);
        store.close().await;
    }

    #[tokio::test]
    async fn alarms_fire_where_the_hand_worked_statistic_crosses_lambda() {
        // Five decisions of one channel in five separate hours, all
        // labelled fine, with p_junk 0, 0, 1, 1, 1: judged fine, fine, junk,
        // junk, junk, so the error stream is 0, 0, 1, 1, 1, and so are the
        // hourly means. With δ = 0.1 and λ = 1 the statistic after each
        // sample is 0, 0, 0.5667, 0.9667, 1.2667 (hand-worked in
        // crates/metrics/src/page_hinkley.rs): both detectors fire on the
        // fifth, for all channels and for the channel.
        let (_dir, store) = scratch().await;
        let rows: Vec<NewDecision> = [0.0, 0.0, 1.0, 1.0, 1.0]
            .iter()
            .enumerate()
            .map(|(n, &p)| {
                let n = i64::try_from(n).unwrap();
                decision(n + 1, T0 + n * HOUR_MS + 30 * MINUTE, "mail", p)
            })
            .collect();
        store.insert_decisions(&rows).await.unwrap();
        let labels: Vec<FeedbackImport> = rows
            .iter()
            .map(|d| feedback(d.created_at_ms + 1, Some(d), Label::Fine, "ana"))
            .collect();
        store.insert_feedback_rows(&labels).await.unwrap();

        let mut request = ReportRequest::at(T0 + 6 * HOUR_MS);
        request.current = Duration::from_secs(3 * 3600);
        request.baseline = Duration::from_secs(3 * 3600);
        let hand = DetectorSettings {
            delta: 0.1,
            lambda: 1.0,
            min_samples: 0,
        };
        request.settings.error_detector = hand;
        request.settings.p_junk_detector = hand;
        request.settings.p_junk_block = 1;
        let report = build(&store, &request).await.unwrap();
        let fired: Vec<(Detector, Option<&str>, i64, Shift)> = report
            .alarms
            .iter()
            .map(|a| (a.detector, a.channel.as_deref(), a.at_ms, a.shift))
            .collect();
        let fifth = T0 + 4 * HOUR_MS + 30 * MINUTE;
        let fifth_hour_end = T0 + 5 * HOUR_MS - 1;
        assert_eq!(
            fired,
            [
                (Detector::FeedbackErrors, None, fifth, Shift::Rise),
                (Detector::FeedbackErrors, Some("mail"), fifth, Shift::Rise),
                (Detector::PJunk, None, fifth_hour_end, Shift::Rise),
                (Detector::PJunk, Some("mail"), fifth_hour_end, Shift::Rise),
            ]
        );
        let alarm = &report.alarms[0];
        assert!((alarm.statistic - 1.266_666_666_666_666_7).abs() < 1e-12);
        assert_eq!((alarm.samples, alarm.mean), (5, 0.6));
        assert_eq!(alarm.window, WindowName::Current);

        // The same stream with all labels "junk" is judged wrong first and
        // right later: the error rate falls, which the error detector does
        // not watch; scores still rise.
        request.settings.p_junk_block = 1000;
        let report = build(&store, &request).await.unwrap();
        assert!(
            report
                .alarms
                .iter()
                .all(|a| a.detector == Detector::FeedbackErrors)
        );
        store.close().await;
    }

    /// One run's tally part of one hour.
    fn tally_part(hour: i64, channel: &str, sampled: u64, names: &[(&str, u64)]) -> TallyPart {
        TallyPart {
            bucket_start_ms: T0 + hour * HOUR_MS,
            channel: channel.to_owned(),
            run_id: "run-1".to_owned(),
            sampled_messages: sampled,
            unlisted_max: 0,
            updated_at_ms: T0,
            features: names
                .iter()
                .map(|(name, messages)| PartFeature {
                    feature: (*name).to_owned(),
                    slot: 7,
                    messages: *messages,
                    overcount: 0,
                    contribution_sum: 0.5 * *messages as f64,
                })
                .collect(),
        }
    }

    #[tokio::test]
    async fn feature_drift_by_hand() {
        let (_dir, store) = small_world().await;
        let (order, prize, refund) = (
            "body word \"order\"",
            "body word \"prize\"",
            "body word \"refund\"",
        );
        store
            .record_feature_tallies(&[
                tally_part(0, "mail", 10, &[(order, 6), (prize, 1)]),
                tally_part(2, "mail", 10, &[(order, 2), (prize, 8)]),
                tally_part(2, "tickets", 10, &[(refund, 7)]),
                // The hour starting at `at` is outside both windows.
                tally_part(3, "mail", 100, &[(prize, 100)]),
            ])
            .await
            .unwrap();
        let report = build(&store, &request()).await.unwrap();
        let drift = report.features.expect("tallies exist");
        assert_eq!(
            (
                drift.baseline_sampled_messages,
                drift.current_sampled_messages
            ),
            (10, 20)
        );
        // Shares by hand: refund 0/10 -> 7/20 (+0.35), prize 1/10 -> 8/20
        // (+0.3), order 6/10 -> 2/20 (-0.5).
        let rising: Vec<(&str, f64)> = drift
            .rising
            .iter()
            .map(|c| (c.feature.as_str(), c.change))
            .collect();
        assert_eq!(rising.len(), 2);
        assert_eq!((rising[0].0, rising[1].0), (refund, prize));
        assert!(close(rising[0].1, 0.35) && close(rising[1].1, 0.3));
        assert_eq!(drift.falling.len(), 1);
        assert_eq!(drift.falling[0].feature, order);
        assert!(close(drift.falling[0].change, -0.5));
        // Largest contribution in the current window: prize's 8 x 0.5.
        assert_eq!(drift.top_contributions[0].feature, prize);
        assert!(close(drift.top_contributions[0].contribution_sum, 4.0));

        // One channel: mail alone, 10 sampled in each window; prize
        // 0.1 -> 0.8, order 0.6 -> 0.2, refund not there.
        let mut mail = request();
        mail.channel = Some("mail".to_owned());
        let report = build(&store, &mail).await.unwrap();
        let drift = report.features.as_ref().unwrap();
        assert_eq!(drift.current_sampled_messages, 10);
        assert_eq!(drift.rising.len(), 1);
        assert!(close(drift.rising[0].change, 0.7));
        assert!(close(drift.falling[0].change, -0.4));
        let text = report.to_text();
        for line in [
            "sampled messages 10 -> 10",
            "rising:\n    +70.0 pts   10.0% ->  80.0%  body word \"prize\"",
            "falling:\n    -40.0 pts   60.0% ->  20.0%  body word \"order\"",
        ] {
            assert!(text.contains(line), "{line:?} missing in\n{text}");
        }

        // A channel with no tally in either window: no feature drift.
        let mut comments = request();
        comments.channel = Some("comments".to_owned());
        let report = build(&store, &comments).await.unwrap();
        assert_eq!(report.features, None);
        assert!(
            report
                .to_text()
                .contains("no feature tallies in either window")
        );
        store.close().await;
    }

    #[tokio::test]
    async fn empty_windows_give_nulls_not_errors() {
        let (_dir, store) = scratch().await;
        let report = build(&store, &ReportRequest::at(T0)).await.unwrap();
        assert_eq!(report.overall.scores.psi, None);
        assert_eq!(report.overall.scores.baseline.mean_p_junk, None);
        assert_eq!(report.overall.quality.current.roc_auc, None);
        assert!(report.overall.threshold_advice.note.is_some());
        // T0 is 08:00 UTC: the 7-day baseline touches 8 UTC days; the day
        // before T0 is 24 whole hours.
        assert_eq!(report.overall.scores.baseline.over_time.len(), 8);
        assert_eq!(report.overall.scores.current.over_time.len(), 24);
        let json = serde_json::to_value(&report).unwrap();
        assert_eq!(json["features"], serde_json::Value::Null);
        assert!(
            json["help"]["psi_band"]
                .as_str()
                .unwrap()
                .contains("no single source")
        );
        store.close().await;
    }

    #[tokio::test]
    async fn buckets_follow_utc_hours_and_days() {
        let (_dir, store) = scratch().await;
        // at = T0 + 37 min: the current day starts at 08:37 the day before,
        // so its hourly buckets run 08:37-09:00, 09:00-10:00, ...,
        // 08:00-08:37: 25 buckets. The 7-day baseline in UTC days: 8.
        let mut request = ReportRequest::at(T0 + 37 * MINUTE);
        request.settings.psi_bins = 10;
        let report = build(&store, &request).await.unwrap();
        let current = &report.overall.scores.current.over_time;
        assert_eq!(current.len(), 25);
        assert_eq!(current[0].start, "2027-01-14T08:37:00.000Z");
        assert_eq!(current[0].end_ms, T0 - 23 * HOUR_MS);
        assert_eq!(current[24].end_ms, T0 + 37 * MINUTE);
        let baseline = &report.overall.scores.baseline.over_time;
        assert_eq!(baseline.len(), 8);
        assert_eq!(baseline[1].start, "2027-01-08T00:00:00.000Z");
        store.close().await;
    }

    #[tokio::test]
    async fn bad_settings_are_refused_before_reading() {
        let (_dir, store) = scratch().await;
        let mut request = ReportRequest::at(T0);
        request.settings.psi_bins = 0;
        let err = build(&store, &request).await.unwrap_err();
        assert!(matches!(err, ReportError::InvalidRequest { .. }), "{err}");
        store.close().await;
    }
}
