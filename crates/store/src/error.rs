//! Why a store call failed.
//!
//! One enum for the crate. The first variants are answers the caller acts
//! on (an HTTP handler maps each to its own error code); [`StoreError::Open`],
//! [`StoreError::Migrate`] and [`StoreError::Database`] are faults to log,
//! and name what the store was doing when they happened.

use std::path::PathBuf;

use crate::types::{DecisionId, FeedbackSeq};

/// A store call did not do what was asked.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    /// Feedback named a decision that is not in the audit log.
    #[error("no decision with id {id}")]
    UnknownDecision {
        /// The id given.
        id: DecisionId,
    },

    /// Feedback named a decision whose message is no longer held (its
    /// retention window has passed, or it was never kept), and no earlier
    /// feedback on that decision holds a copy, so there is nothing to learn
    /// from.
    #[error("decision {id} is too old for feedback: its message is no longer kept")]
    DecisionExpired {
        /// The id given.
        id: DecisionId,
    },

    /// An idempotency key came back with a different request than the one
    /// it was first used for (another decision, message or label). Nothing
    /// was written.
    #[error("idempotency key {key:?} was already used for a different feedback (seq {seq})")]
    IdempotencyKeyReused {
        /// The key given.
        key: String,
        /// The feedback row the key belongs to.
        seq: FeedbackSeq,
    },

    /// A token name is already taken, by a live or a revoked token.
    #[error("a token named {name:?} already exists")]
    TokenNameTaken {
        /// The name given.
        name: String,
    },

    /// The same token secret is already registered under another name.
    #[error("this token secret is already registered")]
    TokenSecretTaken,

    /// A page cursor was not one this store handed out.
    #[error("{cursor:?} is not a valid page cursor")]
    BadCursor {
        /// The cursor given.
        cursor: String,
    },

    /// A page size outside `1..=max`.
    #[error("page limit {limit} is out of range: must be 1 to {max}")]
    BadLimit {
        /// The limit given.
        limit: u32,
        /// The largest limit allowed.
        max: u32,
    },

    /// The folder that should hold the database file could not be created.
    #[error("cannot create folder {path}")]
    CreateDir {
        /// The folder.
        path: PathBuf,
        /// What the file system said.
        #[source]
        source: std::io::Error,
    },

    /// The database file could not be opened or configured.
    #[error("cannot open database {path}")]
    Open {
        /// The database file.
        path: PathBuf,
        /// What SQLite said.
        #[source]
        source: sqlx::Error,
    },

    /// The schema migrations failed, or the database was migrated by a newer
    /// chaffgate whose migrations this build does not know.
    #[error("cannot migrate database {path}")]
    Migrate {
        /// The database file.
        path: PathBuf,
        /// What went wrong.
        #[source]
        source: sqlx::migrate::MigrateError,
    },

    /// A query failed: I/O, a full disk, a constraint the caller's data
    /// broke, or the write lock staying busy past the timeout.
    #[error("database error while {action}")]
    Database {
        /// What the store was doing, e.g. "appending feedback".
        action: &'static str,
        /// What SQLite said.
        #[source]
        source: sqlx::Error,
    },
}

/// Wraps a `sqlx::Error` as [`StoreError::Database`] with what was being done.
pub(crate) fn db(action: &'static str) -> impl FnOnce(sqlx::Error) -> StoreError {
    move |source| StoreError::Database { action, source }
}
