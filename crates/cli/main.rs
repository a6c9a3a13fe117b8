//! The `chaffgate` command: learn from corpora, measure, and score messages.
//!
//! The only code that reads files named on the command line, the
//! environment and stdin, prints to the terminal or picks an exit code:
//! 0 on success, 1 on any error (printed as a chain), 2 for usage mistakes.

mod config;
mod corpus;
mod demo;
mod drift;
mod eval;
mod pipeline;
mod rebuild;
mod serve;
mod token;

use std::io::{IsTerminal, Read};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{Context, bail};
use chaffgate_text::{HashKey, Message};
use clap::{Args, Parser, Subcommand};
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use rand_chacha::rand_core::SeedableRng;

use crate::config::Config;
use crate::corpus::{Corpus, CorpusFormat};
use crate::eval::Protocol;
use crate::pipeline::Pipeline;

/// The hash key `eval` uses unless told otherwise. It is public, so it is
/// only for measuring: figures are then reproducible run to run. Models
/// meant for service get a fresh random key (`train`).
const EVALUATION_KEY_HEX: &str = "00000000000000000000000000000000";

#[derive(Parser)]
#[command(
    name = "chaffgate",
    version,
    about = "Scores messages for junk and learns from moderators"
)]
struct Cli {
    /// Configuration file (default: config/chaffgate.toml if present).
    #[arg(long, global = true, value_name = "FILE")]
    config: Option<PathBuf>,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Learn from a labelled corpus and write a model file.
    Train(TrainArgs),
    /// Measure the model on a labelled corpus (progressive validation by default).
    Eval(EvalArgs),
    /// Score one message (JSON on stdin) with a model file.
    Score(ScoreArgs),
    /// Run the daemon: HTTP scoring with an audit log in SQLite.
    Serve(ServeArgs),
    /// Replay the whole feedback log into a fresh model.
    Rebuild(RebuildArgs),
    /// Run the daemon on an invented stream: learn, replay, report, and serve the pages.
    Demo(demo::DemoArgs),
    /// Report what changed between a baseline window and the current one.
    Drift(DriftArgs),
    /// Manage the daemon's access tokens.
    #[command(subcommand)]
    Token(TokenCommand),
}

#[derive(Subcommand)]
enum TokenCommand {
    /// Create a token and print its secret (once).
    Add {
        /// What the token may do: score < moderate < operate.
        #[arg(long, value_enum)]
        role: RoleArg,
        /// A unique name, e.g. the system or person using it.
        #[arg(long)]
        name: String,
    },
    /// List tokens (names and roles; secrets are never stored).
    List,
    /// Revoke a token by name.
    Revoke {
        #[arg(long)]
        name: String,
    },
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum RoleArg {
    /// Score messages only.
    Score,
    /// Also give feedback and read decisions.
    Moderate,
    /// Also run model operations and read reports and metrics.
    Operate,
}

#[derive(Args)]
struct RebuildArgs {
    /// Where to write the rebuilt model.
    #[arg(long, value_name = "MODEL")]
    out: PathBuf,
}

#[derive(Args)]
struct DriftArgs {
    /// The database (default: chaffgate.db in server.data_dir).
    #[arg(long, value_name = "PATH")]
    db: Option<PathBuf>,
    /// Length of the baseline window, just before the current one
    /// (default: reports.baseline, 7d). E.g. 7d, 24h, 90m, 3600s.
    #[arg(long, value_name = "LENGTH")]
    baseline: Option<String>,
    /// Length of the current window, ending at --at (default:
    /// reports.current, 1d).
    #[arg(long, value_name = "LENGTH")]
    current: Option<String>,
    /// Only this channel's decisions.
    #[arg(long)]
    channel: Option<String>,
    /// End of the current window: RFC 3339 or ms since 1970 (default: now).
    #[arg(long, value_name = "TIME")]
    at: Option<String>,
    /// Print the report as JSON.
    #[arg(long)]
    json: bool,
}

#[derive(Args)]
struct ServeArgs {
    /// Start from this model file instead of the newest checkpoint.
    #[arg(long, value_name = "MODEL")]
    model: Option<PathBuf>,
    /// Log format on stderr.
    #[arg(long, value_enum, default_value_t = LogFormat::Text)]
    log_format: LogFormat,
}

#[derive(Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
enum LogFormat {
    Text,
    Json,
}

#[derive(Args)]
struct CorpusArgs {
    /// Labelled corpus: JSONL (message fields plus "label") or LABEL<TAB>TEXT.
    #[arg(
        long,
        value_name = "FILE",
        required_unless_present_any = ["junk_dir", "fine_dir"],
        conflicts_with_all = ["junk_dir", "fine_dir"]
    )]
    corpus: Option<PathBuf>,
    /// A folder of raw mails (.eml) that are junk.
    #[arg(long, value_name = "DIR")]
    junk_dir: Option<PathBuf>,
    /// A folder of raw mails (.eml) that are fine.
    #[arg(long, value_name = "DIR")]
    fine_dir: Option<PathBuf>,
    /// Corpus format (default: from the file name, else from its first line).
    #[arg(long, value_enum)]
    format: Option<CorpusFormat>,
    /// Skip malformed lines (and count them) instead of stopping at the first.
    #[arg(long)]
    skip_bad: bool,
    /// Shuffle the corpus with this seed before use (default: file order).
    #[arg(long, value_name = "SEED")]
    shuffle: Option<u64>,
}

