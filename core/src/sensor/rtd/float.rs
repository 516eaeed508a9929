//! Platinum RTD, float (generic over [`Real`]; `f64` is the reference). Same
//! steps as [`super::fixed`]: `sample` → `ratio` → `invert`
//! (`quadratic_root`, `refine_below_zero`) → `self_heating` → `check_range`.

use super::{A, B, C, ITERATIONS_FLOAT, RtdConfig, T_MAX_C, T_MIN_C};
use crate::constants::ZERO_CELSIUS_K;
use crate::error::Measured;
use crate::sensor::resistive::float::{Input, Sample};
use crate::sensor::{TemperatureReading, finite};
use crate::{Error, Real, Status, fx};

/// `W(t) = R(t)/R₀` of IEC 60751 at `t` °C (no range check).
pub fn ratio<F: Real>(t: F) -> F {
    let (a, b, c) = (F::lit(A), F::lit(B), F::lit(C));
    if t < F::ZERO {
        F::ONE + t * (a + t * (b + t * c * (t - F::lit(100.0))))
    } else {
        F::ONE + t * (a + t * b)
    }
}

/// `t(W)` in °C: the inverse of [`ratio`], `W` clamped to the standard's
/// range (−200 … 850 °C).
pub fn celsius<F: Real>(w: F) -> F {
    let w = w.clamp_to(ratio(F::lit(T_MIN_C)), ratio(F::lit(T_MAX_C)));
    let t = quadratic_root(w);
    if w < F::ONE {
        refine_below_zero(t, w)
    } else {
        t
    }
}

/// Under- or over-range when `W` lies beyond −200 … 850 °C (where
/// [`celsius`] clamps it).
fn beyond_standard<F: Real>(w: F) -> Status {
    if w < ratio(F::lit(T_MIN_C)) {
        Status::SENSOR_UNDER_RANGE
    } else if w > ratio(F::lit(T_MAX_C)) {
        Status::SENSOR_OVER_RANGE
    } else {
        Status::OK
    }
}

/// The root of `1 + A·t + B·t² = W`, in the form without cancellation:
/// `t = 2u / (A + √(A² + 4B·u))`, `u = W − 1`.
fn quadratic_root<F: Real>(w: F) -> F {
    let (a, b) = (F::lit(A), F::lit(B));
    let u = w - F::ONE;
    F::lit(2.0) * u / (a + (a * a + F::lit(4.0) * b * u).sqrt())
}

/// Newton's method on the full polynomial below 0 °C, exact slope, at most
/// [`ITERATIONS_FLOAT`] steps.
fn refine_below_zero<F: Real>(mut t: F, w: F) -> F {
    let (a, b, c) = (F::lit(A), F::lit(B), F::lit(C));
    for _ in 0..ITERATIONS_FLOAT {
        let f = ratio(t) - w;
        let slope = a + F::lit(2.0) * b * t + c * t * t * (F::lit(4.0) * t - F::lit(300.0));
        let step = f / slope;
        t -= step;
        if step.abs() < F::lit(1e-12) {
            break;
        }
    }
    t
}

/// A prepared RTD channel, float.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rtd<F> {
    config: RtdConfig,
    input: Input<F>,
    r0_ohms: F,
    range_min_k: F,
    range_max_k: F,
}

impl<F: Real> Rtd<F> {
    /// Prepares a channel.
    pub fn new(config: &RtdConfig) -> Result<Rtd<F>, Error> {
        config.validate()?;
        Ok(Rtd {
            config: *config,
            input: Input::new(&config.front_end)?,
            r0_ohms: F::lit(fx::to_f64(config.r0_ohms)),
            range_min_k: F::lit(fx::to_f64(config.range_min_k)),
            range_max_k: F::lit(fx::to_f64(config.range_max_k)),
        })
    }

    /// The front-end's valid codes (codes outside read as open or short).
    pub fn valid_codes(&self) -> (u32, u32) {
        self.config.front_end.valid_codes()
    }

    /// Converts one converter code.
    pub fn read(&self, code: u32) -> TemperatureReading<F> {
        self.convert(self.input.sample(code))
    }

    /// Converts a measured resistance (leads included), Ω. NaN and infinities
    /// are errors.
    pub fn read_ohms(&self, ohms: F) -> Result<TemperatureReading<F>, Error> {
        Ok(self.convert(self.input.sample_ohms(ohms, &self.config.front_end)?))
    }

    /// The resistance the sensor element has at `temperature_k`, Ω (the
    /// inverse direction). Outside −200 … 850 °C it is an error.
    pub fn ohms(&self, temperature_k: F) -> Result<F, Error> {
        let t = finite(temperature_k, Measured::Temperature)? - F::lit(ZERO_CELSIUS_K);
        // A micro-kelvin of tolerance absorbs the rounding of K ↔ °C at the limits.
        let tol = F::lit(1e-6);
        if t < F::lit(T_MIN_C) - tol || t > F::lit(T_MAX_C) + tol {
            return Err(Error::OutOfRange(Measured::RtdTemperature.into()));
        }
        Ok(self.r0_ohms * ratio(t.clamp_to(F::lit(T_MIN_C), F::lit(T_MAX_C))))
    }

    fn convert(&self, s: Sample<F>) -> TemperatureReading<F> {
        let w = self.ratio(&s);
        let t = celsius(w) + F::lit(ZERO_CELSIUS_K);
        let t = self.self_heating(t, &s);
        self.check_range(t, s.status | beyond_standard(w))
    }

    /// `W = R/R₀ = (R_ref/R₀)·num/den`.
    fn ratio(&self, s: &Sample<F>) -> F {
        self.input.reference_ohms() / self.r0_ohms * s.num / s.den
    }

    /// Removes the sensor's self-heating.
    fn self_heating(&self, t: F, s: &Sample<F>) -> F {
        t - s.heating
    }

    /// Flags readings outside the measuring range.
    fn check_range(&self, t: F, mut status: Status) -> TemperatureReading<F> {
        if t < self.range_min_k {
            status |= Status::SENSOR_UNDER_RANGE;
        } else if t > self.range_max_k {
            status |= Status::SENSOR_OVER_RANGE;
        }
        TemperatureReading {
            temperature_k: t,
            status,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_over_the_standard_range() {
        // IEC 60751 range −200 … 850 °C, 0.01 °C steps: within 1e-9 °C.
        let mut worst = 0f64;
        for i in -20_000..=85_000 {
            let t = i as f64 / 100.0;
            worst = worst.max((celsius(ratio(t)) - t).abs());
        }
        assert!(worst < 1e-9, "{worst:e}");
    }
}
