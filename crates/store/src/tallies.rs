//! Feature tallies: which readable feature names occurred in how many
//! sampled messages, per time bucket (an hour by default) and channel, and
//! how they moved between two windows.
//!
//! The server's tally task counts a sample of scored messages in bounded
//! summaries and hands each (bucket, channel) summary's top names to
//! [`Store::record_feature_tallies`] every flush period and at shutdown.
//! Each daemon run writes its own *part* of a bucket (keyed by a run id)
//! and replaces that part on every flush, so repeated flushes do not count
//! twice and a restart within the hour adds a part rather than erasing the
//! earlier one. Reports call [`Store::feature_tally`], which adds up every
//! part of the buckets in a window, and [`feature_drift`], a pure function
//! of two such tallies.
//!
//! # Counts and their bounds
//!
//! A part lists at most a configured number of names, each with `messages`
//! (at least the true number of sampled messages that contained it) and
//! `overcount` (`messages - overcount` is at most the true number): the
//! bounds of the Space-Saving summary the server keeps. A part also says
//! how many messages a name it does not list can have contained at most
//! (`unlisted_max`). Summed over a window:
//!
//! ```text
//! messages - overcount  <=  true count  <=  messages + unlisted_max
//! ```
//!
//! where `unlisted_max` of a [`FeatureCount`] sums the parts that do not
//! list the name. `contribution_sum` adds the name's contribution
//! (weight x value, from the model that scored the message) over exactly
//! `messages - overcount` of those messages.
//!
//! # `feature_drift`
//!
//! Lives here, beside the tallies it reads, as a pure function: no
//! database, clock or randomness. See its docs for the rule.

use std::collections::BTreeMap;

use serde::Serialize;
use sqlx::{FromRow, QueryBuilder, Sqlite};

use crate::Store;
use crate::error::{StoreError, db};

/// Feature rows per `INSERT` statement (8 bound values a row).
const ROWS_PER_INSERT: usize = 256;

/// One name in one part, as the tally task writes it.
#[derive(Debug, Clone, PartialEq)]
pub struct PartFeature {
    /// The readable name, not empty.
    pub feature: String,
    /// The hashed slot the name lands in.
    pub slot: u32,
    /// Sampled messages counted as containing it; at least 1.
    pub messages: u64,
    /// Below `messages`; see the module docs.
    pub overcount: u64,
    /// Sum of its contributions over `messages - overcount` messages.
    pub contribution_sum: f64,
}

/// One run's count of one (bucket, channel).
#[derive(Debug, Clone, PartialEq)]
pub struct TallyPart {
    /// Start of the bucket the decisions' `created_at_ms` fall in.
    pub bucket_start_ms: i64,
    /// The decisions' channel, not empty.
    pub channel: String,
    /// The daemon run that counted it, not empty.
    pub run_id: String,
    /// Messages tallied in this part.
    pub sampled_messages: u64,
    /// The most messages an unlisted name can have contained.
    pub unlisted_max: u64,
    /// When this part was written.
    pub updated_at_ms: i64,
    /// The listed names (the summary's top ones), each name once.
    pub features: Vec<PartFeature>,
}

/// One name's counts over a window, every part added up.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FeatureCount {
    /// The readable name.
    pub feature: String,
    /// The hashed slot it lands in.
    pub slot: u32,
    /// Sampled messages counted as containing it (an over-estimate).
    pub messages: u64,
    /// `messages - overcount` is at most the true number.
    pub overcount: u64,
    /// Added to `messages`: the most the parts that do not list it can
    /// have missed.
    pub unlisted_max: u64,
    /// Sum of its contributions over `messages - overcount` messages.
    pub contribution_sum: f64,
}

impl FeatureCount {
    /// Messages certainly counted: `messages - overcount`.
    pub fn guaranteed(&self) -> u64 {
        self.messages.saturating_sub(self.overcount)
    }
}

/// The tallies of a window `[from_ms, to_ms)`, for one channel or all.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FeatureTally {
    /// The channel, or `None` for every channel together.
    pub channel: Option<String>,
    /// Buckets starting at or after this are included.
    pub from_ms: i64,
    /// ... and before this.
    pub to_ms: i64,
    /// Messages tallied in the window: the denominator of shares.
    pub sampled_messages: u64,
    /// Names listed anywhere in the window, most messages first (then by
    /// name).
    pub features: Vec<FeatureCount>,
}

