//! The deployment's configuration: `config/chaffgate.toml` plus environment overrides.
//!
//! The file describes the deployment; command-line flags describe one run.
//! Every key has a default, so a missing file is fine. After the file is read,
//! each `CHAFFGATE_<SECTION>_<KEY>` environment variable whose name matches a
//! known key replaces that key's value (e.g. `CHAFFGATE_MODEL_FTRL_ALPHA=0.2`
//! sets `model.ftrl.alpha`). Then one `validate()` collects every problem as
//! `key = value: what is allowed`, and nothing starts while there are any.

use std::collections::BTreeMap;
use std::fmt;
use std::path::{Path, PathBuf};

use std::time::Duration;

use anyhow::{Context, bail};
use chaffgate_mail::MailLimits;
use chaffgate_metrics::{Direction, PageHinkleyParams};
use chaffgate_model::UpdateRule;
use chaffgate_report::time::{format_span, parse_span};
use chaffgate_report::{DetectorSettings, MAX_PSI_BINS, ReportSettings, VerdictThresholds};
use chaffgate_server::Thresholds;
use chaffgate_text::FeatureSettings;
use serde::{Deserialize, Serialize};

/// Where `chaffgate` looks for its configuration when `--config` is not given.
pub const DEFAULT_CONFIG_PATH: &str = "config/chaffgate.toml";

/// The whole configuration file, as read (before validation).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct Config {
    pub server: ServerConfig,
    pub audit: AuditConfig,
    pub learner: LearnerConfig,
    pub features: FeatureSettings,
    pub mail: MailConfig,
    pub model: ModelConfig,
    pub tally: TallyConfig,
    pub alarms: AlarmsConfig,
    pub channels: BTreeMap<String, ChannelConfig>,
    pub reports: ReportsConfig,
}

impl Default for Config {
    fn default() -> Self {
        let mut channels = BTreeMap::new();
        channels.insert(DEFAULT_CHANNEL.to_owned(), ChannelConfig::default());
        Config {
            server: ServerConfig::default(),
            audit: AuditConfig::default(),
            learner: LearnerConfig::default(),
            features: FeatureSettings::default(),
            mail: MailConfig::default(),
            model: ModelConfig::default(),
            tally: TallyConfig::default(),
            alarms: AlarmsConfig::default(),
            channels,
            reports: ReportsConfig::default(),
        }
    }
}

/// Where and how the daemon listens.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ServerConfig {
    /// Address and port to listen on.
    pub listen: String,
    /// Folder for the database and checkpoints, created on first start.
    pub data_dir: PathBuf,
    /// Largest request body accepted (413 above).
    pub max_body_bytes: u64,
    /// Most messages in one batch request.
    pub max_batch: u32,
    /// Largest text of one message (413 above).
    pub max_message_bytes: u64,
    /// Reasons given with each decision.
    pub reasons: u32,
}

impl Default for ServerConfig {
    fn default() -> Self {
        ServerConfig {
            listen: "127.0.0.1:7300".to_owned(),
            data_dir: PathBuf::from("data"),
            max_body_bytes: 1024 * 1024,
            max_batch: 100,
            max_message_bytes: 256 * 1024,
            reasons: 8,
        }
    }
}

/// What the audit log keeps and when a score is acknowledged.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct AuditConfig {
    /// Keep each message's text in its decision row (otherwise a digest).
    pub keep_text: bool,
    /// `after_commit` or `after_queue`.
    pub ack: AckName,
    /// Most decision rows committed in one transaction.
    pub max_batch_rows: u32,
    /// Seconds a decision's message is kept so feedback on it can be learnt.
    pub feedback_window_secs: u64,
    /// Whether score requests may carry `received_at_ms` as the decision's time.
    pub accept_client_time: bool,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AckName {
    AfterCommit,
    AfterQueue,
}

impl Default for AuditConfig {
    fn default() -> Self {
        AuditConfig {
            keep_text: false,
            ack: AckName::AfterCommit,
            max_batch_rows: 512,
            feedback_window_secs: 30 * 24 * 3600,
            accept_client_time: false,
        }
    }
}

/// When the learner writes checkpoints and how many it keeps.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct LearnerConfig {
    /// Write a checkpoint after this many learnt feedback rows.
    pub checkpoint_every_updates: u64,
    /// ... or after this many seconds with at least one learnt row.
    pub checkpoint_every_secs: u64,
    /// Checkpoint files kept; older ones are deleted.
    pub keep_checkpoints: u32,
    /// How often the feedback log is checked for rows written elsewhere.
    pub poll_every_ms: u64,
}

impl Default for LearnerConfig {
    fn default() -> Self {
        LearnerConfig {
            checkpoint_every_updates: 1000,
            checkpoint_every_secs: 300,
            keep_checkpoints: 5,
            poll_every_ms: 1000,
        }
    }
}

