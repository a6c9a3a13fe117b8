//! Sorting a message's feature indices: a bucket pass on the top bits, then
//! insertion sort inside each bucket.
//!
//! Indices are keyed hashes, so they are spread evenly over `0..2^bits`
//! and nobody without the key can bunch them up. With about one bucket per
//! index, each bucket holds one or two entries and the whole sort is
//! linear. Measured, it does less work than `sort_unstable` from about a
//! hundred indices (a short message) on, and far less for the thousands of
//! a long body. Buckets that do come out large fall back to `sort_unstable`,
//! so the worst case stays `O(n log n)`.

/// Below this many indices a comparison sort is as fast.
const MIN_BUCKETED: usize = 32;

/// Buckets larger than this are sorted with `sort_unstable`.
const MAX_INSERTION: usize = 16;

/// Reusable buffers for [`sort_dedup`].
#[derive(Debug, Clone, Default)]
pub(crate) struct SortScratch {
    sorted: Vec<u32>,
    starts: Vec<u32>,
}

/// Sorts `indices` ascending and removes duplicates. Every index must be
/// below `2^bits`.
pub(crate) fn sort_dedup(indices: &mut Vec<u32>, bits: u8, scratch: &mut SortScratch) {
    let len = indices.len();
    if len < MIN_BUCKETED {
        indices.sort_unstable();
        indices.dedup();
        return;
    }
    let bucket_bits = len.ilog2().min(u32::from(bits));
    let shift = u32::from(bits) - bucket_bits;
    let buckets = 1usize << bucket_bits;
    let bucket_of = |index: u32| (index >> shift) as usize;

    // starts[b + 1] counts bucket b, then becomes the start of bucket b + 1.
    let starts = &mut scratch.starts;
    starts.clear();
    starts.resize(buckets + 1, 0);
    for &index in indices.iter() {
        starts[bucket_of(index) + 1] += 1;
    }
    for bucket in 0..buckets {
        starts[bucket + 1] += starts[bucket];
    }
    let sorted = &mut scratch.sorted;
    sorted.clear();
    sorted.resize(len, 0);
    let sorted = &mut sorted[..len];
    // Fill each bucket from its start; `starts[b]` walks to the end of b.
    for &index in indices.iter() {
        let slot = &mut starts[bucket_of(index)];
        sorted[*slot as usize] = index;
        *slot += 1;
    }
    // Now starts[b] is the end of bucket b, which is where b + 1 begins.
    let mut begin = 0usize;
    for &end in &starts[..buckets] {
        let end = end as usize;
        if end - begin > 1 {
            let run = &mut sorted[begin..end];
            if run.len() > MAX_INSERTION {
                run.sort_unstable();
            } else {
                insertion_sort(run);
            }
        }
        begin = end;
    }
    indices.copy_from_slice(sorted);
    indices.dedup();
}

fn insertion_sort(run: &mut [u32]) {
    for i in 1..run.len() {
        let value = run[i];
        let mut j = i;
        while j > 0 && run[j - 1] > value {
            run[j] = run[j - 1];
            j -= 1;
        }
        run[j] = value;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn reference(mut indices: Vec<u32>) -> Vec<u32> {
        indices.sort_unstable();
        indices.dedup();
        indices
    }

    #[test]
    fn sorts_and_deduplicates() {
        let mut scratch = SortScratch::default();
        let spread: Vec<u32> = (0..500u32)
            .map(|i| i.wrapping_mul(2_654_435_761) >> 10)
            .collect();
        let mut with_duplicates = spread.clone();
        with_duplicates.extend_from_slice(&spread[..100]);
        let mut indices = with_duplicates.clone();
        sort_dedup(&mut indices, 22, &mut scratch);
        assert_eq!(indices, reference(with_duplicates));
    }

    #[test]
    fn bunched_indices_fall_back_to_sort_unstable() {
        // All in the lowest bucket: still correct.
        let mut scratch = SortScratch::default();
        let bunched: Vec<u32> = (0..200u32).rev().collect();
        let mut indices = bunched.clone();
        sort_dedup(&mut indices, 30, &mut scratch);
        assert_eq!(indices, reference(bunched));
    }

    proptest! {
        #[test]
        fn equals_sort_then_dedup(bits in 8u8..=30, raw in prop::collection::vec(any::<u32>(), 0..300)) {
            let mask = (1u32 << bits) - 1;
            let indices: Vec<u32> = raw.iter().map(|index| index & mask).collect();
            let mut scratch = SortScratch::default();
            let mut sorted = indices.clone();
            sort_dedup(&mut sorted, bits, &mut scratch);
            prop_assert_eq!(sorted, reference(indices));
        }
    }
}