impl FeatureTally {
    /// The share of sampled messages that contained `count`'s name, or
    /// `None` when nothing was sampled.
    pub fn share(&self, count: &FeatureCount) -> Option<f64> {
        if self.sampled_messages == 0 {
            return None;
        }
        Some(count.messages as f64 / self.sampled_messages as f64)
    }
}

#[derive(FromRow)]
struct CountRow {
    feature: String,
    slot: i64,
    messages: i64,
    overcount: i64,
    listed_unlisted_max: i64,
    contribution_sum: f64,
}

fn to_i64(value: u64) -> i64 {
    i64::try_from(value).unwrap_or(i64::MAX)
}

fn to_u64(value: i64) -> u64 {
    u64::try_from(value).unwrap_or(0)
}

impl Store {
    /// Writes parts of feature tallies in one transaction, each replacing
    /// what its run wrote for its bucket before (the part row is upserted,
    /// its names rewritten).
    pub async fn record_feature_tallies(&self, parts: &[TallyPart]) -> Result<(), StoreError> {
        const ACTION: &str = "recording feature tallies";
        if parts.is_empty() {
            return Ok(());
        }
        let mut tx = self.begin_write(ACTION).await?;
        for part in parts {
            sqlx::query(
                "INSERT INTO feature_tally_parts \
                 (bucket_start_ms, channel, run_id, sampled_messages, unlisted_max, updated_at_ms) \
                 VALUES (?, ?, ?, ?, ?, ?) \
                 ON CONFLICT (bucket_start_ms, channel, run_id) DO UPDATE SET \
                 sampled_messages = excluded.sampled_messages, \
                 unlisted_max = excluded.unlisted_max, \
                 updated_at_ms = excluded.updated_at_ms",
            )
            .bind(part.bucket_start_ms)
            .bind(&part.channel)
            .bind(&part.run_id)
            .bind(to_i64(part.sampled_messages))
            .bind(to_i64(part.unlisted_max))
            .bind(part.updated_at_ms)
            .execute(&mut *tx)
            .await
            .map_err(db(ACTION))?;
            sqlx::query(
                "DELETE FROM feature_tallies \
                 WHERE bucket_start_ms = ? AND channel = ? AND run_id = ?",
            )
            .bind(part.bucket_start_ms)
            .bind(&part.channel)
            .bind(&part.run_id)
            .execute(&mut *tx)
            .await
            .map_err(db(ACTION))?;
            for chunk in part.features.chunks(ROWS_PER_INSERT) {
                let mut insert: QueryBuilder<Sqlite> = QueryBuilder::new(
                    "INSERT INTO feature_tallies (bucket_start_ms, channel, run_id, feature, \
                     slot, messages, overcount, contribution_sum) ",
                );
                insert.push_values(chunk, |mut row, feature| {
                    row.push_bind(part.bucket_start_ms)
                        .push_bind(&part.channel)
                        .push_bind(&part.run_id)
                        .push_bind(&feature.feature)
                        .push_bind(i64::from(feature.slot))
                        .push_bind(to_i64(feature.messages))
                        .push_bind(to_i64(feature.overcount))
                        .push_bind(feature.contribution_sum);
                });
                insert.build().execute(&mut *tx).await.map_err(db(ACTION))?;
            }
        }
        tx.commit().await.map_err(db(ACTION))
    }

