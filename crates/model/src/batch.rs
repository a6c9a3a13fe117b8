//! A converged full-batch fit of L2-regularised logistic regression.
//!
//! Not on any serving path: it exists so that tests can check the model's
//! maths (the loss, its gradient, the hashing of indices into slots) against
//! an independent solver such as scikit-learn, and so that operators can
//! compare the online model with the batch optimum on a fixed sample.
//!
//! # Objective
//!
//! For `N` examples `(x_n, y_n)` with `y_n` = 1 for junk and 0 for fine,
//!
//! ```text
//! J(w) = (1/N) sum_n logloss(w . x_n, y_n) + (l2/2) ||w||^2
//! ```
//!
//! over all coordinates (the L2 term is not lazy here). scikit-learn's
//! `LogisticRegression(penalty="l2", C=C, fit_intercept=False)` minimises
//! `C sum_n logloss + (1/2) ||w||^2`, which is `C N` times `J` when
//! `l2 = 1 / (C N)`: the two have the same minimiser. With `l2 > 0`, `J` is
//! `l2`-strongly convex, so the minimiser is unique, coordinates that no
//! example touches are exactly 0 there, and any `w` satisfies
//! `||w - w*|| <= ||grad J(w)|| / l2`; the stopping rule on the gradient norm
//! therefore bounds the distance to the optimum.
//!
//! # Method
//!
//! Nesterov's accelerated gradient method with constant step `1/L` and
//! constant momentum `(sqrt(L) - sqrt(mu)) / (sqrt(L) + sqrt(mu))` for an
//! `L`-smooth, `mu`-strongly convex function (Y. Nesterov's 2004 textbook
//! on convex optimization, Kluwer, section 2.2.1, constant step scheme for
//! strongly convex functions), with `mu = l2`. The log loss has
//! second derivative `p (1 - p) <= 1/4`, so the Hessian of `J` is at most
//! `X^T X / (4N) + l2 I`, and `||X||_2^2 <= ||X||_1 ||X||_inf` (the largest
//! column sum of `|x|` times the largest row sum; Golub and Van Loan,
//! "Matrix Computations", section 2.3) gives a safe `L` without an
//! eigenvalue computation. A fixed step needs no line search, whose
//! sufficient-decrease test stops working once changes in `J` fall below its
//! rounding error; that is what lets the fit reach gradient norms near
//! 1e-12.
//!
//! Only slots that some example touches are optimised (the others are 0 at
//! the optimum). Indices are masked to `bits` bits like `Model`'s; entries
//! of one example that land in the same slot have their values added, and
//! non-finite values are skipped. Everything runs in a fixed order, so the
//! result is deterministic.

use crate::logistic::{log_loss, sigmoid};
use crate::model::{BITS_RANGE, Model, ModelError};

/// The result of [`Model::fit_batch`].
#[derive(Debug, Clone, PartialEq)]
pub struct BatchFit {
    /// The table size the indices were masked to.
    pub bits: u8,
    /// The L2 strength of the objective.
    pub l2: f64,
    /// `(slot, weight)` for every slot some example touches, in slot order.
    /// Every other slot's weight is 0.
    pub weights: Vec<(u32, f64)>,
    /// Full passes over the examples (gradient evaluations) used: at most
    /// `max_passes`, plus one to measure the returned point when the limit
    /// was reached.
    pub passes: usize,
    /// `||grad J(w)||_2` at the returned weights.
    pub gradient_norm: f64,
    /// `J(w)` at the returned weights.
    pub objective: f64,
    /// Whether `gradient_norm <= tolerance` was reached within `max_passes`.
    pub converged: bool,
}

impl BatchFit {
    /// The fitted weight of the slot `index` lands in.
    pub fn weight(&self, index: u32) -> f64 {
        let slot = index & slot_mask(self.bits);
        match self.weights.binary_search_by_key(&slot, |&(s, _)| s) {
            Ok(at) => self.weights[at].1,
            Err(_) => 0.0,
        }
    }

