//! The device end of the link: answers requests, checks signatures, validates
//! and stores records, loads gas-model blobs.
//!
//! The firmware owns a [`Responder`], feeds it every decoded host message
//! with the time, and sends back the reply it returns. What only the firmware
//! can do (sensors, alarms, restarting) it provides through [`DeviceActions`].

use embedded_storage::nor_flash::NorFlash;

use super::{
    Command, Identity, InjectSample, MAX_FRAME_LEN, Message, Outcome, PROTOCOL_VERSION,
    RECORD_MAX_LEN, Refusal, Reply, SensorChannel, Signed,
};
use crate::auth::{Authenticator, NonceSource};
use crate::store::{
    BlobSlots, ChunkOutcome, GasModelRef, Loaded, Record, RecordArea, RecordKind, decode_record,
    origin_status,
};
use crate::time::Instant;
use crate::{Error, SetupFx, Status};

/// What the firmware does for the responder.
pub trait DeviceActions {
    /// A new setup was stored: rebuild the estimator from it.
    fn setup_changed(&mut self, setup: &SetupFx);
    /// A new gas-model blob was stored and committed.
    fn gas_model_changed(&mut self, model: &GasModelRef);
    /// Takes the present reading of `channel` as its zero (and stores the
    /// calibration). An error refuses the command.
    fn zero_calibration(&mut self, channel: SensorChannel) -> Result<(), Error>;
    /// Clears latched alarms.
    fn clear_alarms(&mut self);
    /// Restart once the reply has been sent.
    fn reboot_after_reply(&mut self);
    /// Takes injected raw codes as a sample. Devices without
    /// [`capability::SAMPLE_INJECTION`](super::capability::SAMPLE_INJECTION)
    /// return an error.
    fn inject(&mut self, sample: &InjectSample) -> Result<(), Error>;
}

/// The device end of the link.
pub struct Responder<F> {
    identity: Identity,
    auth: Authenticator,
    flash: F,
    setup_area: RecordArea,
    gas_ref_area: RecordArea,
    blobs: BlobSlots,
    setup: Loaded<SetupFx>,
    gas_ref: Loaded<GasModelRef>,
    write_failed: bool,
}

impl<F: NorFlash> Responder<F> {
    /// A responder for the device `identity` (its protocol and frame size are
    /// filled in here) with its authenticator, flash and storage layout.
    /// Loads the stored records (falling back as the store documents).
    pub fn new(
        mut identity: Identity,
        auth: Authenticator,
        mut flash: F,
        setup_area: RecordArea,
        gas_ref_area: RecordArea,
        blobs: BlobSlots,
    ) -> Result<Responder<F>, Error> {
        if setup_area.kind() != RecordKind::SETUP
            || gas_ref_area.kind() != RecordKind::GAS_MODEL_REF
        {
            return Err(Error::StoreLayout);
        }
        identity.protocol = PROTOCOL_VERSION;
        identity.max_frame_len = MAX_FRAME_LEN as u16;
        let setup = setup_area.load(&mut flash);
        let mut gas_ref: Loaded<GasModelRef> = gas_ref_area.load(&mut flash);
        if gas_ref.value.len > 0 && !blobs.check(&mut flash, &gas_ref.value) {
            // The blob itself is damaged: use the built-in model.
            gas_ref = Loaded {
                value: GasModelRef::NONE,
                origin: super::Origin::Default,
                damaged: true,
                seq: None,
            };
        }
        Ok(Responder {
            identity,
            auth,
            flash,
            setup_area,
            gas_ref_area,
            blobs,
            setup,
            gas_ref,
            write_failed: false,
        })
    }

    /// The setup in use and where it came from.
    pub fn setup(&self) -> &Loaded<SetupFx> {
        &self.setup
    }

    /// The gas-model blob in use (`len == 0`: the built-in model).
    pub fn gas_model(&self) -> &Loaded<GasModelRef> {
        &self.gas_ref
    }

    /// The identity announced.
    pub fn identity(&self) -> &Identity {
        &self.identity
    }

    /// The flash (for the firmware's other users of it, and for tests).
    pub fn flash_mut(&mut self) -> &mut F {
        &mut self.flash
    }

    /// Gives the flash back (a restart builds a new responder from it).
    pub fn into_flash(self) -> F {
        self.flash
    }

    /// The gas-model slots (to read the blob in use).
    pub fn blobs(&self) -> &BlobSlots {
        &self.blobs
    }

    /// Device status flags (bits 24–31) to OR into every telemetry status.
    pub fn status(&self, now: Instant) -> Status {
        let g = &self.gas_ref;
        // No gas model ever loaded is normal: the built-in model is used.
        let gas_origin = if g.origin == super::Origin::Default && !g.damaged {
            super::Origin::Stored
        } else {
            g.origin
        };
        let mut s = origin_status(self.setup.origin, self.setup.damaged)
            | origin_status(gas_origin, g.damaged);
        if self.write_failed {
            s |= Status::STORAGE_WRITE_FAILED;
        }
        if self.auth.locked_for(now).is_some() {
            s |= Status::AUTH_LOCKED_OUT;
        }
        s
    }

