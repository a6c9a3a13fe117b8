//! `chaffgate demo`: the whole job on an invented stream, in one command.
//!
//! Starts the real daemon on loopback with its own data folder, teaches it
//! weeks 1-2 of the demo corpus as moderator feedback, then replays weeks
//! 3-8 through `POST /v1/score` in time order. Simulated moderators label
//! part of the decisions (most of the `review` band, a share of the rest),
//! some of them late and a few wrongly. At the end it prints a summary and
//! either stops (`--no-serve`) or leaves the service running with its
//! pages and an access token.
//!
//! The corpus times are shifted so that the stream ends just now, which
//! keeps the report pages' default windows meaningful. Everything in the
//! corpus is invented (see `demo-corpus/README.md`).

use std::collections::VecDeque;
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::time::Duration;

use anyhow::{Context, bail};
use chaffgate_report::time::{parse_rfc3339, rfc3339};
use chaffgate_server::auth::token_digest;
use chaffgate_server::state::now_ms;
use chaffgate_store::{Role, Store};
use indicatif::{ProgressBar, ProgressStyle};
use rand::RngExt;
use rand_chacha::ChaCha8Rng;
use rand_chacha::rand_core::SeedableRng;
use serde_json::{Map, Value, json};

use crate::config::Config;
use crate::serve::{self, DATABASE_FILE, ServeOptions};

/// The demo corpus, built into the binary so the demo runs from anywhere.
const EMBEDDED_CORPUS: &str = include_str!("../../demo-corpus/messages.jsonl");

/// A file in the data folder that marks it as the demo's own, so that a
/// fresh run never deletes a folder it did not make.
const MARKER: &str = ".chaffgate-demo";

/// Weeks taught as feedback before the replay starts.
const TAUGHT_WEEKS: u32 = 2;

/// Who labels in the demo: invented moderators.
const MODERATORS: [&str; 3] = ["moderator-ines", "moderator-tomas", "moderator-aiko"];

/// The command line of `chaffgate demo`.
#[derive(clap::Args)]
pub struct DemoArgs {
    /// The demo's data folder; deleted and made afresh unless `--keep`.
    #[arg(long, value_name = "DIR", default_value = "demo-data")]
    pub data: PathBuf,
    /// Keep the data folder of an earlier run (and skip the replay if it
    /// already holds decisions).
    #[arg(long)]
    pub keep: bool,
    /// Print the summary and exit instead of leaving the service running.
    #[arg(long)]
    pub no_serve: bool,
    /// Where the service listens while the demo runs.
    #[arg(long, value_name = "ADDR", default_value = "127.0.0.1:7310")]
    pub listen: String,
    /// A demo corpus file instead of the built-in one (same JSONL fields).
    #[arg(long, value_name = "FILE")]
    pub corpus: Option<PathBuf>,
    /// Share of decisions outside the review band that moderators label.
    #[arg(long, value_name = "SHARE", default_value_t = 0.3, value_parser = share)]
    pub label_share: f64,
    /// Share of review-band decisions that moderators label.
    #[arg(long, value_name = "SHARE", default_value_t = 0.9, value_parser = share)]
    pub review_share: f64,
    /// Share of labels given late (after `--late-by` more messages).
    #[arg(long, value_name = "SHARE", default_value_t = 0.25, value_parser = share)]
    pub late_share: f64,
    /// How many messages later a late label arrives.
    #[arg(long, value_name = "N", default_value_t = 300)]
    pub late_by: usize,
    /// Share of labels that are wrong (the moderator slipped).
    #[arg(long, value_name = "SHARE", default_value_t = 0.02, value_parser = share)]
    pub wrong_share: f64,
    /// Seed of the simulated moderators' choices.
    #[arg(long, default_value_t = 7)]
    pub seed: u64,
}

fn share(text: &str) -> Result<f64, String> {
    let value: f64 = text
        .parse()
        .map_err(|_| format!("{text:?} is not a number"))?;
    if (0.0..=1.0).contains(&value) {
        Ok(value)
    } else {
        Err(format!("{value} is not a share between 0 and 1"))
    }
}

