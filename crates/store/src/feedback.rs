//! The feedback log: moderators' labels, in the order the learner applies
//! them.
//!
//! Request handlers append with [`Store::append_feedback`]; the learner task
//! and `rebuild` read with [`Store::feedback_after`]. Each row gets a
//! [`FeedbackSeq`] from SQLite's `AUTOINCREMENT`, which only ever grows, even
//! across restarts and deleted rows, so "everything after seq N" always means
//! the same rows.
//!
//! Each row holds its own copy of the message to learn from. For feedback on
//! a decision the copy comes from the decision's input while that is kept,
//! so the log alone can rebuild the model after inputs are purged.
//!
//! How [`Store::append_feedback`] decides, in one write transaction:
//!
//! | situation | result | row written |
//! | --- | --- | --- |
//! | idempotency key seen before, same target and label | [`FeedbackOutcome::Duplicate`] of that row | none |
//! | idempotency key seen before, different target or label | [`StoreError::IdempotencyKeyReused`] | none |
//! | decision not in the audit log | [`StoreError::UnknownDecision`] | none |
//! | decision's latest live feedback has the same label | [`FeedbackOutcome::Duplicate`] of that row | none |
//! | decision's latest live feedback has the other label | [`FeedbackOutcome::Correction`] | `correction` |
//! | decision has no live feedback | [`FeedbackOutcome::Inserted`] | `label` |
//! | inline message | [`FeedbackOutcome::Inserted`] | `label` |
//!
//! "Live" means not revoked. A row for a decision needs the decision's
//! message: from its input if still kept, else from the earlier feedback
//! being corrected; with neither, the call fails with
//! [`StoreError::DecisionExpired`]. Inline messages are never duplicates of
//! each other: the same text labelled twice is learned twice.

use sqlx::FromRow;

use crate::Store;
use crate::error::{StoreError, db};
use crate::types::{DecisionId, FeedbackKind, FeedbackSeq, Label};

/// What a moderator's feedback is about.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum FeedbackTarget {
    /// A decision in the audit log.
    Decision(DecisionId),
    /// A message sent with the feedback itself, as JSON.
    Inline {
        /// The message, exactly as the learner will read it.
        message_json: String,
    },
}

/// Feedback to append.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NewFeedback {
    /// What it is about.
    pub target: FeedbackTarget,
    /// The moderator's label.
    pub label: Label,
    /// Who gave it (a token name or a person); not empty.
    pub moderator: String,
    /// A free-text note.
    pub note: Option<String>,
    /// A client-chosen key that makes retries safe: a second append with
    /// the same key writes nothing and answers with the first row.
    pub idempotency_key: Option<String>,
}

/// What [`Store::append_feedback`] did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FeedbackOutcome {
    /// A new `label` row was written.
    Inserted {
        /// The new row.
        seq: FeedbackSeq,
    },
    /// Nothing was written: the same feedback is already in the log.
    Duplicate {
        /// The row already there.
        seq: FeedbackSeq,
    },
    /// A new `correction` row was written: the decision's latest live
    /// feedback had the other label.
    Correction {
        /// The new row.
        seq: FeedbackSeq,
        /// The label being corrected.
        previous_label: Label,
    },
}

impl FeedbackOutcome {
    /// The row written, or the one already there.
    pub fn seq(self) -> FeedbackSeq {
        match self {
            FeedbackOutcome::Inserted { seq }
            | FeedbackOutcome::Duplicate { seq }
            | FeedbackOutcome::Correction { seq, .. } => seq,
        }
    }
}

/// A row of the feedback log.
#[derive(Debug, Clone, PartialEq, Eq, FromRow)]
pub struct FeedbackRow {
    /// Its place in the log.
    pub seq: FeedbackSeq,
    /// When it was appended.
    pub created_at_ms: i64,
    /// The decision it is about; `None` for an inline message.
    pub decision_id: Option<DecisionId>,
    /// The message to learn from, as JSON.
    #[sqlx(rename = "message")]
    pub message_json: String,
    /// The moderator's label.
    pub label: Label,
    /// Who gave it.
    pub moderator: String,
    /// The moderator's note.
    pub note: Option<String>,
    /// The client's idempotency key.
    pub idempotency_key: Option<String>,
    /// A first label, or a correction of an earlier one.
    pub kind: FeedbackKind,
    /// When it was revoked; revoked rows are not replayed.
    pub revoked_at_ms: Option<i64>,
}

