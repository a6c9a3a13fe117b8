//! The review queue: decisions waiting for a moderator's verdict.
//!
//! The server's review page reads it with [`Store::review_queue`] and counts
//! it with [`Store::review_queue_len`]. A decision is waiting when
//!
//! * its verdict is `review` (or, for [`QueueScope::Channel`], whatever its
//!   verdict, as long as it came in on that channel),
//! * it has no live (unrevoked) feedback: a rollback that revokes a label
//!   puts the decision back in the queue, and
//! * its input is still kept (`expires_at_ms` after `now_ms`): past the
//!   feedback window a label could not be learnt from, so the decision
//!   leaves the queue.
//!
//! Pages are keyed like the audit log's listings: a cursor holds the sort
//! key of the last row of the page before, and the next page starts
//! strictly after it, so rows labelled in between do not shift the pages.
//! The two orders are
//!
//! | order | sort key | index used |
//! | --- | --- | --- |
//! | [`QueueOrder::Newest`] | `created_at_ms DESC, id DESC` | `decisions_by_verdict` for [`QueueScope::Review`], `decisions_by_channel` for [`QueueScope::Channel`]; no sort in memory |
//! | [`QueueOrder::Uncertain`] | `abs(p_junk - 0.5)`, then newest first | none: every waiting row is read and sorted in memory |
//!
//! Missing indexes, noted here rather than added (the schema belongs to the
//! migrations): the uncertain order would read in order from an expression
//! index `ON decisions (abs(p_junk - 0.5), created_at_ms, id) WHERE verdict
//! = 'review'`, and the review queue of one channel narrows on one column
//! only, since no index covers `(channel, verdict, created_at_ms, id)`.
//! Both cost time linear in the rows the filter keeps, which stays small
//! while moderators keep up with the review band. The test at the foot of
//! this module reads SQLite's query plans, so a schema change that alters
//! them shows up there.

use sqlx::{QueryBuilder, Sqlite};

use crate::Store;
use crate::decisions::{DECISION_COLUMNS, DecisionRow, MAX_PAGE_LIMIT};
use crate::error::{StoreError, db};
use crate::types::DecisionId;

/// Which decisions the queue holds.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum QueueScope {
    /// Decisions with the verdict `review`, from every channel or one.
    Review {
        /// Only this channel, if given.
        channel: Option<String>,
    },
    /// Every decision of one channel, whatever its verdict.
    Channel {
        /// The channel.
        channel: String,
    },
}

/// The order of the queue.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum QueueOrder {
    /// Newest decision first.
    Newest,
    /// Most uncertain first: `p_junk` closest to 0.5, then newest first.
    Uncertain,
}

/// Which page of the queue to read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct QueueFilter {
    /// Which decisions.
    pub scope: QueueScope,
    /// In which order.
    pub order: QueueOrder,
    /// Rows per page, `1..=`[`MAX_PAGE_LIMIT`].
    pub limit: u32,
    /// Where to continue: a [`QueuePage::next_cursor`] from the same order.
    /// `None` starts at the top.
    pub cursor: Option<String>,
    /// The time against which inputs count as expired.
    pub now_ms: i64,
}

/// One page of the queue.
#[derive(Debug, Clone, PartialEq)]
pub struct QueuePage {
    /// At most `limit` rows; `input_expires_at_ms` is always set.
    pub rows: Vec<DecisionRow>,
    /// Pass this as [`QueueFilter::cursor`] for the next page; `None` on the
    /// last page. Opaque to callers.
    pub next_cursor: Option<String>,
}

/// Where a page starts: the sort key of the row before it.
#[derive(Debug, Clone, PartialEq)]
enum Cursor {
    Newest {
        created_at_ms: i64,
        id: String,
    },
    Uncertain {
        /// `abs(p_junk - 0.5)`, kept as its bits so that it reads back
        /// exactly.
        distance: f64,
        created_at_ms: i64,
        id: String,
    },
}

