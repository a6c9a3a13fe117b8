//! Feature tallies: which readable feature names the scored messages carry,
//! per time bucket (an hour by default) and channel, kept in bounded memory
//! and flushed to the store.
//!
//! Drift reports ask "which features' share of messages rose or fell most"
//! and "which features moved `p_junk` most". Scoring only hashes features;
//! names cost a second, slower walk over the message
//! ([`Extractor::extract_named`]). So:
//!
//! * **Sampling, on the request path.** [`TallyFeed::wants`] decides in a
//!   few nanoseconds (one atomic compare-and-swap) whether a decision is
//!   tallied: every message while fewer than `sample_all_below_per_sec`
//!   have been scored in the current second, and one in `sample_every`
//!   after that. The rule depends only on arrival order and time, never on
//!   content, so the share of a name among sampled messages estimates its
//!   share among all of them. (Within an hour that crosses the rate
//!   threshold, quiet seconds weigh a little more than busy ones.) A
//!   sampled decision's message, channel, time and per-slot contributions
//!   (`w_i * x_i` from the very model snapshot that scored it) go to the
//!   tally task over a bounded channel with `try_send`: when it is full the
//!   sample is dropped and counted (`chaffgate_tally_dropped_total`),
//!   scoring never waits.
//! * **Naming and counting, in the tally task.** The task names each
//!   sample's features and counts, per (bucket of `created_at_ms`, channel),
//!   the messages containing each name in a Space-Saving summary
//!   ([`SpaceSaving`], `capacity` counters) with the sum of its
//!   contributions. Names that share a hashed slot within one message share
//!   its contribution equally. `bias` (the same in every message) is not
//!   tallied, nor are character n-grams unless `ngrams` is set: a word's
//!   n-grams would crowd the word itself out of the top of every list.
//! * **Flushing.** Every `flush_every` and at shutdown the task writes each
//!   changed bucket's `top_k` names as this run's part of the bucket
//!   ([`Store::record_feature_tallies`]). A bucket stays in memory until
//!   the bucket after it has ended too (and at least [`LATE_GRACE_MS`]
//!   after its own end); a sample for a bucket already let go is dropped
//!   as late rather than rewriting the part with less.
//!
//! What must stay true: nothing here blocks or slows scoring beyond the
//! sampling check and, for sampled decisions, one copy of the message; the
//! counts of a part only grow within a run; at most [`MAX_CHANNELS`]
//! channels are tallied per bucket, so clients naming channels at random
//! cannot make memory grow without bound.

use std::collections::BTreeMap;
use std::fmt::Write;
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Duration;

use chaffgate_metrics::SpaceSaving;
use chaffgate_store::{PartFeature, Store, TallyPart};
use chaffgate_text::{Extractor, Message, NamedFeature};
use tokio::sync::mpsc;
use tokio::task::JoinHandle;

use crate::state::now_ms;

/// The default length of one tally bucket: an hour.
pub const DEFAULT_BUCKET: Duration = Duration::from_secs(3600);

/// Buckets are kept in memory at least this long after they end, so that
/// samples still queued when a short bucket ends are counted.
pub const LATE_GRACE_MS: i64 = 120_000;

/// Channels tallied per bucket; samples for further channels are dropped.
pub const MAX_CHANNELS: usize = 64;

/// Bits of the sampler's packed state that hold the count within a second.
const COUNT_BITS: u32 = 24;
const COUNT_MASK: u64 = (1 << COUNT_BITS) - 1;

/// How the daemon tallies feature names.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TallySettings {
    /// Whether anything is tallied.
    pub is_enabled: bool,
    /// Above the low-rate allowance, tally one decision in this many (1:
    /// every one).
    pub sample_every: u64,
    /// Tally every decision while fewer than this many were made in the
    /// current second.
    pub sample_all_below_per_sec: u64,
    /// Counters per (hour, channel) summary.
    pub capacity: usize,
    /// Names written per (hour, channel) at each flush; at most `capacity`.
    pub top_k: usize,
    /// How often changed buckets are written.
    pub flush_every: Duration,
    /// Samples waiting for the tally task before new ones are dropped.
    pub queue: usize,
    /// Whether character n-gram features are tallied too.
    pub has_ngrams: bool,
    /// Length of one bucket; should divide a day so buckets line up
    /// across restarts.
    pub bucket: Duration,
}

