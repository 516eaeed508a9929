//! The device end of the link: answers requests, checks signatures, validates
//! and stores records, loads gas-model blobs.
//!
//! The firmware owns a [`Responder`], feeds it every decoded host message
//! with the time, and sends back the reply it returns. What only the firmware
//! can do (sensors, alarms, restarting) it provides through [`DeviceActions`].

use embedded_storage::nor_flash::NorFlash;

use super::{
    Command, Identity, InjectSample, MAX_FRAME_LEN, Message, Origin, Outcome, PROTOCOL_VERSION,
    RECORD_MAX_LEN, Refusal, Reply, SensorChannel, Signed,
};
use crate::auth::{Authenticator, NonceSource};
use crate::sensor::calibration::CalibrationRecord;
use crate::store::{
    AlarmThresholds, ChunkOutcome, GasModelRef, Layout, Loaded, PressureCalibration, Record,
    RecordArea, RecordKind, TemperatureCalibration, TrackingSettings, decode_record, origin_status,
};
use crate::time::Instant;
use crate::{Error, SetupFx, Status};

/// What the firmware does for the responder.
pub trait DeviceActions {
    /// A record of `kind` was stored (or, for the gas-model reference, a
    /// blob committed): the firmware takes the new value from the
    /// responder once [`Responder::handle`] returns.
    fn record_changed(&mut self, kind: RecordKind);
    /// The calibration of `channel` re-zeroed at the present reading: the
    /// firmware returns the new record (the present calibration with its
    /// correction shifted, sequence + 1); the responder validates and stores
    /// it. An error refuses the command.
    fn zero_calibration(&mut self, channel: SensorChannel) -> Result<CalibrationRecord, Error>;
    /// Clears latched alarms.
    fn clear_alarms(&mut self);
    /// Restart once the reply has been sent.
    fn reboot_after_reply(&mut self);
    /// Takes injected raw codes as a sample. Devices without
    /// [`capability::SAMPLE_INJECTION`](super::capability::SAMPLE_INJECTION)
    /// return an error.
    fn inject(&mut self, sample: &InjectSample) -> Result<(), Error>;
}

/// Every stored record a device keeps, as loaded.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Records {
    /// The setup.
    pub setup: Loaded<SetupFx>,
    /// Calibration of the pressure channel.
    pub pressure_calibration: Loaded<PressureCalibration>,
    /// Calibration of the temperature channel.
    pub temperature_calibration: Loaded<TemperatureCalibration>,
    /// Tracking settings.
    pub tracking: Loaded<TrackingSettings>,
    /// Alarm thresholds.
    pub alarm_thresholds: Loaded<AlarmThresholds>,
    /// The gas-model blob in use (`len == 0`: a built-in model).
    pub gas_model: Loaded<GasModelRef>,
}

/// The device end of the link.
pub struct Responder<F> {
    identity: Identity,
    auth: Authenticator,
    flash: F,
    layout: Layout,
    records: Records,
    write_failed: bool,
    model_loading: bool,
}

impl<F: NorFlash> Responder<F> {
    /// A responder for the device `identity` (its protocol and frame size are
    /// filled in here) with its authenticator, flash and storage layout.
    /// Loads the stored records (falling back as the store documents); a
    /// gas-model reference whose blob is damaged or does not decode falls
    /// back to the built-in models.
    #[inline(never)]
    pub fn new(
        mut identity: Identity,
        auth: Authenticator,
        mut flash: F,
        layout: Layout,
    ) -> Result<Responder<F>, Error> {
        layout.check()?;
        identity.protocol = PROTOCOL_VERSION;
        identity.max_frame_len = MAX_FRAME_LEN as u16;
        let mut gas_model: Loaded<GasModelRef> = layout.gas_model_ref.load(&mut flash);
        if gas_model.value.len > 0 && !layout.blobs.check(&mut flash, &gas_model.value) {
            // The blob itself is damaged: use the built-in model.
            gas_model = Loaded {
                value: GasModelRef::NONE,
                origin: Origin::Default,
                damaged: true,
                seq: None,
            };
        }
        let records = Records {
            setup: layout.setup.load(&mut flash),
            pressure_calibration: layout.pressure_calibration.load(&mut flash),
            temperature_calibration: layout.temperature_calibration.load(&mut flash),
            tracking: layout.tracking.load(&mut flash),
            alarm_thresholds: layout.alarm_thresholds.load(&mut flash),
            gas_model,
        };
        Ok(Responder {
            identity,
            auth,
            flash,
            layout,
            records,
            write_failed: false,
            model_loading: true,
        })
    }

