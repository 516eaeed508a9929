//! Power-safe configuration storage on NOR flash.
//!
//! A device keeps its prepared configuration (see [`crate::prepared`]) as a
//! **blob** in one of two [`BlobSlots`], and a **record** that says which
//! blob is in force and holds the zero offsets ([`ConfigRef`]). A record is
//! a serde value with a kind, a format version, a validation rule, a safe
//! default and a bound on its encoded size ([`Record`]); each record kind
//! owns a [`RecordArea`] of two banks of whole erase sectors, behind the
//! `embedded-storage` [`NorFlash`](embedded_storage::nor_flash::NorFlash)
//! traits.
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
#[cfg(any(test, feature = "sim-flash"))]
pub mod sim;

pub use area::{Loaded, RecordArea};
pub use blob::{BlobRef, BlobSlots, ChunkOutcome};
pub use layout::Layout;
pub use records::{ConfigRef, ZERO_PRESSURE_MAX, ZERO_TEMPERATURE_MAX};

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize, de::DeserializeOwned};

use crate::{Error, Status};

/// Where a loaded value came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Origin {
    /// The newest stored copy.
    Stored,
    /// An older copy: the newest is damaged.
    Fallback,
    /// No readable copy: the safe default.
    Default,
}

impl Origin {
    /// Its code on the wire ([`crate::link::ConfigPart::origin`]).
    pub const fn code(self) -> u8 {
        match self {
            Origin::Stored => 0,
            Origin::Fallback => 1,
            Origin::Default => 2,
        }
    }

    /// The origin of a wire code (unknown codes read as the default).
    pub const fn from_code(code: u8) -> Origin {
        match code {
            0 => Origin::Stored,
            1 => Origin::Fallback,
            _ => Origin::Default,
        }
    }

    /// Stable snake_case name.
    pub const fn name(self) -> &'static str {
        match self {
            Origin::Stored => "stored",
            Origin::Fallback => "fallback",
            Origin::Default => "default",
        }
    }
}

/// Largest encoded record, bytes.
pub const MAX_RECORD_LEN: usize = 64;

/// The kind of a record: its code on flash and on the wire.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RecordKind(pub u16);

impl RecordKind {
    /// The configuration in force and the zero offsets ([`ConfigRef`]).
    /// (Kinds 1 to 6 were the separate records of protocol version 1; a
    /// device that finds only those runs unconfigured.)
    pub const CONFIG: RecordKind = RecordKind(8);
    /// Every kind, in code order.
    pub const ALL: [RecordKind; 1] = [RecordKind::CONFIG];

    /// Stable snake_case name (host output).
    pub const fn name(self) -> &'static str {
        match self.0 {
            8 => "config",
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

/// The postcard encoding of a record, after validating it.
pub fn encode_record<R: Record>(value: &R) -> Result<heapless::Vec<u8, MAX_RECORD_LEN>, Error> {
    value.validate()?;
    let mut buf = [0u8; MAX_RECORD_LEN];
    let n = crate::encode::to_slice(value, &mut buf).map_err(|_| Error::RecordTooLarge)?;
    heapless::Vec::from_slice(buf.get(..n).ok_or(Error::RecordTooLarge)?)
        .map_err(|_| Error::RecordTooLarge)
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
