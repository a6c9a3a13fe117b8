//! Probability metrics: log loss and the Brier score.
//!
//! Unlike the ranking metrics these read `p_junk` as a probability, so
//! scores must lie in `[0, 1]`, and a well-ordered but badly calibrated
//! model scores worse here than in ROC area. Neither needs both classes.
//! Sums are compensated (Neumaier), so the mean does not drift with the
//! number of messages.

use crate::error::MetricsError;
use crate::input::check_probabilities;

/// Probabilities are clipped to `[LOG_LOSS_EPS, 1 - LOG_LOSS_EPS]` before
/// the logarithm, so a confident mistake (`p_junk = 0` on junk) costs
/// `-ln(2^-52)` ≈ 36.04 instead of infinity.
///
/// This is `f64::EPSILON` (2^-52), the machine epsilon of the score type,
/// as scikit-learn's `log_loss` uses for float64 input: version 1.9.1,
/// checked when the fixture in `tests/fixtures/` was made, clips with
/// `xp.finfo(y_proba.dtype).eps`. Releases before 1.2 defaulted to a fixed
/// `1e-15` (scikit-learn `log_loss` docs), which gives ≈ 34.54 instead.
pub const LOG_LOSS_EPS: f64 = f64::EPSILON;

/// Mean negative log-likelihood of the labels under `p_junk`:
/// `-ln(p)` for junk and `-ln(1 - p)` for fine, with `p` (for junk) or
/// `1 - p` (for fine) clipped to `[LOG_LOSS_EPS, 1 - LOG_LOSS_EPS]`.
///
/// Clipping `1 - p` rather than taking `1 - clip(p)` is what scikit-learn
/// does (it builds the `[1 - p, p]` columns first, then clips), and the two
/// differ for `p` within an ulp of the bounds. Natural logarithm.
///
/// Errors: see the crate docs ([`MetricsError::NotProbability`] for a score
/// outside `[0, 1]`).
pub fn log_loss(p_junk: &[f64], is_junk: &[bool]) -> Result<f64, MetricsError> {
    check_probabilities(p_junk, is_junk)?;
    let lo = LOG_LOSS_EPS;
    let hi = 1.0 - LOG_LOSS_EPS;
    let total = compensated_sum(p_junk.iter().zip(is_junk).map(|(&p, &y)| {
        let p_true = if y { p } else { 1.0 - p };
        -p_true.clamp(lo, hi).ln()
    }));
    Ok(total / count(p_junk.len()))
}

/// Mean squared difference between `p_junk` and the label as 0 or 1
/// (Brier, 1950, "Verification of forecasts expressed in terms of
/// probability", Monthly Weather Review; cited from memory). Brier summed
/// over both outcomes, which doubles this; the one-outcome form here is the
/// common one and scikit-learn's `brier_score_loss`. 0 is perfect, 0.25 is
/// what a constant 0.5 earns, 1 is certain and always wrong.
///
/// Errors: see the crate docs ([`MetricsError::NotProbability`] for a score
/// outside `[0, 1]`).
pub fn brier_score(p_junk: &[f64], is_junk: &[bool]) -> Result<f64, MetricsError> {
    check_probabilities(p_junk, is_junk)?;
    let total = compensated_sum(p_junk.iter().zip(is_junk).map(|(&p, &y)| {
        let target = if y { 1.0 } else { 0.0 };
        (target - p) * (target - p)
    }));
    Ok(total / count(p_junk.len()))
}

#[expect(
    clippy::cast_precision_loss,
    reason = "message counts are far below 2^53"
)]
fn count(n: usize) -> f64 {
    n as f64
}

/// Neumaier's improved Kahan summation: carries the low-order bits lost by
/// each addition and adds them back at the end.
pub(crate) fn compensated_sum(terms: impl Iterator<Item = f64>) -> f64 {
    let mut acc = CompensatedSum::default();
    for term in terms {
        acc.add(term);
    }
    acc.total()
}

/// A running Neumaier sum, for when terms arrive into several sums at once
/// (one per calibration bin).
#[derive(Debug, Clone, Copy, Default)]
pub(crate) struct CompensatedSum {
    sum: f64,
    carry: f64,
}

impl CompensatedSum {
    pub(crate) fn add(&mut self, term: f64) {
        let next = self.sum + term;
        if self.sum.abs() >= term.abs() {
            self.carry += (self.sum - next) + term;
        } else {
            self.carry += (term - next) + self.sum;
        }
        self.sum = next;
    }

    pub(crate) fn total(&self) -> f64 {
        self.sum + self.carry
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_loss_of_halves_is_ln_two() {
        // From the definition: -ln(0.5) per message.
        let loss = log_loss(&[0.5, 0.5, 0.5], &[true, false, true]).unwrap();
        assert!((loss - std::f64::consts::LN_2).abs() < 1e-15);
    }

    #[test]
    fn confident_mistakes_are_clipped_not_infinite() {
        // -ln(2^-52) = 52 ln 2 = 36.04365338911715; from the definition.
        let loss = log_loss(&[0.0, 1.0], &[true, false]).unwrap();
        assert!((loss - 52.0 * std::f64::consts::LN_2).abs() < 1e-12);
        // Confident and right costs -ln(1 - 2^-52) ≈ 2.2e-16, not 0.
        let loss = log_loss(&[1.0, 0.0], &[true, false]).unwrap();
        assert!(loss > 0.0 && loss < 3e-16, "loss = {loss}");
    }

    #[test]
    fn brier_by_hand() {
        // (1-0.8)^2 + (0-0.3)^2 + (1-0.5)^2 + (0-0)^2 = 0.04+0.09+0.25+0 = 0.38,
        // mean 0.095; from the definition.
        let score = brier_score(&[0.8, 0.3, 0.5, 0.0], &[true, false, true, false]).unwrap();
        assert!((score - 0.095).abs() < 1e-15);
    }

    #[test]
    fn one_class_is_allowed() {
        assert!(log_loss(&[0.9], &[true]).is_ok());
        assert!(brier_score(&[0.1, 0.2], &[false, false]).is_ok());
    }

    #[test]
    fn scores_must_be_probabilities() {
        assert_eq!(
            log_loss(&[0.5, 1.0000001], &[true, false]),
            Err(MetricsError::NotProbability {
                index: 1,
                value: 1.0000001
            })
        );
        assert!(matches!(
            brier_score(&[f64::NAN], &[true]),
            Err(MetricsError::NotFinite { index: 0, .. })
        ));
        assert_eq!(brier_score(&[], &[]), Err(MetricsError::Empty));
        assert!(matches!(
            log_loss(&[0.5, 0.5], &[true]),
            Err(MetricsError::LengthMismatch { .. })
        ));
    }

    #[test]
    fn compensated_sum_keeps_small_terms() {
        // 1 + 1e-16 * 10 loses every small term in plain summation.
        let terms = std::iter::once(1.0).chain(std::iter::repeat_n(1e-16, 10));
        assert!((compensated_sum(terms) - (1.0 + 1e-15)).abs() < 1e-16);
    }
}
