//! The default `p_junk` drift detector on synthetic score streams: quiet on
//! steady streams, fires soon after the mix of messages shifts either way.
//!
//! A stream is `p_junk` of messages drawn from a mix: junk scored uniform
//! in [0.8, 1], uncertain messages (10%) uniform in [0.2, 0.8], and fine
//! ones uniform in [0, 0.2]. The junk share sets the mean: 20% junk gives
//! 0.30, 40% gives 0.46, 5% gives 0.18 (by hand from the uniform means).
//! Numbers come from xorshift64* (Vigna, "An experimental exploration of
//! Marsaglia's xorshift generators, scrambled", ACM TOMS 2016; constants
//! from memory), written here so the streams are the same everywhere; the
//! seeds are in `SEEDS`. The mix and its shares are invented, not measured
//! on a real deployment.
//!
//! Why the defaults (delta 0.05, lambda 50, min_samples 100, either
//! direction), measured on these streams with `SEEDS`: on 1,000,000-sample
//! steady streams at 20% and at 50% junk (the noisiest mix) the statistic
//! peaked at 19.9, far below lambda. Smaller settings false-alarmed on the
//! same steady streams: delta 0.02, lambda 20 fired 211 times over the 40
//! streams of 200,000 samples; delta 0.03, lambda 25 twice. Larger delta
//! (0.08, 0.1) missed or long delayed the fall to 5% junk (a shift of
//! -0.12). Delays with the defaults, over both shifts: 373 to 1075 samples,
//! median 617; a stream of a few hundred messages an hour reports a shift
//! within about two hours. The steady streams here are independent draws;
//! bursts of alike messages make the statistic swing wider, which is why
//! lambda keeps a wide margin over the peak.

use chaffgate_metrics::PageHinkley;
use chaffgate_server::alarms::DEFAULT_P_JUNK;

const SEEDS: [u64; 20] = [
    1,
    42,
    2_026,
    0x9E37_79B9_7F4A_7C15,
    0xDEAD_BEEF,
    123_456_789,
    987_654_321,
    0x0123_4567_89AB_CDEF,
    100,
    101,
    102,
    103,
    104,
    105,
    106,
    107,
    108,
    109,
    110,
    111,
];

/// Sample at which the junk share changes.
const CHANGE_AT: usize = 5_000;
/// Alarms must come within this many samples of the change (the slowest
/// measured was 1075).
const MAX_DELAY: usize = 1_500;
/// Steady streams in the test are shorter than the measured ones, to keep
/// the test quick in debug builds.
const STEADY_SAMPLES: usize = 50_000;

struct XorShift64Star(u64);

impl XorShift64Star {
    fn next_unit(&mut self) -> f64 {
        let mut x = self.0.max(1);
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        self.0 = x;
        #[expect(clippy::cast_precision_loss, reason = "53 bits fit an f64 exactly")]
        let top = (x.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64;
        top / (1_u64 << 53) as f64
    }

    /// One message's `p_junk` from a mix with `junk_share` junk.
    fn p_junk(&mut self, junk_share: f64) -> f64 {
        let kind = self.next_unit();
        let spread = self.next_unit();
        if kind < junk_share {
            0.8 + 0.2 * spread
        } else if kind < junk_share + 0.1 {
            0.2 + 0.6 * spread
        } else {
            0.2 * spread
        }
    }
}

fn detector() -> PageHinkley {
    PageHinkley::new(DEFAULT_P_JUNK).expect("default settings are valid")
}

#[test]
fn steady_mixes_raise_no_alarm() {
    for junk_share in [0.2, 0.5] {
        for seed in SEEDS {
            let mut rng = XorShift64Star(seed);
            let mut ph = detector();
            let mut peak = 0.0_f64;
            for i in 0..STEADY_SAMPLES {
                let fired = ph.update(rng.p_junk(junk_share));
                assert!(!fired, "junk {junk_share}, seed {seed}: false alarm at {i}");
                peak = peak.max(ph.statistic());
            }
            println!("junk {junk_share}, seed {seed}: peak {peak:.1}");
        }
    }
}

#[test]
fn a_shift_either_way_fires_after_the_change_within_the_delay() {
    // 20% junk -> 40% (mean +0.16), and 20% -> 5% (mean -0.12).
    for after in [0.4, 0.05] {
        for seed in SEEDS {
            let mut rng = XorShift64Star(seed);
            let mut ph = detector();
            let alarm = (0..CHANGE_AT + 5 * MAX_DELAY).find(|&i| {
                let junk_share = if i < CHANGE_AT { 0.2 } else { after };
                ph.update(rng.p_junk(junk_share))
            });
            let Some(at) = alarm else {
                panic!("junk 0.2 -> {after}, seed {seed}: no alarm");
            };
            assert!(
                at >= CHANGE_AT,
                "seed {seed}: alarm at {at}, before the change"
            );
            let delay = at - CHANGE_AT;
            assert!(
                delay < MAX_DELAY,
                "junk 0.2 -> {after}, seed {seed}: alarm {delay} samples late"
            );
            println!("junk 0.2 -> {after}, seed {seed}: alarm after {delay}");
        }
    }
}