/// How far `p_junk` is from 0.5, computed as the SQL `abs(p_junk - 0.5)`
/// computes it (one rounded subtraction, an exact absolute value), so a
/// cursor compares equal to its own row.
fn distance_from_even(p_junk: f64) -> f64 {
    (p_junk - 0.5).abs()
}

impl Cursor {
    fn after(order: QueueOrder, row: &DecisionRow) -> Cursor {
        match order {
            QueueOrder::Newest => Cursor::Newest {
                created_at_ms: row.created_at_ms,
                id: row.id.as_str().to_owned(),
            },
            QueueOrder::Uncertain => Cursor::Uncertain {
                distance: distance_from_even(row.p_junk),
                created_at_ms: row.created_at_ms,
                id: row.id.as_str().to_owned(),
            },
        }
    }

    /// `n.<created_at_ms>.<id>` or `u.<distance bits in hex>.<created_at_ms>.<id>`.
    fn to_text(&self) -> String {
        match self {
            Cursor::Newest { created_at_ms, id } => format!("n.{created_at_ms}.{id}"),
            Cursor::Uncertain {
                distance,
                created_at_ms,
                id,
            } => {
                let bits = distance.to_bits();
                format!("u.{bits:016x}.{created_at_ms}.{id}")
            }
        }
    }

    /// The cursor in `text`, if it is one made for `order`.
    fn parse(order: QueueOrder, text: &str) -> Option<Cursor> {
        let parts: Vec<&str> = text.split('.').collect();
        let cursor = match (order, parts.as_slice()) {
            (QueueOrder::Newest, ["n", created_at_ms, id]) => Cursor::Newest {
                created_at_ms: created_at_ms.parse().ok()?,
                id: (*id).to_owned(),
            },
            (QueueOrder::Uncertain, ["u", bits, created_at_ms, id]) => {
                if bits.len() != 16 {
                    return None;
                }
                let distance = f64::from_bits(u64::from_str_radix(bits, 16).ok()?);
                if !(0.0..=0.5).contains(&distance) {
                    return None;
                }
                Cursor::Uncertain {
                    distance,
                    created_at_ms: created_at_ms.parse().ok()?,
                    id: (*id).to_owned(),
                }
            }
            _ => return None,
        };
        let (Cursor::Newest { id, .. } | Cursor::Uncertain { id, .. }) = &cursor;
        DecisionId::is_well_formed(id).then_some(cursor)
    }
}

/// The `FROM` and `WHERE` shared by the page and the count. `CROSS JOIN`
/// keeps `decisions` as the outer loop (SQLite does not reorder it), so
/// the newest-first order is read straight from a decisions index instead
/// of scanning the inputs and sorting.
fn push_waiting<'a>(query: &mut QueryBuilder<'a, Sqlite>, scope: &'a QueueScope, now_ms: i64) {
    query.push(
        " FROM decisions d CROSS JOIN decision_inputs i ON i.decision_id = d.id \
         WHERE NOT EXISTS (SELECT 1 FROM feedback f \
         WHERE f.decision_id = d.id AND f.revoked_at_ms IS NULL)",
    );
    query.push(" AND i.expires_at_ms > ").push_bind(now_ms);
    match scope {
        QueueScope::Review { channel } => {
            query.push(" AND d.verdict = 'review'");
            if let Some(channel) = channel {
                query.push(" AND d.channel = ").push_bind(channel);
            }
        }
        QueueScope::Channel { channel } => {
            query.push(" AND d.channel = ").push_bind(channel);
        }
    }
}

