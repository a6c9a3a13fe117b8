//! Page-Hinkley test: raise an alarm when the mean of a stream shifts.
//!
//! Drift reports feed it one number per message in arrival order, usually
//! 1.0 for a verdict the model got wrong and 0.0 for one it got right, and
//! it fires when the error rate has risen. It is the sequential test of
//! Page, "Continuous inspection schemes" (Biometrika 41, 1954), in the form
//! given by Gama, Žliobaitė, Bifet, Pechenizkiy and Bouchachia, "A survey
//! on concept drift adaptation" (ACM Computing Surveys 46(4), 2014; cited
//! from memory, section not checked). After `T` samples `x_1 .. x_T`:
//!
//! ```text
//! x̄_t = (x_1 + … + x_t) / t                    running mean
//! m_T = Σ_{t=1..T} (x_t - x̄_t - δ)            cumulative deviation, m_0 = 0
//! M_T = min(m_0, m_1, …, m_T)
//! PH_T = m_T - M_T                              fire when PH_T > λ
//! ```
//!
//! While the mean holds, each term is about `-δ` on average, so `m_T`
//! drifts down and stays near its minimum; once the mean rises by more
//! than `δ`, `m_T` climbs away from `M_T` and crosses `λ`. The mirror image
//! (`+δ`, the maximum, `M_T - m_T`) detects a fall, for
//! [`Direction::Decrease`] and [`Direction::Either`]. `x̄_t` is the mean at
//! step `t`, updated as each sample arrives, which is how the test runs in
//! constant memory.
//!
//! What must stay true: the same samples in the same order give the same
//! alarms, bit for bit; nothing here reads a clock or a random source; no
//! input panics. Non-finite samples are skipped (not counted).

use serde::Serialize;

use crate::error::MetricsError;

/// Which shift of the mean raises the alarm.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Direction {
    /// The mean rose (an error rate got worse). The classic one-sided test.
    #[default]
    Increase,
    /// The mean fell.
    Decrease,
    /// Either of the two.
    Either,
}

/// Settings of a [`PageHinkley`] detector.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PageHinkleyParams {
    /// `δ`: the size of change tolerated, in the units of the samples. Each
    /// sample's deviation from the running mean is reduced by `δ` before it
    /// is added up, so shifts smaller than `δ` are (on average) never
    /// counted, and a larger `δ` also makes the stationary statistic sink
    /// faster, giving fewer false alarms. Must be finite and `>= 0`.
    pub delta: f64,
    /// `λ`: the alarm threshold on the statistic. Larger means fewer false
    /// alarms and a longer delay before a real shift is reported; the delay
    /// is roughly `λ / (shift - δ)` samples. Must be finite and `> 0`.
    pub lambda: f64,
    /// No alarm before this many samples have been counted, so that a
    /// noisy running mean over the first few samples cannot fire.
    pub min_samples: u64,
    /// Which shift to report.
    pub direction: Direction,
}

/// A running Page-Hinkley test over one stream. See the module docs.
#[derive(Debug, Clone, PartialEq)]
pub struct PageHinkley {
    params: PageHinkleyParams,
    samples: u64,
    mean: f64,
    /// `m_T` for an increase, and its running minimum `M_T`.
    rise_sum: f64,
    rise_min: f64,
    /// The mirror image for a decrease, and its running maximum.
    fall_sum: f64,
    fall_max: f64,
}