impl Default for TallySettings {
    fn default() -> TallySettings {
        TallySettings {
            is_enabled: true,
            sample_every: 100,
            sample_all_below_per_sec: 20,
            capacity: 10_000,
            top_k: 500,
            flush_every: Duration::from_secs(60),
            queue: 1024,
            has_ngrams: false,
            bucket: DEFAULT_BUCKET,
        }
    }
}

/// One sampled decision, for the tally task.
#[derive(Debug, Clone)]
pub struct TallySample {
    pub created_at_ms: i64,
    pub channel: String,
    pub message: Message,
    /// `(slot, w_i * x_i)` of every feature, ascending by slot, from the
    /// model snapshot that scored the message.
    pub contributions: Vec<(u32, f64)>,
}

/// Counters about tallying, exported at `/metrics`.
#[derive(Debug, Default)]
pub struct TallyCounters {
    sampled: AtomicU64,
    dropped_full: AtomicU64,
    dropped_late: AtomicU64,
    dropped_channels: AtomicU64,
    flush_failures: AtomicU64,
    live_buckets: AtomicU64,
}

impl TallyCounters {
    /// Samples dropped because the tally task's queue was full.
    pub fn dropped_full(&self) -> u64 {
        self.dropped_full.load(Ordering::Relaxed)
    }

    /// Samples handed to the tally task.
    pub fn sampled(&self) -> u64 {
        self.sampled.load(Ordering::Relaxed)
    }

    /// Writes the tally families in the Prometheus text format.
    pub fn render(&self, out: &mut String) {
        let sampled = self.sampled.load(Ordering::Relaxed);
        let full = self.dropped_full.load(Ordering::Relaxed);
        let late = self.dropped_late.load(Ordering::Relaxed);
        let channels = self.dropped_channels.load(Ordering::Relaxed);
        let failures = self.flush_failures.load(Ordering::Relaxed);
        let buckets = self.live_buckets.load(Ordering::Relaxed);
        let _ = writeln!(
            out,
            "# HELP chaffgate_tally_sampled_total Decisions sampled for feature tallies.\n\
             # TYPE chaffgate_tally_sampled_total counter\n\
             chaffgate_tally_sampled_total {sampled}\n\
             # HELP chaffgate_tally_dropped_total Sampled decisions not tallied, by reason.\n\
             # TYPE chaffgate_tally_dropped_total counter\n\
             chaffgate_tally_dropped_total{{reason=\"queue_full\"}} {full}\n\
             chaffgate_tally_dropped_total{{reason=\"late\"}} {late}\n\
             chaffgate_tally_dropped_total{{reason=\"too_many_channels\"}} {channels}\n\
             # HELP chaffgate_tally_flush_failures_total Tally flushes the database refused (retried).\n\
             # TYPE chaffgate_tally_flush_failures_total counter\n\
             chaffgate_tally_flush_failures_total {failures}\n\
             # HELP chaffgate_tally_buckets (hour, channel) tallies held in memory.\n\
             # TYPE chaffgate_tally_buckets gauge\n\
             chaffgate_tally_buckets {buckets}"
        );
    }
}

/// The sampling rule; see the module docs.
#[derive(Debug)]
struct Sampler {
    every: u64,
    all_below: u64,
    /// `second << COUNT_BITS | decisions counted in that second`.
    state: AtomicU64,
}

impl Sampler {
    fn new(every: u64, all_below: u64) -> Sampler {
        Sampler {
            every: every.max(1),
            all_below,
            state: AtomicU64::new(0),
        }
    }

