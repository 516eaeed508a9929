//! The gauge: records, link, pipeline and outputs around one flash.

use embedded_storage::nor_flash::NorFlash;

use super::RawSample;
use super::fixed::Pipeline;
use crate::alarm::Events;
use crate::auth::{Authenticator, NonceSource};
use crate::link::device::{DeviceActions, Records, Responder};
use crate::link::{
    self, Accumulator, AlarmEvent, Boot, BootReport, Diagnostics, Feed, Identity, InjectSample,
    Kind, MAX_FRAME_LEN, Message, NONCE_LEN, Outcome, Reply, SensorChannel, Telemetry, capability,
};
use crate::model::CompressibilityFx;
use crate::model::device::{DeviceModel, Table, TableBuf};
use crate::sensor::calibration::CalibrationRecord;
use crate::store::{
    AlarmThresholds, Layout, PressureCalibration, RecordKind, TrackingSettings, track_config,
};
use crate::time::Instant;
use crate::track::fixed::TrackFx;
use crate::{Error, Gas, Status, fx};

/// The firmware version the application reports when the firmware gives
/// none of its own (major, minor, patch of `isochor-core`).
pub const FIRMWARE_VERSION: [u8; 3] = [0, 1, 0];

/// 273.15 K (0 °C, the ice point) as a calibration anchor (K at 2^-24).
const ICE_POINT: i64 = 4_582_696_550;

/// What the gauge needs from the board while it works.
pub trait GaugeIo {
    /// Sends one frame (returns once it is queued or sent).
    fn send(&mut self, frame: &[u8]);
    /// Fills a nonce from the board's random source (see
    /// [`NonceSource`] for the contract).
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]);
    /// Deepest stack use so far and the stack size, bytes (0, 0 when the
    /// board does not measure it).
    fn stack_usage(&self) -> (u32, u32) {
        (0, 0)
    }
}

struct IoNonces<'a>(&'a mut dyn GaugeIo);

impl NonceSource for IoNonces<'_> {
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        self.0.fill_nonce(out);
    }
}

/// The gas model a gauge uses, prepared by the firmware at start for the
/// stored setup's gas ([`model_for`]); a change of gas or of gas model
/// restarts the gauge so that the next start prepares the new one. Kept
/// outside the gauge (by reference), which keeps the gauge small: a
/// prepared model takes 2.7 KiB.
#[derive(Clone, Copy)]
pub struct Models<'m> {
    /// The prepared model, `None` when the build has none for the gas.
    pub model: Option<&'m DeviceModel<'m>>,
    /// Gas-model blobs are accepted (the build has room to decode one).
    pub loadable: bool,
}

/// The model for `gas`: the loaded table when it is of that gas, else the
/// build's built-in table (`builtin` gives `None` for gases left out).
#[inline(never)]
pub fn model_for<'m>(
    gas: Gas,
    loaded: Option<&'m TableBuf>,
    builtin: fn(Gas) -> Option<Table<'static>>,
) -> Option<DeviceModel<'m>> {
    if let Some(t) = loaded.filter(|t| t.gas == gas) {
        return DeviceModel::new(t.table()).ok();
    }
    builtin(gas).and_then(|t| DeviceModel::new(t).ok())
}

/// [`model_for`] straight into `slot`: the prepared model (2.6 KiB on a
/// Cortex-M0) is not copied through the stack on its way there.
#[inline(never)]
pub fn model_for_in<'m>(
    slot: &'m mut core::mem::MaybeUninit<DeviceModel<'m>>,
    gas: Gas,
    loaded: Option<&'m TableBuf>,
    builtin: fn(Gas) -> Option<Table<'static>>,
) -> Option<&'m DeviceModel<'m>> {
    let table = match loaded.filter(|t| t.gas == gas) {
        Some(t) => t.table(),
        None => builtin(gas)?,
    };
    match DeviceModel::new(table) {
        Ok(m) => Some(&*slot.write(m)),
        Err(_) => None,
    }
}

/// The stored setup's gas (read before the gauge starts, to prepare its
/// model).
pub fn stored_gas<F: NorFlash>(flash: &mut F, layout: &Layout) -> Gas {
    let s: crate::store::Loaded<crate::SetupFx> = layout.setup.load(flash);
    s.value.gas
}

/// The table of the committed gas-model blob, if there is one and it
/// decodes (a blob that no longer decodes is ignored: the built-in model is
/// used, and the reference says where it came from).
#[inline(never)]
pub fn decode_loaded_model<F: NorFlash>(flash: &mut F, layout: &Layout) -> Option<TableBuf> {
    let r: crate::store::Loaded<crate::store::GasModelRef> = layout.gas_model_ref.load(flash);
    if r.value.len == 0 {
        return None;
    }
    layout.blobs.decode_table(flash, &r.value).ok()
}

