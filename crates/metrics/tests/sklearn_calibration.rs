//! chaffgate-metrics' reliability table against scikit-learn.
//!
//! Every expected number comes from `tests/fixtures/calibration.json`,
//! written by `tests/fixtures/make_calibration.py`: `prob_true` and
//! `prob_pred` are scikit-learn's
//! `calibration_curve(is_junk, p_junk, n_bins, strategy="uniform")`
//! (version in the file and in `tests/fixtures/README.md`); `counts` and
//! `ece` are computed by the script from them (see its docstring).
//! Regenerate with `cd crates/metrics/tests/fixtures && python3 make_calibration.py`.

use chaffgate_metrics::calibration;
use serde::Deserialize;

#[derive(Debug, Deserialize)]
struct Fixture {
    sklearn_version: String,
    cases: Vec<Case>,
}

#[derive(Debug, Deserialize)]
struct Case {
    name: String,
    n_bins: usize,
    p_junk: Vec<f64>,
    is_junk: Vec<bool>,
    /// Junk rate of each non-empty bin, lowest first.
    prob_true: Vec<f64>,
    /// Mean `p_junk` of each non-empty bin, lowest first.
    prob_pred: Vec<f64>,
    counts: Vec<u64>,
    ece: f64,
}

fn fixture() -> Fixture {
    serde_json::from_str(include_str!("fixtures/calibration.json"))
        .expect("calibration.json parses")
}

fn assert_close(name: &str, what: &str, got: f64, want: f64) {
    assert!(
        (got - want).abs() <= 1e-12,
        "{name}: {what} = {got}, scikit-learn says {want}"
    );
}

#[test]
fn fixture_has_every_kind_of_case() {
    let fixture = fixture();
    assert_eq!(fixture.sklearn_version, "1.9.1");
    let names: Vec<&str> = fixture.cases.iter().map(|c| c.name.as_str()).collect();
    for wanted in [
        "small",
        "random_overconfident",
        "random_overconfident_7_bins",
        "random_calibrated",
        "only_fine",
    ] {
        assert!(names.contains(&wanted), "calibration.json lacks {wanted}");
    }
}

#[test]
fn reliability_table_matches_calibration_curve() {
    for case in fixture().cases {
        let name = case.name.as_str();
        let table = calibration(&case.p_junk, &case.is_junk, case.n_bins)
            .unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(table.bins.len(), case.n_bins, "{name}");
        let counts: Vec<u64> = table.bins.iter().map(|b| b.count).collect();
        assert_eq!(counts, case.counts, "{name}: bin counts");

        let filled: Vec<_> = table.bins.iter().filter(|b| b.count > 0).collect();
        assert_eq!(filled.len(), case.prob_true.len(), "{name}: non-empty bins");
        for ((bin, &want_rate), &want_mean) in
            filled.iter().zip(&case.prob_true).zip(&case.prob_pred)
        {
            let lower = bin.lower;
            let rate = bin.junk_rate.expect("non-empty bin has a junk rate");
            let mean = bin.mean_p_junk.expect("non-empty bin has a mean");
            assert_close(
                name,
                &format!("junk_rate of bin at {lower}"),
                rate,
                want_rate,
            );
            assert_close(
                name,
                &format!("mean_p_junk of bin at {lower}"),
                mean,
                want_mean,
            );
        }
        assert_close(name, "ece", table.ece, case.ece);
    }
}

#[test]
fn overconfident_scores_are_worse_calibrated() {
    // Sanity on the fixture itself: the script built one random case
    // overconfident and one calibrated by construction.
    let cases = fixture().cases;
    let ece_of = |wanted: &str| {
        let case = cases
            .iter()
            .find(|c| c.name == wanted)
            .expect("case exists");
        calibration(&case.p_junk, &case.is_junk, case.n_bins)
            .expect("valid case")
            .ece
    };
    assert!(ece_of("random_overconfident") > 0.1);
    assert!(ece_of("random_calibrated") < 0.05);
}
