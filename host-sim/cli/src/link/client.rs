//! Requests and signed commands from the host.

use std::time::{Duration, Instant};

use isochor_core::app::Zero;
use isochor_core::auth::{self, Secret};
use isochor_core::link::{
    CHUNK_MAX_LEN, Command, ConfigPart, Diagnostics, FromDevice, GetChallenge, GetDiagnostics,
    GetIdentity, Identity, InjectSample, NONCE_LEN, Outcome, Ping, ReadConfig, Refusal,
    SensorChannel, Signed, ToDevice, Wire,
};
use isochor_core::prepared::{GaugeConfig, Prepared, PreparedBuf, Report};
use isochor_core::store::Origin;

use super::transport::{Link, LinkEvent, Transport};
use crate::Error;

/// The configuration in force on a device, as read back.
#[derive(Clone, Debug, PartialEq)]
pub struct DeviceConfig {
    /// The prepared configuration (empty when the device holds none).
    pub blob: Vec<u8>,
    /// Its CRC-32C as the device states it.
    pub crc: u32,
    /// Where the device took it from.
    pub origin: Origin,
    /// The zero offsets of the two channels.
    pub zero: Zero,
}

impl DeviceConfig {
    /// The physical configuration it was prepared from (`None` when the
    /// device holds none).
    pub fn config(&self) -> Result<Option<GaugeConfig>, Error> {
        if self.blob.is_empty() {
            return Ok(None);
        }
        Ok(Some(Prepared::new(&self.blob[..])?.source_config()?))
    }
}

/// Talks to one device: pairs requests with replies by tag, opens signing
/// sessions, signs commands and checks the device's confirmations.
pub struct Client<T> {
    link: Link<T>,
    next_tag: u16,
    timeout: Duration,
    secret: Option<Secret>,
    serial: Option<u64>,
    session: Option<([u8; NONCE_LEN], u32)>,
    /// Messages that arrived while waiting for replies (telemetry, alarms).
    pub unsolicited: Vec<FromDevice>,
}

impl<T: Transport> Client<T> {
    /// A client over `transport`, waiting at most `timeout` for each reply.
    pub fn new(transport: T, timeout: Duration) -> Client<T> {
        Client {
            link: Link::new(transport),
            next_tag: 1,
            timeout,
            secret: None,
            serial: None,
            session: None,
            unsolicited: Vec::new(),
        }
    }

    /// Sets the device secret used to sign commands.
    pub fn with_secret(mut self, secret: Secret) -> Client<T> {
        self.secret = Some(secret);
        self
    }

    /// The link (for statistics).
    pub fn link(&self) -> &Link<T> {
        &self.link
    }

    /// Sends a request and waits for the reply with its tag.
    pub fn request(&mut self, build: impl FnOnce(u16) -> ToDevice) -> Result<Outcome, Error> {
        let tag = self.next_tag;
        self.next_tag = self.next_tag.wrapping_add(1).max(1);
        let msg = build(tag);
        self.link.send(&msg)?;
        let deadline = Instant::now() + self.timeout;
        loop {
            let left = deadline.saturating_duration_since(Instant::now());
            match self.link.next_event(left)? {
                Some(LinkEvent::Message(FromDevice::Reply(r))) if r.tag == tag => {
                    return Ok(r.outcome);
                }
                Some(LinkEvent::Message(other)) => self.unsolicited.push(other),
                Some(_) => {} // damaged frames: counted in the link statistics
                None if self.link.closed() => {
                    return Err(Error::Link("the device closed the link".into()));
                }
                None => {
                    return Err(Error::Link(format!(
                        "no reply to {} within {} ms",
                        msg.kind().name(),
                        self.timeout.as_millis()
                    )));
                }
            }
        }
    }

    /// Ping: returns the round-trip time.
    pub fn ping(&mut self, token: u32) -> Result<Duration, Error> {
        let t0 = Instant::now();
        match self.request(|tag| ToDevice::Ping(Ping { tag, token }))? {
            Outcome::Pong { token: t } if t == token => Ok(t0.elapsed()),
            other => Err(unexpected(other)),
        }
    }

    /// The device's identity.
    pub fn identity(&mut self) -> Result<Identity, Error> {
        match self.request(|tag| ToDevice::GetIdentity(GetIdentity { tag }))? {
            Outcome::Identity(id) => {
                self.serial = Some(id.serial);
                Ok(id)
            }
            other => Err(unexpected(other)),
        }
    }

    /// The device's diagnostics (its latest start, stack use, link counters).
    pub fn diagnostics(&mut self) -> Result<Diagnostics, Error> {
        match self.request(|tag| ToDevice::GetDiagnostics(GetDiagnostics { tag }))? {
            Outcome::Diagnostics(d) => Ok(d),
            other => Err(unexpected(other)),
        }
    }

