//! Calibration: does `p_junk = 0.8` mean eight in ten are junk?
//!
//! [`calibration`] sorts messages into equal-width bins of `p_junk` and
//! compares, bin by bin, the mean `p_junk` with the share that was junk:
//! the reliability table drift reports print. The expected calibration
//! error (ECE) sums the gaps, each weighted by its bin's share of messages:
//!
//! ```text
//! ECE = Σ_b (count_b / N) · |junk_rate_b - mean_p_junk_b|
//! ```
//!
//! as defined by Naeini, Cooper and Hauskrecht, "Obtaining well calibrated
//! probabilities using Bayesian binning" (AAAI 2015), and written as
//! equation 3 of Guo, Pleiss, Sun and Weinberger, "On calibration of modern
//! neural networks" (ICML 2017). Empty bins contribute nothing.
//!
//! Bin `b` of `n` holds `p_junk` in `[b / n, (b + 1) / n)`, and the last
//! bin also holds 1.0 (the rule of [`ScoreBins`]). scikit-learn's
//! `calibration_curve(strategy="uniform")` puts a score lying exactly on an
//! inner edge into the lower bin instead, so the two agree except for
//! scores on an edge.
//!
//! What must stay true: scores must be probabilities (`[0, 1]`); one class
//! alone is allowed; the ECE is finite and in `[0, 1]`.

use serde::Serialize;

use crate::error::MetricsError;
use crate::input::check_probabilities;
use crate::probability::{CompensatedSum, compensated_sum};
use crate::stability::ScoreBins;

/// One row of the reliability table.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CalibrationBin {
    /// Lower edge (included).
    pub lower: f64,
    /// Upper edge (excluded, except for the last bin, which holds 1.0).
    pub upper: f64,
    /// Messages whose `p_junk` falls in the bin.
    pub count: u64,
    /// Mean `p_junk` of those messages; `None` when the bin is empty.
    pub mean_p_junk: Option<f64>,
    /// Share of those messages that are junk; `None` when the bin is empty.
    pub junk_rate: Option<f64>,
}

/// The reliability table and its expected calibration error.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Calibration {
    /// Expected calibration error, in `[0, 1]`; 0 when every bin's junk rate
    /// equals its mean `p_junk`.
    pub ece: f64,
    /// Every bin, empty ones included, lowest first.
    pub bins: Vec<CalibrationBin>,
}

impl Calibration {
    /// Bins drift reports use unless told otherwise.
    pub const DEFAULT_BINS: usize = 10;
}

/// Reliability table and expected calibration error over `n_bins`
/// equal-width bins of `p_junk` (see the module docs for the binning rule
/// and the formula).
///
/// Per-bin sums are compensated (Neumaier), so bin means do not drift with
/// the number of messages. The ECE is clamped to `[0, 1]` against rounding
/// at the last ulp.
///
/// Errors: see the crate docs ([`MetricsError::NotProbability`] for a score
/// outside `[0, 1]`); then [`MetricsError::InvalidParameter`] when `n_bins`
/// is 0 or above [`ScoreBins::MAX_BINS`].
pub fn calibration(
    p_junk: &[f64],
    is_junk: &[bool],
    n_bins: usize,
) -> Result<Calibration, MetricsError> {
    check_probabilities(p_junk, is_junk)?;
    let bins = ScoreBins::uniform(n_bins)?;

    let mut counts = vec![0_u64; n_bins];
    let mut junk = vec![0_u64; n_bins];
    let mut p_sums = vec![CompensatedSum::default(); n_bins];
    for (&p, &y) in p_junk.iter().zip(is_junk) {
        // Cannot miss: every score is in [0, 1], which the bins cover.
        let Some(b) = bins.bin_of(p) else { continue };
        counts[b] += 1;
        junk[b] += u64::from(y);
        p_sums[b].add(p);
    }

    let total = to_f64(p_junk.len() as u64);
    let mut table = Vec::with_capacity(n_bins);
    let mut gaps = Vec::with_capacity(n_bins);
    for b in 0..n_bins {
        let edges = bins.edges();
        let (lower, upper) = (edges[b], edges[b + 1]);
        let count = counts[b];
        let (mean_p_junk, junk_rate) = if count == 0 {
            (None, None)
        } else {
            let n = to_f64(count);
            let mean = p_sums[b].total() / n;
            let rate = to_f64(junk[b]) / n;
            gaps.push((n / total) * (rate - mean).abs());
            (Some(mean), Some(rate))
        };
        table.push(CalibrationBin {
            lower,
            upper,
            count,
            mean_p_junk,
            junk_rate,
        });
    }
    let ece = compensated_sum(gaps.into_iter()).clamp(0.0, 1.0);
    Ok(Calibration { ece, bins: table })
}

