//! The model: a table of hashed slots, the update rule that changes it, and
//! the questions callers ask of it (`p_junk`, reasons, heaviest features).
//!
//! The server's learner task owns the one `Model` that learns; scoring works
//! on snapshots (`Clone`). The table has `2^bits` slots of two `f32` each
//! (see the `update` module for what they hold), allocated once in `new`;
//! `predict` and `learn` never allocate.

use std::cmp::{Ordering, Reverse};
use std::collections::BinaryHeap;
use std::fmt;
use std::ops::RangeInclusive;

use crate::rule::{RuleProblem, UpdateRule, list_problems};
use crate::table::SlotTable;
use crate::update::{self, Ftrl, Slot};

/// The table sizes a model may have, as powers of two. 2^8 slots is the
/// smallest that is useful for tests; 2^30 slots take 8 GiB.
pub const BITS_RANGE: RangeInclusive<u8> = 8..=30;

/// Why a model could not be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    /// `bits` is outside [`BITS_RANGE`].
    #[error("model.bits = {bits}: must be between 8 and 30")]
    BitsOutOfRange {
        /// The value given.
        bits: u8,
    },
    /// The update rule's hyper-parameters failed `UpdateRule::validate`.
    #[error("invalid update rule: {listed}", listed = list_problems(.problems))]
    InvalidRule {
        /// Every problem found.
        problems: Vec<RuleProblem>,
    },
    /// A setting of `Model::fit_batch` is out of range.
    #[error("batch fit: {key} = {value}: {allowed}")]
    InvalidFitSetting {
        /// Which argument.
        key: &'static str,
        /// The value given.
        value: f64,
        /// What is allowed instead.
        allowed: &'static str,
    },
    /// `Model::fit_batch` was given no examples, so the mean loss is
    /// undefined.
    #[error("batch fit: no examples given")]
    EmptyBatch,
    /// The system refused the memory for the slot table.
    #[error("cannot map {bytes} bytes for the model's slot table: {reason}")]
    TableAllocation {
        /// Size of the table asked for.
        bytes: usize,
        /// What the system said.
        reason: String,
    },
}

/// One feature's share of a prediction: how far it pushed the margin
/// `w . x`, and so `p_junk`, up (positive) or down (negative).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Contribution {
    /// The index as the caller gave it (before masking), so that the caller
    /// can look up the feature's name.
    pub index: u32,
    /// The feature's value `x_i`.
    pub value: f32,
    /// The weight `w_i` of the slot it hashed to.
    pub weight: f64,
    /// `w_i * x_i`.
    pub contribution: f64,
}

/// Logistic regression `p_junk = sigma(w . x)` over `2^bits` hashed slots,
/// learning online with one of the [`UpdateRule`]s.
///
/// Indices at or above `2^bits` are masked to their low `bits` bits, as if
/// the hash had been taken modulo the table size; no index can make a method
/// panic.
#[derive(Clone)]
pub struct Model {
    bits: u8,
    mask: u32,
    rule: UpdateRule,
    slots: SlotTable,
    examples_seen: u64,
}

impl Model {
    /// An all-zero model with `2^bits` slots; every prediction is 1/2 until
    /// it learns.
    ///
    /// Fails if `bits` is outside 8..=30 or the rule does not validate. The
    /// table is allocated zeroed in one piece (`2^bits x 8` bytes: 32 MiB at
    /// 22 bits), so pages the model never touches cost no physical memory.
    pub fn new(bits: u8, rule: UpdateRule) -> Result<Model, ModelError> {
        if !BITS_RANGE.contains(&bits) {
            return Err(ModelError::BitsOutOfRange { bits });
        }
        rule.validate()
            .map_err(|problems| ModelError::InvalidRule { problems })?;
        let len = 1usize << bits;
        Ok(Model {
            bits,
            mask: (len - 1) as u32,
            rule,
            slots: SlotTable::zeroed(len).map_err(|err| ModelError::TableAllocation {
                bytes: len * std::mem::size_of::<Slot>(),
                reason: err.to_string(),
            })?,
            examples_seen: 0,
        })
    }

    /// The table size as a power of two.
    pub fn bits(&self) -> u8 {
        self.bits
    }

    /// The update rule and its hyper-parameters.
    pub fn rule(&self) -> UpdateRule {
        self.rule
    }

    /// How many examples `learn` has applied since the model was created
    /// (carried through checkpoints).
    pub fn examples_seen(&self) -> u64 {
        self.examples_seen
    }

