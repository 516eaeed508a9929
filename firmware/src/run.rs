//! The application loop: sample → estimate → telemetry and alarms →
//! command handling → sleep, over any [`Board`].
//!
//! At start: the boot report (why the board started), provisioning, the
//! storage layout, the committed gas-model blob decoded into the model
//! buffer, then the [`Gauge`] with every record loaded from flash; a boot
//! message goes out. Then, for ever: feed the watchdog, take the bytes the
//! serial link has, take a sample when one is due, restart when the gauge
//! asks for it (after the last frame left), and sleep until an interrupt
//! when nothing happened.

use core::mem::MaybeUninit;
use embedded_io::{Read, ReadReady, Write};

use isochor_core::app::{Gauge, GaugeIo, Models, decode_loaded_model, model_for_in, stored_gas};
use isochor_core::auth::{Authenticator, NonceSource, Policy, Secret};
use isochor_core::link::{Identity, NONCE_LEN, ResetReason};
use isochor_core::model::DeviceModel;
use isochor_core::model::device::TableBuf;

use isochor_core::link::BootReport;
use isochor_core::store::Layout;

use crate::board::{Board, Clock, Parts, SampleSource, System, Watchdog};

/// Firmware version reported in the identity and the boot message.
pub const FIRMWARE_VERSION: [u8; 3] = [0, 2, 0];

/// The gauge's outputs onto the board.
struct Io<'a, S, R, Y> {
    serial: &'a mut S,
    rng: &'a mut R,
    system: &'a Y,
}

impl<S: Write, R: NonceSource, Y: System> GaugeIo for Io<'_, S, R, Y> {
    fn send(&mut self, frame: &[u8]) {
        // A UART write does not fail; a driver that can fail drops the
        // frame (the host sees the gap in the sequence numbers).
        let _ = self.serial.write_all(frame);
    }
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        self.rng.fill_nonce(out);
    }
    fn stack_usage(&self) -> (u32, u32) {
        self.system.stack_usage()
    }
}

/// Runs the gauge on `board` for ever. `model_buffer` holds the decoded
/// gas-model blob (builds without room for one pass `None` and refuse
/// blobs); `model` holds the prepared gas model (statics, so that they
/// count as static RAM and not as stack).
///
/// The start is split in steps that each return before the next begins
/// (preparing the model needs about 10 KiB of stack on a Cortex-M0, the
/// running gauge keeps about 5 KiB on it): the deepest stack is the larger
/// of the two, not their sum — which is what lets the gauge run in the
/// 16 KiB of a `microbit`.
pub fn run<B: Board>(
    board: B,
    model_buffer: Option<&'static mut TableBuf>,
    model: &'static mut MaybeUninit<DeviceModel<'static>>,
    gauge: &'static mut Option<Gauge<'static, B::Flash>>,
) -> ! {
    let mut p = board.split();
    let boot = p.system.boot_report();
    let layout = match B::layout(&p.flash) {
        Ok(l) => l,
        // A layout that does not fit is a fault of the board definition.
        Err(_) => p.system.restart(ResetReason::HardFault),
    };
    let loadable = model_buffer.is_some();
    let model = prepare::<B>(&mut p.flash, &layout, model_buffer, model);
    let Parts {
        mut serial,
        flash,
        mut sensors,
        mut clock,
        mut watchdog,
        mut rng,
        mut system,
    } = p;
    let gauge = start::<B>(
        gauge,
        flash,
        &mut rng,
        &mut system,
        layout,
        boot,
        Models { model, loadable },
    );
    watchdog.start();
    {
        let mut io = Io {
            serial: &mut serial,
            rng: &mut rng,
            system: &system,
        };
        gauge.start(&mut io);
    }
    let mut buf = [0u8; 64];
    loop {
        watchdog.feed();
        let now = clock.now();
        let mut busy = false;
        if serial.read_ready().unwrap_or(false)
            && let Ok(n) = serial.read(&mut buf)
            && n > 0
        {
            let mut io = Io {
                serial: &mut serial,
                rng: &mut rng,
                system: &system,
            };
            gauge.receive(now, buf.get(..n).unwrap_or(&[]), &mut io);
            busy = true;
        }
        if let Some(raw) = sensors.poll(now) {
            let mut io = Io {
                serial: &mut serial,
                rng: &mut rng,
                system: &system,
            };
            gauge.sample(now, &raw, &mut io);
            busy = true;
        }
        if gauge.restart_requested() {
            let _ = serial.flush();
            system.restart(ResetReason::Requested);
        }
        if !busy {
            system.idle();
        }
    }
}

/// Decodes the committed gas-model blob (when the build can) and prepares
/// the model of the stored setup's gas.
#[inline(never)]
fn prepare<B: Board>(
    flash: &mut B::Flash,
    layout: &Layout,
    buffer: Option<&'static mut TableBuf>,
    slot: &'static mut MaybeUninit<DeviceModel<'static>>,
) -> Option<&'static DeviceModel<'static>> {
    let table: Option<&'static TableBuf> = match buffer {
        Some(buf) => match decode_loaded_model(flash, layout) {
            Some(t) => {
                *buf = t;
                Some(buf)
            }
            None => None,
        },
        None => None,
    };
    let gas = stored_gas(flash, layout);
    model_for_in(slot, gas, table, B::builtin)
}

/// Builds the gauge into its static slot (loading every record): its own
/// step, so the gauge is never on the stack and the copies made while it is
/// built are gone before the loop runs.
#[inline(never)]
fn start<B: Board>(
    slot: &'static mut Option<Gauge<'static, B::Flash>>,
    flash: B::Flash,
    rng: &mut B::Rng,
    system: &mut B::System,
    layout: Layout,
    boot: BootReport,
    models: Models<'static>,
) -> &'static mut Gauge<'static, B::Flash> {
    let (serial, secret) = match system.provisioning() {
        Some(v) => v,
        None => {
            // Not provisioned: a secret nobody knows, so nothing can be
            // signed; telemetry still flows.
            let (mut a, mut b) = ([0u8; NONCE_LEN], [0u8; NONCE_LEN]);
            rng.fill_nonce(&mut a);
            rng.fill_nonce(&mut b);
            let mut key = [0u8; 32];
            for (k, v) in key.iter_mut().zip(a.iter().chain(b.iter())) {
                *k = *v;
            }
            (0, Secret::new(key))
        }
    };
    let identity = Identity {
        serial,
        hardware_rev: B::HARDWARE_REV,
        firmware_version: FIRMWARE_VERSION,
        protocol: 0,
        max_frame_len: 0,
        capabilities: 0,
    };
    let auth = Authenticator::new(secret, serial, Policy::default());
    match Gauge::new_in(
        slot,
        identity,
        auth,
        flash,
        layout,
        models,
        B::Sensors::INJECTED,
        boot,
    ) {
        Ok(g) => g,
        Err(_) => system.restart(ResetReason::HardFault),
    }
}
