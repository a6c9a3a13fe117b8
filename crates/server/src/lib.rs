//! The chaffgate daemon: HTTP routes, the shared model, the audit writer.
//!
//! The binary builds the pieces (store, judge, settings), calls
//! [`start`] to get the state and the background tasks, binds a listener,
//! and hands both to [`serve`] with a shutdown future. On shutdown the
//! server stops accepting, finishes in-flight requests, then drops the
//! audit sender so the writer commits what is queued and ends.

pub mod audit;
pub mod auth;
pub mod error;
pub mod judge;
pub mod learner;
pub mod metrics;
pub mod model_file;
pub mod reports;
pub mod routes;
pub mod settings;
pub mod state;

use std::future::Future;
use std::sync::Arc;

use axum::extract::{DefaultBodyLimit, MatchedPath, State};
use axum::routing::{get, post};
use axum::{Router, middleware};
use chaffgate_store::Store;
use tokio::net::TcpListener;
use tokio::sync::mpsc;
use tokio::task::JoinHandle;

pub use crate::auth::TokenBook;
pub use crate::judge::{Judge, Judgement, Reason, Snapshot};
pub use crate::learner::{Learner, LearnerSettings, LearnerStatus};
pub use crate::metrics::Metrics;
pub use crate::settings::{AckMode, AuditSettings, Channels, ServerSettings, Thresholds};
pub use crate::state::{AppState, StateParts};

/// Rows waiting for the audit writer before handlers wait to enqueue.
const AUDIT_QUEUE: usize = 8192;

/// The running background tasks, to be awaited after the server stops.
pub struct Tasks {
    audit: JoinHandle<()>,
    learner: JoinHandle<()>,
    janitor: JoinHandle<()>,
    token_refresher: JoinHandle<()>,
}

/// How often expired decision inputs are deleted.
const PURGE_EVERY: std::time::Duration = std::time::Duration::from_secs(600);

/// Builds the state and starts the background tasks. `back` must be a copy
/// of the judge's model, which includes the feedback log up to
/// `model_seq`; the learner replays the rest before the service is ready.
pub fn start(
    settings: ServerSettings,
    learner_settings: LearnerSettings,
    judge: Arc<Judge>,
    store: Store,
    back: chaffgate_model::Model,
    tokens: Arc<TokenBook>,
) -> (AppState, Tasks) {
    let metrics = Arc::new(Metrics::default());
    let model_seq = judge.snapshot().model_seq;
    let learner = Learner::new(
        Arc::clone(&judge),
        store.clone(),
        learner_settings,
        back,
        model_seq,
    );
    let learner_status = learner.status();
    let (learner_tx, learner_rx) = mpsc::channel(16);
    let learner = learner.spawn(learner_rx);
    let (audit_tx, audit_rx) = mpsc::channel(AUDIT_QUEUE);
    let batch_metrics = Arc::clone(&metrics);
    let audit = audit::spawn_writer(
        store.clone(),
        settings.audit.max_batch_rows,
        audit_rx,
        move |figures| batch_metrics.count_audit_batch(figures),
    );
    let state = AppState::new(StateParts {
        settings,
        judge,
        store: store.clone(),
        audit_tx,
        metrics,
        learner: learner_status,
        learner_tx,
        tokens: Arc::clone(&tokens),
    });
    let token_refresher = tokio::spawn(auth::keep_fresh(tokens, store.clone()));
    let janitor = tokio::spawn(purge_expired_inputs(store.clone()));
    (
        state,
        Tasks {
            audit,
            learner,
            janitor,
            token_refresher,
        },
    )
}

/// The router with every route and the body limit.
pub fn app(state: AppState) -> Router {
    let max_body_bytes = state.settings().max_body_bytes;
    Router::new()
        .route("/v1/score", post(routes::score))
        .route("/v1/score/batch", post(routes::score_batch))
        .route("/v1/decisions", get(routes::decisions))
        .route("/v1/decisions/{id}", get(routes::decision))
        .route("/v1/feedback", post(routes::feedback))
        .route("/v1/model", get(routes::model))
        .route("/v1/model/rollback", post(routes::rollback))
        .route("/v1/reports/drift", get(reports::drift))
        .route("/healthz", get(routes::healthz))
        .route("/readyz", get(routes::readyz))
        .route("/metrics", get(routes::metrics_text))
        .fallback(routes::not_found)
        .layer(middleware::from_fn_with_state(
            state.clone(),
            auth::authenticate,
        ))
        .layer(DefaultBodyLimit::max(max_body_bytes))
        .layer(middleware::from_fn_with_state(state.clone(), track))
        .with_state(state)
}

/// Deletes decision inputs past the feedback window, now and every
/// [`PURGE_EVERY`]: the message copies kept for learning go as soon as
/// they may no longer be used.
async fn purge_expired_inputs(store: Store) {
    let mut every = tokio::time::interval(PURGE_EVERY);
    loop {
        every.tick().await;
        match store.purge_expired_inputs(state::now_ms()).await {
            Ok(0) => {}
            Ok(count) => tracing::info!(count, "deleted expired decision inputs"),
            Err(err) => tracing::warn!(error = %err, "deleting expired decision inputs failed"),
        }
    }
}

/// Records each request's route, status and time to answer.
async fn track(
    State(state): State<AppState>,
    request: axum::extract::Request,
    next: middleware::Next,
) -> axum::response::Response {
    let route = request
        .extensions()
        .get::<MatchedPath>()
        .map(|path| path.as_str().to_owned())
        .unwrap_or_else(|| "unmatched".to_owned());
    let started = std::time::Instant::now();
    let response = next.run(request).await;
    state
        .metrics()
        .observe_request(&route, response.status().as_u16(), started.elapsed());
    response
}

/// Serves until `shutdown` resolves, then lets in-flight requests finish
/// and waits for the audit writer to commit what is queued.
pub async fn serve(
    listener: TcpListener,
    state: AppState,
    tasks: Tasks,
    shutdown: impl Future<Output = ()> + Send + 'static,
) -> std::io::Result<()> {
    let router = app(state);
    axum::serve(listener, router)
        .with_graceful_shutdown(shutdown)
        .await?;
    // Purging is idempotent; stopping it mid-way loses nothing.
    tasks.janitor.abort();
    tasks.token_refresher.abort();
    // The router (and with it every AppState clone holding an audit
    // sender) is gone now, so the writer drains and ends.
    if let Err(err) = tasks.audit.await {
        tracing::error!(error = %err, "audit writer stopped abnormally");
    }
    // Likewise the learner's wake-up sender: it catches up, checkpoints
    // and ends.
    if let Err(err) = tasks.learner.await {
        tracing::error!(error = %err, "learner stopped abnormally");
    }
    Ok(())
}
