//! `Model::fit_batch` against scikit-learn's `LogisticRegression`.
//!
//! Expected weights and probabilities come from scikit-learn (lbfgs and
//! newton-cholesky solvers, `C = 1 / (l2 N)`, `fit_intercept=False`);
//! regenerate with tests/fixtures/logreg/make.py (see
//! tests/fixtures/logreg/README.md).

use chaffgate_model::Model;
use serde::Deserialize;

#[derive(Deserialize)]
struct Fixture {
    bits: u8,
    examples: Vec<Example>,
    cases: Vec<Case>,
}

#[derive(Deserialize)]
struct Example {
    x: Vec<(u32, f32)>,
    is_junk: bool,
}

#[derive(Deserialize)]
struct Case {
    l2: f64,
    solver: String,
    gradient_norm: f64,
    weights: Vec<(u32, f64)>,
    p_junk: Vec<f64>,
}

fn fixture() -> Fixture {
    serde_json::from_str(include_str!("fixtures/logreg/cases.json")).expect("valid fixture")
}

#[test]
fn fit_batch_agrees_with_scikit_learn() {
    let fixture = fixture();
    let examples: Vec<(Vec<(u32, f32)>, bool)> = fixture
        .examples
        .iter()
        .map(|example| (example.x.clone(), example.is_junk))
        .collect();
    assert_eq!(examples.len(), 60);
    assert_eq!(fixture.cases.len(), 4);

    for case in &fixture.cases {
        let fit = Model::fit_batch(fixture.bits, case.l2, &examples, 100_000, 1e-13).unwrap();
        assert!(fit.converged, "l2 = {}: {fit:?}", case.l2);

        // Weights: J is l2-strongly convex, so
        // <grad J(w) - grad J(w*), w - w*> >= l2 ||w - w*||^2; with
        // grad J(w*) = 0 and Cauchy-Schwarz, any w lies within
        // ||grad J(w)|| / l2 of the optimum w*. Ours and scikit-learn's are
        // then within the sum of the two bounds of each other.
        // newton-cholesky stops near a gradient norm of 1e-15, lbfgs near
        // 1e-9, so the bound is tight for one and loose for the other.
        let bound = (case.gradient_norm + fit.gradient_norm) / case.l2;
        let distance = case
            .weights
            .iter()
            .map(|&(index, expected)| (fit.weight(index) - expected).powi(2))
            .sum::<f64>()
            .sqrt();
        assert_eq!(fit.weights.len(), case.weights.len());
        assert!(
            distance <= bound,
            "{} at l2 = {}: weights {distance:e} apart, bound {bound:e}",
            case.solver,
            case.l2
        );

        // Probabilities: within 1e-6 of lbfgs and 1e-9 of newton-cholesky.
        let tolerance = if case.solver == "newton-cholesky" {
            1e-9
        } else {
            1e-6
        };
        let mut worst_p: f64 = 0.0;
        for (example, &expected) in examples.iter().zip(&case.p_junk) {
            worst_p = worst_p.max((fit.predict(&example.0) - expected).abs());
        }
        assert!(
            worst_p < tolerance,
            "{} at l2 = {}: p_junk differs by {worst_p:e}",
            case.solver,
            case.l2
        );
    }
}

#[test]
fn the_fixture_is_not_trivial() {
    // Guards the check above: the reference weights are far from 0 and the
    // probabilities far from 1/2, so agreement is not an accident.
    let fixture = fixture();
    for case in &fixture.cases {
        assert!(case.weights.iter().any(|&(_, w)| w.abs() > 1.0));
        assert!(case.p_junk.iter().any(|&p| !(0.2..=0.8).contains(&p)));
    }
}
