//! chaffgate's durable records, kept in one SQLite file: the audit log of
//! decisions, the feedback log, checkpoints, the model's history, API
//! tokens and feature tallies for drift reports.
//!
//! Owns every SQL statement and, through `sqlx::migrate!`, the schema in
//! `migrations/` at the workspace root. It deals in rows: messages, reasons
//! and event details arrive and leave as JSON text it never interprets, and
//! it knows no HTTP and nothing of the model's insides. The server's audit
//! writer and learner tasks, its request handlers and the `chaffgate`
//! commands call it through one cheap-to-clone [`Store`].
//!
//! What must stay true:
//!
//! * The feedback log is the source of truth; the model is a function of it.
//!   Every feedback row carries its own copy of the message it teaches, so
//!   replaying the log (minus revoked rows) needs nothing else, and
//!   [`FeedbackSeq`] numbers are strictly increasing and never reused.
//! * A call that returns `Ok` after writing has committed, and the commit
//!   survives a crash or power loss.
//! * Each write call is one transaction: it all happens or none of it does.
//!   The one exception, [`Store::purge_expired_inputs`], deletes in batches
//!   so as not to hold up the audit writer.
//!
//! # Database settings
//!
//! [`Store::open`] sets these on every connection:
//!
//! | setting | value | why |
//! | --- | --- | --- |
//! | create if missing | yes | the first `chaffgate serve` makes the file, and its folder |
//! | `journal_mode` | `WAL` | readers (listings, reports) and the one writer do not block each other |
//! | `synchronous` | `FULL` | in WAL mode `NORMAL` may lose the last commits on power loss; `FULL` syncs the log on every commit, so an acknowledged decision or feedback row is on disk. The audit writer batches decisions into one transaction per call (group commit), so the sync is paid once per batch |
//! | `foreign_keys` | on | SQLite leaves them off by default; they keep feedback and inputs pointing at real decisions |
//! | `busy_timeout` | 5 s | a writer that finds the write lock taken waits for it instead of failing at once |
//!
//! Write transactions start with `BEGIN IMMEDIATE`, which takes the write
//! lock up front. A plain `BEGIN` that reads first and writes later can find,
//! at its first write, that another connection committed since it started
//! reading; SQLite then fails it with `SQLITE_BUSY` however long the busy
//! timeout is.

mod checkpoints;
mod decisions;
mod error;
mod feedback;
mod queue;
mod report_rows;
mod tallies;
mod tokens;
mod types;

#[cfg(test)]
mod test_support;

use std::path::Path;
use std::time::Duration;

use sqlx::SqlitePool;
use sqlx::sqlite::{SqliteConnectOptions, SqliteJournalMode, SqlitePoolOptions, SqliteSynchronous};

pub use checkpoints::{CheckpointRow, ModelEventRow, NewCheckpoint};
pub use decisions::{
    DecisionFilter, DecisionInput, DecisionPage, DecisionRow, MAX_PAGE_LIMIT, NewDecision,
};
pub use error::StoreError;
pub use feedback::{FeedbackOutcome, FeedbackRow, FeedbackTarget, NewFeedback};
pub use queue::{QueueFilter, QueueOrder, QueuePage, QueueScope};
pub use report_rows::{
    FeedbackImport, FeedbackTally, HOUR_MS, HourTally, LabelledDecision, MAX_INNER_EDGES,
};
pub use tallies::{
    ContributionRank, FEATURE_DRIFT_MIN_MESSAGES, FeatureCount, FeatureDrift, FeatureTally,
    PartFeature, ShareChange, TallyPart, feature_drift, feature_drift_with,
};
pub use tokens::TokenRow;
pub use types::{DecisionId, FeedbackKind, FeedbackSeq, Label, Role, UnknownWord, Verdict};

/// How long a writer waits for the write lock before giving up.
const BUSY_TIMEOUT: Duration = Duration::from_secs(5);

/// Connections in the pool. SQLite has one writer at a time; the rest serve
/// concurrent reads.
const MAX_CONNECTIONS: u32 = 8;

/// How write transactions begin; see the module docs.
const BEGIN_WRITE: &str = "BEGIN IMMEDIATE";

/// A handle on the database. Cloning it is cheap and shares the pool.
#[derive(Debug, Clone)]
pub struct Store {
    pool: SqlitePool,
}

