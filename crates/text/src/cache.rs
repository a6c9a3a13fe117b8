//! Word and pair features remembered across messages.
//!
//! Most of the hashing of a message goes into its words: each word costs
//! one SipHash for its word feature and one per character n-gram, and each
//! pair of adjacent words one more. The same words come back message after
//! message, so the extractor keeps this cache. It maps a text field and a
//! word to the feature indices computed for that word (its word feature,
//! then its n-grams), and remembers, for each cached word, the index of the
//! pair it formed with each of the last two different words that followed
//! it. A repeated word then costs one lookup in an in-memory table instead
//! of several SipHash calls. Only [`crate::Extractor::extract`] uses the
//! cache; the explanation path computes every feature afresh.
//!
//! A word enters the table the second time it is looked up: a small bit
//! filter notes the first time. Many words are never seen again (numbers,
//! names, random strings meant to defeat filters), and they would only
//! push useful words out of the table and the CPU caches.
//!
//! The cache also marks which words and pairs the current field has given
//! already. Features are binary, so a repeat adds nothing to the vector and
//! is skipped, which keeps duplicates away from the sort.
//!
//! # Why it cannot change a result
//!
//! * A word's indices are a pure function of the hash key, `bits`, the
//!   feature settings, the field and the word, and the first three are
//!   fixed for the extractor that owns the cache. The cache is never
//!   shared, stored or sent anywhere, so an entry holds exactly what
//!   computing the word again would give. The same holds for a pair.
//! * Words are found by field and bytes, compared in full; the table's
//!   hash only says where to look. A pair is found by the slots of its two
//!   words, and slot numbers are only used while the cache has not been
//!   emptied since they were handed out (see [`WordId`]).
//! * What the cache does not hold (a word seen for the first time, a word
//!   longer than [`MAX_WORD_BYTES`], a word whose probes all meet other
//!   words, a pair with such a word) is computed afresh, exactly as without
//!   the cache. The bit filter only ever sends a word to be computed.
//! * Skipping a word or pair the field gave already leaves the set of
//!   indices as it was. A repeat the cache does not recognise (a word that
//!   entered the table on its second occurrence, or one in a field during
//!   which the cache was emptied) is given again, and the sort drops the
//!   duplicate.
//!
//! The unit tests in [`crate::extract`] compare extraction with a warm, a
//! cold, a tiny (often emptied) and no cache on varied messages, and the
//! property tests compare it with the explanation path.
//!
//! # Bounds
//!
//! Message text comes from whoever sends it, so the cache must not grow
//! with it or slow down on crafted input:
//!
//! * It holds at most [`MAX_WORDS`] words and [`MAX_INDICES`] indices (plus
//!   one word's worth). Reaching either limit empties it before the next
//!   word goes in, so its memory stays flat: a 2 MiB table of 64-byte
//!   slots and an 8 KiB filter, allocated at first use, and at most about
//!   1 MiB of indices. Emptying costs nothing: every slot carries the
//!   number of the field walk that last used it, and slots last used before
//!   the cache was emptied count as free.
//! * The table uses open addressing with a fast unkeyed hash, and a lookup
//!   looks at no more than [`MAX_PROBES`] slots. A word whose probes all
//!   meet other words (crafted collisions, say) is not cached and costs
//!   what it would cost without the cache.
//! * Text whose words never come back costs about what it costs without
//!   the cache: each word is hashed for the filter and computed afresh.
//!
//! A general-purpose hash map is not used: each entry would own an
//! allocation, and it cannot bound what a crafted key costs.

/// Slots looked at before a lookup gives up.
pub(crate) const MAX_PROBES: usize = 8;

/// Most words held; reaching it empties the cache.
pub(crate) const MAX_WORDS: usize = 1 << 14;

/// Slots of the table: at most half of them are used.
const SLOTS: usize = 2 * MAX_WORDS;

/// Longest word (in bytes) that is cached; its bytes are kept in its slot.
/// Longer words are rare and seldom repeat.
pub(crate) const MAX_WORD_BYTES: usize = 24;

/// Most indices held: 16 per word on average (a word of `n` characters has
/// about `n` indices with 4-grams).
pub(crate) const MAX_INDICES: usize = MAX_WORDS * 16;

/// Bits of the filter of words seen since it was last reset.
const SEEN_BITS: usize = 1 << 16;

/// The filter is reset when this many of its bits are set, which keeps
/// its false positives below a quarter.
const MAX_SEEN: usize = SEEN_BITS / 4;