    /// The slot an index lands in.
    #[inline]
    fn slot_of(&self, index: u32) -> usize {
        (index & self.mask) as usize
    }

    /// The margin `w . x`. Entries whose value is NaN or infinite are
    /// skipped. Always finite.
    pub fn margin(&self, x: &[(u32, f32)]) -> f64 {
        match self.rule {
            UpdateRule::Adagrad { .. } => update::adagrad_margin(&self.slots, self.mask, x),
            UpdateRule::Ftrl {
                alpha,
                beta,
                l1,
                l2,
            } => Ftrl {
                alpha,
                beta,
                l1,
                l2,
            }
            .margin(&self.slots, self.mask, x),
        }
    }

    /// `p_junk = sigma(w . x)`, in [0, 1].
    pub fn predict(&self, x: &[(u32, f32)]) -> f64 {
        crate::logistic::sigmoid(self.margin(x))
    }

    /// Applies one labelled example (`is_junk` true for junk, false for
    /// fine) with the model's update rule, and returns `p_junk` as predicted
    /// *before* the update, which is what progressive (test-then-train)
    /// evaluation needs, without a second dot product.
    ///
    /// Allocation-free; the cost is two passes over `x`.
    pub fn learn(&mut self, x: &[(u32, f32)], is_junk: bool) -> f64 {
        self.examples_seen = self.examples_seen.saturating_add(1);
        match self.rule {
            UpdateRule::Adagrad { eta, l2, delta } => {
                update::adagrad_learn(&mut self.slots, self.mask, (eta, l2, delta), x, is_junk)
            }
            UpdateRule::Ftrl {
                alpha,
                beta,
                l1,
                l2,
            } => Ftrl {
                alpha,
                beta,
                l1,
                l2,
            }
            .learn(&mut self.slots, self.mask, x, is_junk),
        }
    }

    /// The weight of the slot `index` lands in.
    pub fn weight(&self, index: u32) -> f64 {
        self.slot_weight(self.slots[self.slot_of(index)])
    }

    #[inline]
    fn slot_weight(&self, slot: Slot) -> f64 {
        match self.rule {
            UpdateRule::Adagrad { .. } => f64::from(slot[0]),
            UpdateRule::Ftrl {
                alpha,
                beta,
                l1,
                l2,
            } => Ftrl {
                alpha,
                beta,
                l1,
                l2,
            }
            .slot_weight(slot),
        }
    }

    /// The reasons for a prediction: the `k` entries of `x` with the largest
    /// `|w_i x_i|`, largest first, signed (positive pushes towards junk).
    ///
    /// Entries contributing exactly 0 (an unseen feature, or one that FTRL's
    /// L1 term holds at 0) are left out, as are non-finite values. Equal
    /// magnitudes are ordered by index, so the output is deterministic.
    pub fn explain(&self, x: &[(u32, f32)], k: usize) -> Vec<Contribution> {
        let mut reasons: Vec<Contribution> = x
            .iter()
            .filter(|(_, value)| value.is_finite())
            .filter_map(|&(index, value)| {
                let weight = self.weight(index);
                let contribution = weight * f64::from(value);
                (contribution != 0.0).then_some(Contribution {
                    index,
                    value,
                    weight,
                    contribution,
                })
            })
            .collect();
        reasons.sort_by(|a, b| {
            b.contribution
                .abs()
                .total_cmp(&a.contribution.abs())
                .then(a.index.cmp(&b.index))
        });
        reasons.truncate(k);
        reasons
    }

