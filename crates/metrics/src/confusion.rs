//! Counts at one threshold, and logistic average misclassification (lam%).
//!
//! A message is flagged junk when `p_junk >= threshold`. lam% follows
//! Cormack and Lynam, "TREC 2005 Spam Track Overview" (TREC 2005
//! proceedings), where it is defined with the evaluation measures (section
//! number not checked; the formula is as remembered):
//!
//! ```text
//! lam = logit^-1( (logit(fpr) + logit(fnr)) / 2 ),  logit(x) = ln(x / (1 - x))
//! ```
//!
//! where fpr is the fine-misclassified rate (fine flagged / fine) and fnr the
//! junk-missed rate (junk missed / junk). It is the geometric mean of the two
//! error odds turned back into a rate: one number that cannot be improved
//! by moving the threshold to trade one kind of error for the other at
//! equal odds.

use serde::Serialize;

use crate::error::MetricsError;
use crate::input::{check_scores, check_threshold};

/// How the messages fall at one threshold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub struct Confusion {
    /// Junk with `p_junk >= threshold` (true positives).
    pub junk_caught: u64,
    /// Junk with `p_junk < threshold` (false negatives).
    pub junk_missed: u64,
    /// Fine with `p_junk < threshold` (true negatives).
    pub fine_passed: u64,
    /// Fine with `p_junk >= threshold` (false positives).
    pub fine_flagged: u64,
}

/// Counts junk caught and missed, fine passed and flagged, flagging a
/// message when `p_junk >= threshold`.
///
/// Errors: see the crate docs; also [`MetricsError::InvalidParameter`] when
/// `threshold` is not finite. One class alone is fine: its rates are then
/// `None`.
pub fn confusion(
    p_junk: &[f64],
    is_junk: &[bool],
    threshold: f64,
) -> Result<Confusion, MetricsError> {
    check_scores(p_junk, is_junk)?;
    check_threshold(threshold)?;
    let mut counts = Confusion::default();
    for (&p, &y) in p_junk.iter().zip(is_junk) {
        let is_flagged = p >= threshold;
        match (y, is_flagged) {
            (true, true) => counts.junk_caught += 1,
            (true, false) => counts.junk_missed += 1,
            (false, false) => counts.fine_passed += 1,
            (false, true) => counts.fine_flagged += 1,
        }
    }
    Ok(counts)
}

impl Confusion {
    /// All junk messages.
    pub fn junk(&self) -> u64 {
        self.junk_caught + self.junk_missed
    }

    /// All fine messages.
    pub fn fine(&self) -> u64 {
        self.fine_passed + self.fine_flagged
    }

    /// Fine flagged as a percentage of all fine (the false-positive rate,
    /// "ham misclassification %" in the TREC overview's terms); `None` when
    /// there is no fine message.
    pub fn fine_misclassified_pct(&self) -> Option<f64> {
        percent(self.fine_flagged, self.fine())
    }

    /// Junk missed as a percentage of all junk (the false-negative rate);
    /// `None` when there is no junk message.
    pub fn junk_missed_pct(&self) -> Option<f64> {
        percent(self.junk_missed, self.junk())
    }

    /// lam% of the two error rates, [`lam_pct`] on rates smoothed at the
    /// ends; `None` unless both classes are present.
    ///
    /// A rate of exactly 0 or 1 has an infinite logit, and lam% would then
    /// be 0 or 100 whatever the other rate is. So an error count `k` out of
    /// `n` is used as `k / n` when `0 < k < n`, and as `(k + 0.5) / (n + 1)`
    /// when `k == 0` or `k == n`: half a message added to each side of the
    /// odds, which makes the logit Anscombe's empirical logit
    /// `ln((k + 0.5) / (n - k + 0.5))` (Anscombe, 1956, Biometrika; from
    /// memory). Only the ends are smoothed, so in the common case lam%
    /// agrees exactly with the two printed rates; the smoothed rate at the
    /// ends still orders correctly (`0.5 / (n + 1) < 1 / n` and
    /// `(n + 0.5) / (n + 1) > (n - 1) / n`). The smoothing is this crate's
    /// choice, from memory; it is not taken from the TREC evaluation tools.
    pub fn lam_pct(&self) -> Option<f64> {
        let fine_rate = smoothed_rate(self.fine_flagged, self.fine())?;
        let junk_rate = smoothed_rate(self.junk_missed, self.junk())?;
        lam_pct(fine_rate, junk_rate)
    }
}

