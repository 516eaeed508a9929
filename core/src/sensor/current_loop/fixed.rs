//! 4–20 mA loop, fixed point (the device path). Same steps as
//! [`super::float`]: `current` → `band` → `pressure` → persistence.
//!
//! Formats: current in mA at 2^-24 ([`fx::Milliamps`]), pressure in Pa at
//! 2^-4. 2 multiplies per code, no division.

use super::{Band, LoopConfig, LoopSample, LoopState, flags};
use crate::error::SensorSetting;
use crate::fx::{self, Coef};
use crate::sensor::{PressureKind, PressureReading, SCoef, gauge};
use crate::time::{Instant, Millis};
use crate::{Error, Status};

/// NE 43 boundaries in [`fx::Milliamps`] bits.
const FAIL_LO: u32 = fx::Milliamps::lit("3.6").to_bits();
const MEAS_LO: u32 = fx::Milliamps::lit("3.8").to_bits();
const MEAS_HI: u32 = fx::Milliamps::lit("20.5").to_bits();
const FAIL_HI: u32 = fx::Milliamps::lit("21").to_bits();
/// 4 mA in bits.
const I_4MA: i64 = 4 << 24;

/// The NE 43 band of a current.
pub fn band(current: fx::Milliamps) -> Band {
    let i = current.to_bits();
    if i <= FAIL_LO {
        Band::FailureLow
    } else if i < MEAS_LO {
        Band::BelowRange
    } else if i <= MEAS_HI {
        Band::Measuring
    } else if i < FAIL_HI {
        Band::AboveRange
    } else {
        Band::FailureHigh
    }
}

/// Fixed-point pressure reading.
pub type Reading = PressureReading<fx::Pressure, fx::GaugePressure>;

/// A prepared loop channel, fixed point.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Loop {
    kind: PressureKind,
    top: u32,
    /// mA per code.
    per_code: Coef,
    /// p at 4 mA, Pa at 2^-4.
    lo: i64,
    /// Pa per mA.
    slope: SCoef,
    persistence: Millis,
}

impl Loop {
    /// Prepares a channel (integer arithmetic only).
    pub fn new(config: &LoopConfig) -> Result<Loop, Error> {
        config.validate()?;
        let inv_shunt = Coef::from_raw(config.shunt_ohms.to_bits(), 32)
            .recip()
            .ok_or(Error::OutOfRange(SensorSetting::ShuntResistance.into()))?;
        let per_code = Coef::from_raw(config.adc_reference_v.to_bits() as u64, 48)
            .mul(inv_shunt)
            .mul(const { Coef::from_f64(1000.0) })
            .mul(Coef::from_parts(1, config.adc_bits as i32));
        let lo = config.range_lo_pa.to_bits() as i64;
        let span = config.range_hi_pa.to_bits() as i64 - lo;
        Ok(Loop {
            kind: config.kind,
            top: (1 << config.adc_bits) - 1,
            per_code,
            lo,
            slope: SCoef::from_i64(span, 4).mul(const { Coef::from_f64(1.0 / 16.0) }),
            persistence: config.persistence,
        })
    }

    /// The loop current of a code; a code at the converter's top (or
    /// beyond) saturates.
    pub fn current(&self, code: u32) -> (fx::Milliamps, Status) {
        let (c, status) = if code >= self.top {
            (self.top, Status::SENSOR_SATURATED)
        } else {
            (code, Status::OK)
        };
        let (i, _) = self.per_code.scale(c, 0, 24);
        let (i, _) = fx::sat_u32(i);
        (fx::Milliamps::from_bits(i), status)
    }

    /// Converts a current without persistence (a failure current is
    /// failure at once; the value is then the nearest measuring-band value).
    pub fn convert_current(
        &self,
        current: fx::Milliamps,
        barometric: fx::Pressure,
    ) -> (Band, Reading) {
        let b = band(current);
        let used = current.to_bits().clamp(MEAS_LO, MEAS_HI);
        let p = self.pressure(used);
        let mut r = gauge::fixed::reading(self.kind, p, barometric);
        r.status = flags(b, r.status);
        (b, r)
    }

    /// Reads one code at `now`, applying the NE 43 persistence with the
    /// caller's state.
    pub fn read(
        &self,
        code: u32,
        barometric: fx::Pressure,
        now: Instant,
        state: &mut LoopState<Reading>,
    ) -> LoopSample<fx::Milliamps, fx::Pressure, fx::GaugePressure> {
        let (i, sat) = self.current(code);
        let (b, mut r) = self.convert_current(i, barometric);
        r.status |= sat;
        LoopSample {
            milliamps: i,
            band: b,
            pressure: state.apply(b, r, now, self.persistence),
        }
    }

    /// `p = p_lo + (p_hi − p_lo)·(I − 4 mA)/16 mA`, Pa at 2^-4.
    fn pressure(&self, current_bits: u32) -> i64 {
        self.lo + self.slope.apply(current_bits as i64 - I_4MA, 24, 4).0
    }
}
