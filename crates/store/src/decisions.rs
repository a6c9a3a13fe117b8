//! The audit log: one decision row per scored message, and the inputs that
//! feedback needs to learn from it.
//!
//! The server's audit writer is the only caller of
//! [`Store::insert_decisions`]: it gathers the decisions made while the
//! previous batch was being written and hands them over in one call, which
//! is one transaction and so one sync to disk (group commit).
//!
//! Readers page through decisions newest first, ordered by
//! `(created_at_ms, id)`: the id breaks ties between decisions of the same
//! millisecond. A page cursor holds that pair for the last row of the page
//! before, and the next page starts strictly below it (keyset pagination:
//! no row is skipped or repeated while new ones arrive, and page 1000 costs
//! what page 1 does). Every filter has an index that yields rows in this
//! order, so a page never sorts in memory. Sorting on the recorded time
//! rather than on the id alone keeps time windows on the same index even if
//! an id's embedded time and `created_at_ms` ever disagree.
//!
//! A decision's input (its message as JSON) is kept until `expires_at_ms`;
//! [`Store::purge_expired_inputs`] deletes expired ones. The decision row
//! itself stays.

use sqlx::{FromRow, QueryBuilder, Sqlite};

use crate::Store;
use crate::error::{StoreError, db};
use crate::types::{DecisionId, FeedbackSeq, Verdict};

/// The most rows one page of [`Store::list_decisions`] may ask for.
pub const MAX_PAGE_LIMIT: u32 = 1000;

/// The page size of [`DecisionFilter::default`].
const DEFAULT_PAGE_LIMIT: u32 = 100;

/// Decisions per `INSERT` statement. 11 bound values a row stays far below
/// SQLite's limit of 32766 per statement.
const ROWS_PER_INSERT: usize = 64;

/// Expired inputs deleted per statement, so that a large purge does not hold
/// the write lock (and the audit writer) for long.
const PURGE_BATCH: i64 = 5000;

/// A decision to record.
#[derive(Debug, Clone, PartialEq)]
pub struct NewDecision {
    /// A canonical ULID made when the message was scored.
    pub id: DecisionId,
    /// When the message was scored.
    pub created_at_ms: i64,
    /// The channel the message came in on; not empty.
    pub channel: String,
    /// The client's own reference for the message, if it sent one.
    pub client_ref: Option<String>,
    /// Lowercase hex SHA-256 of the normalised content.
    pub content_sha256: String,
    /// The normalised content, only when the operator keeps message text.
    pub content: Option<String>,
    /// The model's probability that the message is junk, in `[0, 1]`.
    pub p_junk: f64,
    /// The verdict given.
    pub verdict: Verdict,
    /// The last feedback row the scoring model had applied.
    pub model_seq: FeedbackSeq,
    /// The reasons given, as JSON.
    pub reasons_json: String,
    /// How long scoring took.
    pub latency_us: i64,
    /// What feedback on this decision will need, if the operator keeps it.
    pub input: Option<DecisionInput>,
}

/// The message behind a decision, kept for a while so that feedback on the
/// decision can be learned from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DecisionInput {
    /// The message as JSON, exactly as the learner will read it.
    pub message_json: String,
    /// When the message stops being kept. Feedback from then on fails with
    /// [`StoreError::DecisionExpired`] unless earlier feedback holds a copy.
    pub expires_at_ms: i64,
}

/// A recorded decision.
#[derive(Debug, Clone, PartialEq, FromRow)]
pub struct DecisionRow {
    /// The decision's id.
    pub id: DecisionId,
    /// When the message was scored.
    pub created_at_ms: i64,
    /// The channel the message came in on.
    pub channel: String,
    /// The client's own reference for the message.
    pub client_ref: Option<String>,
    /// Lowercase hex SHA-256 of the normalised content.
    pub content_sha256: String,
    /// The normalised content, when kept.
    pub content: Option<String>,
    /// The model's probability that the message was junk.
    pub p_junk: f64,
    /// The verdict given.
    pub verdict: Verdict,
    /// The last feedback row the scoring model had applied.
    pub model_seq: FeedbackSeq,
    /// The reasons given, as JSON.
    #[sqlx(rename = "reasons")]
    pub reasons_json: String,
    /// How long scoring took.
    pub latency_us: i64,
    /// Until when the message is kept for feedback; `None` once purged, or
    /// if it was never kept.
    pub input_expires_at_ms: Option<i64>,
}

