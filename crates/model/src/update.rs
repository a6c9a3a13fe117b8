//! Per-coordinate adaptive updates (AdaGrad, FTRL-Proximal).
//!
//! Owns the only code that changes weights. The learner task calls it, through
//! `Model::learn`, once per feedback row, in sequence order. Same rows in the
//! same order give bit-identical state, so nothing here may depend on time,
//! threads or hash-map iteration order.
//!
//! # State and arithmetic
//!
//! Each hashed slot holds two `f32` numbers, side by side so that one cache
//! line serves both (the tables are far larger than the caches, so the
//! memory loads are most of the cost of an update):
//!
//! | rule | `slot[0]` | `slot[1]` |
//! | --- | --- | --- |
//! | AdaGrad | weight `w_i` | sum of squared gradients `G_i` |
//! | FTRL-Proximal | `z_i` | square root of the sum of squared gradients, `sqrt(n_i)` |
//!
//! FTRL-Proximal keeps `sqrt(n_i)` rather than `n_i` because that is what
//! its formulas use: deriving a weight then takes one division and no square
//! root, and every prediction derives one weight per feature (in the `learn`
//! bench this cut the time of an update by a third). The update computes
//! `sqrt(n_i + g_i^2)` as `sqrt(r_i^2 + g_i^2)` with `r_i = sqrt(n_i)`; `r_i^2`
//! of an `f32` is exact in `f64`, so this is as precise as storing `n_i`.
//!
//! Every update reads the `f32` state into `f64`, does all arithmetic in
//! `f64` and rounds the result back to `f32` once. `f32` halves the memory
//! (2 x 4 bytes x 2^22 slots = 32 MiB at the default size); `f64` arithmetic
//! keeps sums of many small terms accurate. Rounding back saturates at
//! `+-f32::MAX`, so absurd inputs can make a weight huge but never infinite:
//! every stored number stays finite and checkpoints stay writable.
//!
//! # Loss
//!
//! Both rules minimise the log loss of logistic regression. With
//! `p = sigma(w . x)` and `y = 1` for junk, `0` for fine, the gradient of
//! `-y ln p - (1 - y) ln(1 - p)` with respect to `w_i` is `(p - y) x_i`
//! (Bishop, "Pattern Recognition and Machine Learning", 2006, section 4.3.2,
//! eq. 4.91).
//!
//! # Inputs
//!
//! Indices are masked to their low `bits` bits, so any `u32` is safe. A value
//! that is NaN or infinite is treated as absent (the entry is skipped), so one
//! bad feature cannot poison the weights. If masking makes two entries of one
//! example land in the same slot, the margin counts both and the update
//! applies them one after the other, the same as any other hash collision.

use crate::logistic::sigmoid;

/// One slot's state; see the table in the module docs.
pub(crate) type Slot = [f32; 2];

/// Rounds an `f64` result to the stored `f32`, saturating at `+-f32::MAX`
/// instead of overflowing to infinity. NaN cannot reach here: every input is
/// finite and every division has a positive denominator.
#[inline]
pub(crate) fn to_stored(value: f64) -> f32 {
    value.clamp(-f64::from(f32::MAX), f64::from(f32::MAX)) as f32
}

#[inline]
fn target(is_junk: bool) -> f64 {
    if is_junk { 1.0 } else { 0.0 }
}

/// How many entries' slots are loaded in one go; see [`gather`].
const BATCH: usize = 128;

/// Copies the slots of up to [`BATCH`] entries into `out`.
///
/// On a table of tens of MiB nearly every load misses the cache, and an
/// update is worth as much as the number of misses the CPU can wait on at
/// once. A loop that does nothing but load keeps many of them in flight; a
/// loop that also takes square roots and divides fills the CPU's window with
/// arithmetic waiting on the first miss, and the later loads start late.
/// Gathering first and computing second halved the time of an FTRL-Proximal
/// prediction on a 22-bit table in the `learn` bench.
#[inline]
fn gather(slots: &[Slot], mask: u32, entries: &[(u32, f32)], out: &mut [Slot; BATCH]) {
    for (local, &(index, _)) in out.iter_mut().zip(entries) {
        *local = slots[(index & mask) as usize];
    }
}

/// `w . x` for AdaGrad state, where the weight is stored directly.
#[inline]
pub(crate) fn adagrad_margin(slots: &[Slot], mask: u32, x: &[(u32, f32)]) -> f64 {
    let mut local = [[0.0; 2]; BATCH];
    let mut margin = 0.0;
    for entries in x.chunks(BATCH) {
        gather(slots, mask, entries, &mut local);
        for (slot, &(_, value)) in local.iter().zip(entries) {
            if value.is_finite() {
                margin += f64::from(slot[0]) * f64::from(value);
            }
        }
    }
    margin
}

