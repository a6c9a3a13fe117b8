//! `chaffgate serve`: opens the data folder, loads the model, and runs the
//! daemon until SIGINT or SIGTERM.
//!
//! Start-up: create `data_dir` and the SQLite database (migrated), load the
//! newest valid checkpoint listed in the database (or the `--model` file,
//! or a fresh model with a new secret hash key, saved at once so the key
//! survives restarts), bind the listener, and serve. Shutdown: stop
//! accepting, finish in-flight requests, let the audit writer commit what
//! is queued, close the database, exit 0.

use std::collections::BTreeMap;
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Duration;

use anyhow::{Context, bail};
use chaffgate_model::Model;
use chaffgate_server::model_file::{LoadedModel, load_model_file, save_model_file};
use chaffgate_server::reports::ReportDefaults;
use chaffgate_server::{
    AckMode, AlarmSettings, AuditSettings, Channels, Judge, LearnerSettings, ServerSettings,
    TallySettings, Thresholds, TokenBook, start,
};
use chaffgate_store::{NewCheckpoint, Store};
use chaffgate_text::HashKey;
use tokio::net::TcpListener;

use crate::config::{AckName, Config, DEFAULT_CHANNEL};

/// The database file inside `data_dir`.
pub const DATABASE_FILE: &str = "chaffgate.db";
/// The folder of checkpoint files inside `data_dir`.
pub const CHECKPOINT_DIR: &str = "checkpoints";

pub struct ServeOptions {
    pub model: Option<PathBuf>,
}

/// Typed server settings from the validated config.
pub fn server_settings(config: &Config) -> anyhow::Result<ServerSettings> {
    let listen: SocketAddr = config
        .server
        .listen
        .parse()
        .with_context(|| format!("server.listen = {:?}", config.server.listen))?;
    let (baseline, current) = config.report_windows()?;
    let thresholds = |name: &str| config.channel(Some(name)).thresholds();
    let by_name: BTreeMap<String, Thresholds> = config
        .channels
        .keys()
        .filter(|name| name.as_str() != DEFAULT_CHANNEL)
        .map(|name| (name.clone(), thresholds(name)))
        .collect();
    let tally = &config.tally;
    let alarms = &config.alarms;
    Ok(ServerSettings {
        listen,
        max_body_bytes: usize::try_from(config.server.max_body_bytes)?,
        max_batch: config.server.max_batch as usize,
        max_message_bytes: usize::try_from(config.server.max_message_bytes)?,
        reasons: config.server.reasons as usize,
        audit: AuditSettings {
            keep_text: config.audit.keep_text,
            ack: match config.audit.ack {
                AckName::AfterCommit => AckMode::AfterCommit,
                AckName::AfterQueue => AckMode::AfterQueue,
            },
            max_batch_rows: config.audit.max_batch_rows as usize,
            feedback_window: Duration::from_secs(config.audit.feedback_window_secs),
            accept_client_time: config.audit.accept_client_time,
        },
        channels: Channels::new(by_name, thresholds(DEFAULT_CHANNEL)),
        tally: TallySettings {
            is_enabled: tally.enabled,
            sample_every: tally.sample_every,
            sample_all_below_per_sec: tally.sample_all_below_per_sec,
            capacity: tally.capacity as usize,
            top_k: tally.top_k as usize,
            flush_every: Duration::from_secs(tally.flush_every_secs),
            queue: tally.queue as usize,
            has_ngrams: tally.ngrams,
            bucket: Duration::from_secs(tally.bucket_secs),
        },
        alarms: AlarmSettings::new(
            alarms.p_junk.params(),
            alarms.feedback_error.params(),
            Duration::from_secs(alarms.hold_secs),
        )
        .context("alarms")?,
        reports: ReportDefaults {
            baseline,
            current,
            settings: config.report_settings(),
        },
        mail: config.mail.limits(),
    })
}

pub async fn run(config: &Config, options: ServeOptions) -> anyhow::Result<()> {
    run_until(
        config,
        options,
        // One line on stdout for people and scripts (the port may have been 0).
        |address| println!("chaffgate listening on http://{address}"),
        shutdown_signal(),
    )
    .await
}

