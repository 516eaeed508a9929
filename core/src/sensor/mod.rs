//! Sensor front-ends: from raw converter codes to absolute pressure and
//! temperature, with typed faults, plausibility checks and calibration.
//!
//! Everything upstream of the content estimate lives here. Each front-end has
//! a configuration type (one definition, in fixed-point formats, the form a
//! device stores — see [`calibration::CalibrationRecord`]) and two converters
//! with the same steps under the same names: `fixed` (the device path, 32-bit
//! integer arithmetic with constants prepared at configuration time) and
//! `float` (generic over [`Real`], `f64` is the reference).
//!
//! | front-end | module | outputs |
//! |---|---|---|
//! | ratiometric resistive input (divider or series reference resistor) | [`resistive`] | lead-corrected resistance ratio, self-heating |
//! | platinum RTD, IEC 60751 Callendar–Van Dusen | [`rtd`] | temperature (and the inverse, resistance) |
//! | NTC thermistor, beta model and Steinhart–Hart | [`ntc`] | temperature (and the inverse, float) |
//! | ratiometric bridge pressure transducer | [`bridge`] | absolute and gauge pressure |
//! | 4–20 mA transmitter through a shunt, NAMUR NE 43 | [`current_loop`] | current, absolute and gauge pressure |
//! | gauge ↔ absolute, barometric pressure | [`gauge`] | absolute and gauge pressure |
//! | range, rate-of-change and stuck-value checks | [`plausibility`] | flags |
//! | two-point and polynomial correction, calibration record | [`calibration`] | corrected value, stored record |
//!
//! # Faults
//!
//! Conversions never fail on a sample: every condition is a [`Fault`] and a
//! flag in the sensor range of the [`Status`] word (bits 8–15), so that the
//! tracking and alarm stages see it as a sensor fault
//! ([`Status::SENSOR_RANGE`]). The value that comes with a fault is defined
//! (held at a limit or at the last valid value) but is not a measurement.
//! Float inputs that are NaN or infinite are errors, never numbers.

pub mod bridge;
pub mod calibration;
pub mod channel;
pub mod current_loop;
pub mod gauge;
pub mod ntc;
pub mod plausibility;
pub mod resistive;
pub mod rtd;

use crate::error::Measured;
use crate::fx::{self, Coef};
use crate::{Error, Real, Status};

/// A sensor fault: each maps to one flag of the sensor range of [`Status`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Fault {
    /// Open sensor or wiring ([`Status::SENSOR_OPEN_CIRCUIT`]).
    OpenCircuit,
    /// Shorted sensor or wiring ([`Status::SENSOR_SHORT_CIRCUIT`]).
    ShortCircuit,
    /// Converter at a rail or reading beyond what can be converted
    /// ([`Status::SENSOR_SATURATED`]).
    Saturated,
    /// Below the measuring range ([`Status::SENSOR_UNDER_RANGE`]).
    UnderRange,
    /// Above the measuring range ([`Status::SENSOR_OVER_RANGE`]).
    OverRange,
    /// NAMUR NE 43 failure current persisted ([`Status::SENSOR_LOOP_FAILURE`]).
    LoopFailure,
    /// Implausible rate of change ([`Status::SENSOR_RATE_IMPLAUSIBLE`]).
    RateImplausible,
    /// Stuck value ([`Status::SENSOR_STUCK`]).
    Stuck,
}

impl Fault {
    /// Every fault, in bit order.
    pub const ALL: [Fault; 8] = [
        Fault::OpenCircuit,
        Fault::ShortCircuit,
        Fault::Saturated,
        Fault::UnderRange,
        Fault::OverRange,
        Fault::LoopFailure,
        Fault::RateImplausible,
        Fault::Stuck,
    ];

    /// The status flag of this fault.
    pub const fn status(self) -> Status {
        match self {
            Fault::OpenCircuit => Status::SENSOR_OPEN_CIRCUIT,
            Fault::ShortCircuit => Status::SENSOR_SHORT_CIRCUIT,
            Fault::Saturated => Status::SENSOR_SATURATED,
            Fault::UnderRange => Status::SENSOR_UNDER_RANGE,
            Fault::OverRange => Status::SENSOR_OVER_RANGE,
            Fault::LoopFailure => Status::SENSOR_LOOP_FAILURE,
            Fault::RateImplausible => Status::SENSOR_RATE_IMPLAUSIBLE,
            Fault::Stuck => Status::SENSOR_STUCK,
        }
    }

    /// The faults whose flags are set in `status`, in bit order.
    pub fn in_status(status: Status) -> impl Iterator<Item = Fault> {
        Fault::ALL
            .into_iter()
            .filter(move |f| status.contains(f.status()))
    }

    /// The most severe fault in `status` (the first in this order: open,
    /// short, loop failure, saturated, stuck, rate, over range, under range).
    pub fn worst(status: Status) -> Option<Fault> {
        [
            Fault::OpenCircuit,
            Fault::ShortCircuit,
            Fault::LoopFailure,
            Fault::Saturated,
            Fault::Stuck,
            Fault::RateImplausible,
            Fault::OverRange,
            Fault::UnderRange,
        ]
        .into_iter()
        .find(|f| status.contains(f.status()))
    }
}