/// Caps on reading one raw mail (score requests, JSONL corpora, mail
/// folders); see [`MailLimits`], whose defaults these are.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct MailConfig {
    pub max_bytes: u64,
    pub max_mime_depth: u32,
    pub max_parts: u32,
    pub max_headers: u32,
    pub max_decoded_bytes: u64,
    pub time_budget_ms: u64,
}

/// Longest allowed `mail.time_budget_ms`: a minute per mail is already far
/// past any useful budget, so more is taken for a unit mistake.
const MAX_MAIL_TIME_BUDGET_MS: u64 = 60_000;

impl Default for MailConfig {
    fn default() -> Self {
        let limits = MailLimits::default();
        MailConfig {
            max_bytes: limits.max_bytes as u64,
            max_mime_depth: u32::try_from(limits.max_mime_depth).unwrap_or(u32::MAX),
            max_parts: u32::try_from(limits.max_parts).unwrap_or(u32::MAX),
            max_headers: u32::try_from(limits.max_headers).unwrap_or(u32::MAX),
            max_decoded_bytes: limits.max_decoded_bytes as u64,
            time_budget_ms: u64::try_from(limits.time_budget.as_millis()).unwrap_or(u64::MAX),
        }
    }
}

impl MailConfig {
    /// The caps as the mail reader takes them.
    pub fn limits(&self) -> MailLimits {
        let size = |value: u64| usize::try_from(value).unwrap_or(usize::MAX);
        let count = |value: u32| usize::try_from(value).unwrap_or(usize::MAX);
        MailLimits {
            max_bytes: size(self.max_bytes),
            max_mime_depth: count(self.max_mime_depth),
            max_parts: count(self.max_parts),
            max_headers: count(self.max_headers),
            max_decoded_bytes: size(self.max_decoded_bytes),
            time_budget: std::time::Duration::from_millis(self.time_budget_ms),
        }
    }
}

/// The channel whose thresholds apply to messages that name no channel, or
/// a channel without thresholds of its own.
pub const DEFAULT_CHANNEL: &str = "default";

/// Feature tallies for drift reports: which readable feature names a sample
/// of scored messages carries, per time bucket and channel.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct TallyConfig {
    /// Whether feature names are tallied at all.
    pub enabled: bool,
    /// Above the low-rate allowance, tally one decision in this many.
    pub sample_every: u64,
    /// Tally every decision while fewer than this many were scored in the
    /// current second.
    pub sample_all_below_per_sec: u64,
    /// Counters per (bucket, channel) kept in memory.
    pub capacity: u32,
    /// Names written per (bucket, channel) at each flush.
    pub top_k: u32,
    /// Seconds between writes of the tallies to the database.
    pub flush_every_secs: u64,
    /// Sampled decisions waiting to be tallied before more are dropped.
    pub queue: u32,
    /// Whether character n-gram features are tallied too.
    pub ngrams: bool,
    /// Length of one bucket in seconds; must divide a day.
    pub bucket_secs: u64,
}

impl Default for TallyConfig {
    fn default() -> Self {
        TallyConfig {
            enabled: true,
            sample_every: 100,
            sample_all_below_per_sec: 20,
            capacity: 10_000,
            top_k: 500,
            flush_every_secs: 60,
            queue: 1024,
            ngrams: false,
            bucket_secs: 3600,
        }
    }
}

/// Live drift alarms (Page-Hinkley detectors) exported at `/metrics`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct AlarmsConfig {
    /// Seconds the alarm gauge stays at 1 after a detector fires.
    pub hold_secs: u64,
    pub p_junk: PJunkDetectorConfig,
    pub feedback_error: FeedbackErrorDetectorConfig,
}

impl Default for AlarmsConfig {
    fn default() -> Self {
        AlarmsConfig {
            hold_secs: 3600,
            p_junk: PJunkDetectorConfig::default(),
            feedback_error: FeedbackErrorDetectorConfig::default(),
        }
    }
}

/// Which shift of a stream's mean raises an alarm.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DirectionName {
    Increase,
    Decrease,
    Either,
}

/// The detector over every decision's `p_junk`. Its defaults are justified
/// in `crates/server/tests/p_junk_alarm_defaults.rs`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct PJunkDetectorConfig {
    pub delta: f64,
    pub lambda: f64,
    pub min_samples: u64,
    pub direction: DirectionName,
}

impl Default for PJunkDetectorConfig {
    fn default() -> Self {
        PJunkDetectorConfig {
            delta: 0.05,
            lambda: 50.0,
            min_samples: 100,
            direction: DirectionName::Either,
        }
    }
}

