//! The chaffgate daemon: HTTP routes, the shared model, the audit writer.
//!
//! The binary builds the pieces (store, judge, settings), calls
//! [`start`] to get the state and the background tasks, binds a listener,
//! and hands both to [`serve`] with a shutdown future. On shutdown the
//! server stops accepting, finishes in-flight requests, then drops the
//! audit sender so the writer commits what is queued and ends, and the
//! tally sender so the tally task writes its last feature tallies.

pub mod alarms;
pub mod audit;
pub mod auth;
pub mod error;
pub mod judge;
pub mod learner;
pub mod metrics;
pub mod model_file;
pub mod openapi;
pub mod pages;
pub mod reports;
pub mod routes;
pub mod settings;
pub mod state;
pub mod tally;

use std::future::Future;
use std::sync::Arc;

use axum::extract::{DefaultBodyLimit, MatchedPath, State};
use axum::handler::Handler;
use axum::routing::{MethodRouter, get, post};
use axum::{Router, middleware};
use chaffgate_store::Store;
use tokio::net::TcpListener;
use tokio::sync::mpsc;
use tokio::task::JoinHandle;

pub use crate::alarms::{AlarmSettings, DriftAlarms};
pub use crate::auth::TokenBook;
pub use crate::judge::{Judge, Judgement, Reason, Snapshot};
pub use crate::learner::{Learner, LearnerSettings, LearnerStatus};
pub use crate::metrics::Metrics;
pub use crate::settings::{AckMode, AuditSettings, Channels, ServerSettings, Thresholds};
pub use crate::state::{AppState, StateParts};
pub use crate::tally::TallySettings;

/// Rows waiting for the audit writer before handlers wait to enqueue.
const AUDIT_QUEUE: usize = 8192;

/// The running background tasks, to be awaited after the server stops.
pub struct Tasks {
    audit: JoinHandle<()>,
    learner: JoinHandle<()>,
    janitor: JoinHandle<()>,
    token_refresher: JoinHandle<()>,
    tally: JoinHandle<()>,
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
    let alarms = Arc::new(DriftAlarms::new(&settings.alarms));
    let batch_alarms = Arc::clone(&alarms);
    let audit = audit::spawn_writer(
        store.clone(),
        settings.audit.max_batch_rows,
        audit_rx,
        move |rows, figures| {
            batch_metrics.count_audit_batch(figures);
            batch_alarms
                .p_junk
                .observe(rows.iter().map(|row| row.p_junk), state::now_ms());
        },
    );
    // Each run writes its own part of a tally bucket; see `tally`.
    let run_id = ulid::Ulid::new().to_string();
    let extractor = chaffgate_text::Extractor::new(judge.settings().clone(), judge.key().clone());
    let (tally, tally_task) =
        tally::spawn(settings.tally.clone(), store.clone(), extractor, run_id);
    let state = AppState::new(StateParts {
        settings,
        judge,
        store: store.clone(),
        audit_tx,
        metrics,
        learner: learner_status,
        learner_tx,
        tokens: Arc::clone(&tokens),
        tally,
        alarms,
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
            tally: tally_task,
        },
    )
}

/// An HTTP method a route answers, as OpenAPI names it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RouteMethod {
    Get,
    Post,
}

impl RouteMethod {
    /// Lowercase, as the keys of an OpenAPI path item.
    pub fn as_str(self) -> &'static str {
        match self {
            RouteMethod::Get => "get",
            RouteMethod::Post => "post",
        }
    }
}

/// One route of the API: where it is, which method, and what answers.
struct RouteEntry {
    path: &'static str,
    method: RouteMethod,
    handler: MethodRouter<AppState>,
}

fn entry<H, T>(path: &'static str, method: RouteMethod, handler: H) -> RouteEntry
where
    H: Handler<T, AppState>,
    T: 'static,
{
    let handler = match method {
        RouteMethod::Get => get(handler),
        RouteMethod::Post => post(handler),
    };
    RouteEntry {
        path,
        method,
        handler,
    }
}

/// Every route the router serves. Routes are added here and nowhere else,
/// so that [`route_list`] (and with it the check that `openapi.json`
/// documents each one) always matches what is served. Each path appears
/// once.
fn route_table() -> Vec<RouteEntry> {
    use RouteMethod::{Get, Post};
    vec![
        entry("/v1/score", Post, routes::score),
        entry("/v1/score/batch", Post, routes::score_batch),
        entry("/v1/decisions", Get, routes::decisions),
        entry("/v1/decisions/{id}", Get, routes::decision),
        entry("/v1/feedback", Post, routes::feedback),
        entry("/v1/model", Get, routes::model),
        entry("/v1/model/rollback", Post, routes::rollback),
        entry("/v1/reports/drift", Get, reports::drift),
        entry(openapi::PATH, Get, openapi::document),
        entry("/healthz", Get, routes::healthz),
        entry("/readyz", Get, routes::readyz),
        entry("/metrics", Get, routes::metrics_text),
    ]
}

/// The routes the router serves, as (path, method), paths in axum's
/// `{param}` form (which is also OpenAPI's).
pub fn route_list() -> Vec<(&'static str, RouteMethod)> {
    route_table()
        .into_iter()
        .map(|route| (route.path, route.method))
        .collect()
}

/// The router with every route and the body limit.
pub fn app(state: AppState) -> Router {
    let max_body_bytes = state.settings().max_body_bytes;
    let mut router = Router::new();
    for route in route_table() {
        router = router.route(route.path, route.handler);
    }
    // The pages are for people, not part of the documented API.
    router
        .route(pages::review::PATH, get(pages::review::page))
        .route(pages::review::QUEUE_PATH, get(pages::review::queue))
        .route(pages::reports::PATH, get(pages::reports::page))
        .route(pages::reports::VIEW_PATH, get(pages::reports::view))
        .fallback(routes::not_found)
        .method_not_allowed_fallback(routes::method_not_allowed)
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
    // And the tally sender: the tally task writes its last tallies.
    if let Err(err) = tasks.tally.await {
        tracing::error!(error = %err, "tally task stopped abnormally");
    }
    // Likewise the learner's wake-up sender: it catches up, checkpoints
    // and ends.
    if let Err(err) = tasks.learner.await {
        tracing::error!(error = %err, "learner stopped abnormally");
    }
    Ok(())
}
