//! Requests and signed commands from the host.

use std::time::{Duration, Instant};

use isochor_core::auth::{self, Secret};
use isochor_core::constants::ZERO_CELSIUS_K;
use isochor_core::link::{
    CHUNK_MAX_LEN, Command, Diagnostics, GetChallenge, GetDiagnostics, GetIdentity, Identity,
    InjectSample, Message, NONCE_LEN, Origin, Outcome, Ping, RawCode, ReadRecord, Refusal,
    SensorChannel, Signed, ZeroRefusal,
};
use isochor_core::store::{Record, decode_record};

use super::transport::{Link, LinkEvent, Transport};
use crate::Error;

/// A record as read from the device.
#[derive(Clone, Debug, PartialEq)]
pub struct RecordRead<R> {
    /// The value.
    pub value: R,
    /// Where the device got it.
    pub origin: Origin,
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
    pub unsolicited: Vec<Message>,
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
    pub fn request(&mut self, build: impl FnOnce(u16) -> Message) -> Result<Outcome, Error> {
        let tag = self.next_tag;
        self.next_tag = self.next_tag.wrapping_add(1).max(1);
        let msg = build(tag);
        self.link.send(&msg)?;
        let deadline = Instant::now() + self.timeout;
        loop {
            let left = deadline.saturating_duration_since(Instant::now());
            match self.link.next_event(left)? {
                Some(LinkEvent::Message(Message::Reply(r))) if r.tag == tag => {
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
        match self.request(|tag| Message::Ping(Ping { tag, token }))? {
            Outcome::Pong { token: t } if t == token => Ok(t0.elapsed()),
            other => Err(unexpected(other)),
        }
    }

    /// The device's identity.
    pub fn identity(&mut self) -> Result<Identity, Error> {
        match self.request(|tag| Message::GetIdentity(GetIdentity { tag }))? {
            Outcome::Identity(id) => {
                self.serial = Some(id.serial);
                Ok(id)
            }
            other => Err(unexpected(other)),
        }
    }

    /// The device's diagnostics (its latest start, stack use, link counters).
    pub fn diagnostics(&mut self) -> Result<Diagnostics, Error> {
        match self.request(|tag| Message::GetDiagnostics(GetDiagnostics { tag }))? {
            Outcome::Diagnostics(d) => Ok(d),
            other => Err(unexpected(other)),
        }
    }

    /// Sends raw codes as one sample taken at `at_ms` on the device's clock
    /// (devices with sample injection); returns once the device took it.
    pub fn inject(&mut self, at_ms: u64, codes: &[RawCode]) -> Result<(), Error> {
        let codes = heapless::Vec::from_slice(codes)
            .map_err(|_| Error::Invalid("too many codes in one sample".into()))?;
        match self.request(|tag| {
            Message::InjectSample(InjectSample {
                tag,
                at_ms,
                codes: codes.clone(),
            })
        })? {
            Outcome::Taken => Ok(()),
            other => Err(unexpected(other)),
        }
    }

    /// Takes the messages that arrived unasked (telemetry, alarms, boot).
    pub fn take_unsolicited(&mut self) -> Vec<Message> {
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

    /// Reads a record of type `R`.
    pub fn read_record<R: Record>(&mut self) -> Result<RecordRead<R>, Error> {
        let kind = R::KIND.0;
        match self.request(|tag| Message::ReadRecord(ReadRecord { tag, kind }))? {
            Outcome::Record {
                kind: k,
                version,
                origin,
                bytes,
            } if k == kind => {
                let value: R = decode_record(version, &bytes)?;
                Ok(RecordRead { value, origin })
            }
            other => Err(unexpected(other)),
        }
    }

    /// Sends a signed command; returns once the device has confirmed it with
    /// a valid signature of its own.
    pub fn signed(&mut self, command: Command) -> Result<(), Error> {
        let Some(secret) = self.secret.clone() else {
            return Err(Error::Invalid(
                "this command needs the device secret (--secret-file or ISOCHOR_SECRET)".into(),
            ));
        };
        let serial = match self.serial {
            Some(s) => s,
            None => self.identity()?.serial,
        };
        for attempt in 0..2 {
            let (nonce, counter) = match self.session {
                Some(s) => s,
                None => self.open_session()?,
            };
            let mac = auth::sign_command(&secret, serial, &nonce, counter, &command)?;
            let outcome = self.request(|tag| {
                Message::Signed(Signed {
                    tag,
                    counter,
                    mac,
                    command: command.clone(),
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
        match self.request(|tag| Message::GetChallenge(GetChallenge { tag }))? {
            Outcome::Challenge { nonce, .. } => {
                self.session = Some((nonce, 1));
                Ok((nonce, 1))
            }
            other => Err(unexpected(other)),
        }
    }

    /// Writes a record (validated here first, and again on the device).
    pub fn write_record<R: Record>(&mut self, value: &R) -> Result<(), Error> {
        self.signed(Command::write_record(value)?)
    }

    /// Loads a gas-model blob in chunks; `progress` sees bytes sent so far.
    pub fn load_gas_model(
        &mut self,
        blob: &[u8],
        progress: &mut dyn FnMut(usize),
    ) -> Result<(), Error> {
        let total_len = u32::try_from(blob.len())
            .ok()
            .filter(|&n| n > 0)
            .ok_or_else(|| Error::Invalid("gas-model blob is empty or too large".into()))?;
        let blob_crc = isochor_core::checksum::crc32c(blob);
        for (i, piece) in blob.chunks(CHUNK_MAX_LEN).enumerate() {
            let offset = (i * CHUNK_MAX_LEN) as u32;
            self.signed(Command::GasModelChunk {
                offset,
                total_len,
                blob_crc,
                bytes: heapless::Vec::from_slice(piece)
                    .map_err(|_| Error::Invalid("chunk too large".into()))?,
            })?;
            progress(offset as usize + piece.len());
        }
        Ok(())
    }
}

fn unexpected(outcome: Outcome) -> Error {
    match outcome {
        Outcome::Refused(r @ Refusal::OutOfRange { .. }) => {
            Error::Invalid(format!("device refused: {}", refusal_text(&r)))
        }
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
        Refusal::BadRecord => "record not understood by the device (kind or version)".into(),
        Refusal::Unsupported => "the device does not support this request".into(),
        Refusal::ChunkOrder { expected } => {
            format!("gas-model piece out of order (device expects offset {expected})")
        }
        Refusal::BlobCrc => "gas-model blob CRC mismatch: nothing stored".into(),
        Refusal::BlobTooLarge => "gas-model blob larger than the device's slot".into(),
        Refusal::Storage => "flash write failed on the device; previous value kept".into(),
        Refusal::BadGasModel => {
            "not a gas-model table this device can use (format, version, checksum or content): nothing committed".into()
        }
        Refusal::ZeroNotPlausible(z) => zero_refusal_text(z),
    }
}

/// The sentence for a refused zero calibration: what the sensor reads, how
/// far that is from the zero reference, and what to do.
pub fn zero_refusal_text(z: &ZeroRefusal) -> String {
    let (reading, raw, reference, limit) = (
        z.si(z.reading),
        z.si(z.uncorrected),
        z.si(z.reference),
        z.si(z.limit),
    );
    let farther = if (raw - reference).abs() > (reading - reference).abs() {
        raw
    } else {
        reading
    };
    match z.channel {
        SensorChannel::Pressure => {
            let bar = |pa: f64| format!("{:.3} bar", pa / 1e5);
            let own = if (raw - reading).abs() > 1.0 {
                format!(" ({} abs before its calibration correction)", bar(raw))
            } else {
                String::new()
            };
            format!(
                "pressure zero refused: the transducer reads {} abs{own}, {} from the \
                 barometric pressure {} abs; a zero is only taken within {} of it. The port \
                 is not at atmospheric pressure: close the vessel valve, vent the transducer \
                 to atmosphere (open its bleed or disconnect it from the vessel), wait for \
                 the reading to settle, and try again. Nothing was changed.",
                bar(reading),
                bar((farther - reference).abs()),
                bar(reference),
                bar(limit)
            )
        }
        SensorChannel::Temperature => {
            let c = |k: f64| format!("{:.2} °C", k - ZERO_CELSIUS_K);
            let own = if (raw - reading).abs() > 0.01 {
                format!(" ({} before its calibration correction)", c(raw))
            } else {
                String::new()
            };
            format!(
                "temperature zero refused: the sensor reads {}{own}, {:.2} K from the ice \
                 point (0 °C); a zero is only taken within {:.2} K of it. Put the sensor in \
                 an ice bath (crushed ice topped up with water, stirred), wait for the \
                 reading to settle, and try again. Nothing was changed.",
                c(reading),
                (farther - reference).abs(),
                limit
            )
        }
    }
}
