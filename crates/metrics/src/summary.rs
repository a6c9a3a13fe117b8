//! Every metric at once, for `chaffgate eval --json` and drift reports.
//!
//! [`summarize`] sorts the scores once and derives the ranking metrics from
//! that, so a summary costs O(n log n) however many metrics it holds. Every
//! field is a finite number (no NaN, no infinity), so the JSON form never
//! holds `null`.

use serde::Serialize;

use crate::confusion::confusion;
use crate::error::{Class, MetricsError};
use crate::input::{Ranked, check_probabilities, check_threshold};
use crate::probability::{brier_score, log_loss};
use crate::ranking::{auc_of, one_minus_roca_pct, recall_at_rate_of};

/// The false-junk rate bounds that [`Summary`] reports recall at.
const FALSE_JUNK_RATE_0_1_PCT: f64 = 0.001;
const FALSE_JUNK_RATE_1_PCT: f64 = 0.01;

/// All metrics for one scored corpus at one threshold.
///
/// Percentages are 0-100; rates and recalls are 0-1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Summary {
    /// Messages scored.
    pub messages: u64,
    /// Of which junk.
    pub junk: u64,
    /// Of which fine.
    pub fine: u64,
    /// ROC area, see [`crate::roc_auc`].
    pub roc_auc: f64,
    /// `(1 - roc_auc) * 100`, see [`crate::one_minus_roca_pct`].
    pub one_minus_roca_pct: f64,
    /// lam% at `threshold`, smoothed at zero counts as in
    /// [`crate::Confusion::lam_pct`].
    pub lam_pct: f64,
    /// Fine flagged / fine, in percent, at `threshold`.
    pub fine_misclassified_pct: f64,
    /// Junk missed / junk, in percent, at `threshold`.
    pub junk_missed_pct: f64,
    /// Best junk recall (0-1) with at most 0.1% of fine flagged, see
    /// [`crate::junk_recall_at_false_junk_rate`].
    pub junk_recall_at_0_1pct_false_junk: f64,
    /// Best junk recall (0-1) with at most 1% of fine flagged.
    pub junk_recall_at_1pct_false_junk: f64,
    /// Mean log loss, see [`crate::log_loss`].
    pub log_loss: f64,
    /// Brier score, see [`crate::brier_score`].
    pub brier_score: f64,
    /// The threshold the counting metrics used: junk when
    /// `p_junk >= threshold`.
    pub threshold: f64,
}

/// Computes every field of [`Summary`].
///
/// Scores must be probabilities in `[0, 1]` (log loss and Brier need them),
/// both classes must be present (ROC area needs them), and `threshold` must
/// be finite. Errors: see the crate docs.
pub fn summarize(
    p_junk: &[f64],
    is_junk: &[bool],
    threshold: f64,
) -> Result<Summary, MetricsError> {
    check_probabilities(p_junk, is_junk)?;
    check_threshold(threshold)?;
    let ranked = Ranked::new(p_junk, is_junk);
    ranked.require_both_classes()?;

    let roc_auc = auc_of(&ranked)?;
    let counts = confusion(p_junk, is_junk, threshold)?;
    // Both classes are present, so no rate can be missing; the errors are
    // there only so that a broken invariant cannot panic.
    let no_fine = MetricsError::MissingClass {
        missing: Class::Fine,
    };
    let no_junk = MetricsError::MissingClass {
        missing: Class::Junk,
    };
    let fine_misclassified_pct = counts.fine_misclassified_pct().ok_or(no_fine)?;
    let junk_missed_pct = counts.junk_missed_pct().ok_or(no_junk.clone())?;
    let lam_pct = counts.lam_pct().ok_or(no_junk)?;

    Ok(Summary {
        messages: ranked.junk + ranked.fine,
        junk: ranked.junk,
        fine: ranked.fine,
        roc_auc,
        one_minus_roca_pct: one_minus_roca_pct(roc_auc),
        lam_pct,
        fine_misclassified_pct,
        junk_missed_pct,
        junk_recall_at_0_1pct_false_junk: recall_at_rate_of(&ranked, FALSE_JUNK_RATE_0_1_PCT)?
            .junk_recall,
        junk_recall_at_1pct_false_junk: recall_at_rate_of(&ranked, FALSE_JUNK_RATE_1_PCT)?
            .junk_recall,
        log_loss: log_loss(p_junk, is_junk)?,
        brier_score: brier_score(p_junk, is_junk)?,
        threshold,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::{junk_recall_at_false_junk_rate, roc_auc};

    #[test]
    fn summary_agrees_with_the_single_metrics() {
        let p = [0.95, 0.8, 0.8, 0.6, 0.4, 0.3, 0.3, 0.1, 0.05, 0.0];
        let y = [
            true, true, false, true, false, true, false, false, false, false,
        ];
        let summary = summarize(&p, &y, 0.5).unwrap();
        let counts = confusion(&p, &y, 0.5).unwrap();
        assert_eq!((summary.messages, summary.junk, summary.fine), (10, 4, 6));
        assert_eq!(summary.roc_auc, roc_auc(&p, &y).unwrap());
        assert_eq!(
            summary.one_minus_roca_pct,
            one_minus_roca_pct(summary.roc_auc)
        );
        assert_eq!(Some(summary.lam_pct), counts.lam_pct());
        assert_eq!(
            Some(summary.fine_misclassified_pct),
            counts.fine_misclassified_pct()
        );
        assert_eq!(Some(summary.junk_missed_pct), counts.junk_missed_pct());
        assert_eq!(
            summary.junk_recall_at_1pct_false_junk,
            junk_recall_at_false_junk_rate(&p, &y, 0.01)
                .unwrap()
                .junk_recall
        );
        assert_eq!(summary.junk_recall_at_1pct_false_junk, 0.25);
        assert_eq!(summary.log_loss, log_loss(&p, &y).unwrap());
        assert_eq!(summary.brier_score, brier_score(&p, &y).unwrap());
        assert_eq!(summary.threshold, 0.5);
    }

    #[test]
    fn summary_serializes_every_field_as_a_number() {
        let summary = summarize(&[0.0, 1.0, 0.2, 0.9], &[false, true, false, true], 0.5).unwrap();
        let json = serde_json::to_value(summary).unwrap();
        let fields = json.as_object().unwrap();
        assert_eq!(fields.len(), 13);
        for (key, value) in fields {
            assert!(value.is_number(), "{key} = {value}");
        }
        // No fine flagged and no junk missed: lam% is smoothed, not zero.
        assert!(summary.lam_pct > 0.0);
        assert_eq!(summary.fine_misclassified_pct, 0.0);
    }

    #[test]
    fn summary_refuses_what_any_part_refuses() {
        assert_eq!(
            summarize(&[0.2, 0.9], &[true, true], 0.5),
            Err(MetricsError::MissingClass {
                missing: Class::Fine
            })
        );
        assert!(matches!(
            summarize(&[0.2, 1.5], &[true, false], 0.5),
            Err(MetricsError::NotProbability { index: 1, .. })
        ));
        assert!(matches!(
            summarize(&[0.2, f64::NAN], &[true, false], 0.5),
            Err(MetricsError::NotFinite { index: 1, .. })
        ));
        assert!(matches!(
            summarize(&[0.2, 0.4], &[true, false], f64::INFINITY),
            Err(MetricsError::InvalidParameter { .. })
        ));
        assert_eq!(summarize(&[], &[], 0.5), Err(MetricsError::Empty));
        assert!(matches!(
            summarize(&[0.2], &[true, false], 0.5),
            Err(MetricsError::LengthMismatch { .. })
        ));
    }
}
