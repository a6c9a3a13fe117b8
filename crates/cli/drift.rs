//! `chaffgate drift`: the drift report of a database, as tables or JSON.
//!
//! Opens the SQLite file the daemon writes (it may be running: reads do
//! not block its writer in WAL mode), builds the report ending now or at
//! `--at`, and prints it. The windows default to `[reports]` in the
//! configuration.

use std::path::PathBuf;

use anyhow::{Context, bail};
use chaffgate_report::ReportRequest;
use chaffgate_report::time::{parse_span, parse_time};
use chaffgate_server::state::now_ms;
use chaffgate_store::Store;

use crate::config::Config;
use crate::serve::DATABASE_FILE;

pub struct DriftOptions {
    /// The database; default `data_dir/chaffgate.db`.
    pub db: Option<PathBuf>,
    pub baseline: Option<String>,
    pub current: Option<String>,
    pub channel: Option<String>,
    /// RFC 3339 or ms; default now.
    pub at: Option<String>,
    pub json: bool,
}

pub async fn run(config: &Config, options: DriftOptions) -> anyhow::Result<()> {
    let (default_baseline, default_current) = config.report_windows()?;
    let baseline = match &options.baseline {
        Some(text) => parse_span(text).context("--baseline")?,
        None => default_baseline,
    };
    let current = match &options.current {
        Some(text) => parse_span(text).context("--current")?,
        None => default_current,
    };
    let at_ms = match &options.at {
        Some(text) => parse_time(text).context("--at")?,
        None => now_ms(),
    };
    if options.channel.as_deref() == Some("") {
        bail!("--channel \"\": name a channel, or leave the flag out for all");
    }
    let database = options
        .db
        .unwrap_or_else(|| config.server.data_dir.join(DATABASE_FILE));
    // Opening a missing file would create an empty database; say so instead.
    if !database.is_file() {
        bail!(
            "no database at {}: name one with --db, or run `chaffgate serve` first",
            database.display()
        );
    }
    let store = Store::open(&database)
        .await
        .with_context(|| format!("opening database {}", database.display()))?;
    let request = ReportRequest {
        at_ms,
        baseline,
        current,
        channel: options.channel,
        settings: config.report_settings(),
    };
    let report = chaffgate_report::build(&store, &request).await;
    store.close().await;
    let report = report.context("building the drift report")?;
    if options.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", report.to_text());
    }
    Ok(())
}
