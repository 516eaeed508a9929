//! The gauge: the service, the pipeline and the link around one flash.

use embedded_storage::nor_flash::NorFlash;

#[cfg(feature = "signed-config")]
use super::Zero;
use super::fixed::Pipeline;
#[cfg(feature = "signed-config")]
use super::service::{LoadStep, config_refusal};
use super::service::{Service, refusal};
use super::telemetry;
use crate::alarm::Events;
use crate::auth::{Authenticator, NonceSource};
use crate::field::{FieldScalars, LoopScalars};
use crate::link::{
    self, Accumulator, Boot, BootReport, Diagnostics, Feed, FromDevice, Identity, InjectSample,
    MAX_FRAME_LEN, NONCE_LEN, Outcome, Refusal, Reply, ToDevice, capability,
};
#[cfg(feature = "signed-config")]
use crate::link::{Command, SensorChannel, Signed};
use crate::prepared::Prepared;
use crate::sensor::channel::RawSample;
use crate::store::{BlobRef, Layout};
use crate::time::Instant;
use crate::{Error, Status, fx};

/// What the gauge needs from the board while it works.
pub trait GaugeIo {
    /// Sends one frame (returns once it is queued or sent).
    fn send(&mut self, frame: &[u8]);
    /// Fills a nonce from the board's random source (see [`NonceSource`]
    /// for the contract).
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]);
    /// Deepest stack use so far and the stack size, bytes (0, 0 when the
    /// board does not measure it).
    fn stack_usage(&self) -> (u32, u32) {
        (0, 0)
    }
}

#[cfg(feature = "signed-config")]
struct IoNonces<'a>(&'a mut dyn GaugeIo);

#[cfg(feature = "signed-config")]
impl NonceSource for IoNonces<'_> {
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        self.0.fill_nonce(out);
    }
}

/// How the gauge reaches the bytes of a stored configuration: a board whose
/// flash is mapped into memory hands out the slot in place (no RAM), others
/// copy the blob into RAM.
pub trait Mapper<F> {
    /// The bytes handle (a `&'static [u8]` on a device; shared and cheap to
    /// clone).
    type Bytes: crate::prepared::PreparedBytes + Clone;
    /// The bytes of the (checked) blob `blob` of `layout` in `flash`;
    /// `None` when they cannot be had (a blob larger than the RAM kept for
    /// it).
    fn map(&mut self, flash: &mut F, layout: &Layout, blob: &BlobRef) -> Option<Self::Bytes>;
}

/// What the last samples and commands left to send.
#[derive(Default)]
struct Pending {
    /// A sample was tracked: its outputs are the pipeline's
    /// ([`Pipeline::output`]), read in place.
    tracked: bool,
    unusable_at: Option<Instant>,
    cleared: Option<Events>,
}

/// The gauge application over one flash (see the [module](super)
/// documentation).
pub struct Gauge<F, M: Mapper<F>> {
    service: Service<F>,
    mapper: M,
    pipeline: Option<Pipeline<M::Bytes>>,
    acc: Accumulator<ToDevice>,
    injection: bool,
    now: Instant,
    boot: BootReport,
    restart: bool,
    fault_latched: bool,
    last_sample_at: Instant,
    frames: u32,
    bad_frames: u32,
    samples: u32,
    telemetry_seq: u32,
    event_seq: u32,
    pending: Pending,
    quiet: bool,
    loop_current: fx::Milliamps,
    #[cfg(feature = "modbus")]
    snapshot: crate::field::modbus::map::Snapshot,
    /// A configuration committed by the command being handled, whose
    /// pipeline is prepared once the command's handler has returned (its
    /// frames are then off the stack) and before the reply is sent.
    #[cfg(feature = "signed-config")]
    rebuild_due: Option<BlobRef>,
}