const FEEDBACK_COLUMNS: &str = "seq, created_at_ms, decision_id, message, label, moderator, \
     note, idempotency_key, kind, revoked_at_ms";

impl Store {
    /// Appends feedback to the log, unless it is already there; see the
    /// module docs for every case. `now_ms` stamps the new row and decides
    /// whether a decision's input has expired.
    pub async fn append_feedback(
        &self,
        new: &NewFeedback,
        now_ms: i64,
    ) -> Result<FeedbackOutcome, StoreError> {
        const ACTION: &str = "appending feedback";
        // The write lock is held from here to the commit, so nothing can
        // slip in between the checks below and the insert.
        let mut tx = self.begin_write(ACTION).await?;

        if let Some(key) = &new.idempotency_key {
            let earlier: Option<(FeedbackSeq, Option<DecisionId>, String, Label)> = sqlx::query_as(
                "SELECT seq, decision_id, message, label FROM feedback WHERE idempotency_key = ?",
            )
            .bind(key)
            .fetch_optional(&mut *tx)
            .await
            .map_err(db(ACTION))?;
            if let Some((seq, decision_id, message_json, label)) = earlier {
                let same_target = match &new.target {
                    FeedbackTarget::Decision(id) => decision_id.as_ref() == Some(id),
                    FeedbackTarget::Inline {
                        message_json: new_json,
                    } => decision_id.is_none() && message_json == *new_json,
                };
                if same_target && label == new.label {
                    return Ok(FeedbackOutcome::Duplicate { seq });
                }
                return Err(StoreError::IdempotencyKeyReused {
                    key: key.clone(),
                    seq,
                });
            }
        }

        let (decision_id, message_json, previous_label) = match &new.target {
            FeedbackTarget::Inline { message_json } => (None, message_json.clone(), None),
            FeedbackTarget::Decision(id) => {
                let known: Option<(i64,)> = sqlx::query_as("SELECT 1 FROM decisions WHERE id = ?")
                    .bind(id)
                    .fetch_optional(&mut *tx)
                    .await
                    .map_err(db(ACTION))?;
                if known.is_none() {
                    return Err(StoreError::UnknownDecision { id: id.clone() });
                }

                let latest: Option<(FeedbackSeq, Label, String)> = sqlx::query_as(
                    "SELECT seq, label, message FROM feedback \
                     WHERE decision_id = ? AND revoked_at_ms IS NULL \
                     ORDER BY seq DESC LIMIT 1",
                )
                .bind(id)
                .fetch_optional(&mut *tx)
                .await
                .map_err(db(ACTION))?;
                if let Some((seq, label, _)) = &latest
                    && *label == new.label
                {
                    return Ok(FeedbackOutcome::Duplicate { seq: *seq });
                }

                let input: Option<(String,)> = sqlx::query_as(
                    "SELECT message FROM decision_inputs \
                     WHERE decision_id = ? AND expires_at_ms > ?",
                )
                .bind(id)
                .bind(now_ms)
                .fetch_optional(&mut *tx)
                .await
                .map_err(db(ACTION))?;

                match (input, latest) {
                    (Some((message_json,)), latest) => {
                        (Some(id), message_json, latest.map(|(_, label, _)| label))
                    }
                    (None, Some((_, label, message_json))) => (Some(id), message_json, Some(label)),
                    (None, None) => {
                        return Err(StoreError::DecisionExpired { id: id.clone() });
                    }
                }
            }
        };

        let kind = match previous_label {
            Some(_) => FeedbackKind::Correction,
            None => FeedbackKind::Label,
        };
        let (seq,): (FeedbackSeq,) = sqlx::query_as(
            "INSERT INTO feedback (created_at_ms, decision_id, message, label, moderator, note, \
             idempotency_key, kind) VALUES (?, ?, ?, ?, ?, ?, ?, ?) RETURNING seq",
        )
        .bind(now_ms)
        .bind(decision_id)
        .bind(&message_json)
        .bind(new.label)
        .bind(&new.moderator)
        .bind(&new.note)
        .bind(&new.idempotency_key)
        .bind(kind)
        .fetch_one(&mut *tx)
        .await
        .map_err(db(ACTION))?;
        tx.commit().await.map_err(db(ACTION))?;

        Ok(match previous_label {
            Some(previous_label) => FeedbackOutcome::Correction {
                seq,
                previous_label,
            },
            None => FeedbackOutcome::Inserted { seq },
        })
    }