/// One line of the demo corpus.
#[derive(Debug, Clone)]
struct DemoItem {
    id: String,
    at_ms: i64,
    week: u32,
    is_junk: bool,
    /// The message as a score request takes it.
    message: Map<String, Value>,
}

/// Fields of a corpus line that describe the line rather than the message.
const LINE_FIELDS: [&str; 5] = ["id", "at", "week", "label", "campaign"];

fn parse_corpus(text: &str) -> anyhow::Result<Vec<DemoItem>> {
    let mut items = Vec::new();
    for (index, line) in text.lines().enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let number = index + 1;
        let item = parse_line(line).with_context(|| format!("demo corpus line {number}"))?;
        items.push(item);
    }
    if items.is_empty() {
        bail!("the demo corpus is empty");
    }
    // Time order; lines with equal times keep the file's order.
    items.sort_by_key(|item| item.at_ms);
    Ok(items)
}

fn parse_line(line: &str) -> anyhow::Result<DemoItem> {
    let Value::Object(mut fields) = serde_json::from_str(line)? else {
        bail!("not a JSON object");
    };
    let text = |fields: &Map<String, Value>, key: &str| -> anyhow::Result<String> {
        fields
            .get(key)
            .and_then(Value::as_str)
            .map(str::to_owned)
            .with_context(|| format!("missing text field {key:?}"))
    };
    let id = text(&fields, "id")?;
    let at = text(&fields, "at")?;
    let at_ms = parse_rfc3339(&at).map_err(|why| anyhow::anyhow!("at {at:?}: {why}"))?;
    let week = fields
        .get("week")
        .and_then(Value::as_u64)
        .and_then(|week| u32::try_from(week).ok())
        .context("missing week number")?;
    let is_junk = match text(&fields, "label")?.as_str() {
        "junk" => true,
        "fine" => false,
        other => bail!("label {other:?} is not junk or fine"),
    };
    for key in LINE_FIELDS {
        fields.remove(key);
    }
    Ok(DemoItem {
        id,
        at_ms,
        week,
        is_junk,
        message: fields,
    })
}

pub fn run(base: &Config, args: DemoArgs) -> anyhow::Result<()> {
    let corpus_text = match &args.corpus {
        Some(path) => {
            std::fs::read_to_string(path).with_context(|| format!("reading {}", path.display()))?
        }
        None => EMBEDDED_CORPUS.to_owned(),
    };
    let items = parse_corpus(&corpus_text)?;
    let replay_start = items
        .iter()
        .position(|item| item.week > TAUGHT_WEEKS)
        .context("the demo corpus has no messages after week 2")?;
    if replay_start == 0 {
        bail!("the demo corpus has no messages in weeks 1-2 to learn from");
    }
    let fresh = prepare_folder(&args.data, args.keep)?;

    let mut config = base.clone();
    config.server.data_dir = args.data.clone();
    config.server.listen = if args.no_serve {
        "127.0.0.1:0".to_owned()
    } else {
        args.listen.clone()
    };
    config.audit.keep_text = true;
    config.audit.accept_client_time = true;
    // The demo's rate is low: name the features of every decision so that
    // the drift report's feature lists rest on the whole stream.
    config.tally.sample_every = 1;
    config.validate().context("demo settings")?;

    let runtime = crate::runtime()?;
    let secret = runtime.block_on(add_demo_token(&config))?;
    let (address_tx, address_rx) = std::sync::mpsc::channel::<SocketAddr>();
    let (stop_tx, stop_rx) = tokio::sync::oneshot::channel::<()>();
    let server_config = config.clone();
    let server = runtime.spawn(async move {
        let stop = async move {
            let _ = stop_rx.await;
        };
        serve::run_until(
            &server_config,
            ServeOptions { model: None },
            move |address| {
                let _ = address_tx.send(address);
            },
            stop,
        )
        .await
    });
    let address = match address_rx.recv_timeout(Duration::from_secs(60)) {
        Ok(address) => address,
        Err(_) => {
            // The server ended before listening: show why.
            let outcome = runtime.block_on(server);
            return match outcome {
                Ok(Err(err)) => Err(err.context(format!(
                    "starting the demo service (is {} free? try --listen 127.0.0.1:0)",
                    config.server.listen
                ))),
                Ok(Ok(())) => bail!("the demo service stopped before listening"),
                Err(err) => Err(anyhow::Error::new(err).context("the demo service failed")),
            };
        }
    };
    let client = Client::new(address, &secret);
    client.wait_ready()?;

    let summary = if fresh || client.decision_count()? == 0 {
        let shift = now_ms() - 60_000 - items.last().map_or(0, |item| item.at_ms);
        Some(replay(&client, &items, replay_start, shift, &args)?)
    } else {
        eprintln!(
            "demo: {} already holds decisions; skipping the replay",
            args.data.display()
        );
        None
    };
    if let Some(summary) = &summary {
        print!("{}", summary.to_text());
    }

    if args.no_serve {
        let _ = stop_tx.send(());
        runtime
            .block_on(server)
            .context("the demo service failed")??;
        return Ok(());
    }
    let report_query = summary.as_ref().map(|summary| summary.report.query.clone());
    print_urls(address, &secret, report_query.as_deref());
    runtime.block_on(async {
        serve::shutdown_signal().await;
        let _ = stop_tx.send(());
        server.await
    })??;
    Ok(())
}

