//! The wire messages: one definition, used by the firmware and the host.
//!
//! Every number is an integer with its unit in the field name; fixed-point
//! quantities travel as the raw bits of the format named in their doc line
//! (see [`crate::fx`]), so a reader rebuilds them exactly with
//! `fx::Mass::from_bits(t.mass_kg)` and friends. postcard encodes integers as
//! varints, so small values cost few bytes.
//!
//! Direction: [`Identity`], [`Telemetry`], [`AlarmEvent`] and [`Reply`] go from
//! the device to the host; [`Ping`], [`GetIdentity`], [`GetChallenge`],
//! [`ReadRecord`], [`Signed`] and [`InjectSample`] from the host to the device.

use heapless::{String, Vec};
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::content::fixed::Content;
use crate::fx;

/// Largest record body carried by [`ReadRecord`] replies and
/// [`Command::WriteRecord`], bytes (postcard-encoded record).
pub const RECORD_MAX_LEN: usize = 128;
/// Largest piece of a gas-model blob carried by one
/// [`Command::GasModelChunk`], bytes.
pub const CHUNK_MAX_LEN: usize = 128;
/// Longest field name a refusal carries, bytes (longer names are cut).
pub const FIELD_NAME_MAX_LEN: usize = 32;
/// Length of a device nonce, bytes.
pub const NONCE_LEN: usize = 16;
/// Length of an HMAC-SHA-256 tag, bytes.
pub const MAC_LEN: usize = 32;
/// Most raw sensor codes in one [`InjectSample`].
pub const INJECT_MAX_CODES: usize = 4;

/// Capability bits announced in [`Identity::capabilities`].
pub mod capability {
    /// The device sends [`Telemetry`](super::Telemetry) frames.
    pub const TELEMETRY: u32 = 1 << 0;
    /// The device stores configuration and accepts signed writes.
    pub const SIGNED_CONFIG: u32 = 1 << 1;
    /// The device accepts gas-model blobs in chunks.
    pub const GAS_MODEL_LOAD: u32 = 1 << 2;
    /// The device takes its samples from [`InjectSample`](super::InjectSample)
    /// frames (emulated firmware and bench rigs), not from its sensors.
    pub const SAMPLE_INJECTION: u32 = 1 << 3;
    /// The device raises and clears alarms.
    pub const ALARMS: u32 = 1 << 4;
}

/// Who the device is and what it can do (reply to [`GetIdentity`]).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Identity {
    /// Serial number given at manufacture (also bound into every signature).
    pub serial: u64,
    /// Hardware revision of the board.
    pub hardware_rev: u16,
    /// Firmware version, major.minor.patch.
    pub firmware_version: [u8; 3],
    /// The link protocol version the device speaks
    /// ([`PROTOCOL_VERSION`](super::PROTOCOL_VERSION)).
    pub protocol: u8,
    /// Largest frame the device accepts, bytes including the delimiter.
    pub max_frame_len: u16,
    /// [`capability`] bits.
    pub capabilities: u32,
}

/// One estimate, as the device reports it after each sample.
///
/// Content fields come from [`crate::content::fixed::Content`]; rate, time to
/// empty and uncertainty come from the tracking stage. Values whose status
/// says they are not valid (see [`crate::Status::CONTENT_INVALID`]) must not
/// be shown as numbers.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Telemetry {
    /// Estimate counter, +1 per estimate, wraps at 2³².
    pub seq: u32,
    /// Time since the device started, ms.
    pub uptime_ms: u64,
    /// Absolute pressure, Pa: raw bits of `U28F4` ([`fx::Pressure`]).
    pub pressure_pa: u32,
    /// Gas temperature, K: raw bits of `U16F16` ([`fx::Temperature`]).
    pub temperature_k: u32,
    /// Density, kg/m³: raw bits of `U32F32` ([`fx::Density`]).
    pub density_kg_m3: u64,
    /// Mass of gas in the tank, kg: raw bits of `U24F40` ([`fx::Mass`]).
    pub mass_kg: u64,
    /// Standard volume, m³: raw bits of `U24F40` ([`fx::Volume`]).
    pub standard_volume_m3: u64,
    /// Settled pressure, absolute, Pa: raw bits of `U28F4` ([`fx::Pressure`]).
    pub settled_pressure_pa: u32,
    /// Fill fraction (1 = rated content): raw bits of `U32F32` ([`fx::Fraction`]).
    pub fill_fraction: u64,
    /// Rate of change of the mass, kg/h, negative while the tank empties:
    /// raw bits of `I32F32`.
    pub rate_kg_h: i64,
    /// Time until the tank is empty at the present rate, s; `None` when the
    /// tank is not emptying or the rate is not known.
    pub time_to_empty_s: Option<u32>,
    /// Expanded uncertainty of the mass (coverage factor k = 2), kg: raw bits
    /// of `U24F40` ([`fx::Mass`]).
    pub mass_uncertainty_kg: u64,
    /// Status word bits ([`crate::Status::bits`]).
    pub status: u32,
}