    /// The `k` most positive weights (most junk-like first) and the `k` most
    /// negative (most fine-like first), as (slot index, weight). Zero weights
    /// are never listed; equal weights are ordered by index.
    ///
    /// Scans the whole table: meant for reports, not for the scoring path.
    #[expect(
        clippy::type_complexity,
        reason = "two plain lists read more clearly than an alias that hides them"
    )]
    pub fn top_weights(&self, k: usize) -> (Vec<(u32, f64)>, Vec<(u32, f64)>) {
        if k == 0 {
            return (Vec::new(), Vec::new());
        }
        // Min-heaps of the best k seen so far; the root is the weakest.
        let mut junk_like: BinaryHeap<Reverse<Ranked>> = BinaryHeap::with_capacity(k + 1);
        let mut fine_like: BinaryHeap<Reverse<Ranked>> = BinaryHeap::with_capacity(k + 1);
        for (index, &slot) in self.slots.iter().enumerate() {
            let weight = self.slot_weight(slot);
            let (heap, magnitude) = if weight > 0.0 {
                (&mut junk_like, weight)
            } else if weight < 0.0 {
                (&mut fine_like, -weight)
            } else {
                continue;
            };
            heap.push(Reverse(Ranked {
                magnitude,
                index: index as u32,
            }));
            if heap.len() > k {
                heap.pop();
            }
        }
        let finish = |heap: BinaryHeap<Reverse<Ranked>>, sign: f64| -> Vec<(u32, f64)> {
            // Ascending order of Reverse is descending order of Ranked.
            heap.into_sorted_vec()
                .into_iter()
                .map(|Reverse(r)| (r.index, sign * r.magnitude))
                .collect()
        };
        (finish(junk_like, 1.0), finish(fine_like, -1.0))
    }

    /// How many slots hold any state (a slot counts once either of its two
    /// numbers is not +0.0). This is what a checkpoint stores. Scans the
    /// whole table.
    pub fn nonzero_slots(&self) -> usize {
        self.slots
            .iter()
            .filter(|slot| !is_empty_slot(**slot))
            .count()
    }

    /// How many slots have a weight other than 0. Under FTRL with L1 this is
    /// usually far below `nonzero_slots`. Scans the whole table.
    pub fn nonzero_weights(&self) -> usize {
        self.slots
            .iter()
            .filter(|slot| self.slot_weight(**slot) != 0.0)
            .count()
    }

    /// Bytes of memory the model holds: the table plus the struct itself.
    /// This is what was allocated; pages of the table that were never
    /// written may not be resident yet.
    pub fn memory_bytes(&self) -> usize {
        std::mem::size_of::<Model>() + self.slots.byte_len()
    }

    /// The raw table, for the checkpoint writer.
    pub(crate) fn slots(&self) -> &[Slot] {
        &self.slots
    }

    /// Rebuilds a model from checkpointed state; the caller has validated
    /// every value and that indices are below `2^bits`.
    pub(crate) fn from_parts(
        bits: u8,
        rule: UpdateRule,
        examples_seen: u64,
        stored: impl IntoIterator<Item = (u32, Slot)>,
    ) -> Result<Model, ModelError> {
        let mut model = Model::new(bits, rule)?;
        model.examples_seen = examples_seen;
        for (index, slot) in stored {
            let at = model.slot_of(index);
            model.slots[at] = slot;
        }
        Ok(model)
    }
}

/// Whether a slot is in its initial state. Compares bits, so a stored -0.0
/// counts as state and survives a checkpoint exactly.
pub(crate) fn is_empty_slot(slot: Slot) -> bool {
    slot[0].to_bits() == 0 && slot[1].to_bits() == 0
}

/// Two models are equal when they are bit-identical: same size, rule and
/// example count, and every stored `f32` has the same bits.
impl PartialEq for Model {
    fn eq(&self, other: &Model) -> bool {
        self.bits == other.bits
            && self.rule == other.rule
            && self.examples_seen == other.examples_seen
            && self.slots.len() == other.slots.len()
            && self
                .slots
                .iter()
                .zip(other.slots.iter())
                .all(|(a, b)| a[0].to_bits() == b[0].to_bits() && a[1].to_bits() == b[1].to_bits())
    }
}

impl fmt::Debug for Model {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // The table has millions of slots; show its size, not its contents.
        f.debug_struct("Model")
            .field("bits", &self.bits)
            .field("rule", &self.rule)
            .field("examples_seen", &self.examples_seen)
            .field("slots", &self.slots.len())
            .finish()
    }
}

/// A weight's magnitude and slot, ordered by magnitude and then by lower
/// index first, so that rankings are total and deterministic.
#[derive(Debug, Clone, Copy)]
struct Ranked {
    magnitude: f64,
    index: u32,
}

impl Ord for Ranked {
    fn cmp(&self, other: &Ranked) -> Ordering {
        self.magnitude
            .total_cmp(&other.magnitude)
            .then(other.index.cmp(&self.index))
    }
}

impl PartialOrd for Ranked {
    fn partial_cmp(&self, other: &Ranked) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl PartialEq for Ranked {
    fn eq(&self, other: &Ranked) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}

impl Eq for Ranked {}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logistic::{log_loss, sigmoid};
    use std::f64::consts::FRAC_1_SQRT_2;