/// Which decisions to list, and which page.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DecisionFilter {
    /// Only decisions made at or after this time.
    pub since_ms: Option<i64>,
    /// Only decisions made before this time.
    pub until_ms: Option<i64>,
    /// Only decisions with this verdict.
    pub verdict: Option<Verdict>,
    /// Only decisions from this channel.
    pub channel: Option<String>,
    /// Rows per page, `1..=`[`MAX_PAGE_LIMIT`].
    pub limit: u32,
    /// Where to continue: a [`DecisionPage::next_cursor`] from the same
    /// filter. `None` starts at the newest decision.
    pub cursor: Option<String>,
}

impl Default for DecisionFilter {
    /// Every decision, newest first, 100 to a page.
    fn default() -> DecisionFilter {
        DecisionFilter {
            since_ms: None,
            until_ms: None,
            verdict: None,
            channel: None,
            limit: DEFAULT_PAGE_LIMIT,
            cursor: None,
        }
    }
}

/// One page of decisions, newest first.
#[derive(Debug, Clone, PartialEq)]
pub struct DecisionPage {
    /// At most `limit` rows.
    pub rows: Vec<DecisionRow>,
    /// Pass this as [`DecisionFilter::cursor`] for the next page; `None` on
    /// the last page. Opaque to callers.
    pub next_cursor: Option<String>,
}

/// The decision columns, with the input's expiry joined on as
/// `input_expires_at_ms`. Used with `FROM decisions d LEFT JOIN
/// decision_inputs i ON i.decision_id = d.id`.
pub(crate) const DECISION_COLUMNS: &str = "d.id, d.created_at_ms, d.channel, d.client_ref, \
     d.content_sha256, d.content, d.p_junk, d.verdict, d.model_seq, d.reasons, d.latency_us, \
     i.expires_at_ms AS input_expires_at_ms";

impl Store {
    /// Records a batch of decisions, and the inputs of those that have one,
    /// in one transaction: all are written or none. An empty batch does
    /// nothing.
    pub async fn insert_decisions(&self, batch: &[NewDecision]) -> Result<(), StoreError> {
        const ACTION: &str = "recording decisions";
        if batch.is_empty() {
            return Ok(());
        }
        let mut tx = self.begin_write(ACTION).await?;
        // Several rows per statement: each statement is a round trip to the
        // connection's worker thread, which costs more than the row itself.
        for chunk in batch.chunks(ROWS_PER_INSERT) {
            let mut insert: QueryBuilder<Sqlite> = QueryBuilder::new(
                "INSERT INTO decisions (id, created_at_ms, channel, client_ref, content_sha256, \
                 content, p_junk, verdict, model_seq, reasons, latency_us) ",
            );
            insert.push_values(chunk, |mut row, decision| {
                row.push_bind(&decision.id)
                    .push_bind(decision.created_at_ms)
                    .push_bind(&decision.channel)
                    .push_bind(&decision.client_ref)
                    .push_bind(&decision.content_sha256)
                    .push_bind(&decision.content)
                    .push_bind(decision.p_junk)
                    .push_bind(decision.verdict)
                    .push_bind(decision.model_seq)
                    .push_bind(&decision.reasons_json)
                    .push_bind(decision.latency_us);
            });
            insert.build().execute(&mut *tx).await.map_err(db(ACTION))?;

            let inputs: Vec<(&DecisionId, &DecisionInput)> = chunk
                .iter()
                .filter_map(|d| d.input.as_ref().map(|input| (&d.id, input)))
                .collect();
            if inputs.is_empty() {
                continue;
            }
            let mut insert: QueryBuilder<Sqlite> = QueryBuilder::new(
                "INSERT INTO decision_inputs (decision_id, message, expires_at_ms) ",
            );
            insert.push_values(inputs, |mut row, (id, input)| {
                row.push_bind(id)
                    .push_bind(&input.message_json)
                    .push_bind(input.expires_at_ms);
            });
            insert.build().execute(&mut *tx).await.map_err(db(ACTION))?;
        }
        tx.commit().await.map_err(db(ACTION))
    }