    /// Counts one decision made at `now_ms` and says whether to tally it.
    fn wants(&self, now_ms: i64) -> bool {
        let second = u64::try_from(now_ms / 1000).unwrap_or(0);
        let mut current = self.state.load(Ordering::Relaxed);
        let position = loop {
            let (at, count) = (current >> COUNT_BITS, current & COUNT_MASK);
            // A clock that steps back keeps counting in the newer second.
            let (at, count) = if second > at {
                (second, 1)
            } else {
                (at, (count + 1).min(COUNT_MASK))
            };
            let next = (at << COUNT_BITS) | count;
            match self.state.compare_exchange_weak(
                current,
                next,
                Ordering::Relaxed,
                Ordering::Relaxed,
            ) {
                Ok(_) => break count,
                Err(actual) => current = actual,
            }
        };
        position <= self.all_below || (position - self.all_below).is_multiple_of(self.every)
    }
}

/// The request side of tallying: the sampling rule and the queue to the
/// tally task. Cheap to share behind the state's `Arc`.
#[derive(Debug)]
pub struct TallyFeed {
    sampler: Option<Sampler>,
    samples_tx: mpsc::Sender<TallySample>,
    counters: Arc<TallyCounters>,
}

impl TallyFeed {
    /// Whether the decision made at `created_at_ms` is to be tallied.
    /// Counts it towards the rate either way.
    pub fn wants(&self, created_at_ms: i64) -> bool {
        self.sampler
            .as_ref()
            .is_some_and(|sampler| sampler.wants(created_at_ms))
    }

    /// Queues a sample without waiting; a full queue drops and counts it.
    pub fn offer(&self, sample: TallySample) {
        match self.samples_tx.try_send(sample) {
            Ok(()) => {
                self.counters.sampled.fetch_add(1, Ordering::Relaxed);
            }
            Err(mpsc::error::TrySendError::Full(_) | mpsc::error::TrySendError::Closed(_)) => {
                self.counters.dropped_full.fetch_add(1, Ordering::Relaxed);
            }
        }
    }

    pub fn counters(&self) -> &TallyCounters {
        &self.counters
    }
}

/// What a counter carries beside its count.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct FeatureData {
    slot: u32,
    contribution_sum: f64,
}

/// One (hour, channel) tally.
#[derive(Debug)]
struct Bucket {
    sampled_messages: u64,
    summary: SpaceSaving<Arc<str>, FeatureData>,
    /// Changed since the last successful flush.
    is_dirty: bool,
}

impl Bucket {
    /// The part of this run to write: the `top_k` names, and the most
    /// messages a name left out can have contained.
    fn part(&self, key: &(i64, String), run_id: &str, top_k: usize, now_ms: i64) -> TallyPart {
        let ranked = self.summary.top(top_k.saturating_add(1));
        let first_left_out = ranked.get(top_k).map_or(0, |c| c.count);
        let unlisted_max = self.summary.max_unmonitored().max(first_left_out);
        let features = ranked
            .into_iter()
            .take(top_k)
            .map(|counter| PartFeature {
                feature: counter.item.to_string(),
                slot: counter.data.slot,
                messages: counter.count,
                overcount: counter.overcount,
                contribution_sum: counter.data.contribution_sum,
            })
            .collect();
        TallyPart {
            bucket_start_ms: key.0,
            channel: key.1.clone(),
            run_id: run_id.to_owned(),
            sampled_messages: self.sampled_messages,
            unlisted_max,
            updated_at_ms: now_ms,
            features,
        }
    }
}

/// Whether a named feature is tallied under `settings`.
fn is_tallied(name: &str, has_ngrams: bool) -> bool {
    if name == "bias" {
        return false;
    }
    has_ngrams || !(name.starts_with("subject ngram ") || name.starts_with("body ngram "))
}

/// The start of the bucket of `bucket_ms` milliseconds that `ms` falls in.
pub fn bucket_start(ms: i64, bucket_ms: i64) -> i64 {
    ms.div_euclid(bucket_ms) * bucket_ms
}

/// The tally task's state: the live buckets of this run.
struct Tallies {
    settings: TallySettings,
    bucket_ms: i64,
    run_id: String,
    buckets: BTreeMap<(i64, String), Bucket>,
    /// Buckets starting before this were let go; their samples are late.
    open_from_ms: i64,
    counters: Arc<TallyCounters>,
}