/// The detector over `|label - p_junk|` of labelled decisions. Its
/// defaults are those of `crates/metrics/tests/page_hinkley_streams.rs`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct FeedbackErrorDetectorConfig {
    pub delta: f64,
    pub lambda: f64,
    pub min_samples: u64,
    pub direction: DirectionName,
}

impl Default for FeedbackErrorDetectorConfig {
    fn default() -> Self {
        FeedbackErrorDetectorConfig {
            delta: 0.04,
            lambda: 10.0,
            min_samples: 30,
            direction: DirectionName::Increase,
        }
    }
}

impl PJunkDetectorConfig {
    pub fn params(&self) -> PageHinkleyParams {
        detector_params(self.delta, self.lambda, self.min_samples, self.direction)
    }
}

impl FeedbackErrorDetectorConfig {
    pub fn params(&self) -> PageHinkleyParams {
        detector_params(self.delta, self.lambda, self.min_samples, self.direction)
    }
}

fn detector_params(
    delta: f64,
    lambda: f64,
    min_samples: u64,
    direction: DirectionName,
) -> PageHinkleyParams {
    PageHinkleyParams {
        delta,
        lambda,
        min_samples,
        direction: match direction {
            DirectionName::Increase => Direction::Increase,
            DirectionName::Decrease => Direction::Decrease,
            DirectionName::Either => Direction::Either,
        },
    }
}

/// Which update rule learns, and the hyper-parameters of each.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ModelConfig {
    /// `ftrl` or `adagrad`.
    pub rule: RuleName,
    pub ftrl: FtrlConfig,
    pub adagrad: AdagradConfig,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RuleName {
    Ftrl,
    Adagrad,
}

impl fmt::Display for RuleName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RuleName::Ftrl => f.write_str("ftrl"),
            RuleName::Adagrad => f.write_str("adagrad"),
        }
    }
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct FtrlConfig {
    pub alpha: f64,
    pub beta: f64,
    pub l1: f64,
    pub l2: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct AdagradConfig {
    pub eta: f64,
    pub l2: f64,
    pub delta: f64,
}

// The defaults below come from the search recorded in docs/tuning.md.
impl Default for ModelConfig {
    fn default() -> Self {
        ModelConfig {
            rule: RuleName::Ftrl,
            ftrl: FtrlConfig::default(),
            adagrad: AdagradConfig::default(),
        }
    }
}

impl Default for FtrlConfig {
    fn default() -> Self {
        FtrlConfig {
            alpha: 0.5,
            beta: 0.01,
            l1: 0.0,
            l2: 0.0,
        }
    }
}

impl Default for AdagradConfig {
    fn default() -> Self {
        AdagradConfig {
            eta: 0.5,
            l2: 0.0,
            delta: 0.01,
        }
    }
}

impl ModelConfig {
    /// The update rule this configuration selects, with its hyper-parameters.
    pub fn update_rule(&self) -> UpdateRule {
        match self.rule {
            RuleName::Ftrl => UpdateRule::Ftrl {
                alpha: self.ftrl.alpha,
                beta: self.ftrl.beta,
                l1: self.ftrl.l1,
                l2: self.ftrl.l2,
            },
            RuleName::Adagrad => UpdateRule::Adagrad {
                eta: self.adagrad.eta,
                l2: self.adagrad.l2,
                delta: self.adagrad.delta,
            },
        }
    }
}

/// How drift reports (`chaffgate drift`, `GET /v1/reports/drift`) are
/// computed; see the `[reports]` section of `config/chaffgate.toml`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ReportsConfig {
    /// Baseline window length unless a report asks for another, e.g. `7d`.
    pub baseline: String,
    /// Current window length unless a report asks for another, e.g. `1d`.
    pub current: String,
    /// Equal-width `p_junk` bins of the stability index.
    pub psi_bins: u32,
    /// False-junk rate the threshold advice keeps to.
    pub false_junk_target: f64,
    /// Page-Hinkley δ over overturned verdicts.
    pub error_delta: f64,
    /// Page-Hinkley λ over overturned verdicts.
    pub error_lambda: f64,
    /// Labelled decisions before that detector may fire.
    pub error_min_samples: u64,
    /// Page-Hinkley δ over mean `p_junk`.
    pub p_junk_delta: f64,
    /// Page-Hinkley λ over mean `p_junk`.
    pub p_junk_lambda: f64,
    /// Samples before that detector may fire.
    pub p_junk_min_samples: u64,
    /// Decisions one sample of that detector holds at least.
    pub p_junk_block: u32,
}