#[expect(
    clippy::cast_precision_loss,
    reason = "message counts are far below 2^53"
)]
fn percent(part: u64, whole: u64) -> Option<f64> {
    if whole == 0 {
        None
    } else {
        Some(100.0 * part as f64 / whole as f64)
    }
}

#[expect(
    clippy::cast_precision_loss,
    reason = "message counts are far below 2^53"
)]
fn smoothed_rate(errors: u64, total: u64) -> Option<f64> {
    if total == 0 {
        None
    } else if errors == 0 || errors == total {
        Some((errors as f64 + 0.5) / (total as f64 + 1.0))
    } else {
        Some(errors as f64 / total as f64)
    }
}

/// Logistic average misclassification in percent, from a fine-misclassified
/// rate and a junk-missed rate, each a fraction in `[0, 1]` (not percent).
///
/// Computed as `sqrt(a b) / (sqrt(a b) + sqrt((1 - a)(1 - b)))` with
/// `a`, `b` the two rates, which is the module's logit formula with the
/// logarithms cancelled: the mean logit is the log of
/// `sqrt(a b / ((1 - a)(1 - b)))`, and `logit^-1(ln o) = o / (1 + o)`. This
/// form is exact at the ends: a rate of 0 gives 0 and a rate of 1 gives 100
/// (the logit limits), so only one pair is undefined.
///
/// `None` when a rate is NaN or outside `[0, 1]`, or when one rate is 0 and
/// the other 1 (the mean logit is then `-inf + inf`). Use
/// [`Confusion::lam_pct`] to get the smoothed, always-defined value from
/// counts.
pub fn lam_pct(fine_misclassified_rate: f64, junk_missed_rate: f64) -> Option<f64> {
    let a = fine_misclassified_rate;
    let b = junk_missed_rate;
    if !(0.0..=1.0).contains(&a) || !(0.0..=1.0).contains(&b) {
        return None;
    }
    // Square roots taken apart so that a * b cannot underflow.
    let wrong = a.sqrt() * b.sqrt();
    let right = (1.0 - a).sqrt() * (1.0 - b).sqrt();
    let total = wrong + right;
    if total > 0.0 {
        Some(100.0 * wrong / total)
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn logit(x: f64) -> f64 {
        (x / (1.0 - x)).ln()
    }

    fn logistic(z: f64) -> f64 {
        1.0 / (1.0 + (-z).exp())
    }

    /// The TREC 2005 overview's formula, written literally.
    fn lam_by_logits(a: f64, b: f64) -> f64 {
        100.0 * logistic((logit(a) + logit(b)) / 2.0)
    }

    #[test]
    fn equal_rates_give_that_rate() {
        // From the definition (Cormack and Lynam, TREC 2005 spam track
        // overview): logit^-1((logit r + logit r) / 2) = r.
        for r in [0.001, 0.01, 0.05, 0.3, 0.5, 0.9] {
            let lam = lam_pct(r, r).unwrap();
            assert!((lam - 100.0 * r).abs() < 1e-12, "r = {r}: lam% = {lam}");
        }
    }

    #[test]
    fn one_and_four_percent() {
        // Worked by hand from the definition (TREC 2005 spam track overview):
        //   logit(0.01) = ln(1/99)  = -4.595119850
        //   logit(0.04) = ln(1/24)  = -3.178053830
        //   mean                     = -3.886586840 = -ln(sqrt(99 * 24))
        //   logit^-1(mean) = 1 / (1 + sqrt(2376)) = 1 / 49.744230428
        //                  = 0.0201028339  ->  2.01028339 %
        // The geometric mean of the rates would be 2%; lam is slightly above
        // because it averages odds, not rates.
        let lam = lam_pct(0.01, 0.04).unwrap();
        assert!((lam - 2.010_283_386_434_35).abs() < 1e-12, "lam% = {lam}");
        assert!((lam - lam_by_logits(0.01, 0.04)).abs() < 1e-12);
        // Symmetric in its two rates.
        assert_eq!(lam_pct(0.04, 0.01), Some(lam));
    }

    #[test]
    fn closed_form_matches_the_logit_formula() {
        // Common practice, no source: the closed form must agree with the
        // literal definition wherever both are finite.
        for a in [1e-6, 0.003, 0.02, 0.25, 0.5, 0.77, 0.999] {
            for b in [1e-5, 0.01, 0.1, 0.6, 0.9999] {
                let lam = lam_pct(a, b).unwrap();
                let by_logits = lam_by_logits(a, b);
                assert!(
                    (lam - by_logits).abs() < 1e-9 * by_logits.max(1.0),
                    "a = {a}, b = {b}: {lam} vs {by_logits}"
                );
            }
        }
    }

    #[test]
    fn boundary_rates() {
        // Limits of the logit formula: logit(0) = -inf drags the mean to
        // -inf (lam 0); logit(1) = +inf drags it to +inf (lam 100).
        assert_eq!(lam_pct(0.0, 0.3), Some(0.0));
        assert_eq!(lam_pct(1.0, 0.3), Some(100.0));
        assert_eq!(lam_pct(0.0, 1.0), None);
        assert_eq!(lam_pct(1.0, 0.0), None);
        assert_eq!(lam_pct(f64::NAN, 0.1), None);
        assert_eq!(lam_pct(0.1, 1.5), None);
        assert_eq!(lam_pct(-0.1, 0.1), None);
    }

    #[test]
    fn confusion_flags_at_or_above_threshold() {
        let counts = confusion(
            &[0.9, 0.5, 0.49, 0.5, 0.1, 0.7],
            &[true, true, true, false, false, false],
            0.5,
        )
        .unwrap();
        assert_eq!(
            counts,
            Confusion {
                junk_caught: 2,
                junk_missed: 1,
                fine_passed: 1,
                fine_flagged: 2
            }
        );
        assert!((counts.fine_misclassified_pct().unwrap() - 200.0 / 3.0).abs() < 1e-12);
        assert!((counts.junk_missed_pct().unwrap() - 100.0 / 3.0).abs() < 1e-12);
    }

    #[test]
    fn confusion_rejects_bad_threshold_and_scores() {
        assert!(matches!(
            confusion(&[0.5], &[true], f64::NAN),
            Err(MetricsError::InvalidParameter {
                name: "threshold",
                ..
            })
        ));
        assert!(matches!(
            confusion(&[0.5, f64::NAN], &[true, false], 0.5),
            Err(MetricsError::NotFinite { index: 1, .. })
        ));
        assert_eq!(confusion(&[], &[], 0.5), Err(MetricsError::Empty));
    }

    #[test]
    fn rates_are_none_for_an_absent_class() {
        let only_junk = confusion(&[0.9, 0.1], &[true, true], 0.5).unwrap();
        assert_eq!(only_junk.fine_misclassified_pct(), None);
        assert_eq!(only_junk.junk_missed_pct(), Some(50.0));
        assert_eq!(only_junk.lam_pct(), None);
    }

    #[test]
    fn lam_from_counts_uses_raw_rates_inside() {
        // 10 of 1000 fine flagged, 40 of 1000 junk missed: no smoothing, so
        // this is the 1% / 4% example above.
        let counts = Confusion {
            junk_caught: 960,
            junk_missed: 40,
            fine_passed: 990,
            fine_flagged: 10,
        };
        let lam = counts.lam_pct().unwrap();
        assert!((lam - 2.010_283_386_434_35).abs() < 1e-12, "lam% = {lam}");
    }

    #[test]
    fn lam_from_counts_smooths_a_zero() {
        // 0 of 1000 fine flagged, 30 of 500 junk missed. Worked by hand:
        //   fpr smoothed = 0.5 / 1001, odds 0.5 / 1000.5 = 1 / 2001
        //   fnr = 30 / 500, odds 30 / 470 = 3 / 47
        //   mean-logit odds o = sqrt(3 / (2001 * 47)) = sqrt(3 / 94047)
        //                     = 0.005647915026
        //   lam = o / (1 + o) = 0.005616195233  ->  0.5616195233 %
        // Unsmoothed, lam% would be exactly 0 whatever the junk missed.
        let counts = Confusion {
            junk_caught: 470,
            junk_missed: 30,
            fine_passed: 1000,
            fine_flagged: 0,
        };
        let lam = counts.lam_pct().unwrap();
        assert!((lam - 0.561_619_523_291).abs() < 1e-11, "lam% = {lam}");
    }

    #[test]
    fn lam_from_counts_is_finite_at_every_extreme() {
        // Every count at 0 or at its class size: 3 fine, 7 junk.
        for (fine_flagged, junk_missed) in [(0, 0), (0, 7), (3, 0), (3, 7)] {
            let counts = Confusion {
                junk_caught: 7 - junk_missed,
                junk_missed,
                fine_passed: 3 - fine_flagged,
                fine_flagged,
            };
            let lam = counts.lam_pct().unwrap();
            assert!(lam > 0.0 && lam < 100.0, "{counts:?}: lam% = {lam}");
        }
    }
}
