//! Population stability index (PSI): has the spread of `p_junk` moved?
//!
//! Drift reports compare the scores of a baseline window (say, the week a
//! checkpoint was accepted) with those of the current window, over fixed
//! [`ScoreBins`]. No labels are needed, so PSI warns of drift before
//! moderators have caught up with their verdicts.
//!
//! With `b_i` and `c_i` the baseline and current shares of bin `i`:
//!
//! ```text
//! PSI = Σ_i (c_i - b_i) · ln(c_i / b_i)
//! ```
//!
//! Each term is zero or positive (the difference and the logarithm share
//! their sign), so PSI is zero or positive, and swapping baseline and
//! current leaves it unchanged. It is the symmetric (Jeffreys) form of the
//! Kullback-Leibler divergence between the two binned distributions.
//!
//! What must stay true: no panics, no NaN, no infinity. An empty bin would
//! make `ln(c_i / b_i)` infinite, so every share is smoothed by
//! [`PSI_SHARE_EPS`] first (see there).

use serde::Serialize;

use crate::error::MetricsError;
use crate::probability::compensated_sum;

/// Added to every bin's share (empty or not) in both samples before PSI is
/// computed, so that an empty bin gives a large but finite term.
///
/// Adding a small constant such as 1e-4 to the shares is common practice,
/// with no single source; other tools add 0.5 to the counts instead, or
/// only replace zero shares. Adding it to every bin keeps the rule the same
/// for all bins, and identical shares still give exactly zero. The smoothed
/// shares sum to `1 + bins · PSI_SHARE_EPS` rather than 1; with 10 bins
/// that is 1.001, which moves PSI by far less than the bands of
/// [`psi_band`] are wide.
pub const PSI_SHARE_EPS: f64 = 1e-4;

/// Contiguous bins over a range of `p_junk`.
///
/// A score `x` falls in bin `i` when `edges[i] <= x < edges[i + 1]`; the
/// last bin is closed on the right as well, so the top edge (1.0 for the
/// default bins) belongs to it. A score below the first edge or above the
/// last is in no bin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ScoreBins {
    edges: Vec<f64>,
}

impl ScoreBins {
    /// Bins in [`ScoreBins::default`].
    pub const DEFAULT_BINS: usize = 10;

    /// The most bins [`ScoreBins::uniform`] (and [`crate::calibration`])
    /// will build, so that a stray large count cannot exhaust memory.
    pub const MAX_BINS: usize = 10_000;

    /// `n_bins` equal-width bins over `[0, 1]`. Edge `i` is `i / n_bins`,
    /// rounded once, so the edges are exact where the fraction is (0.5 of
    /// 2 bins, 0.25 of 4).
    ///
    /// Errors: [`MetricsError::InvalidParameter`] when `n_bins` is 0 or
    /// above [`ScoreBins::MAX_BINS`].
    pub fn uniform(n_bins: usize) -> Result<Self, MetricsError> {
        if n_bins == 0 || n_bins > Self::MAX_BINS {
            return Err(MetricsError::InvalidParameter {
                name: "n_bins",
                value: usize_to_f64(n_bins),
                allowed: "between 1 and 10000",
            });
        }
        let n = usize_to_f64(n_bins);
        let edges = (0..=n_bins).map(|i| usize_to_f64(i) / n).collect();
        Ok(ScoreBins { edges })
    }

    /// Bins with the given edges: at least two, every one finite, each
    /// strictly greater than the one before. `n` edges make `n - 1` bins.
    ///
    /// Errors: [`MetricsError::InvalidParameter`] naming `edges`, with the
    /// edge count when there are fewer than two, else the first edge that is
    /// not finite or not above its predecessor.
    pub fn from_edges(edges: Vec<f64>) -> Result<Self, MetricsError> {
        if edges.len() < 2 {
            return Err(MetricsError::InvalidParameter {
                name: "edges",
                value: usize_to_f64(edges.len()),
                allowed: "at least two edges",
            });
        }
        if let Some(&bad) = edges.iter().find(|e| !e.is_finite()) {
            return Err(MetricsError::InvalidParameter {
                name: "edges",
                value: bad,
                allowed: "finite numbers",
            });
        }
        if let Some(pair) = edges.windows(2).find(|pair| pair[1] <= pair[0]) {
            return Err(MetricsError::InvalidParameter {
                name: "edges",
                value: pair[1],
                allowed: "strictly increasing",
            });
        }
        Ok(ScoreBins { edges })
    }

