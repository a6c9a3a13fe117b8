//! Sorting a message's feature indices: a bucket pass on the top bits, then
//! one insertion-sort pass over the whole array, then duplicates out.
//!
//! Indices are keyed hashes, so they are spread evenly over `0..2^bits`
//! and nobody without the key can bunch them up. With between one and two
//! buckets per index, most buckets hold at most one entry, so after the
//! bucket pass the array is sorted but for a few neighbours, and the
//! insertion sort moves each index at most across its own bucket: the
//! whole sort is linear, and its branches are nearly always predicted.
//! Measured, it does less work than `sort_unstable` from a few dozen
//! indices (a short message) on, and far less for the thousands of a long
//! body. If any bucket does come out larger than [`MAX_BUCKET`], the whole
//! array goes to `sort_unstable` instead, so the worst case stays
//! `O(n log n)`.

/// Below this many indices a comparison sort is as fast.
const MIN_BUCKETED: usize = 32;

/// Largest bucket the insertion sort is trusted with.
const MAX_BUCKET: u32 = 16;

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
    let bucket_bits = (len.ilog2() + 1).min(u32::from(bits));
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
    let mut largest = 0;
    for bucket in 0..buckets {
        largest = largest.max(starts[bucket + 1]);
        starts[bucket + 1] += starts[bucket];
    }
    if largest > MAX_BUCKET {
        indices.sort_unstable();
        indices.dedup();
        return;
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
    // Buckets are in order; only entries within one bucket may not be.
    for i in 1..len {
        let value = sorted[i];
        let mut j = i;
        while j > 0 && sorted[j - 1] > value {
            sorted[j] = sorted[j - 1];
            j -= 1;
        }
        sorted[j] = value;
    }
    // Copy back without duplicates: write every value, keep it only if it
    // differs from the one before. No branch depends on the data.
    indices[0] = sorted[0];
    let mut kept = 1;
    for i in 1..len {
        indices[kept] = sorted[i];
        kept += usize::from(sorted[i] != sorted[i - 1]);
    }
    indices.truncate(kept);
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
    fn duplicates_at_both_ends_and_in_one_bucket() {
        let mut scratch = SortScratch::default();
        let mut with_duplicates: Vec<u32> = (0..100u32).map(|i| (i * 41_943) % (1 << 22)).collect();
        with_duplicates.extend_from_slice(&[0, 0, 4_194_303, 4_194_303, 77, 77, 77]);
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
        fn equals_sort_then_dedup(
            bits in 8u8..=30,
            raw in prop::collection::vec(prop_oneof![4 => any::<u32>(), 1 => (0u32..4).prop_map(|i| i << 20)], 0..600),
        ) {
            let mask = (1u32 << bits) - 1;
            let indices: Vec<u32> = raw.iter().map(|index| index & mask).collect();
            let mut scratch = SortScratch::default();
            let mut sorted = indices.clone();
            sort_dedup(&mut sorted, bits, &mut scratch);
            prop_assert_eq!(sorted, reference(indices));
        }
    }
}
