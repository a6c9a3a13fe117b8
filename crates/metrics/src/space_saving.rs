//! Space-Saving: the most frequent items of a stream, in bounded memory.
//!
//! Drift reports count which feature names occur in how many messages, but
//! the names of a day's mail are far too many to count exactly. This is the
//! Space-Saving algorithm of Metwally, Agrawal and El Abbadi, "Efficient
//! computation of frequent and top-k elements in data streams" (ICDT 2005,
//! section 3): keep `m` counters; an item already monitored adds one to its
//! counter; a new item takes a free counter at 1, or, once all `m` are
//! taken, replaces the item with the smallest count `min` and starts at
//! `min + 1`, remembering `min` as its overcount.
//!
//! What it guarantees after `N` observations (the paper's properties of the
//! algorithm, section 3; lemma and theorem numbers from memory, not
//! checked):
//!
//! * the counts add up to `N` exactly;
//! * the smallest count, [`SpaceSaving::max_unmonitored`] once all counters
//!   are taken, is at most `N / m`;
//! * a monitored item's true frequency `f` lies in
//!   `count - overcount <= f <= count`;
//! * an item that is not monitored occurred at most `max_unmonitored`
//!   times, so every item with `f > N / m` is monitored (the paper's
//!   theorem that an item with `f > min` is in the summary).
//!
//! Each counter also carries caller data `A` (a running sum, say), started
//! from `A::default()` when its item is admitted and kept while the item
//! stays. So `A` covers exactly the last `count - overcount` occurrences.
//!
//! The paper's Stream-Summary gives O(1) updates with linked buckets; here
//! the counters sit in a binary min-heap by count (O(log m) per update),
//! which is simpler and fast enough for the few thousand counters the
//! server keeps. What must stay true: the same observations in the same
//! order give the same counters, bit for bit (nothing depends on hash-map
//! iteration order), and no input panics.

use std::borrow::Borrow;
use std::collections::HashMap;
use std::hash::Hash;

use crate::error::MetricsError;

/// One monitored item.
#[derive(Debug, Clone, PartialEq)]
pub struct Counter<K, A> {
    /// The item.
    pub item: K,
    /// Occurrences counted: at least the true frequency.
    pub count: u64,
    /// How much of `count` may belong to items it replaced: `count -
    /// overcount` is at most the true frequency.
    pub overcount: u64,
    /// Caller data, covering the last `count - overcount` occurrences.
    pub data: A,
}

impl<K, A> Counter<K, A> {
    /// Occurrences certainly seen: `count - overcount`.
    pub fn guaranteed(&self) -> u64 {
        self.count - self.overcount
    }
}

/// A Space-Saving summary over items `K` with caller data `A`. See the
/// module docs.
#[derive(Debug, Clone)]
pub struct SpaceSaving<K, A> {
    capacity: usize,
    observations: u64,
    /// Counters in admission order of their slot; a slot keeps its place
    /// when its item is replaced.
    counters: Vec<Counter<K, A>>,
    /// Slot numbers as a min-heap on `count`.
    heap: Vec<usize>,
    /// Where each slot sits in `heap`.
    heap_at: Vec<usize>,
    /// Item to slot.
    slots: HashMap<K, usize>,
}