    fn adagrad(eta: f64, l2: f64, delta: f64) -> UpdateRule {
        UpdateRule::Adagrad { eta, l2, delta }
    }

    fn ftrl(alpha: f64, beta: f64, l1: f64, l2: f64) -> UpdateRule {
        UpdateRule::Ftrl {
            alpha,
            beta,
            l1,
            l2,
        }
    }

    fn assert_close(got: f64, expected: f64, tolerance: f64, what: &str) {
        assert!(
            (got - expected).abs() <= tolerance,
            "{what}: got {got}, expected {expected}"
        );
    }

    /// Deterministic pseudo-random numbers: Knuth's MMIX LCG constants
    /// (The Art of Computer Programming, vol. 2, section 3.3.4, table 1).
    struct Lcg(u64);

    impl Lcg {
        fn next_u32(&mut self) -> u32 {
            self.0 = self
                .0
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (self.0 >> 32) as u32
        }

        /// A uniform number in [0, 1).
        fn unit(&mut self) -> f64 {
            f64::from(self.next_u32()) / 4_294_967_296.0
        }
    }

    /// 1,000 examples over 60 slot indices `7919 k` (most above 2^12, so
    /// masking is exercised; 7919 is odd, so no two land in the same slot at
    /// 12 bits), 5 to 20 active features each with values in (0, 1]. Slots
    /// with `k % 3 == 0` lean junk, `k % 3 == 1` lean fine; the label says
    /// which side weighs more, flipped 5% of the time.
    fn random_examples(seed: u64) -> Vec<(Vec<(u32, f32)>, bool)> {
        let mut lcg = Lcg(seed);
        (0..1000)
            .map(|_| {
                let active = 5 + (lcg.next_u32() % 16) as usize;
                let mut x: Vec<(u32, f32)> = (0..active)
                    .map(|_| (lcg.next_u32() % 60 * 7919, (1.0 - lcg.unit()) as f32))
                    .collect();
                x.sort_by_key(|&(index, _)| index);
                x.dedup_by_key(|&mut (index, _)| index);
                let lean = |side: u32| -> f32 {
                    x.iter()
                        .filter(|(index, _)| index / 7919 % 3 == side)
                        .map(|(_, value)| value)
                        .sum()
                };
                let is_junk = (lean(0) > lean(1)) != (lcg.unit() < 0.05);
                (x, is_junk)
            })
            .collect()
    }

    #[test]
    fn bits_outside_the_range_fail() {
        let rule = adagrad(0.1, 0.0, 0.0);
        assert_eq!(
            Model::new(7, rule).unwrap_err(),
            ModelError::BitsOutOfRange { bits: 7 }
        );
        assert_eq!(
            Model::new(31, rule).unwrap_err().to_string(),
            "model.bits = 31: must be between 8 and 30"
        );
        assert!(Model::new(8, rule).is_ok());
    }

    #[test]
    fn an_invalid_rule_fails_with_every_problem() {
        let err = Model::new(8, ftrl(-1.0, f64::NAN, 0.0, 0.0)).unwrap_err();
        assert_eq!(
            err.to_string(),
            "invalid update rule: model.alpha = -1: must be a number from 1e-9 to 1e9; \
             model.beta = NaN: must be a number from 0 to 1e9"
        );
    }

    #[test]
    fn an_all_zero_model_predicts_one_half() {
        // sigma(0) = 1/2: an untrained model is undecided. Common practice,
        // no source.
        let x = [(3, 0.5), (70, 1.0), (4000, -2.0)];
        for rule in [adagrad(0.1, 0.0, 0.0), ftrl(0.1, 1.0, 1.0, 0.0)] {
            let model = Model::new(10, rule).unwrap();
            assert_eq!(model.margin(&x), 0.0);
            assert_eq!(model.predict(&x), 0.5);
            assert_eq!(model.predict(&[]), 0.5);
        }
    }

