//! chaffgate-metrics against scikit-learn on fixed score lists.
//!
//! Every expected number comes from `tests/fixtures/cases.json`, written by
//! `tests/fixtures/make.py` with scikit-learn (version recorded in the file
//! and in `tests/fixtures/README.md`). Regenerate with
//! `cd crates/metrics/tests/fixtures && python3 make.py`.

use chaffgate_metrics::{
    MetricsError, brier_score, confusion, junk_recall_at_false_junk_rate, log_loss, roc_auc,
};
use serde::Deserialize;

#[derive(Debug, Deserialize)]
struct Fixture {
    sklearn_version: String,
    cases: Vec<Case>,
}

#[derive(Debug, Deserialize)]
struct Case {
    name: String,
    p_junk: Vec<f64>,
    is_junk: Vec<bool>,
    roc_auc: Option<f64>,
    log_loss: f64,
    brier_score: f64,
    threshold: f64,
    confusion: Counts,
    recall_at_rate: Vec<RecallCase>,
}

#[derive(Debug, Deserialize)]
struct Counts {
    junk_caught: u64,
    junk_missed: u64,
    fine_passed: u64,
    fine_flagged: u64,
}

#[derive(Debug, Deserialize)]
struct RecallCase {
    max_false_junk_rate: f64,
    junk_recall: f64,
    false_junk_rate: f64,
    /// `None` stands for scikit-learn's `inf` threshold: flag nothing.
    threshold: Option<f64>,
}

fn fixture() -> Fixture {
    serde_json::from_str(include_str!("fixtures/cases.json")).expect("cases.json parses")
}

fn assert_close(name: &str, what: &str, got: f64, want: f64, tolerance: f64) {
    assert!(
        (got - want).abs() <= tolerance,
        "{name}: {what} = {got}, scikit-learn says {want} (tolerance {tolerance})"
    );
}

#[test]
fn fixture_has_every_kind_of_case() {
    let fixture = fixture();
    assert!(!fixture.sklearn_version.is_empty());
    let names: Vec<&str> = fixture.cases.iter().map(|c| c.name.as_str()).collect();
    for wanted in [
        "small_ties",
        "all_tied",
        "separated",
        "reversed",
        "zero_and_one",
        "tiny_probabilities",
        "only_junk",
        "random",
        "random_rounded",
    ] {
        assert!(names.contains(&wanted), "cases.json lacks {wanted}");
    }
}

#[test]
fn roc_auc_matches_sklearn() {
    for case in fixture().cases {
        let got = roc_auc(&case.p_junk, &case.is_junk);
        match case.roc_auc {
            // Expected: scikit-learn roc_auc_score (fixtures/make.py). It
            // integrates the ROC curve by trapezoids; we count pairs exactly,
            // so the two agree to rounding.
            Some(want) => assert_close(&case.name, "roc_auc", got.unwrap(), want, 1e-12),
            // scikit-learn refuses one class too (make.py writes null).
            None => assert!(
                matches!(got, Err(MetricsError::MissingClass { .. })),
                "{}: {got:?}",
                case.name
            ),
        }
    }
}

#[test]
fn log_loss_matches_sklearn() {
    for case in fixture().cases {
        // Expected: scikit-learn log_loss with labels=[False, True]
        // (fixtures/make.py), which clips to float64 eps as we do. 1e-9
        // allows for numpy's log and its pairwise summation order.
        let got = log_loss(&case.p_junk, &case.is_junk).unwrap();
        assert_close(&case.name, "log_loss", got, case.log_loss, 1e-9);
    }
}

#[test]
fn brier_score_matches_sklearn() {
    for case in fixture().cases {
        // Expected: scikit-learn brier_score_loss (fixtures/make.py).
        let got = brier_score(&case.p_junk, &case.is_junk).unwrap();
        assert_close(&case.name, "brier_score", got, case.brier_score, 1e-12);
    }
}

#[test]
fn confusion_matches_sklearn() {
    for case in fixture().cases {
        // Expected: scikit-learn confusion_matrix of p_junk >= threshold
        // (fixtures/make.py).
        let got = confusion(&case.p_junk, &case.is_junk, case.threshold).unwrap();
        let want = &case.confusion;
        assert_eq!(
            (
                got.junk_caught,
                got.junk_missed,
                got.fine_passed,
                got.fine_flagged
            ),
            (
                want.junk_caught,
                want.junk_missed,
                want.fine_passed,
                want.fine_flagged
            ),
            "{}",
            case.name
        );
    }
}

#[test]
fn recall_at_false_junk_rate_matches_sklearn_roc_curve() {
    let mut checked = 0;
    for case in fixture().cases {
        for want in &case.recall_at_rate {
            // Expected: the best TPR among scikit-learn roc_curve points
            // (drop_intermediate=False) with FPR <= the bound, and the
            // highest threshold reaching it (fixtures/make.py). roc_curve
            // only cuts between distinct scores, as we must.
            let got = junk_recall_at_false_junk_rate(
                &case.p_junk,
                &case.is_junk,
                want.max_false_junk_rate,
            )
            .unwrap();
            let what = format!("recall at {rate}", rate = want.max_false_junk_rate);
            assert_close(&case.name, &what, got.junk_recall, want.junk_recall, 1e-12);
            assert_close(
                &case.name,
                &what,
                got.false_junk_rate,
                want.false_junk_rate,
                1e-12,
            );
            assert_eq!(
                got.threshold,
                want.threshold.unwrap_or(f64::INFINITY),
                "{}: {what}",
                case.name
            );
            checked += 1;
        }
    }
    // Two bounds for each of the eight two-class cases.
    assert_eq!(checked, 16);
}
