//! The drift report page: `GET /reports` (the shell) and `GET /reports/view`
//! (the report as an HTML fragment; role `operate`).
//!
//! The fragment takes the query of `GET /v1/reports/drift` (`baseline`,
//! `current`, `channel`, `at`), read by the same code, except that a blank
//! value counts as absent, as a form sends a field left empty. It renders
//! the report on the server: tables, and charts drawn here as inline SVG
//! (no external asset, so the page works offline):
//!
//! | chart | marks (for tests and styles) |
//! | --- | --- |
//! | `p_junk` histograms of both windows, overlaid | `rect.bar[data-window]`, one per bin and window |
//! | verdict mix per time bucket, stacked | `g.mix-bar`, one per bucket of both windows |
//! | reliability diagram against the diagonal | `circle.reliability-point`, one per non-empty bin |
//! | overturn rate per time bucket | `circle.overturn-point`, one per bucket with labels |
//! | top drifting features, rise and fall | `rect.feature-bar[data-direction]` |
//!
//! Every chart has a title, axis titles with units, an SVG `<title>` and
//! `<desc>` it is labelled by, and the same figures in a table beside it.
//! A chart with nothing to draw says so in words instead.
//!
//! What must stay true: every name from the database or the request
//! (channels, features, moderators, reasons) goes through
//! [`push_escaped`]; colours come from classes in `reports.css`, never
//! from style attributes (the shell's CSP allows no inline style).

use std::fmt::Write;

use axum::extract::State;
use axum::response::Response;
use chaffgate_metrics::{Calibration, PsiBand};
use chaffgate_report::{DriftReport, OperatingPoint, QualityWindow, ShareChange, WindowName};
use chaffgate_store::Role;

use super::{Access, Shell, push_escaped, utc_time};
use crate::error::{ApiError, ApiQuery};
use crate::reports::{DriftQuery, report_for};
use crate::state::AppState;

/// Where the shell is served.
pub const PATH: &str = "/reports";

/// Where the report fragment is served.
pub const VIEW_PATH: &str = "/reports/view";

/// The page's own styles; their colours are in [`super::PALETTE`].
pub(crate) const STYLE: &str = include_str!("reports.css");

/// The page's own script: the window form reloads the fragment.
const SCRIPT: &str = include_str!("reports.js");

/// Help above the report: what it is for, and a caution.
const LEAD: &str = r#"<section class="cg-lead">
<p>How the scores, verdicts and moderators' labels of a current window compare with a baseline window just before it, and whether the model kept up. Change the windows or the channel below the heading.</p>
<p class="cg-caution"><strong>Take care:</strong> automatic filtering can hide legitimate messages. Keep a review band so that uncertain messages reach a person, check overturned verdicts before moving a threshold, and follow your organisation's retention and privacy rules and local law for what is kept and shown.</p>
</section>"#;

/// `GET /reports`: the shell, served without a token.
pub async fn page(State(state): State<AppState>) -> Response {
    let access = if state.tokens().is_empty() {
        Access::Open
    } else {
        Access::Tokens
    };
    let page = Shell {
        title: "Drift report",
        fragment_url: VIEW_PATH,
        role: Role::Operate,
        lead_html: LEAD,
        script: SCRIPT,
        style: STYLE,
    };
    super::shell(&page, access)
}

/// `GET /reports/view`: the report as HTML.
pub async fn view(
    State(state): State<AppState>,
    ApiQuery(query): ApiQuery<DriftQuery>,
) -> Result<Response, ApiError> {
    let query = query.without_empty();
    let report = report_for(&state, &query).await?;
    Ok(super::fragment(render(&report, query.at.as_deref())))
}

/// The whole fragment. `at_text` is the `at` the request gave, if any, to
/// keep in the form (empty means "now").
pub(crate) fn render(report: &DriftReport, at_text: Option<&str>) -> String {
    let mut html = String::with_capacity(64 * 1024);
    // Writing to a String cannot fail.
    let _ = write_report(&mut html, report, at_text);
    html
}

type Out = std::fmt::Result;

