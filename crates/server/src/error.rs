//! The one error shape every HTTP answer uses:
//! `{"error": {"code": "unknown_decision", "message": "..."}}`.
//!
//! Codes are snake_case and never change (clients switch on them); messages
//! are for people. axum's own rejections (bad JSON, bad path or query, body
//! too large) are wrapped so that every client mistake gets this shape and
//! a 4xx. Internal errors log their chain and answer `internal` with 500.

use axum::Json;
use axum::extract::rejection::{JsonRejection, PathRejection, QueryRejection};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use serde_json::json;

#[derive(Debug, thiserror::Error)]
pub enum ApiError {
    /// The body is not JSON, or not the JSON this route takes (unknown or
    /// mistyped fields included).
    #[error("{0}")]
    InvalidJson(String),
    /// The body was not sent as `application/json`.
    #[error("{0}")]
    UnsupportedMediaType(String),
    /// The body is larger than `server.max_body_bytes`.
    #[error("{0}")]
    BodyTooLarge(String),
    /// A message's raw mail cannot be read (both `raw` and `raw_b64`, or
    /// bad base64).
    #[error("{0}")]
    InvalidMessage(String),
    /// A message has no subject, body, sender or meta.
    #[error("the message is empty: give at least one of subject, body, sender or meta")]
    EmptyMessage,
    /// A message's text is larger than `server.max_message_bytes`.
    #[error("the message has {bytes} bytes of text; at most {limit} are accepted")]
    MessageTooLarge { bytes: usize, limit: usize },
    /// A batch holds more messages than `server.max_batch`, or none.
    #[error("a batch takes 1 to {limit} messages; this one has {count}")]
    BatchSize { count: usize, limit: usize },
    /// A query or path parameter is malformed.
    #[error("{0}")]
    InvalidParameter(String),
    /// No decision has this id.
    #[error("no decision with id {0}")]
    UnknownDecision(String),
    /// Feedback names a decision whose message is no longer kept.
    #[error(
        "decision {0} is past the feedback window (audit.feedback_window_secs): its message is no longer kept, so it cannot be learnt; send the message inline instead"
    )]
    DecisionExpired(String),
    /// Feedback is malformed: no target or two, an unknown label, no
    /// moderator.
    #[error("{0}")]
    InvalidFeedback(String),
    /// An idempotency key came back with different feedback.
    #[error("{0}")]
    IdempotencyKeyReused(String),
    /// No live checkpoint has this id.
    #[error("no checkpoint with id {0}; GET /v1/model lists them")]
    UnknownCheckpoint(i64),
    /// A checkpoint exists but its file cannot be used.
    #[error("{0}")]
    CheckpointUnusable(String),
    /// No token, or an unknown or revoked one.
    #[error("{0}")]
    Unauthenticated(String),
    /// A valid token without the role this route needs.
    #[error("{0}")]
    Forbidden(String),
    /// The server is shutting down or a background task is gone.
    #[error("the service is shutting down; retry on another replica or later")]
    Unavailable,
    /// Anything else: a bug or a storage failure. The chain is logged.
    #[error("internal error")]
    Internal(#[source] Box<dyn std::error::Error + Send + Sync + 'static>),
}

impl ApiError {
    pub fn internal(err: impl std::error::Error + Send + Sync + 'static) -> ApiError {
        ApiError::Internal(Box::new(err))
    }

