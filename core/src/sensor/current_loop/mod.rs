//! 4–20 mA pressure transmitters read through a shunt resistor, with the
//! signal levels of NAMUR NE 43 ("Standardisation of the signal level for the
//! failure information of digital transmitters").
//!
//! The converter measures the shunt voltage: `I = code/2^bits · V_ref/R_shunt`.
//! The current falls in one of five [`Band`]s:
//!
//! | current | band | reading |
//! |---|---|---|
//! | ≤ 3.6 mA | [`Band::FailureLow`] | failure signal: [`Status::SENSOR_LOOP_FAILURE`] once it has lasted the persistence time; before that the last valid value, flagged under range |
//! | 3.6 … 3.8 mA | [`Band::BelowRange`] | value at 3.8 mA, flagged under range |
//! | 3.8 … 20.5 mA | [`Band::Measuring`] | `p = p_lo + (p_hi − p_lo)·(I − 4 mA)/16 mA` |
//! | 20.5 … 21.0 mA | [`Band::AboveRange`] | value at 20.5 mA, flagged over range |
//! | ≥ 21.0 mA | [`Band::FailureHigh`] | as the low failure band, flagged over range before the persistence time |
//!
//! The boundaries belong to the bands as NE 43 writes them: 3.6 mA and
//! 21.0 mA are failure, 3.8 mA and 20.5 mA are measuring. In the fixed path the
//! boundaries are compared on [`fx::Milliamps`] bits (the boundary values
//! rounded to 6e-8 mA).
//!
//! The persistence time lives in the caller's [`LoopState`] with the time the
//! caller passes in; a single conversion without state
//! (`convert_current`) treats any failure current as failure at once.
//!
//! Cost per code, fixed point: 2 multiplies, no division.

pub mod fixed;
pub mod float;

use crate::error::SensorSetting;
use crate::sensor::{PressureKind, PressureReading};
use crate::time::{Instant, Millis};
use crate::{Error, Status, fx};

/// At or below this current the transmitter signals failure, mA.
pub const FAILURE_LOW_MA: f64 = 3.6;
/// Lowest current of the measuring band, mA.
pub const MEASURING_MIN_MA: f64 = 3.8;
/// Highest current of the measuring band, mA.
pub const MEASURING_MAX_MA: f64 = 20.5;
/// At or above this current the transmitter signals failure, mA.
pub const FAILURE_HIGH_MA: f64 = 21.0;
/// Current at the low end of the range, mA.
pub const RANGE_LO_MA: f64 = 4.0;
/// Current at full scale, mA.
pub const RANGE_HI_MA: f64 = 20.0;

/// The NE 43 band of a loop current.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Band {
    /// ≤ 3.6 mA: failure signal (or broken loop).
    FailureLow,
    /// Between 3.6 and 3.8 mA: below the measuring range.
    BelowRange,
    /// 3.8 … 20.5 mA: a measurement.
    Measuring,
    /// Between 20.5 and 21.0 mA: above the measuring range.
    AboveRange,
    /// ≥ 21.0 mA: failure signal (or shorted loop).
    FailureHigh,
}

impl Band {
    /// The flag a sample of this band carries before any persistence.
    pub const fn status(self) -> Status {
        match self {
            Band::FailureLow | Band::FailureHigh => Status::SENSOR_LOOP_FAILURE,
            Band::BelowRange => Status::SENSOR_UNDER_RANGE,
            Band::AboveRange => Status::SENSOR_OVER_RANGE,
            Band::Measuring => Status::OK,
        }
    }

    /// True for the failure bands.
    pub const fn is_failure(self) -> bool {
        matches!(self, Band::FailureLow | Band::FailureHigh)
    }

    /// Stable snake_case name.
    pub const fn name(self) -> &'static str {
        match self {
            Band::FailureLow => "failure_low",
            Band::BelowRange => "below_range",
            Band::Measuring => "measuring",
            Band::AboveRange => "above_range",
            Band::FailureHigh => "failure_high",
        }
    }
}

/// The flags of a converted loop sample: a failure band's value is no
/// measurement, so range flags from converting it are dropped.
pub(crate) fn flags(band: Band, converted: Status) -> Status {
    if band.is_failure() {
        converted.without(Status::SENSOR_UNDER_RANGE | Status::SENSOR_OVER_RANGE) | band.status()
    } else {
        converted | band.status()
    }
}

/// A 4–20 mA pressure channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopConfig {
    /// Converter resolution, bits (8 … 24).
    pub adc_bits: u8,
    /// Converter full-scale voltage, V.
    pub adc_reference_v: fx::Coefficient,
    /// Shunt resistor, Ω.
    pub shunt_ohms: fx::Resistance,
    /// Pressure at 4 mA, Pa, of `kind`.
    pub range_lo_pa: fx::GaugePressure,
    /// Pressure at 20 mA, Pa, of `kind`.
    pub range_hi_pa: fx::GaugePressure,
    /// What the transmitter measures.
    pub kind: PressureKind,
    /// How long a failure current must last before it is declared.
    pub persistence: Millis,
}