/// One diagonal AdaGrad step on one example; returns `p_junk` from before
/// the step.
///
/// Duchi, Hazan and Singer, "Adaptive Subgradient Methods for Online
/// Learning and Stochastic Optimization", JMLR 12 (2011), Figure 1 (AdaGrad
/// with diagonal matrices), the primal-dual subgradient update written as
/// plain gradient descent with per-coordinate step sizes. For each active
/// coordinate `i`:
///
/// ```text
/// g_i  = (p - y) x_i + l2 w_i          gradient of log loss + (l2/2) w_i^2
/// G_i += g_i^2                          running sum of squared gradients
/// w_i -= eta g_i / (delta + sqrt(G_i))  step shrinks as evidence accumulates
/// ```
///
/// `p` is computed once, before any coordinate moves. The L2 term is applied
/// lazily: only to the coordinates active in this example, not to all 2^bits
/// weights. That is common practice for sparse online learning (the cost of
/// an update stays proportional to the number of active features), and it
/// means a weight only shrinks when its feature is seen. `G_i` in the step is
/// the freshly updated sum in `f64`, before it is rounded for storage.
///
/// When `delta + sqrt(G_i)` is 0 (only possible while `g_i` is 0, or its
/// square underflows) the weight is left as it is.
#[inline]
pub(crate) fn adagrad_learn(
    slots: &mut [Slot],
    mask: u32,
    (eta, l2, delta): (f64, f64, f64),
    x: &[(u32, f32)],
    is_junk: bool,
) -> f64 {
    let p = sigmoid(adagrad_margin(slots, mask, x));
    let residual = p - target(is_junk);
    for &(index, value) in x {
        if !value.is_finite() {
            continue;
        }
        let slot = &mut slots[(index & mask) as usize];
        let w = f64::from(slot[0]);
        let g = residual * f64::from(value) + l2 * w;
        let sum_sq = f64::from(slot[1]) + g * g;
        let denominator = delta + sum_sq.sqrt();
        let w_new = if denominator > 0.0 {
            w - eta * g / denominator
        } else {
            w
        };
        // One write of the whole slot (8 bytes), so that a later 8-byte
        // load of it can be served from the store buffer.
        *slot = [to_stored(w_new), to_stored(sum_sq)];
    }
    p
}

/// FTRL-Proximal hyper-parameters, unpacked for the hot loop.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Ftrl {
    pub alpha: f64,
    pub beta: f64,
    pub l1: f64,
    pub l2: f64,
}

impl Ftrl {
    /// The weight FTRL-Proximal plays for a coordinate with state `z_i` and
    /// `root_n = sqrt(n_i)`.
    ///
    /// McMahan et al., "Ad Click Prediction: a View from the Trenches", KDD
    /// 2013, Algorithm 1, the closed-form solution of the per-coordinate
    /// proximal step:
    ///
    /// ```text
    /// w_i = 0                                                   if |z_i| <= l1
    /// w_i = -(z_i - sgn(z_i) l1) / ((beta + sqrt(n_i)) / alpha + l2)   otherwise
    /// ```
    ///
    /// Multiplying numerator and denominator by `alpha` gives the form used
    /// here, `-alpha (z_i - sgn(z_i) l1) / (beta + sqrt(n_i) + alpha l2)`,
    /// which needs one division instead of two. The exact 0 for small `|z_i|`
    /// is what makes L1 produce sparse models.
    ///
    /// The two cases are computed without a branch, as
    /// `-alpha sgn(z_i) max(|z_i| - l1, 0) / (...)`, which rounds to the same
    /// bits as the formula above: whether a weight is 0 is data-dependent and
    /// unpredictable, and a mispredicted branch that waits on a cache miss
    /// holds up the loads after it (removing it took a fifth off a
    /// prediction on a 22-bit table in the `learn` bench).
    #[inline]
    pub(crate) fn weight(&self, z: f64, root_n: f64) -> f64 {
        let excess = (z.abs() - self.l1).max(0.0);
        let denominator = self.beta + root_n + self.alpha * self.l2;
        // Adding +0.0 turns the -0.0 of a zero excess with z > 0 into +0.0.
        let w = -self.alpha.copysign(z) * excess / denominator + 0.0;
        if denominator > 0.0 {
            w
        } else {
            // Only when beta = l2 = 0 and n_i = 0, which needs a gradient
            // whose square underflowed; treat the coordinate as unseen.
            0.0
        }
    }

    /// The weight of a stored slot.
    #[inline]
    pub(crate) fn slot_weight(&self, slot: Slot) -> f64 {
        self.weight(f64::from(slot[0]), f64::from(slot[1]))
    }

    /// `w . x` with the weights derived from the state. The weights of the
    /// first [`BATCH`] entries are also written to `played`, for `learn`.
    #[inline]
    fn margin_keeping(
        &self,
        slots: &[Slot],
        mask: u32,
        x: &[(u32, f32)],
        played: &mut [f64; BATCH],
    ) -> f64 {
        let mut local = [[0.0; 2]; BATCH];
        let mut margin = 0.0;
        for (batch, entries) in x.chunks(BATCH).enumerate() {
            gather(slots, mask, entries, &mut local);
            for (k, (&slot, &(_, value))) in local.iter().zip(entries).enumerate() {
                let w = self.slot_weight(slot);
                if batch == 0 {
                    played[k] = w;
                }
                if value.is_finite() {
                    margin += w * f64::from(value);
                }
            }
        }
        margin
    }