    /// The decision with this id, if there is one.
    pub async fn decision(&self, id: &DecisionId) -> Result<Option<DecisionRow>, StoreError> {
        let sql = format!(
            "SELECT {DECISION_COLUMNS} FROM decisions d \
             LEFT JOIN decision_inputs i ON i.decision_id = d.id WHERE d.id = ?"
        );
        sqlx::query_as(&sql)
            .bind(id)
            .fetch_optional(&self.pool)
            .await
            .map_err(db("reading a decision"))
    }

    /// One page of the decisions that match `filter`, newest first.
    pub async fn list_decisions(
        &self,
        filter: &DecisionFilter,
    ) -> Result<DecisionPage, StoreError> {
        if !(1..=MAX_PAGE_LIMIT).contains(&filter.limit) {
            return Err(StoreError::BadLimit {
                limit: filter.limit,
                max: MAX_PAGE_LIMIT,
            });
        }
        let after = match &filter.cursor {
            Some(cursor) => Some(parse_cursor(cursor).ok_or_else(|| StoreError::BadCursor {
                cursor: cursor.clone(),
            })?),
            None => None,
        };

        let mut query: QueryBuilder<Sqlite> = QueryBuilder::new(format!(
            "SELECT {DECISION_COLUMNS} FROM decisions d \
             LEFT JOIN decision_inputs i ON i.decision_id = d.id WHERE 1 = 1"
        ));
        if let Some((created_at_ms, id)) = after {
            query
                .push(" AND (d.created_at_ms, d.id) < (")
                .push_bind(created_at_ms)
                .push(", ")
                .push_bind(id)
                .push(")");
        }
        if let Some(since_ms) = filter.since_ms {
            query.push(" AND d.created_at_ms >= ").push_bind(since_ms);
        }
        if let Some(until_ms) = filter.until_ms {
            query.push(" AND d.created_at_ms < ").push_bind(until_ms);
        }
        if let Some(verdict) = filter.verdict {
            query.push(" AND d.verdict = ").push_bind(verdict);
        }
        if let Some(channel) = &filter.channel {
            query.push(" AND d.channel = ").push_bind(channel);
        }
        // One row more than asked tells whether another page follows.
        query
            .push(" ORDER BY d.created_at_ms DESC, d.id DESC LIMIT ")
            .push_bind(i64::from(filter.limit) + 1);

        let mut rows: Vec<DecisionRow> = query
            .build_query_as()
            .fetch_all(&self.pool)
            .await
            .map_err(db("listing decisions"))?;

        let next_cursor = if rows.len() > filter.limit as usize {
            rows.truncate(filter.limit as usize);
            rows.last()
                .map(|row| make_cursor(row.created_at_ms, &row.id))
        } else {
            None
        };
        Ok(DecisionPage { rows, next_cursor })
    }

    /// Deletes the inputs whose `expires_at_ms <= now_ms` and returns how
    /// many went. Works in batches, each its own transaction, so the audit
    /// writer never waits long; if it fails part-way, the batches before
    /// stay deleted.
    pub async fn purge_expired_inputs(&self, now_ms: i64) -> Result<u64, StoreError> {
        let mut purged = 0;
        loop {
            let deleted = sqlx::query(
                "DELETE FROM decision_inputs WHERE decision_id IN \
                 (SELECT decision_id FROM decision_inputs WHERE expires_at_ms <= ? LIMIT ?)",
            )
            .bind(now_ms)
            .bind(PURGE_BATCH)
            .execute(&self.pool)
            .await
            .map_err(db("purging expired decision inputs"))?
            .rows_affected();
            purged += deleted;
            if deleted < PURGE_BATCH as u64 {
                return Ok(purged);
            }
        }
    }
}