    /// Accepts gas-model blobs or not (a build without room to decode one
    /// refuses them as unsupported). Accepted by default.
    pub fn set_model_loading(&mut self, on: bool) {
        self.model_loading = on;
    }

    /// Every record in use and where it came from.
    pub fn records(&self) -> &Records {
        &self.records
    }

    /// The setup in use and where it came from.
    pub fn setup(&self) -> &Loaded<SetupFx> {
        &self.records.setup
    }

    /// The gas-model blob in use (`len == 0`: the built-in model).
    pub fn gas_model(&self) -> &Loaded<GasModelRef> {
        &self.records.gas_model
    }

    /// The identity announced.
    pub fn identity(&self) -> &Identity {
        &self.identity
    }

    /// The storage layout.
    pub fn layout(&self) -> &Layout {
        &self.layout
    }

    /// The flash (for the firmware's other users of it, and for tests).
    pub fn flash_mut(&mut self) -> &mut F {
        &mut self.flash
    }

    /// Gives the flash back (a restart builds a new responder from it).
    pub fn into_flash(self) -> F {
        self.flash
    }

    /// Device status flags (bits 24–31) to OR into every telemetry status.
    /// `config_default` is set when the setup or a calibration is the safe
    /// default: the tracking settings and alarm thresholds have sensible
    /// defaults derived from the setup, and no gas model ever loaded means
    /// the built-in one.
    pub fn status(&self, now: Instant) -> Status {
        let r = &self.records;
        let derived = |origin: Origin, damaged: bool| {
            let o = if origin == Origin::Default {
                Origin::Stored
            } else {
                origin
            };
            origin_status(o, damaged)
        };
        let mut s = origin_status(r.setup.origin, r.setup.damaged)
            | origin_status(
                r.pressure_calibration.origin,
                r.pressure_calibration.damaged,
            )
            | origin_status(
                r.temperature_calibration.origin,
                r.temperature_calibration.damaged,
            )
            | derived(r.tracking.origin, r.tracking.damaged)
            | derived(r.alarm_thresholds.origin, r.alarm_thresholds.damaged)
            | derived(r.gas_model.origin, r.gas_model.damaged);
        if self.write_failed {
            s |= Status::STORAGE_WRITE_FAILED;
        }
        if self.auth.locked_for(now).is_some() {
            s |= Status::AUTH_LOCKED_OUT;
        }
        s
    }