    /// Sends converter codes as one sample taken at `at_ms` on the device's
    /// clock (devices with sample injection); returns once the device took
    /// it.
    pub fn inject(&mut self, at_ms: u64, pressure: u32, temperature: u32) -> Result<(), Error> {
        match self.request(|tag| {
            ToDevice::InjectSample(InjectSample {
                tag,
                at_ms,
                pressure,
                temperature,
            })
        })? {
            Outcome::Taken => Ok(()),
            other => Err(unexpected(other)),
        }
    }

    /// Takes the messages that arrived unasked (telemetry, alarms, boot).
    pub fn take_unsolicited(&mut self) -> Vec<FromDevice> {
        std::mem::take(&mut self.unsolicited)
    }

    /// Waits up to `timeout` for unasked messages and keeps them (see
    /// [`Client::take_unsolicited`]); returns how many arrived.
    pub fn collect(&mut self, timeout: Duration) -> Result<usize, Error> {
        let deadline = Instant::now() + timeout;
        let mut n = 0;
        loop {
            let left = deadline.saturating_duration_since(Instant::now());
            if left.is_zero() {
                return Ok(n);
            }
            match self.link.next_event(left)? {
                Some(LinkEvent::Message(m)) => {
                    self.unsolicited.push(m);
                    n += 1;
                }
                Some(_) => {}
                None => return Ok(n),
            }
        }
    }

    /// Sends raw bytes as they are (tests: damaged frames, noise).
    pub fn send_raw(&mut self, bytes: &[u8]) -> Result<(), Error> {
        self.link.send_raw(bytes)
    }

    /// Forgets the signing session (the next signed command opens a new one).
    pub fn forget_session(&mut self) {
        self.session = None;
    }

    /// Reads the configuration in force, piece by piece: the prepared
    /// blob, where the device took it from and the zero offsets.
    pub fn read_config(&mut self) -> Result<DeviceConfig, Error> {
        let mut blob = Vec::new();
        let mut first: Option<ConfigPart> = None;
        loop {
            let offset = blob.len() as u32;
            let part = match self.request(|tag| ToDevice::ReadConfig(ReadConfig { tag, offset }))? {
                Outcome::ConfigPart(p) if p.offset == offset => p,
                other => return Err(unexpected(other)),
            };
            if let Some(f) = &first
                && (f.total_len, f.crc) != (part.total_len, part.crc)
            {
                return Err(Error::Link(
                    "the configuration changed on the device while it was read".into(),
                ));
            }
            blob.extend_from_slice(&part.bytes);
            let done = part.bytes.is_empty() || blob.len() >= part.total_len as usize;
            first.get_or_insert(part);
            if done {
                break;
            }
        }
        let head = first.ok_or_else(|| Error::Link("no configuration piece".into()))?;
        if blob.len() != head.total_len as usize
            || (head.total_len > 0 && isochor_core::checksum::crc32c(&blob) != head.crc)
        {
            return Err(Error::Link(
                "the configuration read back does not match its length or CRC-32C".into(),
            ));
        }
        Ok(DeviceConfig {
            blob,
            crc: head.crc,
            origin: Origin::from_code(head.origin),
            zero: Zero {
                pressure: head.zero_pressure,
                temperature: head.zero_temperature,
            },
        })
    }

    /// Sends a signed command; returns once the device has confirmed it with
    /// a valid signature of its own.
    pub fn signed(&mut self, command: Command) -> Result<(), Error> {
        let Some(secret) = self.secret.clone() else {
            return Err(Error::NoSecret);
        };
        let serial = match self.serial {
            Some(s) => s,
            None => self.identity()?.serial,
        };
        let bytes = Signed::encode_command(&command)?;
        for attempt in 0..2 {
            let (nonce, counter) = match self.session {
                Some(s) => s,
                None => self.open_session()?,
            };
            let mac = auth::sign_command(&secret, serial, &nonce, counter, &bytes);
            let outcome = self.request(|tag| {
                ToDevice::Signed(Signed {
                    tag,
                    counter,
                    mac,
                    command: bytes.clone(),
                })
            })?;
            match outcome {
                Outcome::Done { counter: c, mac } if c == counter => {
                    if !auth::verify_done(&secret, serial, &nonce, counter, &mac) {
                        self.session = None;
                        return Err(Error::Link(
                            "the device's confirmation signature does not match: \
                             not the device that holds this secret"
                                .into(),
                        ));
                    }
                    self.session = Some((nonce, counter + 1));
                    return Ok(());
                }
                // The session expired or the device restarted: open a new one once.
                Outcome::Refused(Refusal::NoSession) if attempt == 0 => self.session = None,
                other => {
                    self.session = None;
                    return Err(unexpected(other));
                }
            }
        }
        Err(Error::Link("no signing session could be opened".into()))
    }

    fn open_session(&mut self) -> Result<([u8; NONCE_LEN], u32), Error> {
        match self.request(|tag| ToDevice::GetChallenge(GetChallenge { tag }))? {
            Outcome::Challenge { nonce, .. } => {
                self.session = Some((nonce, 1));
                Ok((nonce, 1))
            }
            other => Err(unexpected(other)),
        }
    }

