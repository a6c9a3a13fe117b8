//! The HTTP routes: scoring and reading decisions, health.

use std::collections::BTreeMap;
use std::time::Instant;

use axum::extract::State;
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use chaffgate_mail::MessageInput;
use chaffgate_store::{
    DecisionFilter, DecisionId, DecisionInput, DecisionRow, NewDecision, Verdict,
};
use chaffgate_text::{Message, MetaValue};
use serde::{Deserialize, Serialize};
use tokio::sync::oneshot;

use crate::audit::AuditJob;
use crate::auth::Caller;
use crate::error::{ApiError, ApiJson, ApiPath, ApiQuery};
use crate::judge::Reason;
use crate::metrics::LearnerGauges;
use crate::settings::AckMode;
use crate::state::{AppState, now_ms};
use crate::tally::TallySample;

/// One message to score, as clients send it: message fields, a raw mail
/// (`raw` text or `raw_b64` bytes), or both.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScoreRequest {
    subject: Option<String>,
    body: Option<String>,
    sender: Option<String>,
    channel: Option<String>,
    #[serde(default)]
    meta: BTreeMap<String, MetaValue>,
    raw: Option<String>,
    raw_b64: Option<String>,
    /// The caller's own reference, stored with the decision.
    client_ref: Option<String>,
    /// When the message arrived (ms since the Unix epoch); only accepted
    /// with `audit.accept_client_time`.
    received_at_ms: Option<i64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BatchRequest {
    messages: Vec<ScoreRequest>,
}

/// The answer for one scored message.
#[derive(Debug, Serialize)]
pub struct DecisionAnswer {
    decision_id: String,
    p_junk: f64,
    verdict: &'static str,
    channel: String,
    reasons: Vec<Reason>,
    model_seq: i64,
    /// Caps a raw mail hit (it was judged on what was read).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    mail_truncated: Vec<&'static str>,
}

#[derive(Debug, Serialize)]
pub struct BatchAnswer {
    decisions: Vec<DecisionAnswer>,
}

impl ScoreRequest {
    /// The message to judge (a raw mail parsed within the default mail
    /// caps), the caps it hit, and the client's reference and arrival time.
    fn into_parts(self, state: &AppState) -> Result<Parts, ApiError> {
        let received_at_ms = self
            .received_at_ms
            .map(|at| check_received_at(state, at))
            .transpose()?;
        let input = MessageInput {
            subject: self.subject,
            body: self.body,
            sender: self.sender,
            channel: self.channel,
            meta: self.meta,
            raw: self.raw,
            raw_b64: self.raw_b64,
        };
        let (message, cuts) = read_input(state, input)?;
        Ok(Parts {
            message,
            cuts,
            client_ref: self.client_ref,
            received_at_ms,
        })
    }
}

/// The message a client sent, with a raw mail parsed within the
/// configured mail caps, and the caps it hit. Only the raw mail's size is checked
/// here; [`check_message`] checks the rest.
fn read_input(
    state: &AppState,
    input: MessageInput,
) -> Result<(Message, Vec<&'static str>), ApiError> {
    let limit = state.settings().max_message_bytes;
    let raw_bytes = input.raw_len();
    if raw_bytes > limit {
        return Err(ApiError::MessageTooLarge {
            bytes: raw_bytes,
            limit,
        });
    }
    let (message, cuts) = input
        .into_message(&state.settings().mail)
        .map_err(|err| ApiError::InvalidMessage(err.to_string()))?;
    Ok((message, cuts.iter().map(|cut| cut.as_str()).collect()))
}

/// A score request, checked and parsed.
struct Parts {
    message: Message,
    /// Caps a raw mail hit.
    cuts: Vec<&'static str>,
    client_ref: Option<String>,
    received_at_ms: Option<i64>,
}

/// Latest accepted `received_at_ms`: the last millisecond of year 9999.
const MAX_RECEIVED_AT_MS: i64 = 253_402_300_799_999;

