//! The drift report as plain-text tables for a terminal.
//!
//! The overall scope is shown in full; each channel gets one summary line
//! (the JSON form holds every channel's full figures). Missing figures
//! print as `-`. Output is plain ASCII apart from names taken from the
//! data, and ends with a newline.

use std::fmt::Write;

use chaffgate_metrics::PsiBand;

use chaffgate_store::ShareChange;

use crate::report::{
    ActivityWindow, DriftReport, OperatingPoint, QualityWindow, ScopeReport, ScoreWindow,
    VerdictMix, Window,
};

impl DriftReport {
    /// The report as readable terminal tables.
    pub fn to_text(&self) -> String {
        let mut out = String::new();
        // Writing to a String cannot fail.
        let _ = write_report(&mut out, self);
        out
    }
}

fn num(value: Option<f64>, places: usize) -> String {
    match value {
        Some(value) => format!("{value:.places$}"),
        None => "-".to_owned(),
    }
}

fn pct(value: Option<f64>) -> String {
    match value {
        Some(value) => {
            let percent = value * 100.0;
            format!("{percent:.1}%")
        }
        None => "-".to_owned(),
    }
}

fn band_name(band: PsiBand) -> &'static str {
    match band {
        PsiBand::Stable => "stable",
        PsiBand::Moderate => "moderate",
        PsiBand::Large => "large",
    }
}

/// A header row: an empty label column, then the two windows.
fn header(out: &mut String) -> std::fmt::Result {
    let (label, baseline, current) = ("", "baseline", "current");
    writeln!(out, "{label:<34} {baseline:>14} {current:>14}")
}

fn scope_name(scope: &ScopeReport) -> String {
    match &scope.channel {
        Some(name) => format!("channel {name}"),
        None => "all channels".to_owned(),
    }
}

fn mix(verdicts: &VerdictMix) -> String {
    let junk = pct(verdicts.junk_share);
    let review = pct(verdicts.review_share);
    let fine = pct(verdicts.fine_share);
    format!("{junk} / {review} / {fine}")
}

fn window_line(out: &mut String, name: &str, window: &Window) -> std::fmt::Result {
    let Window {
        start,
        end,
        length,
        bucket,
        ..
    } = window;
    writeln!(
        out,
        "{name:<9} {start} .. {end}  ({length}, buckets of {bucket})"
    )
}

fn write_report(out: &mut String, report: &DriftReport) -> std::fmt::Result {
    let at = &report.at;
    let scope = match &report.channel {
        Some(name) => format!("channel {name}"),
        None => "all channels".to_owned(),
    };
    writeln!(out, "drift report at {at} ({scope})")?;
    window_line(out, "baseline", &report.windows.baseline)?;
    window_line(out, "current", &report.windows.current)?;
    writeln!(out)?;
    write_scope(out, report, &report.overall)?;
    if !report.channels.is_empty() {
        write_channels(out, &report.channels)?;
    }
    write_alarms(out, report)?;
    write_activity(out, report)?;
    write_features(out, report)?;
    writeln!(out, "psi bands: {}", report.help.psi_band)?;
    writeln!(out, "{}", report.help.caution)
}