impl Store {
    /// Opens the database at `path`, creating the file and its folder if
    /// missing, and brings the schema up to date. Opening an up-to-date
    /// database changes nothing.
    pub async fn open(path: &Path) -> Result<Store, StoreError> {
        if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent).map_err(|source| StoreError::CreateDir {
                path: parent.to_owned(),
                source,
            })?;
        }

        let options = SqliteConnectOptions::new()
            .filename(path)
            .create_if_missing(true)
            .journal_mode(SqliteJournalMode::Wal)
            .synchronous(SqliteSynchronous::Full)
            .foreign_keys(true)
            .busy_timeout(BUSY_TIMEOUT);
        let pool = SqlitePoolOptions::new()
            .max_connections(MAX_CONNECTIONS)
            .connect_with(options)
            .await
            .map_err(|source| StoreError::Open {
                path: path.to_owned(),
                source,
            })?;

        if let Err(source) = sqlx::migrate!("../../migrations").run(&pool).await {
            pool.close().await;
            return Err(StoreError::Migrate {
                path: path.to_owned(),
                source,
            });
        }

        Ok(Store { pool })
    }

    /// Waits for running queries to finish and closes every connection.
    /// Calls made after this fail.
    pub async fn close(&self) {
        self.pool.close().await;
    }

    /// Begins a write transaction, holding the write lock from the start.
    async fn begin_write(
        &self,
        action: &'static str,
    ) -> Result<sqlx::Transaction<'static, sqlx::Sqlite>, StoreError> {
        self.pool
            .begin_with(BEGIN_WRITE)
            .await
            .map_err(error::db(action))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::scratch;

    async fn pragma_text(store: &Store, name: &str) -> String {
        let (value,): (String,) = sqlx::query_as(&format!("PRAGMA {name}"))
            .fetch_one(&store.pool)
            .await
            .unwrap();
        value
    }

    async fn pragma_int(store: &Store, name: &str) -> i64 {
        let (value,): (i64,) = sqlx::query_as(&format!("PRAGMA {name}"))
            .fetch_one(&store.pool)
            .await
            .unwrap();
        value
    }

    #[tokio::test]
    async fn open_creates_the_folder_and_file_and_migrates() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("nested").join("data").join("chaffgate.db");
        let store = Store::open(&path).await.unwrap();
        assert!(path.is_file());

        let tables: Vec<(String,)> = sqlx::query_as(
            "SELECT name FROM sqlite_schema WHERE type = 'table' AND name NOT LIKE 'sqlite_%' \
             AND name NOT LIKE '_sqlx%' ORDER BY name",
        )
        .fetch_all(&store.pool)
        .await
        .unwrap();
        let tables: Vec<&str> = tables.iter().map(|t| t.0.as_str()).collect();
        assert_eq!(
            tables,
            [
                "checkpoints",
                "decision_inputs",
                "decisions",
                "feature_tallies",
                "feature_tally_parts",
                "feedback",
                "model_events",
                "tokens"
            ]
        );
        store.close().await;
    }

    #[tokio::test]
    async fn reopening_is_a_no_op() {
        let (dir, store) = scratch().await;
        store
            .add_token("ops", Role::Operate, &"a".repeat(64), 1)
            .await
            .unwrap();
        let migrations = |store: Store| async move {
            let rows: Vec<(i64, bool)> =
                sqlx::query_as("SELECT version, success FROM _sqlx_migrations ORDER BY version")
                    .fetch_all(&store.pool)
                    .await
                    .unwrap();
            rows
        };
        let before = migrations(store.clone()).await;
        assert_eq!(before, [(1, true), (2, true), (3, true)]);
        store.close().await;

        let store = Store::open(&dir.path().join("chaffgate.db")).await.unwrap();
        assert_eq!(migrations(store.clone()).await, before);
        assert_eq!(store.token_count().await.unwrap(), 1);
        store.close().await;
    }

    #[tokio::test]
    async fn connections_use_wal_full_sync_and_foreign_keys() {
        let (_dir, store) = scratch().await;
        // Values as the SQLite documentation of each pragma reports them:
        // synchronous FULL is 2, foreign_keys on is 1, busy_timeout is in ms.
        assert_eq!(pragma_text(&store, "journal_mode").await, "wal");
        assert_eq!(pragma_int(&store, "synchronous").await, 2);
        assert_eq!(pragma_int(&store, "foreign_keys").await, 1);
        assert_eq!(pragma_int(&store, "busy_timeout").await, 5000);
        store.close().await;
    }

    #[tokio::test]
    async fn a_file_that_is_not_a_database_fails_to_open() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("chaffgate.db");
        std::fs::write(
            &path,
            b"this is not an SQLite database, just some text ....",
        )
        .unwrap();
        let err = Store::open(&path).await.unwrap_err();
        assert!(
            matches!(err, StoreError::Open { .. } | StoreError::Migrate { .. }),
            "{err:?}"
        );
    }
}