    /// Up to `limit` live (not revoked) feedback rows with `seq > after`, in
    /// sequence order: what the learner applies next, or, from
    /// [`FeedbackSeq::ZERO`], the whole log for a rebuild.
    pub async fn feedback_after(
        &self,
        after: FeedbackSeq,
        limit: u32,
    ) -> Result<Vec<FeedbackRow>, StoreError> {
        let sql = format!(
            "SELECT {FEEDBACK_COLUMNS} FROM feedback \
             WHERE seq > ? AND revoked_at_ms IS NULL ORDER BY seq LIMIT ?"
        );
        sqlx::query_as(&sql)
            .bind(after)
            .bind(i64::from(limit))
            .fetch_all(&self.pool)
            .await
            .map_err(db("reading feedback"))
    }

    /// The feedback row with this seq, revoked or not.
    pub async fn feedback(&self, seq: FeedbackSeq) -> Result<Option<FeedbackRow>, StoreError> {
        let sql = format!("SELECT {FEEDBACK_COLUMNS} FROM feedback WHERE seq = ?");
        sqlx::query_as(&sql)
            .bind(seq)
            .fetch_optional(&self.pool)
            .await
            .map_err(db("reading feedback"))
    }

    /// The seq of the newest live feedback row: the last row a full replay
    /// applies. [`FeedbackSeq::ZERO`] when there is none.
    pub async fn last_feedback_seq(&self) -> Result<FeedbackSeq, StoreError> {
        let (seq,): (Option<FeedbackSeq>,) =
            sqlx::query_as("SELECT max(seq) FROM feedback WHERE revoked_at_ms IS NULL")
                .fetch_one(&self.pool)
                .await
                .map_err(db("reading the last feedback seq"))?;
        Ok(seq.unwrap_or(FeedbackSeq::ZERO))
    }

    /// How many live feedback rows there are: how many a full replay applies.
    pub async fn feedback_count(&self) -> Result<u64, StoreError> {
        let (count,): (i64,) =
            sqlx::query_as("SELECT count(*) FROM feedback WHERE revoked_at_ms IS NULL")
                .fetch_one(&self.pool)
                .await
                .map_err(db("counting feedback"))?;
        Ok(count.unsigned_abs())
    }

    /// Marks a feedback row revoked, so that replays skip it from now on.
    /// Returns `false` if there is no such row or it was already revoked.
    /// The model in memory still includes the row until it is rebuilt.
    pub async fn revoke_feedback(&self, seq: FeedbackSeq, now_ms: i64) -> Result<bool, StoreError> {
        let done = sqlx::query(
            "UPDATE feedback SET revoked_at_ms = ? WHERE seq = ? AND revoked_at_ms IS NULL",
        )
        .bind(now_ms)
        .bind(seq)
        .execute(&self.pool)
        .await
        .map_err(db("revoking feedback"))?;
        Ok(done.rows_affected() == 1)
    }