    /// `w . x` with the fitted weights; non-finite values are skipped.
    pub fn margin(&self, x: &[(u32, f32)]) -> f64 {
        x.iter()
            .filter(|(_, value)| value.is_finite())
            .map(|&(index, value)| self.weight(index) * f64::from(value))
            .sum()
    }

    /// `p_junk = sigma(w . x)` with the fitted weights.
    pub fn predict(&self, x: &[(u32, f32)]) -> f64 {
        sigmoid(self.margin(x))
    }
}

fn slot_mask(bits: u8) -> u32 {
    ((1u64 << bits) - 1) as u32
}

/// One example over the compact coordinates `0..d`.
struct Row {
    entries: Vec<(usize, f64)>,
    is_junk: bool,
}

impl Model {
    /// Minimises `J(w) = (1/N) sum_n logloss(w . x_n, y_n) + (l2/2) ||w||^2`
    /// over `2^bits` slots by full-batch accelerated gradient descent, until
    /// `||grad J(w)||_2 <= tolerance` or `max_passes` steps (see the module
    /// docs for the method and why it converges). Not converging is not an
    /// error: the result says so in `converged`.
    ///
    /// This is scikit-learn's `LogisticRegression(C = 1 / (l2 N),
    /// fit_intercept=False)` objective up to a constant factor. Fails if
    /// `bits` is outside 8..=30, `l2` is not a finite number above 0,
    /// `tolerance` is negative or NaN, or `examples` is empty.
    pub fn fit_batch(
        bits: u8,
        l2: f64,
        examples: &[(Vec<(u32, f32)>, bool)],
        max_passes: usize,
        tolerance: f64,
    ) -> Result<BatchFit, ModelError> {
        if !BITS_RANGE.contains(&bits) {
            return Err(ModelError::BitsOutOfRange { bits });
        }
        if !(l2 > 0.0 && l2.is_finite()) {
            return Err(ModelError::InvalidFitSetting {
                key: "l2",
                value: l2,
                allowed: "must be a finite number above 0",
            });
        }
        if tolerance.is_nan() || tolerance < 0.0 {
            return Err(ModelError::InvalidFitSetting {
                key: "tolerance",
                value: tolerance,
                allowed: "must be 0 or above",
            });
        }
        if examples.is_empty() {
            return Err(ModelError::EmptyBatch);
        }

        let mask = slot_mask(bits);
        let (slots, rows) = compact(examples, mask);
        let objective = Objective {
            rows: &rows,
            l2,
            dimension: slots.len(),
        };

        let lipschitz = objective.smoothness_bound();
        let step = 1.0 / lipschitz;
        let momentum = (lipschitz.sqrt() - l2.sqrt()) / (lipschitz.sqrt() + l2.sqrt());

        let mut previous = vec![0.0; slots.len()];
        let mut lookahead = vec![0.0; slots.len()];
        let mut gradient = vec![0.0; slots.len()];
        let mut passes = 0;
        let mut converged = false;
        let mut gradient_norm = f64::INFINITY;
        while passes < max_passes {
            objective.gradient(&lookahead, &mut gradient);
            passes += 1;
            gradient_norm = norm(&gradient);
            if gradient_norm <= tolerance {
                converged = true;
                break;
            }
            // x_{k+1} = y_k - grad J(y_k) / L
            // y_{k+1} = x_{k+1} + momentum (x_{k+1} - x_k)
            for ((y, x), g) in lookahead.iter_mut().zip(&mut previous).zip(&gradient) {
                let next = *y - step * g;
                *y = next + momentum * (next - *x);
                *x = next;
            }
        }
        if !converged {
            // The loop ended on a step, so the gradient at the point returned
            // is still to be measured.
            objective.gradient(&lookahead, &mut gradient);
            passes += 1;
            gradient_norm = norm(&gradient);
            converged = gradient_norm <= tolerance;
        }

        Ok(BatchFit {
            bits,
            l2,
            objective: objective.value(&lookahead),
            weights: slots.into_iter().zip(lookahead).collect(),
            passes,
            gradient_norm,
            converged,
        })
    }
}