    /// Answers one message from the host. Messages that only go from the
    /// device to the host get no answer, nor do the requests the firmware
    /// answers itself ([`Message::GetDiagnostics`]).
    #[inline(never)]
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
            Message::GetDiagnostics(_)
            | Message::Identity(_)
            | Message::Telemetry(_)
            | Message::Alarm(_)
            | Message::Reply(_)
            | Message::Boot(_) => {
                return None;
            }
        };
        Some(Message::Reply(Reply { tag, outcome }))
    }

    #[inline(never)]
    fn read_record(&mut self, kind: RecordKind) -> Outcome {
        let r = &self.records;
        match kind {
            RecordKind::SETUP => record_outcome(&r.setup),
            RecordKind::PRESSURE_CALIBRATION => record_outcome(&r.pressure_calibration),
            RecordKind::TEMPERATURE_CALIBRATION => record_outcome(&r.temperature_calibration),
            RecordKind::TRACKING => record_outcome(&r.tracking),
            RecordKind::ALARM_THRESHOLDS => record_outcome(&r.alarm_thresholds),
            RecordKind::GAS_MODEL_REF => record_outcome(&r.gas_model),
            _ => Outcome::Refused(Refusal::BadRecord),
        }
    }

    #[inline(never)]
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
            Command::ZeroCalibration { channel } => self.zero(*channel, actions),
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
            } if self.model_loading => {
                self.gas_chunk(*offset, *total_len, *blob_crc, bytes, actions)
            }
            Command::GasModelChunk { .. } => Err(Error::UnknownKind(super::Kind::Signed.code())),
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
            RecordKind::SETUP => self.replace::<SetupFx>(version, bytes)?,
            RecordKind::PRESSURE_CALIBRATION => {
                self.replace::<PressureCalibration>(version, bytes)?
            }
            RecordKind::TEMPERATURE_CALIBRATION => {
                self.replace::<TemperatureCalibration>(version, bytes)?
            }
            RecordKind::TRACKING => self.replace::<TrackingSettings>(version, bytes)?,
            RecordKind::ALARM_THRESHOLDS => self.replace::<AlarmThresholds>(version, bytes)?,
            // The gas-model reference is only written by a complete load.
            _ => return Err(Error::MessageBody),
        }
        actions.record_changed(kind);
        Ok(())
    }

    /// Decodes, validates (before anything is written; the store validates
    /// again, as every store does), stores and reloads one record.
    #[inline(never)]
    fn replace<R: DeviceRecord>(&mut self, version: u16, bytes: &[u8]) -> Result<(), Error> {
        let value: R = decode_record(version, bytes)?;
        value.validate()?;
        self.store(&value)
    }

    fn store<R: DeviceRecord>(&mut self, value: &R) -> Result<(), Error> {
        let area = *R::area(&self.layout);
        let stored = area.store(&mut self.flash, value);
        self.store_result(stored)?;
        *R::slot(&mut self.records) = area.load(&mut self.flash);
        Ok(())
    }

    #[inline(never)]
    fn zero(
        &mut self,
        channel: SensorChannel,
        actions: &mut dyn DeviceActions,
    ) -> Result<(), Error> {
        let record = actions.zero_calibration(channel)?;
        let kind = match channel {
            SensorChannel::Pressure => {
                let v = PressureCalibration(record);
                v.validate()?;
                self.store(&v)?;
                RecordKind::PRESSURE_CALIBRATION
            }
            SensorChannel::Temperature => {
                let v = TemperatureCalibration(record);
                v.validate()?;
                self.store(&v)?;
                RecordKind::TEMPERATURE_CALIBRATION
            }
        };
        actions.record_changed(kind);
        Ok(())
    }

    #[inline(never)]
    fn gas_chunk(
        &mut self,
        offset: u32,
        total_len: u32,
        blob_crc: u32,
        bytes: &[u8],
        actions: &mut dyn DeviceActions,
    ) -> Result<(), Error> {
        let current = self.records.gas_model.value;
        let outcome = self.layout.blobs.chunk(
            &mut self.flash,
            &current,
            offset,
            total_len,
            blob_crc,
            bytes,
        )?;
        match outcome {
            ChunkOutcome::Next(_) => Ok(()),
            ChunkOutcome::Complete(r) => {
                // The blob must be a table this firmware can use before it
                // is committed: format, version, checksum and invariants.
                self.layout.blobs.decode_table(&mut self.flash, &r)?;
                let area = self.layout.gas_model_ref;
                let stored = area.store(&mut self.flash, &r);
                self.store_result(stored)?;
                self.records.gas_model = area.load(&mut self.flash);
                actions.record_changed(RecordKind::GAS_MODEL_REF);
                Ok(())
            }
        }
    }

    fn store_result(&mut self, r: Result<u32, Error>) -> Result<(), Error> {
        self.write_failed = r.is_err();
        r.map(|_| ())
    }
}

/// A record kind the responder reads and writes: where it lives.
trait DeviceRecord: Record {
    fn area(layout: &Layout) -> &RecordArea;
    fn slot(records: &mut Records) -> &mut Loaded<Self>;
}

macro_rules! device_record {
    ($($ty:ty => $field:ident;)*) => {$(
        impl DeviceRecord for $ty {
            fn area(layout: &Layout) -> &RecordArea {
                &layout.$field
            }
            fn slot(records: &mut Records) -> &mut Loaded<Self> {
                &mut records.$field
            }
        }
    )*};
}

device_record! {
    SetupFx => setup;
    PressureCalibration => pressure_calibration;
    TemperatureCalibration => temperature_calibration;
    TrackingSettings => tracking;
    AlarmThresholds => alarm_thresholds;
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
        Error::ModelData(_) => Refusal::BadGasModel,
        Error::ZeroNotPlausible(z) => Refusal::ZeroNotPlausible(z),
        _ => Refusal::Unsupported,
    }
}
