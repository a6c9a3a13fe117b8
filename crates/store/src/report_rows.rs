//! What drift reports read: decisions and feedback of two adjacent time
//! windows, tallied in SQL where the report only needs counts.
//!
//! The report crate calls these once per report; nothing else does. Every
//! query reads one time range through the covering indexes of
//! `migrations/0003_report_indexes.sql`, so the decision and feedback rows
//! themselves (with their reasons, digests and message copies) are never
//! visited. Decisions are tallied per UTC hour, channel and verdict in the
//! index's own order, so a window of a million decisions costs one pass
//! over an index range inside SQLite, with no sort, and hands back a few
//! thousand tallies rather than a million rows.
//!
//! Time ranges are half-open, `[from_ms, until_ms)`, by each row's own
//! `created_at_ms`.
//!
//! [`Store::insert_feedback_rows`] is the one writer here: it appends
//! feedback rows as given, for imports and load tests.

use sqlx::{FromRow, QueryBuilder, Row, Sqlite};

use crate::Store;
use crate::checkpoints::{CheckpointRow, ModelEventRow};
use crate::error::{StoreError, db};
use crate::types::{DecisionId, FeedbackKind, FeedbackSeq, Label, Verdict};

/// Feedback rows per `INSERT` statement in [`Store::insert_feedback_rows`]:
/// 7 bound values a row stays far below SQLite's limit of 32766.
const FEEDBACK_ROWS_PER_INSERT: usize = 256;

/// Milliseconds in an hour: the width of a [`HourTally`]. Written out in
/// the SQL below exactly as in the index expression, which SQLite must see
/// verbatim to use it.
pub const HOUR_MS: i64 = 3_600_000;

/// The most `p_junk` bin edges [`Store::hour_tallies`] takes: each is one
/// more sum per row.
pub const MAX_INNER_EDGES: usize = 99;

/// Decisions of one UTC hour sharing a channel and a verdict.
#[derive(Debug, Clone, PartialEq)]
pub struct HourTally {
    /// Hours since the Unix epoch: `created_at_ms / 3600000`.
    pub hour: i64,
    /// The decisions' channel.
    pub channel: String,
    /// The decisions' verdict.
    pub verdict: Verdict,
    /// How many decisions.
    pub count: i64,
    /// Sum of their `p_junk`.
    pub p_junk_sum: f64,
    /// Smallest `model_seq` among them: the oldest model that judged one.
    pub model_seq_min: FeedbackSeq,
    /// Largest `model_seq` among them.
    pub model_seq_max: FeedbackSeq,
    /// Decisions per `p_junk` bin, lowest bin first: one more entry than
    /// inner edges were given.
    pub bin_counts: Vec<i64>,
}

/// A decision and its standing moderator label:
/// the latest live (not revoked) feedback row on it, so that a correction
/// overrides the label it corrects.
#[derive(Debug, Clone, PartialEq, FromRow)]
pub struct LabelledDecision {
    /// When the decision was made.
    pub created_at_ms: i64,
    /// Its channel.
    pub channel: String,
    /// Its `p_junk`.
    pub p_junk: f64,
    /// Its verdict.
    pub verdict: Verdict,
    /// The standing label.
    pub label: Label,
}

/// Feedback rows appended on one side of a split time that share a
/// moderator, a label, a kind and a state.
#[derive(Debug, Clone, PartialEq, Eq, FromRow)]
pub struct FeedbackTally {
    /// Appended at or after the split time (the current window).
    pub is_current: bool,
    /// Who gave them.
    pub moderator: String,
    /// Their label.
    pub label: Label,
    /// First labels or corrections.
    pub kind: FeedbackKind,
    /// Revoked since (un-learned).
    pub is_revoked: bool,
    /// About a decision in the audit log (else an inline message).
    pub is_on_decision: bool,
    /// How many rows.
    pub count: i64,
}

/// A feedback row to append as it is, with [`Store::insert_feedback_rows`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FeedbackImport {
    /// When it was given.
    pub created_at_ms: i64,
    /// The decision it is about; `None` for an inline message.
    pub decision_id: Option<DecisionId>,
    /// The message to learn from, as JSON.
    pub message_json: String,
    /// The label.
    pub label: Label,
    /// Who gave it; not empty.
    pub moderator: String,
    /// A first label or a correction.
    pub kind: FeedbackKind,
    /// When it was revoked, if it was.
    pub revoked_at_ms: Option<i64>,
}

