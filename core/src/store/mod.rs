//! Power-safe configuration storage on NOR flash.
//!
//! Configuration, calibration, alarm thresholds and the gas-model reference
//! are **records**: serde values with a kind, a format version, a validation
//! rule, safe defaults and a bound on their encoded size ([`Record`]). Each
//! record kind owns a [`RecordArea`] of two banks of whole erase sectors,
//! behind the `embedded-storage` [`NorFlash`](embedded_storage::nor_flash::NorFlash)
//! traits. Gas-model blobs live in [`BlobSlots`].
//!
//! # On flash
//!
//! A bank holds copies appended one after the other, each:
//!
//! ```text
//! header (16 bytes, padded to the write unit):
//!   magic:u16 = 0x5AC3  kind:u16  version:u16  len:u16  seq:u32  hcrc:u32
//! data (len bytes: postcard encoding of the record, padded with 0xFF)
//! dcrc:u32 (padded to the write unit)
//! ```
//!
//! `hcrc` is the CRC-32C of the first 12 header bytes, `dcrc` the CRC-32C of
//! the data. Both cover fixed, known spans, so every single-bit error in a
//! copy is detected (a CRC detects all single-bit errors). `seq` grows by one
//! with every write of the area; the valid copy with the highest `seq` is the
//! value.
//!
//! # Writing (power-safe)
//!
//! 1. The value is validated ([`Record::validate`]) — nothing out of range is
//!    ever stored.
//! 2. Header and data are written in one operation, `dcrc` in a second one:
//!    a copy only becomes valid when its last bytes are written.
//! 3. The copy goes after the last valid copy of the bank that holds the
//!    newest value, if everything after it is erased and there is room.
//!    Otherwise the *other* bank is erased and the copy goes at its start: the
//!    newest valid copy is never touched while a new one is written. Unreadable
//!    bytes at the end of the other bank (an interrupted write) are erased
//!    first in any case, so that after a successful write no unreadable bytes
//!    can pass for a newer copy.
//! 4. The copy is read back and checked.
//!
//! A power cut at any byte therefore leaves either the previous value or the
//! new one, never a mix and never nothing; bytes left by an interrupted write
//! are never written again (the next write moves to the other bank).
//!
//! # Reading (never bricks)
//!
//! The newest copy that passes both CRCs, decodes, has the current version and
//! validates is the value. When a newer copy exists but is unreadable, or
//! unreadable bytes in the area may have held one, the value is the last good
//! copy and says so ([`Origin::Fallback`]); when none is readable
//! it is [`Record::safe_default`] ([`Origin::Default`]). Unreadable bytes in
//! the area set `damaged`. Status flags: [`Status::CONFIG_FALLBACK`],
//! [`Status::CONFIG_DEFAULT`], [`Status::STORAGE_DAMAGED`].

mod area;
mod blob;
mod layout;
mod records;
pub mod sim;

pub use area::{Loaded, RecordArea};
pub use blob::{BlobSlots, ChunkOutcome, GasModelRef};
pub use layout::Layout;
pub use records::{
    AlarmThresholds, PressureCalibration, STANDARD_ATMOSPHERE, TemperatureCalibration,
    TrackingSettings, split_track_config, track_config,
};

use postcard::experimental::max_size::MaxSize;
use serde::{Serialize, de::DeserializeOwned};

use crate::link::Origin;
use crate::{Error, Status};

/// Largest encoded record, bytes: every record fits one link frame.
pub const MAX_RECORD_LEN: usize = crate::link::RECORD_MAX_LEN;

/// The kind of a record: its code on flash and on the wire.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RecordKind(pub u16);

impl RecordKind {
    /// The estimate's setup ([`SetupFx`](crate::SetupFx)).
    pub const SETUP: RecordKind = RecordKind(1);
    /// Calibration of the pressure channel ([`PressureCalibration`]).
    pub const PRESSURE_CALIBRATION: RecordKind = RecordKind(2);
    /// Alarm thresholds ([`AlarmThresholds`]).
    pub const ALARM_THRESHOLDS: RecordKind = RecordKind(3);
    /// Which gas-model blob is in use ([`GasModelRef`]).
    pub const GAS_MODEL_REF: RecordKind = RecordKind(4);
    /// Calibration of the temperature channel ([`TemperatureCalibration`]).
    pub const TEMPERATURE_CALIBRATION: RecordKind = RecordKind(5);
    /// Tracking settings ([`TrackingSettings`]).
    pub const TRACKING: RecordKind = RecordKind(6);
    /// Every kind, in code order.
    pub const ALL: [RecordKind; 6] = [
        RecordKind::SETUP,
        RecordKind::PRESSURE_CALIBRATION,
        RecordKind::ALARM_THRESHOLDS,
        RecordKind::GAS_MODEL_REF,
        RecordKind::TEMPERATURE_CALIBRATION,
        RecordKind::TRACKING,
    ];

    /// Stable snake_case name (host output).
    pub const fn name(self) -> &'static str {
        match self.0 {
            1 => "setup",
            2 => "pressure_calibration",
            3 => "alarm_thresholds",
            4 => "gas_model_ref",
            5 => "temperature_calibration",
            6 => "tracking",
            _ => "unknown",
        }
    }
}