/// Makes the data folder ready. Returns whether it is fresh.
fn prepare_folder(data: &Path, keep: bool) -> anyhow::Result<bool> {
    let marker = data.join(MARKER);
    if data.exists() {
        if keep {
            return Ok(!data.join(DATABASE_FILE).exists());
        }
        let empty = std::fs::read_dir(data)
            .with_context(|| format!("reading {}", data.display()))?
            .next()
            .is_none();
        if !empty && !marker.exists() {
            bail!(
                "{} exists and was not made by the demo; refusing to delete it (pick another folder with --data)",
                data.display()
            );
        }
        std::fs::remove_dir_all(data)
            .with_context(|| format!("deleting the old demo folder {}", data.display()))?;
    }
    std::fs::create_dir_all(data).with_context(|| format!("creating {}", data.display()))?;
    std::fs::write(
        &marker,
        "This folder belongs to `chaffgate demo`; a new demo run deletes it.\n",
    )
    .with_context(|| format!("writing {}", marker.display()))?;
    Ok(true)
}

/// Adds an `operate` token for this run and returns its secret.
async fn add_demo_token(config: &Config) -> anyhow::Result<String> {
    let database = config.server.data_dir.join(DATABASE_FILE);
    let store = Store::open(&database)
        .await
        .with_context(|| format!("opening {}", database.display()))?;
    let secret = crate::token::new_secret();
    let name = format!("demo-{}", now_ms());
    let added = store
        .add_token(&name, Role::Operate, &token_digest(&secret), now_ms())
        .await;
    store.close().await;
    added.context("adding the demo token")?;
    Ok(secret)
}

/// A blocking HTTP client for the demo's own service.
struct Client {
    base: String,
    authorization: String,
    agent: ureq::Agent,
}

impl Client {
    fn new(address: SocketAddr, secret: &str) -> Client {
        let config = ureq::Agent::config_builder()
            .http_status_as_error(false)
            .timeout_global(Some(Duration::from_secs(60)))
            .build();
        Client {
            base: format!("http://{address}"),
            authorization: format!("Bearer {secret}"),
            agent: config.into(),
        }
    }

    fn get(&self, path: &str) -> anyhow::Result<(u16, Value)> {
        let response = self
            .agent
            .get(format!("{}{path}", self.base))
            .header("authorization", &self.authorization)
            .call();
        Self::answer(path, response)
    }

    fn post(&self, path: &str, body: &Value) -> anyhow::Result<(u16, Value)> {
        let response = self
            .agent
            .post(format!("{}{path}", self.base))
            .header("authorization", &self.authorization)
            .header("content-type", "application/json")
            .send(body.to_string());
        Self::answer(path, response)
    }

