//! The gauge application, without hardware: what the reference firmware
//! runs, and what the host's emulated device and the simulator run too.
//!
//! One sample's way: raw converter codes → the sensor channels of a
//! prepared configuration (curves and status maps, see
//! [`crate::sensor::channel`]) → the tracker (content from the prepared
//! gas model, rate, time to empty, leak, settling, uncertainty, alarms) →
//! telemetry and alarm frames ([`telemetry`], [`Gauge`]). Between samples
//! the gauge answers the host ([`service`]: identity, configuration read
//! back, signed commands: a new prepared configuration, zero calibration,
//! clearing alarms, restarting).
//!
//! Hardware stays outside: the firmware owns the converters, the UART, the
//! flash driver (any `NorFlash`), the clock, the random source and the
//! watchdog, and drives the [`Gauge`] with bytes, samples and times. The
//! host's emulated device drives the same [`Gauge`] over a simulated flash,
//! and the simulator the same [`fixed::Pipeline`]: every path runs the code
//! that ships.
//!
//! The pipeline exists twice with the same steps and names:
//! [`fixed::Pipeline`] (the device: a prepared configuration) and
//! [`float::Pipeline`] (the physical configuration evaluated as written,
//! generic over [`Real`](crate::Real); `f64` is the reference the tests
//! compare the device with, `f32` and `f64` are what the firmware budget
//! measures the same chain in).
//!
//! # Steps per sample
//!
//! 1. `temperature`: the temperature channel converts its code (front-end,
//!    correction, zero offset).
//! 2. `compensation`: a bridge transducer is compensated at the sample's
//!    temperature (the transducer sits on the vessel), or at its reference
//!    temperature when that reading is not a value.
//! 3. `pressure`: the pressure channel converts its code (front-end with
//!    the site's barometric pressure, NE 43 persistence for a loop,
//!    correction, zero offset).
//! 4. `plausibility`: where the configuration has them, checks of both
//!    readings (range, rate of change, stuck value) add their flags.
//! 5. `track`: the tracker takes pressure, temperature, both channels'
//!    flags and the sample's time.
//!
//! # Zero calibration
//!
//! A zero calibration takes the present reading (the last valid one) as
//! the reference value of its channel and keeps the difference as the
//! channel's zero offset, added to every later reading: the barometric
//! pressure for the pressure channel (the transducer vented to the
//! atmosphere), 0 °C for the temperature channel (an ice bath). It is
//! refused when the correction it would take exceeds
//! [`ZERO_PRESSURE_LIMIT`] or [`ZERO_TEMPERATURE_LIMIT`] (the sensor is not
//! at its zero: a pressurised transducer, a sensor out of the bath), and
//! when there is no valid reading. Offsets are kept in the store with the
//! configuration reference and survive new configurations.

pub mod fixed;
pub mod float;
mod gauge;
pub mod service;
pub mod telemetry;

pub use gauge::{Gauge, GaugeIo, Mapper};

use crate::fx;
use crate::link::{Refusal, SensorChannel};
use crate::store::{ZERO_PRESSURE_MAX, ZERO_TEMPERATURE_MAX};

/// The version of this application (its package version), reported by
/// devices that give none of their own.
pub const VERSION: [u8; 3] = {
    const fn num(s: &str) -> u8 {
        let mut b = s.as_bytes();
        let mut v = 0u32;
        while let [d, rest @ ..] = b {
            v = v * 10 + (*d - b'0') as u32;
            b = rest;
        }
        v as u8
    }
    [
        num(env!("CARGO_PKG_VERSION_MAJOR")),
        num(env!("CARGO_PKG_VERSION_MINOR")),
        num(env!("CARGO_PKG_VERSION_PATCH")),
    ]
};