impl Store {
    /// Decisions made in `[from_ms, until_ms)` tallied per UTC hour,
    /// channel and verdict, in that order, with their counts per `p_junk`
    /// bin. `inner_edges` are the bin edges between the lowest and the
    /// highest (for ten equal bins: 0.1 to 0.9), increasing, at most
    /// [`MAX_INNER_EDGES`]; bin `i` holds `edges[i] <= p_junk < edges[i +
    /// 1]`, the last bin everything from its lower edge up. With `channel`,
    /// only that channel's decisions.
    pub async fn hour_tallies(
        &self,
        from_ms: i64,
        until_ms: i64,
        inner_edges: &[f64],
        channel: Option<&str>,
    ) -> Result<Vec<HourTally>, StoreError> {
        const ACTION: &str = "tallying decisions for a report";
        let edges = &inner_edges[..inner_edges.len().min(MAX_INNER_EDGES)];
        // Cumulative counts: below_i = decisions with p_junk < edge i.
        let mut query: QueryBuilder<Sqlite> = QueryBuilder::new(
            "SELECT created_at_ms / 3600000 AS hour, channel, verdict, count(*), sum(p_junk), \
             min(model_seq), max(model_seq)",
        );
        for edge in edges {
            query.push(", sum(p_junk < ").push_bind(*edge).push(")");
        }
        query
            .push(" FROM decisions WHERE created_at_ms / 3600000 >= ")
            .push_bind(from_ms.div_euclid(HOUR_MS))
            .push(" AND created_at_ms / 3600000 <= ")
            .push_bind(until_ms.div_euclid(HOUR_MS))
            .push(" AND created_at_ms >= ")
            .push_bind(from_ms)
            .push(" AND created_at_ms < ")
            .push_bind(until_ms);
        if let Some(channel) = channel {
            query.push(" AND channel = ").push_bind(channel);
        }
        query.push(
            " GROUP BY created_at_ms / 3600000, channel, verdict \
             ORDER BY created_at_ms / 3600000, channel, verdict",
        );
        let rows = query
            .build()
            .fetch_all(&self.pool)
            .await
            .map_err(db(ACTION))?;
        rows.iter()
            .map(|row| {
                let count: i64 = row.try_get(3)?;
                let mut bin_counts = Vec::with_capacity(edges.len() + 1);
                let mut below_previous = 0;
                for i in 0..edges.len() {
                    let below: i64 = row.try_get(7 + i)?;
                    bin_counts.push(below - below_previous);
                    below_previous = below;
                }
                bin_counts.push(count - below_previous);
                Ok(HourTally {
                    hour: row.try_get(0)?,
                    channel: row.try_get(1)?,
                    verdict: row.try_get(2)?,
                    count,
                    p_junk_sum: row.try_get(4)?,
                    model_seq_min: row.try_get(5)?,
                    model_seq_max: row.try_get(6)?,
                    bin_counts,
                })
            })
            .collect::<Result<Vec<_>, sqlx::Error>>()
            .map_err(db(ACTION))
    }

    /// Decisions made in `[from_ms, until_ms)` that have a standing
    /// label, in the order they were made (time, then id), with that label.
    /// With `channel`, only that channel's decisions.
    ///
    /// Only feedback appended since `from_ms` is read: feedback is appended
    /// after the decision it is about, so every label on a decision of the
    /// range is among it (unless the clock was set back between the
    /// decision and its label).
    pub async fn labelled_decisions(
        &self,
        from_ms: i64,
        until_ms: i64,
        channel: Option<&str>,
    ) -> Result<Vec<LabelledDecision>, StoreError> {
        // SQLite takes the bare column `label` from the row that holds
        // max(seq) in each group: the latest live label.
        let mut query: QueryBuilder<Sqlite> = QueryBuilder::new(
            "WITH latest AS (SELECT decision_id, label, max(seq) AS seq FROM feedback \
             WHERE created_at_ms >= ",
        );
        query
            .push_bind(from_ms)
            .push(
                " AND decision_id IS NOT NULL AND revoked_at_ms IS NULL GROUP BY decision_id) \
                 SELECT d.created_at_ms, d.channel, d.p_junk, d.verdict, latest.label \
                 FROM latest JOIN decisions d ON d.id = latest.decision_id \
                 WHERE d.created_at_ms >= ",
            )
            .push_bind(from_ms)
            .push(" AND d.created_at_ms < ")
            .push_bind(until_ms);
        if let Some(channel) = channel {
            query.push(" AND d.channel = ").push_bind(channel);
        }
        query.push(" ORDER BY d.created_at_ms, d.id");
        query
            .build_query_as()
            .fetch_all(&self.pool)
            .await
            .map_err(db("reading labelled decisions for a report"))
    }

