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
use crate::track::fixed::TrackFx;
use crate::{Status, fx};

/// Largest record body carried by [`ReadRecord`] replies and
/// [`Command::WriteRecord`], bytes (postcard-encoded record). Set by the
/// largest record, a sensor calibration with a bridge transducer (195 bytes
/// with every integer at its longest varint); frames stay within 256 bytes.
pub const RECORD_MAX_LEN: usize = 196;
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
/// Longest source-file name a fault report carries, bytes (longer names keep
/// their end).
pub const FAULT_FILE_MAX_LEN: usize = 48;

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
    /// The device answers [`GetDiagnostics`](super::GetDiagnostics).
    pub const DIAGNOSTICS: u32 = 1 << 5;
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
/// empty and uncertainties from the tracking stage
/// ([`crate::track::fixed::TrackFx`], see [`Telemetry::from_track`]). Values
/// whose status says they are not valid (see
/// [`crate::Status::CONTENT_INVALID`]) must not be shown as numbers; `None`
/// means not known yet (the rate needs a few blocks, the uncertainty one).
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
    /// raw bits of `I32F32` ([`fx::MassRate`]); `None` until the rate window
    /// has enough blocks.
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
    /// Status word bits ([`crate::Status::bits`]).
    pub status: u32,
}

/// Whole seconds of a span, saturating at `u32::MAX`.
fn seconds(ms: crate::time::Millis) -> u32 {
    u32::try_from(ms.0 / 1000).unwrap_or(u32::MAX)
}

impl Telemetry {
    /// A telemetry frame carrying a content estimate alone: rate, time to
    /// empty and uncertainties unknown.
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
            rate_kg_h: None,
            rate_uncertainty_kg_h: None,
            time_to_empty_s: None,
            time_to_empty_earliest_s: None,
            time_to_empty_latest_s: None,
            mass_uncertainty_kg: None,
            fill_fraction_uncertainty: None,
            status: c.status.bits(),
        }
    }

    /// The telemetry of one tracker output: content, rate (as a change of
    /// the mass: negative while emptying), time to empty with its bounds,
    /// uncertainties and the status, with `device` (configuration, storage,
    /// link flags) added. Before the first usable sample the content fields
    /// are zero and only the status speaks.
    pub fn from_track(seq: u32, t: &TrackFx, device: Status) -> Telemetry {
        let mut out = match &t.content {
            Some(c) => Telemetry::from_content(seq, t.at.as_millis(), c),
            None => Telemetry {
                seq,
                uptime_ms: t.at.as_millis(),
                ..Telemetry::default()
            },
        };
        if let Some(r) = &t.rate {
            out.rate_kg_h = Some(r.kg_h.to_bits().saturating_neg());
            out.rate_uncertainty_kg_h = Some(r.u_kg_h.to_bits());
        }
        if let Some(tte) = &t.time_to_empty {
            out.time_to_empty_s = Some(seconds(tte.expected));
            out.time_to_empty_earliest_s = Some(seconds(tte.earliest));
            out.time_to_empty_latest_s = tte.latest.map(seconds);
        }
        if let Some(u) = &t.uncertainty {
            out.mass_uncertainty_kg = Some(u.mass_kg.to_bits());
            out.fill_fraction_uncertainty = Some(u.fill_fraction.to_bits());
        }
        out.status = (t.status | device).bits();
        out
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
    /// Which alarm: the [`crate::alarm::AlarmKind`] code (its bit in the
    /// alarm set: 0 `not_settled`, 1 `leak`, 2 `low_content`,
    /// 3 `over_pressure`, 4 `over_temperature`, 5 `under_temperature`,
    /// 6 `sensor_fault`).
    pub alarm: u16,
    /// Raised or cleared.
    pub transition: AlarmTransition,
    /// Status word bits at the event.
    pub status: u32,
    /// Mass of gas at the event, kg: raw bits of `U24F40` ([`fx::Mass`]).
    pub mass_kg: u64,
}

impl AlarmEvent {
    /// The frame of one tracker event, with the status and mass at it.
    pub fn from_event(
        seq: u32,
        e: &crate::alarm::AlarmEvent,
        status: Status,
        mass: fx::Mass,
    ) -> AlarmEvent {
        AlarmEvent {
            seq,
            uptime_ms: e.at.as_millis(),
            alarm: e.kind as u16,
            transition: if e.raised {
                AlarmTransition::Raised
            } else {
                AlarmTransition::Cleared
            },
            status: status.bits(),
            mass_kg: mass.to_bits(),
        }
    }

