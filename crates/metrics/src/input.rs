//! Input checks shared by every metric, and scores grouped into ties.
//!
//! Each public function validates through here first, so the order of checks
//! (lengths, emptiness, finiteness, range, classes) and the error for each
//! are the same everywhere.

use crate::error::{Class, MetricsError};

/// Checks lengths, emptiness and that every score is finite.
pub(crate) fn check_scores(p_junk: &[f64], is_junk: &[bool]) -> Result<(), MetricsError> {
    if p_junk.len() != is_junk.len() {
        return Err(MetricsError::LengthMismatch {
            p_junk_len: p_junk.len(),
            is_junk_len: is_junk.len(),
        });
    }
    if p_junk.is_empty() {
        return Err(MetricsError::Empty);
    }
    match p_junk.iter().position(|p| !p.is_finite()) {
        Some(index) => Err(MetricsError::NotFinite {
            index,
            value: p_junk[index],
        }),
        None => Ok(()),
    }
}

/// As [`check_scores`], and every score must lie in `[0, 1]`.
pub(crate) fn check_probabilities(p_junk: &[f64], is_junk: &[bool]) -> Result<(), MetricsError> {
    check_scores(p_junk, is_junk)?;
    match p_junk.iter().position(|p| !(0.0..=1.0).contains(p)) {
        Some(index) => Err(MetricsError::NotProbability {
            index,
            value: p_junk[index],
        }),
        None => Ok(()),
    }
}

/// Rejects a threshold that is NaN or infinite.
pub(crate) fn check_threshold(threshold: f64) -> Result<(), MetricsError> {
    if threshold.is_finite() {
        Ok(())
    } else {
        Err(MetricsError::InvalidParameter {
            name: "threshold",
            value: threshold,
            allowed: "a finite number",
        })
    }
}

/// All messages sharing one score.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Tie {
    pub(crate) p_junk: f64,
    pub(crate) junk: u64,
    pub(crate) fine: u64,
}

/// Scores sorted from highest to lowest, equal scores merged into one
/// [`Tie`]. Every threshold metric walks this list, which is what keeps a
/// threshold from splitting a tie: the only cut points are between ties.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Ranked {
    pub(crate) ties: Vec<Tie>,
    pub(crate) junk: u64,
    pub(crate) fine: u64,
}

impl Ranked {
    /// Sorts once, O(n log n). Callers have already run [`check_scores`].
    pub(crate) fn new(p_junk: &[f64], is_junk: &[bool]) -> Self {
        // Adding +0.0 turns -0.0 into +0.0 and leaves every other finite
        // value alone, so `total_cmp` (which orders -0.0 before +0.0) puts
        // equal numbers together.
        let mut pairs: Vec<(f64, bool)> = p_junk
            .iter()
            .zip(is_junk)
            .map(|(&p, &y)| (p + 0.0, y))
            .collect();
        pairs.sort_unstable_by(|a, b| b.0.total_cmp(&a.0));

        let mut ties: Vec<Tie> = Vec::new();
        let mut junk = 0;
        let mut fine = 0;
        for (p, y) in pairs {
            let (add_junk, add_fine) = if y { (1, 0) } else { (0, 1) };
            junk += add_junk;
            fine += add_fine;
            match ties.last_mut() {
                Some(last) if last.p_junk == p => {
                    last.junk += add_junk;
                    last.fine += add_fine;
                }
                _ => ties.push(Tie {
                    p_junk: p,
                    junk: add_junk,
                    fine: add_fine,
                }),
            }
        }
        Ranked { ties, junk, fine }
    }

    /// Errors unless there is at least one junk and one fine message.
    pub(crate) fn require_both_classes(&self) -> Result<(), MetricsError> {
        if self.junk == 0 {
            Err(MetricsError::MissingClass {
                missing: Class::Junk,
            })
        } else if self.fine == 0 {
            Err(MetricsError::MissingClass {
                missing: Class::Fine,
            })
        } else {
            Ok(())
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn check_order_is_lengths_then_empty_then_finite_then_range() {
        assert_eq!(
            check_probabilities(&[f64::NAN], &[]),
            Err(MetricsError::LengthMismatch {
                p_junk_len: 1,
                is_junk_len: 0
            })
        );
        assert_eq!(check_probabilities(&[], &[]), Err(MetricsError::Empty));
        assert_eq!(
            check_probabilities(&[2.0, f64::INFINITY], &[true, false]),
            Err(MetricsError::NotFinite {
                index: 1,
                value: f64::INFINITY
            })
        );
        assert_eq!(
            check_probabilities(&[0.5, -0.25], &[true, false]),
            Err(MetricsError::NotProbability {
                index: 1,
                value: -0.25
            })
        );
        assert_eq!(check_probabilities(&[0.0, 1.0, -0.0], &[true; 3]), Ok(()));
    }

    #[test]
    fn ties_merge_and_sort_descending() {
        let ranked = Ranked::new(
            &[0.2, 0.9, -0.0, 0.2, 0.0],
            &[true, false, true, false, false],
        );
        assert_eq!(
            ranked.ties,
            vec![
                Tie {
                    p_junk: 0.9,
                    junk: 0,
                    fine: 1
                },
                Tie {
                    p_junk: 0.2,
                    junk: 1,
                    fine: 1
                },
                Tie {
                    p_junk: 0.0,
                    junk: 1,
                    fine: 1
                },
            ]
        );
        assert_eq!((ranked.junk, ranked.fine), (2, 3));
    }

    #[test]
    fn threshold_must_be_finite() {
        assert!(check_threshold(0.5).is_ok());
        assert!(check_threshold(f64::NAN).is_err());
        assert!(check_threshold(f64::NEG_INFINITY).is_err());
    }
}