/// What the application does between the responder's calls.
struct App<'m> {
    models: Models<'m>,
    injection: bool,
    pipeline: Option<Pipeline<&'m DeviceModel<'m>>>,
    pressure_calibration: CalibrationRecord,
    temperature_calibration: CalibrationRecord,
    dirty: bool,
    restart: bool,
    fault_latched: bool,
    last_sample_at: Instant,
    samples: u32,
    track: Option<TrackFx>,
    unusable_at: Option<Instant>,
    cleared: Option<Events>,
}

impl<'m> App<'m> {
    /// True when the setup's gas needs another model than the one prepared.
    /// (A gauge that started without a model — its build has none for the
    /// stored gas — restarts too: the new gas may be one the build has.)
    fn needs_other_model(&self, r: &Records) -> bool {
        self.models
            .model
            .is_none_or(|m| CompressibilityFx::gas(m) != r.setup.value.gas)
    }

    /// Prepares the pipeline from the records in use (a new tracker: a
    /// changed configuration starts the tracking afresh).
    #[inline(never)]
    fn rebuild(&mut self, r: &Records) {
        self.pressure_calibration = r.pressure_calibration.value.0;
        self.temperature_calibration = r.temperature_calibration.value.0;
        let setup = r.setup.value;
        let tracking = if r.tracking.seq.is_some() {
            r.tracking.value
        } else {
            TrackingSettings::for_tank(&setup, r.pressure_calibration.value.full_scale())
        };
        let alarms = if r.alarm_thresholds.seq.is_some() {
            r.alarm_thresholds.value
        } else {
            AlarmThresholds::for_tank(&setup)
        };
        self.pipeline = None;
        if let Some(m) = self.models.model {
            // An unusable configuration leaves `None` (`config_unusable`).
            let _ = Pipeline::new_in(
                &mut self.pipeline,
                setup,
                m,
                &self.pressure_calibration,
                &self.temperature_calibration,
                track_config(&tracking, &alarms),
                tracking.barometric_pa,
            );
        }
    }

    #[inline(never)]
    fn take(&mut self, at: Instant, raw: &RawSample) {
        self.samples = self.samples.wrapping_add(1);
        self.last_sample_at = at;
        match &mut self.pipeline {
            Some(p) => self.track = Some(p.sample(at, raw)),
            None => self.unusable_at = Some(at),
        }
    }
}

impl DeviceActions for App<'_> {
    fn record_changed(&mut self, kind: RecordKind) {
        if kind == RecordKind::GAS_MODEL_REF {
            // The new table is decoded at the next start.
            self.restart = true;
        } else {
            self.dirty = true;
        }
    }

    fn zero_calibration(&mut self, channel: SensorChannel) -> Result<CalibrationRecord, Error> {
        let p = self
            .pipeline
            .as_ref()
            .ok_or(Error::OutOfRange("configuration"))?;
        let r = p.last_valid().ok_or(Error::OutOfRange("present reading"))?;
        let baro = p.barometric();
        // Anchors (SI at 2^-24) of the reading, the uncorrected reading and
        // the zero reference; refused unless both readings are near it.
        let (record, reading, uncorrected, reference) = match channel {
            SensorChannel::Pressure => (
                &self.pressure_calibration,
                i64::from(r.pressure.pressure_pa.to_bits()) << 20,
                i64::from(r.pressure_uncorrected.to_bits()) << 20,
                i64::from(baro.to_bits()) << 20,
            ),
            SensorChannel::Temperature => (
                &self.temperature_calibration,
                i64::from(r.temperature.temperature_k.to_bits()) << 8,
                i64::from(r.temperature_uncorrected.to_bits()) << 8,
                ICE_POINT,
            ),
        };
        super::check_zero(record, channel, reading, uncorrected, reference)?;
        super::rezero(record, reading, reference, baro)
    }

    fn clear_alarms(&mut self) {
        self.fault_latched = false;
        let at = self.last_sample_at;
        if let Some(p) = &mut self.pipeline {
            self.cleared = Some(p.tracker_mut().clear_alarms(at));
        }
    }

    fn reboot_after_reply(&mut self) {
        self.restart = true;
    }

    fn inject(&mut self, sample: &InjectSample) -> Result<(), Error> {
        if !self.injection {
            return Err(Error::UnknownKind(Kind::InjectSample.code()));
        }
        let raw = RawSample::from_codes(&sample.codes)?;
        self.take(Instant(sample.at_ms), &raw);
        Ok(())
    }
}

/// The gauge application over one flash (see the [module](super)
/// documentation).
pub struct Gauge<'m, F> {
    responder: Responder<F>,
    app: App<'m>,
    acc: Accumulator,
    now: Instant,
    boot: BootReport,
    frames: u32,
    bad_frames: u32,
    telemetry_seq: u32,
    event_seq: u32,
}