impl Tallies {
    fn new(settings: TallySettings, run_id: String, counters: Arc<TallyCounters>) -> Tallies {
        let bucket_ms = i64::try_from(settings.bucket.as_millis())
            .unwrap_or(i64::MAX)
            .max(1);
        Tallies {
            settings,
            bucket_ms,
            run_id,
            buckets: BTreeMap::new(),
            open_from_ms: i64::MIN,
            counters,
        }
    }

    /// Names one sample's features and counts them in its bucket.
    fn add(&mut self, extractor: &mut Extractor, sample: &TallySample) {
        let start = bucket_start(sample.created_at_ms, self.bucket_ms);
        if start < self.open_from_ms {
            self.counters.dropped_late.fetch_add(1, Ordering::Relaxed);
            return;
        }
        let key = (start, sample.channel.clone());
        if !self.buckets.contains_key(&key) {
            let channels = self
                .buckets
                .range((start, String::new())..(start.saturating_add(1), String::new()))
                .count();
            if channels >= MAX_CHANNELS {
                self.counters
                    .dropped_channels
                    .fetch_add(1, Ordering::Relaxed);
                return;
            }
            let Ok(summary) = SpaceSaving::new(self.settings.capacity.max(1)) else {
                return;
            };
            self.buckets.insert(
                key.clone(),
                Bucket {
                    sampled_messages: 0,
                    summary,
                    is_dirty: false,
                },
            );
            self.counters
                .live_buckets
                .store(self.buckets.len() as u64, Ordering::Relaxed);
        }
        let Some(bucket) = self.buckets.get_mut(&key) else {
            return;
        };
        let named = extractor.extract_named(&sample.message);
        count_names(
            &mut bucket.summary,
            &named,
            &sample.contributions,
            self.settings.has_ngrams,
        );
        bucket.sampled_messages += 1;
        bucket.is_dirty = true;
    }

    /// Writes every changed bucket as this run's part, then lets go of the
    /// buckets that ended more than a bucket (and [`LATE_GRACE_MS`]) before
    /// `now_ms`.
    async fn flush(&mut self, store: &Store, now_ms: i64) {
        let parts: Vec<TallyPart> = self
            .buckets
            .iter()
            .filter(|(_, bucket)| bucket.is_dirty)
            .map(|(key, bucket)| bucket.part(key, &self.run_id, self.settings.top_k, now_ms))
            .collect();
        if !parts.is_empty() {
            match store.record_feature_tallies(&parts).await {
                Ok(()) => {
                    for bucket in self.buckets.values_mut() {
                        bucket.is_dirty = false;
                    }
                    tracing::debug!(parts = parts.len(), "feature tallies flushed");
                }
                Err(err) => {
                    self.counters.flush_failures.fetch_add(1, Ordering::Relaxed);
                    tracing::warn!(error = %err, "writing feature tallies failed; will retry");
                    return;
                }
            }
        }
        let open_from_ms = bucket_start(
            now_ms.saturating_sub(self.bucket_ms.max(LATE_GRACE_MS)),
            self.bucket_ms,
        );
        if open_from_ms > self.open_from_ms {
            self.open_from_ms = open_from_ms;
            self.buckets.retain(|(start, _), _| *start >= open_from_ms);
            self.counters
                .live_buckets
                .store(self.buckets.len() as u64, Ordering::Relaxed);
        }
    }
}

/// Counts one message's names in `summary`. `named` is sorted by slot (as
/// [`Extractor::extract_named`] gives it), `contributions` by slot too.
fn count_names(
    summary: &mut SpaceSaving<Arc<str>, FeatureData>,
    named: &[NamedFeature],
    contributions: &[(u32, f64)],
    has_ngrams: bool,
) {
    for group in named.chunk_by(|a, b| a.index == b.index) {
        let slot = group[0].index;
        let contribution = contributions
            .binary_search_by_key(&slot, |&(index, _)| index)
            .map_or(0.0, |at| contributions[at].1);
        // Every name in the slot takes an equal share, tallied or not.
        #[expect(
            clippy::cast_precision_loss,
            reason = "a message has far fewer than 2^52 names"
        )]
        let share = contribution / group.len() as f64;
        for feature in group {
            if !is_tallied(&feature.name, has_ngrams) {
                continue;
            }
            let data = summary.observe(feature.name.as_str());
            data.slot = slot;
            data.contribution_sum += share;
        }
    }
}