    #[test]
    fn adagrad_matches_a_hand_worked_example() {
        // Diagonal AdaGrad, Duchi, Hazan and Singer, JMLR 2011, Figure 1,
        // in the per-coordinate form g_i = (p - y) x_i + l2 w_i,
        // G_i += g_i^2, w_i -= eta g_i / (delta + sqrt(G_i)), worked step by
        // step with a calculator (intermediate values shown to 8 digits).
        // eta = 0.5, l2 = 0.1, delta = 0.01; c = 1/sqrt(2) = 0.70710678.
        // The model stores f32, hence the 1e-6 tolerance.
        let mut model = Model::new(8, adagrad(0.5, 0.1, 0.01)).unwrap();
        let c = FRAC_1_SQRT_2 as f32;
        let x12 = [(1, c), (2, c)];
        let x13 = [(1, c), (3, c)];

        // Step 1, x = {1: c, 2: c}, junk. w = 0 so p = 1/2.
        //   g = (0.5 - 1) c = -0.35355339; G = 0.125; sqrt(G) = 0.35355339
        //   w = 0 + 0.5 * 0.35355339 / 0.36355339 = 0.48624686 (both slots)
        assert_eq!(model.learn(&x12, true), 0.5);
        assert_close(model.weight(1), 0.48624686, 1e-6, "step 1, w1");
        assert_close(model.weight(2), 0.48624686, 1e-6, "step 1, w2");

        // Step 2, same x, junk.
        //   margin = 2 * 0.48624686 c = 0.68765691; p = 0.66544549
        //   g = (0.66544549 - 1) c + 0.1 * 0.48624686 = -0.18794108
        //   G = 0.125 + 0.03532185 = 0.16032185; sqrt(G) = 0.40040211
        //   w = 0.48624686 + 0.5 * 0.18794108 / 0.41040211 = 0.71521873
        let p = model.learn(&x12, true);
        assert_close(p, 0.66544549, 1e-6, "step 2, p before");
        assert_close(model.weight(1), 0.71521873, 1e-6, "step 2, w1");
        assert_close(model.weight(2), 0.71521873, 1e-6, "step 2, w2");

        // Step 3, x = {1: c, 3: c}, fine. Slot 2 is not active, so the lazy
        // L2 leaves it alone.
        //   margin = 0.71521873 c = 0.50573601; p = 0.62380637
        //   slot 1: g = 0.62380637 c + 0.1 * 0.71521873 = 0.51261958
        //           G = 0.16032185 + 0.26277884 = 0.42310069
        //           sqrt(G) = 0.65046190
        //           w = 0.71521873 - 0.5 * 0.51261958 / 0.66046190
        //             = 0.32714216
        //   slot 3: g = 0.62380637 c = 0.44109771; G = 0.19456719
        //           sqrt(G) = 0.44109771
        //           w = 0 - 0.5 * 0.44109771 / 0.45109771 = -0.48891593
        let p = model.learn(&x13, false);
        assert_close(p, 0.62380637, 1e-6, "step 3, p before");
        assert_close(model.weight(1), 0.32714216, 1e-6, "step 3, w1");
        assert_close(model.weight(2), 0.71521873, 1e-6, "step 3, w2");
        assert_close(model.weight(3), -0.48891593, 1e-6, "step 3, w3");
        assert_close(f64::from(model.slots[1][1]), 0.42310069, 1e-6, "G1");
        assert_eq!(model.examples_seen(), 3);
    }