/// The page query, after `prefix` (empty, or `EXPLAIN QUERY PLAN` in tests).
fn page_query<'a>(
    prefix: &str,
    filter: &'a QueueFilter,
    after: Option<&'a Cursor>,
) -> QueryBuilder<'a, Sqlite> {
    let mut query: QueryBuilder<Sqlite> =
        QueryBuilder::new(format!("{prefix}SELECT {DECISION_COLUMNS}"));
    push_waiting(&mut query, &filter.scope, filter.now_ms);
    match after {
        None => {}
        Some(Cursor::Newest { created_at_ms, id }) => {
            query
                .push(" AND (d.created_at_ms, d.id) < (")
                .push_bind(*created_at_ms)
                .push(", ")
                .push_bind(id.as_str())
                .push(")");
        }
        Some(Cursor::Uncertain {
            distance,
            created_at_ms,
            id,
        }) => {
            query
                .push(" AND (abs(d.p_junk - 0.5) > ")
                .push_bind(*distance)
                .push(" OR (abs(d.p_junk - 0.5) = ")
                .push_bind(*distance)
                .push(" AND (d.created_at_ms, d.id) < (")
                .push_bind(*created_at_ms)
                .push(", ")
                .push_bind(id.as_str())
                .push(")))");
        }
    }
    match filter.order {
        QueueOrder::Newest => query.push(" ORDER BY d.created_at_ms DESC, d.id DESC"),
        QueueOrder::Uncertain => {
            query.push(" ORDER BY abs(d.p_junk - 0.5) ASC, d.created_at_ms DESC, d.id DESC")
        }
    };
    // One row more than asked tells whether another page follows.
    query.push(" LIMIT ").push_bind(i64::from(filter.limit) + 1);
    query
}

impl Store {
    /// One page of the decisions waiting for a moderator; see the module
    /// docs for which ones and in what order.
    pub async fn review_queue(&self, filter: &QueueFilter) -> Result<QueuePage, StoreError> {
        if !(1..=MAX_PAGE_LIMIT).contains(&filter.limit) {
            return Err(StoreError::BadLimit {
                limit: filter.limit,
                max: MAX_PAGE_LIMIT,
            });
        }
        let after =
            match &filter.cursor {
                Some(text) => Some(Cursor::parse(filter.order, text).ok_or_else(|| {
                    StoreError::BadCursor {
                        cursor: text.clone(),
                    }
                })?),
                None => None,
            };
        let mut rows: Vec<DecisionRow> = page_query("", filter, after.as_ref())
            .build_query_as()
            .fetch_all(&self.pool)
            .await
            .map_err(db("reading the review queue"))?;
        let limit = filter.limit as usize;
        let next_cursor = if rows.len() > limit {
            rows.truncate(limit);
            rows.last()
                .map(|row| Cursor::after(filter.order, row).to_text())
        } else {
            None
        };
        Ok(QueuePage { rows, next_cursor })
    }