impl<'m, F: NorFlash> Gauge<'m, F> {
    /// Starts the application: loads the records from `flash` (see
    /// [`Responder::new`]) and prepares the pipeline. `identity` gets the
    /// capabilities of this application; `injection` makes the gauge take
    /// its samples from [`InjectSample`] messages (emulation, bench rigs).
    #[inline(never)]
    pub fn new(
        identity: Identity,
        auth: Authenticator,
        flash: F,
        layout: Layout,
        models: Models<'m>,
        injection: bool,
        boot: BootReport,
    ) -> Result<Gauge<'m, F>, Error> {
        let mut slot = None;
        Gauge::new_in(
            &mut slot, identity, auth, flash, layout, models, injection, boot,
        )?;
        slot.ok_or(Error::OutOfRange("gauge"))
    }

    /// [`Gauge::new`] straight into `slot` (a static on a device): the
    /// gauge (4.4 KiB on a Cortex-M0) is not copied through the stack.
    #[inline(never)]
    #[allow(clippy::too_many_arguments)]
    pub fn new_in<'s>(
        slot: &'s mut Option<Gauge<'m, F>>,
        mut identity: Identity,
        auth: Authenticator,
        flash: F,
        layout: Layout,
        models: Models<'m>,
        injection: bool,
        boot: BootReport,
    ) -> Result<&'s mut Gauge<'m, F>, Error> {
        identity.capabilities = capability::TELEMETRY
            | capability::SIGNED_CONFIG
            | capability::ALARMS
            | capability::DIAGNOSTICS
            | if models.loadable {
                capability::GAS_MODEL_LOAD
            } else {
                0
            }
            | if injection {
                capability::SAMPLE_INJECTION
            } else {
                0
            };
        let mut responder = Responder::new(identity, auth, flash, layout)?;
        responder.set_model_loading(models.loadable);
        let app = App {
            models,
            injection,
            pipeline: None,
            pressure_calibration: PressureCalibration::nominal().0,
            temperature_calibration: crate::store::TemperatureCalibration::nominal().0,
            dirty: false,
            restart: false,
            fault_latched: boot.reason.is_fault(),
            last_sample_at: Instant(0),
            samples: 0,
            track: None,
            unusable_at: None,
            cleared: None,
        };
        Ok(slot.insert(Gauge {
            responder,
            app,
            acc: Accumulator::new(),
            now: Instant(0),
            boot,
            frames: 0,
            bad_frames: 0,
            telemetry_seq: 0,
            event_seq: 0,
        }))
    }

    /// Prepares the pipeline from the stored records and announces the
    /// start: one [`Boot`] message.
    #[inline(never)]
    pub fn start(&mut self, io: &mut dyn GaugeIo) {
        self.app.rebuild(self.responder.records());
        let id = self.responder.identity();
        let msg = Message::Boot(Boot {
            serial: id.serial,
            firmware_version: id.firmware_version,
            report: self.boot.clone(),
        });
        send(io, &msg);
    }

    /// Takes bytes from the link at the board's time `now`: every complete
    /// frame is answered (and injected samples are taken and reported).
    ///
    /// A changed configuration is applied after the frame that changed it
    /// and before the next one, at this level: the decoding frames are gone
    /// from the stack while the pipeline is prepared (what lets the gauge
    /// run in the 16 KiB of RAM of a Cortex-M0 board).
    #[inline(never)]
    pub fn receive(&mut self, now: Instant, bytes: &[u8], io: &mut dyn GaugeIo) {
        self.now = now;
        let mut rest = bytes;
        while !rest.is_empty() {
            let (taken, r) = self.next_frame(rest, io);
            rest = r;
            self.apply_changes();
            if !taken || self.app.restart {
                // Nothing more is taken once a restart is due.
                break;
            }
        }
    }

    /// Takes the next frame (if `bytes` complete one) and answers it;
    /// returns whether a frame or a damaged one was taken and the bytes
    /// after it.
    #[inline(never)]
    fn next_frame<'b>(&mut self, bytes: &'b [u8], io: &mut dyn GaugeIo) -> (bool, &'b [u8]) {
        match self.acc.feed(bytes) {
            Feed::NeedMore => (false, &[]),
            Feed::Frame { message, rest } => {
                self.frames = self.frames.wrapping_add(1);
                self.on_message(&message, io);
                (true, rest)
            }
            Feed::BadFrame { rest, .. } | Feed::Overfull { rest } => {
                self.bad_frames = self.bad_frames.wrapping_add(1);
                (true, rest)
            }
        }
    }

    /// Applies a changed configuration: a new pipeline, or a restart when
    /// the gas needs another model.
    fn apply_changes(&mut self) {
        if self.app.dirty {
            self.app.dirty = false;
            if self.app.needs_other_model(self.responder.records()) {
                // Another gas: the next start prepares its model.
                self.app.restart = true;
            } else {
                self.app.rebuild(self.responder.records());
            }
        }
    }

    /// Takes one sample read from the board's own converters at `at` and
    /// sends its telemetry and alarm frames.
    #[inline(never)]
    pub fn sample(&mut self, at: Instant, raw: &RawSample, io: &mut dyn GaugeIo) {
        self.app.take(at, raw);
        self.flush(io);
    }

    #[inline(never)]
    fn on_message(&mut self, msg: &Message, io: &mut dyn GaugeIo) {
        if let Message::GetDiagnostics(g) = msg {
            let (peak, size) = io.stack_usage();
            let d = Diagnostics {
                uptime_ms: self.now.as_millis(),
                boot: self.boot.clone(),
                stack_peak_bytes: peak,
                stack_size_bytes: size,
                frames: self.frames,
                bad_frames: self.bad_frames,
                samples: self.app.samples,
            };
            let reply = Message::Reply(Reply {
                tag: g.tag,
                outcome: Outcome::Diagnostics(d),
            });
            send(io, &reply);
            return;
        }
        let reply = {
            let mut nonces = IoNonces(io);
            self.responder
                .handle(self.now, msg, &mut nonces, &mut self.app)
        };
        if let Some(r) = reply {
            send(io, &r);
        }
        self.flush(io);
    }

    /// Device flags of every telemetry frame.
    fn device_status(&self) -> Status {
        let mut s = self.responder.status(self.now);
        if self.app.fault_latched {
            s |= Status::RESTARTED_AFTER_FAULT;
        }
        if self.app.pipeline.is_none() {
            s |= Status::CONFIG_UNUSABLE;
        }
        s
    }

    /// Sends the telemetry and alarm frames of what happened.
    #[inline(never)]
    fn flush(&mut self, io: &mut dyn GaugeIo) {
        let device = self.device_status();
        if let Some(t) = self.app.track.take() {
            let tel = Telemetry::from_track(self.telemetry_seq, &t, device);
            self.telemetry_seq = self.telemetry_seq.wrapping_add(1);
            send(io, &Message::Telemetry(tel));
            self.send_events(&t.events, Status::from_bits(tel.status), tel.mass(), io);
        }
        if let Some(at) = self.app.unusable_at.take() {
            let tel = Telemetry {
                seq: self.telemetry_seq,
                uptime_ms: at.as_millis(),
                status: device.bits(),
                ..Telemetry::default()
            };
            self.telemetry_seq = self.telemetry_seq.wrapping_add(1);
            send(io, &Message::Telemetry(tel));
        }
        if let Some(e) = self.app.cleared.take() {
            let mass = self
                .app
                .pipeline
                .as_ref()
                .and_then(|p| p.tracker().latest_content())
                .map_or(fx::Mass::ZERO, |c| c.mass_kg);
            self.send_events(&e, device, mass, io);
        }
    }

    fn send_events(&mut self, e: &Events, status: Status, mass: fx::Mass, io: &mut dyn GaugeIo) {
        for ev in e.iter() {
            let frame = AlarmEvent::from_event(self.event_seq, &ev, status, mass);
            self.event_seq = self.event_seq.wrapping_add(1);
            send(io, &Message::Alarm(frame));
        }
    }

    /// True once a restart is due (a reboot command, or a new gas model to
    /// decode): the firmware lets the last frames leave and restarts.
    pub fn restart_requested(&self) -> bool {
        self.app.restart
    }

    /// Every record in use.
    pub fn records(&self) -> &Records {
        self.responder.records()
    }

    /// The responder (identity, layout, flash).
    pub fn responder(&self) -> &Responder<F> {
        &self.responder
    }

    /// The pipeline, when the configuration is usable.
    pub fn pipeline(&self) -> Option<&Pipeline<&'m DeviceModel<'m>>> {
        self.app.pipeline.as_ref()
    }

    /// The device status flags telemetry carries now.
    pub fn status(&self) -> Status {
        self.device_status()
    }

    /// The start this gauge reports.
    pub fn boot_report(&self) -> &BootReport {
        &self.boot
    }

    /// Gives the flash back (a restart builds a new gauge from it).
    pub fn into_flash(self) -> F {
        self.responder.into_flash()
    }
}

/// Encodes and sends one message (a message that does not encode is a bug
/// of this crate's size bounds and is dropped).
#[inline(never)]
fn send(io: &mut dyn GaugeIo, msg: &Message) {
    let mut buf = [0u8; MAX_FRAME_LEN];
    if let Ok(n) = link::encode(msg, &mut buf)
        && let Some(frame) = buf.get(..n)
    {
        io.send(frame);
    }
}