    /// Feedback rows appended in `[from_ms, until_ms)`, tallied by whether
    /// they came at or after `split_ms`, moderator, label, kind, whether
    /// revoked and whether about a decision. With `channel`, only feedback
    /// on that channel's decisions.
    pub async fn feedback_tallies(
        &self,
        from_ms: i64,
        split_ms: i64,
        until_ms: i64,
        channel: Option<&str>,
    ) -> Result<Vec<FeedbackTally>, StoreError> {
        let mut query: QueryBuilder<Sqlite> = QueryBuilder::new("SELECT (created_at_ms >= ");
        query
            .push_bind(split_ms)
            .push(
                ") AS is_current, moderator, label, kind, \
                 revoked_at_ms IS NOT NULL AS is_revoked, \
                 decision_id IS NOT NULL AS is_on_decision, count(*) AS count \
                 FROM feedback WHERE created_at_ms >= ",
            )
            .push_bind(from_ms)
            .push(" AND created_at_ms < ")
            .push_bind(until_ms);
        if let Some(channel) = channel {
            query
                .push(
                    " AND EXISTS (SELECT 1 FROM decisions d \
                     WHERE d.id = feedback.decision_id AND d.channel = ",
                )
                .push_bind(channel)
                .push(")");
        }
        query.push(" GROUP BY 1, 2, 3, 4, 5, 6 ORDER BY 1, 2, 3, 4, 5, 6");
        query
            .build_query_as()
            .fetch_all(&self.pool)
            .await
            .map_err(db("tallying feedback for a report"))
    }

    /// Checkpoints recorded in `[from_ms, until_ms)`, deleted files
    /// included, oldest first.
    pub async fn checkpoints_between(
        &self,
        from_ms: i64,
        until_ms: i64,
    ) -> Result<Vec<CheckpointRow>, StoreError> {
        sqlx::query_as(
            "SELECT id, created_at_ms, file_name, last_seq, examples_seen, reason, deleted_at_ms \
             FROM checkpoints WHERE created_at_ms >= ? AND created_at_ms < ? \
             ORDER BY created_at_ms, id",
        )
        .bind(from_ms)
        .bind(until_ms)
        .fetch_all(&self.pool)
        .await
        .map_err(db("listing checkpoints for a report"))
    }

    /// Model events recorded in `[from_ms, until_ms)`, oldest first.
    pub async fn model_events_between(
        &self,
        from_ms: i64,
        until_ms: i64,
    ) -> Result<Vec<ModelEventRow>, StoreError> {
        sqlx::query_as(
            "SELECT id, created_at_ms, kind, detail FROM model_events \
             WHERE created_at_ms >= ? AND created_at_ms < ? ORDER BY created_at_ms, id",
        )
        .bind(from_ms)
        .bind(until_ms)
        .fetch_all(&self.pool)
        .await
        .map_err(db("listing model events for a report"))
    }

