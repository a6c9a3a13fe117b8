//! How long one `learn` takes with 80 active features at 22 bits, for each
//! update rule.
//!
//! Two cases per rule: `hot` repeats one example, so its slots stay in cache
//! and the figure is the arithmetic alone; `cold` cycles through 4,096
//! examples with random slots, so most loads miss the cache as they would
//! for a real message stream over a 32 MiB table.

use std::hint::black_box;

use chaffgate_model::{Model, UpdateRule};
use criterion::{Criterion, criterion_group, criterion_main};

const BITS: u8 = 22;
const ACTIVE: usize = 80;

/// Deterministic pseudo-random slots: Knuth's MMIX LCG constants.
fn examples(count: usize) -> Vec<Vec<(u32, f32)>> {
    let mut state: u64 = 7;
    let mut next = move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 32) as u32
    };
    let value = 1.0 / (ACTIVE as f32).sqrt();
    (0..count)
        .map(|_| {
            let mut x: Vec<(u32, f32)> = (0..ACTIVE)
                .map(|_| (next() >> (32 - BITS), value))
                .collect();
            x.sort_by_key(|&(index, _)| index);
            x.dedup_by_key(|&mut (index, _)| index);
            x
        })
        .collect()
}

fn bench_learn(c: &mut Criterion) {
    let rules = [
        (
            "adagrad",
            UpdateRule::Adagrad {
                eta: 0.1,
                l2: 1e-6,
                delta: 0.0,
            },
        ),
        (
            "ftrl",
            UpdateRule::Ftrl {
                alpha: 0.1,
                beta: 1.0,
                l1: 0.5,
                l2: 1e-6,
            },
        ),
    ];
    let pool = examples(4096);
    for (name, rule) in rules {
        let mut model = Model::new(BITS, rule).expect("valid settings");
        // Touch the whole table once so page faults are not measured.
        for x in &pool {
            model.learn(x, false);
        }
        let mut label = false;
        c.bench_function(&format!("learn/{name}/hot"), |b| {
            let x = &pool[0];
            b.iter(|| {
                label = !label;
                black_box(model.learn(black_box(x), label))
            })
        });
        c.bench_function(&format!("predict/{name}/hot"), |b| {
            let x = &pool[0];
            b.iter(|| black_box(model.predict(black_box(x))))
        });
        let mut at = 0;
        c.bench_function(&format!("learn/{name}/cold"), |b| {
            b.iter(|| {
                at = (at + 1) % pool.len();
                label = !label;
                black_box(model.learn(black_box(&pool[at]), label))
            })
        });
        c.bench_function(&format!("predict/{name}/cold"), |b| {
            b.iter(|| {
                at = (at + 1) % pool.len();
                black_box(model.predict(black_box(&pool[at])))
            })
        });
    }
}

criterion_group!(benches, bench_learn);
criterion_main!(benches);
