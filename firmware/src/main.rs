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
use isochor_firmware::arm;
use isochor_firmware::run::BoardGauge;

#[cfg(not(target_abi = "eabihf"))]
use isochor_firmware::arm::microbit as board;
#[cfg(target_abi = "eabihf")]
use isochor_firmware::arm::mps2 as board;

#[cfg(feature = "defmt")]
use defmt_rtt as _;

#[cfg(target_abi = "eabihf")]
type Board = board::Mps2;
#[cfg(not(target_abi = "eabihf"))]
type Board = board::Microbit;

/// The gauge of this start (a static, so that it counts as static RAM and
/// is never copied on the stack). In `.uninit`: an initialised static would
/// keep an image of `None` in flash; `main` writes `None` first.
#[unsafe(link_section = ".uninit.isochor_gauge")]
static mut GAUGE: MaybeUninit<Option<BoardGauge<Board>>> = MaybeUninit::uninit();

#[entry]
fn main() -> ! {
    arm::paint_stack();
    match Board::take() {
        // SAFETY: taken once, here.
        Some(b) => {
            isochor_firmware::run::run(b, unsafe { (*core::ptr::addr_of_mut!(GAUGE)).write(None) })
        }
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
    #[cfg(target_abi = "eabihf")]
    if irqn == board::UART1_RX_IRQ as i16 {
        board::uart1_rx_interrupt();
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