fn write_scope(out: &mut String, report: &DriftReport, scope: &ScopeReport) -> std::fmt::Result {
    let name = scope_name(scope);
    let scores = &scope.scores;
    let (b, c) = (&scores.baseline, &scores.current);
    writeln!(out, "== scores, {name} ==")?;
    header(out)?;
    let row = |out: &mut String, label: &str, b: String, c: String| {
        writeln!(out, "{label:<34} {b:>14} {c:>14}")
    };
    row(
        out,
        "decisions",
        b.decisions.to_string(),
        c.decisions.to_string(),
    )?;
    row(
        out,
        "mean p_junk",
        num(b.mean_p_junk, 4),
        num(c.mean_p_junk, 4),
    )?;
    row(
        out,
        "junk share",
        pct(b.verdicts.junk_share),
        pct(c.verdicts.junk_share),
    )?;
    row(
        out,
        "review share",
        pct(b.verdicts.review_share),
        pct(c.verdicts.review_share),
    )?;
    row(
        out,
        "fine share",
        pct(b.verdicts.fine_share),
        pct(c.verdicts.fine_share),
    )?;
    let seqs = |w: &ScoreWindow| match (w.model_seq_min, w.model_seq_max) {
        (Some(min), Some(max)) => format!("{min}..{max}"),
        _ => "-".to_owned(),
    };
    row(out, "judged by model seq", seqs(b), seqs(c))?;
    let psi = num(scores.psi, 4);
    let band = match scores.psi_band {
        Some(band) => band_name(band).to_owned(),
        None => "needs decisions in both windows".to_owned(),
    };
    writeln!(out, "population stability index {psi} ({band})")?;
    writeln!(
        out,
        "{bin:<14} {baseline:>10} {current:>10} {part:>10}",
        bin = "p_junk bin",
        baseline = "baseline",
        current = "current",
        part = "psi part"
    )?;
    let edges = &report.settings.psi_bin_edges;
    for (index, pair) in edges.windows(2).enumerate() {
        let (lower, upper) = (pair[0], pair[1]);
        let label = format!("{lower:.2}-{upper:.2}");
        let part = scores.psi_bins.get(index).map(|bin| bin.contribution);
        let base = b.bin_counts.get(index).copied().unwrap_or(0);
        let cur = c.bin_counts.get(index).copied().unwrap_or(0);
        let part = num(part, 4);
        writeln!(out, "{label:<14} {base:>10} {cur:>10} {part:>10}")?;
    }
    writeln!(out)?;
    for (title, window, info) in [
        ("baseline", b, &report.windows.baseline),
        ("current", c, &report.windows.current),
    ] {
        let bucket = &info.bucket;
        writeln!(
            out,
            "verdict mix over time, {title} (buckets of {bucket}): junk / review / fine"
        )?;
        for bucket in &window.over_time {
            let start = &bucket.start;
            let decisions = bucket.decisions;
            let shares = mix(&bucket.verdicts);
            writeln!(out, "  {start}  {decisions:>9}  {shares}")?;
        }
    }
    writeln!(out)?;
    write_quality(out, report, scope)?;
    write_advice(out, scope)
}

fn write_quality(out: &mut String, report: &DriftReport, scope: &ScopeReport) -> std::fmt::Result {
    let name = scope_name(scope);
    let (b, c) = (&scope.quality.baseline, &scope.quality.current);
    writeln!(out, "== quality from feedback, {name} ==")?;
    header(out)?;
    let row = |out: &mut String, label: &str, f: &dyn Fn(&QualityWindow) -> String| {
        let (b, c) = (f(b), f(c));
        writeln!(out, "{label:<34} {b:>14} {c:>14}")
    };
    row(out, "labelled decisions", &|w| w.labelled.to_string())?;
    row(out, "labelled junk / fine", &|w| {
        let (junk, fine) = (w.labelled_junk, w.labelled_fine);
        format!("{junk} / {fine}")
    })?;
    row(out, "fine judged junk", &|w| {
        w.overturns.fine_judged_junk.to_string()
    })?;
    row(out, "false-junk rate", &|w| {
        pct(w.overturns.false_junk_rate)
    })?;
    row(out, "junk judged fine", &|w| {
        w.overturns.junk_judged_fine.to_string()
    })?;
    row(out, "missed-junk rate", &|w| {
        pct(w.overturns.missed_junk_rate)
    })?;
    row(out, "overturn rate", &|w| pct(w.overturns.overturn_rate))?;
    row(out, "review labelled junk / fine", &|w| {
        let (junk, fine) = (
            w.overturns.review_labelled_junk,
            w.overturns.review_labelled_fine,
        );
        format!("{junk} / {fine}")
    })?;
    row(out, "ROC AUC", &|w| num(w.roc_auc, 4))?;
    row(out, "log loss", &|w| num(w.log_loss, 4))?;
    row(out, "Brier score", &|w| num(w.brier, 4))?;
    row(out, "expected calibration error", &|w| {
        num(w.calibration.as_ref().map(|t| t.ece), 4)
    })?;
    if let Some(table) = &c.calibration {
        writeln!(
            out,
            "reliability, current: {bin:<11} {labelled:>8} {mean:>12} {rate:>10}",
            bin = "p_junk bin",
            labelled = "labelled",
            mean = "mean p_junk",
            rate = "junk rate"
        )?;
        for bin in &table.bins {
            let label = format!("{:.2}-{:.2}", bin.lower, bin.upper);
            let count = bin.count;
            let mean = num(bin.mean_p_junk, 4);
            let rate = pct(bin.junk_rate);
            writeln!(
                out,
                "{blank:<21} {label:<11} {count:>8} {mean:>12} {rate:>10}",
                blank = ""
            )?;
        }
    }
    for (title, window, info) in [
        ("baseline", b, &report.windows.baseline),
        ("current", c, &report.windows.current),
    ] {
        let bucket = &info.bucket;
        writeln!(
            out,
            "overturns over time, {title} (buckets of {bucket}): overturned / labelled"
        )?;
        for bucket in window.over_time.iter().filter(|b| b.labelled > 0) {
            let start = &bucket.start;
            let (overturned, labelled) = (bucket.overturned, bucket.labelled);
            let rate = pct(bucket.overturn_rate);
            writeln!(out, "  {start}  {overturned:>7} / {labelled:<7} {rate:>7}")?;
        }
    }
    writeln!(out)
}