impl LoopConfig {
    /// A channel from `f64` values (host helper).
    pub fn new(
        adc_bits: u8,
        adc_reference_v: f64,
        shunt_ohms: f64,
        range_lo_pa: f64,
        range_hi_pa: f64,
        kind: PressureKind,
        persistence: Millis,
    ) -> Result<LoopConfig, Error> {
        let c = LoopConfig {
            adc_bits,
            adc_reference_v: fx::from_f64(adc_reference_v, SensorSetting::ConverterReference)?,
            shunt_ohms: fx::from_f64(shunt_ohms, SensorSetting::ShuntResistance)?,
            range_lo_pa: fx::from_f64(range_lo_pa, SensorSetting::RangeLowEnd)?,
            range_hi_pa: fx::from_f64(range_hi_pa, SensorSetting::RangeHighEnd)?,
            kind,
            persistence,
        };
        c.validate()?;
        Ok(c)
    }

    /// Checks every field. The converter must see currents beyond 21.0 mA
    /// (else the high failure band is invisible) and at most 200 mA.
    pub fn validate(&self) -> Result<(), Error> {
        if !(8..=24).contains(&self.adc_bits) {
            return Err(Error::OutOfRange(SensorSetting::ConverterBits.into()));
        }
        if self.adc_reference_v <= 0 || self.adc_reference_v > 100 {
            return Err(Error::OutOfRange(SensorSetting::ConverterReference.into()));
        }
        if self.shunt_ohms.to_fixed() < 1 || self.shunt_ohms.to_fixed() > 100_000 {
            return Err(Error::OutOfRange(SensorSetting::ShuntResistance.into()));
        }
        // I_max = V_ref/R_shunt in mA, compared in integers (no float on a
        // device): V bits/2^48 · 1000 against I · R bits/2^32.
        let v1000 = i128::from(self.adc_reference_v.to_bits()) * 1000;
        let r = i128::from(self.shunt_ohms.to_bits()) << 16;
        if v1000 <= FAILURE_HIGH_MA as i128 * r || v1000 > 200 * r {
            return Err(Error::OutOfRange(SensorSetting::ConverterRange.into()));
        }
        if self.range_hi_pa == self.range_lo_pa {
            return Err(Error::OutOfRange(SensorSetting::RangeHighEnd.into()));
        }
        Ok(())
    }
}

/// One loop sample: the current, its band and the pressure.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopSample<I, P, G> {
    /// Loop current, mA ([`fx::Milliamps`] in the fixed path).
    pub milliamps: I,
    /// Its NE 43 band.
    pub band: Band,
    /// The pressure reading (with the flags of the band and persistence).
    pub pressure: PressureReading<P, G>,
}

/// The caller-owned state of a loop channel: when the failure current began
/// and the last valid reading (held while a failure persists).
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopState<R> {
    failing_since: Option<Instant>,
    held: Option<R>,
}

/// Readings whose status can be adjusted by the persistence logic.
pub trait Flagged: Copy {
    /// The status of the reading.
    fn status_mut(&mut self) -> &mut Status;
}

impl<P: Copy, G: Copy> Flagged for PressureReading<P, G> {
    fn status_mut(&mut self) -> &mut Status {
        &mut self.status
    }
}

impl<R: Flagged> LoopState<R> {
    /// A fresh state (no failure, nothing held).
    pub const fn new() -> LoopState<R> {
        LoopState {
            failing_since: None,
            held: None,
        }
    }

    /// True while a failure current is present (declared or not yet).
    pub fn failing(&self) -> bool {
        self.failing_since.is_some()
    }

    /// Applies the NE 43 persistence to one converted reading of `band`.
    pub fn apply(&mut self, band: Band, mut reading: R, now: Instant, persistence: Millis) -> R {
        if !band.is_failure() {
            self.failing_since = None;
            let invalid = crate::sensor::VALUE_INVALID;
            if !reading.status_mut().intersects(invalid) {
                self.held = Some(reading);
            }
            return reading;
        }
        let since = *self.failing_since.get_or_insert(now);
        let declared = now.since(since) >= persistence;
        let own = reading.status_mut().without(Status::SENSOR_LOOP_FAILURE);
        let mut out = self.held.unwrap_or(reading);
        let flag = if declared {
            Status::SENSOR_LOOP_FAILURE
        } else if band == Band::FailureLow {
            Status::SENSOR_UNDER_RANGE
        } else {
            Status::SENSOR_OVER_RANGE
        };
        // The held value keeps its non-sensor flags; the sensor flags are
        // this sample's.
        let held = out.status_mut().without(Status::SENSOR_RANGE);
        *out.status_mut() = held | own | flag;
        out
    }
}