/// Pairs remembered per first word: the ones used most recently.
const SUCCESSORS: usize = 2;

/// A pair of a slot's word and a word that followed it.
#[derive(Debug, Clone, Copy, Default)]
struct Successor {
    /// Slot number of the second word + 1; 0 for none.
    word: u32,
    index: u32,
    /// The field walk that last gave this pair; 0 for none.
    stamp: u32,
}

/// A cached word with where its indices are and its recent pairs, in one
/// cache line, so that a lookup reads one line of the table.
#[derive(Debug, Clone, Copy, Default)]
#[repr(C, align(64))]
struct Slot {
    /// High half of the word's table hash (the low half chose the slot).
    hash: u32,
    /// The field walk that last gave this word's indices. The slot is free
    /// if this is below the cache's `epoch`.
    stamp: u32,
    indices_start: u32,
    indices_len: u16,
    text_len: u8,
    field: u8,
    /// The word, padded with zeros.
    text: [u8; MAX_WORD_BYTES],
    successors: [Successor; SUCCESSORS],
}

/// A cached word's slot, valid until the cache is emptied.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct WordId {
    /// The cache's generation when the slot was handed out.
    generation: u32,
    slot: u32,
}

/// The outcome of [`FeatureCache::word`].
#[derive(Debug)]
pub(crate) struct CachedWord<'c> {
    /// The word's slot, if it has one.
    pub(crate) id: Option<WordId>,
    /// The word's indices, or `None` if this field walk gave them already.
    pub(crate) indices: Option<&'c [u32]>,
}

/// Word and pair features of one extractor; see the module doc.
#[derive(Debug, Clone)]
pub(crate) struct FeatureCache {
    /// Empty until first use, then `SLOTS` long.
    slots: Vec<Slot>,
    /// Words held.
    words: usize,
    indices: Vec<u32>,
    /// Indices of a word that is not cached.
    spill: Vec<u32>,
    /// One bit per word hash: set when a word is first looked up. Empty
    /// until first use, then `SEEN_BITS / 64` long.
    seen: Vec<u64>,
    /// Bits set in `seen`.
    seen_count: usize,
    /// Number of the current field walk; starts at 1.
    stamp: u32,
    /// Stamp of the first walk since the cache was last emptied: slots
    /// stamped before it are free.
    epoch: u32,
    /// Counts the times the cache was emptied (wrapping). An id is only
    /// used for the next word, and the cache is emptied at most once per
    /// word, so an id from before an emptying never matches.
    generation: u32,
    max_words: usize,
}

impl Default for FeatureCache {
    fn default() -> Self {
        FeatureCache::with_max_words(MAX_WORDS)
    }
}

/// Fast unkeyed hash of a word and its field, for the table only.
fn word_hash(bytes: &[u8], field: u8) -> u64 {
    const MULTIPLIER: u64 = 0x517c_c1b7_2722_0a95;
    let mut hash = ((bytes.len() as u64) << 8) | u64::from(field);
    let mut chunks = bytes.chunks_exact(8);
    for chunk in &mut chunks {
        let mut block = [0u8; 8];
        block.copy_from_slice(chunk);
        hash = (hash.rotate_left(5) ^ u64::from_le_bytes(block)).wrapping_mul(MULTIPLIER);
    }
    let mut last = 0u64;
    for (i, &byte) in chunks.remainder().iter().enumerate() {
        last |= u64::from(byte) << (8 * i);
    }
    hash = (hash.rotate_left(5) ^ last).wrapping_mul(MULTIPLIER);
    hash ^ (hash >> 29)
}

impl FeatureCache {
    /// A cache that holds at most `max_words` words (at most [`MAX_WORDS`]);
    /// 0 caches nothing.
    pub(crate) fn with_max_words(max_words: usize) -> Self {
        FeatureCache {
            slots: Vec::new(),
            words: 0,
            indices: Vec::new(),
            spill: Vec::new(),
            seen: Vec::new(),
            seen_count: 0,
            stamp: 0,
            epoch: 1,
            generation: 0,
            max_words: max_words.min(MAX_WORDS),
        }
    }

    /// Starts a new field walk: nothing has been given in it yet.
    pub(crate) fn start_field(&mut self) {
        self.next_stamp();
    }