/// Maps the masked slots the examples touch to `0..d` (in slot order) and
/// rewrites every example over them, adding the values of entries that share
/// a slot.
fn compact(examples: &[(Vec<(u32, f32)>, bool)], mask: u32) -> (Vec<u32>, Vec<Row>) {
    let mut slots: Vec<u32> = examples
        .iter()
        .flat_map(|(x, _)| x.iter())
        .filter(|(_, value)| value.is_finite())
        .map(|&(index, _)| index & mask)
        .collect();
    slots.sort_unstable();
    slots.dedup();

    let rows = examples
        .iter()
        .map(|(x, is_junk)| {
            let mut entries: Vec<(usize, f64)> = x
                .iter()
                .filter(|(_, value)| value.is_finite())
                .filter_map(|&(index, value)| {
                    let at = slots.binary_search(&(index & mask)).ok()?;
                    Some((at, f64::from(value)))
                })
                .collect();
            entries.sort_by_key(|&(at, _)| at);
            let mut merged: Vec<(usize, f64)> = Vec::with_capacity(entries.len());
            for (at, value) in entries {
                match merged.last_mut() {
                    Some(last) if last.0 == at => last.1 += value,
                    _ => merged.push((at, value)),
                }
            }
            Row {
                entries: merged,
                is_junk: *is_junk,
            }
        })
        .collect();
    (slots, rows)
}

/// `J` over the compact coordinates.
struct Objective<'a> {
    rows: &'a [Row],
    l2: f64,
    dimension: usize,
}