impl Default for ReportsConfig {
    /// The report engine's own defaults (measured in its tests).
    fn default() -> Self {
        let settings = ReportSettings::default();
        ReportsConfig {
            baseline: format_span(chaffgate_report::DEFAULT_BASELINE),
            current: format_span(chaffgate_report::DEFAULT_CURRENT),
            psi_bins: u32::try_from(settings.psi_bins).unwrap_or(10),
            false_junk_target: settings.false_junk_target,
            error_delta: settings.error_detector.delta,
            error_lambda: settings.error_detector.lambda,
            error_min_samples: settings.error_detector.min_samples,
            p_junk_delta: settings.p_junk_detector.delta,
            p_junk_lambda: settings.p_junk_detector.lambda,
            p_junk_min_samples: settings.p_junk_detector.min_samples,
            p_junk_block: settings.p_junk_block,
        }
    }
}

impl ReportsConfig {
    /// Every problem with these keys, as `reports.key = value: allowed`.
    fn problems(&self) -> Vec<String> {
        let mut problems = Vec::new();
        for (key, value) in [("baseline", &self.baseline), ("current", &self.current)] {
            if let Err(err) = parse_span(value) {
                problems.push(format!("reports.{key} = {value:?}: {err}"));
            }
        }
        let bins = self.psi_bins;
        if !(1..=MAX_PSI_BINS).contains(&(bins as usize)) {
            problems.push(format!(
                "reports.psi_bins = {bins}: must be between 1 and {MAX_PSI_BINS}"
            ));
        }
        let target = self.false_junk_target;
        if !(0.0..1.0).contains(&target) {
            problems.push(format!(
                "reports.false_junk_target = {target}: must be at least 0 and below 1"
            ));
        }
        for (key, delta) in [
            ("error_delta", self.error_delta),
            ("p_junk_delta", self.p_junk_delta),
        ] {
            if !(delta >= 0.0 && delta.is_finite()) {
                problems.push(format!(
                    "reports.{key} = {delta}: must be a finite number at least 0"
                ));
            }
        }
        for (key, lambda) in [
            ("error_lambda", self.error_lambda),
            ("p_junk_lambda", self.p_junk_lambda),
        ] {
            if !(lambda > 0.0 && lambda.is_finite()) {
                problems.push(format!(
                    "reports.{key} = {lambda}: must be a finite number above 0"
                ));
            }
        }
        if self.p_junk_block == 0 {
            problems.push("reports.p_junk_block = 0: must be at least 1".to_owned());
        }
        problems
    }
}

/// The `p_junk` thresholds that turn a score into a verdict for one channel.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ChannelConfig {
    /// `p_junk` at or above this is `junk`.
    pub junk_threshold: f64,
    /// `p_junk` at or above this (and below `junk_threshold`) is `review`.
    pub review_threshold: f64,
}

impl Default for ChannelConfig {
    fn default() -> Self {
        // A wide review band by default: a person looks before anything
        // uncertain is hidden (common practice, no source).
        ChannelConfig {
            junk_threshold: 0.9,
            review_threshold: 0.4,
        }
    }
}

impl ChannelConfig {
    /// The typed thresholds the verdict is computed from.
    pub fn thresholds(&self) -> Thresholds {
        Thresholds {
            junk: self.junk_threshold,
            review: self.review_threshold,
        }
    }
}

impl Config {
    /// Reads `path` if it exists (a missing file at the default path means
    /// "all defaults"; a missing file the user named is an error), applies
    /// environment overrides from `env`, and validates the result.
    pub fn load(
        path: Option<&Path>,
        env: impl IntoIterator<Item = (String, String)>,
    ) -> anyhow::Result<Config> {
        let (text, origin) = match path {
            Some(path) => (
                std::fs::read_to_string(path)
                    .with_context(|| format!("reading config {}", path.display()))?,
                path.display().to_string(),
            ),
            None => match std::fs::read_to_string(DEFAULT_CONFIG_PATH) {
                Ok(text) => (text, DEFAULT_CONFIG_PATH.to_owned()),
                Err(err) if err.kind() == std::io::ErrorKind::NotFound => {
                    (String::new(), "built-in defaults".to_owned())
                }
                Err(err) => {
                    return Err(err)
                        .with_context(|| format!("reading config {DEFAULT_CONFIG_PATH}"));
                }
            },
        };
        let mut table: toml::Table =
            toml::from_str(&text).with_context(|| format!("parsing config {origin}"))?;
        apply_env_overrides(&mut table, env)?;
        let mut config: Config = toml::Value::Table(table)
            .try_into()
            .with_context(|| format!("reading config {origin} (with environment overrides)"))?;
        // A file that names only its own channels keeps the default
        // channel's thresholds for everything else.
        config
            .channels
            .entry(DEFAULT_CHANNEL.to_owned())
            .or_default();
        config.validate()?;
        Ok(config)
    }

