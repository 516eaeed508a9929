//! The device's one record: which prepared configuration is in force, and
//! the zero offsets taken on site.
//!
//! | kind | record | holds |
//! |---|---|---|
//! | 8 | [`ConfigRef`] | the slot, length and CRC-32C of the prepared configuration in force; the zero offsets of both channels |
//!
//! The configuration itself is a blob in one of the two [`BlobSlots`](super::BlobSlots)
//! (see [`crate::prepared`]); writing this record after the blob's last
//! chunk is what makes a new configuration the one in force.

use crate::error::{DeviceSetting, SensorSetting};
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use super::{BlobRef, Record, RecordKind};
use crate::Error;

/// Largest zero offset stored for the pressure channel, `fx::Pressure` bits
/// (the commands that set it check tighter limits; 10 bar here).
pub const ZERO_PRESSURE_MAX: i32 = 16_000_000;
/// Largest zero offset stored for the temperature channel,
/// `fx::Temperature` bits (10 K here).
pub const ZERO_TEMPERATURE_MAX: i32 = 655_360;

/// The prepared configuration in force and the zero offsets (record kind 8).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ConfigRef {
    /// The blob (length 0: no configuration).
    pub blob: BlobRef,
    /// Zero offset of the pressure channel, `fx::Pressure` bits.
    pub zero_pressure: i32,
    /// Zero offset of the temperature channel, `fx::Temperature` bits.
    pub zero_temperature: i32,
}

impl Record for ConfigRef {
    const KIND: RecordKind = RecordKind::CONFIG;
    const VERSION: u16 = 1;
    fn validate(&self) -> Result<(), Error> {
        if self.blob.slot > 1 {
            return Err(Error::OutOfRange(DeviceSetting::ConfigurationSlot.into()));
        }
        if self.zero_pressure.unsigned_abs() > ZERO_PRESSURE_MAX as u32 {
            return Err(Error::OutOfRange(SensorSetting::PressureZeroOffset.into()));
        }
        if self.zero_temperature.unsigned_abs() > ZERO_TEMPERATURE_MAX as u32 {
            return Err(Error::OutOfRange(
                SensorSetting::TemperatureZeroOffset.into(),
            ));
        }
        Ok(())
    }
    /// No configuration, no offsets: the gauge runs unconfigured (it says
    /// so and reports no content).
    fn safe_default() -> ConfigRef {
        ConfigRef::default()
    }
}
