//! The isochor reference firmware: the gauge application on the board of
//! the build target (`thumbv6m-none-eabi`: QEMU `microbit`;
//! `thumbv7em-none-eabihf`: QEMU `mps2-an386`). See the library for the
//! pieces and DEVELOPERS.md for the architecture.
//!
//! Panic strategy: a panic (or a hard fault, or the watchdog) records its
//! reason — and for a panic the source location — in memory a reset keeps,
//! then resets the board. The next start reports it in its boot message and
//! its diagnostics, and telemetry carries `restarted_after_fault` until a
//! signed clear-alarms command acknowledges it.
#![no_std]
#![no_main]

use core::mem::MaybeUninit;
use cortex_m_rt::{ExceptionFrame, entry, exception};
use isochor_core::link::ResetReason;

use isochor_core::model::DeviceModel;
use isochor_core::model::device::TableBuf;
use isochor_firmware::arm;

#[cfg(not(target_abi = "eabihf"))]
use isochor_firmware::arm::microbit as board;
#[cfg(target_abi = "eabihf")]
use isochor_firmware::arm::mps2 as board;

#[cfg(feature = "defmt")]
use defmt_rtt as _;

/// Room for one decoded gas-model table (builds with `model-load`).
#[cfg(feature = "model-load")]
static mut MODEL: TableBuf = TableBuf {
    gas: isochor_core::Gas::Nitrogen,
    temperature_knots: heapless::Vec::new(),
    pressure_knots: heapless::Vec::new(),
    z_offset: 0,
    z_step_exp: 0,
    z_floor: 0,
    coefs: heapless::Vec::new(),
    boundary: None,
};

fn model_buffer() -> Option<&'static mut TableBuf> {
    #[cfg(feature = "model-load")]
    {
        // SAFETY: taken once, here, before anything else can reach it.
        Some(unsafe { &mut *core::ptr::addr_of_mut!(MODEL) })
    }
    #[cfg(not(feature = "model-load"))]
    {
        None
    }
}

/// The prepared gas model of this start.
static mut PREPARED: MaybeUninit<DeviceModel<'static>> = MaybeUninit::uninit();

/// The board's flash driver.
#[cfg(target_abi = "eabihf")]
type Flash = <board::Mps2 as isochor_firmware::board::Board>::Flash;
#[cfg(not(target_abi = "eabihf"))]
type Flash = <board::Microbit as isochor_firmware::board::Board>::Flash;

/// The gauge of this start (a static, so that it counts as static RAM and
/// is never copied on the stack). In `.uninit`: an initialised static would
/// keep a 4.4 KiB image of `None` in flash; `main` writes `None` first.
#[unsafe(link_section = ".uninit.isochor_gauge")]
static mut GAUGE: MaybeUninit<Option<isochor_core::app::Gauge<'static, Flash>>> =
    MaybeUninit::uninit();

#[entry]
fn main() -> ! {
    arm::paint_stack();
    #[cfg(target_abi = "eabihf")]
    let b = board::Mps2::take();
    #[cfg(not(target_abi = "eabihf"))]
    let b = board::Microbit::take();
    match b {
        // SAFETY: taken once, here.
        // SAFETY: taken once, here.
        Some(b) => isochor_firmware::run::run(
            b,
            model_buffer(),
            unsafe { &mut *core::ptr::addr_of_mut!(PREPARED) },
            unsafe { (*core::ptr::addr_of_mut!(GAUGE)).write(None) },
        ),
        None => arm::record_and_reset(ResetReason::HardFault, None),
    }
}

#[exception]
fn SysTick() {
    arm::tick();
}

#[exception]
unsafe fn DefaultHandler(irqn: i16) {
    #[cfg(target_abi = "eabihf")]
    if irqn == board::UART0_RX_IRQ as i16 {
        board::uart0_rx_interrupt();
    }
    #[cfg(not(target_abi = "eabihf"))]
    if irqn == board::UART0_IRQ as i16 {
        board::uart0_interrupt();
    }
}

/// The watchdog's first expiry (mps2-an386: wired to NMI).
#[exception]
unsafe fn NonMaskableInt() {
    arm::record_and_reset(ResetReason::Watchdog, None);
}

#[exception]
unsafe fn HardFault(_frame: &ExceptionFrame) -> ! {
    arm::record_and_reset(ResetReason::HardFault, None)
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    let location = info.location().map(|l| (l.file(), l.line()));
    arm::record_and_reset(ResetReason::Panic, location)
}
