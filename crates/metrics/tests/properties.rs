//! Properties that must hold for any scores and labels.
//!
//! The ROC-area properties are standard facts about the Mann-Whitney form of
//! the area (common practice, no source beyond the definition); the brute
//! force references below are that definition written as slowly as
//! possible.

use chaffgate_metrics::{
    Direction, MetricsError, PageHinkley, PageHinkleyParams, ScoreBins, brier_score, calibration,
    confusion, junk_recall_at_false_junk_rate, lam_pct, log_loss, psi, roc_auc, summarize,
};
use proptest::prelude::*;

/// Scores on a 1/1000 grid, so ties are common and every transform below
/// keeps distinct scores distinct in floating point.
fn labelled_scores() -> impl Strategy<Value = (Vec<f64>, Vec<bool>)> {
    prop::collection::vec((0u32..=1000, any::<bool>()), 2..120).prop_map(|pairs| {
        pairs
            .into_iter()
            .map(|(k, y)| (f64::from(k) / 1000.0, y))
            .unzip()
    })
}

fn has_both_classes(is_junk: &[bool]) -> bool {
    is_junk.contains(&true) && is_junk.contains(&false)
}

/// The definition: over all (junk, fine) pairs, 1 when junk scores higher,
/// 1/2 on a tie. O(n^2).
fn auc_by_pairs(p_junk: &[f64], is_junk: &[bool]) -> f64 {
    let mut wins = 0.0;
    let mut pairs = 0.0;
    for (pj, _) in p_junk.iter().zip(is_junk).filter(|(_, y)| **y) {
        for (pf, _) in p_junk.iter().zip(is_junk).filter(|(_, y)| !**y) {
            pairs += 1.0;
            if pj > pf {
                wins += 1.0;
            } else if pj == pf {
                wins += 0.5;
            }
        }
    }
    wins / pairs
}

