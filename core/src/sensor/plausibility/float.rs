//! Plausibility, float (generic over [`Real`]). Same decisions as
//! [`super::fixed`].

use super::{PlausibilityConfig, PlausibilityState, decide};
use crate::error::Measured;
use crate::sensor::finite;
use crate::time::{Instant, Millis};
use crate::{Error, Real, Status, fx};

/// A prepared plausibility check, float.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Checker<F> {
    min: F,
    max: F,
    rate_per_ms: F,
    allowance: F,
    band: F,
    after: Millis,
}

impl<F: Real> Checker<F> {
    /// Prepares a check.
    pub fn new(config: &PlausibilityConfig) -> Result<Checker<F>, Error> {
        config.validate()?;
        let f = |a: fx::Anchor| F::lit(fx::to_f64(a));
        Ok(Checker {
            min: f(config.min),
            max: f(config.max),
            rate_per_ms: f(config.max_rate_per_s) * F::lit(1e-3),
            allowance: f(config.rate_allowance),
            band: f(config.stuck_band),
            after: config.stuck_after,
        })
    }

    /// Checks one value at `now`. NaN or infinite values are errors (and do
    /// not touch the state).
    pub fn check(
        &self,
        value: F,
        now: Instant,
        state: &mut PlausibilityState<F>,
    ) -> Result<Status, Error> {
        let v = finite(value, Measured::SensorReading)?;
        let rate = self.rate_per_ms;
        let allowance = self.allowance;
        let allowed = |dt: Millis| {
            if rate == F::ZERO {
                None
            } else {
                Some(rate * F::lit(dt.as_millis().min(u32::MAX as u64) as f64) + allowance)
            }
        };
        Ok(decide(
            state,
            v,
            now,
            (self.min, self.max),
            allowed,
            (self.band, self.after),
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sensor::plausibility::fixed;

    fn config() -> PlausibilityConfig {
        // Pressure, Pa: 0 … 350 bar, at most 5 bar/s, 0.2 bar noise allowance,
        // stuck when within 0 Pa for 60 s (invented limits of a test setting).
        PlausibilityConfig::new(0.0, 350e5, 5e5, 0.2e5, 0.0, Millis::from_secs(60)).unwrap()
    }

    #[test]
    fn rate_and_stuck_in_both_paths() {
        let c = config();
        let fl = Checker::<f64>::new(&c).unwrap();
        let fi = fixed::Checker::new(&c, 4).unwrap();
        let (mut sf, mut si) = (PlausibilityState::new(), PlausibilityState::new());
        let mut run = |p: f64, t_ms: u64| {
            let now = Instant(t_ms);
            let a = fl.check(p, now, &mut sf).unwrap();
            let b = fi.check((p * 16.0) as i64, now, &mut si);
            assert_eq!(a, b, "{p} at {t_ms}");
            a
        };
        assert_eq!(run(200e5, 0), Status::OK);
        // +4 bar in 1 s: plausible.
        assert_eq!(run(204e5, 1000), Status::OK);
        // +10 bar in 1 s: implausible (5 bar/s + 0.2 bar).
        assert_eq!(run(214e5, 2000), Status::SENSOR_RATE_IMPLAUSIBLE);
        // Back down: the jump back is flagged too.
        assert_eq!(run(204e5, 2100), Status::SENSOR_RATE_IMPLAUSIBLE);
        // Identical value for 60 s: stuck.
        assert_eq!(run(204e5, 30_000), Status::OK);
        assert_eq!(run(204e5, 62_100), Status::SENSOR_STUCK);
        // Moves again: fine.
        assert_eq!(run(204.1e5, 63_000), Status::OK);
        // Out of range.
        assert!(run(-1.0, 600_000).contains(Status::SENSOR_UNDER_RANGE));
        assert!(run(360e5, 6_000_000).contains(Status::SENSOR_OVER_RANGE));
        assert!(
            fl.check(f64::NAN, Instant(0), &mut PlausibilityState::new())
                .is_err()
        );
    }
}
