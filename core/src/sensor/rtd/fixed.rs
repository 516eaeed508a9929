//! Platinum RTD, fixed point (the device path). Same steps as
//! [`super::float`].
//!
//! Formats: `W = R/R₀` at 2^-30 (`u32`, W < 4), `t` in °C at 2^-20 (`i32`),
//! polynomial coefficients at 2^-28 in the variable `x = t/1024` at 2^-31.
//!
//! Cost per code (32×32→64 multiplies): ratio 1 (series circuit) or 8
//! (dividers: one division-free reciprocal); closed form 10 (one square
//! root); below 0 °C 2 × 7 more; self-heating 1–2. No division. Measured on
//! a Cortex-M0: see `isochor budget`, its `sensor` stage; per-call figures in docs/measured.md.

use super::consts::{q, slope_inverse};
use super::{A, B, C, ITERATIONS_FIXED, RtdConfig};
use crate::error::SensorSetting;
use crate::fx::{self, Coef, mul_s32, sat_u32};
use crate::fxmath;
use crate::sensor::TemperatureReading;
use crate::sensor::resistive::Circuit;
use crate::sensor::resistive::fixed::{Input, Sample};
use crate::{Error, Status};

/// W − 1 per x = t/1024, x², x³, x⁴ (the last two below 0 °C only), at 2^-28.
const A1: i64 = q(A * 1024.0, 28);
const A2: i64 = q(B * 1024.0 * 1024.0, 28);
const A3: i64 = q(-100.0 * C * 1024.0 * 1024.0 * 1024.0, 28);
const A4: i64 = q(C * 1024.0 * 1024.0 * 1024.0 * 1024.0, 28);
/// `g(x) ≈ 1/W'` in °C, at 2^-22.
const G: [f64; 3] = slope_inverse();
const G0: i64 = q(G[0], 22);
const G1: i64 = q(G[1], 22);
const G2: i64 = q(G[2], 22);
/// `−4B/A²`: the radicand is `1 − K·u`.
const K: Coef = Coef::from_f64(-4.0 * B / (A * A));
/// `A/(2|B|)`, °C: `t = (A/(2|B|))·(1 − √(1 − K·u))`.
const T_PER_ROOT: Coef = Coef::from_f64(A / (-2.0 * B));
/// 273.15 K at 2^-20.
const ZERO_C_Q20: i64 = 286_418_534;
/// 1.0 at 2^-30.
const ONE_Q30: i64 = 1 << 30;
/// W at −200 °C and 850 °C, at 2^-30 (rounded inwards).
const W_MIN: u32 = 198_857_845;
const W_MAX: u32 = 4_192_759_153;

/// `W(t) − 1` at 2^-30 for `t` °C at 2^-20 (inside −200 … 850 °C).
pub fn ratio_minus_one(t: i32) -> i64 {
    // x = t/1024 at 2^-31 (|x| < 0.84).
    let x = t as i64 * 2;
    let h = if t < 0 {
        let h = A3 + (mul_s32(x, A4) >> 31);
        A2 + (mul_s32(x, h) >> 31)
    } else {
        A2
    };
    let h = A1 + (mul_s32(x, h) >> 31);
    // x·h at 2^-59 → 2^-30.
    (mul_s32(x, h) + (1 << 28)) >> 29
}

/// Under- or over-range when `W` lies beyond −200 … 850 °C (where
/// [`celsius`] clamps it).
fn beyond_standard(w: u32) -> Status {
    if w < W_MIN {
        Status::SENSOR_UNDER_RANGE
    } else if w > W_MAX {
        Status::SENSOR_OVER_RANGE
    } else {
        Status::OK
    }
}

/// `t(W)` in °C at 2^-20 for `W` at 2^-30, `W` clamped to −200 … 850 °C.
pub fn celsius(w: u32) -> i32 {
    let w = w.clamp(W_MIN, W_MAX);
    let u = w as i64 - ONE_Q30;
    let t = quadratic_root(u);
    if u < 0 { refine_below_zero(t, u) } else { t }
}

/// `t = (A/(2|B|))·(1 − √(1 − K·u))`, `u = W − 1` at 2^-30.
fn quadratic_root(u: i64) -> i32 {
    let (ku, _) = K.scale(u.unsigned_abs() as u32, 30, 32);
    let radicand = if u < 0 {
        (1u64 << 32) + ku
    } else {
        (1u64 << 32) - ku
    };
    let (s, _) = fxmath::sqrt(radicand, 32).scale(1, 0, 31);
    let d = (1i64 << 31) - s as i64;
    let (t, _) = T_PER_ROOT.scale(d.unsigned_abs() as u32, 31, 20);
    if d < 0 { -(t as i32) } else { t as i32 }
}

/// `t ← t − (W(t) − W)·g(t)`, [`ITERATIONS_FIXED`] steps.
fn refine_below_zero(mut t: i32, u: i64) -> i32 {
    for _ in 0..ITERATIONS_FIXED {
        let f = ratio_minus_one(t) - u;
        let x = t as i64 * 2;
        let g = G0 + (mul_s32(x, G1 + (mul_s32(x, G2) >> 31)) >> 31);
        // f at 2^-30 × g at 2^-22 → t at 2^-20.
        let step = (mul_s32(f, g) + (1 << 31)) >> 32;
        t = (t as i64 - step).clamp(-(250 << 20), 0) as i32;
    }
    t
}

/// A prepared RTD channel, fixed point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Rtd {
    input: Input,
    circuit: Circuit,
    /// R_ref/R₀ (series circuit: divided by 2^bits).
    w_per_ratio: Coef,
    /// 1/R₀ for resistance inputs.
    inv_r0: Coef,
    r0: Coef,
    range_min: u32,
    range_max: u32,
}

