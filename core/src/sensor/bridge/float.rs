//! Bridge transducer, float (generic over [`Real`]; `f64` is the reference).
//! Same steps as [`super::fixed`]: `signal` → `compensate` → `normalize` →
//! `linearize` → `scale` → `check_range` → gauge/absolute.

use super::{BridgeConfig, U_LIMIT};
use crate::error::Measured;
use crate::sensor::{PressureReading, finite, gauge};
use crate::{Error, Real, Status, fx};

/// Zero and span of a bridge at one transducer temperature.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Compensation<F> {
    zero: F,
    span: F,
}

/// A prepared bridge channel, float.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Bridge<F> {
    config: BridgeConfig,
    per_code: F,
    zero: [F; 3],
    span: F,
    span_tc: [F; 2],
    reference_k: F,
    linearity: [F; 4],
    range_lo_pa: F,
    range_pa: F,
    margin: F,
}

impl<F: Real> Bridge<F> {
    /// Prepares a channel.
    pub fn new(config: &BridgeConfig) -> Result<Bridge<F>, Error> {
        config.validate()?;
        let f = |v: fx::Coefficient| F::lit(fx::to_f64(v));
        let lo = F::lit(fx::to_f64(config.range_lo_pa));
        Ok(Bridge {
            config: *config,
            per_code: F::lit(libm::ldexp(1.0, -(config.signal_bits() as i32))),
            zero: config.zero.map(f),
            span: f(config.span),
            span_tc: config.span_tc.map(f),
            reference_k: F::lit(fx::to_f64(config.reference_k)),
            linearity: config.linearity.map(f),
            range_lo_pa: lo,
            range_pa: F::lit(fx::to_f64(config.range_hi_pa)) - lo,
            margin: f(config.range_margin),
        })
    }

    /// Converts one converter code at the transducer temperature
    /// `temperature_k` with the barometric pressure `barometric_pa`. NaN or
    /// infinite inputs are errors.
    pub fn read(
        &self,
        code: i32,
        temperature_k: F,
        barometric_pa: F,
    ) -> Result<PressureReading<F, F>, Error> {
        let comp = self.compensation(temperature_k)?;
        self.read_compensated(code, &comp, barometric_pa)
    }

    /// The zero and span at a transducer temperature (see the fixed path's
    /// `Bridge::compensation`). NaN or infinite inputs are errors.
    pub fn compensation(&self, temperature_k: F) -> Result<Compensation<F>, Error> {
        let t = finite(temperature_k, Measured::TransducerTemperature)?;
        let (zero, span) = self.compensate(t);
        Ok(Compensation { zero, span })
    }

    /// Converts one code with a prepared compensation. NaN or infinite
    /// inputs are errors.
    pub fn read_compensated(
        &self,
        code: i32,
        comp: &Compensation<F>,
        barometric_pa: F,
    ) -> Result<PressureReading<F, F>, Error> {
        let b = finite(barometric_pa, Measured::BarometricPressure)?;
        let (s, mut status) = self.signal(code);
        let (u, st) = self.normalize(s, comp.zero, comp.span);
        status |= st;
        let q = self.linearize(u);
        let p = self.scale(q);
        status |= self.check_range(q);
        let mut r = gauge::float::reading(self.config.kind, p, b);
        r.status |= status;
        Ok(r)
    }

