//! The index of checkpoint files and the model's version history.
//!
//! The learner task records each checkpoint file it writes, with the last
//! feedback seq the saved model includes; at start-up the server loads the
//! newest one it can read and replays the feedback after it. Deleting an old
//! file marks its row rather than removing it, so the history stays whole.
//! Model events (rollbacks, rebuilds) are an append-only list with JSON
//! details the store does not read.

use sqlx::FromRow;

use crate::Store;
use crate::error::{StoreError, db};
use crate::types::FeedbackSeq;

/// A checkpoint file just written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NewCheckpoint {
    /// When it was written.
    pub created_at_ms: i64,
    /// The file's name inside the checkpoint folder (not a full path, so the
    /// folder can move).
    pub file_name: String,
    /// The last feedback row the saved model includes.
    pub last_seq: FeedbackSeq,
    /// How many examples the saved model has learned from.
    pub examples_seen: i64,
    /// Why it was written, e.g. `periodic`, `shutdown`, `rollback-target`.
    pub reason: String,
}

/// A recorded checkpoint.
#[derive(Debug, Clone, PartialEq, Eq, FromRow)]
pub struct CheckpointRow {
    /// Its id, in recording order.
    pub id: i64,
    /// When it was written.
    pub created_at_ms: i64,
    /// The file's name inside the checkpoint folder.
    pub file_name: String,
    /// The last feedback row the saved model includes.
    pub last_seq: FeedbackSeq,
    /// How many examples the saved model has learned from.
    pub examples_seen: i64,
    /// Why it was written.
    pub reason: String,
    /// When its file was deleted; `None` while it exists.
    pub deleted_at_ms: Option<i64>,
}

/// An entry in the model's version history.
#[derive(Debug, Clone, PartialEq, Eq, FromRow)]
pub struct ModelEventRow {
    /// Its id, in recording order.
    pub id: i64,
    /// When it happened.
    pub created_at_ms: i64,
    /// What happened, e.g. `rollback` or `rebuild`.
    pub kind: String,
    /// The details, as JSON.
    #[sqlx(rename = "detail")]
    pub detail_json: String,
}

impl Store {
    /// Records a checkpoint file and returns its id.
    pub async fn record_checkpoint(&self, new: &NewCheckpoint) -> Result<i64, StoreError> {
        let (id,): (i64,) = sqlx::query_as(
            "INSERT INTO checkpoints (created_at_ms, file_name, last_seq, examples_seen, reason) \
             VALUES (?, ?, ?, ?, ?) RETURNING id",
        )
        .bind(new.created_at_ms)
        .bind(&new.file_name)
        .bind(new.last_seq)
        .bind(new.examples_seen)
        .bind(&new.reason)
        .fetch_one(&self.pool)
        .await
        .map_err(db("recording a checkpoint"))?;
        Ok(id)
    }

    /// The checkpoints whose files have not been deleted, newest (most
    /// recently recorded) first.
    pub async fn list_checkpoints(&self) -> Result<Vec<CheckpointRow>, StoreError> {
        sqlx::query_as(
            "SELECT id, created_at_ms, file_name, last_seq, examples_seen, reason, deleted_at_ms \
             FROM checkpoints WHERE deleted_at_ms IS NULL ORDER BY id DESC",
        )
        .fetch_all(&self.pool)
        .await
        .map_err(db("listing checkpoints"))
    }

    /// Notes that a checkpoint's file was deleted. Returns `false` if there
    /// is no such checkpoint or it was already marked.
    pub async fn mark_checkpoint_deleted(&self, id: i64, now_ms: i64) -> Result<bool, StoreError> {
        let done = sqlx::query(
            "UPDATE checkpoints SET deleted_at_ms = ? WHERE id = ? AND deleted_at_ms IS NULL",
        )
        .bind(now_ms)
        .bind(id)
        .execute(&self.pool)
        .await
        .map_err(db("marking a checkpoint deleted"))?;
        Ok(done.rows_affected() == 1)
    }