    /// `w . x` with the weights derived from the state.
    #[inline]
    pub(crate) fn margin(&self, slots: &[Slot], mask: u32, x: &[(u32, f32)]) -> f64 {
        self.margin_keeping(slots, mask, x, &mut [0.0; BATCH])
    }

    /// One FTRL-Proximal step on one example; returns `p_junk` from before
    /// the step.
    ///
    /// McMahan et al., KDD 2013, Algorithm 1 (per-coordinate learning rates)
    /// for the logistic loss. With `w_i` from [`Ftrl::weight`] and
    /// `p = sigma(x . w)`, for each active coordinate `i`:
    ///
    /// ```text
    /// g_i     = (p - y) x_i
    /// sigma_i = (sqrt(n_i + g_i^2) - sqrt(n_i)) / alpha
    /// z_i    += g_i - sigma_i w_i
    /// n_i    += g_i^2
    /// ```
    ///
    /// `sigma_i` is the increase in the coordinate's inverse learning rate;
    /// subtracting `sigma_i w_i` re-centres the proximal term on the current
    /// weight. L1 and L2 act only through the weight formula, so unlike
    /// AdaGrad there is no lazy regularisation to approximate. The slot
    /// stores `sqrt(n_i)` (see the module docs), so the last line becomes
    /// `sqrt(n_i) <- sqrt(n_i + g_i^2)`, the number `sigma_i` needed anyway.
    ///
    /// Weights are not stored. The prediction pass derives them and keeps
    /// those of the first [`BATCH`] entries in a buffer on the stack for the
    /// update pass, which therefore uses exactly the `w_i` that was played
    /// (nothing is allocated). Past that, `w_i` is derived again from the
    /// slot, which gives the same number unless masking made two entries of
    /// the example share a slot.
    #[inline]
    pub(crate) fn learn(
        &self,
        slots: &mut [Slot],
        mask: u32,
        x: &[(u32, f32)],
        is_junk: bool,
    ) -> f64 {
        let mut played = [0.0; BATCH];
        let p = sigmoid(self.margin_keeping(slots, mask, x, &mut played));
        let residual = p - target(is_junk);
        for (k, &(index, value)) in x.iter().enumerate() {
            if !value.is_finite() {
                continue;
            }
            let slot = &mut slots[(index & mask) as usize];
            let z = f64::from(slot[0]);
            let root_n = f64::from(slot[1]);
            let w = match played.get(k) {
                Some(&w) => w,
                None => self.weight(z, root_n),
            };
            let g = residual * f64::from(value);
            let root_n_new = (root_n * root_n + g * g).sqrt();
            let sigma = (root_n_new - root_n) / self.alpha;
            // One write of the whole slot (8 bytes), so that a later 8-byte
            // load of it can be served from the store buffer.
            *slot = [to_stored(z + g - sigma * w), to_stored(root_n_new)];
        }
        p
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stored_values_saturate_instead_of_overflowing() {
        assert_eq!(to_stored(1e300), f32::MAX);
        assert_eq!(to_stored(-1e300), -f32::MAX);
        assert_eq!(to_stored(0.5), 0.5);
    }

    #[test]
    fn ftrl_weight_is_zero_inside_the_l1_band() {
        let rule = Ftrl {
            alpha: 0.5,
            beta: 1.0,
            l1: 0.25,
            l2: 0.0,
        };
        assert_eq!(rule.weight(0.25, 3.0).to_bits(), 0.0f64.to_bits());
        assert_eq!(rule.weight(-0.25, 3.0).to_bits(), 0.0f64.to_bits());
        assert_eq!(rule.weight(0.0, 0.0).to_bits(), 0.0f64.to_bits());
        // Outside the band: -alpha (z - sgn(z) l1) / (beta + sqrt(n))
        // = -0.5 (1.25 - 0.25) / (1 + 1) = -0.25 (McMahan et al. 2013,
        // Algorithm 1).
        assert_eq!(rule.weight(1.25, 1.0), -0.25);
        assert_eq!(rule.weight(-1.25, 1.0), 0.25);
    }

    #[test]
    fn ftrl_weight_without_any_damping_stays_finite() {
        let rule = Ftrl {
            alpha: 1.0,
            beta: 0.0,
            l1: 0.0,
            l2: 0.0,
        };
        assert_eq!(rule.weight(1e-200, 0.0), 0.0);
    }

    #[test]
    fn adagrad_skips_a_step_with_a_zero_denominator() {
        // p = 1 exactly for a huge margin, so a junk example has gradient 0
        // and, with delta = 0 and G = 0, the step would be 0 / 0.
        let mut slots = vec![[0.0f32; 2]; 256];
        slots[1] = [f32::MAX, 0.0];
        let p = adagrad_learn(
            &mut slots,
            255,
            (0.1, 0.0, 0.0),
            &[(1, 1.0), (2, 1.0)],
            true,
        );
        assert_eq!(p, 1.0);
        assert_eq!(slots[1], [f32::MAX, 0.0]);
        assert_eq!(slots[2], [0.0, 0.0]);
    }
}