    /// Checks every value and reports all problems at once.
    pub fn validate(&self) -> anyhow::Result<()> {
        let mut problems: Vec<String> = Vec::new();
        if let Err(found) = self.features.validate() {
            problems.extend(found.iter().map(|p| p.to_string()));
        }
        if let Err(found) = self.model.update_rule().validate() {
            // The model names keys `model.<param>`; in this file they sit
            // under the rule's own table.
            let table = format!("model.{}.", self.model.rule);
            problems.extend(
                found
                    .iter()
                    .map(|p| p.to_string().replacen("model.", &table, 1)),
            );
        }
        if let Err(found) = self.mail.limits().validate() {
            // The time budget is checked below under its config name.
            problems.extend(
                found
                    .iter()
                    .filter(|p| p.key != "time_budget")
                    .map(|p| p.to_string()),
            );
        }
        let budget = self.mail.time_budget_ms;
        if !(1..=MAX_MAIL_TIME_BUDGET_MS).contains(&budget) {
            problems.push(format!(
                "mail.time_budget_ms = {budget}: must be between 1 and {MAX_MAIL_TIME_BUDGET_MS}"
            ));
        }
        let server = &self.server;
        if let Err(err) = server.listen.parse::<std::net::SocketAddr>() {
            let listen = &server.listen;
            problems.push(format!(
                "server.listen = {listen:?}: must be an address and port such as 127.0.0.1:7300 ({err})"
            ));
        }
        if server.data_dir.as_os_str().is_empty() {
            problems.push("server.data_dir = \"\": must name a folder".to_owned());
        }
        let body = server.max_body_bytes;
        if !(1024..=1 << 30).contains(&body) {
            problems.push(format!(
                "server.max_body_bytes = {body}: must be between 1024 and 1073741824"
            ));
        }
        let batch = server.max_batch;
        if !(1..=10_000).contains(&batch) {
            problems.push(format!(
                "server.max_batch = {batch}: must be between 1 and 10000"
            ));
        }
        let text = server.max_message_bytes;
        if text == 0 || text > body {
            problems.push(format!(
                "server.max_message_bytes = {text}: must be at least 1 and at most server.max_body_bytes ({body})"
            ));
        }
        let reasons = server.reasons;
        if reasons > 100 {
            problems.push(format!(
                "server.reasons = {reasons}: must be between 0 and 100"
            ));
        }
        let rows = self.audit.max_batch_rows;
        if !(1..=100_000).contains(&rows) {
            problems.push(format!(
                "audit.max_batch_rows = {rows}: must be between 1 and 100000"
            ));
        }
        let window = self.audit.feedback_window_secs;
        if !(1..=10 * 365 * 24 * 3600).contains(&window) {
            problems.push(format!(
                "audit.feedback_window_secs = {window}: must be between 1 and 315360000 (ten years)"
            ));
        }
        let learner = &self.learner;
        let every = learner.checkpoint_every_updates;
        if every == 0 {
            problems.push(format!(
                "learner.checkpoint_every_updates = {every}: must be at least 1"
            ));
        }
        let secs = learner.checkpoint_every_secs;
        if secs == 0 {
            problems.push(format!(
                "learner.checkpoint_every_secs = {secs}: must be at least 1"
            ));
        }
        let keep = learner.keep_checkpoints;
        if !(1..=1000).contains(&keep) {
            problems.push(format!(
                "learner.keep_checkpoints = {keep}: must be between 1 and 1000"
            ));
        }
        let poll = learner.poll_every_ms;
        if !(10..=3_600_000).contains(&poll) {
            problems.push(format!(
                "learner.poll_every_ms = {poll}: must be between 10 and 3600000"
            ));
        }
        self.validate_tally(&mut problems);
        self.validate_alarms(&mut problems);
        if !self.channels.contains_key(DEFAULT_CHANNEL) {
            problems.push(format!(
                "channels.{DEFAULT_CHANNEL} is missing: the default channel must have thresholds"
            ));
        }
        for (name, channel) in &self.channels {
            let junk = channel.junk_threshold;
            let review = channel.review_threshold;
            if !(0.0..=1.0).contains(&junk) {
                problems.push(format!(
                    "channels.{name}.junk_threshold = {junk}: must be between 0 and 1"
                ));
            }
            if !(0.0..=1.0).contains(&review) {
                problems.push(format!(
                    "channels.{name}.review_threshold = {review}: must be between 0 and 1"
                ));
            }
            if review > junk {
                problems.push(format!(
                    "channels.{name}.review_threshold = {review}: must not be above junk_threshold ({junk})"
                ));
            }
        }
        problems.extend(self.reports.problems());
        if problems.is_empty() {
            return Ok(());
        }
        bail!("invalid configuration:\n  {}", problems.join("\n  "))
    }

