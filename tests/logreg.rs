//! The model's maths against scikit-learn on features made by our own
//! extractor, and the online AdaGrad rule run to convergence.
//!
//! Expected probabilities come from scikit-learn's `LogisticRegression`
//! (`fit_intercept=False`, `C = 1 / (l2 N)`, so its objective is ours up to
//! scale); regenerate with tests/fixtures/logreg/make.py (see
//! tests/fixtures/logreg/README.md). `hashed.json` is written by this test
//! itself when `CHAFFGATE_WRITE_FIXTURES=1`, before make.py reads it.

use chaffgate_model::{Model, UpdateRule};
use chaffgate_text::{Extractor, FeatureSettings, Features, HashKey, Message};
use serde::{Deserialize, Serialize};

use crate::util::SHOP_CORPUS;

const FIXTURE_DIR: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/logreg");
/// Few slots on purpose, so that some features share one.
const BITS: u8 = 10;
const KEY: [u8; 16] = *b"fixture-key-0001";

#[derive(Serialize, Deserialize, PartialEq, Debug)]
struct Hashed {
    about: String,
    bits: u8,
    examples: Vec<Example>,
}

#[derive(Serialize, Deserialize, PartialEq, Debug)]
struct Example {
    x: Vec<(u32, f32)>,
    is_junk: bool,
}

#[derive(Deserialize)]
struct Expected {
    hashed: Fit,
    dense: DenseCase,
}

#[derive(Deserialize)]
struct Fit {
    l2: f64,
    p_junk: Vec<f64>,
}

#[derive(Deserialize)]
struct DenseCase {
    l2: f64,
    examples: Vec<Example>,
    p_junk: Vec<f64>,
}

/// The invented shop messages as hashed feature vectors.
fn hashed_examples() -> Hashed {
    let settings = FeatureSettings {
        bits: BITS,
        ..FeatureSettings::default()
    };
    let mut extractor = Extractor::new(settings, HashKey::from_bytes(KEY));
    let mut features = Features::default();
    let mut examples = Vec::new();
    for line in SHOP_CORPUS.lines() {
        let mut value: serde_json::Value = serde_json::from_str(line).expect("corpus line");
        let label = value["label"].as_str().expect("label").to_owned();
        value.as_object_mut().expect("object").remove("label");
        let message: Message = serde_json::from_value(value).expect("message");
        extractor.extract(&message, &mut features);
        examples.push(Example {
            x: features.as_slice().to_vec(),
            is_junk: label == "junk",
        });
    }
    Hashed {
        about: "Written by tests/logreg.rs with CHAFFGATE_WRITE_FIXTURES=1; read by make.py."
            .to_owned(),
        bits: BITS,
        examples,
    }
}

fn read_fixture<T: for<'de> Deserialize<'de>>(name: &str) -> T {
    let path = format!("{FIXTURE_DIR}/{name}");
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("reading {path}: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("parsing {path}: {e}"))
}

#[test]
fn hashed_features_are_those_the_fixture_was_made_from() {
    let made = hashed_examples();
    if std::env::var_os("CHAFFGATE_WRITE_FIXTURES").is_some() {
        let text = serde_json::to_string_pretty(&made).expect("encode") + "\n";
        std::fs::write(format!("{FIXTURE_DIR}/hashed.json"), text).expect("write fixture");
    }
    // If this fails, feature extraction changed: every saved model would
    // break. Only regenerate after deciding that on purpose.
    assert_eq!(made, read_fixture::<Hashed>("hashed.json"));
}

#[test]
fn batch_fit_on_hashed_features_agrees_with_scikit_learn() {
    let hashed = hashed_examples();
    let expected: Expected = read_fixture("expected.json");
    let examples: Vec<(Vec<(u32, f32)>, bool)> = hashed
        .examples
        .iter()
        .map(|e| (e.x.clone(), e.is_junk))
        .collect();
    let fit = Model::fit_batch(BITS, expected.hashed.l2, &examples, 100_000, 1e-10).expect("fit");
    assert!(fit.converged, "gradient norm {}", fit.gradient_norm);
    assert_eq!(expected.hashed.p_junk.len(), examples.len());
    for ((x, _), want) in examples.iter().zip(&expected.hashed.p_junk) {
        let got = fit.predict(x);
        // Required bound 1e-3; a converged fit of the same objective lands far closer.
        assert!(
            (got - want).abs() < 1e-6,
            "p_junk {got} vs scikit-learn {want}"
        );
    }
}

#[test]
fn online_adagrad_with_l2_converges_to_scikit_learn_fit() {
    // Every example of the dense case has every coordinate active, so the
    // L2 term that AdaGrad applies to the active coordinates of each
    // example is the full-objective L2: cycling through the examples with
    // AdaGrad's shrinking steps converges to the same minimiser of
    // mean(log loss) + (l2/2)||w||^2 that scikit-learn finds.
    let expected: Expected = read_fixture("expected.json");
    let case = expected.dense;
    let rule = UpdateRule::Adagrad {
        eta: 0.5,
        l2: case.l2,
        delta: 0.0,
    };
    let mut model = Model::new(8, rule).expect("model");
    for _ in 0..50_000 {
        for example in &case.examples {
            model.learn(&example.x, example.is_junk);
        }
    }
    let mut worst: f64 = 0.0;
    for (example, want) in case.examples.iter().zip(&case.p_junk) {
        worst = worst.max((model.predict(&example.x) - want).abs());
    }
    println!("largest p_junk difference from scikit-learn: {worst:e}");
    // Bound for a converged online fit against scikit-learn (1e-3).
    assert!(worst < 1e-3, "largest p_junk difference {worst}");
}