/// Checks a client-given arrival time: allowed by the settings and within
/// years 1970 to 9999.
fn check_received_at(state: &AppState, at: i64) -> Result<i64, ApiError> {
    if !state.settings().audit.accept_client_time {
        return Err(ApiError::InvalidParameter(
            "received_at_ms is refused: this service stamps decisions with its own clock \
             (set audit.accept_client_time = true to replay a stream with its own times)"
                .to_owned(),
        ));
    }
    if !(0..=MAX_RECEIVED_AT_MS).contains(&at) {
        return Err(ApiError::InvalidParameter(format!(
            "received_at_ms = {at}: must be milliseconds since the Unix epoch, between 0 and {MAX_RECEIVED_AT_MS}"
        )));
    }
    Ok(at)
}

/// Bytes of text in a message, meta keys and text values included.
fn message_bytes(message: &Message) -> usize {
    let fields = [
        &message.subject,
        &message.body,
        &message.sender,
        &message.channel,
    ]
    .into_iter()
    .flatten()
    .map(String::len)
    .sum::<usize>();
    let meta = message
        .meta
        .iter()
        .map(|(key, value)| {
            key.len()
                + match value {
                    MetaValue::Text(text) => text.len(),
                    _ => 8,
                }
        })
        .sum::<usize>();
    fields + meta
}

fn check_message(state: &AppState, message: &Message) -> Result<(), ApiError> {
    if message.is_empty() {
        return Err(ApiError::EmptyMessage);
    }
    let bytes = message_bytes(message);
    let limit = state.settings().max_message_bytes;
    if bytes > limit {
        return Err(ApiError::MessageTooLarge { bytes, limit });
    }
    Ok(())
}

/// Reports the commit of one decision row (`after_commit` mode).
type CommittedRx = oneshot::Receiver<Result<(), String>>;

/// Scores one checked message and builds its decision row. Returns the
/// answer, the row's job for the audit writer and, in `after_commit` mode,
/// the receiver to await.
fn decide(
    state: &AppState,
    parts: Parts,
    started: Instant,
) -> Result<(DecisionAnswer, AuditJob, Option<CommittedRx>), ApiError> {
    let Parts {
        message,
        cuts,
        client_ref,
        received_at_ms,
    } = parts;
    let settings = state.settings();
    let now = now_ms();
    let created_at_ms = received_at_ms.unwrap_or(now);
    // The sampling rate follows the service's own load, so its clock.
    let is_tallied = state.tally().wants(now);
    let mut judgement = state
        .judge()
        .judge_with(&message, settings.reasons, is_tallied);
    let (channel, thresholds) = settings.channels.resolve(message.channel.as_deref());
    let channel = channel.to_owned();
    let verdict = thresholds.verdict(judgement.p_junk);
    let id = state.next_decision_id();
    let message_json = serde_json::to_string(&message).map_err(ApiError::internal)?;
    let reasons_json = serde_json::to_string(&judgement.reasons).map_err(ApiError::internal)?;
    let window_ms = i64::try_from(settings.audit.feedback_window.as_millis()).unwrap_or(i64::MAX);
    let latency_us = i64::try_from(started.elapsed().as_micros()).unwrap_or(i64::MAX);
    let row = NewDecision {
        id: DecisionId::new(id.clone()),
        created_at_ms,
        channel: channel.clone(),
        client_ref,
        content_sha256: judgement.content_sha256,
        content: settings.audit.keep_text.then(|| message_json.clone()),
        p_junk: judgement.p_junk,
        verdict,
        model_seq: chaffgate_store::FeedbackSeq(judgement.model_seq),
        reasons_json,
        latency_us,
        input: Some(DecisionInput {
            message_json,
            // The feedback window runs from when the service saw the
            // message, even when the decision carries an older time.
            expires_at_ms: now.saturating_add(window_ms),
        }),
    };
    let (committed_tx, committed_rx) = match settings.audit.ack {
        AckMode::AfterCommit => {
            let (tx, rx) = oneshot::channel();
            (Some(tx), Some(rx))
        }
        AckMode::AfterQueue => (None, None),
    };
    state.metrics().count_verdict(verdict);
    if is_tallied {
        state.tally().offer(TallySample {
            created_at_ms,
            channel: channel.clone(),
            message,
            contributions: std::mem::take(&mut judgement.contributions),
        });
    }
    let answer = DecisionAnswer {
        decision_id: id,
        p_junk: judgement.p_junk,
        verdict: verdict.as_str(),
        channel,
        reasons: judgement.reasons,
        model_seq: judgement.model_seq,
        mail_truncated: cuts,
    };
    Ok((answer, AuditJob { row, committed_tx }, committed_rx))
}