    /// Prepares `config` and loads it into the device (signed, in pieces);
    /// the device checks it whole before it commits it and runs it, and
    /// keeps its zero offsets. `progress` sees the bytes sent so far.
    /// Returns how closely the prepared configuration follows the `f64`
    /// paths.
    pub fn configure(
        &mut self,
        config: &GaugeConfig,
        progress: &mut dyn FnMut(usize, usize),
    ) -> Result<Report, Error> {
        let (blob, report) = PreparedBuf::build(config)?;
        self.load_config(blob.bytes(), progress)?;
        Ok(report)
    }

    /// Loads a prepared configuration blob in pieces (signed); `progress`
    /// sees the bytes sent so far and the total.
    pub fn load_config(
        &mut self,
        blob: &[u8],
        progress: &mut dyn FnMut(usize, usize),
    ) -> Result<(), Error> {
        let total_len = u32::try_from(blob.len())
            .ok()
            .filter(|&n| n > 0)
            .ok_or_else(|| Error::Invalid("the configuration is empty or too large".into()))?;
        let blob_crc = isochor_core::checksum::crc32c(blob);
        for (i, piece) in blob.chunks(CHUNK_MAX_LEN).enumerate() {
            let offset = (i * CHUNK_MAX_LEN) as u32;
            self.signed(Command::ConfigChunk {
                offset,
                total_len,
                blob_crc,
                bytes: heapless::Vec::from_slice(piece)
                    .map_err(|_| Error::Invalid("piece too large".into()))?,
            })?;
            progress(offset as usize + piece.len(), blob.len());
        }
        Ok(())
    }
}

fn unexpected(outcome: Outcome) -> Error {
    match outcome {
        Outcome::Refused(r @ Refusal::OutOfRange { .. }) => Error::OutOfRange(refusal_text(&r)),
        Outcome::Refused(r) => Error::Refused(refusal_text(&r)),
        other => Error::Link(format!("unexpected reply: {other:?}")),
    }
}

/// A sentence for a refusal.
pub fn refusal_text(r: &Refusal) -> String {
    match r {
        Refusal::NoSession => "no signing session (ask for a challenge first)".into(),
        Refusal::BadSignature => "signature refused: wrong secret for this device".into(),
        Refusal::Replay => "command counter out of order (replayed command?)".into(),
        Refusal::LockedOut { retry_after_ms } => format!(
            "locked out after failed signatures: retry in {:.1} s",
            *retry_after_ms as f64 / 1000.0
        ),
        Refusal::OutOfRange { field } => format!("{field} is outside its accepted range"),
        Refusal::BadConfig { reason } => format!(
            "the configuration does not validate on the device ({reason}): nothing committed"
        ),
        Refusal::Unsupported => "the device does not support this request".into(),
        Refusal::ChunkOrder { expected } => {
            format!("configuration piece out of order (the device expects offset {expected})")
        }
        Refusal::BlobCrc => "configuration CRC-32C mismatch: nothing stored".into(),
        Refusal::BlobTooLarge => "the configuration is larger than the device can store".into(),
        Refusal::Storage => "flash write failed on the device; the previous value is kept".into(),
        Refusal::NotAtZero {
            channel,
            offset,
            limit,
        } => not_at_zero_text(*channel, *offset, *limit),
    }
}

/// Why a zero calibration was refused, and what to do.
fn not_at_zero_text(channel: SensorChannel, offset: i64, limit: u32) -> String {
    match channel {
        SensorChannel::Pressure if limit == 0 => "pressure zero refused: the device has no \
             valid pressure reading (no configuration, or the sensor is faulted). Nothing was \
             changed."
            .into(),
        SensorChannel::Temperature if limit == 0 => "temperature zero refused: the device has \
             no valid temperature reading (no configuration, or the sensor is faulted). Nothing \
             was changed."
            .into(),
        SensorChannel::Pressure => format!(
            "pressure zero refused: the transducer reads {:+.3} bar from the barometric \
             pressure; a zero is only taken within {:.3} bar of it. The port is not at \
             atmospheric pressure: close the vessel valve, vent the transducer to atmosphere \
             (open its bleed or disconnect it from the vessel), wait for the reading to \
             settle, and try again. Nothing was changed.",
            -(offset as f64) / 16.0 / 1e5,
            f64::from(limit) / 16.0 / 1e5
        ),
        SensorChannel::Temperature => format!(
            "temperature zero refused: the sensor reads {:+.2} K from 0 °C; a zero is only \
             taken within {:.2} K of it. Put the sensor in a stirred bath of crushed ice \
             topped up with water, wait until the reading settles, and try again. Nothing was \
             changed.",
            -(offset as f64) / 65_536.0,
            f64::from(limit) / 65_536.0
        ),
    }
}
