//! The wire messages: one definition, used by the firmware and the host.
//!
//! Every number is an integer with its unit in the field name; fixed-point
//! quantities travel as the raw bits of the format named in their doc line
//! (see [`crate::fx`]), and each message has typed accessors that rebuild
//! them (`t.mass()`, `t.status()`, …): hosts decode a reading in one place.
//! postcard encodes integers as varints, so small values cost few bytes.
//!
//! Direction: [`FromDevice`] messages ([`Boot`], [`Telemetry`],
//! [`AlarmEvent`], [`Reply`]) go from the device to the host;
//! [`ToDevice`] messages ([`Ping`], [`GetIdentity`], [`GetChallenge`],
//! [`ReadConfig`], [`Signed`], [`InjectSample`], [`GetDiagnostics`]) from
//! the host to the device. A device decodes only the second kind and
//! encodes only the first.
//!
//! This module is a leaf: it depends on the crate's formats, status word,
//! error payloads and the tracker's reason for no time to empty only (all
//! of a lower layer). The device builds these messages from its pipeline's outputs
//! ([`crate::app`]).

use heapless::{String, Vec};
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::error::{Condition, Defect, ModelDefect, Quantity};
use crate::{Status, fx};

/// Largest piece of a configuration carried by one [`Command::ConfigChunk`]
/// or [`ConfigPart`], bytes.
pub const CHUNK_MAX_LEN: usize = 128;
pub use crate::auth::{MAC_LEN, NONCE_LEN};
/// Longest encoding of a [`Command`], bytes.
pub const COMMAND_MAX_LEN: usize = <Command as MaxSize>::POSTCARD_MAX_SIZE;
/// Longest source-file name a fault report carries, bytes (longer names keep
/// their end).
pub const FAULT_FILE_MAX_LEN: usize = 48;

/// Capability bits announced in [`Identity::capabilities`].
pub mod capability {
    /// The device sends [`Telemetry`](super::Telemetry) frames.
    pub const TELEMETRY: u32 = 1 << 0;
    /// The device stores configurations and accepts signed commands.
    pub const SIGNED_CONFIG: u32 = 1 << 1;
    /// The device takes its samples from [`InjectSample`](super::InjectSample)
    /// frames (emulated firmware and bench rigs), not from its sensors.
    pub const SAMPLE_INJECTION: u32 = 1 << 3;
    /// The device raises and clears alarms.
    pub const ALARMS: u32 = 1 << 4;
    /// The device answers [`GetDiagnostics`](super::GetDiagnostics).
    pub const DIAGNOSTICS: u32 = 1 << 5;
    /// The device tracks content over time (rate, time to empty, leak).
    pub const TRACKING: u32 = 1 << 6;
    /// The device reports the uncertainty of its content.
    pub const UNCERTAINTY: u32 = 1 << 7;
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
    /// Largest prepared configuration the device stores, bytes.
    pub config_capacity: u32,
}

