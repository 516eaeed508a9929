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
//!    flags and the sample's time. Without feature `tracking` the
//!    pipeline's tracker is `untracked`'s instead: the content of the
//!    sample's own reading, its uncertainty and the alarms that need no
//!    history, in the tracker's output types with rate, time to empty,
//!    leak and settling left `None`.
//!
//! # Zero calibration
//!
//! A zero calibration takes the present reading (the last valid one) as
//! the reference value of its channel and keeps the difference as the
//! channel's zero offset, added to every later reading: the barometric
//! pressure for the pressure channel (the transducer vented to the
//! atmosphere), 0 °C for the temperature channel (an ice bath). It is
//! refused when the present reading, as corrected now or as the front-end
//! gives it, is farther from the reference than the channel's bound (the
//! sensor is not at its zero: a pressurised transducer, a sensor out of the
//! bath), and when there is no valid reading. The bounds: 2 % of the
//! pressure transducer's span, at least 10 kPa ([`zero_pressure_limit`],
//! prepared with the configuration), and 2 K ([`ZERO_TEMPERATURE_LIMIT`]).
//! Zeroing a transducer under pressure would make a full vessel read nearly
//! empty and blind the over-pressure alarm. Offsets are kept in the store with the
//! configuration reference and survive new configurations.

pub mod fixed;
pub mod float;
mod gauge;
pub mod service;
pub mod telemetry;
#[cfg(not(feature = "tracking"))]
pub mod untracked;

pub use gauge::{Gauge, GaugeIo, Mapper};

use crate::fx;
use crate::link::{Refusal, SensorChannel};
pub use crate::prepared::{ZERO_PRESSURE_MIN, ZERO_PRESSURE_SPAN_DIVISOR, zero_pressure_limit};
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

/// The largest zero correction of the temperature channel accepted,
/// `fx::Temperature` bits: 2 K around the ice point. IEC 60751 class B
/// allows ±0.3 K at 0 °C for a platinum resistance thermometer (from
/// memory) and interchangeable NTC thermistors are sold to about ±0.2…1 K
/// (common practice); 2 K leaves room for both and for a poorly stirred ice
/// bath, while a sensor at room temperature (15 K or more away) is refused.
pub const ZERO_TEMPERATURE_LIMIT: u32 = 131_072;
/// 0 °C, `fx::Temperature` bits (273.15 × 65 536, rounded).
const ICE_POINT: i64 = 17_901_158;

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
    /// include the offsets in force), the site's barometric pressure and
    /// the pressure channel's bound ([`zero_pressure_limit`]).
    ///
    /// Refused (with the correction it would take and the bound) unless the
    /// present reading is within the bound of the reference both as
    /// corrected now and as the front-end gives it (without the offset in
    /// force): the new offset replaces the old one, so it is bounded too and
    /// repeated zeros cannot walk it away.
    pub fn calibrate(
        self,
        channel: SensorChannel,
        present_pa: fx::Pressure,
        present_k: fx::Temperature,
        barometric: fx::Pressure,
        pressure_limit: u32,
    ) -> Result<Zero, Refusal> {
        let (delta, limit, old) = match channel {
            SensorChannel::Pressure => (
                i64::from(barometric.to_bits()) - i64::from(present_pa.to_bits()),
                pressure_limit.min(ZERO_PRESSURE_MAX as u32),
                self.pressure,
            ),
            SensorChannel::Temperature => (
                ICE_POINT - i64::from(present_k.to_bits()),
                ZERO_TEMPERATURE_LIMIT,
                self.temperature,
            ),
        };
        let new = i64::from(old) + delta;
        let farther = if new.unsigned_abs() > delta.unsigned_abs() {
            new
        } else {
            delta
        };
        if farther.unsigned_abs() > u64::from(limit) {
            return Err(Refusal::NotAtZero {
                channel,
                offset: farther,
                limit,
            });
        }
        let mut z = self;
        // Within the limit, which is within the store's bound.
        let slot = match channel {
            SensorChannel::Pressure => &mut z.pressure,
            SensorChannel::Temperature => &mut z.temperature,
        };
        *slot = new.clamp(i64::from(i32::MIN), i64::from(i32::MAX)) as i32;
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
        // A 0–300 bar transducer: bound 2 % of 300 bar = 6 bar.
        let limit = zero_pressure_limit(300e5 as u32 * 16);
        assert_eq!(limit, 6e5 as u32 * 16);
        // A 0–10 bar one: 0.2 bar; a 0–1 bar one: the 10 kPa floor.
        assert_eq!(zero_pressure_limit(10e5 as u32 * 16), 20_000 * 16);
        assert_eq!(zero_pressure_limit(1e5 as u32 * 16), ZERO_PRESSURE_MIN);
        // A 0–1000 bar one: 20 bar, more than the store keeps (10 bar).
        assert_eq!(
            zero_pressure_limit(1000e5 as u32 * 16),
            ZERO_PRESSURE_MAX as u32
        );
        let p = |pa: f64| fx::Pressure::from_num(pa);
        let zero = |z: Zero, pa: f64| z.calibrate(SensorChannel::Pressure, p(pa), t, baro, limit);
        // A vented transducer reading 0.2 bar high: offset −0.2 bar; 5.9
        // bar high: still taken.
        assert_eq!(
            zero(Zero::default(), 120_000.0).unwrap().pressure,
            -20_000 * 16
        );
        assert!(zero(Zero::default(), 690_000.0).is_ok());
        // A pressurised one (a cylinder at 200 bar): refused, nothing
        // changes, the correction it would take is reported.
        assert_eq!(
            zero(Zero::default(), 200e5),
            Err(Refusal::NotAtZero {
                channel: SensorChannel::Pressure,
                offset: -(200e5 as i64 - 100_000) * 16,
                limit,
            })
        );
        // Repeated zeros cannot walk the offset away: with −5.5 bar in
        // force, a reading 1 bar high (6.5 bar high uncorrected) is refused.
        let walked = Zero {
            pressure: -550_000 * 16,
            temperature: 0,
        };
        assert!(matches!(
            zero(walked, 200_000.0),
            Err(Refusal::NotAtZero { offset, .. }) if offset == -650_000 * 16
        ));
        // With −0.5 bar in force, a reading 0.3 bar low is taken: the new
        // offset is −0.2 bar (it replaces, it does not add up).
        let z = Zero {
            pressure: -50_000 * 16,
            temperature: 0,
        };
        assert_eq!(zero(z, 70_000.0).unwrap().pressure, -20_000 * 16);
        // An ice bath read 0.25 K high: offset −0.25 K.
        let z = Zero::default()
            .calibrate(SensorChannel::Temperature, baro, t, baro, limit)
            .unwrap();
        assert!((z.temperature as f64 / 65_536.0 + 0.25).abs() < 1e-4);
        // Room temperature is no ice bath.
        assert!(
            Zero::default()
                .calibrate(
                    SensorChannel::Temperature,
                    baro,
                    fx::Temperature::from_num(293.0),
                    baro,
                    limit
                )
                .is_err()
        );
    }
}