#[expect(
    clippy::cast_precision_loss,
    reason = "message counts are far below 2^53"
)]
fn to_f64(n: u64) -> f64 {
    n as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ece_by_hand() {
        // From the definition, 2 bins ([0, 0.5) and [0.5, 1]), 5 messages:
        // low:  p 0.1 fine, 0.3 junk       -> mean 0.2, junk rate 0.5,
        //       gap 0.3, weight 2/5
        // high: p 0.6 junk, 0.8 junk, 1.0 fine -> mean 0.8, junk rate 2/3,
        //       gap 0.8 - 2/3 = 2/15, weight 3/5
        // ECE = 0.4 · 0.3 + 0.6 · 2/15 = 0.12 + 0.08 = 0.2
        let table = calibration(
            &[0.1, 0.3, 0.6, 0.8, 1.0],
            &[false, true, true, true, false],
            2,
        )
        .unwrap();
        assert!(
            (table.ece - 0.2).abs() < 1e-15,
            "ece = {ece}",
            ece = table.ece
        );
        let low = table.bins[0];
        assert_eq!((low.lower, low.upper, low.count), (0.0, 0.5, 2));
        assert!((low.mean_p_junk.unwrap() - 0.2).abs() < 1e-15);
        assert_eq!(low.junk_rate, Some(0.5));
        let high = table.bins[1];
        assert_eq!(high.count, 3);
        assert!((high.mean_p_junk.unwrap() - 0.8).abs() < 1e-15);
        assert!((high.junk_rate.unwrap() - 2.0 / 3.0).abs() < 1e-15);
    }

    #[test]
    fn empty_bins_are_listed_and_weigh_nothing() {
        let table = calibration(&[0.05, 0.05], &[false, false], Calibration::DEFAULT_BINS).unwrap();
        assert_eq!(table.bins.len(), 10);
        assert_eq!(table.bins[0].count, 2);
        for bin in &table.bins[1..] {
            assert_eq!(bin.count, 0);
            assert_eq!(bin.mean_p_junk, None);
            assert_eq!(bin.junk_rate, None);
        }
        // One bin, mean 0.05, junk rate 0: ECE = 1 · 0.05; from the definition.
        assert!((table.ece - 0.05).abs() < 1e-15);
    }

    #[test]
    fn perfectly_calibrated_gives_zero() {
        // In each bin the junk rate equals the (single) score: 0.25 with one
        // junk in four, 0.75 with three in four; from the definition.
        let p = [0.25, 0.25, 0.25, 0.25, 0.75, 0.75, 0.75, 0.75];
        let y = [true, false, false, false, true, true, true, false];
        assert_eq!(calibration(&p, &y, 10).unwrap().ece, 0.0);
    }

    #[test]
    fn confidently_wrong_gives_one() {
        // Score 1 on fine and 0 on junk: every gap is 1; from the definition.
        let table = calibration(&[1.0, 0.0], &[false, true], 10).unwrap();
        assert_eq!(table.ece, 1.0);
        assert_eq!(table.bins[9].count, 1);
        assert_eq!(table.bins[0].count, 1);
    }

    #[test]
    fn edge_scores_go_up_except_one() {
        let table = calibration(&[0.5, 1.0, 0.0], &[true, true, false], 4).unwrap();
        let counts: Vec<u64> = table.bins.iter().map(|b| b.count).collect();
        assert_eq!(counts, vec![1, 0, 1, 1]);
    }

    #[test]
    fn bad_input_is_rejected() {
        assert!(matches!(
            calibration(&[0.5, 1.5], &[true, false], 10),
            Err(MetricsError::NotProbability { index: 1, .. })
        ));
        assert!(matches!(
            calibration(&[f64::NAN], &[true], 10),
            Err(MetricsError::NotFinite { index: 0, .. })
        ));
        assert_eq!(calibration(&[], &[], 10), Err(MetricsError::Empty));
        assert!(matches!(
            calibration(&[0.5], &[true], 0),
            Err(MetricsError::InvalidParameter { name: "n_bins", .. })
        ));
        assert!(calibration(&[0.5], &[true], ScoreBins::MAX_BINS + 1).is_err());
    }
}