/// Builds the request side and starts the tally task, which ends after
/// every [`TallyFeed`] is dropped and a last flush.
pub fn spawn(
    settings: TallySettings,
    store: Store,
    mut extractor: Extractor,
    run_id: String,
) -> (TallyFeed, JoinHandle<()>) {
    let counters = Arc::new(TallyCounters::default());
    let (samples_tx, mut samples_rx) = mpsc::channel(settings.queue.max(1));
    let sampler = settings
        .is_enabled
        .then(|| Sampler::new(settings.sample_every, settings.sample_all_below_per_sec));
    let feed = TallyFeed {
        sampler,
        samples_tx,
        counters: Arc::clone(&counters),
    };
    let flush_every = settings.flush_every.max(Duration::from_millis(10));
    let mut tallies = Tallies::new(settings, run_id, counters);
    let task = tokio::spawn(async move {
        let mut flush = tokio::time::interval(flush_every);
        flush.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
        // The first tick is immediate; nothing to write yet.
        flush.tick().await;
        loop {
            tokio::select! {
                sample = samples_rx.recv() => match sample {
                    Some(sample) => tallies.add(&mut extractor, &sample),
                    None => break,
                },
                _ = flush.tick() => tallies.flush(&store, now_ms()).await,
            }
        }
        tallies.flush(&store, now_ms()).await;
        tracing::debug!("tally task flushed and stopped");
    });
    (feed, task)
}

#[cfg(test)]
mod tests {
    use super::*;

    const HOUR_MS: i64 = 3_600_000;
    use chaffgate_text::{FeatureSettings, HashKey};

    fn extractor() -> Extractor {
        let settings = FeatureSettings {
            bits: 16,
            ..FeatureSettings::default()
        };
        Extractor::new(settings, HashKey::from_bytes([3; 16]))
    }

    fn sample(ms: i64, channel: &str, body: &str) -> TallySample {
        TallySample {
            created_at_ms: ms,
            channel: channel.to_owned(),
            message: Message {
                body: Some(body.to_owned()),
                ..Message::default()
            },
            contributions: Vec::new(),
        }
    }

    fn settings() -> TallySettings {
        TallySettings {
            capacity: 50,
            top_k: 10,
            ..TallySettings::default()
        }
    }

    #[test]
    fn low_rates_are_tallied_whole_and_high_rates_one_in_n() {
        // Second 10: positions 1..=3 always, then 8, 13, 18 (3 + 5k).
        let sampler = Sampler::new(5, 3);
        let positions: Vec<u64> = (1..=20).filter(|_| sampler.wants(10_500)).collect();
        assert_eq!(positions, [1, 2, 3, 8, 13, 18]);
        // A new second starts the count again; an older time counts in the
        // newer second.
        assert!(sampler.wants(11_000));
        assert!(sampler.wants(10_999));
        assert!(sampler.wants(11_001));
        assert!(!sampler.wants(11_002));
        let every = Sampler::new(1, 0);
        assert!((0..100).all(|_| every.wants(5)));
    }

    #[test]
    fn names_are_counted_per_message_with_their_contributions() {
        let mut extractor = extractor();
        let message = Message {
            body: Some("kiln kiln glaze".to_owned()),
            ..Message::default()
        };
        let named = extractor.extract_named(&message);
        let slot_of = |name: &str| named.iter().find(|n| n.name == name).unwrap().index;
        let kiln = slot_of("body word \"kiln\"");
        let glaze = slot_of("body word \"glaze\"");
        let mut contributions = vec![(kiln, 0.5), (glaze, -0.25)];
        contributions.sort_by_key(|&(slot, _)| slot);
        let mut summary = SpaceSaving::new(100).unwrap();
        for _ in 0..2 {
            count_names(&mut summary, &named, &contributions, false);
        }
        // Twice the same message: each name in 2 messages, "kiln" counted
        // once per message though it occurs twice in it.
        let counter = summary.get("body word \"kiln\"").unwrap();
        assert_eq!((counter.count, counter.data.slot), (2, kiln));
        assert_eq!(counter.data.contribution_sum, 1.0);
        assert_eq!(
            summary
                .get("body word \"glaze\"")
                .unwrap()
                .data
                .contribution_sum,
            -0.5
        );
        assert!(summary.get("bias").is_none());
        assert!(summary.counters().iter().all(|c| !c.item.contains("ngram")));
        assert!(summary.get("body pair \"kiln kiln\"").is_some());
        let mut with_ngrams = SpaceSaving::new(100).unwrap();
        count_names(&mut with_ngrams, &named, &contributions, true);
        assert!(with_ngrams.get("body ngram \"kiln\"").is_some());
    }