    /// Answers one message from the host. Messages that only go from the
    /// device to the host get no answer.
    pub fn handle(
        &mut self,
        now: Instant,
        msg: &Message,
        rng: &mut dyn NonceSource,
        actions: &mut dyn DeviceActions,
    ) -> Option<Message> {
        let (tag, outcome) = match msg {
            Message::Ping(p) => (p.tag, Outcome::Pong { token: p.token }),
            Message::GetIdentity(g) => (g.tag, Outcome::Identity(self.identity.clone())),
            Message::GetChallenge(g) => (
                g.tag,
                match self.auth.challenge(now, rng) {
                    Ok(nonce) => Outcome::Challenge {
                        nonce,
                        valid_ms: self.auth.policy().session_ms,
                    },
                    Err(e) => Outcome::Refused(refusal(e)),
                },
            ),
            Message::ReadRecord(r) => (r.tag, self.read_record(RecordKind(r.kind))),
            Message::Signed(s) => (s.tag, self.signed(now, s, actions)),
            Message::InjectSample(i) => (
                i.tag,
                match actions.inject(i) {
                    Ok(()) => Outcome::Taken,
                    Err(e) => Outcome::Refused(refusal(e)),
                },
            ),
            Message::Identity(_)
            | Message::Telemetry(_)
            | Message::Alarm(_)
            | Message::Reply(_) => {
                return None;
            }
        };
        Some(Message::Reply(Reply { tag, outcome }))
    }

    fn read_record(&mut self, kind: RecordKind) -> Outcome {
        match kind {
            RecordKind::SETUP => record_outcome(&self.setup),
            RecordKind::GAS_MODEL_REF => record_outcome(&self.gas_ref),
            _ => Outcome::Refused(Refusal::BadRecord),
        }
    }

    fn signed(&mut self, now: Instant, s: &Signed, actions: &mut dyn DeviceActions) -> Outcome {
        let verified = match self.auth.verify(now, s) {
            Ok(v) => v,
            Err(e) => return Outcome::Refused(refusal(e)),
        };
        let done = Outcome::Done {
            counter: verified.counter,
            mac: verified.done_mac,
        };
        let result = match &s.command {
            Command::WriteRecord {
                kind,
                version,
                bytes,
            } => self.write_record(RecordKind(*kind), *version, bytes, actions),
            Command::ZeroCalibration { channel } => actions.zero_calibration(*channel),
            Command::ClearAlarms => {
                actions.clear_alarms();
                Ok(())
            }
            Command::Reboot => {
                self.auth.close_session();
                actions.reboot_after_reply();
                Ok(())
            }
            Command::GasModelChunk {
                offset,
                total_len,
                blob_crc,
                bytes,
            } => self.gas_chunk(*offset, *total_len, *blob_crc, bytes, actions),
        };
        match result {
            Ok(()) => done,
            Err(e) => Outcome::Refused(refusal(e)),
        }
    }

    fn write_record(
        &mut self,
        kind: RecordKind,
        version: u16,
        bytes: &[u8],
        actions: &mut dyn DeviceActions,
    ) -> Result<(), Error> {
        match kind {
            RecordKind::SETUP => {
                let value: SetupFx = decode_record(version, bytes)?;
                // Validation happens before anything is written (store()
                // validates again, as every store does).
                value.validate()?;
                let stored = self.setup_area.store(&mut self.flash, &value);
                self.store_result(stored)?;
                self.setup = self.setup_area.load(&mut self.flash);
                actions.setup_changed(&self.setup.value);
                Ok(())
            }
            // The gas-model reference is only written by a complete load.
            _ => Err(Error::MessageBody),
        }
    }

    fn gas_chunk(
        &mut self,
        offset: u32,
        total_len: u32,
        blob_crc: u32,
        bytes: &[u8],
        actions: &mut dyn DeviceActions,
    ) -> Result<(), Error> {
        let current = self.gas_ref.value;
        match self.blobs.chunk(
            &mut self.flash,
            &current,
            offset,
            total_len,
            blob_crc,
            bytes,
        )? {
            ChunkOutcome::Next(_) => Ok(()),
            ChunkOutcome::Complete(r) => {
                let stored = self.gas_ref_area.store(&mut self.flash, &r);
                self.store_result(stored)?;
                self.gas_ref = self.gas_ref_area.load(&mut self.flash);
                actions.gas_model_changed(&self.gas_ref.value);
                Ok(())
            }
        }
    }

    fn store_result(&mut self, r: Result<u32, Error>) -> Result<(), Error> {
        self.write_failed = r.is_err();
        r.map(|_| ())
    }
}

fn record_outcome<R: Record>(loaded: &Loaded<R>) -> Outcome {
    let mut buf = [0u8; RECORD_MAX_LEN];
    match postcard::to_slice(&loaded.value, &mut buf) {
        Ok(used) => match heapless::Vec::from_slice(used) {
            Ok(bytes) => Outcome::Record {
                kind: R::KIND.0,
                version: R::VERSION,
                origin: loaded.origin,
                bytes,
            },
            Err(_) => Outcome::Refused(Refusal::BadRecord),
        },
        Err(_) => Outcome::Refused(Refusal::BadRecord),
    }
}

/// The refusal that tells the host about `e`.
pub fn refusal(e: Error) -> Refusal {
    match e {
        Error::NoSession => Refusal::NoSession,
        Error::BadSignature => Refusal::BadSignature,
        Error::Replay => Refusal::Replay,
        Error::LockedOut(ms) => Refusal::LockedOut {
            retry_after_ms: u32::try_from(ms).unwrap_or(u32::MAX),
        },
        Error::OutOfRange(field) | Error::NotFinite(field) => Refusal::out_of_range(field),
        Error::ChunkOrder(expected) => Refusal::ChunkOrder { expected },
        Error::BlobCrc => Refusal::BlobCrc,
        Error::RecordTooLarge => Refusal::BlobTooLarge,
        Error::Flash | Error::SequenceExhausted | Error::StoreLayout => Refusal::Storage,
        Error::MessageBody | Error::UnknownGas => Refusal::BadRecord,
        _ => Refusal::Unsupported,
    }
}
