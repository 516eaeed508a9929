//! An emulated device: the firmware's application ([`Gauge`], from the
//! core) on a simulated NOR flash, served over any [`Transport`]. It runs
//! exactly the code the reference firmware runs (the configuration record,
//! signed commands, prepared-configuration loads, the sensor channels, the
//! tracker and its alarms), with
//! samples taken from [`InjectSample`](isochor_core::link::InjectSample)
//! messages, so host tests exercise the same paths as the QEMU tests.

use std::io;
use std::time::{Duration, Instant as StdInstant};

use isochor_core::app::{Gauge, GaugeIo, Mapper};
use isochor_core::auth::{Authenticator, NonceSource, Policy, Secret};
use isochor_core::link::{BootReport, Identity, NONCE_LEN, ResetReason};
use isochor_core::store::sim::SimFlash;
use isochor_core::store::{BlobRef, Layout};
use isochor_core::time::Instant;
use isochor_tank::gauge::SharedBlob;

use super::transport::Transport;
use crate::Error;

/// The emulated device's flash: 64 KiB, 1 KiB sectors, 4-byte writes.
pub type EmulatedFlash = SimFlash<65536, 1024, 4>;

/// Record banks of 1 KiB (the configuration record takes 2 KiB).
pub const BANK_LEN: u32 = 1024;
/// Configuration slots of 16 KiB (the largest prepared configuration,
/// [`isochor_core::prepared::MAX_LEN`]).
pub const SLOT_LEN: u32 = isochor_core::prepared::MAX_LEN as u32;

/// The emulated device's storage layout: the configuration record's area
/// from 0, then the two configuration slots.
pub fn layout(flash: &EmulatedFlash) -> Result<Layout, Error> {
    Ok(Layout::contiguous(flash, 0, BANK_LEN, SLOT_LEN)?)
}

/// Nonces from the operating system's random source.
pub struct OsNonces;

impl NonceSource for OsNonces {
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        // The OS random source does not fail on supported systems; a device
        // without randomness must not answer challenges at all.
        getrandom::fill(out).expect("operating-system random source");
    }
}

/// The gauge's outputs onto a transport.
struct Io<'a, T> {
    transport: &'a mut T,
    failed: bool,
}

impl<T: Transport> GaugeIo for Io<'_, T> {
    fn send(&mut self, frame: &[u8]) {
        if self.transport.send(frame).is_err() {
            self.failed = true;
        }
    }
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        OsNonces.fill_nonce(out);
    }
}

/// Copies a stored configuration into RAM (the emulated flash is not
/// mapped into memory).
pub struct CopyMapper;

impl Mapper<EmulatedFlash> for CopyMapper {
    type Bytes = SharedBlob;

    fn map(
        &mut self,
        flash: &mut EmulatedFlash,
        layout: &Layout,
        blob: &BlobRef,
    ) -> Option<SharedBlob> {
        let mut bytes = vec![0u8; blob.len as usize];
        layout.blobs.read(flash, blob, 0, &mut bytes).ok()?;
        Some(SharedBlob::from_bytes(&bytes))
    }
}

/// A device in software.
pub struct EmulatedDevice {
    flash: Option<Box<EmulatedFlash>>,
    serial: u64,
    secret: Secret,
    policy: Policy,
    started: StdInstant,
    boots: u32,
    next_reason: ResetReason,
}

impl EmulatedDevice {
    /// A device with serial `serial` and `secret`, erased flash.
    pub fn new(serial: u64, secret: Secret) -> Result<EmulatedDevice, Error> {
        Self::with_flash(serial, secret, Box::new(EmulatedFlash::new()))
    }

    /// A device starting from the given flash contents.
    pub fn with_flash(
        serial: u64,
        secret: Secret,
        flash: Box<EmulatedFlash>,
    ) -> Result<EmulatedDevice, Error> {
        layout(&flash)?;
        Ok(EmulatedDevice {
            flash: Some(flash),
            serial,
            secret,
            policy: Policy::default(),
            started: StdInstant::now(),
            boots: 0,
            next_reason: ResetReason::PowerOn,
        })
    }

    /// Time since the device started.
    pub fn now(&self) -> Instant {
        Instant(self.started.elapsed().as_millis() as u64)
    }

    /// Starts (power-on or restart) so far.
    pub fn boots(&self) -> u32 {
        self.boots
    }

    /// The flash (between runs of [`EmulatedDevice::serve`]).
    pub fn flash(&self) -> Option<&EmulatedFlash> {
        self.flash.as_deref()
    }