/// Hands rows to the audit writer and, when asked to, waits for commit.
async fn record(
    state: &AppState,
    jobs: Vec<AuditJob>,
    receivers: Vec<CommittedRx>,
) -> Result<(), ApiError> {
    for job in jobs {
        state
            .audit_tx()
            .send(job)
            .await
            .map_err(|_| ApiError::Unavailable)?;
    }
    for receiver in receivers {
        match receiver.await {
            Ok(Ok(())) => {}
            Ok(Err(message)) => return Err(ApiError::internal(StorageFailure(message))),
            Err(_) => return Err(ApiError::Unavailable),
        }
    }
    Ok(())
}

#[derive(Debug, thiserror::Error)]
#[error("the audit log could not commit: {0}")]
struct StorageFailure(String);

/// `POST /v1/score`
pub async fn score(
    State(state): State<AppState>,
    ApiJson(request): ApiJson<ScoreRequest>,
) -> Result<ApiJson<DecisionAnswer>, ApiError> {
    let started = Instant::now();
    let parts = request.into_parts(&state)?;
    check_message(&state, &parts.message)?;
    let (answer, job, receiver) = decide(&state, parts, started)?;
    record(&state, vec![job], receiver.into_iter().collect()).await?;
    Ok(ApiJson(answer))
}

/// `POST /v1/score/batch`
pub async fn score_batch(
    State(state): State<AppState>,
    ApiJson(request): ApiJson<BatchRequest>,
) -> Result<ApiJson<BatchAnswer>, ApiError> {
    let started = Instant::now();
    let limit = state.settings().max_batch;
    let count = request.messages.len();
    if count == 0 || count > limit {
        return Err(ApiError::BatchSize { count, limit });
    }
    let mut parts = Vec::with_capacity(count);
    for (position, request) in request.messages.into_iter().enumerate() {
        let checked = request.into_parts(&state).and_then(|parts| {
            check_message(&state, &parts.message)?;
            Ok(parts)
        });
        let part = checked.map_err(|err| match err {
            ApiError::EmptyMessage => ApiError::InvalidParameter(format!(
                "messages[{position}] is empty: give at least one of subject, body, sender or meta"
            )),
            ApiError::InvalidMessage(why) => {
                ApiError::InvalidMessage(format!("messages[{position}]: {why}"))
            }
            other => other,
        })?;
        parts.push(part);
    }
    let mut decisions = Vec::with_capacity(count);
    let mut jobs = Vec::with_capacity(count);
    let mut receivers = Vec::with_capacity(count);
    for part in parts {
        let (answer, job, receiver) = decide(&state, part, started)?;
        decisions.push(answer);
        jobs.push(job);
        receivers.extend(receiver);
    }
    record(&state, jobs, receivers).await?;
    Ok(ApiJson(BatchAnswer { decisions }))
}

/// A decision as the API shows it.
#[derive(Debug, Serialize)]
pub struct DecisionView {
    decision_id: String,
    created_at_ms: i64,
    channel: String,
    client_ref: Option<String>,
    content_sha256: String,
    /// The message, only when the operator keeps text (`audit.keep_text`).
    content: Option<serde_json::Value>,
    p_junk: f64,
    verdict: &'static str,
    model_seq: i64,
    reasons: serde_json::Value,
    latency_us: i64,
    /// Until when feedback on this decision is accepted (null: no longer).
    feedback_until_ms: Option<i64>,
}

