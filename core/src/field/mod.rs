//! Field integration: what a gauge offers the plant besides the isochor
//! link — its serial settings, a 4–20 mA output of the content
//! ([`current_loop`]) and, with the `modbus` feature, a Modbus RTU server
//! ([`modbus`]) over an original register map.
//!
//! Everything here is part of the stored configuration ([`FieldConfig`],
//! prepared into [`FieldScalars`]): the serial settings and the loop
//! output's range change only through the authenticated isochor link.
//! Modbus writes are limited to acknowledging alarms, which changes no
//! estimate (see [`modbus`]).

pub mod current_loop;
#[cfg(feature = "modbus")]
pub mod modbus;

use crate::error::FieldSetting;
use serde::{Deserialize, Serialize};

use crate::{Error, fx};

pub use current_loop::{Failure, LoopOutput, LoopOutputConfig, LoopQuantity, LoopScalars};

/// Which protocol a board with one UART speaks on it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Protocol {
    /// The isochor link (telemetry and alarm frames flow unasked).
    #[default]
    Link,
    /// Modbus RTU. The isochor link's requests are still answered on the
    /// same line (its frames are self-delimiting and checked), but the
    /// gauge sends nothing unasked: a Modbus line has one master.
    Modbus,
}

/// Parity of the serial line. Without parity the line uses two stop bits
/// (Modbus over Serial Line V1.02, §2.5.1: every character is 11 bits).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Parity {
    /// No parity, two stop bits.
    None,
    /// Even parity, one stop bit (the Modbus default).
    #[default]
    Even,
    /// Odd parity, one stop bit.
    Odd,
}

/// Baud rates accepted (common practice: the rates every RS-485 transceiver
/// and PLC serial card offers).
pub const BAUD_RATES: [u32; 8] = [1200, 2400, 4800, 9600, 19_200, 38_400, 57_600, 115_200];

/// The serial settings of the field line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SerialSettings {
    /// The protocol on a board with one UART (boards with a second UART
    /// serve Modbus there and keep the link on the first).
    pub protocol: Protocol,
    /// Modbus server address, 1 … 247.
    pub address: u8,
    /// Baud rate, one of [`BAUD_RATES`].
    pub baud: u32,
    /// Parity.
    pub parity: Parity,
}

impl Default for SerialSettings {
    /// The link protocol, address 1, 19 200 Bd, even parity: the defaults
    /// Modbus over Serial Line V1.02 asks for (§2.5.1: 19 200 Bd and even
    /// parity as the default); address 1 is common practice.
    fn default() -> SerialSettings {
        SerialSettings {
            protocol: Protocol::Link,
            address: 1,
            baud: 19_200,
            parity: Parity::Even,
        }
    }
}

impl SerialSettings {
    /// Checks the address and the baud rate.
    pub fn validate(&self) -> Result<(), Error> {
        if !(1..=247).contains(&self.address) {
            return Err(Error::OutOfRange(FieldSetting::ModbusAddress.into()));
        }
        if !BAUD_RATES.contains(&self.baud) {
            return Err(Error::OutOfRange(FieldSetting::BaudRate.into()));
        }
        Ok(())
    }

    /// The silent intervals of the line, µs: (t1.5, t3.5). Modbus over
    /// Serial Line V1.02, §2.5.1.1: 1.5 and 3.5 character times of 11 bits;
    /// above 19 200 Bd the fixed values 750 µs and 1 750 µs.
    pub const fn silent_intervals_us(&self) -> (u32, u32) {
        if self.baud > 19_200 || self.baud == 0 {
            (750, 1750)
        } else {
            // 11 bits × 1.5 and × 3.5, rounded up.
            (
                16_500_000_u32.div_ceil(self.baud),
                38_500_000_u32.div_ceil(self.baud),
            )
        }
    }
}

/// The field part of a gauge's physical configuration.
#[derive(Clone, Copy, Debug, PartialEq, Default, Serialize, Deserialize)]
pub struct FieldConfig {
    /// The serial line.
    pub serial: SerialSettings,
    /// The 4–20 mA output.
    pub loop_output: LoopOutputConfig,
}

impl FieldConfig {
    /// Checks both parts.
    pub fn validate(&self) -> Result<(), Error> {
        self.serial.validate()?;
        self.loop_output.validate()
    }

    /// Prepares the device's form (the loop output's gain on the host).
    pub fn prepare(&self) -> Result<FieldScalars, Error> {
        self.validate()?;
        Ok(FieldScalars {
            serial: self.serial,
            loop_output: LoopScalars::prepare(&self.loop_output)?,
        })
    }
}

/// The field part of a prepared configuration.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct FieldScalars {
    /// The serial line.
    pub serial: SerialSettings,
    /// The 4–20 mA output, prepared.
    pub loop_output: LoopScalars,
}

impl FieldScalars {
    /// Checks what a device relies on.
    pub fn validate(&self) -> Result<(), Error> {
        self.serial.validate()?;
        self.loop_output.validate()
    }
}

impl Default for FieldScalars {
    /// What a gauge without a usable configuration runs: the default serial
    /// settings and a loop output signalling failure.
    fn default() -> FieldScalars {
        FieldScalars {
            serial: SerialSettings::default(),
            loop_output: LoopScalars::UNCONFIGURED,
        }
    }
}

/// A content quantity in Q24 (`i64` with 24 fraction bits) from a format's
/// raw bits with `frac` fraction bits (≥ 24 … any: shifted with rounding
/// toward −∞).
pub const fn q24(bits: i64, frac: u32) -> i64 {
    if frac >= 24 {
        bits >> (frac - 24)
    } else {
        bits << (24 - frac)
    }
}

/// Milliamps bits of `ma` (compile time only).
pub(crate) const fn ma(ma: f64) -> fx::Milliamps {
    fx::Milliamps::from_bits((ma * 16_777_216.0 + 0.5) as u32)
}