    fn answer(
        path: &str,
        response: Result<ureq::http::Response<ureq::Body>, ureq::Error>,
    ) -> anyhow::Result<(u16, Value)> {
        let mut response = response.with_context(|| format!("calling {path}"))?;
        let status = response.status().as_u16();
        let text = response
            .body_mut()
            .read_to_string()
            .with_context(|| format!("reading the answer of {path}"))?;
        let value = serde_json::from_str(&text).unwrap_or(Value::String(text));
        Ok((status, value))
    }

    /// Posts and insists on a 2xx answer.
    fn post_ok(&self, path: &str, body: &Value) -> anyhow::Result<Value> {
        let (status, answer) = self.post(path, body)?;
        if !(200..300).contains(&status) {
            bail!("{path} answered {status}: {answer}");
        }
        Ok(answer)
    }

    fn wait_ready(&self) -> anyhow::Result<()> {
        for _ in 0..600 {
            if self.get("/readyz")?.0 == 200 {
                return Ok(());
            }
            std::thread::sleep(Duration::from_millis(100));
        }
        bail!("the demo service did not become ready within a minute")
    }

    fn decision_count(&self) -> anyhow::Result<usize> {
        let (status, page) = self.get("/v1/decisions?limit=1")?;
        if status != 200 {
            bail!("/v1/decisions answered {status}: {page}");
        }
        Ok(page["decisions"].as_array().map_or(0, Vec::len))
    }