impl From<DecisionRow> for DecisionView {
    fn from(row: DecisionRow) -> DecisionView {
        DecisionView {
            decision_id: row.id.as_str().to_owned(),
            created_at_ms: row.created_at_ms,
            channel: row.channel,
            client_ref: row.client_ref,
            content_sha256: row.content_sha256,
            content: row
                .content
                .as_deref()
                .and_then(|text| serde_json::from_str(text).ok()),
            p_junk: row.p_junk,
            verdict: row.verdict.as_str(),
            model_seq: row.model_seq.0,
            reasons: serde_json::from_str(&row.reasons_json).unwrap_or(serde_json::Value::Null),
            latency_us: row.latency_us,
            feedback_until_ms: row.input_expires_at_ms,
        }
    }
}

/// `GET /v1/decisions/{id}`
pub async fn decision(
    State(state): State<AppState>,
    ApiPath(id): ApiPath<String>,
) -> Result<ApiJson<DecisionView>, ApiError> {
    if !DecisionId::is_well_formed(&id) {
        return Err(ApiError::InvalidParameter(format!(
            "{id:?} is not a decision id (26 characters of Crockford base 32)"
        )));
    }
    match state.store().decision(&DecisionId::new(id.clone())).await? {
        Some(row) => Ok(ApiJson(row.into())),
        None => Err(ApiError::UnknownDecision(id)),
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DecisionQuery {
    /// RFC 3339 or milliseconds since the Unix epoch, inclusive.
    since: Option<String>,
    /// RFC 3339 or milliseconds since the Unix epoch, exclusive.
    until: Option<String>,
    verdict: Option<String>,
    channel: Option<String>,
    limit: Option<u32>,
    cursor: Option<String>,
}

#[derive(Debug, Serialize)]
pub struct DecisionList {
    decisions: Vec<DecisionView>,
    /// Pass as `cursor` to get the next page; null on the last page.
    next_cursor: Option<String>,
}

/// `GET /v1/decisions?since=&until=&verdict=&channel=&limit=&cursor=`,
/// newest first.
pub async fn decisions(
    State(state): State<AppState>,
    ApiQuery(query): ApiQuery<DecisionQuery>,
) -> Result<ApiJson<DecisionList>, ApiError> {
    let verdict = match query.verdict.as_deref() {
        None => None,
        Some(word) => Some(word.parse::<Verdict>().map_err(|_| {
            ApiError::InvalidParameter(format!(
                "verdict={word:?}: must be one of junk, review, fine"
            ))
        })?),
    };
    let limit = query.limit.unwrap_or(100);
    let max = chaffgate_store::MAX_PAGE_LIMIT;
    if limit == 0 || limit > max {
        return Err(ApiError::InvalidParameter(format!(
            "limit={limit}: must be between 1 and {max}"
        )));
    }
    let time = |name: &str, text: Option<&str>| {
        text.map(|text| {
            chaffgate_report::time::parse_time(text)
                .map_err(|err| ApiError::InvalidParameter(format!("{name}: {err}")))
        })
        .transpose()
    };
    let filter = DecisionFilter {
        since_ms: time("since", query.since.as_deref())?,
        until_ms: time("until", query.until.as_deref())?,
        verdict,
        channel: query.channel,
        limit,
        cursor: query.cursor,
    };
    let page = match state.store().list_decisions(&filter).await {
        Ok(page) => page,
        Err(chaffgate_store::StoreError::BadCursor { cursor }) => {
            return Err(ApiError::InvalidParameter(format!(
                "cursor={cursor:?} is not a cursor this service gave out"
            )));
        }
        Err(err) => return Err(err.into()),
    };
    Ok(ApiJson(DecisionList {
        decisions: page.rows.into_iter().map(DecisionView::from).collect(),
        next_cursor: page.next_cursor,
    }))
}

/// `GET /healthz`: the process is up.
pub async fn healthz() -> Response {
    (StatusCode::OK, "ok\n").into_response()
}

/// `GET /readyz`: the model is loaded and the feedback log replayed.
pub async fn readyz(State(state): State<AppState>) -> Response {
    if state.is_ready() {
        (StatusCode::OK, "ready\n").into_response()
    } else {
        ApiError::Unavailable.into_response()
    }
}

/// Any route that does not exist.
pub async fn not_found() -> Response {
    let body = serde_json::json!({
        "error": { "code": "not_found", "message": "no such route" }
    });
    (StatusCode::NOT_FOUND, axum::Json(body)).into_response()
}

/// The answer for a known path asked with a method it does not take.
pub async fn method_not_allowed() -> Response {
    let body = serde_json::json!({
        "error": {
            "code": "method_not_allowed",
            "message": "this route does not take that method; see /v1/openapi.json"
        }
    });
    (StatusCode::METHOD_NOT_ALLOWED, axum::Json(body)).into_response()
}

/// Feedback as moderators send it: about a decision or an inline message.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FeedbackRequest {
    decision_id: Option<String>,
    /// An inline message: fields, a raw mail, or both, as in a score request.
    message: Option<MessageInput>,
    label: String,
    moderator: Option<String>,
    note: Option<String>,
    idempotency_key: Option<String>,
}

#[derive(Debug, Serialize)]
pub struct FeedbackAnswer {
    seq: i64,
    /// `recorded`, `correction` (a changed label for the same decision) or
    /// `duplicate` (already recorded; nothing new is learnt).
    outcome: &'static str,
    /// The label a correction replaced.
    #[serde(skip_serializing_if = "Option::is_none")]
    previous_label: Option<&'static str>,
}

/// Longest moderator name, note and idempotency key accepted.
const MAX_FEEDBACK_FIELD_BYTES: usize = 4096;

/// `POST /v1/feedback`: 201 with the sequence number once the row is
/// committed; 200 for a repeat.
pub async fn feedback(
    State(state): State<AppState>,
    axum::Extension(caller): axum::Extension<Caller>,
    ApiJson(request): ApiJson<FeedbackRequest>,
) -> Result<Response, ApiError> {
    use chaffgate_store::{FeedbackOutcome, FeedbackTarget, Label, NewFeedback};

    let label: Label = request.label.parse().map_err(|_| {
        ApiError::InvalidFeedback(format!(
            "label {:?} is not one of junk, fine",
            request.label
        ))
    })?;
    // Without a moderator name, the token's name says who it was.
    let moderator = request.moderator.or(caller.name).unwrap_or_default();
    if moderator.trim().is_empty() {
        return Err(ApiError::InvalidFeedback(
            "moderator is required: who gave this label".to_owned(),
        ));
    }
    for (name, value) in [
        ("moderator", Some(&moderator)),
        ("note", request.note.as_ref()),
        ("idempotency_key", request.idempotency_key.as_ref()),
    ] {
        if value.is_some_and(|v| v.len() > MAX_FEEDBACK_FIELD_BYTES) {
            return Err(ApiError::InvalidFeedback(format!(
                "{name} is longer than {MAX_FEEDBACK_FIELD_BYTES} bytes"
            )));
        }
    }
    let target = match (request.decision_id, request.message) {
        (Some(id), None) => {
            if !DecisionId::is_well_formed(&id) {
                return Err(ApiError::InvalidFeedback(format!(
                    "decision_id {id:?} is not a decision id (26 characters of Crockford base 32)"
                )));
            }
            FeedbackTarget::Decision(DecisionId::new(id))
        }
        (None, Some(input)) => {
            let (message, _cuts) = read_input(&state, input)?;
            check_message(&state, &message)?;
            let message_json = serde_json::to_string(&message).map_err(ApiError::internal)?;
            FeedbackTarget::Inline { message_json }
        }
        (Some(_), Some(_)) => {
            return Err(ApiError::InvalidFeedback(
                "give either decision_id or message, not both".to_owned(),
            ));
        }
        (None, None) => {
            return Err(ApiError::InvalidFeedback(
                "give decision_id (feedback on a decision) or message (an inline message)"
                    .to_owned(),
            ));
        }
    };
    let labelled_decision = match &target {
        FeedbackTarget::Decision(id) => Some(id.clone()),
        FeedbackTarget::Inline { .. } => None,
    };
    let new = NewFeedback {
        target,
        label,
        moderator,
        note: request.note,
        idempotency_key: request.idempotency_key,
    };
    let outcome = state.store().append_feedback(&new, now_ms()).await?;
    let is_first_label = matches!(outcome, FeedbackOutcome::Inserted { .. });
    let (status, answer) = match outcome {
        FeedbackOutcome::Inserted { seq } => (
            StatusCode::CREATED,
            FeedbackAnswer {
                seq: seq.0,
                outcome: "recorded",
                previous_label: None,
            },
        ),
        FeedbackOutcome::Correction {
            seq,
            previous_label,
        } => (
            StatusCode::CREATED,
            FeedbackAnswer {
                seq: seq.0,
                outcome: "correction",
                previous_label: Some(previous_label.as_str()),
            },
        ),
        FeedbackOutcome::Duplicate { seq } => (
            StatusCode::OK,
            FeedbackAnswer {
                seq: seq.0,
                outcome: "duplicate",
                previous_label: None,
            },
        ),
    };
    if status == StatusCode::CREATED {
        state.metrics().count_feedback(label);
        state.wake_learner();
    }
    if is_first_label && let Some(id) = labelled_decision {
        observe_feedback_error(&state, &id, label).await;
    }
    Ok((status, axum::Json(answer)).into_response())
}

/// Feeds `|label - p_junk|` of a decision just labelled for the first time
/// to the feedback-error drift detector (`label` 1 for junk, 0 for fine).
async fn observe_feedback_error(state: &AppState, id: &DecisionId, label: chaffgate_store::Label) {
    match state.store().decision(id).await {
        Ok(Some(row)) => {
            let truth = match label {
                chaffgate_store::Label::Junk => 1.0,
                chaffgate_store::Label::Fine => 0.0,
            };
            state
                .alarms()
                .feedback_error
                .observe([(truth - row.p_junk).abs()], now_ms());
        }
        Ok(None) => {}
        Err(err) => {
            tracing::warn!(error = %err, "reading a labelled decision for the drift detector failed");
        }
    }
}

#[derive(Debug, Serialize)]
pub struct WeightView {
    feature: String,
    weight: f64,
}

#[derive(Debug, Serialize)]
pub struct CheckpointView {
    id: i64,
    file_name: String,
    created_at_ms: i64,
    last_seq: i64,
    examples_seen: i64,
    reason: String,
}

#[derive(Debug, Serialize)]
pub struct ModelView {
    update_rule: chaffgate_model::UpdateRule,
    bits: u8,
    key_id: String,
    examples_seen: u64,
    /// The last feedback row the model scoring now includes.
    model_seq: i64,
    /// The last feedback row committed to the log.
    committed_seq: i64,
    /// Committed rows the model does not include yet.
    learner_lag_rows: i64,
    /// How long the oldest of those has waited, in milliseconds.
    learner_lag_ms: i64,
    is_caught_up: bool,
    checkpoints: Vec<CheckpointView>,
    top_junk: Vec<WeightView>,
    top_fine: Vec<WeightView>,
}

/// The learner's progress against the feedback log.
pub async fn learner_gauges(state: &AppState) -> Result<LearnerGauges, ApiError> {
    let model_seq = state.judge().snapshot().model_seq;
    let committed_seq = state.store().last_feedback_seq().await?.0;
    let lag_ms = if committed_seq > model_seq {
        // The oldest row not learnt yet (revoked rows are skipped).
        let waiting = state
            .store()
            .feedback_after(chaffgate_store::FeedbackSeq(model_seq), 1)
            .await?;
        match waiting.first() {
            Some(row) => (now_ms() - row.created_at_ms).max(0),
            None => 0,
        }
    } else {
        0
    };
    Ok(LearnerGauges {
        model_seq,
        committed_seq,
        lag_ms,
    })
}

/// `GET /metrics`
pub async fn metrics_text(State(state): State<AppState>) -> Result<Response, ApiError> {
    let gauges = learner_gauges(&state).await?;
    let mut body = state.metrics().render(gauges);
    state.alarms().render(&mut body, now_ms());
    state.tally().counters().render(&mut body);
    let content_type = [(
        axum::http::header::CONTENT_TYPE,
        "text/plain; version=0.0.4; charset=utf-8",
    )];
    Ok((content_type, body).into_response())
}

/// `GET /v1/model`
pub async fn model(State(state): State<AppState>) -> Result<ApiJson<ModelView>, ApiError> {
    // Database reads first: a held snapshot keeps the learner waiting to
    // reclaim its copy, so it is taken only for the synchronous part below.
    let LearnerGauges {
        committed_seq,
        lag_ms: learner_lag_ms,
        ..
    } = learner_gauges(&state).await?;
    let checkpoints = state
        .store()
        .list_checkpoints()
        .await?
        .into_iter()
        .map(|row| CheckpointView {
            id: row.id,
            file_name: row.file_name,
            created_at_ms: row.created_at_ms,
            last_seq: row.last_seq.0,
            examples_seen: row.examples_seen,
            reason: row.reason,
        })
        .collect();
    let snapshot = state.judge().snapshot();
    let model_seq = snapshot.model_seq;
    let learner_lag_rows = (committed_seq - model_seq).max(0);
    let (top_junk, top_fine) = snapshot.model.top_weights(10);
    let name = |(index, weight): (u32, f64)| WeightView {
        feature: state
            .learner()
            .name_of(index)
            .unwrap_or_else(|| format!("slot {index}")),
        weight,
    };
    Ok(ApiJson(ModelView {
        update_rule: snapshot.model.rule(),
        bits: snapshot.model.bits(),
        key_id: format!("{:016x}", state.judge().key().key_id()),
        examples_seen: snapshot.model.examples_seen(),
        model_seq,
        committed_seq,
        learner_lag_rows,
        learner_lag_ms,
        is_caught_up: state.learner().is_caught_up(),
        checkpoints,
        top_junk: top_junk.into_iter().map(name).collect(),
        top_fine: top_fine.into_iter().map(name).collect(),
    }))
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RollbackRequest {
    checkpoint_id: i64,
}

/// `POST /v1/model/rollback`: serve a checkpoint's weights again and
/// revoke the feedback learnt after it.
pub async fn rollback(
    State(state): State<AppState>,
    ApiJson(request): ApiJson<RollbackRequest>,
) -> Result<ApiJson<crate::learner::RollbackReport>, ApiError> {
    use crate::learner::{LearnerCommand, RollbackError};
    let (done_tx, done_rx) = oneshot::channel();
    state
        .learner_tx()
        .send(LearnerCommand::Rollback {
            checkpoint_id: request.checkpoint_id,
            done_tx,
        })
        .await
        .map_err(|_| ApiError::Unavailable)?;
    match done_rx.await.map_err(|_| ApiError::Unavailable)? {
        Ok(report) => Ok(ApiJson(report)),
        Err(RollbackError::UnknownCheckpoint(id)) => Err(ApiError::UnknownCheckpoint(id)),
        Err(err @ RollbackError::Unusable { .. }) => {
            Err(ApiError::CheckpointUnusable(err.to_string()))
        }
        Err(RollbackError::Store(err)) => Err(err.into()),
    }
}