/// The cursor for the page after a row: its time and id, as
/// `<created_at_ms>.<id>`.
fn make_cursor(created_at_ms: i64, id: &DecisionId) -> String {
    format!("{created_at_ms}.{id}")
}

/// The (time, id) pair in a cursor made by [`make_cursor`], or `None` if
/// `cursor` is not one.
fn parse_cursor(cursor: &str) -> Option<(i64, String)> {
    let (created_at_ms, id) = cursor.rsplit_once('.')?;
    let created_at_ms = created_at_ms.parse().ok()?;
    DecisionId::is_well_formed(id).then(|| (created_at_ms, id.to_owned()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::{decision, scratch, ulid};

    #[tokio::test]
    async fn a_batch_of_1000_reads_back_exactly() {
        let (_dir, store) = scratch().await;
        let batch: Vec<NewDecision> = (0..1000).map(|n| decision(1_000 + n, n)).collect();
        store.insert_decisions(&batch).await.unwrap();

        for new in [&batch[0], &batch[499], &batch[999]] {
            let row = store.decision(&new.id).await.unwrap().unwrap();
            assert_eq!(row.id, new.id);
            assert_eq!(row.created_at_ms, new.created_at_ms);
            assert_eq!(row.channel, new.channel);
            assert_eq!(row.client_ref, new.client_ref);
            assert_eq!(row.content_sha256, new.content_sha256);
            assert_eq!(row.content, new.content);
            assert_eq!(row.p_junk.to_bits(), new.p_junk.to_bits());
            assert_eq!(row.verdict, new.verdict);
            assert_eq!(row.model_seq, new.model_seq);
            assert_eq!(row.reasons_json, new.reasons_json);
            assert_eq!(row.latency_us, new.latency_us);
            assert_eq!(
                row.input_expires_at_ms,
                new.input.as_ref().map(|i| i.expires_at_ms)
            );
        }
        let count: (i64,) = sqlx::query_as("SELECT count(*) FROM decisions")
            .fetch_one(&store.pool)
            .await
            .unwrap();
        assert_eq!(count.0, 1000);
        store.close().await;
    }

    #[tokio::test]
    async fn a_bad_row_rolls_back_the_whole_batch() {
        let (_dir, store) = scratch().await;
        let mut batch: Vec<NewDecision> = (0..10).map(|n| decision(1_000 + n, n)).collect();
        batch[7].verdict = Verdict::Junk;
        batch[7].p_junk = 1.5;
        let err = store.insert_decisions(&batch).await.unwrap_err();
        assert!(matches!(err, StoreError::Database { .. }), "{err:?}");
        assert_eq!(store.decision(&batch[0].id).await.unwrap(), None);
        store.close().await;
    }

    #[tokio::test]
    async fn the_schema_rejects_ids_that_are_not_canonical_ulids() {
        let (_dir, store) = scratch().await;
        let mut bad = decision(1_000, 0);
        bad.id = DecisionId::new(bad.id.as_str().to_lowercase());
        assert!(store.insert_decisions(&[bad]).await.is_err());
        store.close().await;
    }

    #[tokio::test]
    async fn unknown_decision_is_none() {
        let (_dir, store) = scratch().await;
        assert_eq!(store.decision(&ulid(5, 5)).await.unwrap(), None);
        store.close().await;
    }

    /// Walks every page of `filter` and returns the ids in the order seen.
    async fn walk(store: &Store, mut filter: DecisionFilter) -> Vec<DecisionId> {
        let mut seen = Vec::new();
        loop {
            let page = store.list_decisions(&filter).await.unwrap();
            assert!(page.rows.len() <= filter.limit as usize);
            seen.extend(page.rows.into_iter().map(|row| row.id));
            match page.next_cursor {
                Some(cursor) => filter.cursor = Some(cursor),
                None => return seen,
            }
        }
    }

    #[tokio::test]
    async fn paging_walks_every_matching_row_once_newest_first() {
        let (_dir, store) = scratch().await;
        // Two decisions per millisecond, so ids share their time prefix.
        let batch: Vec<NewDecision> = (0..250).map(|n| decision(10_000 + n / 2, n)).collect();
        store.insert_decisions(&batch).await.unwrap();

        let mut all: Vec<&NewDecision> = batch.iter().collect();
        all.sort_by(|a, b| (b.created_at_ms, &b.id).cmp(&(a.created_at_ms, &a.id)));
        let expect = |keep: &dyn Fn(&NewDecision) -> bool| -> Vec<DecisionId> {
            all.iter()
                .filter(|d| keep(d))
                .map(|d| d.id.clone())
                .collect()
        };

        // No filter, a page size that does not divide the total.
        let filter = DecisionFilter {
            limit: 7,
            ..DecisionFilter::default()
        };
        assert_eq!(walk(&store, filter).await, expect(&|_| true));

        // A page size that divides the total exactly: no empty last page.
        let filter = DecisionFilter {
            limit: 50,
            ..DecisionFilter::default()
        };
        let first = store.list_decisions(&filter).await.unwrap();
        assert_eq!(first.rows.len(), 50);
        assert_eq!(walk(&store, filter).await, expect(&|_| true));

        // Each filter on its own, then all together.
        let filter = DecisionFilter {
            verdict: Some(Verdict::Junk),
            limit: 9,
            ..DecisionFilter::default()
        };
        let want = expect(&|d| d.verdict == Verdict::Junk);
        assert!(!want.is_empty());
        assert_eq!(walk(&store, filter).await, want);

        let filter = DecisionFilter {
            channel: Some("tickets".to_owned()),
            limit: 11,
            ..DecisionFilter::default()
        };
        let want = expect(&|d| d.channel == "tickets");
        assert!(!want.is_empty());
        assert_eq!(walk(&store, filter).await, want);

        let filter = DecisionFilter {
            since_ms: Some(10_020),
            until_ms: Some(10_060),
            limit: 13,
            ..DecisionFilter::default()
        };
        let want = expect(&|d| (10_020..10_060).contains(&d.created_at_ms));
        assert_eq!(want.len(), 80);
        assert_eq!(walk(&store, filter).await, want);

        let filter = DecisionFilter {
            since_ms: Some(10_010),
            until_ms: Some(10_100),
            verdict: Some(Verdict::Review),
            channel: Some("mail".to_owned()),
            limit: 3,
            cursor: None,
        };
        let want = expect(&|d| {
            (10_010..10_100).contains(&d.created_at_ms)
                && d.verdict == Verdict::Review
                && d.channel == "mail"
        });
        assert!(!want.is_empty());
        assert_eq!(walk(&store, filter).await, want);
        store.close().await;
    }

    #[tokio::test]
    async fn ties_in_time_are_paged_by_id() {
        let (_dir, store) = scratch().await;
        let batch: Vec<NewDecision> = (0..30).map(|n| decision(7_000, n)).collect();
        store.insert_decisions(&batch).await.unwrap();
        let filter = DecisionFilter {
            limit: 4,
            ..DecisionFilter::default()
        };
        let want: Vec<DecisionId> = batch.iter().rev().map(|d| d.id.clone()).collect();
        assert_eq!(walk(&store, filter).await, want);
        store.close().await;
    }

    #[test]
    fn cursors_round_trip() {
        let id = ulid(1_700_000_000_000, 3);
        for created_at_ms in [0, -5, 1_700_000_000_000, i64::MAX] {
            let cursor = make_cursor(created_at_ms, &id);
            assert_eq!(
                parse_cursor(&cursor),
                Some((created_at_ms, id.as_str().to_owned()))
            );
        }
    }

    #[tokio::test]
    async fn rows_added_while_paging_do_not_disturb_the_walk() {
        let (_dir, store) = scratch().await;
        let old: Vec<NewDecision> = (0..20).map(|n| decision(1_000 + n, n)).collect();
        store.insert_decisions(&old).await.unwrap();
        let filter = DecisionFilter {
            limit: 8,
            ..DecisionFilter::default()
        };
        let first = store.list_decisions(&filter).await.unwrap();

        // Newer decisions arrive between pages; they belong before page one.
        let newer: Vec<NewDecision> = (0..5).map(|n| decision(9_000 + n, 100 + n)).collect();
        store.insert_decisions(&newer).await.unwrap();

        let mut seen: Vec<DecisionId> = first.rows.into_iter().map(|r| r.id).collect();
        let rest = DecisionFilter {
            cursor: first.next_cursor,
            ..filter
        };
        seen.extend(walk(&store, rest).await);
        let mut want: Vec<DecisionId> = old.into_iter().map(|d| d.id).collect();
        want.reverse();
        assert_eq!(seen, want);
        store.close().await;
    }

    #[tokio::test]
    async fn bad_limits_and_cursors_are_refused() {
        let (_dir, store) = scratch().await;
        for limit in [0, MAX_PAGE_LIMIT + 1] {
            let filter = DecisionFilter {
                limit,
                ..DecisionFilter::default()
            };
            let err = store.list_decisions(&filter).await.unwrap_err();
            assert!(matches!(err, StoreError::BadLimit { .. }), "{err:?}");
        }
        for cursor in [
            "",
            "not a cursor",
            "01ARZ3NDEKTSV4RRFFQ69G5FAV",
            "12.not-an-id",
            "x.01ARZ3NDEKTSV4RRFFQ69G5FAV",
            "12.01ARZ3NDEKTSV4RRFFQ69G5FA' OR 1=1 --",
        ] {
            let filter = DecisionFilter {
                cursor: Some(cursor.to_owned()),
                ..DecisionFilter::default()
            };
            let err = store.list_decisions(&filter).await.unwrap_err();
            assert!(matches!(err, StoreError::BadCursor { .. }), "{err:?}");
        }
        let filter = DecisionFilter {
            limit: MAX_PAGE_LIMIT,
            ..DecisionFilter::default()
        };
        let page = store.list_decisions(&filter).await.unwrap();
        assert_eq!(
            page,
            DecisionPage {
                rows: vec![],
                next_cursor: None
            }
        );
        store.close().await;
    }

    #[tokio::test]
    async fn purge_deletes_expired_inputs_only() {
        let (_dir, store) = scratch().await;
        // decision() keeps an input for two decisions in three, expiring at
        // created_at_ms + 1000.
        let batch: Vec<NewDecision> = (0..30).map(|n| decision(1_000 + n, n)).collect();
        store.insert_decisions(&batch).await.unwrap();
        let expiring = |now: i64| {
            batch
                .iter()
                .filter(|d| d.input.as_ref().is_some_and(|i| i.expires_at_ms <= now))
                .count() as u64
        };

        let now = 2_010;
        assert_eq!(
            store.purge_expired_inputs(now).await.unwrap(),
            expiring(now)
        );
        assert!(expiring(now) > 0);
        for new in &batch {
            let row = store.decision(&new.id).await.unwrap().unwrap();
            let kept = new
                .input
                .as_ref()
                .map(|i| i.expires_at_ms)
                .filter(|&at| at > now);
            assert_eq!(row.input_expires_at_ms, kept, "{id}", id = new.id);
        }
        // Nothing left to purge at the same time; everything later.
        assert_eq!(store.purge_expired_inputs(now).await.unwrap(), 0);
        assert_eq!(
            store.purge_expired_inputs(i64::MAX).await.unwrap(),
            expiring(i64::MAX) - expiring(now)
        );
        store.close().await;
    }

    #[tokio::test]
    async fn purge_works_through_more_than_one_batch() {
        let (_dir, store) = scratch().await;
        let batch: Vec<NewDecision> = (0..(PURGE_BATCH + 10))
            .map(|n| {
                let mut d = decision(1_000 + n, n);
                d.input = Some(DecisionInput {
                    message_json: "{}".to_owned(),
                    expires_at_ms: 5,
                });
                d
            })
            .collect();
        store.insert_decisions(&batch).await.unwrap();
        assert_eq!(
            store.purge_expired_inputs(5).await.unwrap(),
            (PURGE_BATCH + 10) as u64
        );
        store.close().await;
    }
}