    /// The alarm kind of the code, `None` for codes this version does not know.
    pub fn kind(&self) -> Option<crate::alarm::AlarmKind> {
        crate::alarm::AlarmKind::ALL
            .into_iter()
            .find(|k| *k as u16 == self.alarm)
    }
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
    /// Take the present reading of a sensor channel as its zero reference:
    /// the barometric pressure for the pressure channel (the transducer
    /// vented to atmosphere), 0 °C for the temperature channel (an ice
    /// bath). Refused with [`Refusal::ZeroNotPlausible`] when the reading is
    /// too far from that reference to be it.
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
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
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

/// Why the device started (kept across the restart in memory a reset does
/// not clear, so the next boot can tell).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ResetReason {
    /// Power was applied (nothing was kept from before).
    PowerOn,
    /// A signed reboot command, or a restart to use a new gas model.
    Requested,
    /// The firmware panicked; the report names where.
    Panic,
    /// The watchdog was not fed in time.
    Watchdog,
    /// A processor fault (hard fault) stopped the firmware.
    HardFault,
    /// A reset whose cause the firmware cannot tell (reset pin, debugger).
    Unknown,
}

impl ResetReason {
    /// True for restarts caused by a fault of the firmware.
    pub const fn is_fault(self) -> bool {
        matches!(
            self,
            ResetReason::Panic | ResetReason::Watchdog | ResetReason::HardFault
        )
    }
}

/// What the device knows about its latest start.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct BootReport {
    /// Why it started.
    pub reason: ResetReason,
    /// Starts since power was applied (1 after power-on).
    pub boots: u32,
    /// For a panic: the source line, else 0.
    pub fault_line: u32,
    /// For a panic: the source file (its last [`FAULT_FILE_MAX_LEN`] bytes),
    /// else empty.
    pub fault_file: String<FAULT_FILE_MAX_LEN>,
}

impl BootReport {
    /// A report of a start with no fault.
    pub fn new(reason: ResetReason, boots: u32) -> BootReport {
        BootReport {
            reason,
            boots,
            fault_line: 0,
            fault_file: String::new(),
        }
    }

    /// Sets the fault location, keeping the end of a long file name.
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

/// Device → host, once after every start: who started and why.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Boot {
    /// Serial number of the device.
    pub serial: u64,
    /// Firmware version, major.minor.patch.
    pub firmware_version: [u8; 3],
    /// The start.
    pub report: BootReport,
}

/// Asks for the device's [`Diagnostics`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct GetDiagnostics {
    /// Request tag, echoed in the reply.
    pub tag: u16,
}

/// The device's health: its latest start, stack use and link counters.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
pub struct Diagnostics {
    /// Time since the device started, ms (its own clock).
    pub uptime_ms: u64,
    /// The latest start.
    pub boot: BootReport,
    /// Deepest stack use measured since the start (stack painting), bytes.
    pub stack_peak_bytes: u32,
    /// Stack size, bytes.
    pub stack_size_bytes: u32,
    /// Frames received and decoded.
    pub frames: u32,
    /// Frames received that did not decode (COBS, length, CRC, version, kind,
    /// body) or were too long.
    pub bad_frames: u32,
    /// Samples taken (converted and tracked).
    pub samples: u32,
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
    /// Answer to [`GetDiagnostics`].
    Diagnostics(Diagnostics),
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
    /// The gas-model blob is not a table this device can use (format,
    /// version, checksum or content); nothing was committed.
    BadGasModel,
    /// A zero calibration was refused: the sensor does not read near the
    /// zero reference (the transducer is not vented to atmosphere, or the
    /// temperature sensor is not in an ice bath). Nothing was changed.
    ZeroNotPlausible(ZeroRefusal),
}

/// Why a zero calibration was refused: the readings and the bound, as raw
/// bits of the channel's format: `fx::Pressure` (`U28F4`, Pa, absolute) for
/// the pressure channel, `fx::Temperature` (`U16F16`, K) for the
/// temperature channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ZeroRefusal {
    /// The channel.
    pub channel: SensorChannel,
    /// The present reading, after the calibration correction in use.
    pub reading: u32,
    /// The present reading as the front-end gives it, before any correction.
    pub uncorrected: u32,
    /// The zero reference: the barometric pressure, absolute (pressure), or
    /// 273.15 K (temperature).
    pub reference: u32,
    /// The largest distance of either reading from the reference that a zero
    /// calibration accepts.
    pub limit: u32,
}

impl ZeroRefusal {
    /// A value of this refusal in SI units (Pa or K); a host helper (float).
    pub fn si(&self, bits: u32) -> f64 {
        let scale = match self.channel {
            SensorChannel::Pressure => 1.0 / 16.0,
            SensorChannel::Temperature => 1.0 / 65_536.0,
        };
        f64::from(bits) * scale
    }
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
