//! Bridge transducer, fixed point (the device path). Same steps as
//! [`super::float`].
//!
//! Formats: signal `s` and zero at 2^-31, `ΔT` in K at 2^-16 (limited to
//! ±255 K), span factor at 2^-30, `u` at 2^-30 (limited to ±1.5), `q` at
//! 2^-27, pressure in Pa at 2^-4. 16 multiplies per code, no division.

use super::{BridgeConfig, U_LIMIT};
use crate::fx::{self, Coef, mul_s32, mul_u32};
use crate::fxmath;
use crate::sensor::{PressureKind, PressureReading, SCoef, gauge};
use crate::{Error, Status};

/// ±[`U_LIMIT`] at 2^-30.
const U_MAX: i64 = (U_LIMIT * (1u64 << 30) as f64) as i64;
/// Lowest span factor (1/16) at 2^-30.
const F_MIN: i64 = 1 << 26;

/// Zero and `1/span` of a bridge at one transducer temperature.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Compensation {
    /// Zero at 2^-31.
    zero: i64,
    /// `1/span`; `None` when the span is not usable (reading saturates).
    inv_span: Option<Coef>,
}

/// A prepared bridge channel, fixed point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Bridge {
    kind: PressureKind,
    rails: (i32, i32),
    /// Left shift from a code to `s` at 2^-31.
    code_shift: u32,
    reference: i64,
    /// z₀ at 2^-31.
    z0: i64,
    z1: SCoef,
    z2: SCoef,
    span: Coef,
    k1: SCoef,
    k2: SCoef,
    /// Linearity coefficients at 2^-27.
    c: [i64; 4],
    /// p_lo, Pa at 2^-4.
    lo: i64,
    range: SCoef,
    /// Margin in `q` units (2^-27).
    margin: i64,
}

impl Bridge {
    /// Prepares a channel (integer arithmetic only).
    pub fn new(config: &BridgeConfig) -> Result<Bridge, Error> {
        config.validate()?;
        let lo = config.range_lo_pa.to_bits() as i64;
        let span_pa = config.range_hi_pa.to_bits() as i64 - lo;
        Ok(Bridge {
            kind: config.kind,
            rails: config.rails(),
            code_shift: 31 - config.signal_bits(),
            reference: config.reference_k.to_bits() as i64,
            z0: config.zero[0].to_bits() >> 17,
            z1: SCoef::from_coefficient(config.zero[1]),
            z2: SCoef::from_coefficient(config.zero[2]),
            span: Coef::from_raw(config.span.to_bits().unsigned_abs(), 48),
            k1: SCoef::from_coefficient(config.span_tc[0]),
            k2: SCoef::from_coefficient(config.span_tc[1]),
            c: config.linearity.map(|c| (c.to_bits() + (1 << 20)) >> 21),
            lo,
            range: SCoef::from_i64(span_pa, 4),
            margin: (config.range_margin.to_bits() + (1 << 20)) >> 21,
        })
    }

    /// Converts one converter code at the transducer temperature with the
    /// barometric pressure.
    pub fn read(
        &self,
        code: i32,
        temperature: fx::Temperature,
        barometric: fx::Pressure,
    ) -> PressureReading<fx::Pressure, fx::GaugePressure> {
        self.read_compensated(code, &self.compensation(temperature), barometric)
    }

    /// The zero and span at a transducer temperature: prepare it when the
    /// temperature changes and convert many codes with
    /// [`Bridge::read_compensated`] (it holds the one reciprocal of the path).
    pub fn compensation(&self, temperature: fx::Temperature) -> Compensation {
        let (zero, inv_span) = self.compensate(temperature);
        Compensation { zero, inv_span }
    }

    /// Converts one code with a prepared compensation (about a quarter of
    /// the cost of [`Bridge::read`] on a Cortex-M0).
    pub fn read_compensated(
        &self,
        code: i32,
        comp: &Compensation,
        barometric: fx::Pressure,
    ) -> PressureReading<fx::Pressure, fx::GaugePressure> {
        let (s, mut status) = self.signal(code);
        let (u, st) = self.normalize(s, comp.zero, comp.inv_span);
        status |= st;
        let q = self.linearize(u);
        let p = self.scale(q);
        status |= self.check_range(q);
        let mut r = gauge::fixed::reading(self.kind, p, barometric);
        r.status |= status;
        r
    }

    /// `s` at 2^-31; a code at a rail saturates.
    fn signal(&self, code: i32) -> (i64, Status) {
        let (lo, hi) = self.rails;
        let c = code.max(lo).min(hi);
        let status = if code <= lo || code >= hi {
            Status::SENSOR_SATURATED
        } else {
            Status::OK
        };
        ((c as i64) << self.code_shift, status)
    }

    /// Zero (2^-31) and `1/span` at the transducer temperature.
    fn compensate(&self, t: fx::Temperature) -> (i64, Option<Coef>) {
        let dt = (t.to_bits() as i64 - self.reference).clamp(-(255 << 16), 255 << 16);
        // ΔT² at 2^-16 (< 2^32).
        let dt2 = mul_s32(dt, dt) >> 16;
        let zero = self.z0 + self.z1.apply(dt, 16, 31).0 + self.z2.apply(dt2, 16, 31).0;
        let f = ((1 << 30) + self.k1.apply(dt, 16, 30).0 + self.k2.apply(dt2, 16, 30).0).max(F_MIN)
            as u64;
        // S·f at 2^-31 (< 2^34), then its reciprocal.
        let (sf, _) = fx::shr_round(
            mul_u32(self.span.mantissa(), (f >> 2) as u32),
            self.span.shift() + 28 - 31,
        );
        (zero, fxmath::recip(sf, 31))
    }

    /// `u = (s − zero)/span` at 2^-30, limited to ±[`U_LIMIT`].
    fn normalize(&self, s: i64, zero: i64, inv_span: Option<Coef>) -> (i64, Status) {
        let Some(g) = inv_span else {
            return (U_MAX, Status::SENSOR_SATURATED);
        };
        // |s − zero| < 2 at 2^-30: < 2^31.
        let d = (s - zero) >> 1;
        let (u, over) = SCoef::from_coef(g).apply(d, 30, 30);
        if over || !(-U_MAX..=U_MAX).contains(&u) {
            (u.clamp(-U_MAX, U_MAX), Status::SENSOR_SATURATED)
        } else {
            (u, Status::OK)
        }
    }

    /// `q(u)` at 2^-27 (Horner; every product below 2^62).
    fn linearize(&self, u: i64) -> i64 {
        let [c0, c1, c2, c3] = self.c;
        let h = c2 + (mul_s32(u, c3) >> 30);
        let h = c1 + (mul_s32(u, h) >> 30);
        c0 + (mul_s32(u, h) >> 30)
    }

    /// `p = p_lo + (p_hi − p_lo)·q`, Pa at 2^-4.
    fn scale(&self, q: i64) -> i64 {
        self.lo + self.range.apply(q, 27, 4).0
    }

    /// Under or over range beyond the margin.
    fn check_range(&self, q: i64) -> Status {
        if q < -self.margin {
            Status::SENSOR_UNDER_RANGE
        } else if q > (1 << 27) + self.margin {
            Status::SENSOR_OVER_RANGE
        } else {
            Status::OK
        }
    }
}