impl Objective<'_> {
    fn margin(row: &Row, w: &[f64]) -> f64 {
        row.entries.iter().map(|&(at, value)| w[at] * value).sum()
    }

    fn value(&self, w: &[f64]) -> f64 {
        let loss: f64 = self
            .rows
            .iter()
            .map(|row| log_loss(Self::margin(row, w), row.is_junk))
            .sum();
        loss / self.rows.len() as f64 + 0.5 * self.l2 * w.iter().map(|v| v * v).sum::<f64>()
    }

    /// `grad J(w) = (1/N) sum_n (sigma(w . x_n) - y_n) x_n + l2 w`.
    fn gradient(&self, w: &[f64], out: &mut [f64]) {
        out.fill(0.0);
        let scale = 1.0 / self.rows.len() as f64;
        for row in self.rows {
            let target = if row.is_junk { 1.0 } else { 0.0 };
            let residual = (sigmoid(Self::margin(row, w)) - target) * scale;
            for &(at, value) in &row.entries {
                out[at] += residual * value;
            }
        }
        for (g, v) in out.iter_mut().zip(w) {
            *g += self.l2 * v;
        }
    }

    /// An upper bound `L` on the largest eigenvalue of the Hessian of `J`:
    /// `||X||_1 ||X||_inf / (4N) + l2`.
    fn smoothness_bound(&self) -> f64 {
        let mut column_sums = vec![0.0; self.dimension];
        let mut largest_row_sum: f64 = 0.0;
        for row in self.rows {
            let mut row_sum = 0.0;
            for &(at, value) in &row.entries {
                column_sums[at] += value.abs();
                row_sum += value.abs();
            }
            largest_row_sum = largest_row_sum.max(row_sum);
        }
        let largest_column_sum = column_sums.iter().copied().fold(0.0, f64::max);
        largest_column_sum * largest_row_sum / (4.0 * self.rows.len() as f64) + self.l2
    }
}

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum::<f64>().sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn example(x: &[(u32, f32)], is_junk: bool) -> (Vec<(u32, f32)>, bool) {
        (x.to_vec(), is_junk)
    }

    #[test]
    fn one_feature_meets_its_stationarity_condition() {
        // One junk example with x = 1, N = 1: J(w) = ln(1 + e^-w) + l2 w^2 / 2,
        // whose minimiser solves l2 w = sigma(-w) (set dJ/dw = 0).
        // Bisection on that equation gives the reference.
        let l2 = 0.5;
        let fit = Model::fit_batch(8, l2, &[example(&[(7, 1.0)], true)], 10_000, 1e-13).unwrap();
        assert!(fit.converged, "{fit:?}");
        let (mut low, mut high) = (0.0f64, 10.0f64);
        for _ in 0..200 {
            let mid = 0.5 * (low + high);
            if l2 * mid < sigmoid(-mid) {
                low = mid;
            } else {
                high = mid;
            }
        }
        assert!(
            (fit.weight(7) - low).abs() < 1e-12,
            "{} vs {low}",
            fit.weight(7)
        );
        assert_eq!(fit.weights.len(), 1);
        assert_eq!(fit.weight(8), 0.0);
        assert!(fit.gradient_norm <= 1e-13);
    }

    #[test]
    fn symmetric_data_gives_opposite_weights() {
        // Feature 1 always junk, feature 2 always fine, same counts: by
        // symmetry of the objective under swapping labels, w2 = -w1.
        let examples = [
            example(&[(1, 1.0)], true),
            example(&[(1, 1.0)], true),
            example(&[(2, 1.0)], false),
            example(&[(2, 1.0)], false),
        ];
        let fit = Model::fit_batch(8, 0.1, &examples, 10_000, 1e-12).unwrap();
        assert!(fit.converged);
        assert!(fit.weight(1) > 0.0);
        assert!((fit.weight(1) + fit.weight(2)).abs() < 1e-12);
        assert!(fit.predict(&[(1, 1.0)]) > 0.5);
    }

    #[test]
    fn indices_are_masked_and_collisions_add_up() {
        // 3 and 3 + 256 share a slot at 8 bits, so {3: 0.5, 259: 0.5} is the
        // same example as {3: 1.0}.
        let split = Model::fit_batch(
            8,
            0.2,
            &[example(&[(3, 0.5), (259, 0.5)], true)],
            10_000,
            1e-12,
        )
        .unwrap();
        let whole = Model::fit_batch(8, 0.2, &[example(&[(3, 1.0)], true)], 10_000, 1e-12).unwrap();
        assert_eq!(split.weights, whole.weights);
        assert_eq!(split.weight(259), split.weight(3));
    }

    #[test]
    fn running_out_of_passes_is_reported() {
        let examples = [example(&[(1, 1.0)], true), example(&[(2, 1.0)], false)];
        let fit = Model::fit_batch(8, 1e-4, &examples, 3, 1e-12).unwrap();
        assert!(!fit.converged);
        assert_eq!(fit.passes, 4);
        assert!(fit.gradient_norm > 1e-12);
    }

    #[test]
    fn bad_settings_fail() {
        let examples = [example(&[(1, 1.0)], true)];
        assert_eq!(
            Model::fit_batch(8, 0.0, &examples, 10, 1e-6)
                .unwrap_err()
                .to_string(),
            "batch fit: l2 = 0: must be a finite number above 0"
        );
        assert!(Model::fit_batch(8, f64::NAN, &examples, 10, 1e-6).is_err());
        assert!(Model::fit_batch(8, 0.1, &examples, 10, f64::NAN).is_err());
        assert_eq!(
            Model::fit_batch(40, 0.1, &examples, 10, 1e-6).unwrap_err(),
            ModelError::BitsOutOfRange { bits: 40 }
        );
        assert_eq!(
            Model::fit_batch(8, 0.1, &[], 10, 1e-6).unwrap_err(),
            ModelError::EmptyBatch
        );
    }
}