impl<F: NorFlash, M: Mapper<F>> Gauge<F, M> {
    /// Starts the application straight into `slot` (a static on a device:
    /// the gauge is never on the stack): loads the configuration reference
    /// from `flash` and prepares the pipeline of the configuration in
    /// force. `identity` gets the capabilities of this build; `injection`
    /// makes the gauge take its samples from [`InjectSample`] messages
    /// (emulation, bench rigs).
    #[inline(never)]
    #[allow(clippy::too_many_arguments)]
    pub fn new_in(
        slot: &mut Option<Gauge<F, M>>,
        mut identity: Identity,
        auth: Authenticator,
        flash: F,
        layout: Layout,
        mapper: M,
        injection: bool,
        boot: BootReport,
    ) -> Result<&mut Gauge<F, M>, Error> {
        identity.capabilities = capability::TELEMETRY
            | if cfg!(feature = "signed-config") {
                capability::SIGNED_CONFIG
            } else {
                0
            }
            | capability::ALARMS
            | capability::DIAGNOSTICS
            | if cfg!(feature = "tracking") {
                capability::TRACKING
            } else {
                0
            }
            | if cfg!(feature = "uncertainty") {
                capability::UNCERTAINTY
            } else {
                0
            }
            | if injection {
                capability::SAMPLE_INJECTION
            } else {
                0
            };
        let g = Self::place(slot, identity, auth, flash, layout, mapper, injection, boot)?;
        let blob = g.service.config().value.blob;
        let _ = g.rebuild(&blob);
        Ok(g)
    }

    /// [`Gauge::new_in`] without the pipeline: its own step, so that the
    /// gauge's value built on the stack on the way into `slot` is gone
    /// before the pipeline is prepared (the two frames do not add up).
    #[inline(never)]
    #[allow(clippy::too_many_arguments)]
    fn place(
        slot: &mut Option<Gauge<F, M>>,
        identity: Identity,
        auth: Authenticator,
        flash: F,
        layout: Layout,
        mapper: M,
        injection: bool,
        boot: BootReport,
    ) -> Result<&mut Gauge<F, M>, Error> {
        let service = Service::new(identity, auth, flash, layout)?;
        Ok(slot.insert(Gauge {
            service,
            mapper,
            pipeline: None,
            acc: Accumulator::new(),
            injection,
            now: Instant(0),
            fault_latched: boot.reason.is_fault(),
            boot,
            restart: false,
            last_sample_at: Instant(0),
            frames: 0,
            bad_frames: 0,
            samples: 0,
            telemetry_seq: 0,
            event_seq: 0,
            pending: Pending::default(),
            quiet: false,
            loop_current: LoopScalars::UNCONFIGURED.failure.current(),
            #[cfg(feature = "modbus")]
            snapshot: crate::field::modbus::map::Snapshot::new(),
            #[cfg(feature = "signed-config")]
            rebuild_due: None,
        }))
    }