    /// The tallies of the buckets starting in `[from_ms, to_ms)`, for
    /// `channel` or for every channel (`None`), every run's part added up.
    /// See the module docs for what the counts bound.
    pub async fn feature_tally(
        &self,
        channel: Option<&str>,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<FeatureTally, StoreError> {
        const ACTION: &str = "reading feature tallies";
        let (totals_sql, counts_sql) = tally_queries(channel.is_some());
        let (sampled, unlisted_total): (i64, i64) = sqlx::query_as(&totals_sql)
            .bind(from_ms)
            .bind(to_ms)
            .bind(channel)
            .fetch_one(&self.pool)
            .await
            .map_err(db(ACTION))?;
        let rows: Vec<CountRow> = sqlx::query_as(&counts_sql)
            .bind(from_ms)
            .bind(to_ms)
            .bind(channel)
            .fetch_all(&self.pool)
            .await
            .map_err(db(ACTION))?;
        let features = rows
            .into_iter()
            .map(|row| FeatureCount {
                feature: row.feature,
                slot: u32::try_from(row.slot).unwrap_or(0),
                messages: to_u64(row.messages),
                overcount: to_u64(row.overcount),
                // The parts that list the name do not add to its bound.
                unlisted_max: to_u64(unlisted_total - row.listed_unlisted_max),
                contribution_sum: row.contribution_sum,
            })
            .collect();
        Ok(FeatureTally {
            channel: channel.map(str::to_owned),
            from_ms,
            to_ms,
            sampled_messages: to_u64(sampled),
            features,
        })
    }
}

/// The two queries of [`Store::feature_tally`]: the window's totals, and
/// each name's counts. Parameters: `?1` from, `?2` to, `?3` the channel (or
/// NULL). `?3 IS NULL OR channel = ?3` would hide the channel index from
/// the planner, so each case gets its own spelling; a test checks both use
/// an index.
fn tally_queries(has_channel: bool) -> (String, String) {
    let (parts_filter, features_filter) = if has_channel {
        ("channel = ?3 AND", "f.channel = ?3 AND")
    } else {
        ("?3 IS NULL AND", "?3 IS NULL AND")
    };
    let totals = format!(
        "SELECT COALESCE(SUM(sampled_messages), 0), COALESCE(SUM(unlisted_max), 0) \
         FROM feature_tally_parts \
         WHERE {parts_filter} bucket_start_ms >= ?1 AND bucket_start_ms < ?2"
    );
    let counts = format!(
        "SELECT f.feature AS feature, MAX(f.slot) AS slot, SUM(f.messages) AS messages, \
         SUM(f.overcount) AS overcount, SUM(p.unlisted_max) AS listed_unlisted_max, \
         TOTAL(f.contribution_sum) AS contribution_sum \
         FROM feature_tallies f JOIN feature_tally_parts p \
         ON p.bucket_start_ms = f.bucket_start_ms AND p.channel = f.channel \
         AND p.run_id = f.run_id \
         WHERE {features_filter} f.bucket_start_ms >= ?1 AND f.bucket_start_ms < ?2 \
         GROUP BY f.feature ORDER BY messages DESC, feature"
    );
    (totals, counts)
}

/// A name needs at least this many certain messages (`messages -
/// overcount`) in one of the two windows to be ranked by
/// [`feature_drift`]: below it, a word seen once or twice would swing
/// from share 0 to a share that means nothing. Common practice for
/// minimum-support cut-offs, no source for the value.
pub const FEATURE_DRIFT_MIN_MESSAGES: u64 = 5;

/// A name whose share of messages changed between two windows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ShareChange {
    /// The readable name.
    pub feature: String,
    /// Sampled messages with it in the baseline window (0: not listed).
    pub baseline_messages: u64,
    /// ... in the current window.
    pub current_messages: u64,
    /// `baseline_messages / baseline sampled messages`.
    pub baseline_share: f64,
    /// `current_messages / current sampled messages`.
    pub current_share: f64,
    /// `current_share - baseline_share`.
    pub change: f64,
}

/// A name's summed contribution to the margin in the current window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ContributionRank {
    /// The readable name.
    pub feature: String,
    /// Sampled messages with it in the current window.
    pub messages: u64,
    /// Its contribution summed over `messages - overcount` of them.
    pub contribution_sum: f64,
    /// `contribution_sum / (messages - overcount)`: its mean push on one
    /// message's margin (`None` if no message is certain).
    pub mean_contribution: Option<f64>,
}

/// What changed between a baseline and a current window. See
/// [`feature_drift`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FeatureDrift {
    /// Messages tallied in the baseline window.
    pub baseline_sampled_messages: u64,
    /// Messages tallied in the current window.
    pub current_sampled_messages: u64,
    /// The minimum support used.
    pub min_messages: u64,
    /// Largest rise in share first.
    pub rising: Vec<ShareChange>,
    /// Largest fall in share first.
    pub falling: Vec<ShareChange>,
    /// Largest `|contribution_sum|` in the current window first.
    pub top_contributions: Vec<ContributionRank>,
}