#[derive(Args)]
struct TrainArgs {
    #[command(flatten)]
    corpus: CorpusArgs,
    /// Where to write the model.
    #[arg(long, value_name = "MODEL")]
    out: PathBuf,
    /// Passes over the corpus.
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u32).range(1..=1000))]
    passes: u32,
    /// Feature hash key as 32 hex digits (default: a fresh random key).
    #[arg(long, value_name = "HEX")]
    hash_key: Option<String>,
}

#[derive(Args)]
struct EvalArgs {
    #[command(flatten)]
    corpus: CorpusArgs,
    /// Learn from the first (1 - F) of the corpus and judge only the last F.
    #[arg(long, value_name = "F")]
    holdout: Option<f64>,
    /// Passes over the learning part (with --holdout only).
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u32).range(1..=1000))]
    passes: u32,
    /// p_junk at or above which a message counts as flagged junk in the report.
    #[arg(long, default_value_t = 0.5)]
    threshold: f64,
    /// Print the report as JSON.
    #[arg(long)]
    json: bool,
    /// Feature hash key as 32 hex digits (default: a fixed public key, so
    /// that figures are reproducible).
    #[arg(long, value_name = "HEX")]
    hash_key: Option<String>,
}

#[derive(Args)]
struct ScoreArgs {
    /// Model file written by `chaffgate train`.
    #[arg(long, value_name = "MODEL")]
    model: PathBuf,
    /// How many reasons to show.
    #[arg(long, default_value_t = 8)]
    reasons: usize,
    /// Print the result as JSON.
    #[arg(long)]
    json: bool,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            eprintln!("error: {err:#}");
            ExitCode::FAILURE
        }
    }
}

fn run(cli: Cli) -> anyhow::Result<()> {
    let config = Config::load(cli.config.as_deref(), std::env::vars())?;
    match cli.command {
        Command::Train(args) => train(&config, args),
        Command::Eval(args) => evaluate(&config, args),
        Command::Score(args) => score(&config, args),
        Command::Serve(args) => serve(&config, args),
        Command::Demo(args) => demo::run(&config, args),
        Command::Token(command) => runtime()?.block_on(async {
            match command {
                TokenCommand::Add { role, name } => {
                    let role = match role {
                        RoleArg::Score => chaffgate_store::Role::Score,
                        RoleArg::Moderate => chaffgate_store::Role::Moderate,
                        RoleArg::Operate => chaffgate_store::Role::Operate,
                    };
                    token::add(&config, &name, role).await
                }
                TokenCommand::List => token::list(&config).await,
                TokenCommand::Revoke { name } => token::revoke(&config, &name).await,
            }
        }),
        Command::Drift(args) => runtime()?.block_on(drift::run(
            &config,
            drift::DriftOptions {
                db: args.db,
                baseline: args.baseline,
                current: args.current,
                channel: args.channel,
                at: args.at,
                json: args.json,
            },
        )),
        Command::Rebuild(args) => runtime()?.block_on(rebuild::run(
            &config,
            rebuild::RebuildOptions { out: args.out },
        )),
    }
}

fn runtime() -> anyhow::Result<tokio::runtime::Runtime> {
    tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .context("starting the async runtime")
}

fn serve(config: &Config, args: ServeArgs) -> anyhow::Result<()> {
    init_logging(args.log_format);
    let options = serve::ServeOptions { model: args.model };
    runtime()?.block_on(serve::run(config, options))
}

/// Logs to stderr; `RUST_LOG` picks the level (default `info`).
fn init_logging(format: LogFormat) {
    let filter = tracing_subscriber::EnvFilter::try_from_default_env()
        .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("info"));
    let builder = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_ansi(std::io::stderr().is_terminal())
        .with_writer(std::io::stderr);
    match format {
        LogFormat::Text => builder.init(),
        LogFormat::Json => builder.json().init(),
    }
}