    fn next_stamp(&mut self) {
        if self.stamp == u32::MAX {
            // Old stamps would come round again: clear the table for real.
            self.slots.fill(Slot::default());
            self.words = 0;
            self.indices.clear();
            self.stamp = 0;
            self.epoch = 1;
            self.generation = self.generation.wrapping_add(1);
        }
        self.stamp += 1;
    }

    /// Empties the cache: every slot stamped so far becomes free.
    fn empty(&mut self) {
        self.next_stamp();
        self.epoch = self.stamp;
        self.generation = self.generation.wrapping_add(1);
        self.words = 0;
        self.indices.clear();
    }

    /// The indices of `word` in `field`. On a miss `compute` appends them
    /// to the vector it is given; it must give the same indices every time
    /// for the same field and word. Returns them unless this field walk
    /// gave them already.
    pub(crate) fn word(
        &mut self,
        field: u8,
        word: &str,
        compute: impl FnOnce(&mut Vec<u32>),
    ) -> CachedWord<'_> {
        let bytes = word.as_bytes();
        let Ok(text_len) = u8::try_from(bytes.len()) else {
            return self.uncached(compute);
        };
        if bytes.len() > MAX_WORD_BYTES || self.max_words == 0 {
            return self.uncached(compute);
        }
        let hash = word_hash(bytes, field);
        if !self.has_seen(hash) {
            return self.uncached(compute);
        }
        if self.slots.is_empty() {
            self.slots.resize(SLOTS, Slot::default());
        }
        let mut text = [0u8; MAX_WORD_BYTES];
        text[..bytes.len()].copy_from_slice(bytes);
        let high = (hash >> 32) as u32;
        let mask = SLOTS - 1;
        let mut vacant = None;
        for probe in 0..MAX_PROBES {
            let number = (hash as usize).wrapping_add(probe) & mask;
            let slot = &mut self.slots[number];
            if slot.stamp < self.epoch {
                vacant = Some(number);
                break;
            }
            if slot.hash == high
                && slot.text_len == text_len
                && slot.field == field
                && slot.text == text
            {
                let id = Some(WordId {
                    generation: self.generation,
                    slot: number as u32,
                });
                if slot.stamp == self.stamp {
                    return CachedWord { id, indices: None };
                }
                slot.stamp = self.stamp;
                let start = slot.indices_start as usize;
                let indices = &self.indices[start..start + usize::from(slot.indices_len)];
                return CachedWord {
                    id,
                    indices: Some(indices),
                };
            }
        }
        let Some(mut number) = vacant else {
            return self.uncached(compute);
        };
        if self.words >= self.max_words || self.indices.len() >= MAX_INDICES {
            self.empty();
            number = hash as usize & mask;
        }
        let indices_start = self.indices.len();
        compute(&mut self.indices);
        let (Ok(indices_len), Ok(start)) = (
            u16::try_from(self.indices.len() - indices_start),
            u32::try_from(indices_start),
        ) else {
            // Cannot happen within the limits; stay correct if it did.
            self.spill.clear();
            self.spill.extend(self.indices.drain(indices_start..));
            return CachedWord {
                id: None,
                indices: Some(&self.spill),
            };
        };
        self.slots[number] = Slot {
            hash: high,
            stamp: self.stamp,
            indices_start: start,
            indices_len,
            text_len,
            field,
            text,
            successors: [Successor::default(); SUCCESSORS],
        };
        self.words += 1;
        CachedWord {
            id: Some(WordId {
                generation: self.generation,
                slot: number as u32,
            }),
            indices: Some(&self.indices[indices_start..]),
        }
    }

    /// Whether a word with this table hash may have been looked up before;
    /// marks it as looked up. A word that has not cannot be in the table,
    /// and may never come back, so it is not worth a slot yet.
    fn has_seen(&mut self, hash: u64) -> bool {
        if self.seen.is_empty() {
            self.seen.resize(SEEN_BITS / 64, 0);
        }
        let bit = (hash >> 16) as usize & (SEEN_BITS - 1);
        let (word, mask) = (bit / 64, 1u64 << (bit % 64));
        if self.seen[word] & mask != 0 {
            return true;
        }
        if self.seen_count >= MAX_SEEN {
            // Cached words lose their bits too: each is computed once more.
            self.seen.fill(0);
            self.seen_count = 0;
        }
        self.seen[word] |= mask;
        self.seen_count += 1;
        false
    }

    fn uncached(&mut self, compute: impl FnOnce(&mut Vec<u32>)) -> CachedWord<'_> {
        self.spill.clear();
        compute(&mut self.spill);
        CachedWord {
            id: None,
            indices: Some(&self.spill),
        }
    }

    /// The index of the pair of cached words `first`, `second`, in this
    /// order, of the field they were looked up in. On a miss `compute`
    /// gives it; it must give the same index every time for the same two
    /// words. Returns it unless this field walk gave it already.
    pub(crate) fn pair(
        &mut self,
        first: WordId,
        second: WordId,
        compute: impl FnOnce() -> u32,
    ) -> Option<u32> {
        if first.generation != self.generation || second.generation != self.generation {
            // A slot handed out before the cache was emptied.
            return Some(compute());
        }
        let stamp = self.stamp;
        let word = second.slot + 1;
        let successors = &mut self.slots[first.slot as usize].successors;
        if let Some(known) = successors.iter_mut().find(|next| next.word == word) {
            if known.stamp == stamp {
                return None;
            }
            known.stamp = stamp;
            return Some(known.index);
        }
        let index = compute();
        // Replace the pair used longest ago (an unused one has stamp 0).
        if let Some(oldest) = successors.iter_mut().min_by_key(|next| next.stamp) {
            *oldest = Successor { word, index, stamp };
        }
        Some(index)
    }

    /// Words held, for tests.
    #[cfg(test)]
    pub(crate) fn word_count(&self) -> usize {
        self.words
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A stand-in for hashing: the word's bytes summed, then its length.
    fn fake_indices(word: &str) -> impl FnOnce(&mut Vec<u32>) + '_ {
        move |out: &mut Vec<u32>| {
            out.push(word.bytes().map(u32::from).sum());
            out.push(word.len() as u32);
        }
    }

    fn look(cache: &mut FeatureCache, field: u8, word: &str) -> (Option<WordId>, Option<Vec<u32>>) {
        let found = cache.word(field, word, fake_indices(word));
        (found.id, found.indices.map(<[u32]>::to_vec))
    }

    /// Looks `word` up until it has a slot (twice: the filter, then the table).
    fn cached(cache: &mut FeatureCache, field: u8, word: &str) -> WordId {
        look(cache, field, word);
        look(cache, field, word).0.unwrap()
    }

    #[test]
    fn words_enter_the_table_on_their_second_lookup_and_repeats_are_skipped() {
        let mut cache = FeatureCache::default();
        cache.start_field();
        assert_eq!(look(&mut cache, 1, "the"), (None, Some(vec![321, 3])));
        let (id, again) = look(&mut cache, 1, "the");
        assert!(id.is_some());
        assert_eq!(again, Some(vec![321, 3]), "not yet marked as given");
        assert_eq!(look(&mut cache, 1, "the"), (id, None));
        // Another field is another word.
        let other = cached(&mut cache, 2, "the");
        assert_ne!(Some(other), id);
        cache.start_field();
        let is_computed = std::cell::Cell::new(false);
        let found = cache.word(1, "the", |_| is_computed.set(true));
        assert_eq!(found.indices, Some(&[321, 3][..]));
        assert!(!is_computed.get(), "the next field reads the cache");
    }

    #[test]
    fn long_words_and_a_zero_size_cache_compute_every_time() {
        let long = "x".repeat(MAX_WORD_BYTES + 1);
        let mut cache = FeatureCache::default();
        cache.start_field();
        for _ in 0..3 {
            let (id, indices) = look(&mut cache, 1, &long);
            assert_eq!(id, None);
            assert_eq!(indices.map(|found| found[1]), Some(long.len() as u32));
        }
        let mut off = FeatureCache::with_max_words(0);
        off.start_field();
        for _ in 0..3 {
            assert_eq!(look(&mut off, 1, "the"), (None, Some(vec![321, 3])));
        }
        assert_eq!(off.word_count(), 0);
    }

    #[test]
    fn a_full_cache_is_emptied_and_old_ids_no_longer_find_pairs() {
        let mut cache = FeatureCache::with_max_words(4);
        cache.start_field();
        let [a, b, _, _] = ["a", "b", "c", "d"].map(|word| cached(&mut cache, 1, word));
        assert_eq!(cache.word_count(), 4);
        assert_eq!(cache.pair(a, b, || 7), Some(7));
        assert_eq!(cache.pair(a, b, || 8), None, "repeat in field");
        // The fifth word empties the cache.
        let e = cached(&mut cache, 1, "e");
        assert_eq!(cache.word_count(), 1);
        assert_eq!(cache.pair(a, b, || 9), Some(9), "old ids compute afresh");
        // Emptied in the middle of the field, "b" is given again: a
        // harmless duplicate.
        assert_eq!(look(&mut cache, 1, "b").1, Some(vec![98, 1]));
        let b = look(&mut cache, 1, "b").0.unwrap();
        assert_eq!(cache.pair(e, b, || 10), Some(10));
        cache.start_field();
        assert_eq!(cache.pair(e, b, || 11), Some(10), "cached pair");
    }

    #[test]
    fn only_the_latest_pairs_of_a_word_are_kept() {
        let mut cache = FeatureCache::default();
        cache.start_field();
        let [a, b, c, d] = ["a", "b", "c", "d"].map(|word| cached(&mut cache, 1, word));
        assert_eq!(cache.pair(a, b, || 1), Some(1));
        assert_eq!(cache.pair(a, c, || 2), Some(2));
        cache.start_field();
        assert_eq!(cache.pair(a, b, || 9), Some(1), "b is used again");
        // c was used longest ago, so d takes its place.
        assert_eq!(cache.pair(a, d, || 3), Some(3));
        cache.start_field();
        assert_eq!(cache.pair(a, b, || 9), Some(1));
        assert_eq!(cache.pair(a, d, || 9), Some(3));
        assert_eq!(cache.pair(a, c, || 2), Some(2), "computed again");
        // Order matters: (b, a) is another pair.
        assert_eq!(cache.pair(b, a, || 4), Some(4));
    }

    #[test]
    fn stamps_wrapping_round_clear_the_table() {
        let mut cache = FeatureCache::default();
        cache.start_field();
        let old = cached(&mut cache, 1, "the");
        cache.stamp = u32::MAX;
        cache.start_field();
        assert_eq!((cache.stamp, cache.epoch), (1, 1));
        assert_eq!(cache.word_count(), 0);
        assert!(cache.slots.iter().all(|slot| slot.stamp == 0));
        let new = cached(&mut cache, 1, "the");
        assert_eq!(cache.pair(old, new, || 5), Some(5));
        assert_eq!(cache.pair(old, new, || 6), Some(6), "old id not cached");
    }

    #[test]
    fn colliding_words_fall_back_to_computing() {
        // Fill every probe slot of one home with another word by hand, then
        // look up a word with that home: it is computed, not confused.
        let mut cache = FeatureCache::default();
        cache.start_field();
        let target = "target";
        look(&mut cache, 1, target);
        cached(&mut cache, 1, "filler");
        let filler = cache.slots.iter().find(|slot| slot.text_len > 0).copied();
        let home = word_hash(target.as_bytes(), 1) as usize & (SLOTS - 1);
        for probe in 0..MAX_PROBES {
            cache.slots[(home + probe) & (SLOTS - 1)] = filler.unwrap();
        }
        for _ in 0..2 {
            assert_eq!(look(&mut cache, 1, target), (None, Some(vec![647, 6])));
        }
    }

    #[test]
    fn the_filter_is_reset_before_a_quarter_of_it_is_set() {
        let mut cache = FeatureCache::default();
        // Hashes whose filter bits are 0, 1, 2, ...
        let mut resets = 0;
        for bit in 0..SEEN_BITS as u64 {
            let before = cache.seen_count;
            assert!(!cache.has_seen(bit << 16), "{bit}");
            resets += usize::from(cache.seen_count < before);
            assert!(cache.seen_count <= MAX_SEEN);
        }
        assert_eq!(resets, SEEN_BITS / MAX_SEEN - 1);
        assert!(!cache.has_seen(0), "forgotten at the last reset");
        assert!(cache.has_seen(0));
    }

    #[test]
    fn a_slot_is_one_cache_line() {
        assert_eq!(std::mem::size_of::<Slot>(), 64);
        assert_eq!(std::mem::align_of::<Slot>(), 64);
    }

    #[test]
    fn hash_uses_every_byte_and_the_field() {
        assert_ne!(word_hash(b"abcdefgh1", 1), word_hash(b"abcdefgh2", 1));
        assert_ne!(word_hash(b"a", 1), word_hash(b"a\0", 1));
        assert_ne!(word_hash(b"", 1), word_hash(b"\0", 1));
        assert_ne!(word_hash(b"offer", 1), word_hash(b"offer", 10));
    }
}