/// [`feature_drift_with`] at the default minimum support,
/// [`FEATURE_DRIFT_MIN_MESSAGES`].
pub fn feature_drift(baseline: &FeatureTally, current: &FeatureTally, top: usize) -> FeatureDrift {
    feature_drift_with(baseline, current, top, FEATURE_DRIFT_MIN_MESSAGES)
}

/// The `top` names whose share of sampled messages rose most and fell most
/// from `baseline` to `current`, and the `top` names with the largest
/// summed contribution (by magnitude) in `current`.
///
/// * A share is `messages / sampled_messages` of its window (the
///   Space-Saving estimate). A name not listed in a window has share 0
///   there, though up to its `unlisted_max` messages may be hidden.
/// * Only names with at least `min_messages` certain messages
///   (`messages - overcount`) in at least one window are ranked.
/// * `rising` holds only positive changes, `falling` only negative ones;
///   equal changes are ordered by name. When either window sampled no
///   message, shares mean nothing and both lists are empty.
/// * `top_contributions` ranks every name listed in `current`, ties by
///   name; no minimum support, since a rare name rarely sums to much.
pub fn feature_drift_with(
    baseline: &FeatureTally,
    current: &FeatureTally,
    top: usize,
    min_messages: u64,
) -> FeatureDrift {
    let mut rising = Vec::new();
    let mut falling = Vec::new();
    if baseline.sampled_messages > 0 && current.sampled_messages > 0 {
        // name -> (baseline, current)
        let mut pairs: BTreeMap<&str, (Option<&FeatureCount>, Option<&FeatureCount>)> =
            BTreeMap::new();
        for count in &baseline.features {
            pairs.entry(&count.feature).or_default().0 = Some(count);
        }
        for count in &current.features {
            pairs.entry(&count.feature).or_default().1 = Some(count);
        }
        let base_total = baseline.sampled_messages as f64;
        let current_total = current.sampled_messages as f64;
        for (feature, (before, after)) in pairs {
            let support = before
                .map_or(0, FeatureCount::guaranteed)
                .max(after.map_or(0, FeatureCount::guaranteed));
            if support < min_messages {
                continue;
            }
            let baseline_messages = before.map_or(0, |c| c.messages);
            let current_messages = after.map_or(0, |c| c.messages);
            let baseline_share = baseline_messages as f64 / base_total;
            let current_share = current_messages as f64 / current_total;
            let change = current_share - baseline_share;
            let row = ShareChange {
                feature: feature.to_owned(),
                baseline_messages,
                current_messages,
                baseline_share,
                current_share,
                change,
            };
            if change > 0.0 {
                rising.push(row);
            } else if change < 0.0 {
                falling.push(row);
            }
        }
        // Names come in name order, and the sorts are stable.
        rising.sort_by(|a, b| b.change.total_cmp(&a.change));
        falling.sort_by(|a, b| a.change.total_cmp(&b.change));
        rising.truncate(top);
        falling.truncate(top);
    }
    let mut top_contributions: Vec<ContributionRank> = current
        .features
        .iter()
        .map(|count| {
            let certain = count.guaranteed();
            ContributionRank {
                feature: count.feature.clone(),
                messages: count.messages,
                contribution_sum: count.contribution_sum,
                mean_contribution: (certain > 0).then(|| count.contribution_sum / certain as f64),
            }
        })
        .collect();
    top_contributions.sort_by(|a, b| {
        b.contribution_sum
            .abs()
            .total_cmp(&a.contribution_sum.abs())
            .then_with(|| a.feature.cmp(&b.feature))
    });
    top_contributions.truncate(top);
    FeatureDrift {
        baseline_sampled_messages: baseline.sampled_messages,
        current_sampled_messages: current.sampled_messages,
        min_messages,
        rising,
        falling,
        top_contributions,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::scratch;

    const HOUR: i64 = 3_600_000;

    fn feature(name: &str, messages: u64, overcount: u64, sum: f64) -> PartFeature {
        PartFeature {
            feature: name.to_owned(),
            slot: name.len() as u32,
            messages,
            overcount,
            contribution_sum: sum,
        }
    }

    fn part(
        hour: i64,
        channel: &str,
        run: &str,
        sampled: u64,
        unlisted_max: u64,
        features: Vec<PartFeature>,
    ) -> TallyPart {
        TallyPart {
            bucket_start_ms: hour * HOUR,
            channel: channel.to_owned(),
            run_id: run.to_owned(),
            sampled_messages: sampled,
            unlisted_max,
            updated_at_ms: hour * HOUR + 1,
            features,
        }
    }

    fn count<'a>(tally: &'a FeatureTally, name: &str) -> &'a FeatureCount {
        tally
            .features
            .iter()
            .find(|c| c.feature == name)
            .unwrap_or_else(|| panic!("{name} not in {tally:?}"))
    }

    #[tokio::test]
    async fn parts_add_up_over_runs_hours_and_channels() {
        let (_dir, store) = scratch().await;
        store
            .record_feature_tallies(&[
                part(
                    10,
                    "mail",
                    "run-a",
                    100,
                    3,
                    vec![
                        feature("body word \"kiln\"", 40, 0, 4.0),
                        feature("body word \"glaze\"", 20, 2, -1.5),
                    ],
                ),
                part(
                    10,
                    "mail",
                    "run-b",
                    50,
                    0,
                    vec![feature("body word \"kiln\"", 10, 0, 1.0)],
                ),
                part(
                    11,
                    "tickets",
                    "run-b",
                    30,
                    1,
                    vec![feature("body word \"glaze\"", 6, 1, 0.5)],
                ),
                // Outside the window [10h, 12h).
                part(
                    12,
                    "mail",
                    "run-b",
                    999,
                    0,
                    vec![feature("body word \"kiln\"", 999, 0, 9.0)],
                ),
            ])
            .await
            .unwrap();

        let all = store
            .feature_tally(None, 10 * HOUR, 12 * HOUR)
            .await
            .unwrap();
        assert_eq!(all.sampled_messages, 180);
        assert_eq!(all.channel, None);
        assert_eq!(
            all.features
                .iter()
                .map(|c| c.feature.as_str())
                .collect::<Vec<_>>(),
            ["body word \"kiln\"", "body word \"glaze\""]
        );
        let kiln = count(&all, "body word \"kiln\"");
        // 40 + 10; listed by both 10h mail parts, not by the 11h tickets
        // part, whose unlisted_max (1) bounds what it missed.
        assert_eq!(
            (kiln.messages, kiln.overcount, kiln.unlisted_max),
            (50, 0, 1)
        );
        assert_eq!(kiln.contribution_sum, 5.0);
        let glaze = count(&all, "body word \"glaze\"");
        // 20 + 6, overcount 2 + 1; missing only from run-b's 10h part
        // (unlisted_max 0).
        assert_eq!(
            (glaze.messages, glaze.overcount, glaze.unlisted_max),
            (26, 3, 0)
        );
        assert_eq!(glaze.guaranteed(), 23);
        assert_eq!(glaze.contribution_sum, -1.0);
        assert_eq!(all.share(glaze), Some(26.0 / 180.0));

        let mail = store
            .feature_tally(Some("mail"), 10 * HOUR, 12 * HOUR)
            .await
            .unwrap();
        assert_eq!(mail.sampled_messages, 150);
        assert_eq!(count(&mail, "body word \"glaze\"").messages, 20);
        assert_eq!(count(&mail, "body word \"kiln\"").unlisted_max, 0);

        let empty = store
            .feature_tally(Some("comments"), 0, 100 * HOUR)
            .await
            .unwrap();
        assert_eq!(empty.sampled_messages, 0);
        assert!(empty.features.is_empty());
        assert_eq!(empty.share(&kiln.clone()), None);
        store.close().await;
    }

    #[tokio::test]
    async fn a_later_flush_of_the_same_run_replaces_its_part() {
        let (_dir, store) = scratch().await;
        let first = part(
            5,
            "mail",
            "run-a",
            10,
            0,
            vec![
                feature("body word \"wool\"", 4, 0, 0.4),
                feature("body word \"bale\"", 2, 0, 0.2),
            ],
        );
        store.record_feature_tallies(&[first]).await.unwrap();
        // The summary moved on: more messages, "bale" no longer listed.
        let second = part(
            5,
            "mail",
            "run-a",
            25,
            2,
            vec![feature("body word \"wool\"", 9, 1, 0.8)],
        );
        store.record_feature_tallies(&[second]).await.unwrap();
        let tally = store.feature_tally(None, 5 * HOUR, 6 * HOUR).await.unwrap();
        assert_eq!(tally.sampled_messages, 25);
        assert_eq!(tally.features.len(), 1);
        let wool = count(&tally, "body word \"wool\"");
        assert_eq!((wool.messages, wool.overcount), (9, 1));
        // A restart is a new run: its part adds to the bucket.
        let restarted = part(
            5,
            "mail",
            "run-b",
            5,
            0,
            vec![feature("body word \"wool\"", 3, 0, 0.3)],
        );
        store.record_feature_tallies(&[restarted]).await.unwrap();
        let tally = store.feature_tally(None, 5 * HOUR, 6 * HOUR).await.unwrap();
        assert_eq!(tally.sampled_messages, 30);
        assert_eq!(count(&tally, "body word \"wool\"").messages, 12);
        store.close().await;
    }

    #[tokio::test]
    async fn window_queries_search_an_index_instead_of_scanning() {
        let (_dir, store) = scratch().await;
        for has_channel in [true, false] {
            let (totals, counts) = tally_queries(has_channel);
            for sql in [totals, counts] {
                let plan: Vec<(i64, i64, i64, String)> =
                    sqlx::query_as(&format!("EXPLAIN QUERY PLAN {sql}"))
                        .bind(0_i64)
                        .bind(HOUR)
                        .bind(has_channel.then_some("mail"))
                        .fetch_all(&store.pool)
                        .await
                        .unwrap();
                let steps: Vec<&str> = plan.iter().map(|row| row.3.as_str()).collect();
                // SQLite's plan wording: "SEARCH ... USING INDEX" narrows by
                // the index, "SCAN" reads a whole table.
                assert!(
                    steps.iter().all(|step| !step.starts_with("SCAN")),
                    "{steps:?}"
                );
                // One channel: its own index; all channels: the primary key,
                // which starts with the bucket.
                let index = if has_channel {
                    "_by_channel"
                } else {
                    "autoindex"
                };
                assert!(steps[0].contains(index), "{steps:?}");
            }
        }
        store.close().await;
    }

    #[tokio::test]
    async fn impossible_counts_are_refused() {
        let (_dir, store) = scratch().await;
        let bad = part(
            1,
            "mail",
            "run-a",
            10,
            0,
            vec![feature("body word \"x\"", 3, 3, 0.0)],
        );
        assert!(store.record_feature_tallies(&[bad]).await.is_err());
        // Nothing of the failed call was kept.
        let tally = store.feature_tally(None, 0, 10 * HOUR).await.unwrap();
        assert_eq!(tally.sampled_messages, 0);
        store.close().await;
    }

    fn tally(sampled: u64, counts: &[(&str, u64, u64, f64)]) -> FeatureTally {
        FeatureTally {
            channel: None,
            from_ms: 0,
            to_ms: HOUR,
            sampled_messages: sampled,
            features: counts
                .iter()
                .map(|&(name, messages, overcount, sum)| FeatureCount {
                    feature: name.to_owned(),
                    slot: 0,
                    messages,
                    overcount,
                    unlisted_max: 0,
                    contribution_sum: sum,
                })
                .collect(),
        }
    }

    #[test]
    fn drift_ranks_share_changes_by_hand() {
        // Baseline 200 messages, current 100. Shares by hand:
        //   glaze  60/200 = 0.30 -> 10/100 = 0.10   change -0.20
        //   kiln   20/200 = 0.10 -> 10/100 = 0.10   change  0 (in neither list)
        //   zorblat absent -> 40/100 = 0.40         change +0.40
        //   quenta  10/200 = 0.05 -> 20/100 = 0.20  change +0.15
        //   mug     8/200 = 0.04 -> absent          change -0.04
        //   rare    absent -> 4/100, below support 5 (left out)
        //   fuzzy   absent -> 9/100 but 6 of them overcount: 3 certain (left out)
        let baseline = tally(
            200,
            &[
                ("glaze", 60, 0, -30.0),
                ("kiln", 20, 0, 1.0),
                ("quenta", 10, 0, 2.0),
                ("mug", 8, 0, -1.0),
            ],
        );
        let current = tally(
            100,
            &[
                ("zorblat", 40, 0, 48.0),
                ("quenta", 20, 2, 9.0),
                ("glaze", 10, 0, -5.0),
                ("kiln", 10, 0, 0.5),
                ("rare", 4, 0, 7.0),
                ("fuzzy", 9, 6, 0.3),
            ],
        );
        let drift = feature_drift(&baseline, &current, 10);
        let rising: Vec<(&str, f64)> = drift
            .rising
            .iter()
            .map(|r| (r.feature.as_str(), r.change))
            .collect();
        assert_eq!(rising.len(), 2);
        assert_eq!(rising[0].0, "zorblat");
        assert!((rising[0].1 - 0.40).abs() < 1e-12);
        assert_eq!(rising[1].0, "quenta");
        assert!((rising[1].1 - 0.15).abs() < 1e-12);
        let falling: Vec<(&str, f64)> = drift
            .falling
            .iter()
            .map(|r| (r.feature.as_str(), r.change))
            .collect();
        assert_eq!(falling.len(), 2);
        assert_eq!(falling[0].0, "glaze");
        assert!((falling[0].1 + 0.20).abs() < 1e-12);
        assert_eq!(falling[1].0, "mug");
        assert!((falling[1].1 + 0.04).abs() < 1e-12);
        assert_eq!(drift.rising[0].baseline_messages, 0);
        assert_eq!(drift.falling[1].current_messages, 0);
        // Contributions in the current window by magnitude:
        // zorblat 48, quenta 9 (mean 9 / (20 - 2) = 0.5), rare 7, glaze -5.
        let top: Vec<(&str, f64)> = drift
            .top_contributions
            .iter()
            .take(4)
            .map(|c| (c.feature.as_str(), c.contribution_sum))
            .collect();
        assert_eq!(
            top,
            [
                ("zorblat", 48.0),
                ("quenta", 9.0),
                ("rare", 7.0),
                ("glaze", -5.0)
            ]
        );
        assert_eq!(drift.top_contributions[1].mean_contribution, Some(0.5));
        assert_eq!(
            (
                drift.baseline_sampled_messages,
                drift.current_sampled_messages
            ),
            (200, 100)
        );

        let short = feature_drift(&baseline, &current, 1);
        assert_eq!(short.rising.len(), 1);
        assert_eq!(short.falling.len(), 1);
        assert_eq!(short.top_contributions.len(), 1);
        // With a support of 4, "rare" (4 certain) is ranked: 0 -> 0.04;
        // "fuzzy" (3 certain) still is not.
        let loose = feature_drift_with(&baseline, &current, 10, 4);
        assert!(loose.rising.iter().any(|r| r.feature == "rare"));
        assert!(!loose.rising.iter().any(|r| r.feature == "fuzzy"));
    }

    #[test]
    fn drift_without_samples_ranks_no_shares() {
        let empty = tally(0, &[]);
        let current = tally(10, &[("kiln", 8, 0, 2.0)]);
        let drift = feature_drift(&empty, &current, 5);
        assert!(drift.rising.is_empty() && drift.falling.is_empty());
        assert_eq!(drift.top_contributions.len(), 1);
        let json = serde_json::to_value(&drift).unwrap();
        assert_eq!(json["top_contributions"][0]["feature"], "kiln");
        assert_eq!(json["min_messages"], 5);
    }

    #[test]
    fn equal_changes_are_ordered_by_name() {
        let baseline = tally(100, &[]);
        let current = tally(100, &[("b", 10, 0, 1.0), ("a", 10, 0, -1.0)]);
        let drift = feature_drift(&baseline, &current, 5);
        let names: Vec<&str> = drift.rising.iter().map(|r| r.feature.as_str()).collect();
        assert_eq!(names, ["a", "b"]);
        let names: Vec<&str> = drift
            .top_contributions
            .iter()
            .map(|r| r.feature.as_str())
            .collect();
        assert_eq!(names, ["a", "b"]);
    }
}