/// Runs the daemon until `shutdown` completes; `on_listening` is told the
/// bound address once the listener is open.
pub async fn run_until(
    config: &Config,
    options: ServeOptions,
    on_listening: impl FnOnce(SocketAddr),
    shutdown: impl std::future::Future<Output = ()> + Send + 'static,
) -> anyhow::Result<()> {
    let settings = server_settings(config)?;
    let data_dir = &config.server.data_dir;
    std::fs::create_dir_all(data_dir.join(CHECKPOINT_DIR))
        .with_context(|| format!("creating data folder {}", data_dir.display()))?;
    let database = data_dir.join(DATABASE_FILE);
    let store = Store::open(&database)
        .await
        .with_context(|| format!("opening database {}", database.display()))?;
    tracing::info!(database = %database.display(), "database ready");

    let loaded = load_model(config, &store, data_dir, options.model.as_deref()).await?;
    let bits = loaded.model.bits();
    let examples_seen = loaded.model.examples_seen();
    let key_id = format!("{:016x}", loaded.key.key_id());
    let model_seq = loaded.last_seq;
    // The learner's copy: the left-right scheme keeps two (see the judge).
    let back = loaded.model.clone();
    let judge = Arc::new(Judge::new(
        loaded.model,
        model_seq,
        loaded.settings,
        loaded.key,
    ));
    tracing::info!(bits, examples_seen, model_seq, key_id, "model loaded");

    let tokens = Arc::new(TokenBook::default());
    tokens
        .refresh(&store)
        .await
        .context("reading access tokens")?;
    if tokens.is_empty() && !settings.listen.ip().is_loopback() {
        bail!(
            "server.listen = {}: without access tokens the service only listens on loopback; \
             add one with `chaffgate token add --role operate --name NAME` first",
            settings.listen
        );
    }
    let listener = TcpListener::bind(settings.listen)
        .await
        .with_context(|| format!("listening on {}", settings.listen))?;
    let address = listener.local_addr()?;
    on_listening(address);
    if tokens.is_empty() {
        tracing::warn!(%address, "no access tokens exist: the service is open to every local user, so it listens on loopback only; add tokens with `chaffgate token add`");
    } else if address.ip().is_loopback() {
        tracing::info!(%address, "listening on loopback only; requests need a bearer token");
    } else {
        tracing::info!(%address, "listening; requests need a bearer token");
    }
    let learner_settings = LearnerSettings {
        checkpoint_dir: data_dir.join(CHECKPOINT_DIR),
        checkpoint_every_updates: config.learner.checkpoint_every_updates,
        checkpoint_every: Duration::from_secs(config.learner.checkpoint_every_secs),
        keep_checkpoints: config.learner.keep_checkpoints as usize,
        poll_every: Duration::from_millis(config.learner.poll_every_ms),
    };
    let (state, tasks) = start(
        settings,
        learner_settings,
        judge,
        store.clone(),
        back,
        tokens,
    );
    chaffgate_server::serve(listener, state, tasks, shutdown)
        .await
        .context("serving HTTP")?;
    store.close().await;
    tracing::info!("stopped cleanly");
    Ok(())
}

/// The newest usable model: `--model`, else the newest checkpoint the
/// database lists that loads, else a fresh one (saved at once).
async fn load_model(
    config: &Config,
    store: &Store,
    data_dir: &Path,
    explicit: Option<&Path>,
) -> anyhow::Result<LoadedModel> {
    if let Some(path) = explicit {
        let loaded = load_model_file(path)?;
        tracing::info!(path = %path.display(), "starting from the given model file");
        return Ok(loaded);
    }
    let checkpoints = store.list_checkpoints().await?;
    for row in &checkpoints {
        let path = data_dir.join(CHECKPOINT_DIR).join(&row.file_name);
        match load_model_file(&path) {
            Ok(loaded) => {
                tracing::info!(path = %path.display(), "starting from the newest valid checkpoint");
                return Ok(loaded);
            }
            Err(err) => {
                tracing::warn!(path = %path.display(), error = %format!("{err:#}"), "skipping unusable checkpoint");
            }
        }
    }
    if !checkpoints.is_empty() {
        bail!(
            "none of the {} checkpoints in {} could be loaded; start with --model FILE or move the data folder aside",
            checkpoints.len(),
            data_dir.join(CHECKPOINT_DIR).display()
        );
    }
    // First start: a fresh model and a new secret hash key, saved at once
    // so that the key (which decides where every weight lives) survives.
    let key = HashKey::from_bytes(rand::random::<[u8; 16]>());
    let settings = config.features.clone();
    let model =
        Model::new(settings.bits, config.model.update_rule()).context("creating a fresh model")?;
    let file_name = "initial.cgm".to_owned();
    let path = data_dir.join(CHECKPOINT_DIR).join(&file_name);
    save_model_file(&path, &model, &settings, &key, 0)?;
    store
        .record_checkpoint(&NewCheckpoint {
            created_at_ms: chaffgate_server::state::now_ms(),
            file_name,
            last_seq: chaffgate_store::FeedbackSeq::ZERO,
            examples_seen: 0,
            reason: "initial".to_owned(),
        })
        .await?;
    tracing::info!(path = %path.display(), "first start: created a fresh model with a new hash key");
    Ok(LoadedModel {
        model,
        settings,
        key,
        last_seq: 0,
    })
}

/// Resolves on SIGINT (Ctrl-C) or SIGTERM.
pub async fn shutdown_signal() {
    let interrupt = async {
        if let Err(err) = tokio::signal::ctrl_c().await {
            tracing::error!(error = %err, "cannot listen for Ctrl-C");
            std::future::pending::<()>().await;
        }
    };
    #[cfg(unix)]
    let terminate = async {
        match tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()) {
            Ok(mut signal) => {
                signal.recv().await;
            }
            Err(err) => {
                tracing::error!(error = %err, "cannot listen for SIGTERM");
                std::future::pending::<()>().await;
            }
        }
    };
    #[cfg(not(unix))]
    let terminate = std::future::pending::<()>();
    tokio::select! {
        () = interrupt => {}
        () = terminate => {}
    }
    tracing::info!("shutdown requested: finishing in-flight requests");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_config_gives_the_servers_default_tally_and_alarms() {
        let settings = server_settings(&Config::default()).unwrap();
        assert_eq!(settings.tally, TallySettings::default());
        assert_eq!(settings.alarms, AlarmSettings::default());
    }
}