/// One estimate, as the device reports it after each sample.
///
/// Values whose status says they are not valid (see
/// [`Status::CONTENT_INVALID`]) must not be shown as numbers; `None` means
/// not known (yet): the rate needs a few blocks, the uncertainty one, and a
/// device built without tracking or uncertainty never sends them.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Telemetry {
    /// Estimate counter, +1 per estimate, wraps at 2³².
    pub seq: u32,
    /// Time of the sample on the device's clock (ms since it started; for
    /// injected samples the time the host gave).
    pub uptime_ms: u64,
    /// Absolute pressure (smoothed), Pa: raw bits of `U28F4` ([`fx::Pressure`]).
    pub pressure_pa: u32,
    /// Gas temperature (smoothed), K: raw bits of `U16F16` ([`fx::Temperature`]).
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
    /// raw bits of `I32F32` ([`fx::MassRate`]).
    pub rate_kg_h: Option<i64>,
    /// Expanded uncertainty (k = 2) of the rate, kg/h: raw bits of `I32F32`
    /// ([`fx::MassRate`], never negative).
    pub rate_uncertainty_kg_h: Option<i64>,
    /// Time until the content reaches the reserve at the present rate, s;
    /// `None` when the tank is not emptying or the rate is not known.
    pub time_to_empty_s: Option<u32>,
    /// Earliest time to the reserve (rate plus its expanded uncertainty), s.
    pub time_to_empty_earliest_s: Option<u32>,
    /// Latest time to the reserve (rate minus its expanded uncertainty), s;
    /// `None` when that rate is not a consumption.
    pub time_to_empty_latest_s: Option<u32>,
    /// Expanded uncertainty of the mass (coverage factor k = 2), kg: raw bits
    /// of `U24F40` ([`fx::Mass`]).
    pub mass_uncertainty_kg: Option<u64>,
    /// Expanded uncertainty of the fill fraction (k = 2): raw bits of
    /// `U32F32` ([`fx::Fraction`]).
    pub fill_fraction_uncertainty: Option<u64>,
    /// The leak detector's latest loss of content, fraction of the rated
    /// content per day (positive: content lost): raw bits of `I32F32`
    /// ([`fx::FractionRate`]); `None` until it has a verdict.
    pub leak_loss_per_day: Option<i64>,
    /// Why no time to empty is given: the code of a
    /// [`NoTimeToEmpty`](crate::track::float::NoTimeToEmpty) reason; `None`
    /// while one is given or in a frame without tracking.
    pub time_to_empty_withheld: Option<u8>,
    /// Status word bits ([`Status::bits`]): bits 0–7 content and gas
    /// model, 8–15 sensors, 16–23 tracking and alarms, 24–30 device, 31
    /// the content flag `condensation_risk` (all content flags that void
    /// the figures: [`Status::CONTENT_INVALID`]).
    pub status: u32,
}

impl Telemetry {
    /// The status word.
    pub fn status(&self) -> Status {
        Status::from_bits(self.status)
    }
    /// True when the content values may be shown as numbers.
    pub fn content_valid(&self) -> bool {
        !self.status().intersects(Status::CONTENT_INVALID)
    }
    /// Absolute pressure.
    pub fn pressure(&self) -> fx::Pressure {
        fx::Pressure::from_bits(self.pressure_pa)
    }
    /// Gas temperature.
    pub fn temperature(&self) -> fx::Temperature {
        fx::Temperature::from_bits(self.temperature_k)
    }
    /// Density.
    pub fn density(&self) -> fx::Density {
        fx::Density::from_bits(self.density_kg_m3)
    }
    /// Mass.
    pub fn mass(&self) -> fx::Mass {
        fx::Mass::from_bits(self.mass_kg)
    }
    /// Standard volume.
    pub fn standard_volume(&self) -> fx::Volume {
        fx::Volume::from_bits(self.standard_volume_m3)
    }
    /// Settled pressure.
    pub fn settled_pressure(&self) -> fx::Pressure {
        fx::Pressure::from_bits(self.settled_pressure_pa)
    }
    /// Fill fraction.
    pub fn fill_fraction(&self) -> fx::Fraction {
        fx::Fraction::from_bits(self.fill_fraction)
    }
    /// Rate of change of the mass (negative while emptying).
    pub fn rate(&self) -> Option<fx::MassRate> {
        self.rate_kg_h.map(fx::MassRate::from_bits)
    }
    /// Expanded uncertainty of the rate.
    pub fn rate_uncertainty(&self) -> Option<fx::MassRate> {
        self.rate_uncertainty_kg_h.map(fx::MassRate::from_bits)
    }
    /// Expanded uncertainty of the mass.
    pub fn mass_uncertainty(&self) -> Option<fx::Mass> {
        self.mass_uncertainty_kg.map(fx::Mass::from_bits)
    }
    /// Expanded uncertainty of the fill fraction.
    pub fn fill_fraction_uncertainty(&self) -> Option<fx::Fraction> {
        self.fill_fraction_uncertainty.map(fx::Fraction::from_bits)
    }
    /// The leak detector's loss per day.
    pub fn leak_loss_per_day(&self) -> Option<fx::FractionRate> {
        self.leak_loss_per_day.map(fx::FractionRate::from_bits)
    }
    /// Why no time to empty is given (`None` while one is, in a frame
    /// without tracking, or for a reason this version does not know).
    pub fn time_to_empty_withheld(&self) -> Option<crate::track::float::NoTimeToEmpty> {
        self.time_to_empty_withheld
            .and_then(crate::track::float::NoTimeToEmpty::from_code)
    }
}