    /// Waits until the learner has applied every committed feedback row.
    fn wait_learnt(&self) -> anyhow::Result<()> {
        for _ in 0..1200 {
            let (status, model) = self.get("/v1/model")?;
            if status == 200 && model["learner_lag_rows"] == 0 {
                return Ok(());
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        bail!("the learner did not catch up within a minute")
    }
}

/// A label a simulated moderator will give, possibly later.
struct PendingLabel {
    due_after: usize,
    decision_id: String,
    label: &'static str,
    moderator: &'static str,
}

/// What one replayed decision was, for the summary.
#[derive(Debug, Clone)]
struct Replayed {
    week: u32,
    is_junk: bool,
    p_junk: f64,
    verdict: String,
    /// The label moderators gave, if any (possibly wrong).
    labelled: Option<bool>,
}

fn progress(len: usize, prefix: &'static str) -> ProgressBar {
    let bar = ProgressBar::new(len as u64).with_prefix(prefix);
    if let Ok(style) =
        ProgressStyle::with_template("{prefix:>8} [{bar:30}] {pos}/{len} {msg} ({elapsed})")
    {
        bar.set_style(style.progress_chars("=> "));
    }
    bar
}

fn label_word(is_junk: bool) -> &'static str {
    if is_junk { "junk" } else { "fine" }
}

fn replay(
    client: &Client,
    items: &[DemoItem],
    replay_start: usize,
    shift_ms: i64,
    args: &DemoArgs,
) -> anyhow::Result<Summary> {
    let mut rng = ChaCha8Rng::seed_from_u64(args.seed);
    let (taught, replayed) = items.split_at(replay_start);

    let bar = progress(taught.len(), "teach");
    bar.set_message("weeks 1-2 as moderator feedback");
    for item in taught {
        let body = json!({
            "message": Value::Object(item.message.clone()),
            "label": label_word(item.is_junk),
            "moderator": "desk-lead",
            "idempotency_key": format!("demo-teach-{}", item.id),
        });
        client.post_ok("/v1/feedback", &body)?;
        bar.inc(1);
    }
    bar.finish();
    client.wait_learnt()?;

    let bar = progress(replayed.len(), "replay");
    let mut pending: VecDeque<PendingLabel> = VecDeque::new();
    let mut outcomes: Vec<Replayed> = Vec::with_capacity(replayed.len());
    for (position, item) in replayed.iter().enumerate() {
        bar.set_message(format!("week {}", item.week));
        let mut request = item.message.clone();
        request.insert("received_at_ms".into(), json!(item.at_ms + shift_ms));
        request.insert("client_ref".into(), json!(item.id));
        let answer = client.post_ok("/v1/score", &Value::Object(request))?;
        let decision_id = answer["decision_id"]
            .as_str()
            .context("score answer without decision_id")?
            .to_owned();
        let p_junk = answer["p_junk"]
            .as_f64()
            .context("score answer without p_junk")?;
        let verdict = answer["verdict"].as_str().unwrap_or_default().to_owned();
        let share = if verdict == "review" {
            args.review_share
        } else {
            args.label_share
        };
        let mut labelled = None;
        if rng.random_bool(share) {
            let wrong = rng.random_bool(args.wrong_share);
            let given = item.is_junk != wrong;
            labelled = Some(given);
            let delay = if rng.random_bool(args.late_share) {
                args.late_by
            } else {
                0
            };
            pending.push_back(PendingLabel {
                due_after: position + delay,
                decision_id,
                label: label_word(given),
                moderator: MODERATORS[rng.random_range(0..MODERATORS.len())],
            });
        }
        outcomes.push(Replayed {
            week: item.week,
            is_junk: item.is_junk,
            p_junk,
            verdict,
            labelled,
        });
        deliver(client, &mut pending, Some(position))?;
        bar.inc(1);
    }
    deliver(client, &mut pending, None)?;
    bar.finish();
    client.wait_learnt()?;
    let from_ms = replayed.first().map_or(0, |item| item.at_ms + shift_ms);
    let to_ms = replayed.last().map_or(0, |item| item.at_ms + shift_ms);
    let report = drift_report(client, items, shift_ms, to_ms)?;
    Ok(Summary {
        outcomes,
        from_ms,
        to_ms,
        report,
    })
}

/// The first week whose new junk the drift report should notice.
const CAMPAIGN_WEEK: u32 = 5;

/// What the drift report said about the replay: weeks 3-4 as the baseline
/// against weeks 5-8 as the current window.
struct ReportSummary {
    /// The query the report was asked with, for the page's address.
    query: String,
    psi: Option<f64>,
    psi_band: Option<String>,
    /// (detector, when it fired, the corpus week of that time).
    alarms: Vec<(String, String, u32)>,
}

fn drift_report(
    client: &Client,
    items: &[DemoItem],
    shift_ms: i64,
    to_ms: i64,
) -> anyhow::Result<ReportSummary> {
    let week_start = |week: u32| {
        items
            .iter()
            .find(|item| item.week >= week)
            .map(|item| item.at_ms + shift_ms)
    };
    let (Some(baseline_start), Some(current_start)) =
        (week_start(TAUGHT_WEEKS + 1), week_start(CAMPAIGN_WEEK))
    else {
        bail!(
            "the demo corpus has no weeks {} and {CAMPAIGN_WEEK}",
            TAUGHT_WEEKS + 1
        );
    };
    let at_ms = to_ms + 1;
    let baseline_secs = (current_start - baseline_start) / 1000;
    let current_secs = (at_ms - current_start + 999) / 1000;
    let query = format!("baseline={baseline_secs}s&current={current_secs}s&at={at_ms}");
    let (status, report) = client.get(&format!("/v1/reports/drift?{query}"))?;
    if status != 200 {
        bail!("/v1/reports/drift answered {status}: {report}");
    }
    // The corpus week of a (shifted) time: that of the last message before it.
    let week_of = |at: i64| {
        items
            .iter()
            .take_while(|item| item.at_ms + shift_ms <= at)
            .last()
            .map_or(0, |item| item.week)
    };
    let alarms = report["alarms"]
        .as_array()
        .map(|alarms| {
            alarms
                .iter()
                .map(|alarm| {
                    let at = alarm["at_ms"].as_i64().unwrap_or(0);
                    (
                        alarm["detector"].as_str().unwrap_or("?").to_owned(),
                        alarm["at"].as_str().unwrap_or("?").to_owned(),
                        week_of(at),
                    )
                })
                .collect()
        })
        .unwrap_or_default();
    let scores = &report["overall"]["scores"];
    Ok(ReportSummary {
        query,
        psi: scores["psi"].as_f64(),
        psi_band: scores["psi_band"].as_str().map(str::to_owned),
        alarms,
    })
}

/// Posts the labels due by `position` (all of them when `None`).
fn deliver(
    client: &Client,
    pending: &mut VecDeque<PendingLabel>,
    position: Option<usize>,
) -> anyhow::Result<()> {
    let mut index = 0;
    while index < pending.len() {
        if position.is_some_and(|now| pending[index].due_after > now) {
            index += 1;
            continue;
        }
        let Some(label) = pending.remove(index) else {
            break;
        };
        let body = json!({
            "decision_id": label.decision_id,
            "label": label.label,
            "moderator": label.moderator,
        });
        client.post_ok("/v1/feedback", &body)?;
    }
    Ok(())
}

/// What the replay showed.
struct Summary {
    outcomes: Vec<Replayed>,
    /// When the first and the last replayed message arrived (shifted).
    from_ms: i64,
    to_ms: i64,
    report: ReportSummary,
}

/// Figures of one group of replayed decisions.
struct Figures {
    messages: usize,
    auc: Option<f64>,
    junk_caught_pct: f64,
    fine_flagged_pct: f64,
    review: usize,
    overturned: usize,
}

impl Figures {
    fn of<'a>(rows: impl Iterator<Item = &'a Replayed>) -> Figures {
        let rows: Vec<&Replayed> = rows.collect();
        let scores: Vec<f64> = rows.iter().map(|row| row.p_junk).collect();
        let labels: Vec<bool> = rows.iter().map(|row| row.is_junk).collect();
        let junk = labels.iter().filter(|&&junk| junk).count();
        let fine = rows.len() - junk;
        let caught = rows
            .iter()
            .filter(|row| row.is_junk && row.verdict == "junk")
            .count();
        let flagged = rows
            .iter()
            .filter(|row| !row.is_junk && row.verdict == "junk")
            .count();
        let pct = |part: usize, whole: usize| {
            if whole == 0 {
                0.0
            } else {
                100.0 * part as f64 / whole as f64
            }
        };
        Figures {
            messages: rows.len(),
            auc: chaffgate_metrics::roc_auc(&scores, &labels).ok(),
            junk_caught_pct: pct(caught, junk),
            fine_flagged_pct: pct(flagged, fine),
            review: rows.iter().filter(|row| row.verdict == "review").count(),
            overturned: rows.iter().filter(|row| row.overturned()).count(),
        }
    }
}

