//! The minimal integration: raw converter codes to content, sent as
//! telemetry frames — nothing else. No tracking, uncertainty, alarms,
//! requests, signed configuration writes or store: what a team links when
//! its product only shows the content and already has its own
//! configuration path. The configuration is the committed nominal one
//! (`firmware/data/nominal.izpc`, a 50 L nitrogen cylinder rated 200 bar
//! with the reference board's nominal sensors), linked into flash and read
//! in place.
//!
//! On the emulated boards there are no converters: the program takes the
//! codes of an invented bench sweep ([`isochor_firmware::sweep::codes`], the cylinder drawn down from
//! about 150 bar while the temperature wanders around 20 °C), one sample a
//! second of its own time, and sends [`SAMPLES`] frames, then idles. The
//! end-to-end test (`tests/tests/firmware_qemu.rs`,
//! `minimal_integration_matches_the_host`) reads the frames and compares
//! them with the host on the same codes. On a real board, replace
//! the sweep by the board's [`SampleSource`](isochor_firmware::board::SampleSource).
//!
//! Build and measure (figures in docs/budget.md):
//! `cd firmware && cargo build --release --bin minimal` and
//! `llvm-size target/thumbv6m-none-eabi/release/minimal`.
#![no_std]
#![no_main]

use cortex_m_rt::{entry, exception};
use embedded_io::Write;
use isochor_core::app::telemetry;
use isochor_core::content::fixed::Estimator;
use isochor_core::link::{self, FromDevice, MAX_FRAME_LEN, ResetReason};
use isochor_core::prepared::{Lasting, Prepared, PreparedModel};
use isochor_core::sensor::VALUE_INVALID;
use isochor_core::sensor::channel::fixed::{PressureChannel, TemperatureChannel};
use isochor_core::time::Instant;
use isochor_firmware::arm;
use isochor_firmware::board::Board as _;

#[cfg(not(target_abi = "eabihf"))]
use isochor_firmware::arm::microbit as board;
#[cfg(target_abi = "eabihf")]
use isochor_firmware::arm::mps2 as board;

#[cfg(target_abi = "eabihf")]
type Board = board::Mps2;
#[cfg(not(target_abi = "eabihf"))]
type Board = board::Microbit;

/// Frames sent before the program idles.
pub const SAMPLES: u32 = 120;

/// Bytes aligned as a prepared configuration needs (4).
#[repr(C, align(4))]
struct Aligned<T: ?Sized>(T);

/// The configuration, in flash.
static CONFIG: &Aligned<[u8]> = &Aligned(*include_bytes!("../../data/nominal.izpc"));

#[entry]
fn main() -> ! {
    let Some(b) = Board::take() else {
        arm::record_and_reset(ResetReason::HardFault, None)
    };
    let mut parts = b.split();
    let serial = &mut parts.serial;
    // A configuration that does not validate sends nothing: the committed
    // one is checked by the test `committed_firmware_configuration_is_current`.
    // The configuration is read in place from flash (`Lasting`): the
    // stages' views are derived once, not per sample.
    if let Ok(prepared) = Prepared::new(Lasting(&CONFIG.0[..]))
        && let Some((ts, ps)) = prepared.lasting_stages()
        && let Ok(model) = PreparedModel::new(&prepared)
        && let Ok(estimator) = Estimator::from_parts(prepared.scalars().estimator, model)
    {
        let temperature = TemperatureChannel { offset: 0 };
        let mut pressure = PressureChannel::new(0);
        for i in 0..SAMPLES {
            let at = Instant(u64::from(i) * 1000);
            let raw = isochor_firmware::sweep::codes(i);
            let t = temperature.read(&ts, raw.temperature);
            let p = pressure.read(&ps, at, raw.pressure, &t);
            let flags = p.status | t.status;
            let frame = if flags.intersects(VALUE_INVALID) {
                telemetry::status_only(i, at.as_millis(), flags)
            } else {
                let mut c = estimator.estimate(p.pressure_pa, t.temperature_k);
                c.status |= flags;
                telemetry::from_content(i, at.as_millis(), &c)
            };
            let mut buf = [0u8; MAX_FRAME_LEN];
            if let Ok(n) = link::encode(&FromDevice::Telemetry(frame), &mut buf)
                && let Some(bytes) = buf.get(..n)
            {
                let _ = serial.write_all(bytes);
            }
        }
    }
    loop {
        cortex_m::asm::wfi();
    }
}

#[exception]
unsafe fn DefaultHandler(irqn: i16) {
    // Received bytes are taken into the board's ring and never read.
    #[cfg(target_abi = "eabihf")]
    if irqn == board::UART0_RX_IRQ as i16 {
        board::uart0_rx_interrupt();
    }
    #[cfg(not(target_abi = "eabihf"))]
    if irqn == board::UART0_IRQ as i16 {
        board::uart0_interrupt();
    }
}

#[exception]
fn SysTick() {
    arm::tick();
}

#[exception]
unsafe fn HardFault(_frame: &cortex_m_rt::ExceptionFrame) -> ! {
    arm::record_and_reset(ResetReason::HardFault, None)
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    let location = info.location().map(|l| (l.file(), l.line()));
    arm::record_and_reset(ResetReason::Panic, location)
}