    /// Appends an event to the model's history and returns its id.
    pub async fn record_model_event(
        &self,
        kind: &str,
        detail_json: &str,
        now_ms: i64,
    ) -> Result<i64, StoreError> {
        let (id,): (i64,) = sqlx::query_as(
            "INSERT INTO model_events (created_at_ms, kind, detail) VALUES (?, ?, ?) RETURNING id",
        )
        .bind(now_ms)
        .bind(kind)
        .bind(detail_json)
        .fetch_one(&self.pool)
        .await
        .map_err(db("recording a model event"))?;
        Ok(id)
    }

    /// The newest `limit` events of the model's history, newest first.
    pub async fn model_events(&self, limit: u32) -> Result<Vec<ModelEventRow>, StoreError> {
        sqlx::query_as(
            "SELECT id, created_at_ms, kind, detail FROM model_events ORDER BY id DESC LIMIT ?",
        )
        .bind(i64::from(limit))
        .fetch_all(&self.pool)
        .await
        .map_err(db("reading model events"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::scratch;

    fn checkpoint(n: i64, reason: &str) -> NewCheckpoint {
        NewCheckpoint {
            created_at_ms: 1_000 * n,
            file_name: format!("model-{n:08}.ckpt"),
            last_seq: FeedbackSeq(10 * n),
            examples_seen: 10 * n,
            reason: reason.to_owned(),
        }
    }

    #[tokio::test]
    async fn checkpoints_list_newest_first_until_deleted() {
        let (_dir, store) = scratch().await;
        assert_eq!(store.list_checkpoints().await.unwrap(), vec![]);
        let a = store
            .record_checkpoint(&checkpoint(1, "periodic"))
            .await
            .unwrap();
        let b = store
            .record_checkpoint(&checkpoint(2, "periodic"))
            .await
            .unwrap();
        let c = store
            .record_checkpoint(&checkpoint(3, "shutdown"))
            .await
            .unwrap();
        assert!(a < b && b < c);

        let rows = store.list_checkpoints().await.unwrap();
        assert_eq!(rows.iter().map(|r| r.id).collect::<Vec<_>>(), [c, b, a]);
        assert_eq!(
            rows[0],
            CheckpointRow {
                id: c,
                created_at_ms: 3_000,
                file_name: "model-00000003.ckpt".to_owned(),
                last_seq: FeedbackSeq(30),
                examples_seen: 30,
                reason: "shutdown".to_owned(),
                deleted_at_ms: None,
            }
        );

        assert!(store.mark_checkpoint_deleted(b, 4_000).await.unwrap());
        assert!(!store.mark_checkpoint_deleted(b, 5_000).await.unwrap());
        assert!(!store.mark_checkpoint_deleted(999, 5_000).await.unwrap());
        let rows = store.list_checkpoints().await.unwrap();
        assert_eq!(rows.iter().map(|r| r.id).collect::<Vec<_>>(), [c, a]);
        store.close().await;
    }

    #[tokio::test]
    async fn model_events_list_newest_first_up_to_the_limit() {
        let (_dir, store) = scratch().await;
        let rollback = store
            .record_model_event("rollback", r#"{"to_checkpoint":2}"#, 100)
            .await
            .unwrap();
        let rebuild = store
            .record_model_event("rebuild", r#"{"rows":812}"#, 200)
            .await
            .unwrap();
        let events = store.model_events(10).await.unwrap();
        assert_eq!(
            events,
            [
                ModelEventRow {
                    id: rebuild,
                    created_at_ms: 200,
                    kind: "rebuild".to_owned(),
                    detail_json: r#"{"rows":812}"#.to_owned(),
                },
                ModelEventRow {
                    id: rollback,
                    created_at_ms: 100,
                    kind: "rollback".to_owned(),
                    detail_json: r#"{"to_checkpoint":2}"#.to_owned(),
                },
            ]
        );
        assert_eq!(store.model_events(1).await.unwrap().len(), 1);
        assert!(
            store
                .record_model_event("rebuild", "not json", 300)
                .await
                .is_err()
        );
        store.close().await;
    }
}