fn write_advice(out: &mut String, scope: &ScopeReport) -> std::fmt::Result {
    let advice = &scope.threshold_advice;
    let name = scope_name(scope);
    let target = pct(Some(advice.false_junk_target));
    writeln!(
        out,
        "== junk threshold advice, {name} (current window, false-junk target {target}) =="
    )?;
    if let Some(note) = &advice.note {
        writeln!(out, "no advice: {note}")?;
        return writeln!(out);
    }
    writeln!(
        out,
        "{blank:<12} {threshold:>10} {fine:>18} {junk:>18}",
        blank = "",
        threshold = "threshold",
        fine = "false junk",
        junk = "junk caught"
    )?;
    let line = |out: &mut String, label: &str, point: &Option<OperatingPoint>| {
        let Some(point) = point else {
            return Ok(());
        };
        let threshold = match point.threshold {
            Some(t) => format!("{t:.4}"),
            None => "none".to_owned(),
        };
        let (fine_rate, fine_count) = (pct(Some(point.false_junk_rate)), point.fine_judged_junk);
        let fine = format!("{fine_rate} ({fine_count})");
        let (junk_rate, junk_count) = (pct(Some(point.junk_caught_share)), point.junk_caught);
        let junk = format!("{junk_rate} ({junk_count})");
        writeln!(out, "{label:<12} {threshold:>10} {fine:>18} {junk:>18}")
    };
    line(out, "configured", &advice.configured)?;
    line(out, "review", &advice.configured_review)?;
    line(out, "advised", &advice.advised)?;
    let differs = if advice.differs { "yes" } else { "no" };
    let (junk, fine) = (advice.labelled_junk, advice.labelled_fine);
    writeln!(
        out,
        "differs materially: {differs} (from {junk} labelled junk and {fine} labelled fine)"
    )?;
    if let Some(needed) = advice.fine_needed
        && fine < needed
    {
        writeln!(
            out,
            "fewer than {needed} labelled fine: the advice can only avoid every false junk seen"
        )?;
    }
    writeln!(out)
}

fn write_channels(out: &mut String, channels: &[ScopeReport]) -> std::fmt::Result {
    writeln!(out, "== per channel (baseline -> current) ==")?;
    writeln!(
        out,
        "{channel:<16} {decisions:>19} {psi:>16} {overturn:>17} {missed:>17} {advice:>8}",
        channel = "channel",
        decisions = "decisions",
        psi = "psi",
        overturn = "overturn rate",
        missed = "missed junk",
        advice = "advice"
    )?;
    for scope in channels {
        let name = scope.channel.as_deref().unwrap_or("-");
        let scores = &scope.scores;
        let (before, after) = (scores.baseline.decisions, scores.current.decisions);
        let decisions = format!("{before} -> {after}");
        let psi = match scores.psi_band {
            Some(band) => {
                let value = num(scores.psi, 3);
                let band = band_name(band);
                format!("{value} {band}")
            }
            None => "-".to_owned(),
        };
        let q = &scope.quality;
        let change = |f: &dyn Fn(&QualityWindow) -> Option<f64>| {
            let (before, after) = (pct(f(&q.baseline)), pct(f(&q.current)));
            format!("{before} -> {after}")
        };
        let overturn = change(&|w| w.overturns.overturn_rate);
        let missed = change(&|w| w.overturns.missed_junk_rate);
        let advice = match (&scope.threshold_advice.note, scope.threshold_advice.differs) {
            (Some(_), _) => "-",
            (None, true) => "differs",
            (None, false) => "agrees",
        };
        writeln!(
            out,
            "{name:<16} {decisions:>19} {psi:>16} {overturn:>17} {missed:>17} {advice:>8}"
        )?;
    }
    writeln!(out)
}