    fn validate_tally(&self, problems: &mut Vec<String>) {
        let tally = &self.tally;
        let every = tally.sample_every;
        if !(1..=1_000_000).contains(&every) {
            problems.push(format!(
                "tally.sample_every = {every}: must be between 1 and 1000000"
            ));
        }
        let all_below = tally.sample_all_below_per_sec;
        if all_below > 1_000_000 {
            problems.push(format!(
                "tally.sample_all_below_per_sec = {all_below}: must be between 0 and 1000000"
            ));
        }
        let capacity = tally.capacity;
        if !(10..=1_000_000).contains(&capacity) {
            problems.push(format!(
                "tally.capacity = {capacity}: must be between 10 and 1000000"
            ));
        }
        let top_k = tally.top_k;
        if top_k == 0 || top_k > capacity {
            problems.push(format!(
                "tally.top_k = {top_k}: must be at least 1 and at most tally.capacity ({capacity})"
            ));
        }
        let flush = tally.flush_every_secs;
        if !(1..=86_400).contains(&flush) {
            problems.push(format!(
                "tally.flush_every_secs = {flush}: must be between 1 and 86400"
            ));
        }
        let queue = tally.queue;
        if !(1..=1_000_000).contains(&queue) {
            problems.push(format!(
                "tally.queue = {queue}: must be between 1 and 1000000"
            ));
        }
        let bucket = tally.bucket_secs;
        if bucket == 0 || 86_400 % bucket != 0 {
            problems.push(format!(
                "tally.bucket_secs = {bucket}: must divide a day (86400), e.g. 3600"
            ));
        }
    }

    fn validate_alarms(&self, problems: &mut Vec<String>) {
        let hold = self.alarms.hold_secs;
        if !(1..=30 * 24 * 3600).contains(&hold) {
            problems.push(format!(
                "alarms.hold_secs = {hold}: must be between 1 and 2592000 (30 days)"
            ));
        }
        for (name, params) in [
            ("p_junk", self.alarms.p_junk.params()),
            ("feedback_error", self.alarms.feedback_error.params()),
        ] {
            // Written so that NaN fails too.
            let delta = params.delta;
            if !(delta >= 0.0 && delta.is_finite()) {
                problems.push(format!(
                    "alarms.{name}.delta = {delta}: must be a finite number, at least 0"
                ));
            }
            let lambda = params.lambda;
            if !(lambda > 0.0 && lambda.is_finite()) {
                problems.push(format!(
                    "alarms.{name}.lambda = {lambda}: must be a finite number above 0"
                ));
            }
        }
    }

    /// The drift report settings: the `[reports]` keys and every channel's
    /// thresholds. Call on a validated configuration.
    pub fn report_settings(&self) -> ReportSettings {
        let reports = &self.reports;
        let thresholds = |channel: &ChannelConfig| VerdictThresholds {
            junk: channel.junk_threshold,
            review: channel.review_threshold,
        };
        ReportSettings {
            psi_bins: reports.psi_bins as usize,
            false_junk_target: reports.false_junk_target,
            error_detector: DetectorSettings {
                delta: reports.error_delta,
                lambda: reports.error_lambda,
                min_samples: reports.error_min_samples,
            },
            p_junk_detector: DetectorSettings {
                delta: reports.p_junk_delta,
                lambda: reports.p_junk_lambda,
                min_samples: reports.p_junk_min_samples,
            },
            p_junk_block: reports.p_junk_block,
            default_thresholds: thresholds(&self.channel(None)),
            channel_thresholds: self
                .channels
                .iter()
                .filter(|(name, _)| name.as_str() != DEFAULT_CHANNEL)
                .map(|(name, channel)| (name.clone(), thresholds(channel)))
                .collect(),
        }
    }

    /// The default report windows `(baseline, current)` of `[reports]`.
    /// Call on a validated configuration.
    pub fn report_windows(&self) -> anyhow::Result<(Duration, Duration)> {
        let baseline = parse_span(&self.reports.baseline).context("reports.baseline")?;
        let current = parse_span(&self.reports.current).context("reports.current")?;
        Ok((baseline, current))
    }

    /// The thresholds for `channel`, falling back to the default channel.
    pub fn channel(&self, channel: Option<&str>) -> ChannelConfig {
        channel
            .and_then(|name| self.channels.get(name))
            .or_else(|| self.channels.get(DEFAULT_CHANNEL))
            .copied()
            .unwrap_or_default()
    }
}