    /// The edges, lowest first; one more than there are bins.
    pub fn edges(&self) -> &[f64] {
        &self.edges
    }

    /// How many bins.
    pub fn bin_count(&self) -> usize {
        self.edges.len() - 1
    }

    /// The bin `x` falls in, or `None` when it is outside every bin (NaN
    /// included).
    pub fn bin_of(&self, x: f64) -> Option<usize> {
        let first = self.edges[0];
        let last = self.edges[self.edges.len() - 1];
        if !(x >= first && x <= last) {
            return None;
        }
        // Edges at or below x: at least one (the first), since x >= first.
        let at_or_below = self.edges.partition_point(|&edge| edge <= x);
        Some((at_or_below - 1).min(self.bin_count() - 1))
    }

    /// `(lower, upper)` edges of bin `i`. Callers pass `i < bin_count()`.
    pub(crate) fn bounds(&self, i: usize) -> (f64, f64) {
        (self.edges[i], self.edges[i + 1])
    }

    /// How many of `sample` fall in each bin.
    ///
    /// Errors: [`MetricsError::EmptySample`] for an empty sample,
    /// [`MetricsError::SampleValue`] for the first score in no bin.
    fn count(&self, sample: &[f64], name: &'static str) -> Result<Vec<u64>, MetricsError> {
        if sample.is_empty() {
            return Err(MetricsError::EmptySample { sample: name });
        }
        let mut counts = vec![0_u64; self.bin_count()];
        for (index, &value) in sample.iter().enumerate() {
            match self.bin_of(value) {
                Some(bin) => counts[bin] += 1,
                None => {
                    return Err(MetricsError::SampleValue {
                        sample: name,
                        index,
                        value,
                        allowed: "a finite score within the bins' first and last edge",
                    });
                }
            }
        }
        Ok(counts)
    }
}

impl Default for ScoreBins {
    /// [`ScoreBins::DEFAULT_BINS`] (10) equal-width bins over `[0, 1]`.
    fn default() -> Self {
        let n = usize_to_f64(Self::DEFAULT_BINS);
        let edges = (0..=Self::DEFAULT_BINS)
            .map(|i| usize_to_f64(i) / n)
            .collect();
        ScoreBins { edges }
    }
}

/// One bin of a [`PsiReport`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PsiBin {
    /// Lower edge (included).
    pub lower: f64,
    /// Upper edge (excluded, except for the last bin).
    pub upper: f64,
    /// Baseline scores in this bin.
    pub baseline_count: u64,
    /// Current scores in this bin.
    pub current_count: u64,
    /// `baseline_count / baseline total + PSI_SHARE_EPS`.
    pub baseline_share: f64,
    /// `current_count / current total + PSI_SHARE_EPS`.
    pub current_share: f64,
    /// `(current_share - baseline_share) · ln(current_share / baseline_share)`,
    /// zero or positive.
    pub contribution: f64,
}

/// The index and where it comes from, bin by bin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PsiReport {
    /// Sum of the bins' contributions; zero or positive, finite.
    pub psi: f64,
    /// One entry per bin, lowest first.
    pub bins: Vec<PsiBin>,
}

/// Population stability index of `current` against `baseline`, both
/// `p_junk` samples, over `bins`. See the module docs for the formula and
/// [`PSI_SHARE_EPS`] for the smoothing of empty bins.
///
/// The two samples need not be the same size; only shares are compared.
///
/// Errors: [`MetricsError::EmptySample`] when either sample is empty
/// (baseline checked first), [`MetricsError::SampleValue`] for the first
/// score that is NaN, infinite or outside the bins.
pub fn psi(baseline: &[f64], current: &[f64], bins: &ScoreBins) -> Result<PsiReport, MetricsError> {
    let baseline_counts = bins.count(baseline, "baseline")?;
    let current_counts = bins.count(current, "current")?;
    let baseline_total = usize_to_f64(baseline.len());
    let current_total = usize_to_f64(current.len());

    let mut report_bins = Vec::with_capacity(bins.bin_count());
    for (i, (&b_count, &c_count)) in baseline_counts.iter().zip(&current_counts).enumerate() {
        let (lower, upper) = bins.bounds(i);
        let baseline_share = u64_to_f64(b_count) / baseline_total + PSI_SHARE_EPS;
        let current_share = u64_to_f64(c_count) / current_total + PSI_SHARE_EPS;
        let contribution = (current_share - baseline_share) * (current_share / baseline_share).ln();
        report_bins.push(PsiBin {
            lower,
            upper,
            baseline_count: b_count,
            current_count: c_count,
            baseline_share,
            current_share,
            contribution,
        });
    }
    let psi = compensated_sum(report_bins.iter().map(|bin| bin.contribution));
    Ok(PsiReport {
        psi,
        bins: report_bins,
    })
}

