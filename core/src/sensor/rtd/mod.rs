//! Platinum resistance thermometers (Pt100, Pt1000, any R₀) per IEC 60751.
//!
//! Callendar–Van Dusen, with `W = R/R₀` and `t` in °C (IEC 60751:2008, §4.2):
//!
//! * `W(t) = 1 + A·t + B·t²` for 0 … 850 °C;
//! * `W(t) = 1 + A·t + B·t² + C·(t − 100)·t³` for −200 … 0 °C;
//!
//! with A = 3.9083e-3 /°C, B = −5.775e-7 /°C², C = −4.183e-12 /°C⁴.
//!
//! The inverse `t(W)` is the root of the quadratic above 0 °C (closed form;
//! both paths). Below 0 °C the quadratic root is the start of a bounded
//! iteration `t ← t − (W(t) − W)·g(t)`: the float path uses the exact slope
//! `g = 1/W'(t)` (Newton, at most [`ITERATIONS_FLOAT`] steps, stops below
//! 1e-12 °C); the fixed path uses a quadratic `g(t)` interpolating `1/W'` at
//! 0, −100 and −200 °C (prepared at compile time; contraction ≤ 1.2e-3 per
//! step, [`ITERATIONS_FIXED`] steps) so that it never divides.
//!
//! Readings are clamped to the standard's range −200 … 850 °C (the
//! polynomial means nothing outside) and flagged against the configured
//! measuring range.

pub mod fixed;
pub mod float;

use crate::constants::ZERO_CELSIUS_K;
use crate::error::SensorSetting;
use crate::sensor::resistive::FrontEnd;
use crate::{Error, fx};

/// IEC 60751 coefficient A, 1/°C.
pub const A: f64 = 3.9083e-3;
/// IEC 60751 coefficient B, 1/°C².
pub const B: f64 = -5.775e-7;
/// IEC 60751 coefficient C, 1/°C⁴ (below 0 °C only).
pub const C: f64 = -4.183e-12;
/// Lowest temperature of IEC 60751, °C.
pub const T_MIN_C: f64 = -200.0;
/// Highest temperature of IEC 60751, °C.
pub const T_MAX_C: f64 = 850.0;
/// Iterations of the float path below 0 °C (bound).
pub const ITERATIONS_FLOAT: u32 = 8;
/// Iterations of the fixed path below 0 °C (always run: the start is within
/// 2.4 °C, each step multiplies the error by at most 1.2e-3: 3e-6 °C after
/// two).
pub const ITERATIONS_FIXED: u32 = 2;

/// A platinum RTD channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RtdConfig {
    /// Resistance at 0 °C, Ω (100 for Pt100, 1000 for Pt1000; 1 Ω … 60 kΩ).
    pub r0_ohms: fx::Resistance,
    /// How the sensor is read.
    pub front_end: FrontEnd,
    /// Lowest temperature of the measuring range, K (≥ −200 °C).
    pub range_min_k: fx::Temperature,
    /// Highest temperature of the measuring range, K (≤ 850 °C).
    pub range_max_k: fx::Temperature,
}

impl RtdConfig {
    /// A channel over the whole IEC 60751 range, with open and short
    /// thresholds at twice the resistance at 850 °C and half the resistance
    /// at −200 °C (host helper, from `f64`).
    pub fn new(
        r0_ohms: f64,
        circuit: crate::sensor::resistive::Circuit,
        adc_bits: u8,
        reference_ohms: f64,
    ) -> Result<RtdConfig, Error> {
        let short = 0.5 * r0_ohms * float::ratio(T_MIN_C);
        let open = 2.0 * r0_ohms * float::ratio(T_MAX_C);
        let c = RtdConfig {
            r0_ohms: fx::from_f64(r0_ohms, SensorSetting::R0)?,
            front_end: FrontEnd::new(circuit, adc_bits, reference_ohms, short, open)?,
            range_min_k: fx::from_f64(T_MIN_C + ZERO_CELSIUS_K, SensorSetting::RangeMinimum)?,
            range_max_k: fx::from_f64(T_MAX_C + ZERO_CELSIUS_K, SensorSetting::RangeMaximum)?,
        };
        c.validate()?;
        Ok(c)
    }

    /// Checks every field.
    pub fn validate(&self) -> Result<(), Error> {
        self.front_end.validate()?;
        if self.r0_ohms.to_fixed() < 1 || self.r0_ohms.to_fixed() > 60_000 {
            return Err(Error::OutOfRange(SensorSetting::R0.into()));
        }
        // −200 °C = 73.15 K, 850 °C = 1123.15 K.
        let lo = const { fx::Temperature::lit("73.15") };
        let hi = const { fx::Temperature::lit("1123.15") };
        if self.range_min_k < lo || self.range_min_k >= self.range_max_k {
            return Err(Error::OutOfRange(SensorSetting::RangeMinimum.into()));
        }
        if self.range_max_k > hi {
            return Err(Error::OutOfRange(SensorSetting::RangeMaximum.into()));
        }
        Ok(())
    }
}

/// `f64` constants of the fixed path, evaluated at compile time.
mod consts {
    use super::{A, B, C};

    /// `W'(t)` (slope of the polynomial below 0 °C).
    const fn slope(t: f64) -> f64 {
        A + 2.0 * B * t + C * (4.0 * t * t * t - 300.0 * t * t)
    }

    /// Coefficients `[g0, g1, g2]` of `g(x) = g0 + g1·x + g2·x²`, `x = t/1024`,
    /// the quadratic through `1/W'` at 0, −100 and −200 °C (Lagrange).
    pub(super) const fn slope_inverse() -> [f64; 3] {
        let (x0, x1, x2) = (0.0, -100.0 / 1024.0, -200.0 / 1024.0);
        let (y0, y1, y2) = (1.0 / slope(0.0), 1.0 / slope(-100.0), 1.0 / slope(-200.0));
        // Newton's divided differences.
        let d01 = (y1 - y0) / (x1 - x0);
        let d12 = (y2 - y1) / (x2 - x1);
        let d012 = (d12 - d01) / (x2 - x0);
        // y = y0 + d01·(x − x0) + d012·(x − x0)(x − x1), x0 = 0.
        [y0, d01 - d012 * x1, d012]
    }

    /// Rounds to a signed raw value with `frac` fraction bits.
    pub(super) const fn q(v: f64, frac: i32) -> i64 {
        let s = v * (1u64 << frac) as f64;
        if s < 0.0 {
            (s - 0.5) as i64
        } else {
            (s + 0.5) as i64
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slope_inverse_interpolates() {
        let g = consts::slope_inverse();
        for t in [0.0, -100.0, -200.0] {
            let x = t / 1024.0;
            let want = 1.0 / (A + 2.0 * B * t + C * (4.0 * t * t * t - 300.0 * t * t));
            assert!((g[0] + g[1] * x + g[2] * x * x - want).abs() < 1e-9);
        }
    }

    #[test]
    fn config_limits() {
        use crate::sensor::resistive::Circuit;
        let c = RtdConfig::new(100.0, Circuit::Ratiometric, 16, 400.0).unwrap();
        assert!((fx::to_f64(c.front_end.short_ohms) - 9.26).abs() < 0.01);
        assert!(RtdConfig::new(0.5, Circuit::Ratiometric, 16, 400.0).is_err());
        let mut c = c;
        c.range_max_k = fx::Temperature::from_num(1200);
        assert_eq!(
            c.validate(),
            Err(Error::OutOfRange(SensorSetting::RangeMaximum.into()))
        );
    }
}