/// Replaces keys of `table` with `CHAFFGATE_<PATH>` environment values.
///
/// The set of known keys is taken from the defaults, so a variable maps to
/// exactly one key (`model.ftrl.alpha` <- `CHAFFGATE_MODEL_FTRL_ALPHA`) and
/// unknown `CHAFFGATE_` variables are reported rather than ignored.
fn apply_env_overrides(
    table: &mut toml::Table,
    env: impl IntoIterator<Item = (String, String)>,
) -> anyhow::Result<()> {
    let defaults = toml::Table::try_from(Config::default()).context("listing config keys")?;
    let mut known: Vec<Vec<String>> = Vec::new();
    collect_key_paths(&defaults, &mut Vec::new(), &mut known);
    // Channels other than the default are named by the operator; accept
    // CHAFFGATE_CHANNELS_<NAME>_<KEY> for any channel in the file too.
    if let Some(toml::Value::Table(channels)) = table.get("channels") {
        for (name, value) in channels {
            if let toml::Value::Table(keys) = value {
                for key in keys.keys() {
                    known.push(vec!["channels".into(), name.clone(), key.clone()]);
                }
            }
        }
    }

    for (name, raw) in env {
        let Some(suffix) = name.strip_prefix("CHAFFGATE_") else {
            continue;
        };
        let Some(path) = known
            .iter()
            .find(|path| path.join("_").to_uppercase() == suffix)
        else {
            continue;
        };
        let value = parse_env_value(&raw);
        insert_path(table, path, value)
            .with_context(|| format!("applying environment variable {name}"))?;
    }
    Ok(())
}

fn collect_key_paths(table: &toml::Table, prefix: &mut Vec<String>, out: &mut Vec<Vec<String>>) {
    for (key, value) in table {
        prefix.push(key.clone());
        match value {
            toml::Value::Table(inner) => collect_key_paths(inner, prefix, out),
            _ => out.push(prefix.clone()),
        }
        prefix.pop();
    }
}

/// An environment value is read as a TOML scalar when it parses as one
/// (`0.2`, `true`, `22`), otherwise as a plain string (`ftrl`).
fn parse_env_value(raw: &str) -> toml::Value {
    let probe = format!("v = {raw}");
    match toml::from_str::<toml::Table>(&probe) {
        Ok(mut table) => table
            .remove("v")
            .unwrap_or_else(|| toml::Value::String(raw.to_owned())),
        Err(_) => toml::Value::String(raw.to_owned()),
    }
}