/// A value kept in flash as a record.
pub trait Record: Serialize + DeserializeOwned + MaxSize + Sized {
    /// Its kind.
    const KIND: RecordKind;
    /// Its format version: copies of another version are not read.
    const VERSION: u16;
    /// Checks every field; out-of-range values are an error naming the field.
    fn validate(&self) -> Result<(), Error>;
    /// The value used when no stored copy is readable. It must validate.
    fn safe_default() -> Self;
}

/// The postcard encoding of a record, after validating it (what
/// [`Command::WriteRecord`](crate::link::Command::WriteRecord) carries).
pub fn encode_record<R: Record>(value: &R) -> Result<heapless::Vec<u8, MAX_RECORD_LEN>, Error> {
    value.validate()?;
    let mut buf = [0u8; MAX_RECORD_LEN];
    let used = postcard::to_slice(value, &mut buf).map_err(|_| Error::RecordTooLarge)?;
    heapless::Vec::from_slice(used).map_err(|_| Error::RecordTooLarge)
}

/// Decodes a record sent as `version` (must be [`Record::VERSION`]) from its
/// whole postcard encoding. Not validated: call [`Record::validate`].
pub fn decode_record<R: Record>(version: u16, bytes: &[u8]) -> Result<R, Error> {
    if version != R::VERSION {
        return Err(Error::MessageBody);
    }
    match postcard::take_from_bytes::<R>(bytes) {
        Ok((value, [])) => Ok(value),
        _ => Err(Error::MessageBody),
    }
}

/// The status flags that say where a loaded value came from.
pub const fn origin_status(origin: Origin, damaged: bool) -> Status {
    let s = match origin {
        Origin::Stored => Status::OK,
        Origin::Fallback => Status::CONFIG_FALLBACK,
        Origin::Default => Status::CONFIG_DEFAULT,
    };
    if damaged {
        Status::from_bits(s.bits() | Status::STORAGE_DAMAGED.bits())
    } else {
        s
    }
}

mod setup_record {
    use super::{Record, RecordKind};
    use crate::fx::{ElasticExpansion, Pressure, Temperature, ThermalExpansion, Volume};
    use crate::{Error, Gas, SetupFx, StandardConditionFx, TankFx};
    use postcard::experimental::max_size::MaxSize;

    // The fixed-point formats travel as their raw integers (varints):
    // U24F40 → u64, U28F4/U16F16/U0F32 → u32, I0F32 → i32; the gas as one
    // varint for its variant (fewer than 128: one byte), which a mixture
    // follows with its fingerprint (u32) and molar mass (U0F32). The pure
    // gases encode as before the mixture variant existed.
    impl MaxSize for TankFx {
        const POSTCARD_MAX_SIZE: usize =
            u64::POSTCARD_MAX_SIZE + 3 * u32::POSTCARD_MAX_SIZE + i32::POSTCARD_MAX_SIZE;
    }
    impl MaxSize for StandardConditionFx {
        const POSTCARD_MAX_SIZE: usize = 2 * u32::POSTCARD_MAX_SIZE;
    }
    impl MaxSize for SetupFx {
        const POSTCARD_MAX_SIZE: usize = 1
            + 2 * u32::POSTCARD_MAX_SIZE
            + TankFx::POSTCARD_MAX_SIZE
            + StandardConditionFx::POSTCARD_MAX_SIZE
            + u32::POSTCARD_MAX_SIZE;
    }

    impl Record for SetupFx {
        const KIND: RecordKind = RecordKind::SETUP;
        const VERSION: u16 = 1;
        fn validate(&self) -> Result<(), Error> {
            SetupFx::validate(self)
        }
        /// Air in a 1 L tank rated 200 bar (absolute) at 15 °C; ISO 13443
        /// standard condition; settled pressure at 15 °C. Content figures from
        /// it are flagged `config_default` and mean nothing for a real tank.
        fn safe_default() -> SetupFx {
            // 15 °C = 288.15 K in U16F16 bits: 288.15 × 65536 = 18 884 198.4.
            let t15 = Temperature::from_bits(18_884_198);
            SetupFx {
                gas: Gas::Air,
                tank: TankFx {
                    // 1 L = 0.001 m³ in U24F40 bits: 0.001 × 2⁴⁰ = 1 099 511 627.8.
                    water_capacity_m3: Volume::from_bits(1_099_511_628),
                    // 200 bar = 20 MPa in U28F4 bits: 2e7 × 16.
                    rated_pressure_pa: Pressure::from_bits(320_000_000),
                    rated_temperature_k: t15,
                    elastic_expansion_per_mpa: ElasticExpansion::ZERO,
                    thermal_expansion_per_k: ThermalExpansion::ZERO,
                },
                standard: StandardConditionFx {
                    temperature_k: t15,
                    // 101 325 Pa in U28F4 bits.
                    pressure_pa: Pressure::from_bits(1_621_200),
                },
                settled_reference_k: t15,
            }
        }
    }
}