fn write_alarms(out: &mut String, report: &DriftReport) -> std::fmt::Result {
    writeln!(out, "== alarms ==")?;
    if report.alarms.is_empty() {
        writeln!(out, "none")?;
    }
    for alarm in &report.alarms {
        let at = &alarm.at;
        let detector = alarm.detector.as_str();
        let channel = alarm.channel.as_deref().unwrap_or("all");
        let window = alarm.window.as_str();
        let shift = alarm.shift.as_str();
        let statistic = alarm.statistic;
        let samples = alarm.samples;
        let mean = alarm.mean;
        writeln!(
            out,
            "{at}  {detector:<14} channel {channel:<12} {window:<8} {shift:<4} \
             statistic {statistic:.3} after {samples} samples, mean {mean:.4}"
        )?;
    }
    writeln!(out)
}

fn write_activity(out: &mut String, report: &DriftReport) -> std::fmt::Result {
    let activity = &report.activity;
    writeln!(
        out,
        "== learning activity (feedback by the time it was given) =="
    )?;
    header(out)?;
    let (b, c) = (&activity.baseline, &activity.current);
    let row = |out: &mut String, label: &str, f: &dyn Fn(&ActivityWindow) -> u64| {
        let (b, c) = (f(b), f(c));
        writeln!(out, "{label:<34} {b:>14} {c:>14}")
    };
    row(out, "feedback rows", &|w| w.feedback)?;
    row(out, "labelled junk", &|w| w.junk)?;
    row(out, "labelled fine", &|w| w.fine)?;
    row(out, "corrections", &|w| w.corrections)?;
    row(out, "revoked since", &|w| w.revoked)?;
    row(out, "on inline messages", &|w| w.inline)?;
    for (title, window) in [("baseline", b), ("current", c)] {
        if window.by_moderator.is_empty() {
            continue;
        }
        writeln!(
            out,
            "moderators, {title}: feedback (junk / fine, corrections, revoked)"
        )?;
        for moderator in &window.by_moderator {
            let name = &moderator.moderator;
            let (all, junk, fine) = (moderator.feedback, moderator.junk, moderator.fine);
            let (corrections, revoked) = (moderator.corrections, moderator.revoked);
            writeln!(
                out,
                "  {name:<24} {all:>8} ({junk} / {fine}, {corrections}, {revoked})"
            )?;
        }
    }
    writeln!(out, "checkpoints: {}", activity.checkpoints.len())?;
    for checkpoint in &activity.checkpoints {
        let at = &checkpoint.at;
        let (seq, seen) = (checkpoint.last_seq, checkpoint.examples_seen);
        let reason = &checkpoint.reason;
        let deleted = if checkpoint.is_deleted {
            ", file deleted"
        } else {
            ""
        };
        writeln!(
            out,
            "  {at}  up to seq {seq}, {seen} examples, {reason}{deleted}"
        )?;
    }
    writeln!(out, "model events: {}", activity.model_events.len())?;
    for event in &activity.model_events {
        let at = &event.at;
        let kind = &event.kind;
        let detail = &event.detail;
        writeln!(out, "  {at}  {kind} {detail}")?;
    }
    writeln!(out)
}

fn write_features(out: &mut String, report: &DriftReport) -> std::fmt::Result {
    writeln!(
        out,
        "== feature drift (share of sampled messages, baseline -> current) =="
    )?;
    let Some(drift) = &report.features else {
        writeln!(out, "no feature tallies in either window")?;
        return writeln!(out);
    };
    let (before, after) = (
        drift.baseline_sampled_messages,
        drift.current_sampled_messages,
    );
    let min = drift.min_messages;
    writeln!(
        out,
        "sampled messages {before} -> {after}; names in at least {min} sampled messages"
    )?;
    let list = |out: &mut String, title: &str, changes: &[ShareChange]| {
        writeln!(out, "{title}:")?;
        if changes.is_empty() {
            writeln!(out, "  none")?;
        }
        for change in changes {
            let points = change.change * 100.0;
            let (from, to) = (
                pct(Some(change.baseline_share)),
                pct(Some(change.current_share)),
            );
            let name = &change.feature;
            writeln!(out, "  {points:>+7.1} pts  {from:>6} -> {to:>6}  {name}")?;
        }
        Ok(())
    };
    list(out, "rising", &drift.rising)?;
    list(out, "falling", &drift.falling)?;
    writeln!(out, "largest contributions, current window:")?;
    for rank in &drift.top_contributions {
        let (sum, messages, name) = (rank.contribution_sum, rank.messages, &rank.feature);
        writeln!(out, "  {sum:>+9.3} over {messages:>6} messages  {name}")?;
    }
    writeln!(out)
}
