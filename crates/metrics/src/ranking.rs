//! Ranking metrics: ROC area and junk recall at a bounded false-junk rate.
//!
//! Both depend only on the order of the scores, never their values, so any
//! strictly increasing transform of `p_junk` leaves them unchanged. Both
//! work on [`Ranked`]: scores sorted once, with ties merged.

use serde::Serialize;

use crate::error::MetricsError;
use crate::input::{Ranked, check_scores};

/// Area under the ROC curve: the chance that a random junk message scores
/// above a random fine one, a tie counting one half.
///
/// This is the Mann-Whitney U statistic divided by `junk * fine`, which is
/// the same number as the trapezoid area under the ROC curve drawn through
/// every distinct threshold. Sorting makes it O(n log n). The numerator is
/// counted exactly in integers (doubled, so that half-ties stay whole) and
/// divided once, so the result is exact to one rounding while
/// `2 * junk * fine < 2^53`, and within a few ulps beyond.
///
/// Errors: see the crate docs; [`MetricsError::MissingClass`] when all
/// labels are equal, since the area is then 0/0.
pub fn roc_auc(p_junk: &[f64], is_junk: &[bool]) -> Result<f64, MetricsError> {
    check_scores(p_junk, is_junk)?;
    auc_of(&Ranked::new(p_junk, is_junk))
}

pub(crate) fn auc_of(ranked: &Ranked) -> Result<f64, MetricsError> {
    ranked.require_both_classes()?;
    // Walk from the lowest score up. Each junk message in a tie beats every
    // fine message below the tie and half-beats each fine one inside it.
    let mut fine_below: u128 = 0;
    let mut wins_doubled: u128 = 0;
    for tie in ranked.ties.iter().rev() {
        let junk = u128::from(tie.junk);
        let fine = u128::from(tie.fine);
        wins_doubled += junk * (2 * fine_below + fine);
        fine_below += fine;
    }
    let pairs_doubled = 2 * u128::from(ranked.junk) * u128::from(ranked.fine);
    #[expect(
        clippy::cast_precision_loss,
        reason = "counts past 2^53 lose only low bits; the ratio stays within a few ulps"
    )]
    let auc = wins_doubled as f64 / pairs_doubled as f64;
    Ok(auc)
}

/// `(1 - auc) * 100`: the area above the ROC curve in percent, the form in
/// which Cormack and Lynam report ROC area in the TREC 2005 spam track
/// overview ("(1-ROCA)%"), since good filters sit so close to 1 that the
/// complement is easier to read and compare.
///
/// `auc` is a value from [`roc_auc`], in `[0, 1]`; NaN in gives NaN out,
/// which [`roc_auc`] never returns.
pub fn one_minus_roca_pct(auc: f64) -> f64 {
    (1.0 - auc) * 100.0
}

/// The best operating point found by [`junk_recall_at_false_junk_rate`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RecallAtRate {
    /// Flag as junk when `p_junk >= threshold`. Always one of the input
    /// scores, or `f64::INFINITY` when the best choice is to flag nothing
    /// (every tie at the top already holds too many fine messages).
    pub threshold: f64,
    /// Junk flagged / all junk, in `[0, 1]`.
    pub junk_recall: f64,
    /// Fine flagged / all fine, in `[0, 1]`, at most the bound asked for.
    pub false_junk_rate: f64,
}

/// The highest junk recall reachable by any threshold whose false-junk rate
/// (fine messages flagged / all fine messages) is at most
/// `max_false_junk_rate`.
///
/// Thresholds are only tried between distinct scores: messages with equal
/// scores are flagged together or not at all, so a tie holding junk and fine
/// cannot be split to gain recall. When several thresholds reach the best
/// recall, the highest one (fewest fine flagged) is returned. Flagging
/// nothing is always allowed, so there is always an answer.
///
/// The rate test is `fine_flagged as f64 / fine as f64 <= max_false_junk_rate`,
/// the same comparison as reading scikit-learn's `roc_curve` output.
///
/// Errors: see the crate docs; also [`MetricsError::InvalidParameter`] when
/// `max_false_junk_rate` is not in `[0, 1]`.
pub fn junk_recall_at_false_junk_rate(
    p_junk: &[f64],
    is_junk: &[bool],
    max_false_junk_rate: f64,
) -> Result<RecallAtRate, MetricsError> {
    check_scores(p_junk, is_junk)?;
    check_rate(max_false_junk_rate)?;
    recall_at_rate_of(&Ranked::new(p_junk, is_junk), max_false_junk_rate)
}

fn check_rate(max_false_junk_rate: f64) -> Result<(), MetricsError> {
    if (0.0..=1.0).contains(&max_false_junk_rate) {
        Ok(())
    } else {
        Err(MetricsError::InvalidParameter {
            name: "max_false_junk_rate",
            value: max_false_junk_rate,
            allowed: "a rate in [0, 1]",
        })
    }
}

