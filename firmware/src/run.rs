//! The application loop: sample → estimate → telemetry and alarms →
//! command handling → sleep, over any [`Board`].
//!
//! At start: the boot report (why the board started), provisioning, the
//! storage layout, then the [`Gauge`] with the configuration reference
//! loaded from flash and the prepared configuration in force read in place
//! through the board's memory map; a boot message goes out. Then, for ever:
//! feed the watchdog, take the bytes the serial link has, take a sample when
//! one is due, restart when the gauge asks for it (after the last frame
//! left), and sleep until an interrupt when nothing happened.

use core::marker::PhantomData;
use embedded_io::{Read, ReadReady, Write};

use isochor_core::app::{Gauge, GaugeIo, Mapper};
use isochor_core::auth::NonceSource;
use isochor_core::link::{BootReport, NONCE_LEN, ResetReason};
use isochor_core::store::{BlobRef, Layout};

use crate::board::{Board, Clock, Parts, SampleSource, System, Watchdog};

/// Version reported in the identity and the boot message: the application's
/// (`isochor-core`'s package version; the host's emulated device reports
/// the same).
pub const FIRMWARE_VERSION: [u8; 3] = isochor_core::app::VERSION;

/// The gauge of a board: its flash, and its store read in place.
pub type BoardGauge<B> = Gauge<<B as Board>::Flash, BoardMap<B>>;

/// Reads a prepared configuration in place through the board's memory map
/// ([`Board::map`]).
pub struct BoardMap<B>(PhantomData<fn() -> B>);

impl<B: Board> Mapper<B::Flash> for BoardMap<B> {
    type Bytes = &'static [u8];
    fn map(
        &mut self,
        _flash: &mut B::Flash,
        layout: &Layout,
        blob: &BlobRef,
    ) -> Option<&'static [u8]> {
        B::map(layout.blobs.slot_offset(blob.slot), blob.len)
    }
}

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

/// Runs the gauge on `board` for ever; `gauge` is its place (a static, so
/// that it counts as static RAM and is never copied on the stack).
pub fn run<B: Board>(board: B, gauge: &'static mut Option<BoardGauge<B>>) -> ! {
    let mut p = board.split();
    let boot = p.system.boot_report();
    let layout = match B::layout(&p.flash) {
        Ok(l) => l,
        // A layout that does not fit is a fault of the board definition.
        Err(_) => p.system.restart(ResetReason::HardFault),
    };
    let Parts {
        mut serial,
        flash,
        mut sensors,
        mut clock,
        mut watchdog,
        mut rng,
        mut system,
    } = p;
    let gauge = start::<B>(gauge, flash, &mut rng, &mut system, layout, boot);
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

/// Builds the gauge into its static slot (the core's start-up sequence):
/// its own step, so the gauge is never on the stack and the copies made
/// while it is built are gone before the loop runs.
#[inline(never)]
fn start<B: Board>(
    slot: &'static mut Option<BoardGauge<B>>,
    flash: B::Flash,
    rng: &mut B::Rng,
    system: &mut B::System,
    layout: Layout,
    boot: BootReport,
) -> &'static mut BoardGauge<B> {
    let provisioning = system.provisioning();
    match Gauge::start_up(
        slot,
        provisioning,
        rng,
        B::HARDWARE_REV,
        flash,
        layout,
        BoardMap::<B>(PhantomData),
        B::Sensors::INJECTED,
        boot,
    ) {
        Ok(g) => g,
        Err(_) => system.restart(ResetReason::HardFault),
    }
}
