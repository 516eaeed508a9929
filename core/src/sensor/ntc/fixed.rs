//! NTC thermistor, fixed point (the device path). Same steps as
//! [`super::float`].
//!
//! Formats: `L = ln R` at 2^-27 (`|L| < 32`), `y = 1/T` at 2^-44. Cost per
//! code: two logarithms (12 multiplies), the polynomial (1 for beta, 4 for
//! Steinhart–Hart), the reciprocal (7), the temperature (1), lead and
//! self-heating (2). No division.

use super::{NtcConfig, NtcModel};
use crate::error::SensorSetting;
use crate::fx::{self, mul_s32};
use crate::fxmath;
use crate::sensor::resistive::fixed::{Input, Sample};
use crate::sensor::{SCoef, TemperatureReading};
use crate::{Error, Status};

/// Fraction bits of `L`.
const L_FRAC: u32 = 27;
/// Fraction bits of `y = 1/T`.
const Y_FRAC: u32 = 44;

/// A prepared NTC channel, fixed point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Ntc {
    input: Input,
    /// ln R_ref at 2^-32.
    ln_rref: i64,
    /// `1/T = c0 + c1·L + c3·L³`; c0 at 2^-44.
    c0: i64,
    c1: SCoef,
    c3: SCoef,
    range_min: u32,
    range_max: u32,
}

impl Ntc {
    /// Prepares a channel (integer arithmetic only).
    pub fn new(config: &NtcConfig) -> Result<Ntc, Error> {
        config.validate()?;
        let bad = Error::OutOfRange(SensorSetting::NtcModel.into());
        let (c0, c1, c3) = match config.model {
            NtcModel::Beta {
                r0_ohms,
                t0_k,
                beta_k,
            } => {
                let inv_beta = fxmath::recip(beta_k.to_bits() as u64, 16).ok_or(bad)?;
                let inv_t0 = fxmath::recip(t0_k.to_bits() as u64, 16).ok_or(bad)?;
                let (inv_t0, _) = inv_t0.scale(1, 0, Y_FRAC);
                let ln_r0 = fxmath::ln(r0_ohms.to_bits(), 32).ok_or(bad)? >> (32 - L_FRAC);
                let c1 = SCoef::from_coef(inv_beta);
                let (l0, _) = c1.apply(ln_r0, L_FRAC, Y_FRAC);
                (inv_t0 as i64 - l0, c1, SCoef::default())
            }
            NtcModel::SteinhartHart { a, b, c } => (
                a.to_bits() >> (48 - Y_FRAC),
                SCoef::from_coefficient(b),
                SCoef::from_coefficient(c),
            ),
        };
        let f = &config.front_end;
        Ok(Ntc {
            input: Input::new(f)?,
            ln_rref: fxmath::ln(f.reference_ohms.to_bits(), 32).ok_or(bad)?,
            c0,
            c1,
            c3,
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
        let (r, fault) = self.input.sample_ohms(ohms);
        let l = fxmath::ln(r, 32);
        let (t, status) = match l {
            Some(l) => self.temperature(self.inverse_temperature(l >> (32 - L_FRAC))),
            None => (u32::MAX, Status::SENSOR_SATURATED),
        };
        self.check_range(t as i64, status | fault)
    }

    fn convert(&self, s: Sample) -> TemperatureReading<fx::Temperature> {
        let l = self.log_resistance(&s);
        let y = self.inverse_temperature(l);
        let (t, mut status) = self.temperature(y);
        status |= s.status;
        let t = self.self_heating(t as i64, &s);
        self.check_range(t, status)
    }

    /// `L = ln(num) − ln(den) + ln R_ref` at 2^-27.
    fn log_resistance(&self, s: &Sample) -> i64 {
        let ln_num = fxmath::ln(s.num as u64, s.num_frac).unwrap_or(0);
        let ln_den = fxmath::ln(s.den as u64, 0).unwrap_or(0);
        let l = ln_num - ln_den + self.ln_rref;
        (l + (1 << 4)) >> (32 - L_FRAC)
    }

    /// `y = 1/T = c0 + c1·L + c3·L³` at 2^-44.
    fn inverse_temperature(&self, l: i64) -> i64 {
        let (t1, _) = self.c1.apply(l, L_FRAC, Y_FRAC);
        if self.c3 == SCoef::default() {
            // Beta model: no cubic term.
            return self.c0 + t1;
        }
        // L² at 2^-22 (< 2^32 for |L| < 32).
        let l2 = mul_s32(l, l) >> (2 * L_FRAC - 22);
        let (c3l2, _) = self.c3.apply(l2, 22, Y_FRAC);
        let (t3, _) = SCoef::from_i64(c3l2, Y_FRAC).apply(l, L_FRAC, Y_FRAC);
        self.c0 + t1 + t3
    }

    /// `T = 1/y`, K at 2^-16; a non-positive `y` or a `T` beyond the format
    /// saturates.
    fn temperature(&self, y: i64) -> (u32, Status) {
        let r = if y > 0 {
            fxmath::recip(y as u64, Y_FRAC)
        } else {
            None
        };
        match r.map(|r| r.scale(1, 0, 16)) {
            Some((t, false)) if t <= u32::MAX as u64 => (t as u32, Status::OK),
            _ => (u32::MAX, Status::SENSOR_SATURATED),
        }
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