/// How to read a PSI value.
///
/// The cut-offs (below 0.1, 0.1 up to 0.25, 0.25 and above) are common
/// practice in credit-scoring model monitoring, with no single source; they
/// are a reading aid for operators, not a statistical test. With few
/// messages per window PSI is noisy, and the same shift reads larger.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum PsiBand {
    /// PSI below 0.1: no shift worth acting on.
    Stable,
    /// PSI from 0.1 up to (not including) 0.25: worth a look.
    Moderate,
    /// PSI of 0.25 or more: the scores have moved a lot.
    Large,
}

/// The [`PsiBand`] a PSI value reads as. NaN, which [`psi`] never returns,
/// reads as [`PsiBand::Large`], the cautious side.
pub fn psi_band(psi: f64) -> PsiBand {
    if psi < 0.1 {
        PsiBand::Stable
    } else if psi < 0.25 {
        PsiBand::Moderate
    } else {
        PsiBand::Large
    }
}

#[expect(
    clippy::cast_precision_loss,
    reason = "message and bin counts are far below 2^53"
)]
fn usize_to_f64(n: usize) -> f64 {
    n as f64
}

#[expect(
    clippy::cast_precision_loss,
    reason = "message counts are far below 2^53"
)]
fn u64_to_f64(n: u64) -> f64 {
    n as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_bins_are_tenths_with_the_top_closed() {
        let bins = ScoreBins::default();
        assert_eq!(bins, ScoreBins::uniform(10).unwrap());
        assert_eq!(bins.bin_count(), 10);
        assert_eq!(bins.bin_of(0.0), Some(0));
        assert_eq!(bins.bin_of(-0.0), Some(0));
        assert_eq!(bins.bin_of(0.099), Some(0));
        assert_eq!(bins.bin_of(0.1), Some(1));
        assert_eq!(bins.bin_of(0.95), Some(9));
        assert_eq!(bins.bin_of(1.0), Some(9));
        assert_eq!(bins.bin_of(1.0 + f64::EPSILON), None);
        assert_eq!(bins.bin_of(-1e-300), None);
        assert_eq!(bins.bin_of(f64::NAN), None);
    }

    #[test]
    fn edges_must_increase() {
        assert!(ScoreBins::from_edges(vec![0.0, 0.2, 1.0]).is_ok());
        assert_eq!(
            ScoreBins::from_edges(vec![0.0, 0.5, 0.5, 1.0]),
            Err(MetricsError::InvalidParameter {
                name: "edges",
                value: 0.5,
                allowed: "strictly increasing",
            })
        );
        assert!(ScoreBins::from_edges(vec![0.0]).is_err());
        assert!(ScoreBins::from_edges(vec![0.0, f64::NAN, 1.0]).is_err());
        assert!(ScoreBins::from_edges(vec![0.0, f64::INFINITY]).is_err());
        assert!(ScoreBins::uniform(0).is_err());
        assert!(ScoreBins::uniform(ScoreBins::MAX_BINS).is_ok());
        assert!(ScoreBins::uniform(ScoreBins::MAX_BINS + 1).is_err());
    }

    #[test]
    fn psi_by_hand() {
        // From the definition, with bins [0, 0.5) and [0.5, 1]:
        // baseline 2 of 4 in each bin: shares 0.5 + 1e-4 = 0.5001 each;
        // current 1 of 4 low, 3 of 4 high: shares 0.2501 and 0.7501.
        // low:  (0.2501 - 0.5001) · ln(0.2501 / 0.5001)
        //     = -0.25 · ln(0.500100)  = -0.25 · -0.692947 = 0.173237
        // high: (0.7501 - 0.5001) · ln(0.7501 / 0.5001)
        //     =  0.25 · ln(1.499900)  =  0.25 ·  0.405398 = 0.101350
        // PSI = 0.274586 (unsmoothed: 0.25 ln 2 + 0.25 ln 1.5 = 0.274653).
        let bins = ScoreBins::from_edges(vec![0.0, 0.5, 1.0]).unwrap();
        let report = psi(&[0.1, 0.2, 0.6, 0.9], &[0.3, 0.5, 0.7, 1.0], &bins).unwrap();
        let low = -0.25 * (0.2501_f64 / 0.5001).ln();
        let high = 0.25 * (0.7501_f64 / 0.5001).ln();
        assert!((report.bins[0].contribution - low).abs() < 1e-15);
        assert!((report.bins[1].contribution - high).abs() < 1e-15);
        assert!((report.psi - (low + high)).abs() < 1e-15);
        assert!(
            (report.psi - 0.274_586).abs() < 1e-6,
            "psi = {psi}",
            psi = report.psi
        );
        assert_eq!(report.bins[1].current_count, 3);
        assert_eq!(report.bins[0].baseline_share, 0.5001);
        assert_eq!(psi_band(report.psi), PsiBand::Large);
    }

    #[test]
    fn empty_bin_is_smoothed_not_infinite() {
        // Baseline all low, current all high: both bins have an empty side.
        // Each term is (1 - 0) · ln((1 + 1e-4) / 1e-4) = ln(10001) = 9.21044;
        // from the definition.
        let bins = ScoreBins::from_edges(vec![0.0, 0.5, 1.0]).unwrap();
        let report = psi(&[0.1, 0.2], &[0.8, 0.9, 0.7], &bins).unwrap();
        assert!(report.psi.is_finite());
        let want = 2.0 * (1.0001_f64 / 0.0001).ln();
        assert!(
            (report.psi - want).abs() < 1e-12,
            "psi = {psi}",
            psi = report.psi
        );
        assert!((want - 18.420_88).abs() < 1e-4);
    }

    #[test]
    fn identical_shares_give_zero() {
        let bins = ScoreBins::default();
        let sample = [0.05, 0.15, 0.15, 0.5, 0.99, 1.0];
        assert_eq!(psi(&sample, &sample, &bins).unwrap().psi, 0.0);
        // Same shares from twice the messages: still exactly zero.
        let doubled: Vec<f64> = sample.iter().chain(&sample).copied().collect();
        assert_eq!(psi(&sample, &doubled, &bins).unwrap().psi, 0.0);
        assert_eq!(psi_band(0.0), PsiBand::Stable);
    }

    #[test]
    fn swapping_the_samples_keeps_psi() {
        let bins = ScoreBins::default();
        let a = [0.01, 0.02, 0.3, 0.31, 0.32, 0.7, 0.9];
        let b = [0.5, 0.55, 0.6, 0.02, 0.99];
        let ab = psi(&a, &b, &bins).unwrap().psi;
        let ba = psi(&b, &a, &bins).unwrap().psi;
        assert!((ab - ba).abs() < 1e-12, "{ab} vs {ba}");
        assert!(ab > 0.0);
    }

    #[test]
    fn bad_samples_are_named() {
        let bins = ScoreBins::default();
        assert_eq!(
            psi(&[], &[0.5], &bins),
            Err(MetricsError::EmptySample { sample: "baseline" })
        );
        assert_eq!(
            psi(&[0.5], &[], &bins),
            Err(MetricsError::EmptySample { sample: "current" })
        );
        assert!(matches!(
            psi(&[0.5], &[0.2, 1.5], &bins),
            Err(MetricsError::SampleValue {
                sample: "current",
                index: 1,
                ..
            })
        ));
        assert!(matches!(
            psi(&[f64::NAN], &[0.2], &bins),
            Err(MetricsError::SampleValue {
                sample: "baseline",
                index: 0,
                ..
            })
        ));
    }

    #[test]
    fn bands_split_at_one_tenth_and_one_quarter() {
        // Cut-offs: common practice, no single source.
        assert_eq!(psi_band(0.099_999), PsiBand::Stable);
        assert_eq!(psi_band(0.1), PsiBand::Moderate);
        assert_eq!(psi_band(0.249_999), PsiBand::Moderate);
        assert_eq!(psi_band(0.25), PsiBand::Large);
        assert_eq!(psi_band(f64::NAN), PsiBand::Large);
    }
}