    /// How many decisions are waiting in `scope` at `now_ms`.
    pub async fn review_queue_len(
        &self,
        scope: &QueueScope,
        now_ms: i64,
    ) -> Result<u64, StoreError> {
        let mut query: QueryBuilder<Sqlite> = QueryBuilder::new("SELECT count(*)");
        push_waiting(&mut query, scope, now_ms);
        let (count,): (i64,) = query
            .build_query_as()
            .fetch_one(&self.pool)
            .await
            .map_err(db("counting the review queue"))?;
        Ok(u64::try_from(count).unwrap_or(0))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::{decision, scratch, ulid};
    use crate::{
        DecisionInput, FeedbackSeq, FeedbackTarget, Label, NewDecision, NewFeedback, Verdict,
    };

    /// A decision at `ms` with this verdict, channel and `p_junk`, whose
    /// input expires at 10_000.
    fn waiting(ms: i64, n: i64, verdict: Verdict, channel: &str, p_junk: f64) -> NewDecision {
        NewDecision {
            verdict,
            channel: channel.to_owned(),
            p_junk,
            input: Some(DecisionInput {
                message_json: format!(r#"{{"body":"message {n}"}}"#),
                expires_at_ms: 10_000,
            }),
            ..decision(ms, n)
        }
    }

    fn review(channel: Option<&str>) -> QueueScope {
        QueueScope::Review {
            channel: channel.map(str::to_owned),
        }
    }

    fn filter(scope: QueueScope, order: QueueOrder, limit: u32) -> QueueFilter {
        QueueFilter {
            scope,
            order,
            limit,
            cursor: None,
            now_ms: 5_000,
        }
    }

    async fn label(store: &Store, id: &DecisionId, label: Label) -> FeedbackSeq {
        let new = NewFeedback {
            target: FeedbackTarget::Decision(id.clone()),
            label,
            moderator: "mod-ana".to_owned(),
            note: None,
            idempotency_key: None,
        };
        store.append_feedback(&new, 2_000).await.unwrap().seq()
    }

    /// The ids of every page, following the cursors.
    async fn all_pages(store: &Store, mut filter: QueueFilter) -> Vec<Vec<DecisionId>> {
        let mut pages = Vec::new();
        loop {
            let page = store.review_queue(&filter).await.unwrap();
            pages.push(page.rows.iter().map(|row| row.id.clone()).collect());
            match page.next_cursor {
                Some(cursor) => filter.cursor = Some(cursor),
                None => return pages,
            }
        }
    }

    #[tokio::test]
    async fn holds_review_decisions_without_live_feedback_and_with_a_kept_input() {
        let (_dir, store) = scratch().await;
        let labelled = waiting(1_001, 1, Verdict::Review, "mail", 0.5);
        let revoked = waiting(1_002, 2, Verdict::Review, "mail", 0.5);
        let plain = waiting(1_003, 3, Verdict::Review, "tickets", 0.5);
        let junk = waiting(1_004, 4, Verdict::Junk, "mail", 0.95);
        let expired = NewDecision {
            input: Some(DecisionInput {
                message_json: r#"{"body":"old"}"#.to_owned(),
                expires_at_ms: 5_000,
            }),
            ..waiting(1_005, 5, Verdict::Review, "mail", 0.5)
        };
        let never_kept = NewDecision {
            input: None,
            ..waiting(1_006, 6, Verdict::Review, "mail", 0.5)
        };
        store
            .insert_decisions(&[
                labelled.clone(),
                revoked.clone(),
                plain.clone(),
                junk,
                expired,
                never_kept,
            ])
            .await
            .unwrap();
        label(&store, &labelled.id, Label::Junk).await;
        let seq = label(&store, &revoked.id, Label::Fine).await;
        assert!(store.revoke_feedback(seq, 3_000).await.unwrap());

        let page = store
            .review_queue(&filter(review(None), QueueOrder::Newest, 50))
            .await
            .unwrap();
        let ids: Vec<&DecisionId> = page.rows.iter().map(|row| &row.id).collect();
        // Expired at exactly expires_at_ms, as feedback is refused then.
        assert_eq!(ids, [&plain.id, &revoked.id]);
        assert_eq!(page.next_cursor, None);
        assert_eq!(page.rows[0].input_expires_at_ms, Some(10_000));
        assert_eq!(
            store.review_queue_len(&review(None), 5_000).await.unwrap(),
            2
        );
        assert_eq!(
            store
                .review_queue_len(&review(Some("tickets")), 5_000)
                .await
                .unwrap(),
            1
        );
        // Once the window has passed, nothing is left to act on.
        assert_eq!(
            store.review_queue_len(&review(None), 10_000).await.unwrap(),
            0
        );
        store.close().await;
    }

    #[tokio::test]
    async fn a_channel_scope_takes_every_verdict_of_that_channel_only() {
        let (_dir, store) = scratch().await;
        let rows = [
            waiting(1_001, 1, Verdict::Junk, "comments", 0.97),
            waiting(1_002, 2, Verdict::Fine, "comments", 0.03),
            waiting(1_003, 3, Verdict::Review, "comments", 0.6),
            waiting(1_004, 4, Verdict::Review, "mail", 0.6),
        ];
        store.insert_decisions(&rows).await.unwrap();
        label(&store, &rows[1].id, Label::Fine).await;
        let scope = QueueScope::Channel {
            channel: "comments".to_owned(),
        };
        let page = store
            .review_queue(&filter(scope.clone(), QueueOrder::Newest, 50))
            .await
            .unwrap();
        let ids: Vec<&DecisionId> = page.rows.iter().map(|row| &row.id).collect();
        assert_eq!(ids, [&rows[2].id, &rows[0].id]);
        assert_eq!(store.review_queue_len(&scope, 5_000).await.unwrap(), 2);
        store.close().await;
    }

    #[tokio::test]
    async fn uncertain_order_puts_p_junk_nearest_one_half_first_then_newest() {
        let (_dir, store) = scratch().await;
        // Equal distances from 0.5 on either side tie, and the tie goes to
        // the newer decision. 0.25 and 0.75 are exact in binary, so their
        // distances are exactly equal.
        let p = [0.75, 0.5, 0.41, 0.25, 0.88, 0.5];
        let rows: Vec<NewDecision> = p
            .iter()
            .enumerate()
            .map(|(n, &p_junk)| {
                let n = n as i64;
                waiting(1_000 + n, n, Verdict::Review, "mail", p_junk)
            })
            .collect();
        store.insert_decisions(&rows).await.unwrap();
        let page = store
            .review_queue(&filter(review(None), QueueOrder::Uncertain, 50))
            .await
            .unwrap();
        let got: Vec<f64> = page.rows.iter().map(|row| row.p_junk).collect();
        assert_eq!(got, [0.5, 0.5, 0.41, 0.25, 0.75, 0.88]);
        assert_eq!(page.rows[0].id, rows[5].id, "newer of the two at 0.5");
        assert_eq!(page.rows[3].id, rows[3].id, "0.25 is newer than 0.75");
        store.close().await;
    }

    #[tokio::test]
    async fn pages_cover_the_queue_once_in_either_order() {
        let (_dir, store) = scratch().await;
        // Several decisions share a millisecond and several share p_junk,
        // so the cursor's tie-breakers are exercised.
        let rows: Vec<NewDecision> = (0..23)
            .map(|n| {
                let p_junk = [0.45, 0.5, 0.62, 0.5, 0.38][(n % 5) as usize];
                waiting(1_000 + n / 3, n, Verdict::Review, "mail", p_junk)
            })
            .collect();
        store.insert_decisions(&rows).await.unwrap();
        for order in [QueueOrder::Newest, QueueOrder::Uncertain] {
            let whole = store
                .review_queue(&filter(review(None), order, 1000))
                .await
                .unwrap();
            let whole: Vec<DecisionId> = whole.rows.into_iter().map(|row| row.id).collect();
            let pages = all_pages(&store, filter(review(None), order, 4)).await;
            assert_eq!(pages.len(), 6, "{order:?}");
            assert!(pages[..5].iter().all(|page| page.len() == 4));
            assert_eq!(pages.concat(), whole, "{order:?}");
        }
        // A limit that divides the queue exactly ends on a full page whose
        // cursor is None.
        let exact = store
            .review_queue(&filter(review(None), QueueOrder::Newest, 23))
            .await
            .unwrap();
        assert_eq!((exact.rows.len(), exact.next_cursor), (23, None));
        store.close().await;
    }

    #[tokio::test]
    async fn labelling_between_pages_skips_nothing_that_still_waits() {
        let (_dir, store) = scratch().await;
        let rows: Vec<NewDecision> = (0..6)
            .map(|n| waiting(1_000 + n, n, Verdict::Review, "mail", 0.5))
            .collect();
        store.insert_decisions(&rows).await.unwrap();
        let mut first = filter(review(None), QueueOrder::Newest, 2);
        let page = store.review_queue(&first).await.unwrap();
        // The moderator labels the first page, then asks for the next one.
        for row in &page.rows {
            label(&store, &row.id, Label::Fine).await;
        }
        first.cursor = page.next_cursor;
        let next = store.review_queue(&first).await.unwrap();
        let ids: Vec<&DecisionId> = next.rows.iter().map(|row| &row.id).collect();
        assert_eq!(ids, [&rows[3].id, &rows[2].id]);
        store.close().await;
    }

    #[tokio::test]
    async fn foreign_or_malformed_cursors_and_bad_limits_are_refused() {
        let (_dir, store) = scratch().await;
        let rows: Vec<NewDecision> = (0..3)
            .map(|n| waiting(1_000 + n, n, Verdict::Review, "mail", 0.3))
            .collect();
        store.insert_decisions(&rows).await.unwrap();
        let newest = store
            .review_queue(&filter(review(None), QueueOrder::Newest, 1))
            .await
            .unwrap()
            .next_cursor
            .unwrap();
        let id = ulid(1_000, 1);
        let cases = [
            (QueueOrder::Uncertain, newest.clone()),
            (QueueOrder::Newest, "n.1000".to_owned()),
            (QueueOrder::Newest, format!("n.x.{id}")),
            (QueueOrder::Newest, "n.1000.not-a-ulid".to_owned()),
            (QueueOrder::Uncertain, format!("u.3fc0.1000.{id}")),
            // The bits of 0.75: no p_junk in [0, 1] is that far from 0.5.
            (
                QueueOrder::Uncertain,
                format!("u.3fe8000000000000.1000.{id}"),
            ),
            (
                QueueOrder::Uncertain,
                format!("u.7ff8000000000000.1000.{id}"),
            ),
        ];
        for (order, cursor) in cases {
            let mut bad = filter(review(None), order, 10);
            bad.cursor = Some(cursor.clone());
            let err = store.review_queue(&bad).await.unwrap_err();
            assert!(
                matches!(&err, StoreError::BadCursor { cursor: got } if *got == cursor),
                "{cursor}: {err:?}"
            );
        }
        for limit in [0, MAX_PAGE_LIMIT + 1] {
            let err = store
                .review_queue(&filter(review(None), QueueOrder::Newest, limit))
                .await
                .unwrap_err();
            assert!(matches!(err, StoreError::BadLimit { .. }), "{err:?}");
        }
        store.close().await;
    }

    #[test]
    fn cursors_read_back_exactly() {
        let id = ulid(1_700_000_000_000, 9).as_str().to_owned();
        let uncertain = Cursor::Uncertain {
            // 0.6 - 0.5 is not 0.1 in binary; its exact bits must survive.
            distance: distance_from_even(0.6),
            created_at_ms: -3,
            id: id.clone(),
        };
        let text = uncertain.to_text();
        assert_eq!(Cursor::parse(QueueOrder::Uncertain, &text), Some(uncertain));
        let newest = Cursor::Newest {
            created_at_ms: 1_700_000_000_000,
            id,
        };
        assert_eq!(
            Cursor::parse(QueueOrder::Newest, &newest.to_text()),
            Some(newest)
        );
    }

    /// SQLite's plan for a page, one detail line per step.
    async fn plan(store: &Store, filter: &QueueFilter) -> Vec<String> {
        let rows: Vec<(i64, i64, i64, String)> = page_query("EXPLAIN QUERY PLAN ", filter, None)
            .build_query_as()
            .fetch_all(&store.pool)
            .await
            .unwrap();
        rows.into_iter().map(|row| row.3).collect()
    }

    #[tokio::test]
    async fn query_plans_use_the_indexes_the_module_docs_name() {
        let (_dir, store) = scratch().await;
        // Plan texts as SQLite's EXPLAIN QUERY PLAN documentation shows
        // them ("SEARCH ... USING INDEX", "USE TEMP B-TREE FOR ORDER BY").
        let newest = plan(&store, &filter(review(None), QueueOrder::Newest, 50)).await;
        let text = newest.join("\n");
        assert!(
            text.contains("SEARCH d USING INDEX decisions_by_verdict (verdict=?)"),
            "{text}"
        );
        assert!(text.contains("USING INDEX feedback_by_decision"), "{text}");
        assert!(!text.contains("TEMP B-TREE"), "{text}");

        let channel = QueueScope::Channel {
            channel: "mail".to_owned(),
        };
        let text = plan(&store, &filter(channel, QueueOrder::Newest, 50))
            .await
            .join("\n");
        assert!(
            text.contains("SEARCH d USING INDEX decisions_by_channel (channel=?)"),
            "{text}"
        );
        assert!(!text.contains("TEMP B-TREE"), "{text}");

        // The missing expression index: the uncertain order sorts in memory.
        let text = plan(&store, &filter(review(None), QueueOrder::Uncertain, 50))
            .await
            .join("\n");
        assert!(text.contains("USE TEMP B-TREE FOR ORDER BY"), "{text}");
        store.close().await;
    }
}