impl<K, A> SpaceSaving<K, A>
where
    K: Hash + Eq + Clone,
    A: Default,
{
    /// An empty summary with `capacity` counters.
    ///
    /// Errors: [`MetricsError::InvalidParameter`] naming `capacity` when it
    /// is 0.
    pub fn new(capacity: usize) -> Result<Self, MetricsError> {
        if capacity == 0 {
            return Err(MetricsError::InvalidParameter {
                name: "capacity",
                value: 0.0,
                allowed: "at least 1",
            });
        }
        Ok(SpaceSaving {
            capacity,
            observations: 0,
            counters: Vec::new(),
            heap: Vec::new(),
            heap_at: Vec::new(),
            slots: HashMap::new(),
        })
    }

    /// Counts one occurrence of `item` and returns its counter's data
    /// (fresh, `A::default()`, when the item was just admitted).
    pub fn observe<Q>(&mut self, item: &Q) -> &mut A
    where
        K: Borrow<Q> + for<'q> From<&'q Q>,
        Q: Hash + Eq + ?Sized,
    {
        self.observations = self.observations.saturating_add(1);
        if let Some(&slot) = self.slots.get(item) {
            let counter = &mut self.counters[slot];
            counter.count = counter.count.saturating_add(1);
            self.sift_down(self.heap_at[slot]);
            return &mut self.counters[slot].data;
        }
        let owned: K = K::from(item);
        if self.counters.len() < self.capacity {
            let slot = self.counters.len();
            self.counters.push(Counter {
                item: owned.clone(),
                count: 1,
                overcount: 0,
                data: A::default(),
            });
            self.heap.push(slot);
            self.heap_at.push(self.heap.len() - 1);
            self.sift_up(self.heap.len() - 1);
            self.slots.insert(owned, slot);
            return &mut self.counters[slot].data;
        }
        // Full: the item with the smallest count gives up its counter.
        let slot = self.heap[0];
        let min = self.counters[slot].count;
        self.slots.remove::<K>(&self.counters[slot].item);
        self.counters[slot] = Counter {
            item: owned.clone(),
            count: min.saturating_add(1),
            overcount: min,
            data: A::default(),
        };
        self.slots.insert(owned, slot);
        self.sift_down(0);
        &mut self.counters[slot].data
    }

    /// The counter of `item`, if it is monitored.
    pub fn get<Q>(&self, item: &Q) -> Option<&Counter<K, A>>
    where
        K: Borrow<Q>,
        Q: Hash + Eq + ?Sized,
    {
        self.slots.get(item).map(|&slot| &self.counters[slot])
    }

    /// Observations counted, `N`.
    pub fn observations(&self) -> u64 {
        self.observations
    }

    /// Items monitored now (at most the capacity).
    pub fn len(&self) -> usize {
        self.counters.len()
    }

    /// Whether nothing was observed yet.
    pub fn is_empty(&self) -> bool {
        self.counters.is_empty()
    }

    /// The number of counters.
    pub fn capacity(&self) -> usize {
        self.capacity
    }

    /// The most times an item that is not monitored can have occurred: the
    /// smallest count once every counter is taken, else 0 (every item seen
    /// so far is monitored, exactly).
    pub fn max_unmonitored(&self) -> u64 {
        if self.counters.len() < self.capacity {
            return 0;
        }
        self.heap
            .first()
            .map_or(0, |&slot| self.counters[slot].count)
    }

    /// Every counter, in slot order (deterministic, not by count).
    pub fn counters(&self) -> &[Counter<K, A>] {
        &self.counters
    }

    /// The `k` counters with the largest counts, largest first; equal
    /// counts put the smaller overcount (the surer count) first, then the
    /// older slot.
    pub fn top(&self, k: usize) -> Vec<&Counter<K, A>> {
        let mut order: Vec<usize> = (0..self.counters.len()).collect();
        order.sort_by(|&a, &b| {
            let (x, y) = (&self.counters[a], &self.counters[b]);
            y.count
                .cmp(&x.count)
                .then(x.overcount.cmp(&y.overcount))
                .then(a.cmp(&b))
        });
        order.truncate(k);
        order.into_iter().map(|slot| &self.counters[slot]).collect()
    }

    fn count_at(&self, heap_index: usize) -> u64 {
        self.counters[self.heap[heap_index]].count
    }

    fn swap(&mut self, a: usize, b: usize) {
        self.heap.swap(a, b);
        self.heap_at[self.heap[a]] = a;
        self.heap_at[self.heap[b]] = b;
    }

    fn sift_up(&mut self, mut at: usize) {
        while at > 0 {
            let parent = (at - 1) / 2;
            if self.count_at(parent) <= self.count_at(at) {
                break;
            }
            self.swap(parent, at);
            at = parent;
        }
    }

    fn sift_down(&mut self, mut at: usize) {
        let len = self.heap.len();
        loop {
            let left = 2 * at + 1;
            if left >= len {
                break;
            }
            let right = left + 1;
            let smaller = if right < len && self.count_at(right) < self.count_at(left) {
                right
            } else {
                left
            };
            if self.count_at(at) <= self.count_at(smaller) {
                break;
            }
            self.swap(at, smaller);
            at = smaller;
        }
    }
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;

    use super::*;

    fn summary(capacity: usize) -> SpaceSaving<String, f64> {
        SpaceSaving::new(capacity).unwrap()
    }

    fn feed(summary: &mut SpaceSaving<String, f64>, stream: &str) {
        for item in stream.split_whitespace() {
            *summary.observe(item) += 1.0;
        }
    }

    fn true_counts(stream: &[&str]) -> BTreeMap<String, u64> {
        let mut counts = BTreeMap::new();
        for item in stream {
            *counts.entry((*item).to_owned()).or_insert(0) += 1;
        }
        counts
    }

    #[test]
    fn counts_are_exact_while_distinct_items_fit() {
        let stream = "glaze mug glaze bowl kiln glaze mug wool";
        let mut s = summary(5);
        feed(&mut s, stream);
        let truth = true_counts(&stream.split_whitespace().collect::<Vec<_>>());
        assert_eq!(s.len(), 5);
        assert_eq!(s.observations(), 8);
        for (item, count) in &truth {
            let counter = s.get(item.as_str()).unwrap();
            assert_eq!((counter.count, counter.overcount), (*count, 0), "{item}");
            assert_eq!(counter.data, *count as f64);
        }
        // Exactly full: an unseen item is known to have occurred 0 times
        // only while a counter is free; now the bound is the smallest count.
        assert_eq!(s.max_unmonitored(), 1);
        let mut roomy = summary(6);
        feed(&mut roomy, stream);
        assert_eq!(roomy.max_unmonitored(), 0);
        let top: Vec<(&str, u64)> = s
            .top(2)
            .iter()
            .map(|c| (c.item.as_str(), c.count))
            .collect();
        assert_eq!(top, [("glaze", 3), ("mug", 2)]);
    }

    #[test]
    fn hand_worked_stream_with_two_counters() {
        // By hand from the update rule (Metwally et al. 2005, section 3),
        // m = 2, stream a b a c c b:
        //   a -> {a:1}          b -> {a:1, b:1}       a -> {a:2, b:1}
        //   c -> b (min 1) out: {a:2, c:2 over 1}     c -> {a:2, c:3 over 1}
        //   b -> a (min 2) out: {c:3 over 1, b:3 over 2}
        // True counts: a 2, b 2, c 2.
        let mut s = summary(2);
        feed(&mut s, "a b a c c b");
        assert_eq!(s.observations(), 6);
        let c = s.get("c").unwrap();
        assert_eq!((c.count, c.overcount, c.guaranteed()), (3, 1, 2));
        let b = s.get("b").unwrap();
        assert_eq!((b.count, b.overcount, b.guaranteed()), (3, 2, 1));
        assert!(s.get("a").is_none());
        // The error bound: count - overcount <= true <= count.
        for (item, truth) in [("b", 2), ("c", 2)] {
            let counter = s.get(item).unwrap();
            assert!(counter.guaranteed() <= truth && truth <= counter.count);
        }
        // a is not monitored: its true count (2) is at most the smallest
        // count (3).
        assert_eq!(s.max_unmonitored(), 3);
        // Counts add up to N.
        assert_eq!(s.counters().iter().map(|c| c.count).sum::<u64>(), 6);
        // Data restarts on admission: b's data covers its last 3 - 2 = 1
        // occurrence, c's its last 2.
        assert_eq!(b.data, 1.0);
        assert_eq!(c.data, 2.0);
    }

    #[test]
    fn an_item_above_n_over_m_is_always_kept() {
        // Metwally et al. 2005, section 3: min <= N/m, and an item with
        // f > min is monitored. Adversarial stream for m = 4: 26 of 100
        // observations are "kiln" (26 > 100/4), spread among 74 items seen
        // once each, which keep evicting one another.
        let mut s = summary(4);
        let mut stream = Vec::new();
        for i in 0..74 {
            stream.push(format!("once{i}"));
            if i % 3 == 0 && stream.iter().filter(|x| *x == "kiln").count() < 26 {
                stream.push("kiln".to_owned());
            }
        }
        while stream.iter().filter(|x| *x == "kiln").count() < 26 {
            stream.push("kiln".to_owned());
        }
        assert_eq!(stream.len(), 100);
        for item in &stream {
            s.observe(item.as_str());
        }
        let kiln = s.get("kiln").expect("an item above N/m is monitored");
        assert!(kiln.guaranteed() <= 26 && 26 <= kiln.count);
        assert!(s.max_unmonitored() <= 100 / 4);
    }

    /// xorshift64* (Vigna 2016, constants from memory): a fixed stream
    /// generator, the same on every machine.
    fn next(state: &mut u64) -> u64 {
        *state ^= *state >> 12;
        *state ^= *state << 25;
        *state ^= *state >> 27;
        state.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }

    #[test]
    fn the_bounds_hold_on_skewed_random_streams() {
        // Seeds 1 to 40; items drawn with a heavy head (item i with weight
        // about 1/(i+1)), checked against exact counts.
        for seed in 1..=40_u64 {
            let mut state = seed;
            let capacity = 3 + (seed as usize % 8);
            let mut s: SpaceSaving<String, f64> = SpaceSaving::new(capacity).unwrap();
            let mut stream = Vec::new();
            for _ in 0..500 {
                let r = next(&mut state) % 1000;
                // Inverse of a harmonic-ish table: small items are common.
                let item = (1000 / (r + 1)).min(60);
                stream.push(format!("w{item}"));
            }
            for item in &stream {
                *s.observe(item.as_str()) += 1.0;
            }
            let refs: Vec<&str> = stream.iter().map(String::as_str).collect();
            let truth = true_counts(&refs);
            let n = stream.len() as u64;
            assert_eq!(s.counters().iter().map(|c| c.count).sum::<u64>(), n);
            assert!(s.max_unmonitored() * capacity as u64 <= n, "seed {seed}");
            for (item, &f) in &truth {
                match s.get(item.as_str()) {
                    Some(c) => {
                        assert!(c.guaranteed() <= f && f <= c.count, "seed {seed} {item}");
                        assert_eq!(c.data, c.guaranteed() as f64, "seed {seed} {item}");
                    }
                    None => {
                        assert!(f <= s.max_unmonitored(), "seed {seed} {item}");
                        assert!(f * capacity as u64 <= n, "seed {seed} {item}");
                    }
                }
            }
        }
    }

    #[test]
    fn the_same_stream_gives_the_same_counters() {
        let run = || {
            let mut s = summary(3);
            feed(&mut s, "x y z x w v x y y q r x");
            s.top(3)
                .iter()
                .map(|c| (c.item.clone(), c.count, c.overcount))
                .collect::<Vec<_>>()
        };
        assert_eq!(run(), run());
    }

    #[test]
    fn zero_capacity_is_refused() {
        assert!(matches!(
            SpaceSaving::<String, ()>::new(0),
            Err(MetricsError::InvalidParameter {
                name: "capacity",
                ..
            })
        ));
    }
}
