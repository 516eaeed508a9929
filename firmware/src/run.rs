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
use isochor_core::prepared::Lasting;
use isochor_core::store::{BlobRef, Layout};

use crate::board::{Board, Clock, FieldSerial, Parts, SampleSource, System, Watchdog};
#[cfg(feature = "modbus")]
use isochor_core::field::modbus::Server;
use isochor_core::field::{Parity, Protocol, SerialSettings};

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
    /// In place and for good: the stages' and the gas table's views are
    /// derived once per configuration.
    type Bytes = Lasting;
    fn map(&mut self, _flash: &mut B::Flash, layout: &Layout, blob: &BlobRef) -> Option<Lasting> {
        B::map(layout.blobs.slot_offset(blob.slot), blob.len).map(Lasting)
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
        mut field,
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
    // The field settings in force, applied to the UARTs (a new
    // configuration may change them: checked after every received piece).
    let mut settings = gauge.field().serial;
    apply(&settings, &mut serial, field.as_mut(), gauge);
    #[cfg(feature = "modbus")]
    let mut server = Server::new(&settings);
    let mut buf = [0u8; 64];
    loop {
        watchdog.feed();
        let now = clock.now();
        #[cfg(feature = "modbus")]
        let now_us = clock.now_us();
        let mut busy = false;
        // Modbus on the link's UART: a one-UART board configured so.
        #[cfg(feature = "modbus")]
        let shared = field.is_none() && settings.protocol == Protocol::Modbus;
        if serial.read_ready().unwrap_or(false)
            && let Ok(n) = serial.read(&mut buf)
            && n > 0
        {
            let bytes = buf.get(..n).unwrap_or(&[]);
            #[cfg(feature = "modbus")]
            if shared {
                let span = arrival(now_us, serial.rx_stamps());
                let frames = server.counters().checked;
                gauge.modbus_span(&mut server, now, span, bytes, &mut |b| {
                    let _ = serial.write_all(b);
                });
                if server.counters().checked != frames {
                    // The bytes before these were a Modbus frame.
                    gauge.discard_partial_frame();
                }
            }
            let mut io = Io {
                serial: &mut serial,
                rng: &mut rng,
                system: &system,
            };
            gauge.receive(now, bytes, &mut io);
            busy = true;
        }
        #[cfg(feature = "modbus")]
        if let Some(f) = field.as_mut()
            && f.read_ready().unwrap_or(false)
            && let Ok(n) = f.read(&mut buf)
            && n > 0
        {
            let span = arrival(now_us, f.rx_stamps());
            let bytes = buf.get(..n).unwrap_or(&[]);
            gauge.modbus_span(&mut server, now, span, bytes, &mut |b| {
                let _ = f.write_all(b);
            });
            busy = true;
        }
        // Time passing ends a frame (its t3.5 silence): answered here.
        #[cfg(feature = "modbus")]
        if server.busy() {
            match field.as_mut() {
                Some(f) => gauge.modbus(&mut server, now, now_us, &[], &mut |b| {
                    let _ = f.write_all(b);
                }),
                None => {
                    let frames = server.counters().checked;
                    gauge.modbus(&mut server, now, now_us, &[], &mut |b| {
                        let _ = serial.write_all(b);
                    });
                    if server.counters().checked != frames {
                        // What the link's accumulator holds was that frame.
                        gauge.discard_partial_frame();
                    }
                    false
                }
            };
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
        if busy {
            let s = gauge.field().serial;
            if s != settings {
                let _ = serial.flush();
                settings = s;
                apply(&settings, &mut serial, field.as_mut(), gauge);
                #[cfg(feature = "modbus")]
                server.configure(&settings);
            }
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

/// The settings of the isochor link on a UART: 115 200 Bd, 8N1.
const LINK: SerialSettings = SerialSettings {
    protocol: Protocol::Link,
    address: 1,
    baud: 115_200,
    parity: Parity::None,
};

/// Applies the field settings: the Modbus UART takes them; a one-UART
/// board's UART takes them when the configuration chooses Modbus (the
/// gauge then sends nothing unasked), the link's own otherwise.
fn apply<B: Board>(
    s: &SerialSettings,
    serial: &mut B::Serial,
    field: Option<&mut B::Field>,
    gauge: &mut BoardGauge<B>,
) {
    let shared =
        field.is_none() && s.protocol == Protocol::Modbus && core::cfg!(feature = "modbus");
    match field {
        Some(f) => f.configure(s),
        None => serial.configure(if shared { s } else { &LINK }),
    }
    gauge.set_quiet(shared);
}

/// The first and last arrival times (µs) of the bytes taken, from the
/// ring's 32-bit stamps (read just after the take: a byte arriving in
/// between only makes the silence end later) and the loop's time. A stamp
/// may lie before or after `now_us` (bytes arrive while the loop runs):
/// the signed 32-bit difference places it either way.
#[cfg(feature = "modbus")]
fn arrival(now_us: u64, (first, last): (u32, u32)) -> (u64, u64) {
    let at = |stamp: u32| {
        let d = i64::from(stamp.wrapping_sub(now_us as u32) as i32);
        now_us.saturating_add_signed(d)
    };
    (at(first), at(last))
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
