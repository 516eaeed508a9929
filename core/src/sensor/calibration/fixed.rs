//! Correction, fixed point: on the raw bits of a reading's format (`frac`
//! fraction bits, 0 … 24). 5 multiplies per value, no division.

use super::{Correction, X_MAX, X_MIN};
use crate::error::SensorSetting;
use crate::fx::{self, Coef, mul_s32};
use crate::sensor::SCoef;
use crate::{Error, Status};

/// `x` limits at 2^-30.
const X_LO: i64 = (X_MIN * (1u64 << 30) as f64) as i64;
const X_HI: i64 = (X_MAX * (1u64 << 30) as f64) as i64;

/// A prepared correction, fixed point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Corrector {
    frac: u32,
    lo: i64,
    inv_span: SCoef,
    span: SCoef,
    /// `D = P − x` coefficients at 2^-27.
    d: [i64; 4],
}

impl Corrector {
    /// Prepares a correction for values with `frac` fraction bits.
    pub fn new(c: &Correction, frac: u32) -> Result<Corrector, Error> {
        c.validate()?;
        if frac > 24 {
            return Err(Error::OutOfRange(SensorSetting::FractionBits.into()));
        }
        let span = c.hi.to_bits() - c.lo.to_bits();
        let inv = Coef::from_raw(span as u64, 24)
            .recip()
            .ok_or(Error::OutOfRange(SensorSetting::CalibratedInterval.into()))?;
        let q27 = |b: i64| fx::shr_round_i64(b, 21);
        let [c0, c1, c2, c3] = c.coefficients.map(|v| q27(v.to_bits()));
        Ok(Corrector {
            frac,
            lo: if frac == 24 {
                c.lo.to_bits()
            } else {
                fx::shr_round_i64(c.lo.to_bits(), 24 - frac)
            },
            inv_span: SCoef::from_coef(inv),
            span: SCoef::from_i64(span, 24),
            d: [c0, c1 - (1 << 27), c2, c3],
        })
    }

    /// Corrects a raw value.
    pub fn apply(&self, v: i64) -> i64 {
        let x = self.position(v);
        let d = self.deviation(x);
        v + self.span.apply(d, 27, self.frac).0
    }

    /// Corrects a temperature (`frac` must be 16); a result outside the
    /// format saturates.
    pub fn apply_temperature(&self, t: fx::Temperature) -> (fx::Temperature, Status) {
        let (v, s) = clamp(self.apply(t.to_bits() as i64));
        (fx::Temperature::from_bits(v), s)
    }

    /// Corrects an absolute pressure (`frac` must be 4); a negative result is
    /// clamped to zero and flagged under range.
    pub fn apply_pressure(&self, p: fx::Pressure) -> (fx::Pressure, Status) {
        let (v, s) = clamp(self.apply(p.to_bits() as i64));
        (fx::Pressure::from_bits(v), s)
    }

    /// `x = (v − lo)/(hi − lo)` at 2^-30, limited to [`X_MIN`] … [`X_MAX`].
    fn position(&self, v: i64) -> i64 {
        let (x, _) = self.inv_span.apply(v - self.lo, self.frac, 30);
        x.clamp(X_LO, X_HI)
    }

    /// `D(x)` at 2^-27 (every product below 2^62).
    fn deviation(&self, x: i64) -> i64 {
        let [d0, d1, d2, d3] = self.d;
        let h = d2 + (mul_s32(x, d3) >> 30);
        let h = d1 + (mul_s32(x, h) >> 30);
        d0 + (mul_s32(x, h) >> 30)
    }
}

fn clamp(v: i64) -> (u32, Status) {
    if v < 0 {
        (0, Status::SENSOR_UNDER_RANGE)
    } else if v > u32::MAX as i64 {
        (u32::MAX, Status::SENSOR_SATURATED)
    } else {
        (v as u32, Status::OK)
    }
}