/// Flags after which a sensor value is not a measurement (it is held at a
/// limit or at the last valid value). Under- and over-range values are still
/// measurements, clamped or beyond the rated range.
pub const VALUE_INVALID: Status = Status::from_bits(
    Status::SENSOR_OPEN_CIRCUIT.bits()
        | Status::SENSOR_SHORT_CIRCUIT.bits()
        | Status::SENSOR_SATURATED.bits()
        | Status::SENSOR_LOOP_FAILURE.bits(),
);

/// A temperature reading: the value and what the reader must know about it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TemperatureReading<T> {
    /// Temperature, K ([`fx::Temperature`] in the fixed path).
    pub temperature_k: T,
    /// Sensor flags (bits 8–15).
    pub status: Status,
}

/// A pressure reading, absolute and gauge.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PressureReading<P, G> {
    /// Absolute pressure, Pa ([`fx::Pressure`] in the fixed path), never
    /// negative: a negative value from noise is clamped to zero and flagged
    /// [`Status::SENSOR_UNDER_RANGE`].
    pub pressure_pa: P,
    /// Gauge pressure (absolute minus barometric), Pa ([`fx::GaugePressure`]
    /// in the fixed path).
    pub gauge_pa: G,
    /// Sensor flags (bits 8–15).
    pub status: Status,
}

/// What a pressure transducer measures.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PressureKind {
    /// Absolute pressure (against a vacuum reference).
    Absolute,
    /// Gauge pressure (against the ambient, vented or sealed gauge).
    Gauge,
}

/// A signed prepared constant: a [`Coef`] and a sign. Applied per sample with
/// one 32×32→64 multiply and a shift.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(crate) struct SCoef {
    coef: Coef,
    neg: bool,
}

impl SCoef {
    /// `raw × 2^-frac` (signed).
    pub(crate) fn from_i64(raw: i64, frac: u32) -> SCoef {
        SCoef {
            coef: Coef::from_raw(raw.unsigned_abs(), frac),
            neg: raw < 0,
        }
    }

    /// A configuration coefficient.
    pub(crate) fn from_coefficient(c: fx::Coefficient) -> SCoef {
        SCoef::from_i64(c.to_bits(), 48)
    }

    /// An unsigned constant.
    pub(crate) fn from_coef(coef: Coef) -> SCoef {
        SCoef { coef, neg: false }
    }

    /// This constant times a positive one.
    pub(crate) fn mul(self, c: Coef) -> SCoef {
        SCoef {
            coef: self.coef.mul(c),
            neg: self.neg,
        }
    }

    /// `x·2^-x_frac` times the constant, as a raw value with `out_frac`
    /// fraction bits, rounded. `|x|` is limited to 32 bits and the result to
    /// ±2^62; the flag is true when either limit was hit.
    pub(crate) fn apply(self, x: i64, x_frac: u32, out_frac: u32) -> (i64, bool) {
        let mag = x.unsigned_abs();
        let (mag32, clipped) = fx::sat_u32(mag);
        let (r, over) = self.coef.scale(mag32, x_frac, out_frac);
        let limit = 1u64 << 62;
        let (r, big) = if r > limit { (limit, true) } else { (r, false) };
        let v = r as i64;
        let v = if self.neg != (x < 0) { -v } else { v };
        (v, clipped || over || big)
    }
}

/// A float input, checked finite.
pub(crate) fn finite<F: Real>(v: F, what: Measured) -> Result<F, Error> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(Error::NotFinite(what.into()))
    }
}

/// Limits a raw `i64` to the `i32` range of a signed format; the flag is true
/// when clamped.
pub(crate) fn clamp_i32(v: i64) -> (i32, bool) {
    if v < i32::MIN as i64 {
        (i32::MIN, true)
    } else if v > i32::MAX as i64 {
        (i32::MAX, true)
    } else {
        (v as i32, false)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn faults_cover_the_sensor_range_once() {
        let mut all = Status::OK;
        for f in Fault::ALL {
            assert!(Status::SENSOR_RANGE.contains(f.status()));
            assert!(!all.intersects(f.status()));
            all |= f.status();
            assert_eq!(Fault::in_status(f.status()).collect::<Vec<_>>(), [f]);
            assert_eq!(Fault::worst(f.status()), Some(f));
        }
        assert_eq!(all, Status::SENSOR_RANGE);
        assert_eq!(Fault::worst(Status::OK), None);
        assert_eq!(
            Fault::worst(Status::SENSOR_UNDER_RANGE | Status::SENSOR_LOOP_FAILURE),
            Some(Fault::LoopFailure)
        );
    }

    #[test]
    fn signed_coefficients_apply_with_sign() {
        let c = SCoef::from_i64(-3 << 20, 20);
        assert_eq!(c.apply(5, 0, 0), (-15, false));
        assert_eq!(c.apply(-5, 0, 0), (15, false));
        assert_eq!(c.apply(0, 0, 0), (0, false));
        let (_, clipped) = c.apply(1 << 40, 0, 0);
        assert!(clipped);
    }
}