    #[test]
    fn ftrl_matches_a_hand_worked_example() {
        // FTRL-Proximal, McMahan et al., KDD 2013, Algorithm 1, worked step
        // by step with a calculator (intermediate values to 8 digits):
        //   w_i = 0 if |z_i| <= l1
        //       else -(z_i - sgn(z_i) l1) / ((beta + sqrt(n_i)) / alpha + l2)
        //   g_i = (p - y) x_i
        //   sigma_i = (sqrt(n_i + g_i^2) - sqrt(n_i)) / alpha
        //   z_i += g_i - sigma_i w_i;  n_i += g_i^2
        // alpha = 0.5, beta = 1, l1 = 0.1, l2 = 0.2; c = 1/sqrt(2).
        let mut model = Model::new(8, ftrl(0.5, 1.0, 0.1, 0.2)).unwrap();
        let c = FRAC_1_SQRT_2 as f32;
        let x12 = [(1, c), (2, c)];
        let x13 = [(1, c), (3, c)];

        // Step 1, x = {1: c, 2: c}, junk. z = n = 0 so w = 0, p = 1/2.
        //   g = -0.5 c = -0.35355339; sigma = 0.35355339 / 0.5 = 0.70710678
        //   z = -0.35355339 - 0.70710678 * 0 = -0.35355339; n = 0.125
        //   w = 0.25355339 / ((1 + 0.35355339) / 0.5 + 0.2)
        //     = 0.25355339 / 2.90710678 = 0.08721846
        assert_eq!(model.learn(&x12, true), 0.5);
        assert_close(model.weight(1), 0.08721846, 1e-6, "step 1, w1");
        assert_close(model.weight(2), 0.08721846, 1e-6, "step 1, w2");

        // Step 2, same x, junk.
        //   margin = 2 * 0.08721846 c = 0.12334554; p = 0.53079735
        //   g = (0.53079735 - 1) c = -0.33177638
        //   sigma = (sqrt(0.125 + 0.11007556) - 0.35355339) / 0.5
        //         = (0.48484592 - 0.35355339) / 0.5 = 0.26258506
        //   z = -0.35355339 - 0.33177638 - 0.26258506 * 0.08721846
        //     = -0.70823203; n = 0.23507556
        //   w = 0.60823203 / ((1 + 0.48484592) / 0.5 + 0.2)
        //     = 0.60823203 / 3.16969184 = 0.19188996
        let p = model.learn(&x12, true);
        assert_close(p, 0.53079735, 1e-6, "step 2, p before");
        assert_close(model.weight(1), 0.19188996, 1e-6, "step 2, w1");
        assert_close(model.weight(2), 0.19188996, 1e-6, "step 2, w2");

        // Step 3, x = {1: c, 3: c}, fine. w3 = 0 (z3 = 0).
        //   margin = 0.19188996 c = 0.13568669; p = 0.53386972
        //   slot 1: g = 0.53386972 c = 0.37750290
        //           sigma = (sqrt(0.23507556 + 0.14250844) - 0.48484592) / 0.5
        //                 = (0.61447865 - 0.48484592) / 0.5 = 0.25926545
        //           z = -0.70823203 + 0.37750290 - 0.25926545 * 0.19188996
        //             = -0.38047957; n = 0.37758401
        //           w = 0.28047957 / ((1 + 0.61447865) / 0.5 + 0.2)
        //             = 0.28047957 / 3.42895729 = 0.08179733
        //   slot 3: g = 0.37750290; sigma = 0.37750290 / 0.5 = 0.75500580
        //           z = 0.37750290 - 0.75500580 * 0 = 0.37750290
        //           n = 0.14250844
        //           w = -0.27750290 / ((1 + 0.37750290) / 0.5 + 0.2)
        //             = -0.27750290 / 2.95500580 = -0.09390943
        let p = model.learn(&x13, false);
        assert_close(p, 0.53386972, 1e-6, "step 3, p before");
        assert_close(model.weight(1), 0.08179733, 1e-6, "step 3, w1");
        assert_close(model.weight(2), 0.19188996, 1e-6, "step 3, w2");
        assert_close(model.weight(3), -0.09390943, 1e-6, "step 3, w3");
        assert_close(f64::from(model.slots[1][0]), -0.38047957, 1e-6, "z1");
        // The slot keeps sqrt(n1) = sqrt(0.37758401) = 0.61447865.
        assert_close(f64::from(model.slots[1][1]), 0.61447865, 1e-6, "sqrt(n1)");
    }

    #[test]
    fn learning_moves_p_junk_the_right_way() {
        let x = [(5, 1.0), (9, 0.5), (300, 0.25)];
        for rule in [adagrad(0.1, 0.01, 0.0), ftrl(0.1, 1.0, 0.0, 0.01)] {
            let mut model = Model::new(8, rule).unwrap();
            let before = model.predict(&x);
            let returned = model.learn(&x, true);
            assert_eq!(returned, before, "{rule:?}: learn returns p before");
            let after_junk = model.predict(&x);
            assert!(after_junk > before, "{rule:?}: {after_junk} > {before}");
            let returned = model.learn(&x, false);
            assert_eq!(returned, after_junk, "{rule:?}");
            assert!(model.predict(&x) < after_junk, "{rule:?}");
        }
    }

    #[test]
    fn the_same_examples_give_bit_identical_models() {
        let examples = random_examples(17);
        for rule in [adagrad(0.2, 0.001, 1e-6), ftrl(0.2, 1.0, 0.5, 0.01)] {
            let mut first = Model::new(12, rule).unwrap();
            let mut second = Model::new(12, rule).unwrap();
            let mut first_p = Vec::new();
            for (x, is_junk) in &examples {
                first_p.push(first.learn(x, *is_junk).to_bits());
            }
            let second_p: Vec<u64> = examples
                .iter()
                .map(|(x, is_junk)| second.learn(x, *is_junk).to_bits())
                .collect();
            assert_eq!(first_p, second_p, "{rule:?}");
            assert!(first == second, "{rule:?}: models differ");
            assert_eq!(first.examples_seen(), 1000);
            // The models learned something (the state is not trivially
            // equal): most of the 60 slots have a weight.
            assert!(first.nonzero_weights() > 40, "{rule:?}");
            assert_eq!(first.nonzero_slots(), 60, "{rule:?}");
            // One more step on one model makes them differ: the comparison
            // can fail.
            first.learn(&examples[0].0, !examples[0].1);
            assert!(first != second);
        }
    }