impl Rtd {
    /// Prepares a channel (integer arithmetic only).
    pub fn new(config: &RtdConfig) -> Result<Rtd, Error> {
        config.validate()?;
        let f = &config.front_end;
        let r0 = Coef::from_raw(config.r0_ohms.to_bits(), 32);
        let inv_r0 = r0
            .recip()
            .ok_or(Error::OutOfRange(SensorSetting::R0.into()))?;
        let mut w = Coef::from_raw(f.reference_ohms.to_bits(), 32).mul(inv_r0);
        if f.circuit == Circuit::Ratiometric {
            w = w.mul(Coef::from_parts(1, f.adc_bits as i32));
        }
        Ok(Rtd {
            input: Input::new(f)?,
            circuit: f.circuit,
            w_per_ratio: w,
            inv_r0,
            r0,
            range_min: config.range_min_k.to_bits(),
            range_max: config.range_max_k.to_bits(),
        })
    }

    /// Converts one converter code.
    pub fn read(&self, code: u32) -> TemperatureReading<fx::Temperature> {
        self.convert(self.input.sample(code))
    }

    /// Converts a measured resistance (leads included), Ω: open and short
    /// thresholds and the lead correction apply, self-heating does not (see
    /// the resistive input's `sample_ohms`).
    pub fn read_ohms(&self, ohms: fx::Resistance) -> TemperatureReading<fx::Temperature> {
        let (r, status) = self.input.sample_ohms(ohms);
        // R/R₀ at 2^-30 from R at 2^-32: the top 32 bits of R are R at 2^-lz.
        let lz = r.leading_zeros().min(32);
        let top = (r << lz >> 32) as u32;
        let (w, over) = self.inv_r0.scale(top, lz, 30);
        let (w, _) = sat_u32(if over { u64::MAX } else { w });
        let t = (celsius(w) as i64 + ZERO_C_Q20 + 8) >> 4;
        self.check_range(t, status | beyond_standard(w))
    }

    /// The resistance of the sensor element at `temperature`, Ω (the inverse
    /// direction), with [`Status::SENSOR_UNDER_RANGE`] or
    /// [`Status::SENSOR_OVER_RANGE`] when the temperature lies outside
    /// −200 … 850 °C (it is clamped there).
    pub fn ohms(&self, temperature: fx::Temperature) -> (fx::Resistance, Status) {
        let t = ((temperature.to_bits() as i64) << 4) - ZERO_C_Q20;
        let (t, status) = if t < -(200 << 20) {
            (-(200 << 20), Status::SENSOR_UNDER_RANGE)
        } else if t > 850 << 20 {
            (850 << 20, Status::SENSOR_OVER_RANGE)
        } else {
            (t, Status::OK)
        };
        let w = (ratio_minus_one(t as i32) + ONE_Q30) as u32;
        let (r, _) = self.r0.scale(w, 30, 32);
        (fx::Resistance::from_bits(r), status)
    }

    fn convert(&self, s: Sample) -> TemperatureReading<fx::Temperature> {
        // A ratio beyond the format (W ≥ 4) is beyond 850 °C: clamped and
        // flagged over range like any ratio past the standard's range.
        let (w, _) = self.ratio(&s);
        let t = (celsius(w) as i64 + ZERO_C_Q20 + 8) >> 4;
        let t = self.self_heating(t, &s);
        self.check_range(t, s.status | beyond_standard(w))
    }

    /// `W = (R_ref/R₀)·num/den` at 2^-30; the flag is true when it did not fit.
    fn ratio(&self, s: &Sample) -> (u32, bool) {
        let c = match self.circuit {
            Circuit::Ratiometric => Some(self.w_per_ratio),
            Circuit::DividerLow | Circuit::DividerHigh => {
                fxmath::recip(s.den as u64, 0).map(|r| self.w_per_ratio.mul(r))
            }
        };
        let Some(c) = c else {
            return (u32::MAX, true);
        };
        let (w, over) = c.scale(s.num, s.num_frac, 30);
        let (w, sat) = sat_u32(w);
        (w, over || sat)
    }

    /// Removes the sensor's self-heating (K at 2^-16).
    fn self_heating(&self, t: i64, s: &Sample) -> i64 {
        t - s.heating as i64
    }

    /// Flags readings outside the measuring range; `t` in K at 2^-16.
    fn check_range(&self, t: i64, mut status: Status) -> TemperatureReading<fx::Temperature> {
        let t = t.clamp(0, u32::MAX as i64) as u32;
        if t < self.range_min {
            status |= Status::SENSOR_UNDER_RANGE;
        } else if t > self.range_max {
            status |= Status::SENSOR_OVER_RANGE;
        }
        TemperatureReading {
            temperature_k: fx::Temperature::from_bits(t),
            status,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ratio_limits_are_the_standard_range() {
        let w_min = (ratio_minus_one(-200 << 20) + ONE_Q30) as u32;
        let w_max = (ratio_minus_one(850 << 20) + ONE_Q30) as u32;
        assert!(w_min.abs_diff(W_MIN) < 64, "{w_min}");
        assert!(w_max.abs_diff(W_MAX) < 64, "{w_max}");
    }

    #[test]
    fn round_trip_fixed() {
        let mut worst = 0i64;
        for i in -2000i64..=8500 {
            let t = ((i << 20) / 10) as i32;
            let w = (ratio_minus_one(t) + ONE_Q30) as u32;
            worst = worst.max((celsius(w) as i64 - t as i64).abs());
        }
        // 2^-20 °C units.
        assert!(worst < 16, "{worst}");
    }
}