/// An alarm changed state.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct AlarmEvent {
    /// Event counter, +1 per event, wraps at 2³² (a gap means events were lost).
    pub seq: u32,
    /// Time since the device started, ms.
    pub uptime_ms: u64,
    /// Which alarm: its code (the alarm's bit in the alarm set, see
    /// `crate::alarm::AlarmKind`: 0 `not_settled`, 1 `leak`,
    /// 2 `low_content`, 3 `over_pressure`, 4 `over_temperature`,
    /// 5 `under_temperature`, 6 `sensor_fault`).
    pub alarm: u16,
    /// Raised or cleared.
    pub transition: AlarmTransition,
    /// Status word bits at the event.
    pub status: u32,
    /// Mass of gas at the event, kg: raw bits of `U24F40` ([`fx::Mass`]).
    pub mass_kg: u64,
}

impl AlarmEvent {
    /// The status word at the event.
    pub fn status(&self) -> Status {
        Status::from_bits(self.status)
    }
    /// The mass at the event.
    pub fn mass(&self) -> fx::Mass {
        fx::Mass::from_bits(self.mass_kg)
    }
}

/// Whether an alarm was raised or cleared.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum AlarmTransition {
    /// The alarm is now active.
    Raised,
    /// The alarm is no longer active.
    Cleared,
}

/// Host → device: are you there? Answered with [`Outcome::Pong`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Ping {
    /// Request tag, echoed in the reply.
    pub tag: u16,
    /// Echoed in the reply.
    pub token: u32,
}

/// Host → device: send your identity ([`Outcome::Identity`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct GetIdentity {
    /// Request tag.
    pub tag: u16,
}

/// Host → device: open a signing session ([`Outcome::Challenge`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct GetChallenge {
    /// Request tag.
    pub tag: u16,
}

/// Host → device: send a piece of the configuration in force
/// ([`Outcome::ConfigPart`]). Reading needs no secret.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct ReadConfig {
    /// Request tag.
    pub tag: u16,
    /// Offset of the piece in the stored prepared configuration, bytes.
    pub offset: u32,
}

/// A piece of the configuration in force, and what the device knows of it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct ConfigPart {
    /// Length of the stored prepared configuration, bytes; 0 when none is
    /// stored (the device then runs without a configuration).
    pub total_len: u32,
    /// Its CRC-32C.
    pub crc: u32,
    /// Where the device took it from: the store's origin code
    /// (`crate::store::Origin`: 0 stored, 1 an older copy after damage,
    /// 2 nothing usable).
    pub origin: u8,
    /// The zero offset of the pressure channel, `fx::Pressure` bits.
    pub zero_pressure: i32,
    /// The zero offset of the temperature channel, `fx::Temperature` bits.
    pub zero_temperature: i32,
    /// Offset of `bytes` in the configuration.
    pub offset: u32,
    /// The piece (at most [`CHUNK_MAX_LEN`] bytes; empty at the end).
    pub bytes: Vec<u8, CHUNK_MAX_LEN>,
}

/// Host → device: a signed command. The command travels as its postcard
/// encoding, and the tag covers `counter` and exactly these bytes (see
/// [`crate::auth`]): the device checks what it received, then decodes it.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Signed {
    /// Request tag.
    pub tag: u16,
    /// The session's command counter (from 1).
    pub counter: u32,
    /// HMAC-SHA-256 tag.
    pub mac: [u8; MAC_LEN],
    /// The command's encoding.
    pub command: Vec<u8, COMMAND_MAX_LEN>,
}

impl Signed {
    /// The encoding of `command` as a signed message carries it.
    pub fn encode_command(command: &Command) -> Result<Vec<u8, COMMAND_MAX_LEN>, crate::Error> {
        let mut buf = [0u8; COMMAND_MAX_LEN];
        let n =
            crate::encode::to_slice(command, &mut buf).map_err(|_| crate::Error::BufferTooSmall)?;
        Vec::from_slice(buf.get(..n).ok_or(crate::Error::BufferTooSmall)?)
            .map_err(|_| crate::Error::BufferTooSmall)
    }

    /// The command (whole encoding, nothing left over).
    pub fn decode_command(&self) -> Result<Command, crate::Error> {
        match postcard::take_from_bytes::<Command>(&self.command) {
            Ok((c, [])) => Ok(c),
            _ => Err(crate::Error::MessageBody),
        }
    }
}

