//! The logistic function and the log loss it is trained on.
//!
//! Both are used on every prediction and every update, so they must be exact
//! where it is cheap (sigma(0) is exactly 1/2) and never overflow or return
//! NaN for a finite margin, however large.

/// The logistic function `sigma(m) = 1 / (1 + e^-m)`, the probability that a
/// message with margin `m = w . x` is junk.
///
/// Computed in the form that never overflows: for `m >= 0` as
/// `1 / (1 + e^-m)`, for `m < 0` as `e^m / (1 + e^m)`. In both forms the
/// exponential is at most 1, so `sigmoid(1000.0)` is 1 and `sigmoid(-1000.0)`
/// is 0 rather than NaN, and small probabilities keep their relative
/// precision (`sigmoid(-30.0)` is about `e^-30`, not a rounding residue of
/// `1 - something`).
pub fn sigmoid(margin: f64) -> f64 {
    if margin >= 0.0 {
        1.0 / (1.0 + (-margin).exp())
    } else {
        let e = margin.exp();
        e / (1.0 + e)
    }
}

/// The log loss of one example with margin `m`: `-ln sigma(m)` for junk and
/// `-ln(1 - sigma(m))` for fine.
///
/// Written as `ln(1 + e^-s)` with `s = m` for junk and `s = -m` for fine, and
/// computed as `max(-s, 0) + ln(1 + e^-|s|)` so that it neither overflows for
/// large `|m|` nor loses the tiny loss of a confident correct prediction.
pub fn log_loss(margin: f64, is_junk: bool) -> f64 {
    let signed = if is_junk { margin } else { -margin };
    (-signed).max(0.0) + (-signed.abs()).exp().ln_1p()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sigmoid_of_zero_is_one_half() {
        // sigma(0) = 1 / (1 + e^0) = 1/2 exactly; definition of the logistic
        // function.
        assert_eq!(sigmoid(0.0), 0.5);
        assert_eq!(sigmoid(-0.0), 0.5);
    }

    #[test]
    fn sigmoid_is_stable_at_large_margins() {
        // Limits of the logistic function; common practice, no source.
        assert_eq!(sigmoid(1000.0), 1.0);
        assert_eq!(sigmoid(-1000.0), 0.0);
        assert_eq!(sigmoid(f64::MAX), 1.0);
        assert_eq!(sigmoid(-f64::MAX), 0.0);
    }

    #[test]
    fn sigmoid_keeps_small_probabilities_precise() {
        // sigma(-30) = e^-30 / (1 + e^-30); a naive 1 - sigma(30) would give
        // a value with only a few correct digits.
        let expected = (-30.0f64).exp() / (1.0 + (-30.0f64).exp());
        let got = sigmoid(-30.0);
        assert!(
            ((got - expected) / expected).abs() < 1e-15,
            "{got} vs {expected}"
        );
    }

    #[test]
    fn sigmoid_is_symmetric() {
        // sigma(-m) = 1 - sigma(m); identity of the logistic function.
        for m in [0.1, 0.5, 1.0, 2.5, 7.0, 15.0] {
            let gap = sigmoid(-m) - (1.0 - sigmoid(m));
            assert!(gap.abs() < 1e-15, "m = {m}: gap {gap}");
        }
    }

    #[test]
    fn log_loss_matches_the_definition() {
        // -ln sigma(m) and -ln(1 - sigma(m)) evaluated directly where that
        // is accurate enough; definition of log loss.
        for m in [-3.0, -0.5, 0.0, 0.25, 4.0] {
            let p = sigmoid(m);
            assert!((log_loss(m, true) + p.ln()).abs() < 1e-12, "junk, m = {m}");
            assert!(
                (log_loss(m, false) + (1.0 - p).ln()).abs() < 1e-12,
                "fine, m = {m}"
            );
        }
        // ln 2 at m = 0 for either label.
        assert!((log_loss(0.0, true) - std::f64::consts::LN_2).abs() < 1e-15);
    }

    #[test]
    fn log_loss_is_finite_at_large_margins() {
        // A confident wrong prediction costs about |m|; a confident right one
        // about e^-|m|. Common practice, no source.
        assert!((log_loss(-1000.0, true) - 1000.0).abs() < 1e-9);
        assert!((log_loss(1000.0, false) - 1000.0).abs() < 1e-9);
        let tiny = log_loss(40.0, true);
        assert!(tiny > 0.0 && ((tiny - (-40.0f64).exp()) / tiny).abs() < 1e-12);
    }
}