    /// Appends feedback rows exactly as given, in one transaction, and
    /// returns how many. For importing a log and for filling a database for
    /// load tests: unlike [`Store::append_feedback`] it checks nothing
    /// beyond the schema (no duplicates, corrections or expiry), so the
    /// caller vouches that the rows make sense. An empty batch does
    /// nothing.
    pub async fn insert_feedback_rows(&self, rows: &[FeedbackImport]) -> Result<u64, StoreError> {
        const ACTION: &str = "importing feedback";
        if rows.is_empty() {
            return Ok(0);
        }
        let mut tx = self.begin_write(ACTION).await?;
        let mut written = 0;
        for chunk in rows.chunks(FEEDBACK_ROWS_PER_INSERT) {
            let mut insert: QueryBuilder<Sqlite> = QueryBuilder::new(
                "INSERT INTO feedback (created_at_ms, decision_id, message, label, moderator, \
                 kind, revoked_at_ms) ",
            );
            insert.push_values(chunk, |mut row, feedback| {
                row.push_bind(feedback.created_at_ms)
                    .push_bind(&feedback.decision_id)
                    .push_bind(&feedback.message_json)
                    .push_bind(feedback.label)
                    .push_bind(&feedback.moderator)
                    .push_bind(feedback.kind)
                    .push_bind(feedback.revoked_at_ms);
            });
            written += insert
                .build()
                .execute(&mut *tx)
                .await
                .map_err(db(ACTION))?
                .rows_affected();
        }
        tx.commit().await.map_err(db(ACTION))?;
        Ok(written)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::{decision, scratch};
    use crate::{NewCheckpoint, NewDecision};

    /// Hour 500000 since the epoch (2027-01-15T08:00:00Z), in ms.
    const H: i64 = 500_000 * HOUR_MS;

    fn scored(ms: i64, n: i64, channel: &str, p_junk: f64, verdict: Verdict) -> NewDecision {
        let mut d = decision(ms, n);
        d.channel = channel.to_owned();
        d.p_junk = p_junk;
        d.verdict = verdict;
        d.model_seq = FeedbackSeq(n);
        d
    }

    fn label(ms: i64, d: &NewDecision, label: Label, kind: FeedbackKind) -> FeedbackImport {
        FeedbackImport {
            created_at_ms: ms,
            decision_id: Some(d.id.clone()),
            message_json: "{}".to_owned(),
            label,
            moderator: "ana".to_owned(),
            kind,
            revoked_at_ms: None,
        }
    }

    #[tokio::test]
    async fn hour_tallies_cut_windows_exactly_and_count_bins() {
        let (_dir, store) = scratch().await;
        let rows = [
            scored(H - 1, 1, "mail", 0.5, Verdict::Review),
            scored(H, 2, "mail", 0.1, Verdict::Fine),
            scored(H + 10, 3, "mail", 0.5, Verdict::Review),
            scored(H + 20, 4, "mail", 0.9, Verdict::Junk),
            scored(H + 30, 5, "tickets", 0.95, Verdict::Junk),
            scored(H + HOUR_MS, 6, "mail", 0.2, Verdict::Fine),
            scored(H + HOUR_MS + 5, 7, "mail", 0.3, Verdict::Fine),
        ];
        store.insert_decisions(&rows).await.unwrap();
        // Edges 0.5: bins [0, 0.5) and [0.5, 1]; 0.5 itself is in the upper.
        let tallies = store
            .hour_tallies(H, H + HOUR_MS + 5, &[0.5], None)
            .await
            .unwrap();
        let brief: Vec<(i64, &str, Verdict, i64, Vec<i64>)> = tallies
            .iter()
            .map(|t| {
                (
                    t.hour - 500_000,
                    t.channel.as_str(),
                    t.verdict,
                    t.count,
                    t.bin_counts.clone(),
                )
            })
            .collect();
        assert_eq!(
            brief,
            [
                (0, "mail", Verdict::Fine, 1, vec![1, 0]),
                (0, "mail", Verdict::Junk, 1, vec![0, 1]),
                (0, "mail", Verdict::Review, 1, vec![0, 1]),
                (0, "tickets", Verdict::Junk, 1, vec![0, 1]),
                (1, "mail", Verdict::Fine, 1, vec![1, 0]),
            ]
        );
        assert_eq!(tallies[3].model_seq_min, FeedbackSeq(5));
        assert!((tallies[3].p_junk_sum - 0.95).abs() < 1e-12);

        let tickets = store
            .hour_tallies(H, H + 2 * HOUR_MS, &[0.25, 0.5, 0.75], Some("tickets"))
            .await
            .unwrap();
        assert_eq!(tickets.len(), 1);
        assert_eq!(tickets[0].bin_counts, [0, 0, 0, 1]);
        store.close().await;
    }

    #[tokio::test]
    async fn hour_tallies_group_in_index_order_without_sorting() {
        let (_dir, store) = scratch().await;
        // The query as hour_tallies builds it, with one bin edge.
        let plan: Vec<(i64, i64, i64, String)> = sqlx::query_as(
            "EXPLAIN QUERY PLAN SELECT created_at_ms / 3600000 AS hour, channel, verdict, \
             count(*), sum(p_junk), min(model_seq), max(model_seq), sum(p_junk < ?) \
             FROM decisions WHERE created_at_ms / 3600000 >= ? AND created_at_ms / 3600000 <= ? \
             AND created_at_ms >= ? AND created_at_ms < ? \
             GROUP BY created_at_ms / 3600000, channel, verdict \
             ORDER BY created_at_ms / 3600000, channel, verdict",
        )
        .bind(0.5)
        .bind(0)
        .bind(1)
        .bind(0)
        .bind(1)
        .fetch_all(&store.pool)
        .await
        .unwrap();
        let plan: Vec<&str> = plan.iter().map(|row| row.3.as_str()).collect();
        assert!(
            plan.iter()
                .any(|step| step.contains("COVERING INDEX decisions_by_hour_for_reports")),
            "{plan:?}"
        );
        assert!(
            !plan.iter().any(|step| step.contains("TEMP B-TREE")),
            "{plan:?}"
        );
        store.close().await;
    }

    #[tokio::test]
    async fn labelled_decisions_take_the_latest_live_label() {
        let (_dir, store) = scratch().await;
        let a = scored(H + 1, 1, "mail", 0.2, Verdict::Fine);
        let b = scored(H + 2, 2, "mail", 0.95, Verdict::Junk);
        let c = scored(H + 3, 3, "tickets", 0.5, Verdict::Review);
        let late = scored(H + 10, 4, "mail", 0.5, Verdict::Review);
        store
            .insert_decisions(&[a.clone(), b.clone(), c.clone(), late.clone()])
            .await
            .unwrap();
        let mut revoked = label(H + 20, &c, Label::Junk, FeedbackKind::Label);
        revoked.revoked_at_ms = Some(H + 30);
        let rows = [
            label(H + 11, &a, Label::Fine, FeedbackKind::Label),
            label(H + 12, &b, Label::Fine, FeedbackKind::Label),
            // A correction overrides the first label.
            label(H + 13, &b, Label::Junk, FeedbackKind::Correction),
            revoked,
            label(H + 14, &late, Label::Junk, FeedbackKind::Label),
            FeedbackImport {
                decision_id: None,
                moderator: "ben".to_owned(),
                ..label(H + 15, &a, Label::Junk, FeedbackKind::Label)
            },
        ];
        assert_eq!(store.insert_feedback_rows(&rows).await.unwrap(), 6);

        let labelled = store.labelled_decisions(H, H + 10, None).await.unwrap();
        let brief: Vec<(i64, Label)> = labelled
            .iter()
            .map(|row| (row.created_at_ms - H, row.label))
            .collect();
        assert_eq!(brief, [(1, Label::Fine), (2, Label::Junk)]);
        assert_eq!(labelled[1].verdict, Verdict::Junk);
        assert!(
            store
                .labelled_decisions(H, H + 11, Some("tickets"))
                .await
                .unwrap()
                .is_empty()
        );

        let tallies = store
            .feedback_tallies(H + 11, H + 13, H + 100, None)
            .await
            .unwrap();
        let total: i64 = tallies.iter().map(|t| t.count).sum();
        assert_eq!(total, 6);
        let current: Vec<&FeedbackTally> = tallies.iter().filter(|t| t.is_current).collect();
        assert_eq!(current.iter().map(|t| t.count).sum::<i64>(), 4);
        assert!(
            current
                .iter()
                .any(|t| t.is_revoked && t.moderator == "ana" && t.label == Label::Junk)
        );
        assert!(
            current
                .iter()
                .any(|t| !t.is_on_decision && t.moderator == "ben")
        );
        assert!(
            current
                .iter()
                .any(|t| t.kind == FeedbackKind::Correction && t.count == 1)
        );
        let on_tickets = store
            .feedback_tallies(H, H + 13, H + 100, Some("tickets"))
            .await
            .unwrap();
        assert_eq!(on_tickets.len(), 1);
        assert!(on_tickets[0].is_revoked);
        store.close().await;
    }

    #[tokio::test]
    async fn history_between_two_times() {
        let (_dir, store) = scratch().await;
        for (n, ms) in [(1, H - 1), (2, H), (3, H + 5)] {
            store
                .record_checkpoint(&NewCheckpoint {
                    created_at_ms: ms,
                    file_name: format!("model-{n}.ckpt"),
                    last_seq: FeedbackSeq(n),
                    examples_seen: n,
                    reason: "periodic".to_owned(),
                })
                .await
                .unwrap();
        }
        store.mark_checkpoint_deleted(2, H + 1).await.unwrap();
        store
            .record_model_event("rollback", r#"{"to":1}"#, H + 4)
            .await
            .unwrap();
        let checkpoints = store.checkpoints_between(H, H + 5).await.unwrap();
        assert_eq!(checkpoints.len(), 1);
        assert_eq!(checkpoints[0].deleted_at_ms, Some(H + 1));
        let events = store.model_events_between(H, H + 5).await.unwrap();
        assert_eq!(events.len(), 1);
        assert_eq!(events[0].kind, "rollback");
        assert!(
            store
                .model_events_between(H, H + 4)
                .await
                .unwrap()
                .is_empty()
        );
        store.close().await;
    }
}
