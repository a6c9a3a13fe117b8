//! `chaffgate eval`: how well the model would have done on a labelled corpus.
//!
//! Progressive validation (the default) scores each message with the model
//! as it stands, then learns its label, in corpus order: every message is
//! judged before the model has seen it, just as in the live service where a
//! verdict comes before any moderator's label. This is the test-then-train
//! protocol of the TREC spam track (Cormack and Lynam, 2005-2007).
//!
//! `--holdout F` instead learns from the first (1 - F) of the corpus, for
//! one or more passes, and reports on the last F only, which is how results
//! on fixed splits are usually published.

use std::io::IsTerminal;
use std::time::Instant;

use anyhow::bail;
use chaffgate_metrics::{Summary, summarize};
use indicatif::{ProgressBar, ProgressStyle};
use serde::Serialize;

use crate::corpus::Labelled;
use crate::pipeline::Pipeline;

/// How to split the corpus into learning and judging.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Protocol {
    /// Score then learn each message in turn.
    Progressive,
    /// Learn from the head `passes` times, then score the tail.
    Holdout { fraction: f64, passes: u32 },
}

#[derive(Debug, Serialize)]
pub struct EvalReport {
    pub protocol: &'static str,
    /// Messages judged (the whole corpus, or the held-out tail).
    pub judged: usize,
    /// Messages learnt from (counting every pass).
    pub learnt: usize,
    #[serde(flatten)]
    pub summary: Summary,
    /// Wall time of the judge-and-learn loop, excluding corpus loading.
    pub loop_seconds: f64,
    /// Messages processed by the loop per second (extraction, scoring and,
    /// where it applies, learning), on one thread.
    pub messages_per_second: f64,
    /// Text (subject, body, sender) processed by the loop per second, in
    /// MB (10^6 bytes).
    pub text_mb_per_second: f64,
}

pub fn run(
    pipeline: &mut Pipeline,
    items: &[Labelled],
    protocol: Protocol,
    threshold: f64,
) -> anyhow::Result<EvalReport> {
    let (learn_part, judge_part, passes) = match protocol {
        Protocol::Progressive => (&items[..0], items, 0),
        Protocol::Holdout { fraction, passes } => {
            let judged = (items.len() as f64 * fraction).round() as usize;
            if judged == 0 || judged >= items.len() {
                bail!(
                    "--holdout {fraction} leaves nothing to learn from or nothing to judge in {} messages",
                    items.len()
                );
            }
            let split = items.len() - judged;
            (&items[..split], &items[split..], passes)
        }
    };
    let total_steps = (learn_part.len() * passes as usize + judge_part.len()) as u64;
    let text_bytes = text_bytes(learn_part) * u64::from(passes) + text_bytes(judge_part);
    let progress = progress_bar(total_steps);

    let mut p_junk = Vec::with_capacity(judge_part.len());
    let mut is_junk = Vec::with_capacity(judge_part.len());
    let started = Instant::now();
    let mut done: u64 = 0;
    for _ in 0..passes {
        for item in learn_part {
            pipeline.learn(&item.message, item.is_junk);
            done += 1;
            if done.is_multiple_of(1024) {
                progress.set_position(done);
            }
        }
    }
    for item in judge_part {
        let p = match protocol {
            Protocol::Progressive => pipeline.learn(&item.message, item.is_junk),
            Protocol::Holdout { .. } => pipeline.score(&item.message),
        };
        p_junk.push(p);
        is_junk.push(item.is_junk);
        done += 1;
        if done.is_multiple_of(1024) {
            progress.set_position(done);
        }
    }
    let loop_seconds = started.elapsed().as_secs_f64();
    progress.finish_and_clear();

    let summary = summarize(&p_junk, &is_junk, threshold)?;
    Ok(EvalReport {
        protocol: match protocol {
            Protocol::Progressive => "progressive",
            Protocol::Holdout { .. } => "holdout",
        },
        judged: judge_part.len(),
        learnt: learn_part.len() * passes as usize
            + if protocol == Protocol::Progressive {
                judge_part.len()
            } else {
                0
            },
        summary,
        loop_seconds,
        messages_per_second: done as f64 / loop_seconds.max(1e-9),
        text_mb_per_second: text_bytes as f64 / 1e6 / loop_seconds.max(1e-9),
    })
}

/// Bytes of text in the messages' subject, body and sender.
fn text_bytes(items: &[Labelled]) -> u64 {
    items
        .iter()
        .map(|item| {
            let message = &item.message;
            [&message.subject, &message.body, &message.sender]
                .into_iter()
                .flatten()
                .map(|text| text.len() as u64)
                .sum::<u64>()
        })
        .sum()
}

/// A progress bar on stderr when it is a terminal; hidden otherwise.
fn progress_bar(total: u64) -> ProgressBar {
    if !std::io::stderr().is_terminal() {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(total);
    if let Ok(style) = ProgressStyle::with_template(
        "{spinner} {bar:40} {pos}/{len} messages ({per_sec}, {eta} left)",
    ) {
        bar.set_style(style);
    }
    bar
}

/// The human-readable form of a report.
pub fn render(report: &EvalReport) -> String {
    let s = &report.summary;
    let protocol = report.protocol;
    let judged = report.judged;
    let junk = s.junk;
    let fine = s.fine;
    let auc = s.roc_auc;
    let one_minus = s.one_minus_roca_pct;
    let lam = s.lam_pct;
    let threshold = s.threshold;
    let fine_bad = s.fine_misclassified_pct;
    let junk_missed = s.junk_missed_pct;
    let at_01 = s.junk_recall_at_0_1pct_false_junk * 100.0;
    let at_1 = s.junk_recall_at_1pct_false_junk * 100.0;
    let log_loss = s.log_loss;
    let brier = s.brier_score;
    let rate = report.messages_per_second;
    let mb_rate = report.text_mb_per_second;
    let seconds = report.loop_seconds;
    format!(
        "protocol               {protocol} ({judged} messages judged: {junk} junk, {fine} fine)\n\
         ROC AUC                {auc:.5}\n\
         (1-ROCA)%              {one_minus:.3}\n\
         lam%                   {lam:.3}\n\
         at p_junk >= {threshold:<9} fine misclassified {fine_bad:.3}%, junk missed {junk_missed:.3}%\n\
         junk caught            {at_01:.1}% at 0.1% false-junk rate, {at_1:.1}% at 1%\n\
         log loss               {log_loss:.5}\n\
         Brier score            {brier:.5}\n\
         throughput             {rate:.0} messages/s, {mb_rate:.1} MB/s of text ({seconds:.3} s, one thread)\n"
    )
}