/// The commands that change a device (always signed).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum Command {
    /// One piece of a new prepared configuration (see [`crate::prepared`]).
    /// A piece at offset 0 starts a new load into the storage slot not in
    /// use; the last piece completes it: the device reads it back, checks
    /// its CRC-32C and validates it, then commits it (power-safe) and runs
    /// it. The zero offsets are kept.
    ConfigChunk {
        /// Offset of this piece, bytes.
        offset: u32,
        /// Length of the whole configuration, bytes.
        total_len: u32,
        /// CRC-32C of the whole configuration.
        blob_crc: u32,
        /// The piece.
        bytes: Vec<u8, CHUNK_MAX_LEN>,
    },
    /// Take the present reading of a channel as its zero: the barometric
    /// pressure for the pressure channel (the transducer vented to the
    /// atmosphere), 0 °C for the temperature channel (an ice bath).
    /// Refused when the present reading is not near that zero.
    ZeroCalibration {
        /// The channel.
        channel: SensorChannel,
    },
    /// Clear both channels' zero offsets.
    ClearZero,
    /// Clear latched alarms.
    ClearAlarms,
    /// Restart after the reply.
    Reboot,
}

/// A sensor channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum SensorChannel {
    /// The pressure sensor.
    Pressure,
    /// The temperature sensor.
    Temperature,
}

/// Host → device: raw converter codes to take as a sample (devices with
/// [`capability::SAMPLE_INJECTION`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct InjectSample {
    /// Request tag.
    pub tag: u16,
    /// The sample's time on the device's clock, ms.
    pub at_ms: u64,
    /// Pressure converter code.
    pub pressure: u32,
    /// Temperature converter code.
    pub temperature: u32,
}

/// Why the device last started.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ResetReason {
    /// Power on (or a reset the board cannot tell apart).
    PowerOn,
    /// A requested restart ([`Command::Reboot`], a new gas model).
    Requested,
    /// A panic (the location is in the report).
    Panic,
    /// The watchdog expired.
    Watchdog,
    /// A hard fault.
    HardFault,
    /// The board's reset cause reads as nothing known.
    Unknown,
}

impl ResetReason {
    /// True for the restarts that follow a fault.
    pub const fn is_fault(self) -> bool {
        matches!(
            self,
            ResetReason::Panic | ResetReason::Watchdog | ResetReason::HardFault
        )
    }
}

/// How and how often the device started.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct BootReport {
    /// Why the device last started.
    pub reason: ResetReason,
    /// Starts since the boot record was created.
    pub boots: u32,
    /// Line of the panic that caused the start (0: none).
    pub fault_line: u32,
    /// Source file of that panic (its end).
    pub fault_file: String<FAULT_FILE_MAX_LEN>,
}

impl BootReport {
    /// A report without a fault location.
    pub fn new(reason: ResetReason, boots: u32) -> BootReport {
        BootReport {
            reason,
            boots,
            fault_line: 0,
            fault_file: String::new(),
        }
    }

    /// With the location of a panic (the file name keeps its end).
    pub fn with_location(mut self, file: &str, line: u32) -> BootReport {
        let mut start = file.len().saturating_sub(FAULT_FILE_MAX_LEN);
        while !file.is_char_boundary(start) {
            start += 1;
        }
        self.fault_file.clear();
        let _ = self.fault_file.push_str(file.get(start..).unwrap_or(""));
        self.fault_line = line;
        self
    }
}

/// Device → host, once after every start.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Boot {
    /// Serial number.
    pub serial: u64,
    /// Firmware version.
    pub firmware_version: [u8; 3],
    /// How it started.
    pub report: BootReport,
}

/// Host → device: send your diagnostics ([`Outcome::Diagnostics`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct GetDiagnostics {
    /// Request tag.
    pub tag: u16,
}

/// What the device knows of itself.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Diagnostics {
    /// Time since the start, ms.
    pub uptime_ms: u64,
    /// How it started.
    pub boot: BootReport,
    /// Deepest stack use since the start, bytes (0: not measured).
    pub stack_peak_bytes: u32,
    /// Stack size, bytes.
    pub stack_size_bytes: u32,
    /// Frames received and decoded.
    pub frames: u32,
    /// Damaged frames received.
    pub bad_frames: u32,
    /// Samples taken.
    pub samples: u32,
}