    /// The stable code clients switch on.
    pub fn code(&self) -> &'static str {
        match self {
            ApiError::InvalidJson(_) => "invalid_json",
            ApiError::UnsupportedMediaType(_) => "unsupported_media_type",
            ApiError::BodyTooLarge(_) => "body_too_large",
            ApiError::InvalidMessage(_) => "invalid_message",
            ApiError::EmptyMessage => "empty_message",
            ApiError::MessageTooLarge { .. } => "message_too_large",
            ApiError::BatchSize { .. } => "batch_size",
            ApiError::InvalidParameter(_) => "invalid_parameter",
            ApiError::UnknownDecision(_) => "unknown_decision",
            ApiError::DecisionExpired(_) => "decision_expired",
            ApiError::InvalidFeedback(_) => "invalid_feedback",
            ApiError::IdempotencyKeyReused(_) => "idempotency_key_reused",
            ApiError::UnknownCheckpoint(_) => "unknown_checkpoint",
            ApiError::CheckpointUnusable(_) => "checkpoint_unusable",
            ApiError::Unauthenticated(_) => "unauthenticated",
            ApiError::Forbidden(_) => "forbidden",
            ApiError::Unavailable => "unavailable",
            ApiError::Internal(_) => "internal",
        }
    }

    pub fn status(&self) -> StatusCode {
        match self {
            ApiError::InvalidJson(_) => StatusCode::BAD_REQUEST,
            ApiError::UnsupportedMediaType(_) => StatusCode::UNSUPPORTED_MEDIA_TYPE,
            ApiError::BodyTooLarge(_) | ApiError::MessageTooLarge { .. } => {
                StatusCode::PAYLOAD_TOO_LARGE
            }
            ApiError::EmptyMessage | ApiError::BatchSize { .. } | ApiError::InvalidMessage(_) => {
                StatusCode::UNPROCESSABLE_ENTITY
            }
            ApiError::InvalidParameter(_) => StatusCode::BAD_REQUEST,
            ApiError::UnknownDecision(_) => StatusCode::NOT_FOUND,
            ApiError::DecisionExpired(_) => StatusCode::GONE,
            ApiError::InvalidFeedback(_) => StatusCode::UNPROCESSABLE_ENTITY,
            ApiError::IdempotencyKeyReused(_) => StatusCode::CONFLICT,
            ApiError::UnknownCheckpoint(_) => StatusCode::NOT_FOUND,
            ApiError::CheckpointUnusable(_) => StatusCode::CONFLICT,
            ApiError::Unauthenticated(_) => StatusCode::UNAUTHORIZED,
            ApiError::Forbidden(_) => StatusCode::FORBIDDEN,
            ApiError::Unavailable => StatusCode::SERVICE_UNAVAILABLE,
            ApiError::Internal(_) => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }
}

impl IntoResponse for ApiError {
    fn into_response(self) -> Response {
        if let ApiError::Internal(source) = &self {
            tracing::error!(error = %source, "internal error answering a request");
        }
        let body = json!({ "error": { "code": self.code(), "message": self.to_string() } });
        let mut response = (self.status(), Json(body)).into_response();
        if matches!(self, ApiError::Unauthenticated(_)) {
            response.headers_mut().insert(
                axum::http::header::WWW_AUTHENTICATE,
                axum::http::HeaderValue::from_static("Bearer"),
            );
        }
        response
    }
}

impl From<JsonRejection> for ApiError {
    fn from(rejection: JsonRejection) -> ApiError {
        let text = rejection.body_text();
        match rejection.status() {
            StatusCode::PAYLOAD_TOO_LARGE => ApiError::BodyTooLarge(text),
            StatusCode::UNSUPPORTED_MEDIA_TYPE => ApiError::UnsupportedMediaType(text),
            _ => ApiError::InvalidJson(text),
        }
    }
}

impl From<QueryRejection> for ApiError {
    fn from(rejection: QueryRejection) -> ApiError {
        ApiError::InvalidParameter(rejection.body_text())
    }
}

impl From<PathRejection> for ApiError {
    fn from(rejection: PathRejection) -> ApiError {
        ApiError::InvalidParameter(rejection.body_text())
    }
}

impl From<chaffgate_store::StoreError> for ApiError {
    fn from(err: chaffgate_store::StoreError) -> ApiError {
        use chaffgate_store::StoreError;
        match err {
            StoreError::UnknownDecision { id } => ApiError::UnknownDecision(id.as_str().to_owned()),
            StoreError::DecisionExpired { id } => ApiError::DecisionExpired(id.as_str().to_owned()),
            StoreError::IdempotencyKeyReused { .. } => {
                ApiError::IdempotencyKeyReused(err.to_string())
            }
            StoreError::BadCursor { .. } | StoreError::BadLimit { .. } => {
                ApiError::InvalidParameter(err.to_string())
            }
            other => ApiError::internal(other),
        }
    }
}

/// `axum::Json` whose rejection is an [`ApiError`].
#[derive(axum::extract::FromRequest)]
#[from_request(via(axum::Json), rejection(ApiError))]
pub struct ApiJson<T>(pub T);

/// `axum::extract::Query` whose rejection is an [`ApiError`].
#[derive(axum::extract::FromRequestParts)]
#[from_request(via(axum::extract::Query), rejection(ApiError))]
pub struct ApiQuery<T>(pub T);

/// `axum::extract::Path` whose rejection is an [`ApiError`].
#[derive(axum::extract::FromRequestParts)]
#[from_request(via(axum::extract::Path), rejection(ApiError))]
pub struct ApiPath<T>(pub T);

impl<T: serde::Serialize> IntoResponse for ApiJson<T> {
    fn into_response(self) -> Response {
        Json(self.0).into_response()
    }
}