impl Replayed {
    /// Labelled, and the label contradicts a junk or fine verdict.
    fn overturned(&self) -> bool {
        match (self.labelled, self.verdict.as_str()) {
            (Some(junk), "junk") => !junk,
            (Some(junk), "fine") => junk,
            _ => false,
        }
    }
}

impl Summary {
    fn overall(&self) -> Figures {
        Figures::of(self.outcomes.iter())
    }

    fn to_text(&self) -> String {
        let (from, to) = (rfc3339(self.from_ms), rfc3339(self.to_ms));
        let mut out = format!(
            "\nThe demo stream, weeks 3-8, replayed as arriving from {from} to {to}\n\
             (every message, labelled or not, against its true label):\n\n"
        );
        out.push_str(&format!(
            "{:<8} {:>8} {:>8} {:>12} {:>13} {:>8} {:>11}\n",
            "week", "messages", "ROC AUC", "junk caught", "fine as junk", "review", "overturned"
        ));
        let mut weeks: Vec<u32> = self.outcomes.iter().map(|row| row.week).collect();
        weeks.dedup();
        let row = |name: String, figures: Figures| {
            let auc = figures
                .auc
                .map_or_else(|| "-".to_owned(), |auc| format!("{auc:.4}"));
            format!(
                "{name:<8} {:>8} {auc:>8} {:>11.1}% {:>12.2}% {:>8} {:>11}\n",
                figures.messages,
                figures.junk_caught_pct,
                figures.fine_flagged_pct,
                figures.review,
                figures.overturned
            )
        };
        for week in weeks {
            let figures = Figures::of(self.outcomes.iter().filter(|row| row.week == week));
            out.push_str(&row(format!("{week}"), figures));
        }
        out.push_str(&row("all".to_owned(), self.overall()));
        let report = &self.report;
        out.push_str(&format!(
            "\nDrift report, weeks 3-4 (baseline) against weeks {CAMPAIGN_WEEK}-8 (current):\n"
        ));
        match (report.psi, &report.psi_band) {
            (Some(psi), Some(band)) => {
                out.push_str(&format!("  score shift: PSI {psi:.3} ({band})\n"))
            }
            _ => out.push_str("  score shift: not enough decisions\n"),
        }
        if report.alarms.is_empty() {
            out.push_str("  alarms: none\n");
        }
        for (detector, at, week) in &report.alarms {
            out.push_str(&format!("  alarm: {detector} at {at} (week {week})\n"));
        }
        out.push_str(
            "\nThe stream is invented and generated by our own script, so these figures show \
             that the pipeline works end to end, not how accurate chaffgate is on real mail.\n",
        );
        out
    }
}