impl Telemetry {
    /// A telemetry frame carrying a content estimate. Rate, time to empty and
    /// uncertainty are left unknown (zero rate, no time to empty, zero
    /// uncertainty) for the tracking stage to fill in.
    pub fn from_content(seq: u32, uptime_ms: u64, c: &Content) -> Telemetry {
        Telemetry {
            seq,
            uptime_ms,
            pressure_pa: c.pressure_pa.to_bits(),
            temperature_k: c.temperature_k.to_bits(),
            density_kg_m3: c.density_kg_m3.to_bits(),
            mass_kg: c.mass_kg.to_bits(),
            standard_volume_m3: c.standard_volume_m3.to_bits(),
            settled_pressure_pa: c.settled_pressure_pa.to_bits(),
            fill_fraction: c.fill_fraction.to_bits(),
            rate_kg_h: 0,
            time_to_empty_s: None,
            mass_uncertainty_kg: 0,
            status: c.status.bits(),
        }
    }

    /// The mass as its fixed-point type.
    pub fn mass(&self) -> fx::Mass {
        fx::Mass::from_bits(self.mass_kg)
    }
}

/// An alarm changed state.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct AlarmEvent {
    /// Event counter, +1 per event, wraps at 2³² (a gap means events were lost).
    pub seq: u32,
    /// Time since the device started, ms.
    pub uptime_ms: u64,
    /// Which alarm (the alarm stage's code).
    pub alarm: u16,
    /// Raised or cleared.
    pub transition: AlarmTransition,
    /// Status word bits at the event.
    pub status: u32,
    /// Mass of gas at the event, kg: raw bits of `U24F40` ([`fx::Mass`]).
    pub mass_kg: u64,
}

/// How an alarm changed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum AlarmTransition {
    /// The alarm condition started.
    Raised,
    /// The alarm condition ended (or was cleared by a signed command).
    Cleared,
}

/// Are you there? Answered by [`Outcome::Pong`] with the same token.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Ping {
    /// Request tag, echoed in the reply.
    pub tag: u16,
    /// Any value, echoed in the reply.
    pub token: u32,
}

/// Asks for the device's [`Identity`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct GetIdentity {
    /// Request tag, echoed in the reply.
    pub tag: u16,
}

/// Opens a signing session: the device answers with a fresh nonce
/// ([`Outcome::Challenge`]) that the next [`Signed`] commands must be bound to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct GetChallenge {
    /// Request tag, echoed in the reply.
    pub tag: u16,
}

/// Reads one stored record (no authentication needed: records hold no secret).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct ReadRecord {
    /// Request tag, echoed in the reply.
    pub tag: u16,
    /// Record kind code (see [`crate::store::RecordKind`]).
    pub kind: u16,
}

/// A command that changes the device, signed with the device secret.
///
/// `mac` = HMAC-SHA-256(secret, signing input) where the signing input is
/// built by [`crate::auth::command_signing_input`]: a domain string, the
/// device serial, the session nonce, `counter` and the postcard encoding of
/// `command`. `counter` starts at 1 after each challenge and must go up by one
/// with each command of the session.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Signed {
    /// Request tag, echoed in the reply (not signed: it only pairs replies).
    pub tag: u16,
    /// Position of this command in its signing session (1, 2, …).
    pub counter: u32,
    /// HMAC-SHA-256 tag.
    pub mac: [u8; MAC_LEN],
    /// The command.
    pub command: Command,
}

/// The commands that need a signature.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum Command {
    /// Replace a stored record (configuration, calibration, alarm thresholds).
    /// The device decodes and validates it before anything is stored.
    WriteRecord {
        /// Record kind code.
        kind: u16,
        /// Record format version.
        version: u16,
        /// postcard encoding of the record.
        bytes: Vec<u8, RECORD_MAX_LEN>,
    },
    /// Take the present reading of a sensor channel as its zero.
    ZeroCalibration {
        /// Sensor channel.
        channel: SensorChannel,
    },
    /// Clear latched alarms.
    ClearAlarms,
    /// Restart the device.
    Reboot,
    /// One piece of a gas-model blob. Pieces are sent in order from offset 0;
    /// the device commits the blob when the last piece arrives and the CRC-32C
    /// of the whole blob matches.
    GasModelChunk {
        /// Position of `bytes` in the blob.
        offset: u32,
        /// Length of the whole blob, bytes.
        total_len: u32,
        /// CRC-32C of the whole blob.
        blob_crc: u32,
        /// The piece.
        bytes: Vec<u8, CHUNK_MAX_LEN>,
    },
}