    /// The code (fractional) a transducer at `temperature_k` gives for the
    /// absolute pressure `pressure_pa` (the inverse direction; Newton's
    /// method on the linearity cubic). Errors for non-finite inputs and for
    /// pressures beyond ±150 % of the range.
    pub fn code(&self, pressure_pa: F, temperature_k: F, barometric_pa: F) -> Result<F, Error> {
        let p = finite(pressure_pa, Measured::Pressure)?;
        let t = finite(temperature_k, Measured::TransducerTemperature)?;
        let b = finite(barometric_pa, Measured::BarometricPressure)?;
        let value = match self.config.kind {
            crate::sensor::PressureKind::Absolute => p,
            crate::sensor::PressureKind::Gauge => p - b,
        };
        let target = (value - self.range_lo_pa) / self.range_pa;
        let lim = F::lit(U_LIMIT);
        if target < -lim || target > lim {
            return Err(Error::OutOfRange(Measured::BridgePressure.into()));
        }
        let [c0, c1, c2, c3] = self.linearity;
        let mut u = target;
        for _ in 0..50 {
            let q = c0 + u * (c1 + u * (c2 + u * c3));
            let dq = c1 + u * (F::lit(2.0) * c2 + F::lit(3.0) * c3 * u);
            if dq == F::ZERO {
                break;
            }
            let step = (q - target) / dq;
            u -= step;
            if step.abs() < F::lit(1e-15) {
                break;
            }
        }
        let (zero, span) = self.compensate(t);
        Ok((zero + u * span) / self.per_code)
    }

    /// `s = code/2^(bits−1)` (bipolar) or `code/2^bits`; a code at a rail saturates.
    /// The configuration.
    pub fn config(&self) -> &BridgeConfig {
        &self.config
    }

    /// The signal per converter code (2^-signal bits).
    pub fn per_code(&self) -> F {
        self.per_code
    }

    /// Zero and span at a transducer temperature (K), as
    /// [`Bridge::compensation`] computes them.
    pub fn zero_and_span(&self, temperature_k: F) -> (F, F) {
        self.compensate(temperature_k)
    }

    /// The reading of a normalised signal `u` (already limited to
    /// ±[`U_LIMIT`]): linearity, scale, range check, gauge and absolute
    /// pressure (the steps after `normalize`).
    pub fn from_normalized(&self, u: F, barometric_pa: F) -> PressureReading<F, F> {
        let q = self.linearize(u);
        let p = self.scale(q);
        let status = self.check_range(q);
        let mut r = gauge::float::reading(self.config.kind, p, barometric_pa);
        r.status |= status;
        r
    }

    fn signal(&self, code: i32) -> (F, Status) {
        let (lo, hi) = self.config.rails();
        let c = code.clamp(lo, hi);
        let status = if code <= lo || code >= hi {
            Status::SENSOR_SATURATED
        } else {
            Status::OK
        };
        (F::lit(c as f64) * self.per_code, status)
    }

    /// Zero and span at the transducer temperature.
    fn compensate(&self, t: F) -> (F, F) {
        let dt = (t - self.reference_k).clamp_to(F::lit(-255.0), F::lit(255.0));
        let [z0, z1, z2] = self.zero;
        let [k1, k2] = self.span_tc;
        let zero = z0 + dt * (z1 + dt * z2);
        let f = (F::ONE + dt * (k1 + dt * k2)).max(F::lit(1.0 / 16.0));
        (zero, self.span * f)
    }

    /// `u = (s − zero)/span`, limited to ±[`U_LIMIT`].
    fn normalize(&self, s: F, zero: F, span: F) -> (F, Status) {
        let u = (s - zero) / span;
        let lim = F::lit(U_LIMIT);
        if u > lim || u < -lim {
            (u.clamp_to(-lim, lim), Status::SENSOR_SATURATED)
        } else {
            (u, Status::OK)
        }
    }

    /// `q(u) = c₀ + c₁·u + c₂·u² + c₃·u³`.
    fn linearize(&self, u: F) -> F {
        let [c0, c1, c2, c3] = self.linearity;
        c0 + u * (c1 + u * (c2 + u * c3))
    }

    /// `p = p_lo + (p_hi − p_lo)·q`, Pa.
    fn scale(&self, q: F) -> F {
        self.range_lo_pa + self.range_pa * q
    }

    /// Under or over range beyond the margin.
    fn check_range(&self, q: F) -> Status {
        if q < -self.margin {
            Status::SENSOR_UNDER_RANGE
        } else if q > F::ONE + self.margin {
            Status::SENSOR_OVER_RANGE
        } else {
            Status::OK
        }
    }
}