    /// The start-up sequence of every device (the firmware's and the host's
    /// emulated one): the identity of this application (its version,
    /// `hardware_rev`, the serial of `provisioning`), the authenticator
    /// over the provisioned secret — or, for a device never provisioned, a
    /// random secret nobody knows, so that it answers no signed command
    /// while telemetry still flows — then [`Gauge::new_in`].
    #[inline(never)]
    #[allow(clippy::too_many_arguments)]
    pub fn start_up<'s>(
        slot: &'s mut Option<Gauge<F, M>>,
        provisioning: Option<(u64, crate::auth::Secret)>,
        rng: &mut dyn NonceSource,
        hardware_rev: u16,
        flash: F,
        layout: Layout,
        mapper: M,
        injection: bool,
        boot: BootReport,
    ) -> Result<&'s mut Gauge<F, M>, Error> {
        let (serial, secret) = match provisioning {
            Some(v) => v,
            None => {
                let (mut a, mut b) = ([0u8; NONCE_LEN], [0u8; NONCE_LEN]);
                rng.fill_nonce(&mut a);
                rng.fill_nonce(&mut b);
                let mut key = [0u8; 32];
                for (k, v) in key.iter_mut().zip(a.iter().chain(b.iter())) {
                    *k = *v;
                }
                (0, crate::auth::Secret::new(key))
            }
        };
        let identity = Identity {
            serial,
            hardware_rev,
            firmware_version: super::VERSION,
            protocol: 0,
            max_frame_len: 0,
            capabilities: 0,
            config_capacity: 0,
        };
        let auth = Authenticator::new(secret, serial, crate::auth::Policy::default());
        Gauge::new_in(slot, identity, auth, flash, layout, mapper, injection, boot)
    }

    /// Prepares the pipeline of the configuration `blob` with the zero
    /// offsets in force (none on failure: the gauge then reports
    /// `config_unusable`).
    #[inline(never)]
    fn rebuild(&mut self, blob: &BlobRef) -> Result<(), Error> {
        self.pipeline = None;
        if blob.len == 0 {
            return Ok(());
        }
        let zero = self.service.zero();
        let (flash, layout) = self.service.flash_and_layout();
        let bytes = self
            .mapper
            .map(flash, layout, blob)
            .ok_or(Error::RecordTooLarge)?;
        // Read in place in the returned value: moving it out of the
        // `Result` would put a second copy on this frame.
        match &Prepared::new(bytes) {
            Ok(prepared) => Pipeline::new_in(&mut self.pipeline, prepared, zero),
            Err(e) => Err(*e),
        }
    }

    /// Announces the start: one [`Boot`] message.
    #[inline(never)]
    pub fn start(&mut self, io: &mut dyn GaugeIo) {
        let id = self.service.identity();
        let msg = FromDevice::Boot(Boot {
            serial: id.serial,
            firmware_version: id.firmware_version,
            report: self.boot.clone(),
        });
        send(io, &msg);
    }

    /// Takes bytes from the link at the board's time `now`: every complete
    /// frame is answered (and injected samples are taken and reported).
    #[inline(never)]
    pub fn receive(&mut self, now: Instant, bytes: &[u8], io: &mut dyn GaugeIo) {
        self.now = now;
        let mut rest = bytes;
        while !rest.is_empty() && !self.restart {
            match self.acc.feed(rest) {
                Feed::NeedMore => break,
                Feed::Frame { message, rest: r } => {
                    self.frames = self.frames.wrapping_add(1);
                    rest = r;
                    self.on_message(&message, io);
                }
                Feed::BadFrame { rest: r, .. } | Feed::Overfull { rest: r } => {
                    self.bad_frames = self.bad_frames.wrapping_add(1);
                    rest = r;
                }
            }
        }
    }

    /// Takes one sample read from the board's own converters at `at` and
    /// sends its telemetry and alarm frames.
    #[inline(never)]
    pub fn sample(&mut self, at: Instant, raw: &RawSample, io: &mut dyn GaugeIo) {
        self.take(at, raw);
        self.flush(io);
    }

    // Not inlined: the sample chain's locals then live only during a
    // sample, not in the frame of every message handler that may take one.
    #[inline(never)]
    fn take(&mut self, at: Instant, raw: &RawSample) {
        self.samples = self.samples.wrapping_add(1);
        self.last_sample_at = at;
        match &mut self.pipeline {
            Some(p) => {
                p.sample(at, raw);
                self.pending.tracked = true;
            }
            None => self.pending.unusable_at = Some(at),
        }
    }

    #[inline(never)]
    fn on_message(&mut self, msg: &ToDevice, io: &mut dyn GaugeIo) {
        #[allow(unused_mut)]
        let (tag, mut outcome) = match msg {
            ToDevice::Ping(p) => (p.tag, Outcome::Pong { token: p.token }),
            ToDevice::GetIdentity(g) => (g.tag, Outcome::Identity(self.service.identity().clone())),
            #[cfg(not(feature = "signed-config"))]
            ToDevice::GetChallenge(g) => (g.tag, Outcome::Refused(Refusal::Unsupported)),
            #[cfg(not(feature = "signed-config"))]
            ToDevice::Signed(s) => (s.tag, Outcome::Refused(Refusal::Unsupported)),
            #[cfg(feature = "signed-config")]
            ToDevice::GetChallenge(g) => {
                let now = self.now;
                let r = self.service.challenge(now, &mut IoNonces(io));
                let valid_ms = self.service.auth_mut().policy().session_ms;
                (
                    g.tag,
                    match r {
                        Ok(nonce) => Outcome::Challenge { nonce, valid_ms },
                        Err(e) => Outcome::Refused(refusal(e)),
                    },
                )
            }
            ToDevice::ReadConfig(r) => (
                r.tag,
                match self.service.read_config(r.offset) {
                    Ok(part) => Outcome::ConfigPart(part),
                    Err(e) => Outcome::Refused(refusal(e)),
                },
            ),
            #[cfg(feature = "signed-config")]
            ToDevice::Signed(s) => (s.tag, self.signed(s)),
            ToDevice::InjectSample(i) => (i.tag, self.inject(i)),
            ToDevice::GetDiagnostics(g) => {
                let (peak, size) = io.stack_usage();
                (
                    g.tag,
                    Outcome::Diagnostics(Diagnostics {
                        uptime_ms: self.now.as_millis(),
                        boot: self.boot.clone(),
                        stack_peak_bytes: peak,
                        stack_size_bytes: size,
                        frames: self.frames,
                        bad_frames: self.bad_frames,
                        samples: self.samples,
                    }),
                )
            }
        };
        // A new configuration starts its tracking afresh; a pipeline that
        // cannot be prepared refuses the command that committed it.
        #[cfg(feature = "signed-config")]
        if let Some(blob) = self.rebuild_due.take()
            && let Err(e) = self.rebuild(&blob)
        {
            outcome = Outcome::Refused(refusal(e));
        }
        send(io, &FromDevice::Reply(Reply { tag, outcome }));
        self.flush(io);
    }

    fn inject(&mut self, i: &InjectSample) -> Outcome {
        if !self.injection {
            return Outcome::Refused(Refusal::Unsupported);
        }
        let raw = RawSample {
            pressure: i.pressure,
            temperature: i.temperature,
        };
        self.take(Instant(i.at_ms), &raw);
        Outcome::Taken
    }

    #[cfg(feature = "signed-config")]
    #[inline(never)]
    fn signed(&mut self, s: &Signed) -> Outcome {
        let now = self.now;
        let verified = match self
            .service
            .auth_mut()
            .verify(now, s.counter, &s.mac, &s.command)
        {
            Ok(v) => v,
            Err(e) => return Outcome::Refused(refusal(e)),
        };
        let result = match s.decode_command() {
            Ok(c) => self.command(&c),
            Err(e) => Err(refusal(e)),
        };
        match result {
            Ok(()) => Outcome::Done {
                counter: verified.counter,
                mac: verified.done_mac,
            },
            Err(r) => Outcome::Refused(r),
        }
    }

    #[cfg(feature = "signed-config")]
    fn command(&mut self, c: &Command) -> Result<(), Refusal> {
        match c {
            Command::ConfigChunk {
                offset,
                total_len,
                blob_crc,
                bytes,
            } => self.config_chunk(*offset, *total_len, *blob_crc, bytes),
            Command::ZeroCalibration { channel } => self.zero(*channel),
            Command::ClearZero => self.set_zero(Zero::default()),
            Command::ClearAlarms => {
                self.fault_latched = false;
                let at = self.last_sample_at;
                if let Some(p) = &mut self.pipeline {
                    self.pending.cleared = Some(p.tracker_mut().clear_alarms(at));
                }
                Ok(())
            }
            Command::Reboot => {
                self.service.auth_mut().close_session();
                self.restart = true;
                Ok(())
            }
        }
    }

    #[cfg(feature = "signed-config")]
    #[inline(never)]
    fn config_chunk(
        &mut self,
        offset: u32,
        total_len: u32,
        blob_crc: u32,
        bytes: &[u8],
    ) -> Result<(), Refusal> {
        let step = self
            .service
            .chunk(offset, total_len, blob_crc, bytes)
            .map_err(refusal)?;
        let LoadStep::Complete(blob) = step else {
            return Ok(());
        };
        self.check_blob(&blob)?;
        let zero = self.service.zero();
        self.service.commit(blob, zero).map_err(refusal)?;
        // Prepared by `on_message` once this handler's frames are gone.
        self.rebuild_due = Some(blob);
        Ok(())
    }

    /// The blob must be a configuration this gauge can run before it is
    /// committed: format, version, checksum, every array and stage. Its
    /// own step, so that the prepared value it decodes is off the stack
    /// before the pipeline is prepared.
    #[cfg(feature = "signed-config")]
    #[inline(never)]
    fn check_blob(&mut self, blob: &BlobRef) -> Result<(), Refusal> {
        let (flash, layout) = self.service.flash_and_layout();
        let bytes = self
            .mapper
            .map(flash, layout, blob)
            .ok_or(Refusal::BlobTooLarge)?;
        // Looked at in place: mapping the `Result` would copy the prepared
        // value into a second one on this frame.
        match &Prepared::new(bytes) {
            Ok(_) => Ok(()),
            Err(e) => Err(config_refusal(*e)),
        }
    }

    #[cfg(feature = "signed-config")]
    fn zero(&mut self, channel: SensorChannel) -> Result<(), Refusal> {
        let Some(p) = &self.pipeline else {
            return Err(Refusal::NotAtZero {
                channel,
                offset: 0,
                limit: 0,
            });
        };
        let Some(r) = p.last_valid() else {
            return Err(Refusal::NotAtZero {
                channel,
                offset: 0,
                limit: 0,
            });
        };
        let z = p.zero().calibrate(
            channel,
            r.pressure.pressure_pa,
            r.temperature.temperature_k,
            p.barometric(),
            p.prepared().scalars().zero_pressure_limit,
        )?;
        self.set_zero(z)
    }

    #[cfg(feature = "signed-config")]
    fn set_zero(&mut self, z: Zero) -> Result<(), Refusal> {
        let blob = self.service.config().value.blob;
        self.service.commit(blob, z).map_err(refusal)?;
        if let Some(p) = &mut self.pipeline {
            p.set_zero(z);
        }
        Ok(())
    }

    /// Device flags of every telemetry frame.
    fn device_status(&self) -> Status {
        let mut s = self.service.status(self.now);
        if self.fault_latched {
            s |= Status::RESTARTED_AFTER_FAULT;
        }
        if self.pipeline.is_none() {
            s |= Status::CONFIG_UNUSABLE;
        }
        s
    }

    /// Sends the telemetry and alarm frames of what happened.
    #[inline(never)]
    fn flush(&mut self, io: &mut dyn GaugeIo) {
        let device = self.device_status();
        if core::mem::take(&mut self.pending.tracked)
            && let Some(p) = &self.pipeline
        {
            let t = p.output();
            let tel = telemetry::from_track(self.telemetry_seq, t, device);
            let (at, events) = (t.at, t.events);
            self.field_update(true, at, device);
            self.telemetry_seq = self.telemetry_seq.wrapping_add(1);
            if !self.quiet {
                send(io, &FromDevice::Telemetry(tel));
                self.send_events(&events, tel.status(), tel.mass(), io);
            }
        }
        if let Some(at) = self.pending.unusable_at.take() {
            let tel = telemetry::status_only(self.telemetry_seq, at.as_millis(), device);
            self.field_update(false, at, device);
            self.telemetry_seq = self.telemetry_seq.wrapping_add(1);
            if !self.quiet {
                send(io, &FromDevice::Telemetry(tel));
            }
        }
        if let Some(e) = self.pending.cleared.take() {
            let mass = self
                .pipeline
                .as_ref()
                .and_then(|p| p.tracker().latest_content())
                .map_or(fx::Mass::ZERO, |c| c.mass_kg);
            self.send_events(&e, device, mass, io);
        }
    }

    /// The loop output's set-point and the Modbus snapshot of the latest
    /// estimate (`tracked`), or of a sample without a usable configuration.
    #[inline(never)]
    fn field_update(&mut self, tracked: bool, at: Instant, device: Status) {
        let loop_out = self.field().loop_output;
        let t = match &self.pipeline {
            Some(p) if tracked => Some(p.output()),
            _ => None,
        };
        self.loop_current = match t {
            Some(t) => loop_out.of_content(t.content.as_ref(), t.status | device),
            None => loop_out.failure.current(),
        };
        #[cfg(feature = "modbus")]
        {
            let tracker = self.pipeline.as_ref().map(|p| p.tracker());
            let cfg = tracker.map(|k| k.config());
            let rated = tracker.map(|k| k.rated_standard_volume());
            self.snapshot.update(
                self.telemetry_seq,
                t,
                at.as_millis(),
                device,
                cfg,
                rated,
                self.loop_current,
            );
        }
        #[cfg(not(feature = "modbus"))]
        let _ = at;
    }

    /// The field settings in force: the configuration's, or the defaults
    /// without a usable configuration.
    pub fn field(&self) -> FieldScalars {
        self.pipeline
            .as_ref()
            .map_or_else(FieldScalars::default, |p| p.prepared().scalars().field)
    }

    /// The 4–20 mA output's set-point after the latest sample.
    pub fn loop_current(&self) -> fx::Milliamps {
        self.loop_current
    }

    /// Drops the bytes of an unfinished link frame (a one-UART board on a
    /// Modbus line: after a Modbus frame, what the link's accumulator holds
    /// is that frame, not the start of a link frame).
    pub fn discard_partial_frame(&mut self) {
        self.acc.reset();
    }

    /// Quiet: no telemetry or alarm frame is sent unasked (a one-UART board
    /// on a Modbus line); requests are still answered.
    pub fn set_quiet(&mut self, quiet: bool) {
        self.quiet = quiet;
    }

    /// The Modbus snapshot of the latest estimate.
    #[cfg(feature = "modbus")]
    pub fn snapshot(&self) -> &crate::field::modbus::map::Snapshot {
        &self.snapshot
    }

    /// Serves Modbus RTU: `bytes` received at `now_us` (µs; `now` the same
    /// time in ms) go to `server`, which answers a completed frame through
    /// `out` from this gauge's registers. Returns true when it replied.
    /// Nothing a Modbus request does changes the estimate (see
    /// [`crate::field::modbus`]).
    #[cfg(feature = "modbus")]
    #[inline(never)]
    pub fn modbus(
        &mut self,
        server: &mut crate::field::modbus::Server,
        now: Instant,
        now_us: u64,
        bytes: &[u8],
        out: &mut dyn FnMut(&[u8]),
    ) -> bool {
        self.modbus_span(server, now, (now_us, now_us), bytes, out)
    }

    /// As [`Gauge::modbus`] for bytes that arrived over `span_us` (first
    /// and last byte, µs; see [`crate::field::modbus::Server::step_span`]).
    #[cfg(feature = "modbus")]
    #[inline(never)]
    pub fn modbus_span(
        &mut self,
        server: &mut crate::field::modbus::Server,
        now: Instant,
        span_us: (u64, u64),
        bytes: &[u8],
        out: &mut dyn FnMut(&[u8]),
    ) -> bool {
        let field = self.field();
        let mut regs = crate::field::modbus::map::Registers {
            snapshot: &mut self.snapshot,
            identity: self.service.identity(),
            field: &field,
            now_ms: now.as_millis(),
        };
        server.step_span(span_us.0, span_us.1, bytes, &mut regs, out)
    }

    fn send_events(&mut self, e: &Events, status: Status, mass: fx::Mass, io: &mut dyn GaugeIo) {
        for ev in e.iter() {
            let frame = telemetry::alarm_event(self.event_seq, &ev, status, mass);
            self.event_seq = self.event_seq.wrapping_add(1);
            send(io, &FromDevice::Alarm(frame));
        }
    }

    /// True once a restart is due (a reboot command): the firmware lets the
    /// last frames leave and restarts.
    pub fn restart_requested(&self) -> bool {
        self.restart
    }

    /// The service (identity, configuration reference, flash).
    pub fn service(&self) -> &Service<F> {
        &self.service
    }

    /// The pipeline, when the configuration is usable.
    pub fn pipeline(&self) -> Option<&Pipeline<M::Bytes>> {
        self.pipeline.as_ref()
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
        self.service.into_flash()
    }
}

/// Encodes and sends one message (a message that does not encode is a bug
/// of this crate's size bounds and is dropped).
#[inline(never)]
fn send(io: &mut dyn GaugeIo, msg: &FromDevice) {
    let mut buf = [0u8; MAX_FRAME_LEN];
    if let Ok(n) = link::encode(msg, &mut buf)
        && let Some(frame) = buf.get(..n)
    {
        io.send(frame);
    }
}