#[expect(
    clippy::cast_precision_loss,
    reason = "message counts are far below 2^53"
)]
pub(crate) fn recall_at_rate_of(
    ranked: &Ranked,
    max_false_junk_rate: f64,
) -> Result<RecallAtRate, MetricsError> {
    check_rate(max_false_junk_rate)?;
    ranked.require_both_classes()?;
    let junk_total = ranked.junk as f64;
    let fine_total = ranked.fine as f64;

    let mut best_threshold = f64::INFINITY;
    let mut best_caught: u64 = 0;
    let mut best_flagged: u64 = 0;
    let mut caught: u64 = 0;
    let mut flagged: u64 = 0;
    // Lowering the threshold past each tie only ever adds flagged fine
    // messages, so the first tie over the bound ends the search.
    for tie in &ranked.ties {
        caught += tie.junk;
        flagged += tie.fine;
        if flagged as f64 / fine_total > max_false_junk_rate {
            break;
        }
        // Strictly greater: on equal recall keep the higher threshold.
        if caught > best_caught {
            best_threshold = tie.p_junk;
            best_caught = caught;
            best_flagged = flagged;
        }
    }
    Ok(RecallAtRate {
        threshold: best_threshold,
        junk_recall: best_caught as f64 / junk_total,
        false_junk_rate: best_flagged as f64 / fine_total,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Class;

    // Expected values below are counted by hand from the definition
    // (pairs won, half for ties); no outside source.

    #[test]
    fn auc_counts_ties_as_half() {
        // Junk {0.8, 0.5}, fine {0.5, 0.2}: pairs (0.8,0.5)=1, (0.8,0.2)=1,
        // (0.5,0.5)=1/2, (0.5,0.2)=1 -> 3.5 / 4.
        let auc = roc_auc(&[0.8, 0.5, 0.5, 0.2], &[true, true, false, false]).unwrap();
        assert_eq!(auc, 0.875);
    }

    #[test]
    fn negative_zero_ties_with_zero() {
        let auc = roc_auc(&[-0.0, 0.0], &[true, false]).unwrap();
        assert_eq!(auc, 0.5);
    }

    #[test]
    fn auc_needs_both_classes() {
        assert_eq!(
            roc_auc(&[0.1, 0.9], &[true, true]),
            Err(MetricsError::MissingClass {
                missing: Class::Fine
            })
        );
        assert_eq!(
            roc_auc(&[0.1], &[false]),
            Err(MetricsError::MissingClass {
                missing: Class::Junk
            })
        );
    }

    #[test]
    fn auc_rejects_nan_empty_and_mismatch() {
        // NaN != NaN, so match on the variant and test the value apart.
        match roc_auc(&[0.3, f64::NAN], &[true, false]) {
            Err(MetricsError::NotFinite { index, value }) => {
                assert_eq!(index, 1);
                assert!(value.is_nan());
            }
            other => panic!("expected NotFinite, got {other:?}"),
        }
        assert_eq!(roc_auc(&[], &[]), Err(MetricsError::Empty));
        assert!(matches!(
            roc_auc(&[0.3], &[true, false]),
            Err(MetricsError::LengthMismatch {
                p_junk_len: 1,
                is_junk_len: 2
            })
        ));
    }

    #[test]
    fn one_minus_roca_is_percent_above_curve() {
        assert!((one_minus_roca_pct(0.9975) - 0.25).abs() < 1e-12);
        assert_eq!(one_minus_roca_pct(1.0), 0.0);
        assert_eq!(one_minus_roca_pct(0.5), 50.0);
    }

    #[test]
    fn recall_cannot_split_a_mixed_tie() {
        // Descending: 0.9 junk, 0.7 {junk, fine}, 0.3 fine. With no fine
        // allowed, the tie at 0.7 cannot be taken for its junk alone.
        let p = [0.9, 0.7, 0.7, 0.3];
        let y = [true, true, false, false];
        let at = junk_recall_at_false_junk_rate(&p, &y, 0.0).unwrap();
        assert_eq!(
            at,
            RecallAtRate {
                threshold: 0.9,
                junk_recall: 0.5,
                false_junk_rate: 0.0
            }
        );
        // Half the fine allowed: the tie comes in whole.
        let at = junk_recall_at_false_junk_rate(&p, &y, 0.5).unwrap();
        assert_eq!(
            at,
            RecallAtRate {
                threshold: 0.7,
                junk_recall: 1.0,
                false_junk_rate: 0.5
            }
        );
    }

    #[test]
    fn recall_flags_nothing_when_the_top_tie_is_too_costly() {
        let at =
            junk_recall_at_false_junk_rate(&[0.9, 0.9, 0.1], &[true, false, false], 0.1).unwrap();
        assert_eq!(
            at,
            RecallAtRate {
                threshold: f64::INFINITY,
                junk_recall: 0.0,
                false_junk_rate: 0.0
            }
        );
    }

    #[test]
    fn recall_keeps_the_highest_threshold_on_equal_recall() {
        // Below 0.8 the next tie is fine only: 0.6 keeps the rate at 1/2 but
        // catches no more junk, so 0.8 (rate 0) is reported.
        let at =
            junk_recall_at_false_junk_rate(&[0.8, 0.6, 0.4, 0.2], &[true, false, false, true], 0.5)
                .unwrap();
        assert_eq!(at.threshold, 0.8);
        assert_eq!(at.false_junk_rate, 0.0);
    }

    #[test]
    fn recall_rate_bound_is_checked() {
        for bad in [f64::NAN, -0.01, 1.5] {
            assert!(matches!(
                junk_recall_at_false_junk_rate(&[0.1, 0.9], &[false, true], bad),
                Err(MetricsError::InvalidParameter {
                    name: "max_false_junk_rate",
                    ..
                })
            ));
        }
    }
}