proptest! {
    #[test]
    fn auc_lies_in_unit_interval((p, y) in labelled_scores()) {
        prop_assume!(has_both_classes(&y));
        let auc = roc_auc(&p, &y).unwrap();
        prop_assert!((0.0..=1.0).contains(&auc), "auc = {auc}");
    }

    #[test]
    fn auc_matches_pair_count((p, y) in labelled_scores()) {
        prop_assume!(has_both_classes(&y));
        let auc = roc_auc(&p, &y).unwrap();
        let want = auc_by_pairs(&p, &y);
        prop_assert!((auc - want).abs() < 1e-12, "{auc} vs {want}");
    }

    #[test]
    fn auc_of_complement_is_one_minus_auc((p, y) in labelled_scores()) {
        prop_assume!(has_both_classes(&y));
        let auc = roc_auc(&p, &y).unwrap();
        let flipped: Vec<f64> = p.iter().map(|p| 1.0 - p).collect();
        let auc_flipped = roc_auc(&flipped, &y).unwrap();
        prop_assert!((auc_flipped - (1.0 - auc)).abs() < 1e-12, "{auc_flipped} vs 1 - {auc}");
    }

    #[test]
    fn auc_ignores_increasing_transforms((p, y) in labelled_scores(), which in 0usize..5) {
        prop_assume!(has_both_classes(&y));
        let transform = |x: f64| match which {
            0 => x.sqrt(),
            1 => x * x,
            2 => 0.25 + x / 2.0,
            3 => (x + 0.01).ln(),
            _ => (8.0 * x).exp(),
        };
        let moved: Vec<f64> = p.iter().copied().map(transform).collect();
        // The grid keeps every transform strictly increasing here; check it
        // so the property cannot pass for the wrong reason.
        for (a, b) in p.iter().zip(&p[1..]) {
            prop_assert_eq!(a.partial_cmp(b), transform(*a).partial_cmp(&transform(*b)));
        }
        // Same order, same ties: the integer pair count is identical.
        prop_assert_eq!(roc_auc(&moved, &y).unwrap(), roc_auc(&p, &y).unwrap());
    }

    #[test]
    fn recall_at_rate_is_the_best_feasible_threshold(
        (p, y) in labelled_scores(),
        max_rate in prop::sample::select(vec![0.0, 0.001, 0.01, 0.1, 0.25, 0.5, 1.0]),
    ) {
        prop_assume!(has_both_classes(&y));
        let got = junk_recall_at_false_junk_rate(&p, &y, max_rate).unwrap();
        prop_assert!(got.false_junk_rate <= max_rate);

        // Brute force: every score as a threshold, via `confusion`.
        let mut best_recall = 0.0_f64;
        for &threshold in &p {
            let counts = confusion(&p, &y, threshold).unwrap();
            let fine_rate = counts.fine_flagged as f64 / counts.fine() as f64;
            if fine_rate <= max_rate {
                best_recall = best_recall.max(counts.junk_caught as f64 / counts.junk() as f64);
            }
        }
        prop_assert_eq!(got.junk_recall, best_recall);

        // No higher threshold reaches the same recall: among equal recalls
        // the one with the fewest fine flagged is reported.
        for &higher in p.iter().filter(|t| **t > got.threshold) {
            let counts = confusion(&p, &y, higher).unwrap();
            prop_assert!((counts.junk_caught as f64 / counts.junk() as f64) < got.junk_recall);
        }

        // The reported threshold reproduces the reported point.
        if got.threshold.is_finite() {
            let counts = confusion(&p, &y, got.threshold).unwrap();
            prop_assert_eq!(got.junk_recall, counts.junk_caught as f64 / counts.junk() as f64);
            prop_assert_eq!(got.false_junk_rate, counts.fine_flagged as f64 / counts.fine() as f64);
        } else {
            prop_assert_eq!(got.junk_recall, 0.0);
        }
    }

    #[test]
    fn confusion_counts_every_message_once((p, y) in labelled_scores(), t in 0.0f64..=1.0) {
        let counts = confusion(&p, &y, t).unwrap();
        let junk = y.iter().filter(|y| **y).count() as u64;
        prop_assert_eq!(counts.junk(), junk);
        prop_assert_eq!(counts.fine(), p.len() as u64 - junk);
    }

    #[test]
    fn lam_lies_between_the_two_rates(a in 0.0f64..=1.0, b in 0.0f64..=1.0) {
        // The mean of two logits lies between them, and logit is increasing.
        prop_assume!(!((a == 0.0 && b == 1.0) || (a == 1.0 && b == 0.0)));
        let lam = lam_pct(a, b).unwrap();
        let (lo, hi) = (100.0 * a.min(b), 100.0 * a.max(b));
        prop_assert!(lam >= lo - 1e-9 && lam <= hi + 1e-9, "lam% {lam} outside [{lo}, {hi}]");
    }

    #[test]
    fn smoothed_lam_is_always_finite((p, y) in labelled_scores(), t in 0.0f64..=1.0) {
        prop_assume!(has_both_classes(&y));
        let lam = confusion(&p, &y, t).unwrap().lam_pct().unwrap();
        prop_assert!(lam > 0.0 && lam < 100.0, "lam% = {lam}");
    }

    #[test]
    fn nothing_panics_or_returns_nan(
        p in prop::collection::vec(
            prop_oneof![
                4 => 0.0f64..=1.0,
                1 => Just(f64::NAN),
                1 => Just(f64::INFINITY),
                1 => -2.0f64..3.0,
            ],
            0..20,
        ),
        y in prop::collection::vec(any::<bool>(), 0..20),
        t in prop_oneof![3 => 0.0f64..=1.0, 1 => Just(f64::NAN)],
    ) {
        fn not_nan(result: Result<f64, MetricsError>) -> bool {
            result.map_or(true, |v| !v.is_nan())
        }
        prop_assert!(not_nan(roc_auc(&p, &y)));
        prop_assert!(not_nan(log_loss(&p, &y)));
        prop_assert!(not_nan(brier_score(&p, &y)));
        prop_assert!(not_nan(junk_recall_at_false_junk_rate(&p, &y, t).map(|r| r.junk_recall)));
        let _ = confusion(&p, &y, t);
        if let Ok(summary) = summarize(&p, &y, t) {
            let json = serde_json::to_value(summary).unwrap();
            for (key, value) in json.as_object().unwrap() {
                prop_assert!(value.is_number(), "{key} = {value}");
            }
        }
        if p.iter().any(|v| v.is_nan()) {
            prop_assert!(roc_auc(&p, &y).is_err());
            prop_assert!(summarize(&p, &y, 0.5).is_err());
        }
    }

    #[test]
    fn psi_is_finite_non_negative_and_symmetric(
        baseline in prop::collection::vec(0.0f64..=1.0, 1..80),
        current in prop::collection::vec(0.0f64..=1.0, 1..80),
        n_bins in 1usize..40,
    ) {
        // Each term (c - b) ln(c / b) is >= 0 since both factors share a
        // sign; swapping the samples flips both. From the definition.
        let bins = ScoreBins::uniform(n_bins).unwrap();
        let forward = psi(&baseline, &current, &bins).unwrap();
        prop_assert!(forward.psi.is_finite() && forward.psi >= 0.0, "psi = {psi}", psi = forward.psi);
        for bin in &forward.bins {
            prop_assert!(bin.contribution.is_finite() && bin.contribution >= 0.0);
        }
        let backward = psi(&current, &baseline, &bins).unwrap().psi;
        prop_assert!((forward.psi - backward).abs() <= 1e-12 * forward.psi.max(1.0));
        let counted: u64 = forward.bins.iter().map(|b| b.current_count).sum();
        prop_assert_eq!(counted, current.len() as u64);
    }

    #[test]
    fn ece_lies_in_zero_one_and_matches_the_definition(
        (p, y) in labelled_scores(),
        n_bins in 1usize..40,
    ) {
        let table = calibration(&p, &y, n_bins).unwrap();
        prop_assert!((0.0..=1.0).contains(&table.ece), "ece = {ece}", ece = table.ece);
        // Brute force: the weighted gap, bin by bin, straight from the
        // definition (Guo et al., ICML 2017, eq. 3).
        let n = p.len() as f64;
        let mut ece = 0.0;
        for bin in &table.bins {
            let members: Vec<(f64, bool)> = p
                .iter()
                .zip(&y)
                .filter(|(p, _)| {
                    **p >= bin.lower && (**p < bin.upper || (bin.upper == 1.0 && **p == 1.0))
                })
                .map(|(p, y)| (*p, *y))
                .collect();
            prop_assert_eq!(members.len() as u64, bin.count);
            if members.is_empty() {
                continue;
            }
            let k = members.len() as f64;
            let mean = members.iter().map(|m| m.0).sum::<f64>() / k;
            let rate = members.iter().filter(|m| m.1).count() as f64 / k;
            ece += k / n * (rate - mean).abs();
        }
        prop_assert!((table.ece - ece).abs() < 1e-12, "ece {got} vs {ece}", got = table.ece);
    }

    #[test]
    fn page_hinkley_never_panics(
        stream in prop::collection::vec(
            prop_oneof![
                4 => -1e6f64..1e6,
                1 => any::<f64>(),
                1 => Just(f64::MAX),
                1 => Just(f64::NAN),
            ],
            0..300,
        ),
        delta in 0.0f64..1.0,
        lambda in 1e-3f64..100.0,
        min_samples in 0u64..50,
        direction in prop::sample::select(vec![
            Direction::Increase,
            Direction::Decrease,
            Direction::Either,
        ]),
    ) {
        let params = PageHinkleyParams { delta, lambda, min_samples, direction };
        let mut detector = PageHinkley::new(params).unwrap();
        let mut twin = PageHinkley::new(params).unwrap();
        let is_bounded = stream.iter().all(|x| !x.is_finite() || x.abs() < 1e6);
        for &x in &stream {
            let fired = detector.update(x);
            // Deterministic: the same samples give the same answers.
            prop_assert_eq!(fired, twin.update(x));
            if fired {
                prop_assert!(detector.samples() >= min_samples);
            }
            if is_bounded {
                let statistic = detector.statistic();
                prop_assert!(statistic.is_finite() && statistic >= 0.0, "{statistic}");
            }
        }
        let finite = stream.iter().filter(|x| x.is_finite()).count() as u64;
        prop_assert_eq!(detector.samples(), finite);
        detector.reset();
        prop_assert_eq!(detector.statistic(), 0.0);
    }
}