    /// Revokes every live row after `seq` (what a rollback to a checkpoint
    /// taken at `seq` un-learns), in one statement. Returns how many.
    pub async fn revoke_feedback_after(
        &self,
        seq: FeedbackSeq,
        now_ms: i64,
    ) -> Result<u64, StoreError> {
        let done = sqlx::query(
            "UPDATE feedback SET revoked_at_ms = ? WHERE seq > ? AND revoked_at_ms IS NULL",
        )
        .bind(now_ms)
        .bind(seq)
        .execute(&self.pool)
        .await
        .map_err(db("revoking feedback after a sequence number"))?;
        Ok(done.rows_affected())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::{decision, scratch, ulid};
    use crate::{DecisionInput, NewDecision};

    fn on_decision(id: &DecisionId, label: Label) -> NewFeedback {
        NewFeedback {
            target: FeedbackTarget::Decision(id.clone()),
            label,
            moderator: "mod-ana".to_owned(),
            note: None,
            idempotency_key: None,
        }
    }

    fn inline(body: &str, label: Label) -> NewFeedback {
        NewFeedback {
            target: FeedbackTarget::Inline {
                message_json: format!(r#"{{"body":"{body}"}}"#),
            },
            label,
            moderator: "mod-ben".to_owned(),
            note: Some("from the review queue".to_owned()),
            idempotency_key: None,
        }
    }

    /// A decision made at 1000 ms whose input expires at 2000 ms.
    fn kept_decision(n: i64) -> NewDecision {
        let mut d = decision(1_000, n);
        d.input = Some(DecisionInput {
            message_json: format!(r#"{{"body":"decided message {n}"}}"#),
            expires_at_ms: 2_000,
        });
        d
    }

    #[tokio::test]
    async fn first_label_on_a_decision_is_inserted_with_the_input_copied() {
        let (_dir, store) = scratch().await;
        let d = kept_decision(1);
        store
            .insert_decisions(std::slice::from_ref(&d))
            .await
            .unwrap();

        let outcome = store
            .append_feedback(&on_decision(&d.id, Label::Junk), 1_500)
            .await;
        assert_eq!(
            outcome.unwrap(),
            FeedbackOutcome::Inserted {
                seq: FeedbackSeq(1)
            }
        );

        let row = store.feedback(FeedbackSeq(1)).await.unwrap().unwrap();
        assert_eq!(row.decision_id.as_ref(), Some(&d.id));
        assert_eq!(row.message_json, d.input.unwrap().message_json);
        assert_eq!(row.label, Label::Junk);
        assert_eq!(row.kind, FeedbackKind::Label);
        assert_eq!(row.created_at_ms, 1_500);
        assert_eq!(row.moderator, "mod-ana");
        assert_eq!(row.revoked_at_ms, None);
        store.close().await;
    }

    #[tokio::test]
    async fn same_label_again_is_a_duplicate_and_writes_nothing() {
        let (_dir, store) = scratch().await;
        let d = kept_decision(1);
        store
            .insert_decisions(std::slice::from_ref(&d))
            .await
            .unwrap();
        let first = store
            .append_feedback(&on_decision(&d.id, Label::Fine), 1_100)
            .await
            .unwrap();
        let again = store
            .append_feedback(&on_decision(&d.id, Label::Fine), 1_200)
            .await
            .unwrap();
        assert_eq!(again, FeedbackOutcome::Duplicate { seq: first.seq() });
        assert_eq!(store.feedback_count().await.unwrap(), 1);
        store.close().await;
    }

    #[tokio::test]
    async fn the_other_label_is_a_correction() {
        let (_dir, store) = scratch().await;
        let d = kept_decision(1);
        store
            .insert_decisions(std::slice::from_ref(&d))
            .await
            .unwrap();
        store
            .append_feedback(&on_decision(&d.id, Label::Fine), 1_100)
            .await
            .unwrap();
        let corrected = store
            .append_feedback(&on_decision(&d.id, Label::Junk), 1_200)
            .await
            .unwrap();
        assert_eq!(
            corrected,
            FeedbackOutcome::Correction {
                seq: FeedbackSeq(2),
                previous_label: Label::Fine
            }
        );
        let row = store.feedback(FeedbackSeq(2)).await.unwrap().unwrap();
        assert_eq!(row.kind, FeedbackKind::Correction);
        assert_eq!(row.label, Label::Junk);

        // Correcting back compares against the correction, the latest row.
        let back = store
            .append_feedback(&on_decision(&d.id, Label::Fine), 1_300)
            .await
            .unwrap();
        assert_eq!(
            back,
            FeedbackOutcome::Correction {
                seq: FeedbackSeq(3),
                previous_label: Label::Junk
            }
        );
        store.close().await;
    }

    #[tokio::test]
    async fn an_idempotency_key_answers_with_its_first_row() {
        let (_dir, store) = scratch().await;
        let d = kept_decision(1);
        store
            .insert_decisions(std::slice::from_ref(&d))
            .await
            .unwrap();
        let keyed = NewFeedback {
            idempotency_key: Some("req-7f3a".to_owned()),
            ..on_decision(&d.id, Label::Junk)
        };
        let first = store.append_feedback(&keyed, 1_100).await.unwrap();
        assert_eq!(
            first,
            FeedbackOutcome::Inserted {
                seq: FeedbackSeq(1)
            }
        );
        // A correction in between does not change what a retry answers.
        store
            .append_feedback(&on_decision(&d.id, Label::Fine), 1_200)
            .await
            .unwrap();
        let retry = store.append_feedback(&keyed, 1_300).await.unwrap();
        assert_eq!(
            retry,
            FeedbackOutcome::Duplicate {
                seq: FeedbackSeq(1)
            }
        );

        let keyed_inline = NewFeedback {
            idempotency_key: Some("req-inline".to_owned()),
            ..inline("cheap pills", Label::Junk)
        };
        let first = store.append_feedback(&keyed_inline, 1_400).await.unwrap();
        let retry = store.append_feedback(&keyed_inline, 1_500).await.unwrap();
        assert_eq!(retry, FeedbackOutcome::Duplicate { seq: first.seq() });
        assert_eq!(store.feedback_count().await.unwrap(), 3);
        store.close().await;
    }

    #[tokio::test]
    async fn an_idempotency_key_reused_for_other_feedback_is_refused() {
        let (_dir, store) = scratch().await;
        let (a, b) = (kept_decision(1), kept_decision(2));
        store
            .insert_decisions(&[a.clone(), b.clone()])
            .await
            .unwrap();
        let key = Some("req-1".to_owned());
        let first = NewFeedback {
            idempotency_key: key.clone(),
            ..on_decision(&a.id, Label::Junk)
        };
        store.append_feedback(&first, 1_100).await.unwrap();

        let other_decision = NewFeedback {
            idempotency_key: key.clone(),
            ..on_decision(&b.id, Label::Junk)
        };
        let other_label = NewFeedback {
            idempotency_key: key.clone(),
            ..on_decision(&a.id, Label::Fine)
        };
        let other_message = NewFeedback {
            idempotency_key: key.clone(),
            ..inline("hello", Label::Junk)
        };
        for new in [other_decision, other_label, other_message] {
            let err = store.append_feedback(&new, 1_200).await.unwrap_err();
            assert!(
                matches!(&err, StoreError::IdempotencyKeyReused { key, seq }
                    if key == "req-1" && *seq == FeedbackSeq(1)),
                "{err:?}"
            );
        }
        assert_eq!(store.feedback_count().await.unwrap(), 1);
        store.close().await;
    }

    #[tokio::test]
    async fn unknown_decision_is_refused() {
        let (_dir, store) = scratch().await;
        let id = ulid(1_000, 1);
        let err = store
            .append_feedback(&on_decision(&id, Label::Junk), 1_100)
            .await
            .unwrap_err();
        assert!(
            matches!(&err, StoreError::UnknownDecision { id: got } if *got == id),
            "{err:?}"
        );
        assert_eq!(store.feedback_count().await.unwrap(), 0);
        store.close().await;
    }

    #[tokio::test]
    async fn expired_or_never_kept_input_is_refused() {
        let (_dir, store) = scratch().await;
        let kept = kept_decision(1);
        let mut never_kept = decision(1_000, 2);
        never_kept.input = None;
        store
            .insert_decisions(&[kept.clone(), never_kept.clone()])
            .await
            .unwrap();

        // Expired at exactly expires_at_ms, before any purge.
        for (id, now_ms) in [(&kept.id, 2_000), (&never_kept.id, 1_100)] {
            let err = store
                .append_feedback(&on_decision(id, Label::Junk), now_ms)
                .await
                .unwrap_err();
            assert!(
                matches!(&err, StoreError::DecisionExpired { id: got } if got == id),
                "{err:?}"
            );
        }
        // And after the purge.
        store.purge_expired_inputs(2_000).await.unwrap();
        let err = store
            .append_feedback(&on_decision(&kept.id, Label::Junk), 1_999)
            .await
            .unwrap_err();
        assert!(matches!(err, StoreError::DecisionExpired { .. }), "{err:?}");
        assert_eq!(store.feedback_count().await.unwrap(), 0);
        store.close().await;
    }

    #[tokio::test]
    async fn a_correction_after_expiry_reuses_the_earlier_copy() {
        let (_dir, store) = scratch().await;
        let d = kept_decision(1);
        store
            .insert_decisions(std::slice::from_ref(&d))
            .await
            .unwrap();
        store
            .append_feedback(&on_decision(&d.id, Label::Fine), 1_100)
            .await
            .unwrap();
        store.purge_expired_inputs(5_000).await.unwrap();

        // The same label after expiry is still recognised as a duplicate.
        let again = store
            .append_feedback(&on_decision(&d.id, Label::Fine), 5_000)
            .await
            .unwrap();
        assert_eq!(
            again,
            FeedbackOutcome::Duplicate {
                seq: FeedbackSeq(1)
            }
        );

        let corrected = store
            .append_feedback(&on_decision(&d.id, Label::Junk), 5_000)
            .await
            .unwrap();
        assert_eq!(
            corrected,
            FeedbackOutcome::Correction {
                seq: FeedbackSeq(2),
                previous_label: Label::Fine
            }
        );
        let row = store.feedback(FeedbackSeq(2)).await.unwrap().unwrap();
        assert_eq!(row.message_json, d.input.unwrap().message_json);
        store.close().await;
    }

    #[tokio::test]
    async fn inline_feedback_is_always_inserted() {
        let (_dir, store) = scratch().await;
        let new = inline("win a prize", Label::Junk);
        let first = store.append_feedback(&new, 10).await.unwrap();
        let second = store.append_feedback(&new, 20).await.unwrap();
        assert_eq!(
            first,
            FeedbackOutcome::Inserted {
                seq: FeedbackSeq(1)
            }
        );
        assert_eq!(
            second,
            FeedbackOutcome::Inserted {
                seq: FeedbackSeq(2)
            }
        );
        let row = store.feedback(FeedbackSeq(1)).await.unwrap().unwrap();
        assert_eq!(row.decision_id, None);
        assert_eq!(row.message_json, r#"{"body":"win a prize"}"#);
        assert_eq!(row.kind, FeedbackKind::Label);
        assert_eq!(row.note.as_deref(), Some("from the review queue"));
        store.close().await;
    }

    #[tokio::test]
    async fn invalid_message_json_is_refused_by_the_schema() {
        let (_dir, store) = scratch().await;
        let new = NewFeedback {
            target: FeedbackTarget::Inline {
                message_json: "{not json".to_owned(),
            },
            ..inline("x", Label::Fine)
        };
        let err = store.append_feedback(&new, 10).await.unwrap_err();
        assert!(matches!(err, StoreError::Database { .. }), "{err:?}");
        store.close().await;
    }

    #[tokio::test]
    async fn seqs_keep_growing_across_restarts_and_deletions() {
        let (dir, store) = scratch().await;
        for n in 1..=3 {
            let outcome = store
                .append_feedback(&inline("a", Label::Fine), n)
                .await
                .unwrap();
            assert_eq!(outcome.seq(), FeedbackSeq(n));
        }
        store.close().await;

        let path = dir.path().join("chaffgate.db");
        let store = Store::open(&path).await.unwrap();
        assert_eq!(store.last_feedback_seq().await.unwrap(), FeedbackSeq(3));
        let outcome = store
            .append_feedback(&inline("b", Label::Junk), 4)
            .await
            .unwrap();
        assert_eq!(outcome.seq(), FeedbackSeq(4));

        // Even if the newest row were deleted by hand, its number is not
        // handed out again: AUTOINCREMENT, not plain rowid reuse.
        sqlx::query("DELETE FROM feedback WHERE seq = 4")
            .execute(&store.pool)
            .await
            .unwrap();
        store.close().await;
        let store = Store::open(&path).await.unwrap();
        let outcome = store
            .append_feedback(&inline("c", Label::Junk), 5)
            .await
            .unwrap();
        assert_eq!(outcome.seq(), FeedbackSeq(5));
        store.close().await;
    }

    #[tokio::test]
    async fn feedback_after_reads_live_rows_in_order_up_to_the_limit() {
        let (_dir, store) = scratch().await;
        assert_eq!(store.last_feedback_seq().await.unwrap(), FeedbackSeq::ZERO);
        assert_eq!(
            store.feedback_after(FeedbackSeq::ZERO, 10).await.unwrap(),
            vec![]
        );
        for n in 1..=10 {
            let label = if n % 2 == 0 { Label::Junk } else { Label::Fine };
            store
                .append_feedback(&inline(&format!("m{n}"), label), n)
                .await
                .unwrap();
        }
        assert!(store.revoke_feedback(FeedbackSeq(4), 100).await.unwrap());
        assert!(!store.revoke_feedback(FeedbackSeq(4), 101).await.unwrap());
        assert!(!store.revoke_feedback(FeedbackSeq(99), 101).await.unwrap());
        assert!(store.revoke_feedback(FeedbackSeq(10), 100).await.unwrap());

        let seqs = |rows: Vec<FeedbackRow>| rows.iter().map(|r| r.seq.0).collect::<Vec<_>>();
        assert_eq!(
            seqs(store.feedback_after(FeedbackSeq::ZERO, 100).await.unwrap()),
            [1, 2, 3, 5, 6, 7, 8, 9]
        );
        assert_eq!(
            seqs(store.feedback_after(FeedbackSeq(2), 3).await.unwrap()),
            [3, 5, 6]
        );
        assert_eq!(
            seqs(store.feedback_after(FeedbackSeq(9), 3).await.unwrap()),
            Vec::<i64>::new()
        );
        assert_eq!(
            seqs(store.feedback_after(FeedbackSeq(1), 0).await.unwrap()),
            Vec::<i64>::new()
        );
        assert_eq!(store.last_feedback_seq().await.unwrap(), FeedbackSeq(9));
        assert_eq!(store.feedback_count().await.unwrap(), 8);

        // A revoked row is still readable on its own, marked.
        let revoked = store.feedback(FeedbackSeq(4)).await.unwrap().unwrap();
        assert_eq!(revoked.revoked_at_ms, Some(100));
        store.close().await;
    }

    #[tokio::test]
    async fn a_revoked_label_no_longer_counts_as_the_latest() {
        let (_dir, store) = scratch().await;
        let d = kept_decision(1);
        store
            .insert_decisions(std::slice::from_ref(&d))
            .await
            .unwrap();
        store
            .append_feedback(&on_decision(&d.id, Label::Junk), 1_100)
            .await
            .unwrap();
        store.revoke_feedback(FeedbackSeq(1), 1_150).await.unwrap();
        let outcome = store
            .append_feedback(&on_decision(&d.id, Label::Fine), 1_200)
            .await
            .unwrap();
        assert_eq!(
            outcome,
            FeedbackOutcome::Inserted {
                seq: FeedbackSeq(2)
            }
        );
        store.close().await;
    }

    #[tokio::test(flavor = "multi_thread", worker_threads = 4)]
    async fn concurrent_appends_get_distinct_seqs() {
        const TASKS: i64 = 8;
        const EACH: i64 = 25;
        let (_dir, store) = scratch().await;
        let decisions: Vec<NewDecision> = (0..TASKS * EACH).map(kept_decision).collect();
        store.insert_decisions(&decisions).await.unwrap();

        let mut tasks = Vec::new();
        for task in 0..TASKS {
            let store = store.clone();
            let ids: Vec<DecisionId> = decisions
                [(task * EACH) as usize..((task + 1) * EACH) as usize]
                .iter()
                .map(|d| d.id.clone())
                .collect();
            tasks.push(tokio::spawn(async move {
                let mut seqs = Vec::new();
                for (n, id) in ids.iter().enumerate() {
                    // Alternate decision feedback and inline feedback.
                    let new = if n % 2 == 0 {
                        on_decision(id, Label::Junk)
                    } else {
                        inline(&format!("t{task}-{n}"), Label::Fine)
                    };
                    let outcome = store.append_feedback(&new, 1_500).await.unwrap();
                    assert!(matches!(outcome, FeedbackOutcome::Inserted { .. }));
                    seqs.push(outcome.seq());
                }
                seqs
            }));
        }
        let mut all = Vec::new();
        for task in tasks {
            let seqs = task.await.unwrap();
            // Within one task, later calls get later numbers.
            assert!(seqs.windows(2).all(|w| w[0] < w[1]));
            all.extend(seqs);
        }
        all.sort();
        let want: Vec<FeedbackSeq> = (1..=TASKS * EACH).map(FeedbackSeq).collect();
        assert_eq!(all, want);
        store.close().await;
    }

    #[tokio::test]
    async fn revoking_after_a_seq_hides_later_rows_from_replay() {
        let (_dir, store) = scratch().await;
        for n in 0..5 {
            let new = NewFeedback {
                target: FeedbackTarget::Inline {
                    message_json: format!("{{\"body\":\"m{n}\"}}"),
                },
                label: Label::Junk,
                moderator: "mod-ana".to_owned(),
                note: None,
                idempotency_key: None,
            };
            store.append_feedback(&new, 1_000).await.unwrap();
        }
        assert_eq!(
            store
                .revoke_feedback_after(FeedbackSeq(2), 2_000)
                .await
                .unwrap(),
            3
        );
        assert_eq!(
            store
                .revoke_feedback_after(FeedbackSeq(2), 3_000)
                .await
                .unwrap(),
            0
        );
        let live: Vec<i64> = store
            .feedback_after(FeedbackSeq::ZERO, 100)
            .await
            .unwrap()
            .iter()
            .map(|row| row.seq.0)
            .collect();
        assert_eq!(live, [1, 2]);
    }
}