fn write_report(html: &mut String, report: &DriftReport, at_text: Option<&str>) -> Out {
    html.push_str(r#"<article class="rp-report" aria-labelledby="rp-title">"#);
    html.push_str(r#"<h2 id="rp-title" tabindex="-1">Report at "#);
    let (at, datetime) = utc_time(report.at_ms);
    write!(html, r#"<time datetime="{datetime}">{at}</time>, "#)?;
    push_escaped(html, &scope_name(report.channel.as_deref()));
    html.push_str("</h2>");
    write_windows(html, report)?;
    write_form(html, report, at_text);
    write_scores(html, report)?;
    write_verdict_mix(html, report)?;
    write_quality(html, report)?;
    write_advice(html, report)?;
    write_alarms(html, report)?;
    write_features(html, report)?;
    write_activity(html, report)?;
    write_channels(html, report)?;
    html.push_str("</article>");
    Ok(())
}

fn scope_name(channel: Option<&str>) -> String {
    match channel {
        Some(name) => format!("channel {name}"),
        None => "all channels".to_owned(),
    }
}

/// A share as a percentage with one decimal, or `n/a`.
fn pct(value: Option<f64>) -> String {
    match value {
        Some(value) => {
            let percent = value * 100.0;
            format!("{percent:.1}%")
        }
        None => "n/a".to_owned(),
    }
}

fn num(value: Option<f64>, places: usize) -> String {
    match value {
        Some(value) => format!("{value:.places$}"),
        None => "n/a".to_owned(),
    }
}

fn ratio(part: u64, whole: u64) -> Option<f64> {
    (whole > 0).then(|| part as f64 / whole as f64)
}

/// `2027-01-15 08:00` for axis labels.
fn short_time(ms: i64) -> String {
    let (text, _) = utc_time(ms);
    text.get(..16).unwrap_or(&text).to_owned()
}

fn no_data(html: &mut String, text: &str) {
    html.push_str(r#"<p class="rp-nodata">"#);
    push_escaped(html, text);
    html.push_str("</p>");
}

fn section_start(html: &mut String, id: &str, title: &str) {
    let _ = write!(
        html,
        r#"<section class="rp-section" aria-labelledby="{id}"><h3 id="{id}">{title}</h3>"#
    );
}

fn write_windows(html: &mut String, report: &DriftReport) -> Out {
    html.push_str(r#"<dl class="rp-windows">"#);
    for (name, window) in [
        ("Baseline", &report.windows.baseline),
        ("Current", &report.windows.current),
    ] {
        let (start, start_dt) = utc_time(window.start_ms);
        let (end, end_dt) = utc_time(window.end_ms);
        write!(
            html,
            r#"<div><dt>{name}</dt><dd><time datetime="{start_dt}">{start}</time> to <time datetime="{end_dt}">{end}</time> ("#
        )?;
        push_escaped(html, &window.length);
        html.push_str(", buckets of ");
        push_escaped(html, &window.bucket);
        html.push_str(")</dd></div>");
    }
    html.push_str("</dl>");
    Ok(())
}

/// The window form: a GET form whose submission the page's script turns
/// into a new fragment load.
fn write_form(html: &mut String, report: &DriftReport, at_text: Option<&str>) {
    let field = |html: &mut String, name: &str, label: &str, value: &str, help: &str| {
        let _ = write!(
            html,
            r#"<div><label for="rp-{name}">{label}</label><input id="rp-{name}" name="{name}" value=""#
        );
        push_escaped(html, value);
        let _ = write!(
            html,
            r#"" aria-describedby="rp-{name}-help" spellcheck="false"><span id="rp-{name}-help" class="cg-help">{help}</span></div>"#
        );
    };
    html.push_str(&format!(
        r#"<form class="rp-filters" method="get" action="{PATH}" aria-label="Windows and channel">"#
    ));
    field(
        html,
        "baseline",
        "Baseline length",
        &report.windows.baseline.length,
        "e.g. 7d, 24h, 90m, 3600s",
    );
    field(
        html,
        "current",
        "Current length",
        &report.windows.current.length,
        "ends at the time below",
    );
    field(
        html,
        "channel",
        "Channel",
        report.channel.as_deref().unwrap_or(""),
        "empty: every channel",
    );
    field(
        html,
        "at",
        "End of the current window",
        at_text.unwrap_or(""),
        "RFC 3339 or ms since 1970; empty: now",
    );
    html.push_str(r#"<div><button type="submit">Show</button></div></form>"#);
}

/// The drawing area of a chart, in SVG user units.
#[derive(Debug, Clone, Copy)]
struct Plot {
    width: f64,
    height: f64,
    left: f64,
    right: f64,
    top: f64,
    bottom: f64,
}

impl Plot {
    const fn new(width: f64, height: f64) -> Plot {
        Plot {
            width,
            height,
            left: 64.0,
            right: 16.0,
            top: 16.0,
            bottom: 56.0,
        }
    }

    fn inner_width(&self) -> f64 {
        self.width - self.left - self.right
    }

    fn inner_height(&self) -> f64 {
        self.height - self.top - self.bottom
    }

    /// The y coordinate of `value` on a scale from 0 to `max`.
    fn y(&self, value: f64, max: f64) -> f64 {
        let share = if max > 0.0 { value / max } else { 0.0 };
        self.top + self.inner_height() * (1.0 - share.clamp(0.0, 1.0))
    }

    fn x(&self, share: f64) -> f64 {
        self.left + self.inner_width() * share.clamp(0.0, 1.0)
    }

    fn bottom_y(&self) -> f64 {
        self.height - self.bottom
    }
}

/// Opens an SVG labelled by its `<title>` and `<desc>`.
fn svg_start(html: &mut String, id: &str, plot: &Plot, title: &str, desc: &str) {
    let (width, height) = (plot.width, plot.height);
    let _ = write!(
        html,
        r#"<svg class="rp-svg" id="{id}" viewBox="0 0 {width} {height}" role="img" aria-labelledby="{id}-t {id}-d"><title id="{id}-t">"#
    );
    push_escaped(html, title);
    let _ = write!(html, r#"</title><desc id="{id}-d">"#);
    push_escaped(html, desc);
    html.push_str("</desc>");
}

/// Axes with percentage ticks on y (0 to `max`) and axis titles.
fn axes(html: &mut String, plot: &Plot, y_max: f64, x_title: &str, y_title: &str) {
    let (left, right, bottom) = (plot.left, plot.width - plot.right, plot.bottom_y());
    for step in 0..=4 {
        let value = y_max * f64::from(step) / 4.0;
        let y = plot.y(value, y_max);
        let label = pct(Some(value));
        let _ = write!(
            html,
            r#"<line class="rp-grid" x1="{left}" x2="{right}" y1="{y:.1}" y2="{y:.1}"/><text class="rp-tick" x="{tx:.1}" y="{ty:.1}" text-anchor="end">{label}</text>"#,
            tx = left - 6.0,
            ty = y + 4.0,
        );
    }
    let _ = write!(
        html,
        r#"<line class="rp-axis" x1="{left}" x2="{right}" y1="{bottom}" y2="{bottom}"/><line class="rp-axis" x1="{left}" x2="{left}" y1="{top}" y2="{bottom}"/>"#,
        top = plot.top,
    );
    let _ = write!(
        html,
        r#"<text class="rp-axis-title" x="{x:.1}" y="{y:.1}" text-anchor="middle">"#,
        x = plot.left + plot.inner_width() / 2.0,
        y = plot.height - 8.0,
    );
    push_escaped(html, x_title);
    let _ = write!(
        html,
        r#"</text><text class="rp-axis-title" transform="translate(14 {y:.1}) rotate(-90)" text-anchor="middle">"#,
        y = plot.top + plot.inner_height() / 2.0,
    );
    push_escaped(html, y_title);
    html.push_str("</text>");
}

/// `max` rounded up to a tenth, at least 0.1 and at most 1.
fn nice_max(max: f64) -> f64 {
    ((max * 10.0).ceil() / 10.0).clamp(0.1, 1.0)
}

fn figure_start(html: &mut String, caption: &str) {
    html.push_str(r#"<figure class="rp-figure"><figcaption>"#);
    push_escaped(html, caption);
    html.push_str("</figcaption>");
}

fn legend(html: &mut String, keys: &[(&str, &str)]) {
    html.push_str(r#"<ul class="rp-legend">"#);
    for (class, text) in keys {
        let _ = write!(
            html,
            r#"<li><span class="rp-key {class}" aria-hidden="true"></span>{text}</li>"#
        );
    }
    html.push_str("</ul>");
}

fn write_scores(html: &mut String, report: &DriftReport) -> Out {
    let scores = &report.overall.scores;
    section_start(html, "rp-scores-title", "Spread of p_junk");
    html.push_str(r#"<table class="rp-table"><caption>Population stability index, current window against baseline</caption><tbody>"#);
    let band = match scores.psi_band {
        Some(PsiBand::Stable) => "stable",
        Some(PsiBand::Moderate) => "moderate",
        Some(PsiBand::Large) => "large",
        None => "needs decisions in both windows",
    };
    let psi = num(scores.psi, 4);
    let band_class = match scores.psi_band {
        Some(PsiBand::Large) => " rp-flag",
        _ => "",
    };
    write!(
        html,
        r#"<tr><th scope="row">PSI</th><td>{psi}</td></tr><tr><th scope="row">Band</th><td class="rp-band{band_class}">{band}</td></tr>"#
    )?;
    let (b, c) = (&scores.baseline, &scores.current);
    write!(
        html,
        r#"<tr><th scope="row">Decisions, baseline / current</th><td>{bd} / {cd}</td></tr><tr><th scope="row">Mean p_junk, baseline / current</th><td>{bm} / {cm}</td></tr></tbody></table>"#,
        bd = b.decisions,
        cd = c.decisions,
        bm = num(b.mean_p_junk, 4),
        cm = num(c.mean_p_junk, 4),
    )?;
    html.push_str(r#"<p class="cg-help">"#);
    push_escaped(html, report.help.psi);
    html.push_str(" Bands: ");
    push_escaped(html, report.help.psi_band);
    html.push_str("</p>");
    histogram(html, report)?;
    html.push_str("</section>");
    Ok(())
}

/// Chart (a): the share of each window's decisions per `p_junk` bin, the
/// baseline as outlined bars and the current window as narrower filled
/// bars over them.
fn histogram(html: &mut String, report: &DriftReport) -> Out {
    let edges = &report.settings.psi_bin_edges;
    let bins = edges.len().saturating_sub(1);
    let scores = &report.overall.scores;
    let windows = [
        (WindowName::Baseline, &scores.baseline),
        (WindowName::Current, &scores.current),
    ];
    figure_start(html, "p_junk histogram, both windows");
    if windows.iter().all(|(_, w)| w.decisions == 0) || bins == 0 {
        no_data(
            html,
            "No decisions in either window: there is no p_junk spread to draw.",
        );
        html.push_str("</figure>");
        return Ok(());
    }
    for (name, window) in &windows {
        if window.decisions == 0 {
            no_data(
                html,
                &format!(
                    "The {name} window has no decisions; only the other window is drawn.",
                    name = name.as_str()
                ),
            );
        }
    }
    let share = |counts: &[u64], decisions: u64, bin: usize| {
        ratio(counts.get(bin).copied().unwrap_or(0), decisions)
    };
    let max = windows
        .iter()
        .flat_map(|(_, w)| (0..bins).filter_map(|bin| share(&w.bin_counts, w.decisions, bin)))
        .fold(0.0, f64::max);
    let y_max = nice_max(max);
    let plot = Plot::new(640.0, 280.0);
    svg_start(
        html,
        "rp-hist",
        &plot,
        "p_junk histogram of the baseline and current windows",
        &format!(
            "Bars per p_junk bin ({bins} bins): the share of each window's decisions in the bin. \
             Baseline outlined, current filled. The table below lists the same figures."
        ),
    );
    axes(
        html,
        &plot,
        y_max,
        "p_junk bin (0 to 1)",
        "share of the window's decisions (%)",
    );
    let slot = plot.inner_width() / bins as f64;
    for (name, window) in &windows {
        if window.decisions == 0 {
            continue;
        }
        let (inset, class) = match name {
            WindowName::Baseline => (0.08, "baseline"),
            WindowName::Current => (0.28, "current"),
        };
        for bin in 0..bins {
            let value = share(&window.bin_counts, window.decisions, bin).unwrap_or(0.0);
            let x = plot.left + slot * (bin as f64 + inset);
            let width = slot * (1.0 - 2.0 * inset);
            let y = plot.y(value, y_max);
            let height = plot.bottom_y() - y;
            let (lower, upper) = (edges[bin], edges[bin + 1]);
            let count = window.bin_counts.get(bin).copied().unwrap_or(0);
            let shown = pct(Some(value));
            write!(
                html,
                r#"<rect class="bar" data-window="{class}" x="{x:.2}" y="{y:.2}" width="{width:.2}" height="{height:.2}"><title>{class}, p_junk {lower:.2} to {upper:.2}: {shown} ({count} decisions)</title></rect>"#
            )?;
        }
    }
    // Edge labels, at most about ten.
    let every = bins.div_ceil(10).max(1);
    for (index, edge) in edges.iter().enumerate() {
        if index % every != 0 && index != bins {
            continue;
        }
        let x = plot.left + slot * index as f64;
        write!(
            html,
            r#"<text class="rp-tick" x="{x:.1}" y="{y:.1}" text-anchor="middle">{edge:.2}</text>"#,
            y = plot.bottom_y() + 16.0,
        )?;
    }
    html.push_str("</svg>");
    legend(
        html,
        &[
            ("rp-key-baseline", "baseline (outlined)"),
            ("rp-key-current", "current (filled)"),
        ],
    );
    html.push_str(r#"<table class="rp-table"><caption>Decisions per p_junk bin</caption><thead><tr><th scope="col">p_junk bin</th><th scope="col">baseline</th><th scope="col">baseline share</th><th scope="col">current</th><th scope="col">current share</th><th scope="col">PSI part</th></tr></thead><tbody>"#);
    let (b, c) = (&scores.baseline, &scores.current);
    for bin in 0..bins {
        let (lower, upper) = (edges[bin], edges[bin + 1]);
        let bc = b.bin_counts.get(bin).copied().unwrap_or(0);
        let cc = c.bin_counts.get(bin).copied().unwrap_or(0);
        let part = num(scores.psi_bins.get(bin).map(|p| p.contribution), 4);
        write!(
            html,
            r#"<tr><th scope="row">{lower:.2} to {upper:.2}</th><td>{bc}</td><td>{bs}</td><td>{cc}</td><td>{cs}</td><td>{part}</td></tr>"#,
            bs = pct(ratio(bc, b.decisions)),
            cs = pct(ratio(cc, c.decisions)),
        )?;
    }
    html.push_str("</tbody></table></figure>");
    Ok(())
}

fn write_verdict_mix(html: &mut String, report: &DriftReport) -> Out {
    let scores = &report.overall.scores;
    section_start(html, "rp-mix-title", "Verdict mix over time");
    html.push_str(r#"<p class="cg-help">"#);
    push_escaped(html, report.help.verdicts);
    html.push_str("</p>");
    let buckets: Vec<(&str, &chaffgate_report::VerdictBucket)> = scores
        .baseline
        .over_time
        .iter()
        .map(|bucket| ("baseline", bucket))
        .chain(
            scores
                .current
                .over_time
                .iter()
                .map(|bucket| ("current", bucket)),
        )
        .collect();
    figure_start(html, "Verdict mix per time bucket, both windows");
    if buckets.iter().all(|(_, bucket)| bucket.decisions == 0) {
        no_data(
            html,
            "No decisions in either window: there is no verdict mix to draw.",
        );
        html.push_str("</figure></section>");
        return Ok(());
    }
    let plot = Plot::new(640.0, 280.0);
    let count = buckets.len();
    svg_start(
        html,
        "rp-mix",
        &plot,
        "Verdict mix per time bucket",
        &format!(
            "Stacked bars, one per time bucket ({count} buckets, baseline then current): the \
             shares of junk (bottom), review (middle) and fine (top) verdicts. Empty buckets \
             have no bar. The table below lists the same figures."
        ),
    );
    let bucket_text = &report.windows.current.bucket;
    axes(
        html,
        &plot,
        1.0,
        &format!("time (UTC), buckets of {bucket_text} for the current window"),
        "share of the bucket's decisions (%)",
    );
    let slot = plot.inner_width() / count as f64;
    let gap = (slot * 0.15).min(4.0);
    for (index, (window, bucket)) in buckets.iter().enumerate() {
        let x = plot.left + slot * index as f64 + gap / 2.0;
        let width = (slot - gap).max(0.5);
        write!(html, r#"<g class="mix-bar" data-window="{window}">"#)?;
        let (start, _) = utc_time(bucket.start_ms);
        let decisions = bucket.decisions;
        let mix = &bucket.verdicts;
        write!(
            html,
            "<title>{window}, from {start}: {decisions} decisions, junk {junk}, review {review}, fine {fine}</title>",
            junk = pct(mix.junk_share),
            review = pct(mix.review_share),
            fine = pct(mix.fine_share),
        )?;
        let mut below = 0.0;
        for (class, part) in [
            ("mix-junk", mix.junk_share),
            ("mix-review", mix.review_share),
            ("mix-fine", mix.fine_share),
        ] {
            let Some(part) = part else { continue };
            if part <= 0.0 {
                continue;
            }
            let y_top = plot.y(below + part, 1.0);
            let height = plot.y(below, 1.0) - y_top;
            write!(
                html,
                r#"<rect class="{class}" x="{x:.2}" y="{y_top:.2}" width="{width:.2}" height="{height:.2}"/>"#
            )?;
            below += part;
        }
        html.push_str("</g>");
    }
    // Where the current window starts, and the ends' times.
    let split = scores.baseline.over_time.len();
    let split_x = plot.left + slot * split as f64;
    write!(
        html,
        r#"<line class="rp-divider" x1="{split_x:.1}" x2="{split_x:.1}" y1="{top}" y2="{bottom}"/>"#,
        top = plot.top,
        bottom = plot.bottom_y(),
    )?;
    let label_y = plot.bottom_y() + 16.0;
    let first = buckets.first().map(|(_, b)| b.start_ms).unwrap_or(0);
    let last = buckets.last().map(|(_, b)| b.end_ms).unwrap_or(0);
    for (x, anchor, ms) in [
        (plot.left, "start", first),
        (split_x, "middle", report.windows.current.start_ms),
        (plot.width - plot.right, "end", last),
    ] {
        let text = short_time(ms);
        write!(
            html,
            r#"<text class="rp-tick" x="{x:.1}" y="{label_y:.1}" text-anchor="{anchor}">{text}</text>"#
        )?;
    }
    html.push_str("</svg>");
    legend(
        html,
        &[
            ("rp-key-junk", "junk"),
            ("rp-key-review", "review"),
            ("rp-key-fine", "fine"),
        ],
    );
    html.push_str(r#"<details><summary>Verdict mix per bucket as a table</summary><table class="rp-table"><thead><tr><th scope="col">window</th><th scope="col">bucket start (UTC)</th><th scope="col">decisions</th><th scope="col">junk</th><th scope="col">review</th><th scope="col">fine</th></tr></thead><tbody>"#);
    for (window, bucket) in &buckets {
        let (start, _) = utc_time(bucket.start_ms);
        let mix = &bucket.verdicts;
        write!(
            html,
            "<tr><td>{window}</td><td>{start}</td><td>{decisions}</td><td>{junk}</td><td>{review}</td><td>{fine}</td></tr>",
            decisions = bucket.decisions,
            junk = pct(mix.junk_share),
            review = pct(mix.review_share),
            fine = pct(mix.fine_share),
        )?;
    }
    html.push_str("</tbody></table></details></figure></section>");
    Ok(())
}

/// One figure of a quality window, as shown.
type WindowFigure = dyn Fn(&QualityWindow) -> String;

fn write_quality(html: &mut String, report: &DriftReport) -> Out {
    let quality = &report.overall.quality;
    section_start(html, "rp-quality-title", "Quality from moderators' labels");
    html.push_str(r#"<p class="cg-help">"#);
    push_escaped(html, report.help.quality);
    html.push(' ');
    push_escaped(html, report.help.overturns);
    html.push_str("</p>");
    html.push_str(r#"<table class="rp-table"><caption>Quality per window</caption><thead><tr><th scope="col">figure</th><th scope="col">baseline</th><th scope="col">current</th></tr></thead><tbody>"#);
    let (b, c) = (&quality.baseline, &quality.current);
    let rows: [(&str, &WindowFigure); 12] = [
        ("labelled decisions", &|w| w.labelled.to_string()),
        ("labelled junk / fine", &|w| {
            format!(
                "{junk} / {fine}",
                junk = w.labelled_junk,
                fine = w.labelled_fine
            )
        }),
        ("fine judged junk (false junk)", &|w| {
            w.overturns.fine_judged_junk.to_string()
        }),
        ("false-junk rate", &|w| pct(w.overturns.false_junk_rate)),
        ("junk judged fine (missed junk)", &|w| {
            w.overturns.junk_judged_fine.to_string()
        }),
        ("missed-junk rate", &|w| pct(w.overturns.missed_junk_rate)),
        ("overturn rate", &|w| pct(w.overturns.overturn_rate)),
        ("review items labelled junk / fine", &|w| {
            format!(
                "{junk} / {fine}",
                junk = w.overturns.review_labelled_junk,
                fine = w.overturns.review_labelled_fine
            )
        }),
        ("ROC AUC", &|w| num(w.roc_auc, 4)),
        ("log loss", &|w| num(w.log_loss, 4)),
        ("Brier score", &|w| num(w.brier, 4)),
        ("expected calibration error (ECE)", &|w| {
            num(w.calibration.as_ref().map(|t| t.ece), 4)
        }),
    ];
    for (label, value) in rows {
        write!(
            html,
            r#"<tr><th scope="row">{label}</th><td>{bv}</td><td>{cv}</td></tr>"#,
            bv = value(b),
            cv = value(c),
        )?;
    }
    html.push_str("</tbody></table>");
    reliability(html, b.calibration.as_ref(), c.calibration.as_ref())?;
    overturns(html, report)?;
    html.push_str("</section>");
    Ok(())
}

/// Chart (c): each non-empty calibration bin as a point (mean `p_junk`,
/// share labelled junk), beside the diagonal of perfect calibration.
fn reliability(
    html: &mut String,
    baseline: Option<&Calibration>,
    current: Option<&Calibration>,
) -> Out {
    figure_start(html, "Reliability diagram");
    let windows = [("baseline", baseline), ("current", current)];
    if windows.iter().all(|(_, table)| table.is_none()) {
        no_data(
            html,
            "No labelled decisions in either window: there is no reliability to draw.",
        );
        html.push_str("</figure>");
        return Ok(());
    }
    let plot = Plot {
        width: 420.0,
        height: 400.0,
        ..Plot::new(0.0, 0.0)
    };
    svg_start(
        html,
        "rp-reliability",
        &plot,
        "Reliability diagram of both windows",
        "One point per calibration bin with labelled decisions: its mean p_junk across, the \
         share of it labelled junk up. Points on the dashed diagonal are well calibrated; \
         below it p_junk is too high, above it too low. Baseline hollow, current filled. The \
         table below lists the same figures.",
    );
    axes(
        html,
        &plot,
        1.0,
        "mean p_junk in the bin (%)",
        "share labelled junk (%)",
    );
    for step in 0..=4 {
        let value = f64::from(step) / 4.0;
        let x = plot.x(value);
        let label = pct(Some(value));
        write!(
            html,
            r#"<text class="rp-tick" x="{x:.1}" y="{y:.1}" text-anchor="middle">{label}</text>"#,
            y = plot.bottom_y() + 16.0,
        )?;
    }
    write!(
        html,
        r#"<line class="rp-diagonal" x1="{x0:.1}" y1="{y0:.1}" x2="{x1:.1}" y2="{y1:.1}"/>"#,
        x0 = plot.x(0.0),
        y0 = plot.y(0.0, 1.0),
        x1 = plot.x(1.0),
        y1 = plot.y(1.0, 1.0),
    )?;
    for (window, table) in &windows {
        let Some(table) = table else { continue };
        for bin in &table.bins {
            let (Some(mean), Some(rate)) = (bin.mean_p_junk, bin.junk_rate) else {
                continue;
            };
            if bin.count == 0 {
                continue;
            }
            write!(
                html,
                r#"<circle class="reliability-point" data-window="{window}" cx="{cx:.2}" cy="{cy:.2}" r="5"><title>{window}, p_junk {lower:.1} to {upper:.1}: {count} labelled, mean p_junk {mean_pct}, labelled junk {rate_pct}</title></circle>"#,
                cx = plot.x(mean),
                cy = plot.y(rate, 1.0),
                lower = bin.lower,
                upper = bin.upper,
                count = bin.count,
                mean_pct = pct(Some(mean)),
                rate_pct = pct(Some(rate)),
            )?;
        }
    }
    html.push_str("</svg>");
    legend(
        html,
        &[
            ("rp-key-baseline rp-key-round", "baseline (hollow)"),
            ("rp-key-current rp-key-round", "current (filled)"),
            ("rp-key-diagonal", "perfect calibration"),
        ],
    );
    html.push_str(r#"<table class="rp-table"><caption>Reliability table</caption><thead><tr><th scope="col">window</th><th scope="col">p_junk bin</th><th scope="col">labelled</th><th scope="col">mean p_junk</th><th scope="col">labelled junk</th></tr></thead><tbody>"#);
    for (window, table) in &windows {
        let Some(table) = table else { continue };
        for bin in table.bins.iter().filter(|bin| bin.count > 0) {
            write!(
                html,
                "<tr><td>{window}</td><td>{lower:.1} to {upper:.1}</td><td>{count}</td><td>{mean}</td><td>{rate}</td></tr>",
                lower = bin.lower,
                upper = bin.upper,
                count = bin.count,
                mean = num(bin.mean_p_junk, 4),
                rate = pct(bin.junk_rate),
            )?;
        }
    }
    html.push_str("</tbody></table></figure>");
    Ok(())
}

/// Chart (d): the overturn rate of each time bucket with labels, as points
/// joined per window.
fn overturns(html: &mut String, report: &DriftReport) -> Out {
    let quality = &report.overall.quality;
    let buckets: Vec<(&str, &chaffgate_report::QualityBucket)> = quality
        .baseline
        .over_time
        .iter()
        .map(|bucket| ("baseline", bucket))
        .chain(
            quality
                .current
                .over_time
                .iter()
                .map(|bucket| ("current", bucket)),
        )
        .collect();
    figure_start(html, "Overturn rate over time");
    let labelled: Vec<(usize, &str, f64, &chaffgate_report::QualityBucket)> = buckets
        .iter()
        .enumerate()
        .filter_map(|(index, (window, bucket))| {
            bucket
                .overturn_rate
                .filter(|_| bucket.labelled > 0)
                .map(|rate| (index, *window, rate, *bucket))
        })
        .collect();
    if labelled.is_empty() {
        no_data(
            html,
            "No labelled decisions in either window: there is no overturn rate to draw.",
        );
        html.push_str("</figure>");
        return Ok(());
    }
    let max = labelled
        .iter()
        .map(|(_, _, rate, _)| *rate)
        .fold(0.0, f64::max);
    let y_max = nice_max(max);
    let plot = Plot::new(640.0, 260.0);
    let count = buckets.len();
    svg_start(
        html,
        "rp-overturns",
        &plot,
        "Overturn rate per time bucket",
        &format!(
            "One point per time bucket with labelled decisions ({points} of {count} buckets, \
             baseline then current): the share of its labelled decisions whose verdict the \
             label overturned. The table below lists the same figures.",
            points = labelled.len()
        ),
    );
    axes(
        html,
        &plot,
        y_max,
        "time (UTC), baseline then current buckets",
        "overturned share of labelled decisions (%)",
    );
    let slot = plot.inner_width() / count as f64;
    for window in ["baseline", "current"] {
        let points: Vec<String> = labelled
            .iter()
            .filter(|(_, w, _, _)| *w == window)
            .map(|(index, _, rate, _)| {
                let x = plot.left + slot * (*index as f64 + 0.5);
                let y = plot.y(*rate, y_max);
                format!("{x:.2},{y:.2}")
            })
            .collect();
        if points.len() > 1 {
            write!(
                html,
                r#"<polyline class="rp-line" data-window="{window}" points="{points}"/>"#,
                points = points.join(" "),
            )?;
        }
    }
    for (index, window, rate, bucket) in &labelled {
        let (start, _) = utc_time(bucket.start_ms);
        write!(
            html,
            r#"<circle class="overturn-point" data-window="{window}" cx="{cx:.2}" cy="{cy:.2}" r="4"><title>{window}, from {start}: {overturned} of {labelled} overturned ({shown})</title></circle>"#,
            cx = plot.left + slot * (*index as f64 + 0.5),
            cy = plot.y(*rate, y_max),
            overturned = bucket.overturned,
            labelled = bucket.labelled,
            shown = pct(Some(*rate)),
        )?;
    }
    let split = quality.baseline.over_time.len();
    let split_x = plot.left + slot * split as f64;
    write!(
        html,
        r#"<line class="rp-divider" x1="{split_x:.1}" x2="{split_x:.1}" y1="{top}" y2="{bottom}"/><text class="rp-tick" x="{split_x:.1}" y="{y:.1}" text-anchor="middle">{text}</text>"#,
        top = plot.top,
        bottom = plot.bottom_y(),
        y = plot.bottom_y() + 16.0,
        text = short_time(report.windows.current.start_ms),
    )?;
    html.push_str("</svg>");
    legend(
        html,
        &[
            ("rp-key-baseline rp-key-round", "baseline"),
            ("rp-key-current rp-key-round", "current"),
        ],
    );
    html.push_str(r#"<table class="rp-table"><caption>Overturns per bucket with labels</caption><thead><tr><th scope="col">window</th><th scope="col">bucket start (UTC)</th><th scope="col">labelled</th><th scope="col">overturned</th><th scope="col">rate</th></tr></thead><tbody>"#);
    for (_, window, rate, bucket) in &labelled {
        let (start, _) = utc_time(bucket.start_ms);
        write!(
            html,
            "<tr><td>{window}</td><td>{start}</td><td>{labelled}</td><td>{overturned}</td><td>{shown}</td></tr>",
            labelled = bucket.labelled,
            overturned = bucket.overturned,
            shown = pct(Some(*rate)),
        )?;
    }
    html.push_str("</tbody></table></figure>");
    Ok(())
}

fn write_advice(html: &mut String, report: &DriftReport) -> Out {
    let advice = &report.overall.threshold_advice;
    section_start(html, "rp-advice-title", "Junk threshold advice");
    html.push_str(r#"<p class="cg-help">"#);
    push_escaped(html, report.help.threshold_advice);
    html.push_str("</p>");
    if let Some(note) = &advice.note {
        html.push_str(r#"<p class="rp-nodata">No advice: "#);
        push_escaped(html, note);
        html.push_str("</p></section>");
        return Ok(());
    }
    let target = pct(Some(advice.false_junk_target));
    write!(
        html,
        r#"<table class="rp-table"><caption>From the current window's labels ({junk} junk, {fine} fine); false-junk target {target}</caption><thead><tr><th scope="col">threshold</th><th scope="col">p_junk</th><th scope="col">false-junk rate</th><th scope="col">junk caught</th></tr></thead><tbody>"#,
        junk = advice.labelled_junk,
        fine = advice.labelled_fine,
    )?;
    let row = |html: &mut String, label: &str, point: &Option<OperatingPoint>| {
        let Some(point) = point else { return };
        let threshold = match point.threshold {
            Some(t) => format!("{t:.4}"),
            None => "none (judge nothing junk)".to_owned(),
        };
        let _ = write!(
            html,
            r#"<tr><th scope="row">{label}</th><td>{threshold}</td><td>{fr} ({fc})</td><td>{jr} ({jc})</td></tr>"#,
            fr = pct(Some(point.false_junk_rate)),
            fc = point.fine_judged_junk,
            jr = pct(Some(point.junk_caught_share)),
            jc = point.junk_caught,
        );
    };
    row(html, "configured junk", &advice.configured);
    row(html, "configured review", &advice.configured_review);
    row(html, "advised junk", &advice.advised);
    html.push_str("</tbody></table>");
    if advice.differs {
        html.push_str(r#"<p class="rp-differs"><strong>The advice differs materially from the configuration</strong> (<code>differs</code>): check the overturned verdicts before moving the threshold.</p>"#);
    } else {
        html.push_str(r#"<p>The advice agrees with the configuration.</p>"#);
    }
    if let Some(needed) = advice.fine_needed
        && advice.labelled_fine < needed
    {
        write!(
            html,
            r#"<p class="cg-help">Fewer than {needed} labelled fine: the advice can only avoid every false junk seen.</p>"#
        )?;
    }
    html.push_str("</section>");
    Ok(())
}

fn write_alarms(html: &mut String, report: &DriftReport) -> Out {
    section_start(html, "rp-alarms-title", "Alarms");
    html.push_str(r#"<p class="cg-help">"#);
    push_escaped(html, report.help.alarms);
    html.push_str("</p>");
    if report.alarms.is_empty() {
        html.push_str(r#"<p class="rp-nodata">No alarm in either window.</p></section>"#);
        return Ok(());
    }
    html.push_str(r#"<table class="rp-table"><caption>Change alarms, in time order</caption><thead><tr><th scope="col">time (UTC)</th><th scope="col">detector</th><th scope="col">channel</th><th scope="col">window</th><th scope="col">shift</th><th scope="col">statistic</th><th scope="col">samples</th><th scope="col">mean</th></tr></thead><tbody>"#);
    for alarm in &report.alarms {
        let (at, datetime) = utc_time(alarm.at_ms);
        write!(
            html,
            r#"<tr class="alarm-row" data-detector="{detector}"><td><time datetime="{datetime}">{at}</time></td><td>{detector}</td><td>"#,
            detector = alarm.detector.as_str(),
        )?;
        push_escaped(html, alarm.channel.as_deref().unwrap_or("all"));
        write!(
            html,
            "</td><td>{window}</td><td>{shift}</td><td>{statistic:.3}</td><td>{samples}</td><td>{mean:.4}</td></tr>",
            window = alarm.window.as_str(),
            shift = alarm.shift.as_str(),
            statistic = alarm.statistic,
            samples = alarm.samples,
            mean = alarm.mean,
        )?;
    }
    html.push_str("</tbody></table></section>");
    Ok(())
}

fn write_features(html: &mut String, report: &DriftReport) -> Out {
    section_start(html, "rp-features-title", "Drifting features");
    html.push_str(r#"<p class="cg-help">"#);
    push_escaped(html, report.help.features);
    html.push_str("</p>");
    figure_start(html, "Top drifting features");
    let Some(drift) = &report.features else {
        no_data(
            html,
            "No feature tallies in either window, so there is no feature drift to draw.",
        );
        html.push_str("</figure></section>");
        return Ok(());
    };
    let rows: Vec<(&str, &ShareChange)> = drift
        .rising
        .iter()
        .map(|change| ("rise", change))
        .chain(drift.falling.iter().map(|change| ("fall", change)))
        .collect();
    write!(
        html,
        r#"<p>Sampled messages: {before} in the baseline, {after} in the current window; names seen in at least {min} sampled messages of one window.</p>"#,
        before = drift.baseline_sampled_messages,
        after = drift.current_sampled_messages,
        min = drift.min_messages,
    )?;
    if rows.is_empty() {
        no_data(
            html,
            "No feature's share moved between the windows (or a window sampled nothing).",
        );
        html.push_str("</figure>");
    } else {
        feature_chart(html, &rows)?;
        html.push_str(r#"<table class="rp-table"><caption>Change in share of sampled messages</caption><thead><tr><th scope="col">feature</th><th scope="col">baseline</th><th scope="col">current</th><th scope="col">change</th></tr></thead><tbody>"#);
        for (_, change) in &rows {
            html.push_str(r#"<tr><th scope="row"><code>"#);
            push_escaped(html, &change.feature);
            let points = change.change * 100.0;
            write!(
                html,
                "</code></th><td>{bs} ({bm})</td><td>{cs} ({cm})</td><td>{points:+.1} points</td></tr>",
                bs = pct(Some(change.baseline_share)),
                bm = change.baseline_messages,
                cs = pct(Some(change.current_share)),
                cm = change.current_messages,
            )?;
        }
        html.push_str("</tbody></table></figure>");
    }
    if !drift.top_contributions.is_empty() {
        html.push_str(r#"<table class="rp-table"><caption>Largest summed contributions to the margin, current window</caption><thead><tr><th scope="col">feature</th><th scope="col">messages</th><th scope="col">sum</th><th scope="col">mean per message</th></tr></thead><tbody>"#);
        for rank in &drift.top_contributions {
            html.push_str(r#"<tr><th scope="row"><code>"#);
            push_escaped(html, &rank.feature);
            write!(
                html,
                "</code></th><td>{messages}</td><td>{sum:+.3}</td><td>{mean}</td></tr>",
                messages = rank.messages,
                sum = rank.contribution_sum,
                mean = num(rank.mean_contribution, 4),
            )?;
        }
        html.push_str("</tbody></table>");
    }
    html.push_str("</section>");
    Ok(())
}

/// Characters of a feature name shown beside its bar; the full name is in
/// the bar's tooltip and the table.
const FEATURE_LABEL_CHARS: usize = 32;

/// Chart (e): one horizontal bar per feature, right of the middle line for
/// a rise in share, left of it for a fall.
fn feature_chart(html: &mut String, rows: &[(&str, &ShareChange)]) -> Out {
    const ROW: f64 = 22.0;
    const LABEL: f64 = 250.0;
    let width = 640.0;
    let top = 12.0;
    let height = top + ROW * rows.len() as f64 + 44.0;
    let plot = Plot {
        width,
        height,
        left: LABEL,
        right: 16.0,
        top,
        bottom: 44.0,
    };
    let max = rows
        .iter()
        .map(|(_, change)| change.change.abs())
        .fold(0.0, f64::max);
    let scale_max = nice_max(max);
    svg_start(
        html,
        "rp-features",
        &plot,
        "Top drifting features",
        &format!(
            "One bar per feature ({count}): to the right of the middle line when its share of \
             sampled messages rose from the baseline to the current window, to the left when \
             it fell. The table below lists the same figures.",
            count = rows.len()
        ),
    );
    let middle = plot.x(0.5);
    let half = plot.inner_width() / 2.0;
    for (index, (direction, change)) in rows.iter().enumerate() {
        let y = top + ROW * index as f64;
        let length = half * (change.change.abs() / scale_max).min(1.0);
        let x = if change.change >= 0.0 {
            middle
        } else {
            middle - length
        };
        let points = change.change * 100.0;
        write!(
            html,
            r#"<rect class="feature-bar" data-direction="{direction}" x="{x:.2}" y="{by:.2}" width="{length:.2}" height="{bh:.2}"><title>"#,
            by = y + 3.0,
            bh = ROW - 6.0,
        )?;
        push_escaped(html, &change.feature);
        write!(
            html,
            r#": {points:+.1} points</title></rect><text class="rp-label" x="{lx:.1}" y="{ly:.1}" text-anchor="end">"#,
            lx = LABEL - 8.0,
            ly = y + ROW / 2.0 + 4.0,
        )?;
        let name = &change.feature;
        match name.char_indices().nth(FEATURE_LABEL_CHARS) {
            Some((cut, _)) => {
                push_escaped(html, &name[..cut]);
                html.push('…');
            }
            None => push_escaped(html, name),
        }
        html.push_str("</text>");
    }
    let bottom = plot.bottom_y();
    write!(
        html,
        r#"<line class="rp-axis" x1="{middle:.1}" x2="{middle:.1}" y1="{top}" y2="{bottom}"/><line class="rp-axis" x1="{left}" x2="{right}" y1="{bottom}" y2="{bottom}"/>"#,
        left = plot.left,
        right = width - plot.right,
    )?;
    for (x, value) in [
        (plot.left, -scale_max),
        (middle, 0.0),
        (width - plot.right, scale_max),
    ] {
        let anchor = if value < 0.0 {
            "start"
        } else if value > 0.0 {
            "end"
        } else {
            "middle"
        };
        let points = value * 100.0;
        let points = if value == 0.0 {
            "0".to_owned()
        } else {
            format!("{points:+.0}")
        };
        write!(
            html,
            r#"<text class="rp-tick" x="{x:.1}" y="{y:.1}" text-anchor="{anchor}">{points}</text>"#,
            y = bottom + 14.0,
        )?;
    }
    write!(
        html,
        r#"<text class="rp-axis-title" x="{x:.1}" y="{y:.1}" text-anchor="middle">change in share of sampled messages (percentage points)</text></svg>"#,
        x = plot.left + plot.inner_width() / 2.0,
        y = height - 6.0,
    )?;
    legend(
        html,
        &[("rp-key-rise", "share rose"), ("rp-key-fall", "share fell")],
    );
    Ok(())
}

fn write_activity(html: &mut String, report: &DriftReport) -> Out {
    let activity = &report.activity;
    section_start(html, "rp-activity-title", "Learning activity");
    html.push_str(r#"<p class="cg-help">"#);
    push_escaped(html, report.help.activity);
    html.push_str("</p>");
    let (b, c) = (&activity.baseline, &activity.current);
    html.push_str(r#"<table class="rp-table"><caption>Feedback by the time it was given</caption><thead><tr><th scope="col">feedback</th><th scope="col">baseline</th><th scope="col">current</th></tr></thead><tbody>"#);
    for (label, bv, cv) in [
        ("rows", b.feedback, c.feedback),
        ("labelled junk", b.junk, c.junk),
        ("labelled fine", b.fine, c.fine),
        ("corrections", b.corrections, c.corrections),
        ("revoked since", b.revoked, c.revoked),
        ("on inline messages", b.inline, c.inline),
    ] {
        write!(
            html,
            r#"<tr><th scope="row">{label}</th><td>{bv}</td><td>{cv}</td></tr>"#
        )?;
    }
    html.push_str("</tbody></table>");
    let moderators: Vec<(&str, &chaffgate_report::ModeratorActivity)> = b
        .by_moderator
        .iter()
        .map(|m| ("baseline", m))
        .chain(c.by_moderator.iter().map(|m| ("current", m)))
        .collect();
    if moderators.is_empty() {
        no_data(html, "No feedback from moderators in either window.");
    } else {
        html.push_str(r#"<table class="rp-table"><caption>Feedback per moderator and label</caption><thead><tr><th scope="col">window</th><th scope="col">moderator</th><th scope="col">rows</th><th scope="col">junk</th><th scope="col">fine</th><th scope="col">corrections</th><th scope="col">revoked</th></tr></thead><tbody>"#);
        for (window, moderator) in moderators {
            write!(html, "<tr><td>{window}</td><td>")?;
            push_escaped(html, &moderator.moderator);
            write!(
                html,
                "</td><td>{rows}</td><td>{junk}</td><td>{fine}</td><td>{corrections}</td><td>{revoked}</td></tr>",
                rows = moderator.feedback,
                junk = moderator.junk,
                fine = moderator.fine,
                corrections = moderator.corrections,
                revoked = moderator.revoked,
            )?;
        }
        html.push_str("</tbody></table>");
    }
    if activity.checkpoints.is_empty() {
        no_data(html, "No checkpoint was written in either window.");
    } else {
        html.push_str(r#"<table class="rp-table"><caption>Checkpoints</caption><thead><tr><th scope="col">time (UTC)</th><th scope="col">window</th><th scope="col">up to feedback seq</th><th scope="col">examples</th><th scope="col">reason</th></tr></thead><tbody>"#);
        for checkpoint in &activity.checkpoints {
            let (at, datetime) = utc_time(checkpoint.at_ms);
            write!(
                html,
                r#"<tr><td><time datetime="{datetime}">{at}</time></td><td>{window}</td><td>{seq}</td><td>{seen}</td><td>"#,
                window = checkpoint.window.as_str(),
                seq = checkpoint.last_seq,
                seen = checkpoint.examples_seen,
            )?;
            push_escaped(html, &checkpoint.reason);
            if checkpoint.is_deleted {
                html.push_str(" (file deleted)");
            }
            html.push_str("</td></tr>");
        }
        html.push_str("</tbody></table>");
    }
    if activity.model_events.is_empty() {
        no_data(html, "No rollback or other model event in either window.");
    } else {
        html.push_str(r#"<table class="rp-table"><caption>Model events (rollbacks, rebuilds)</caption><thead><tr><th scope="col">time (UTC)</th><th scope="col">window</th><th scope="col">event</th><th scope="col">details</th></tr></thead><tbody>"#);
        for event in &activity.model_events {
            let (at, datetime) = utc_time(event.at_ms);
            write!(
                html,
                r#"<tr><td><time datetime="{datetime}">{at}</time></td><td>{window}</td><td>"#,
                window = event.window.as_str(),
            )?;
            push_escaped(html, &event.kind);
            html.push_str("</td><td><code>");
            push_escaped(html, &event.detail.to_string());
            html.push_str("</code></td></tr>");
        }
        html.push_str("</tbody></table>");
    }
    html.push_str("</section>");
    Ok(())
}

fn write_channels(html: &mut String, report: &DriftReport) -> Out {
    if report.channels.is_empty() {
        return Ok(());
    }
    section_start(html, "rp-channels-title", "Per channel");
    html.push_str(r#"<table class="rp-table"><caption>Each channel, baseline to current (the JSON form has every figure)</caption><thead><tr><th scope="col">channel</th><th scope="col">decisions</th><th scope="col">PSI</th><th scope="col">overturn rate</th><th scope="col">missed-junk rate</th><th scope="col">advice</th></tr></thead><tbody>"#);
    for scope in &report.channels {
        html.push_str(r#"<tr><th scope="row">"#);
        push_escaped(html, scope.channel.as_deref().unwrap_or(""));
        let scores = &scope.scores;
        let q = &scope.quality;
        let advice = match (&scope.threshold_advice.note, scope.threshold_advice.differs) {
            (Some(_), _) => "none",
            (None, true) => "differs",
            (None, false) => "agrees",
        };
        write!(
            html,
            "</th><td>{bd} to {cd}</td><td>{psi}</td><td>{bo} to {co}</td><td>{bm} to {cm}</td><td>{advice}</td></tr>",
            bd = scores.baseline.decisions,
            cd = scores.current.decisions,
            psi = num(scores.psi, 3),
            bo = pct(q.baseline.overturns.overturn_rate),
            co = pct(q.current.overturns.overturn_rate),
            bm = pct(q.baseline.overturns.missed_junk_rate),
            cm = pct(q.current.overturns.missed_junk_rate),
        )?;
    }
    html.push_str("</tbody></table></section>");
    Ok(())
}

#[cfg(test)]
mod tests {
    use chaffgate_metrics::CalibrationBin;
    use chaffgate_report::{Alarm, Detector, ModeratorActivity, ReportRequest, Shift};
    use chaffgate_store::{FeatureDrift, Store};

    use super::*;

    /// 2027-01-15T08:00:00Z, a whole UTC hour (GNU date: `date -u -d
    /// @1800000000`): the default windows have 8 daily and 24 hourly
    /// buckets.
    const T0: i64 = 1_800_000_000_000;

    /// The report of an empty database at `T0` with default windows.
    fn empty_report() -> DriftReport {
        let runtime = tokio::runtime::Builder::new_current_thread()
            .enable_all()
            .build()
            .unwrap();
        runtime.block_on(async {
            let dir = tempfile::tempdir().unwrap();
            let store = Store::open(&dir.path().join("chaffgate.db")).await.unwrap();
            let report = chaffgate_report::build(&store, &ReportRequest::at(T0))
                .await
                .unwrap();
            store.close().await;
            report
        })
    }

    fn count(html: &str, needle: &str) -> usize {
        html.matches(needle).count()
    }

    fn change(feature: &str, change: f64) -> ShareChange {
        ShareChange {
            feature: feature.to_owned(),
            baseline_messages: 10,
            current_messages: 40,
            baseline_share: 0.1,
            current_share: 0.1 + change,
            change,
        }
    }

    /// A report with decisions, labels, features, an alarm and a
    /// moderator, over `bins` p_junk bins.
    fn busy_report() -> DriftReport {
        let mut report = empty_report();
        let scores = &mut report.overall.scores;
        scores.baseline.decisions = 10;
        scores.baseline.bin_counts = vec![4, 3, 1, 0, 0, 0, 0, 0, 1, 1];
        scores.current.decisions = 20;
        scores.current.bin_counts = vec![2, 2, 2, 6, 4, 0, 0, 0, 2, 2];
        for (window, decisions) in [(&mut scores.baseline, 10), (&mut scores.current, 20)] {
            let bucket = &mut window.over_time[1];
            bucket.decisions = decisions;
            bucket.verdicts.junk = 2;
            bucket.verdicts.junk_share = Some(0.2);
            bucket.verdicts.review_share = Some(0.3);
            bucket.verdicts.fine_share = Some(0.5);
        }
        let bins = |filled: &[(usize, u64, f64, f64)]| Calibration {
            ece: 0.05,
            bins: (0..10)
                .map(|bin| {
                    let found = filled.iter().find(|(at, ..)| *at == bin);
                    CalibrationBin {
                        lower: bin as f64 / 10.0,
                        upper: (bin + 1) as f64 / 10.0,
                        count: found.map_or(0, |f| f.1),
                        mean_p_junk: found.map(|f| f.2),
                        junk_rate: found.map(|f| f.3),
                    }
                })
                .collect(),
        };
        let quality = &mut report.overall.quality;
        quality.baseline.calibration = Some(bins(&[(0, 5, 0.05, 0.0), (9, 5, 0.95, 1.0)]));
        quality.current.calibration = Some(bins(&[
            (0, 4, 0.04, 0.25),
            (3, 10, 0.35, 0.6),
            (9, 6, 0.97, 1.0),
        ]));
        for (is_current, index, rate) in [(false, 1, 0.1), (true, 1, 0.3), (true, 5, 0.4)] {
            let window = if is_current {
                &mut quality.current
            } else {
                &mut quality.baseline
            };
            let bucket = &mut window.over_time[index];
            bucket.labelled = 10;
            bucket.overturned = (rate * 10.0) as u64;
            bucket.overturn_rate = Some(rate);
        }
        report.features = Some(FeatureDrift {
            baseline_sampled_messages: 100,
            current_sampled_messages: 100,
            min_messages: 5,
            rising: vec![change("body word \"zembrulo\"", 0.3)],
            falling: vec![change("body word \"ordered\"", -0.05)],
            top_contributions: Vec::new(),
        });
        report
    }

    #[test]
    fn empty_windows_say_so_instead_of_drawing() {
        let html = render(&empty_report(), None);
        assert_eq!(count(&html, "<svg"), 0, "{html}");
        for note in [
            "No decisions in either window: there is no p_junk spread to draw.",
            "No decisions in either window: there is no verdict mix to draw.",
            "No labelled decisions in either window: there is no reliability to draw.",
            "No labelled decisions in either window: there is no overturn rate to draw.",
            "No feature tallies in either window",
            "No alarm in either window.",
        ] {
            assert!(html.contains(note), "{note} missing");
        }
        // The form still offers the windows, with the defaults filled in.
        assert!(html.contains(r#"name="baseline" value="7d""#), "{html}");
        assert!(html.contains(r#"name="at" value="""#), "{html}");
    }

    #[test]
    fn each_chart_has_one_mark_per_bin_bucket_or_feature() {
        let report = busy_report();
        let html = render(&report, Some("2027-01-15T08:00:00Z"));
        assert_eq!(count(&html, "<svg"), 5);
        // Ten bins, both windows.
        assert_eq!(
            count(&html, r#"<rect class="bar" data-window="baseline""#),
            10
        );
        assert_eq!(
            count(&html, r#"<rect class="bar" data-window="current""#),
            10
        );
        // 8 daily baseline buckets and 24 hourly current ones, empty ones
        // included; the two busy ones hold three parts each.
        assert_eq!(count(&html, r#"class="mix-bar""#), 32);
        assert_eq!(
            count(&html, r#"class="mix-junk""#) + count(&html, r#"class="mix-fine""#),
            4
        );
        // Non-empty calibration bins: 2 + 3.
        assert_eq!(count(&html, r#"class="reliability-point""#), 5);
        // Buckets with labels: 1 + 2.
        assert_eq!(count(&html, r#"class="overturn-point""#), 3);
        assert_eq!(
            count(&html, r#"class="feature-bar" data-direction="rise""#),
            1
        );
        assert_eq!(
            count(&html, r#"class="feature-bar" data-direction="fall""#),
            1
        );
        // Every chart is labelled by its title and description.
        assert_eq!(count(&html, r#"role="img" aria-labelledby="#), 5);
        assert_eq!(count(&html, "<desc id="), 5);
        assert!(html.contains(r#"name="at" value="2027-01-15T08:00:00Z""#));
    }

    #[test]
    fn one_empty_window_draws_the_other_and_says_why() {
        let mut report = busy_report();
        report.overall.scores.baseline.decisions = 0;
        report.overall.scores.baseline.bin_counts = vec![0; 10];
        let html = render(&report, None);
        assert_eq!(
            count(&html, r#"<rect class="bar" data-window="baseline""#),
            0
        );
        assert_eq!(
            count(&html, r#"<rect class="bar" data-window="current""#),
            10
        );
        assert!(html.contains("The baseline window has no decisions"));
    }

    #[test]
    fn hostile_names_stay_text() {
        let hostile = r#"<img src=x onerror="alert(1)">&"#;
        let mut report = busy_report();
        report.channel = Some(hostile.to_owned());
        if let Some(features) = &mut report.features {
            features.rising[0].feature = format!("body word \"{hostile}\"");
        }
        report.alarms.push(Alarm {
            detector: Detector::FeedbackErrors,
            channel: Some(hostile.to_owned()),
            at_ms: T0 - 1,
            at: String::new(),
            window: WindowName::Current,
            shift: Shift::Rise,
            statistic: 12.5,
            samples: 40,
            mean: 0.2,
        });
        report
            .activity
            .current
            .by_moderator
            .push(ModeratorActivity {
                moderator: hostile.to_owned(),
                feedback: 1,
                junk: 1,
                fine: 0,
                corrections: 0,
                revoked: 0,
            });
        let html = render(&report, Some(hostile));
        assert!(!html.contains("<img"), "{html}");
        assert!(!html.contains(r#""alert(1)""#), "{html}");
        let escaped = "&lt;img src=x onerror=&quot;alert(1)&quot;&gt;&amp;";
        // Heading, form (channel and at), chart label and tooltip, table,
        // alarm row, moderator row.
        assert!(count(&html, escaped) >= 7, "{html}");
        assert_eq!(count(&html, r#"<tr class="alarm-row""#), 1);
    }

    #[test]
    fn long_feature_names_are_cut_beside_their_bar_only() {
        let mut report = busy_report();
        let long = format!("body word \"{word}\"", word = "ü".repeat(60));
        if let Some(features) = &mut report.features {
            features.rising[0].feature = long.clone();
        }
        let html = render(&report, None);
        let cut: String = long.chars().take(FEATURE_LABEL_CHARS).collect();
        let label = format!("{cut}…</text>", cut = escape(&cut));
        assert!(html.contains(&label), "{label} missing");
        // In full in the bar's tooltip and the table.
        assert_eq!(count(&html, &escape(&long)), 2);
    }

    fn escape(text: &str) -> String {
        super::super::escape_html(text)
    }

    #[test]
    fn material_differences_in_the_advice_stand_out() {
        let mut report = busy_report();
        let advice = &mut report.overall.threshold_advice;
        advice.note = None;
        advice.differs = true;
        advice.configured = Some(OperatingPoint {
            threshold: Some(0.9),
            fine_judged_junk: 3,
            junk_caught: 40,
            false_junk_rate: 0.03,
            junk_caught_share: 0.8,
        });
        let html = render(&report, None);
        assert!(html.contains(r#"<p class="rp-differs">"#), "{html}");
        assert!(html.contains("<td>0.9000</td><td>3.0% (3)</td><td>80.0% (40)</td>"));
        report.overall.threshold_advice.differs = false;
        assert!(!render(&report, None).contains("rp-differs"));
    }

    #[test]
    fn the_psi_bands_are_named_as_common_practice() {
        let html = render(&busy_report(), None);
        assert!(html.contains("common practice"), "{html}");
        assert!(html.contains("no single source"), "{html}");
    }

    #[test]
    fn the_shell_is_public_and_the_view_needs_operate() {
        assert_eq!(crate::auth::needed_role(PATH), None);
        assert_eq!(crate::auth::needed_role(VIEW_PATH), Some(Role::Operate));
        assert!(LEAD.contains("local law") && LEAD.contains("review band"));
    }
}