/// Device → host: the answer to a request.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Reply {
    /// The request's tag.
    pub tag: u16,
    /// The answer.
    pub outcome: Outcome,
}

/// The answer to a request.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum Outcome {
    /// Answer to [`Ping`].
    Pong {
        /// The ping's token.
        token: u32,
    },
    /// Answer to [`GetIdentity`].
    Identity(Identity),
    /// Answer to [`GetChallenge`]: a fresh nonce for the next signed
    /// commands.
    Challenge {
        /// The nonce.
        nonce: [u8; NONCE_LEN],
        /// How long the session stays open, ms.
        valid_ms: u32,
    },
    /// Answer to [`ReadConfig`].
    ConfigPart(ConfigPart),
    /// A signed command was carried out; the device's own signature over
    /// its serial, the session nonce and the counter proves it.
    Done {
        /// The command's counter.
        counter: u32,
        /// The device's confirmation tag.
        mac: [u8; MAC_LEN],
    },
    /// Answer to [`InjectSample`]: taken (its telemetry follows).
    Taken,
    /// Answer to [`GetDiagnostics`].
    Diagnostics(Diagnostics),
    /// The request was refused; nothing changed.
    Refused(Refusal),
}

/// Why a request was refused.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub enum Refusal {
    /// No signing session is open (ask for a challenge first).
    NoSession,
    /// The signature does not match.
    BadSignature,
    /// The counter was used before.
    Replay,
    /// Too many failed signatures: signed commands are refused for a while.
    LockedOut {
        /// Time until they are taken again, ms.
        retry_after_ms: u32,
    },
    /// A value is out of its range (or not a number).
    OutOfRange {
        /// Which one.
        field: Quantity,
    },
    /// The configuration does not validate; nothing was committed.
    BadConfig {
        /// Why.
        reason: ConfigFault,
    },
    /// The device cannot do this (a capability it lacks).
    Unsupported,
    /// A configuration piece arrived out of order.
    ChunkOrder {
        /// The offset the device expects.
        expected: u32,
    },
    /// The configuration's CRC-32C does not match.
    BlobCrc,
    /// The configuration is larger than the device can store.
    BlobTooLarge,
    /// The storage failed; nothing was committed.
    Storage,
    /// A zero calibration was refused: the present reading is too far from
    /// the zero it would be taken as (the pressure transducer is not vented
    /// to the atmosphere, or the temperature sensor is not at 0 °C), or
    /// there is no present reading.
    NotAtZero {
        /// The channel.
        channel: SensorChannel,
        /// The correction it would have taken, format bits
        /// (`fx::Pressure` or `fx::Temperature`); 0 when there is no
        /// reading.
        offset: i64,
        /// The largest correction accepted, the same bits.
        limit: u32,
    },
}

/// Why a configuration does not validate on the device: the core's typed
/// reason, carried as such (a host shows its [`text`](ConfigFault::text)).
/// New cases are appended, never inserted (postcard sends the index).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[non_exhaustive]
pub enum ConfigFault {
    /// A value out of its range or not a number.
    Value(Quantity),
    /// Bytes that do not form what they should.
    Malformed(Defect),
    /// A gas-model table or blob refused.
    ModelData(ModelDefect),
    /// The gas model has no usable answer at a condition.
    ModelUnusable(Condition),
    /// The configuration's content, otherwise unnamed.
    Content,
    /// The configuration's checksum.
    Checksum,
    /// The configuration's format version.
    FormatVersion,
}

impl ConfigFault {
    /// What is at fault, in words.
    pub const fn text(self) -> &'static str {
        match self {
            ConfigFault::Value(q) => q.text(),
            ConfigFault::Malformed(d) => d.text(),
            ConfigFault::ModelData(d) => d.text(),
            ConfigFault::ModelUnusable(c) => c.text(),
            ConfigFault::Content => "configuration content",
            ConfigFault::Checksum => "configuration checksum",
            ConfigFault::FormatVersion => "configuration format version",
        }
    }
}

impl core::fmt::Display for ConfigFault {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(self.text())
    }
}
