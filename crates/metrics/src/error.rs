//! Why a metric could not be computed.
//!
//! One enum for the whole crate: every metric fails for the same few reasons,
//! and callers (the `eval` command, drift reports) only print them.

use std::fmt;

/// The two true labels a message can have.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Class {
    /// `is_junk == true`.
    Junk,
    /// `is_junk == false`.
    Fine,
}

impl fmt::Display for Class {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Class::Junk => f.write_str("junk"),
            Class::Fine => f.write_str("fine"),
        }
    }
}

/// A metric was asked of input it is not defined on.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MetricsError {
    /// `p_junk` and `is_junk` have different lengths, so scores and labels
    /// cannot be paired. Checked before anything else.
    #[error("p_junk has {p_junk_len} entries but is_junk has {is_junk_len}")]
    LengthMismatch {
        /// `p_junk.len()`.
        p_junk_len: usize,
        /// `is_junk.len()`.
        is_junk_len: usize,
    },

    /// Both slices are empty: there is nothing to measure.
    #[error("no messages to measure")]
    Empty,

    /// A score is NaN or infinite. NaN has no place in any order, so every
    /// metric rejects it rather than guessing.
    #[error("p_junk[{index}] = {value} is not a finite number")]
    NotFinite {
        /// Position of the first offending score.
        index: usize,
        /// The score itself (NaN or ±inf).
        value: f64,
    },

    /// A score is finite but outside `[0, 1]`, given to a metric that reads
    /// it as a probability (log loss, Brier score, the summary).
    #[error("p_junk[{index}] = {value} is not a probability in [0, 1]")]
    NotProbability {
        /// Position of the first offending score.
        index: usize,
        /// The score itself.
        value: f64,
    },

    /// Every message has the same label, and the metric compares the two
    /// classes (ROC area, recall at a false-junk rate, the summary).
    #[error("no {missing} messages; the metric needs both junk and fine")]
    MissingClass {
        /// The class with no messages.
        missing: Class,
    },

    /// One of two compared score samples (the baseline and current
    /// `p_junk` of a population stability index) has no messages.
    #[error("{sample} has no messages")]
    EmptySample {
        /// Which sample: `"baseline"` or `"current"`.
        sample: &'static str,
    },

    /// A score in one of two compared samples is NaN, infinite, or outside
    /// the range the bins cover.
    #[error("{sample}[{index}] = {value}: must be {allowed}")]
    SampleValue {
        /// Which sample: `"baseline"` or `"current"`.
        sample: &'static str,
        /// Position of the first offending score in that sample.
        index: usize,
        /// The score itself.
        value: f64,
        /// What is allowed, in words.
        allowed: &'static str,
    },

    /// A parameter other than the scores is out of its range: a threshold
    /// that is not finite, a rate outside `[0, 1]` (NaN included), a bin
    /// count of zero or above the limit, bin edges that do not increase,
    /// or a change-detector setting out of range.
    #[error("{name} = {value}: must be {allowed}")]
    InvalidParameter {
        /// The parameter's name as in the function signature.
        name: &'static str,
        /// The value given.
        value: f64,
        /// What is allowed, in words.
        allowed: &'static str,
    },
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_name_the_offending_entry() {
        let err = MetricsError::NotFinite {
            index: 3,
            value: f64::NAN,
        };
        assert_eq!(err.to_string(), "p_junk[3] = NaN is not a finite number");
        let err = MetricsError::MissingClass {
            missing: Class::Fine,
        };
        assert_eq!(
            err.to_string(),
            "no fine messages; the metric needs both junk and fine"
        );
    }
}
