//! 4–20 mA loop, float (generic over [`Real`]; `f64` is the reference).
//! Same steps as [`super::fixed`].

use super::{
    Band, FAILURE_HIGH_MA, FAILURE_LOW_MA, LoopConfig, LoopSample, LoopState, MEASURING_MAX_MA,
    MEASURING_MIN_MA, RANGE_HI_MA, RANGE_LO_MA, flags,
};
use crate::error::Measured;
use crate::sensor::{PressureKind, PressureReading, finite, gauge};
use crate::time::{Instant, Millis};
use crate::{Error, Real, Status, fx};

/// The NE 43 band of a current, mA.
pub fn band<F: Real>(milliamps: F) -> Band {
    if milliamps <= F::lit(FAILURE_LOW_MA) {
        Band::FailureLow
    } else if milliamps < F::lit(MEASURING_MIN_MA) {
        Band::BelowRange
    } else if milliamps <= F::lit(MEASURING_MAX_MA) {
        Band::Measuring
    } else if milliamps < F::lit(FAILURE_HIGH_MA) {
        Band::AboveRange
    } else {
        Band::FailureHigh
    }
}

/// Float pressure reading.
pub type Reading<F> = PressureReading<F, F>;

/// A prepared loop channel, float.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Loop<F> {
    kind: PressureKind,
    top: u32,
    per_code: F,
    lo: F,
    slope: F,
    persistence: Millis,
}

impl<F: Real> Loop<F> {
    /// Prepares a channel.
    pub fn new(config: &LoopConfig) -> Result<Loop<F>, Error> {
        config.validate()?;
        let lo = F::lit(fx::to_f64(config.range_lo_pa));
        let hi = F::lit(fx::to_f64(config.range_hi_pa));
        Ok(Loop {
            kind: config.kind,
            top: (1 << config.adc_bits) - 1,
            per_code: F::lit(fx::to_f64(config.adc_reference_v))
                / F::lit(fx::to_f64(config.shunt_ohms))
                * F::lit(1000.0)
                / F::lit((1u64 << config.adc_bits) as f64),
            lo,
            slope: (hi - lo) / F::lit(RANGE_HI_MA - RANGE_LO_MA),
            persistence: config.persistence,
        })
    }

    /// The highest code the converter gives (codes at or above saturate).
    pub fn top_code(&self) -> u32 {
        self.top
    }

    /// How long a failure current must last before it is declared.
    pub fn persistence(&self) -> Millis {
        self.persistence
    }

    /// The loop current of a code, mA; a code at the converter's top (or
    /// beyond) saturates.
    pub fn current(&self, code: u32) -> (F, Status) {
        let (c, status) = if code >= self.top {
            (self.top, Status::SENSOR_SATURATED)
        } else {
            (code, Status::OK)
        };
        (F::lit(c as f64) * self.per_code, status)
    }

    /// Converts a current, mA, without persistence (a failure current is
    /// failure at once; the value is then the nearest measuring-band value).
    /// NaN or infinite inputs are errors.
    pub fn convert_current(
        &self,
        milliamps: F,
        barometric_pa: F,
    ) -> Result<(Band, Reading<F>), Error> {
        let i = finite(milliamps, Measured::LoopCurrent)?;
        let b = finite(barometric_pa, Measured::BarometricPressure)?;
        if i < F::ZERO {
            return Err(Error::OutOfRange(Measured::NegativeLoopCurrent.into()));
        }
        let band = band(i);
        let used = i.clamp_to(F::lit(MEASURING_MIN_MA), F::lit(MEASURING_MAX_MA));
        let mut r = gauge::float::reading(self.kind, self.pressure(used), b);
        r.status = flags(band, r.status);
        Ok((band, r))
    }

    /// Reads one code at `now`, applying the NE 43 persistence with the
    /// caller's state. NaN or infinite barometric pressure is an error.
    pub fn read(
        &self,
        code: u32,
        barometric_pa: F,
        now: Instant,
        state: &mut LoopState<Reading<F>>,
    ) -> Result<LoopSample<F, F, F>, Error> {
        let (i, sat) = self.current(code);
        let (b, mut r) = self.convert_current(i, barometric_pa)?;
        r.status |= sat;
        Ok(LoopSample {
            milliamps: i,
            band: b,
            pressure: state.apply(b, r, now, self.persistence),
        })
    }

    /// The current for an absolute pressure (the inverse direction), mA.
    /// NaN or infinite inputs are errors.
    pub fn milliamps(&self, pressure_pa: F, barometric_pa: F) -> Result<F, Error> {
        let p = finite(pressure_pa, Measured::Pressure)?;
        let b = finite(barometric_pa, Measured::BarometricPressure)?;
        let v = match self.kind {
            PressureKind::Absolute => p,
            PressureKind::Gauge => p - b,
        };
        Ok(F::lit(RANGE_LO_MA) + (v - self.lo) / self.slope)
    }

    /// `p = p_lo + (p_hi − p_lo)·(I − 4 mA)/16 mA`, Pa.
    fn pressure(&self, milliamps: F) -> F {
        self.lo + self.slope * (milliamps - F::lit(RANGE_LO_MA))
    }
}
