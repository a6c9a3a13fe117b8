//! Properties that must hold for any input: the model never panics, never
//! stores a non-finite number, and checkpoints round-trip exactly and reject
//! damage.

use chaffgate_model::{
    CheckpointHeader, Model, UpdateRule, checkpoint_from_bytes, checkpoint_to_bytes,
};
use proptest::prelude::*;

/// Any index, and values that include NaN, infinities, huge and tiny
/// numbers.
fn feature() -> impl Strategy<Value = (u32, f32)> {
    let value = prop_oneof![
        4 => -4.0f32..4.0,
        1 => any::<f32>(),
        1 => Just(f32::NAN),
        1 => Just(f32::INFINITY),
        1 => Just(-f32::MAX),
    ];
    (any::<u32>(), value)
}

/// A sparse vector as callers pass it: sorted by index, no index twice.
fn sparse() -> impl Strategy<Value = Vec<(u32, f32)>> {
    prop::collection::vec(feature(), 0..40).prop_map(|mut x| {
        x.sort_by_key(|&(index, _)| index);
        x.dedup_by_key(|&mut (index, _)| index);
        x
    })
}

/// A number spread over many orders of magnitude, from 1e-9 to 1e9, or 0
/// where `zero` allows it: the whole range `UpdateRule::validate` accepts.
fn setting(zero: bool) -> impl Strategy<Value = f64> {
    let spread = (-9i32..9, 1.0f64..10.0).prop_map(|(power, scale)| scale * 10f64.powi(power));
    let edges = if zero {
        prop_oneof![Just(0.0), Just(1e-9), Just(1e9)].boxed()
    } else {
        prop_oneof![Just(1e-9), Just(1e9)].boxed()
    };
    prop_oneof![4 => spread.prop_map(|v| v.min(1e9)), 1 => edges]
}

fn rule() -> impl Strategy<Value = UpdateRule> {
    prop_oneof![
        (setting(false), setting(true), setting(true))
            .prop_map(|(eta, l2, delta)| UpdateRule::Adagrad { eta, l2, delta }),
        (setting(false), setting(true), setting(true), setting(true)).prop_map(
            |(alpha, beta, l1, l2)| UpdateRule::Ftrl {
                alpha,
                beta,
                l1,
                l2
            }
        ),
    ]
}

fn header() -> CheckpointHeader {
    CheckpointHeader {
        key_id: 7,
        hash_key: [9; 16],
        last_seq: 11,
        extractor: "{}".to_owned(),
    }
}

fn train(rule: UpdateRule, examples: &[(Vec<(u32, f32)>, bool)]) -> Model {
    let mut model = Model::new(8, rule).unwrap();
    for (x, is_junk) in examples {
        let before = model.predict(x);
        let p = model.learn(x, *is_junk);
        assert_eq!(p.to_bits(), before.to_bits(), "learn returns p before");
        assert!((0.0..=1.0).contains(&p), "p_junk {p}");
    }
    model
}

proptest! {
    #[test]
    fn learning_never_panics_and_keeps_state_finite(
        rule in rule(),
        examples in prop::collection::vec((sparse(), any::<bool>()), 0..30),
        probe in sparse(),
    ) {
        let model = train(rule, &examples);
        let p = model.predict(&probe);
        prop_assert!((0.0..=1.0).contains(&p));
        prop_assert!(model.margin(&probe).is_finite());
        // A checkpoint only reads back if every stored number is finite.
        let bytes = checkpoint_to_bytes(&model, &header()).unwrap();
        let (read, read_header) = checkpoint_from_bytes(&bytes).unwrap();
        prop_assert!(read == model);
        prop_assert_eq!(&read_header, &header());
        prop_assert_eq!(checkpoint_to_bytes(&read, &read_header).unwrap(), bytes);
    }

    #[test]
    fn explanations_add_up_to_the_margin(
        rule in rule(),
        examples in prop::collection::vec((sparse(), any::<bool>()), 1..20),
        k in 0usize..50,
    ) {
        let model = train(rule, &examples);
        let x = &examples[0].0;
        let all = model.explain(x, usize::MAX);
        let total: f64 = all.iter().map(|r| r.contribution).sum();
        let margin = model.margin(x);
        // The explanation sums the same products in order of size, the
        // margin in index order; floating-point sums in two orders differ
        // by up to about n * eps * sum(|term|) (Higham, "Accuracy and
        // Stability of Numerical Algorithms", section 4.2), so the bound
        // scales with the terms, not with their (possibly cancelled) sum.
        let magnitude: f64 = all.iter().map(|r| r.contribution.abs()).sum();
        prop_assert!((total - margin).abs() <= 1e-9 * (1.0 + magnitude));
        for pair in all.windows(2) {
            let (a, b) = (pair[0].contribution.abs(), pair[1].contribution.abs());
            prop_assert!(a > b || (a == b && pair[0].index < pair[1].index));
        }
        let top = model.explain(x, k);
        prop_assert_eq!(&top[..], &all[..k.min(all.len())]);
    }

    #[test]
    fn arbitrary_bytes_never_load_and_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..300)) {
        prop_assert!(checkpoint_from_bytes(&bytes).is_err());
    }

    #[test]
    fn damaged_checkpoints_never_load(
        rule in rule(),
        examples in prop::collection::vec((sparse(), any::<bool>()), 0..10),
        at in any::<prop::sample::Index>(),
        flip in 1u8..=255,
    ) {
        let model = train(rule, &examples);
        let mut bytes = checkpoint_to_bytes(&model, &header()).unwrap();
        let at = at.index(bytes.len());
        bytes[at] ^= flip;
        prop_assert!(checkpoint_from_bytes(&bytes).is_err());
    }
}