    #[test]
    fn learning_separates_the_labels() {
        // Progressive log loss over the second half must be well below the
        // ln 2 = 0.693 of an undecided model, and under 20% of the labels
        // wrong (5% are flipped at random; an oracle weighting gets 25 of
        // 500 wrong). Thresholds set from a run of this code with margin.
        let examples = random_examples(5);
        for rule in [adagrad(0.5, 0.0, 0.0), ftrl(0.5, 1.0, 0.1, 0.0)] {
            let mut model = Model::new(12, rule).unwrap();
            let mut loss = 0.0;
            let mut mistakes = 0;
            for (n, (x, is_junk)) in examples.iter().enumerate() {
                let margin = model.margin(x);
                let p = model.learn(x, *is_junk);
                assert_eq!(p, sigmoid(margin));
                if n >= 500 {
                    loss += log_loss(margin, *is_junk) / 500.0;
                    mistakes += usize::from((p > 0.5) != *is_junk);
                }
            }
            assert!(loss < 0.45, "{rule:?}: progressive log loss {loss}");
            assert!(mistakes < 100, "{rule:?}: {mistakes} of 500 wrong");
        }
    }

    #[test]
    fn ftrl_l1_gives_exact_zeros() {
        // Labels alternate junk, fine, junk, ...; slot 2 marks junk, slot 3
        // marks fine, and slot 1 is in every example. By symmetry the
        // residuals slot 1 collects from each junk/fine pair cancel, so
        // |z_1| stays at most about 1/2 (one residual), below l1 = 1: its
        // weight is exactly 0 (McMahan et al. 2013, Algorithm 1: w_i = 0
        // when |z_i| <= l1) although its state is not. Without L1 the same
        // run leaves it a small non-zero weight.
        let run = |l1: f64| {
            let mut model = Model::new(8, ftrl(0.1, 1.0, l1, 0.0)).unwrap();
            for step in 0..401 {
                let is_junk = step % 2 == 0;
                let marker = if is_junk { 2 } else { 3 };
                model.learn(&[(1, 1.0), (marker, 1.0)], is_junk);
            }
            model
        };
        let model = run(1.0);
        assert_eq!(model.weight(1), 0.0);
        assert!(
            model.slots[1][0] != 0.0 && model.slots[1][1] > 0.0,
            "slot 1 was touched"
        );
        assert!(model.weight(2) > 0.0);
        assert!(model.weight(3) < 0.0);
        assert_eq!(model.nonzero_slots(), 3);
        assert_eq!(model.nonzero_weights(), 2);

        let without_l1 = run(0.0);
        assert!(without_l1.weight(1) != 0.0);
        assert_eq!(without_l1.nonzero_weights(), 3);
    }

    #[test]
    fn indices_beyond_the_table_are_masked() {
        let mut model = Model::new(8, adagrad(0.1, 0.0, 0.0)).unwrap();
        model.learn(&[(u32::MAX, 1.0)], true);
        assert!(model.weight(255) > 0.0);
        assert_eq!(model.weight(u32::MAX), model.weight(255));
        assert_eq!(model.weight(256 + 255), model.weight(255));
        assert_eq!(model.nonzero_slots(), 1);
        // Two entries that collide after masking both count in the margin.
        let w = model.weight(255);
        assert_eq!(model.margin(&[(255, 1.0), (511, 1.0)]), 2.0 * w);
    }

    #[test]
    fn non_finite_values_are_ignored() {
        for rule in [adagrad(0.1, 0.1, 0.0), ftrl(0.1, 1.0, 0.0, 0.1)] {
            let mut model = Model::new(8, rule).unwrap();
            let bad = [(1, f32::NAN), (2, f32::INFINITY), (3, 1.0)];
            let p = model.learn(&bad, true);
            assert_eq!(p, 0.5);
            assert_eq!(model.weight(1), 0.0);
            assert_eq!(model.weight(2), 0.0);
            assert!(model.weight(3) > 0.0);
            assert_eq!(model.margin(&bad), model.weight(3));
        }
    }