impl PageHinkley {
    /// A detector with no samples seen.
    ///
    /// Errors: [`MetricsError::InvalidParameter`] naming `delta` when it is
    /// negative or not finite, or `lambda` when it is not above zero or not
    /// finite (NaN fails both).
    pub fn new(params: PageHinkleyParams) -> Result<Self, MetricsError> {
        if !(params.delta >= 0.0 && params.delta.is_finite()) {
            return Err(MetricsError::InvalidParameter {
                name: "delta",
                value: params.delta,
                allowed: "a finite number >= 0",
            });
        }
        if !(params.lambda > 0.0 && params.lambda.is_finite()) {
            return Err(MetricsError::InvalidParameter {
                name: "lambda",
                value: params.lambda,
                allowed: "a finite number > 0",
            });
        }
        Ok(PageHinkley {
            params,
            samples: 0,
            mean: 0.0,
            rise_sum: 0.0,
            rise_min: 0.0,
            fall_sum: 0.0,
            fall_max: 0.0,
        })
    }

    /// Counts one sample and returns whether the alarm is raised: at least
    /// `min_samples` counted and the statistic for the chosen direction
    /// above `lambda`.
    ///
    /// The alarm stays raised on later samples while the statistic stays
    /// above `lambda`; call [`PageHinkley::reset`] once it has been acted
    /// on to watch for the next shift. A NaN or infinite sample is skipped:
    /// not counted, state unchanged, returns `false`.
    pub fn update(&mut self, x: f64) -> bool {
        if !x.is_finite() {
            return false;
        }
        self.samples += 1;
        #[expect(
            clippy::cast_precision_loss,
            reason = "sample counts past 2^53 only round the mean's step"
        )]
        let n = self.samples as f64;
        self.mean += (x - self.mean) / n;
        let deviation = x - self.mean;
        self.rise_sum += deviation - self.params.delta;
        self.rise_min = self.rise_min.min(self.rise_sum);
        self.fall_sum += deviation + self.params.delta;
        self.fall_max = self.fall_max.max(self.fall_sum);
        self.samples >= self.params.min_samples && self.statistic() > self.params.lambda
    }

    /// Forgets every sample; the settings stay.
    pub fn reset(&mut self) {
        *self = PageHinkley {
            params: self.params,
            samples: 0,
            mean: 0.0,
            rise_sum: 0.0,
            rise_min: 0.0,
            fall_sum: 0.0,
            fall_max: 0.0,
        };
    }

    /// The statistic compared with `lambda` for the chosen direction: the
    /// rise statistic, the fall statistic, or the larger of the two. Zero
    /// before any sample, never negative.
    pub fn statistic(&self) -> f64 {
        match self.params.direction {
            Direction::Increase => self.rise_statistic(),
            Direction::Decrease => self.fall_statistic(),
            Direction::Either => self.rise_statistic().max(self.fall_statistic()),
        }
    }

    /// `m_T - M_T`: how far the cumulative deviation has climbed above its
    /// lowest point; large after a rise in the mean.
    pub fn rise_statistic(&self) -> f64 {
        self.rise_sum - self.rise_min
    }

    /// The mirror image: how far the cumulative deviation (with `+δ`) has
    /// fallen below its highest point; large after a fall in the mean.
    pub fn fall_statistic(&self) -> f64 {
        self.fall_max - self.fall_sum
    }

    /// Mean of the samples counted since the last reset (0 before any).
    pub fn mean(&self) -> f64 {
        self.mean
    }

    /// Samples counted since the last reset.
    pub fn samples(&self) -> u64 {
        self.samples
    }

    /// The settings.
    pub fn params(&self) -> PageHinkleyParams {
        self.params
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params(direction: Direction) -> PageHinkleyParams {
        PageHinkleyParams {
            delta: 0.1,
            lambda: 1.0,
            min_samples: 0,
            direction,
        }
    }

    #[test]
    fn statistic_by_hand() {
        // From the definition, δ = 0.1, samples 0, 0, 1, 1:
        // t=1 x̄=0    m = 0 - 0 - 0.1             = -0.1   M = -0.1
        // t=2 x̄=0    m = -0.1 + (0 - 0 - 0.1)    = -0.2   M = -0.2
        // t=3 x̄=1/3  m = -0.2 + (1 - 1/3 - 0.1)  = 0.3667 M = -0.2, PH = 0.5667
        // t=4 x̄=1/2  m = 0.3667 + (1 - 0.5 - 0.1) = 0.7667        PH = 0.9667
        let mut ph = PageHinkley::new(params(Direction::Increase)).unwrap();
        let fired: Vec<bool> = [0.0, 0.0, 1.0, 1.0].iter().map(|&x| ph.update(x)).collect();
        assert_eq!(fired, vec![false; 4]);
        assert!((ph.rise_statistic() - (2.0 / 3.0 - 0.1 + 0.4)).abs() < 1e-15);
        assert!((ph.rise_statistic() - 0.966_666_666_666_666_7).abs() < 1e-12);
        assert_eq!(ph.mean(), 0.5);
        assert_eq!(ph.samples(), 4);
        // t=5 x̄=0.6  m = 0.7667 + (1 - 0.6 - 0.1) = 1.0667  PH = 1.2667 > λ = 1
        assert!(ph.update(1.0));
        assert!((ph.rise_statistic() - 1.266_666_666_666_666_7).abs() < 1e-12);
    }

    #[test]
    fn min_samples_holds_the_alarm() {
        let mut p = params(Direction::Increase);
        p.min_samples = 7;
        let mut ph = PageHinkley::new(p).unwrap();
        let fired: Vec<bool> = [0.0, 0.0, 1.0, 1.0, 1.0, 1.0, 1.0]
            .iter()
            .map(|&x| ph.update(x))
            .collect();
        assert_eq!(fired, vec![false, false, false, false, false, false, true]);
    }

    #[test]
    fn decrease_mirrors_increase() {
        let mut up = PageHinkley::new(params(Direction::Increase)).unwrap();
        let mut down = PageHinkley::new(params(Direction::Decrease)).unwrap();
        let mut either = PageHinkley::new(params(Direction::Either)).unwrap();
        let stream = [0.3, 0.0, 0.0, 1.0, 1.0, 1.0, 1.0, 0.2];
        for &x in &stream {
            let fired_up = up.update(x);
            let fired_down = down.update(-x);
            assert_eq!(fired_up, fired_down);
            assert!((up.rise_statistic() - down.fall_statistic()).abs() < 1e-12);
            either.update(-x);
        }
        assert!(either.statistic() >= down.statistic());
        assert!(down.statistic() > 1.0);
        assert!(up.fall_statistic() < 1.0);
    }

    #[test]
    fn reset_forgets_and_non_finite_is_skipped() {
        let mut ph = PageHinkley::new(params(Direction::Increase)).unwrap();
        for x in [0.0, 1.0, 1.0, 1.0, 1.0, 1.0] {
            ph.update(x);
        }
        let before = ph.clone();
        assert!(!ph.update(f64::NAN));
        assert!(!ph.update(f64::INFINITY));
        assert_eq!(ph, before);
        ph.reset();
        assert_eq!(ph, PageHinkley::new(params(Direction::Increase)).unwrap());
        assert_eq!(ph.statistic(), 0.0);
    }

    #[test]
    fn settings_are_checked() {
        let ok = params(Direction::Increase);
        for (delta, lambda, name) in [
            (-0.1, 1.0, "delta"),
            (f64::NAN, 1.0, "delta"),
            (f64::INFINITY, 1.0, "delta"),
            (0.0, 0.0, "lambda"),
            (0.0, -1.0, "lambda"),
            (0.0, f64::NAN, "lambda"),
            (0.0, f64::INFINITY, "lambda"),
        ] {
            let bad = PageHinkleyParams {
                delta,
                lambda,
                ..ok
            };
            assert!(
                matches!(PageHinkley::new(bad), Err(MetricsError::InvalidParameter { name: n, .. }) if n == name),
                "delta = {delta}, lambda = {lambda}"
            );
        }
        assert!(PageHinkley::new(PageHinkleyParams { delta: 0.0, ..ok }).is_ok());
    }
}
