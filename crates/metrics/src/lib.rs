//! Junk-detection metrics: pure functions of `p_junk` scores and `is_junk` labels.
//!
//! Owns the numbers that `chaffgate eval` prints after progressive
//! (test-then-train) validation on a corpus, and that drift reports compare
//! over time: ROC area and (1-ROCA)%, logistic average misclassification
//! (lam%) from Cormack and Lynam's TREC 2005 spam track overview, junk recall
//! at a bounded false-junk rate, log loss and the Brier score, and a
//! [`Summary`] that bundles them for `eval --json`. For drift reports it
//! also holds the population stability index of `p_junk` between two
//! windows ([`psi`]), a reliability table with the expected calibration
//! error ([`calibration`]), and a Page-Hinkley change detector over a
//! stream of per-message errors ([`PageHinkley`]). For feature tallies it
//! holds [`SpaceSaving`], a bounded summary of the most frequent items of a
//! stream with guaranteed error bounds.
//!
//! Every function takes two parallel slices, `p_junk[i]` being the score of
//! message `i` and `is_junk[i]` its true label, and knows nothing else: no
//! files, clock, environment or model. Same inputs give bit-identical
//! outputs.
//!
//! What must stay true:
//!
//! * No function panics and none returns NaN. Bad input is a
//!   [`MetricsError`]; a value that cannot exist (a rate over an empty
//!   class) is `None`.
//! * Inputs are checked in this order: lengths equal
//!   ([`MetricsError::LengthMismatch`]), at least one message
//!   ([`MetricsError::Empty`]), every score finite
//!   ([`MetricsError::NotFinite`], which is how NaN is rejected), then what
//!   the metric itself needs:
//!
//! | metric | function | scores allowed | both classes needed |
//! | --- | --- | --- | --- |
//! | ROC area | [`roc_auc`] | any finite | yes |
//! | recall at false-junk rate | [`junk_recall_at_false_junk_rate`] | any finite | yes |
//! | confusion counts | [`confusion`] | any finite | no |
//! | log loss | [`log_loss`] | `[0, 1]` | no |
//! | Brier score | [`brier_score`] | `[0, 1]` | no |
//! | everything | [`summarize`] | `[0, 1]` | yes |
//! | calibration, ECE | [`calibration`] | `[0, 1]` | no |
//!
//! [`psi`] compares two unlabelled samples of scores instead, and names the
//! offending sample in its errors ([`MetricsError::EmptySample`],
//! [`MetricsError::SampleValue`]). [`PageHinkley`] takes one number at a
//! time and skips non-finite ones, since it has no error to return.
//!
//! A message counts as flagged junk at a threshold when
//! `p_junk >= threshold`. Equal scores are one tie whatever their sign bit
//! (`-0.0` ties with `0.0`), and no threshold can split a tie.

mod calibration;
mod confusion;
mod error;
mod input;
mod page_hinkley;
mod probability;
mod ranking;
mod space_saving;
mod stability;
mod summary;

pub use calibration::{Calibration, CalibrationBin, calibration};
pub use confusion::{Confusion, confusion, lam_pct};
pub use error::{Class, MetricsError};
pub use page_hinkley::{Direction, PageHinkley, PageHinkleyParams};
pub use probability::{LOG_LOSS_EPS, brier_score, log_loss};
pub use ranking::{RecallAtRate, junk_recall_at_false_junk_rate, one_minus_roca_pct, roc_auc};
pub use space_saving::{Counter, SpaceSaving};
pub use stability::{PSI_SHARE_EPS, PsiBand, PsiBin, PsiReport, ScoreBins, psi, psi_band};
pub use summary::{Summary, summarize};