    #[test]
    fn extreme_values_and_settings_keep_the_state_finite() {
        // The corners of the allowed settings with the largest f32 values:
        // stored numbers saturate at f32::MAX but never become infinite or
        // NaN, and p_junk stays a probability.
        let rules = [
            adagrad(1e9, 1e9, 0.0),
            adagrad(1e-9, 0.0, 0.0),
            ftrl(1e9, 0.0, 0.0, 0.0),
            ftrl(1e-9, 0.0, 0.0, 0.0),
            ftrl(1e-9, 1e9, 1e9, 1e9),
        ];
        let big = f32::MAX;
        let tiny = f32::from_bits(1);
        for rule in rules {
            let mut model = Model::new(8, rule).unwrap();
            for _ in 0..5 {
                model.learn(&[(1, big), (2, -big), (3, tiny)], true);
                model.learn(&[(1, big), (3, -tiny)], false);
                model.learn(&[(3, tiny), (4, 1e-30)], true);
            }
            for slot in model.slots() {
                assert!(slot[0].is_finite() && slot[1].is_finite(), "{rule:?}");
            }
            for x in [&[(1, big), (2, big)][..], &[(1, big), (2, -big), (3, big)]] {
                let margin = model.margin(x);
                assert!(margin.is_finite(), "{rule:?}: {margin}");
                let p = model.predict(x);
                assert!((0.0..=1.0).contains(&p), "{rule:?}: {p}");
            }
        }
    }

    #[test]
    fn explain_ranks_by_magnitude_then_index() {
        let mut model = Model::new(8, adagrad(0.5, 0.0, 0.0)).unwrap();
        // With delta = 0 each first step is exactly +-eta (AdaGrad's first
        // step is eta * sign(g), Duchi et al. 2011, Figure 1).
        model.learn(&[(10, 1.0), (20, 1.0)], true);
        model.learn(&[(30, 1.0), (40, 1.0)], false);
        assert_eq!(model.weight(10), 0.5);
        assert_eq!(model.weight(30), -0.5);

        let x = [(10, 1.0), (20, 0.5), (30, 2.0), (40, 1.0), (50, 1.0)];
        let reasons = model.explain(&x, 10);
        let got: Vec<(u32, f64)> = reasons.iter().map(|r| (r.index, r.contribution)).collect();
        // |30| = 1.0 first; then 10 and 40 tie at 0.5 and go by index; then
        // 20 at 0.25; 50 has weight 0 and is left out.
        assert_eq!(got, [(30, -1.0), (10, 0.5), (40, -0.5), (20, 0.25)]);
        assert_eq!(reasons[0].value, 2.0);
        assert_eq!(reasons[0].weight, -0.5);
        assert_eq!(model.explain(&x, 2).len(), 2);
        assert!(model.explain(&x, 0).is_empty());
        // The sum of all contributions is the margin.
        let total: f64 = reasons.iter().map(|r| r.contribution).sum();
        assert_eq!(total, model.margin(&x));
    }

    #[test]
    fn top_weights_lists_both_ends() {
        let mut model = Model::new(8, adagrad(0.5, 0.0, 0.0)).unwrap();
        model.learn(&[(10, 1.0), (20, 1.0)], true);
        model.learn(&[(10, 1.0)], true);
        model.learn(&[(30, 1.0), (40, 1.0)], false);
        let (junk_like, fine_like) = model.top_weights(2);
        assert_eq!(junk_like.len(), 2);
        assert_eq!(junk_like[0].0, 10);
        assert!(junk_like[0].1 > 0.5);
        assert_eq!(junk_like[1], (20, 0.5));
        // 30 and 40 tie at -0.5: lower index first.
        assert_eq!(fine_like, [(30, -0.5), (40, -0.5)]);
        let (junk_like, fine_like) = model.top_weights(1);
        assert_eq!(junk_like.len(), 1);
        assert_eq!(fine_like, [(30, -0.5)]);
        assert_eq!(model.top_weights(0), (Vec::new(), Vec::new()));
    }

    #[test]
    fn memory_at_22_bits_stays_under_64_mib() {
        let model = Model::new(22, adagrad(0.1, 0.0, 0.0)).unwrap();
        let bytes = model.memory_bytes();
        assert!(bytes >= 32 << 20, "{bytes}");
        assert!(bytes < 64 << 20, "{bytes}");
    }
}