fn load_corpus(config: &Config, args: &CorpusArgs) -> anyhow::Result<Corpus> {
    let limits = config.mail.limits();
    let mut corpus = match &args.corpus {
        Some(path) => corpus::load(path, args.format, args.skip_bad, &limits)?,
        None => {
            corpus::load_mail_dirs(args.junk_dir.as_deref(), args.fine_dir.as_deref(), &limits)?
        }
    };
    if !corpus.skipped.is_empty() {
        let count = corpus.skipped.len();
        let first = &corpus.skipped[0];
        eprintln!("skipped {count} malformed line(s); first: {first}");
    }
    if let Some(seed) = args.shuffle {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        corpus.items.shuffle(&mut rng);
    }
    Ok(corpus)
}

fn parse_key(hex: Option<&str>, fallback: impl FnOnce() -> HashKey) -> anyhow::Result<HashKey> {
    match hex {
        Some(hex) => HashKey::from_hex(hex).context("reading --hash-key"),
        None => Ok(fallback()),
    }
}

fn train(config: &Config, args: TrainArgs) -> anyhow::Result<()> {
    let key = parse_key(args.hash_key.as_deref(), || {
        HashKey::from_bytes(rand::random::<[u8; 16]>())
    })?;
    let corpus = load_corpus(config, &args.corpus)?;
    let mut pipeline = Pipeline::new(config.features.clone(), config.model.update_rule(), key)?;
    for _ in 0..args.passes {
        for item in &corpus.items {
            pipeline.learn(&item.message, item.is_junk);
        }
    }
    pipeline.save(&args.out)?;
    let model = pipeline.model();
    let messages = corpus.items.len();
    let junk = corpus.junk_count();
    let passes = args.passes;
    let out = args.out.display();
    let slots = model.nonzero_slots();
    let rule = config.model.rule;
    println!(
        "learnt {messages} messages ({junk} junk) x {passes} pass(es) with {rule}; \
         {slots} weights in use; model written to {out}"
    );
    Ok(())
}

fn evaluate(config: &Config, args: EvalArgs) -> anyhow::Result<()> {
    let protocol = match args.holdout {
        None => Protocol::Progressive,
        Some(fraction) if fraction > 0.0 && fraction < 1.0 => Protocol::Holdout {
            fraction,
            passes: args.passes,
        },
        Some(fraction) => bail!("--holdout {fraction}: must be between 0 and 1 (exclusive)"),
    };
    if !(0.0..=1.0).contains(&args.threshold) {
        let threshold = args.threshold;
        bail!("--threshold {threshold}: must be between 0 and 1");
    }
    let key = parse_key(args.hash_key.as_deref(), || {
        HashKey::from_hex(EVALUATION_KEY_HEX).unwrap_or_else(|_| HashKey::from_bytes([0; 16]))
    })?;
    let corpus = load_corpus(config, &args.corpus)?;
    let mut pipeline = Pipeline::new(config.features.clone(), config.model.update_rule(), key)?;
    let report = eval::run(&mut pipeline, &corpus.items, protocol, args.threshold)?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        let name = match (
            &args.corpus.corpus,
            &args.corpus.junk_dir,
            &args.corpus.fine_dir,
        ) {
            (Some(path), _, _) => display_name(path),
            (None, junk, fine) => {
                let folders: Vec<String> = [junk, fine]
                    .into_iter()
                    .flatten()
                    .map(|dir| display_name(dir))
                    .collect();
                format!("mail folders {}", folders.join(" + "))
            }
        };
        let rule = config.model.rule;
        let bits = pipeline.settings().bits;
        println!("corpus                 {name}\nmodel                  {rule}, 2^{bits} slots");
        print!("{}", eval::render(&report));
    }
    Ok(())
}

fn display_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string())
}

fn score(config: &Config, args: ScoreArgs) -> anyhow::Result<()> {
    let mut pipeline = Pipeline::open(&args.model)?;
    let mut input = String::new();
    std::io::stdin()
        .read_to_string(&mut input)
        .context("reading the message from stdin (it must be UTF-8 JSON)")?;
    let message: Message =
        serde_json::from_str(&input).context("reading the message JSON from stdin")?;
    if message.is_empty() {
        bail!("the message has no subject, body, sender or meta: nothing to score");
    }
    let p_junk = pipeline.score(&message);
    let verdict = config
        .channel(message.channel.as_deref())
        .thresholds()
        .verdict(p_junk);
    let reasons = pipeline.reasons(&message, args.reasons);
    if args.json {
        let out = serde_json::json!({ "p_junk": p_junk, "verdict": verdict.as_str(), "reasons": reasons });
        println!("{}", serde_json::to_string_pretty(&out)?);
    } else {
        println!("p_junk   {p_junk:.4}\nverdict  {verdict}\nreasons");
        for reason in reasons {
            let contribution = reason.contribution;
            let feature = reason.feature;
            println!("  {contribution:+.4}  {feature}");
        }
    }
    Ok(())
}