fn print_urls(address: SocketAddr, secret: &str, report_query: Option<&str>) {
    let base = format!("http://{address}");
    let report = match report_query {
        Some(query) => format!("{base}/reports?{query}"),
        None => format!("{base}/reports"),
    };
    println!(
        "\nThe demo service is running; press Ctrl-C to stop it.\n\n\
         \x20 review queue:  {base}/review\n\
         \x20 drift report:  {report}\n\
         \x20 metrics:       {base}/metrics\n\
         \x20 API document:  {base}/v1/openapi.json\n\
         \x20 token (role operate; the pages ask for it): {secret}\n\n\
         Try:\n\
         \x20 curl -s {base}/v1/score -H 'authorization: Bearer {secret}' \\\n\
         \x20   -H 'content-type: application/json' \\\n\
         \x20   -d '{{\"subject\":\"Kiln repair quote\",\"body\":\"Could you send the invoice for the repair?\",\"channel\":\"mail\"}}'\n\
         \x20 curl -s '{base}/v1/decisions?verdict=review&limit=5' -H 'authorization: Bearer {secret}'\n\
         \x20 curl -s {base}/metrics -H 'authorization: Bearer {secret}'\n"
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn corpus_lines_lose_their_bookkeeping_fields() {
        let line = r#"{"id":"m1","at":"2026-03-02T09:00:00Z","week":1,"channel":"mail","label":"junk","campaign":"fake-invoice","subject":"Invoice 7"}"#;
        let item = parse_line(line).unwrap();
        assert!(item.is_junk);
        assert_eq!(item.week, 1);
        let keys: Vec<&str> = item.message.keys().map(String::as_str).collect();
        assert_eq!(keys, ["channel", "subject"]);
        assert!(parse_line(r#"{"id":"m1","at":"x","week":1,"label":"junk"}"#).is_err());
        assert!(
            parse_line(r#"{"id":"m1","at":"2026-03-02T09:00:00Z","week":1,"label":"spam"}"#)
                .is_err()
        );
    }

    #[test]
    fn overturns_count_only_contradicted_junk_or_fine_verdicts() {
        let row = |verdict: &str, labelled| Replayed {
            week: 3,
            is_junk: true,
            p_junk: 0.5,
            verdict: verdict.to_owned(),
            labelled,
        };
        assert!(row("fine", Some(true)).overturned());
        assert!(row("junk", Some(false)).overturned());
        assert!(!row("junk", Some(true)).overturned());
        assert!(!row("review", Some(false)).overturned());
        assert!(!row("fine", None).overturned());
    }

    #[test]
    fn the_folder_of_someone_else_is_never_deleted() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("notes.txt"), "mine").unwrap();
        assert!(prepare_folder(dir.path(), false).is_err());
        assert!(dir.path().join("notes.txt").exists());
        let demo = dir.path().join("demo");
        assert!(prepare_folder(&demo, false).unwrap());
        std::fs::write(demo.join("left-over"), "x").unwrap();
        assert!(prepare_folder(&demo, false).unwrap());
        assert!(!demo.join("left-over").exists());
    }
}