fn insert_path(table: &mut toml::Table, path: &[String], value: toml::Value) -> anyhow::Result<()> {
    let (last, parents) = path.split_last().context("empty key path")?;
    let mut current = table;
    for key in parents {
        let entry = current
            .entry(key.clone())
            .or_insert_with(|| toml::Value::Table(toml::Table::new()));
        current = match entry {
            toml::Value::Table(inner) => inner,
            _ => bail!("{key} is not a table in the config file"),
        };
    }
    current.insert(last.clone(), value);
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn load_str(text: &str, env: &[(&str, &str)]) -> anyhow::Result<Config> {
        let dir = tempfile::tempdir()?;
        let path = dir.path().join("c.toml");
        std::fs::write(&path, text)?;
        let env = env.iter().map(|(k, v)| (k.to_string(), v.to_string()));
        Config::load(Some(&path), env)
    }

    #[test]
    fn empty_file_gives_defaults() {
        assert_eq!(load_str("", &[]).unwrap(), Config::default());
    }

    #[test]
    fn committed_default_config_matches_built_in_defaults() {
        let text = include_str!("../../config/chaffgate.toml");
        let config: Config = toml::from_str(text).unwrap();
        assert_eq!(config, Config::default());
    }

    #[test]
    fn environment_overrides_nested_keys() {
        let config = load_str(
            "[model]\nrule = \"ftrl\"\n",
            &[
                ("CHAFFGATE_MODEL_FTRL_ALPHA", "0.25"),
                ("CHAFFGATE_MODEL_RULE", "adagrad"),
                ("CHAFFGATE_FEATURES_BITS", "20"),
                ("UNRELATED", "x"),
            ],
        )
        .unwrap();
        assert_eq!(config.model.ftrl.alpha, 0.25);
        assert_eq!(config.model.rule, RuleName::Adagrad);
        assert_eq!(config.features.bits, 20);
    }

    #[test]
    fn bad_values_are_all_reported_with_key_and_allowed_range() {
        let err = load_str(
            "[features]\nbits = 40\n[channels.default]\njunk_threshold = 1.5\n",
            &[("CHAFFGATE_MODEL_FTRL_ALPHA", "nan")],
        )
        .unwrap_err();
        let text = format!("{err:#}");
        assert!(text.contains("features.bits = 40"), "{text}");
        assert!(
            text.contains("channels.default.junk_threshold = 1.5"),
            "{text}"
        );
        assert!(
            text.contains("model.alpha") || text.contains("alpha"),
            "{text}"
        );
    }

    #[test]
    fn tally_and_alarm_settings_are_checked_and_overridable() {
        let config = load_str(
            "[alarms.p_junk]\nlambda = 8.0\n",
            &[
                ("CHAFFGATE_TALLY_FLUSH_EVERY_SECS", "1"),
                ("CHAFFGATE_ALARMS_P_JUNK_DIRECTION", "increase"),
            ],
        )
        .unwrap();
        assert_eq!(config.tally.flush_every_secs, 1);
        // Keys not given keep the detector's own defaults.
        assert_eq!(config.alarms.p_junk.lambda, 8.0);
        assert_eq!(config.alarms.p_junk.delta, 0.05);
        assert_eq!(config.alarms.p_junk.direction, DirectionName::Increase);
        assert_eq!(config.alarms.feedback_error.delta, 0.04);
        let err = load_str(
            "[tally]\ntop_k = 20000\nbucket_secs = 7000\n[alarms.feedback_error]\nlambda = 0.0\n",
            &[("CHAFFGATE_ALARMS_P_JUNK_DELTA", "nan")],
        )
        .unwrap_err();
        let text = format!("{err:#}");
        assert!(text.contains("tally.top_k = 20000"), "{text}");
        assert!(text.contains("tally.bucket_secs = 7000"), "{text}");
        assert!(text.contains("alarms.feedback_error.lambda = 0"), "{text}");
        assert!(text.contains("alarms.p_junk.delta = NaN"), "{text}");
    }

    #[test]
    fn report_keys_are_checked_and_passed_on() {
        let err = load_str(
            "[reports]\nbaseline = \"7 days\"\npsi_bins = 0\nerror_lambda = 0.0\n",
            &[("CHAFFGATE_REPORTS_P_JUNK_BLOCK", "0")],
        )
        .unwrap_err();
        let text = format!("{err:#}");
        for key in [
            "reports.baseline = \"7 days\"",
            "reports.psi_bins = 0",
            "reports.error_lambda = 0",
            "reports.p_junk_block = 0",
        ] {
            assert!(text.contains(key), "{key} missing in {text}");
        }

        let config = load_str(
            "[reports]\ncurrent = \"90m\"\n[channels.tickets]\njunk_threshold = 0.99\nreview_threshold = 0.5\n",
            &[("CHAFFGATE_REPORTS_FALSE_JUNK_TARGET", "0.01")],
        )
        .unwrap();
        let settings = config.report_settings();
        assert_eq!(settings.false_junk_target, 0.01);
        assert_eq!(settings.thresholds(Some("tickets")).junk, 0.99);
        assert_eq!(settings.thresholds(Some("comments")).junk, 0.9);
        let (baseline, current) = config.report_windows().unwrap();
        assert_eq!(baseline, Duration::from_secs(7 * 24 * 3600));
        assert_eq!(current, Duration::from_secs(90 * 60));
        // The defaults are the report engine's own.
        assert_eq!(
            Config::default().report_settings(),
            ReportSettings::default()
        );
    }

    #[test]
    fn mail_caps_come_from_the_file_and_the_environment() {
        let config = load_str(
            "[mail]\nmax_parts = 12\ntime_budget_ms = 50\n",
            &[("CHAFFGATE_MAIL_MAX_BYTES", "65536")],
        )
        .unwrap();
        let limits = config.mail.limits();
        assert_eq!(limits.max_parts, 12);
        assert_eq!(limits.max_bytes, 65_536);
        assert_eq!(limits.time_budget, std::time::Duration::from_millis(50));
        assert_eq!(
            limits.max_decoded_bytes,
            MailLimits::default().max_decoded_bytes
        );
        assert_eq!(Config::default().mail.limits(), MailLimits::default());
    }

    #[test]
    fn bad_mail_caps_are_all_reported() {
        let err = load_str(
            "[mail]\nmax_parts = 0\nmax_mime_depth = 101\ntime_budget_ms = 0\n",
            &[("CHAFFGATE_MAIL_MAX_DECODED_BYTES", "0")],
        )
        .unwrap_err();
        let text = format!("{err:#}");
        for expected in [
            "mail.max_parts = 0: must be at least 1",
            "mail.max_decoded_bytes = 0: must be at least 1",
            "mail.max_mime_depth = 101: must be at most 100",
            "mail.time_budget_ms = 0: must be between 1 and 60000",
        ] {
            assert!(text.contains(expected), "{expected} missing from {text}");
        }
        assert!(!text.contains("mail.time_budget ="), "{text}");
    }

    #[test]
    fn unknown_keys_are_rejected_by_name() {
        let err = load_str("[model]\nspeed = 3\n", &[]).unwrap_err();
        assert!(format!("{err:#}").contains("speed"));
    }

    #[test]
    fn channel_lookup_falls_back_to_default() {
        let config = load_str(
            "[channels.tickets]\njunk_threshold = 0.99\nreview_threshold = 0.5\n",
            &[],
        )
        .unwrap();
        assert_eq!(config.channel(Some("tickets")).thresholds().junk, 0.99);
        assert_eq!(config.channel(Some("comments")).thresholds().junk, 0.9);
        assert_eq!(config.channel(None).thresholds().review, 0.4);
    }
}