    #[test]
    fn names_sharing_a_slot_share_its_contribution() {
        let named = vec![
            NamedFeature {
                index: 7,
                name: "body word \"a\"".to_owned(),
            },
            NamedFeature {
                index: 7,
                name: "body word \"b\"".to_owned(),
            },
            NamedFeature {
                index: 9,
                name: "bias".to_owned(),
            },
        ];
        let mut summary = SpaceSaving::new(10).unwrap();
        count_names(&mut summary, &named, &[(7, 1.0), (9, 4.0)], false);
        assert_eq!(
            summary
                .get("body word \"a\"")
                .unwrap()
                .data
                .contribution_sum,
            0.5
        );
        assert_eq!(
            summary
                .get("body word \"b\"")
                .unwrap()
                .data
                .contribution_sum,
            0.5
        );
        assert_eq!(summary.len(), 2);
    }

    #[test]
    fn buckets_follow_the_decision_time_and_channel() {
        let counters = Arc::new(TallyCounters::default());
        let mut tallies = Tallies::new(settings(), "run".to_owned(), Arc::clone(&counters));
        let mut extractor = extractor();
        let hour = 400_000 * HOUR_MS;
        tallies.add(&mut extractor, &sample(hour + 5, "mail", "glaze kiln"));
        tallies.add(&mut extractor, &sample(hour + HOUR_MS - 1, "mail", "glaze"));
        tallies.add(&mut extractor, &sample(hour + HOUR_MS, "mail", "glaze"));
        tallies.add(&mut extractor, &sample(hour + 7, "tickets", "glaze"));
        let keys: Vec<(i64, &str, u64)> = tallies
            .buckets
            .iter()
            .map(|((start, channel), b)| (*start, channel.as_str(), b.sampled_messages))
            .collect();
        assert_eq!(
            keys,
            [
                (hour, "mail", 2),
                (hour, "tickets", 1),
                (hour + HOUR_MS, "mail", 1)
            ]
        );
        let part = tallies.buckets[&(hour, "mail".to_owned())].part(
            &(hour, "mail".to_owned()),
            "run",
            10,
            hour + 9,
        );
        let glaze = part
            .features
            .iter()
            .find(|f| f.feature == "body word \"glaze\"")
            .unwrap();
        assert_eq!((glaze.messages, glaze.overcount), (2, 0));
        // Everything seen is listed: nothing can hide.
        assert_eq!(part.unlisted_max, 0);
        assert_eq!(part.sampled_messages, 2);
    }

    #[test]
    fn a_part_bounds_what_it_leaves_out() {
        let counters = Arc::new(TallyCounters::default());
        let mut tallies = Tallies::new(
            TallySettings {
                capacity: 50,
                top_k: 1,
                ..TallySettings::default()
            },
            "run".to_owned(),
            counters,
        );
        let mut extractor = extractor();
        for body in ["kiln glaze", "kiln glaze", "kiln"] {
            tallies.add(&mut extractor, &sample(0, "mail", body));
        }
        let key = (0, "mail".to_owned());
        let part = tallies.buckets[&key].part(&key, "run", 1, 1);
        // Top name: kiln (3, or more with the word's other features at 3
        // too, ties broken by slot order: kiln came first). The best left
        // out has 3 messages.
        assert_eq!(part.features.len(), 1);
        assert_eq!(part.features[0].messages, 3);
        assert_eq!(part.unlisted_max, 3);
    }