/// The largest zero correction of the pressure channel accepted,
/// `fx::Pressure` bits: 50 kPa (0.5 bar; common practice: a vented
/// transducer reads its zero within a fraction of a bar, while a cylinder
/// holding gas reads bars above it).
pub const ZERO_PRESSURE_LIMIT: u32 = 800_000;
/// The largest zero correction of the temperature channel accepted,
/// `fx::Temperature` bits: 2 K (common practice: a sensor in an ice bath
/// reads 0 °C within its tolerance).
pub const ZERO_TEMPERATURE_LIMIT: u32 = 131_072;
/// 0 °C, `fx::Temperature` bits (273.15 × 65 536, rounded).
const ICE_POINT: i64 = 17_901_158;

const _: () = assert!(ZERO_PRESSURE_LIMIT <= ZERO_PRESSURE_MAX as u32);
const _: () = assert!(ZERO_TEMPERATURE_LIMIT <= ZERO_TEMPERATURE_MAX as u32);

/// The zero offsets of the two channels, format bits: added to every
/// corrected reading.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Zero {
    /// Pressure, `fx::Pressure` bits.
    pub pressure: i32,
    /// Temperature, `fx::Temperature` bits.
    pub temperature: i32,
}

impl Zero {
    /// Both offsets in SI units (Pa, K).
    pub fn to_f64(self) -> (f64, f64) {
        (
            self.pressure as f64 / 16.0,
            self.temperature as f64 / 65_536.0,
        )
    }

    /// The offsets after a zero calibration of `channel` at the present
    /// corrected readings (`present_pa`, `present_k`, format bits, which
    /// include the offsets in force) and the site's barometric pressure.
    /// Refused (with the correction it would take and the limit) when the
    /// correction exceeds the channel's limit.
    pub fn calibrate(
        self,
        channel: SensorChannel,
        present_pa: fx::Pressure,
        present_k: fx::Temperature,
        barometric: fx::Pressure,
    ) -> Result<Zero, Refusal> {
        let (delta, limit) = match channel {
            SensorChannel::Pressure => (
                i64::from(barometric.to_bits()) - i64::from(present_pa.to_bits()),
                ZERO_PRESSURE_LIMIT,
            ),
            SensorChannel::Temperature => (
                ICE_POINT - i64::from(present_k.to_bits()),
                ZERO_TEMPERATURE_LIMIT,
            ),
        };
        if delta.unsigned_abs() > u64::from(limit) {
            return Err(Refusal::NotAtZero {
                channel,
                offset: delta,
                limit,
            });
        }
        let mut z = self;
        let (slot, max) = match channel {
            SensorChannel::Pressure => (&mut z.pressure, ZERO_PRESSURE_MAX),
            SensorChannel::Temperature => (&mut z.temperature, ZERO_TEMPERATURE_MAX),
        };
        let new = (i64::from(*slot) + delta).clamp(-i64::from(max), i64::from(max));
        *slot = new as i32;
        Ok(z)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zero_is_taken_near_the_reference_and_refused_far_from_it() {
        let baro = fx::Pressure::from_num(100_000);
        let t = fx::Temperature::from_num(273.4);
        // A vented transducer reading 0.2 bar high: offset −0.2 bar.
        let z = Zero::default()
            .calibrate(
                SensorChannel::Pressure,
                fx::Pressure::from_num(120_000),
                t,
                baro,
            )
            .unwrap();
        assert_eq!(z.pressure, -20_000 * 16);
        // A pressurised one (a cylinder at 20 bar): refused, nothing changes.
        let r = Zero::default().calibrate(
            SensorChannel::Pressure,
            fx::Pressure::from_num(2_000_000),
            t,
            baro,
        );
        assert!(matches!(r, Err(Refusal::NotAtZero { offset, .. }) if offset == -1_900_000 * 16));
        // An ice bath read 0.25 K high: offset −0.25 K.
        let z = Zero::default()
            .calibrate(SensorChannel::Temperature, baro, t, baro)
            .unwrap();
        assert!((z.temperature as f64 / 65_536.0 + 0.25).abs() < 1e-4);
        // Room temperature is no ice bath.
        assert!(
            Zero::default()
                .calibrate(
                    SensorChannel::Temperature,
                    baro,
                    fx::Temperature::from_num(293.0),
                    baro
                )
                .is_err()
        );
    }
}