    /// Runs the device on `transport` until the other end closes it:
    /// starts, answers, takes injected samples, sends telemetry and alarms,
    /// and restarts (keeping its flash) when asked to. Each start sends a
    /// boot message.
    pub fn serve<T: Transport>(&mut self, transport: &mut T) -> Result<(), Error> {
        loop {
            let flash = self
                .flash
                .take()
                .ok_or_else(|| Error::Link("the emulated device has no flash".into()))?;
            let layout = layout(&flash)?;
            self.boots += 1;
            let boot = BootReport::new(self.next_reason, self.boots);
            let identity = Identity {
                serial: self.serial,
                hardware_rev: 1,
                firmware_version: isochor_core::app::VERSION,
                protocol: 0,
                max_frame_len: 0,
                capabilities: 0,
                config_capacity: 0,
            };
            let auth = Authenticator::new(self.secret.clone(), self.serial, self.policy);
            let mut slot = None;
            let gauge = Gauge::new_in(
                &mut slot, identity, auth, *flash, layout, CopyMapper, true, boot,
            )?;
            let closed = self.run(gauge, transport);
            let gauge = slot
                .take()
                .ok_or_else(|| Error::Link("the emulated device lost its gauge".into()))?;
            self.flash = Some(Box::new(gauge.into_flash()));
            self.next_reason = ResetReason::Requested;
            if closed? {
                return Ok(());
            }
        }
    }

    /// Pumps bytes into the gauge; `Ok(true)` once the link closed,
    /// `Ok(false)` when the gauge asks for a restart.
    fn run<T: Transport>(
        &self,
        gauge: &mut Gauge<EmulatedFlash, CopyMapper>,
        transport: &mut T,
    ) -> Result<bool, Error> {
        let mut io = Io {
            transport,
            failed: false,
        };
        gauge.start(&mut io);
        let mut buf = [0u8; 512];
        loop {
            if gauge.restart_requested() {
                return Ok(false);
            }
            match io.transport.receive(&mut buf, Duration::from_millis(50)) {
                Ok(n) => {
                    let now = self.now();
                    gauge.receive(now, &buf[..n], &mut io);
                }
                Err(e) if e.kind() == io::ErrorKind::UnexpectedEof => return Ok(true),
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(Error::Link(format!("receive: {e}"))),
            }
            if io.failed {
                return Ok(true);
            }
        }
    }
}

/// A gauge (the firmware's application) on an emulated flash that already
/// holds `config`, stored as a signed load would store it; not
/// provisioned for signing. For host tests and measurements that drive the
/// gauge directly (samples, Modbus) without a link.
pub fn configured_gauge(
    config: &isochor_core::prepared::GaugeConfig,
) -> Result<Box<Option<Gauge<EmulatedFlash, CopyMapper>>>, Error> {
    use isochor_core::app::Zero;
    use isochor_core::app::service::{LoadStep, Service};
    let flash = EmulatedFlash::new();
    let lay = layout(&flash)?;
    let identity = Identity {
        serial: 42,
        hardware_rev: 1,
        firmware_version: isochor_core::app::VERSION,
        protocol: 0,
        max_frame_len: 0,
        capabilities: 0,
        config_capacity: 0,
    };
    let mut key = [0u8; 32];
    OsNonces.fill_nonce(
        (&mut key[..NONCE_LEN])
            .try_into()
            .unwrap_or(&mut [0; NONCE_LEN]),
    );
    let auth = || Authenticator::new(Secret::new(key), 42, Policy::default());
    let mut svc = Service::new(identity.clone(), auth(), flash, lay.clone())?;
    let (blob, _) = isochor_core::prepared::PreparedBuf::build(config)?;
    let bytes = blob.bytes();
    let crc = isochor_core::checksum::crc32c(bytes);
    let mut off = 0;
    for chunk in bytes.chunks(256) {
        if let LoadStep::Complete(b) = svc.chunk(off as u32, bytes.len() as u32, crc, chunk)? {
            svc.commit(b, Zero::default())?;
        }
        off += chunk.len();
    }
    let flash = svc.into_flash();
    let mut slot = Box::new(None);
    Gauge::new_in(
        &mut slot,
        identity,
        auth(),
        flash,
        lay,
        CopyMapper,
        false,
        BootReport::new(ResetReason::PowerOn, 1),
    )?;
    Ok(slot)
}