    #[test]
    fn too_many_channels_and_late_samples_are_dropped_and_counted() {
        let counters = Arc::new(TallyCounters::default());
        let mut tallies = Tallies::new(settings(), "run".to_owned(), Arc::clone(&counters));
        let mut extractor = extractor();
        for n in 0..=MAX_CHANNELS {
            tallies.add(&mut extractor, &sample(10, &format!("c{n}"), "glaze"));
        }
        assert_eq!(tallies.buckets.len(), MAX_CHANNELS);
        assert_eq!(counters.dropped_channels.load(Ordering::Relaxed), 1);
        // The next hour has room again.
        tallies.add(&mut extractor, &sample(HOUR_MS, "c99", "glaze"));
        assert_eq!(tallies.buckets.len(), MAX_CHANNELS + 1);
        tallies.open_from_ms = HOUR_MS;
        tallies.add(&mut extractor, &sample(10, "c0", "glaze"));
        assert_eq!(counters.dropped_late.load(Ordering::Relaxed), 1);
    }

    #[test]
    fn counters_render_as_prometheus_families() {
        let counters = TallyCounters::default();
        counters.dropped_full.fetch_add(3, Ordering::Relaxed);
        let mut out = String::new();
        counters.render(&mut out);
        assert!(out.contains("chaffgate_tally_dropped_total{reason=\"queue_full\"} 3\n"));
        // Every sample line belongs to a family announced by a TYPE line
        // (Prometheus text exposition format).
        for line in out.lines().filter(|line| !line.starts_with('#')) {
            let family = line.split(['{', ' ']).next().unwrap();
            assert!(out.contains(&format!("# TYPE {family} ")), "{line}");
        }
    }

    #[tokio::test]
    async fn flushes_write_parts_and_let_old_buckets_go() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(&dir.path().join("t.db")).await.unwrap();
        let counters = Arc::new(TallyCounters::default());
        let mut tallies = Tallies::new(settings(), "run-1".to_owned(), Arc::clone(&counters));
        let mut extractor = extractor();
        let hour = 400_000 * HOUR_MS;
        tallies.add(&mut extractor, &sample(hour + 1, "mail", "glaze kiln"));
        tallies.flush(&store, hour + 2).await;
        tallies.add(&mut extractor, &sample(hour + 3, "mail", "glaze"));
        tallies.flush(&store, hour + 4).await;
        let tally = store
            .feature_tally(Some("mail"), hour, hour + HOUR_MS)
            .await
            .unwrap();
        assert_eq!(tally.sampled_messages, 2);
        let glaze = tally
            .features
            .iter()
            .find(|c| c.feature == "body word \"glaze\"")
            .unwrap();
        assert_eq!(glaze.messages, 2, "the second flush replaced the first");
        // Two hours on, the bucket is let go after its last flush.
        tallies.flush(&store, hour + 2 * HOUR_MS + 1).await;
        assert!(tallies.buckets.is_empty());
        tallies.add(&mut extractor, &sample(hour + 5, "mail", "glaze"));
        assert_eq!(counters.dropped_late.load(Ordering::Relaxed), 1);
        store.close().await;
    }

    #[tokio::test]
    async fn the_task_flushes_at_shutdown_and_a_full_queue_drops() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(&dir.path().join("t.db")).await.unwrap();
        let (feed, task) = spawn(
            TallySettings {
                queue: 1,
                flush_every: Duration::from_secs(3600),
                ..settings()
            },
            store.clone(),
            extractor(),
            "run-1".to_owned(),
        );
        // The task has not run yet (this test's runtime is single-threaded
        // and nothing awaited): the second offer finds the queue full.
        feed.offer(sample(7, "mail", "glaze"));
        feed.offer(sample(8, "mail", "kiln"));
        assert_eq!(feed.counters().sampled(), 1);
        assert_eq!(feed.counters().dropped_full(), 1);
        drop(feed);
        task.await.unwrap();
        let tally = store.feature_tally(None, 0, HOUR_MS).await.unwrap();
        assert_eq!(tally.sampled_messages, 1);
        assert!(
            tally
                .features
                .iter()
                .any(|c| c.feature == "body word \"glaze\"")
        );
        store.close().await;
    }
}