impl Command {
    /// The command that writes `value` (validated and encoded here; the device
    /// validates again before storing).
    pub fn write_record<R: crate::store::Record>(value: &R) -> Result<Command, crate::Error> {
        Ok(Command::WriteRecord {
            kind: R::KIND.0,
            version: R::VERSION,
            bytes: crate::store::encode_record(value)?,
        })
    }
}

/// A sensor input of the device.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum SensorChannel {
    /// The pressure sensor.
    Pressure,
    /// The temperature sensor.
    Temperature,
}

/// One raw converter reading.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct RawCode {
    /// The channel it was read on.
    pub channel: SensorChannel,
    /// The converter code, as the ADC delivers it.
    pub code: u32,
}

/// Raw sensor codes fed to a device that runs on injected samples (emulated
/// firmware, bench rigs: see [`capability::SAMPLE_INJECTION`]). The device
/// treats them exactly as codes read from its own converters.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct InjectSample {
    /// Request tag, echoed in the reply.
    pub tag: u16,
    /// Time of the sample on the device's clock, ms.
    pub at_ms: u64,
    /// The codes (one per channel).
    pub codes: Vec<RawCode, INJECT_MAX_CODES>,
}

/// The device's answer to one request.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Reply {
    /// The tag of the request.
    pub tag: u16,
    /// What happened.
    pub outcome: Outcome,
}

/// What became of a request.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum Outcome {
    /// Answer to [`Ping`].
    Pong {
        /// The token of the ping.
        token: u32,
    },
    /// Answer to [`GetIdentity`].
    Identity(Identity),
    /// Answer to [`GetChallenge`]: a fresh nonce.
    Challenge {
        /// The nonce the next signed commands are bound to.
        nonce: [u8; NONCE_LEN],
        /// How long the session stays open, ms.
        valid_ms: u32,
    },
    /// Answer to [`ReadRecord`].
    Record {
        /// Record kind code.
        kind: u16,
        /// Record format version.
        version: u16,
        /// Where the value came from.
        origin: Origin,
        /// postcard encoding of the record.
        bytes: Vec<u8, RECORD_MAX_LEN>,
    },
    /// A signed command was verified and carried out. `mac` proves it to the
    /// host: HMAC-SHA-256(secret, [`crate::auth::done_signing_input`]).
    Done {
        /// The counter of the command.
        counter: u32,
        /// The device's signature over the session nonce and counter.
        mac: [u8; MAC_LEN],
    },
    /// An injected sample was taken.
    Taken,
    /// The request was refused; nothing was changed.
    Refused(Refusal),
}

/// Where a record value came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum Origin {
    /// The latest stored copy.
    Stored,
    /// The newest readable copy, which may not be the newest written: a newer
    /// copy is damaged, or unreadable bytes in the area may have held one.
    Fallback,
    /// Safe defaults: no stored copy is readable.
    Default,
}

/// Why a request was refused.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum Refusal {
    /// No signing session is open (ask for a challenge first), or it expired.
    NoSession,
    /// The signature does not match: wrong secret or altered command.
    BadSignature,
    /// The counter is not the next one of the session (a replayed or
    /// reordered command).
    Replay,
    /// Too many failed signatures: try again after this long, ms.
    LockedOut {
        /// Time until the next attempt is accepted, ms.
        retry_after_ms: u32,
    },
    /// A value is outside its accepted range; the field is named.
    OutOfRange {
        /// The field, as the validation names it.
        field: String<FIELD_NAME_MAX_LEN>,
    },
    /// The record could not be decoded or has an unknown kind or version.
    BadRecord,
    /// The device does not support this request.
    Unsupported,
    /// A gas-model piece arrived out of order; the device expects this offset.
    ChunkOrder {
        /// The offset the device expects next.
        expected: u32,
    },
    /// The whole gas-model blob does not match its CRC-32C (nothing stored).
    BlobCrc,
    /// The gas-model blob is larger than its flash slot.
    BlobTooLarge,
    /// The flash refused the write; the previous value is kept.
    Storage,
}

impl Refusal {
    /// An [`Refusal::OutOfRange`] naming `field` (cut to
    /// [`FIELD_NAME_MAX_LEN`] bytes at a character boundary).
    pub fn out_of_range(field: &str) -> Refusal {
        let mut s = String::new();
        for ch in field.chars() {
            if s.push(ch).is_err() {
                break;
            }
        }
        Refusal::OutOfRange { field: s }
    }
}
