//! The QEMU `mps2-an386` machine: Cortex-M4F at 25 MHz, code in 4 MiB of
//! SSRAM at 0, data in SSRAM at 0x2000_0000. Written against the
//! peripherals QEMU 7.2 emulates: CMSDK APB UART0 (0x4000_4000, receive
//! interrupt 0: the isochor link), UART1 (0x4000_5000, receive interrupt 2:
//! the Modbus line) and the CMSDK APB watchdog (0x4000_8000, its interrupt on
//! NMI, reset on the second expiry).
//!
//! The machine has no flash: the store lives in RAM-backed NOR emulation
//! ([`crate::ram_nor`]) at the start of the 16 MiB PSRAM (0x2100_0000),
//! which the firmware image and the start-up code never touch and a system
//! reset does not clear — so records survive a reboot, but not a new QEMU
//! process (the emulated part then starts blank and is formatted). The
//! provisioning block is loaded by the emulator into the last KiB of PSRAM
//! ([`PROVISIONING`]). Not a product storage: an emulation target for the
//! application and its measurements.
//!
//! The machine has no random generator either: nonces come from
//! HMAC-SHA-256 keyed with the device secret over the start count, a
//! counter and the clock. Unpredictable to whoever lacks the secret, but
//! they repeat across QEMU processes (the start count restarts at 1):
//! acceptable for emulation only; a product board uses a hardware source.

use embedded_io::{ErrorType, Read, ReadReady, Write};
use hmac::{Hmac, KeyInit, Mac};
use isochor_core::Error;
use isochor_core::auth::{NonceSource, Provisioning, Secret};
use isochor_core::link::{BootReport, NONCE_LEN, ResetReason};
use isochor_core::store::Layout;
use sha2::Sha256;

use super::{RxRing, SysTickClock};
use crate::board::{Board, Clock, FieldSerial, Injected, Parts, System, Watchdog};
use crate::ram_nor::{RamNor, format_if_blank};
use crate::retained;
use isochor_core::field::SerialSettings;

/// Core clock, Hz.
pub const CORE_HZ: u32 = 25_000_000;
/// Start of the emulated flash (PSRAM).
pub const STORE_START: u32 = 0x2100_0000;
/// Record bank length.
pub const BANK_LEN: u32 = 1024;
/// Gas-model slot length.
pub const SLOT_LEN: u32 = 16384;
/// Size of the store.
pub const STORE_LEN: u32 = Layout::size(BANK_LEN, SLOT_LEN);
/// Address of the provisioning block (the last KiB of PSRAM).
pub const PROVISIONING: u32 = 0x21FF_FC00;
/// UART0 receive interrupt number.
pub const UART0_RX_IRQ: u16 = 0;
/// UART1 receive interrupt number (AN385/AN386: UART1 RX is 2).
pub const UART1_RX_IRQ: u16 = 2;

const UART0: u32 = 0x4000_4000;
const UART1: u32 = 0x4000_5000;
const WATCHDOG: u32 = 0x4000_8000;

fn rd(addr: u32) -> u32 {
    // SAFETY: `addr` is a register of this board's memory map.
    unsafe { core::ptr::read_volatile(addr as *const u32) }
}

fn wr(addr: u32, v: u32) {
    // SAFETY: `addr` is a register of this board's memory map.
    unsafe { core::ptr::write_volatile(addr as *mut u32, v) }
}

/// Bytes the UART0 interrupt received (the isochor link).
pub static RX: RxRing = RxRing::new();
/// Bytes the UART1 interrupt received (the Modbus line).
pub static RX1: RxRing = RxRing::new();

/// Drains a CMSDK UART's receive register into `ring`.
///
/// The interrupt is cleared *before* the data register is drained. The
/// other order loses the link for good: a byte that arrives between the
/// last `RXFULL` check and the clear sets `RXFULL` and the interrupt, the
/// clear then drops the interrupt, and since the UART takes no further byte
/// while `RXFULL` is set (QEMU's `can_receive`, the one-byte buffer of the
/// real part), nothing would ever raise it again. Cleared first, a byte
/// arriving at any point either is drained by the loop below or raises the
/// interrupt anew.
fn drain(base: u32, ring: &RxRing) {
    wr(base + 0xC, 2); // INTCLEAR RX
    while rd(base + 0x4) & 2 != 0 {
        // STATE.RXFULL
        ring.push(rd(base) as u8);
    }
}

/// The UART0 receive interrupt: moves every received byte into [`RX`].
pub fn uart0_rx_interrupt() {
    drain(UART0, &RX);
}

/// The UART1 receive interrupt: moves every received byte into [`RX1`].
pub fn uart1_rx_interrupt() {
    drain(UART1, &RX1);
}

#[derive(Clone, Copy)]
struct Irq(u16);
// SAFETY: the number is a valid interrupt of the machine.
unsafe impl cortex_m::interrupt::InterruptNumber for Irq {
    fn number(self) -> u16 {
        self.0
    }
}

/// A CMSDK APB UART at 115 200 Bd (25 MHz / 217), received bytes through
/// its ring. The CMSDK UART has no parity and one stop bit: on the Modbus
/// line the baud rate is applied, the parity is not (an emulation board).
pub struct Uart {
    base: u32,
    ring: &'static RxRing,
}

impl Uart {
    fn new(base: u32, ring: &'static RxRing, irq: u16) -> Uart {
        wr(base + 0x10, CORE_HZ / 115_200); // BAUDDIV (≥ 16)
        wr(base + 0x8, 0b1011); // CTRL: TX, RX, RX interrupt
        // SAFETY: the handler only touches this UART and its ring.
        unsafe { cortex_m::peripheral::NVIC::unmask(Irq(irq)) };
        Uart { base, ring }
    }
}

impl FieldSerial for Uart {
    fn configure(&mut self, s: &SerialSettings) {
        wr(self.base + 0x10, CORE_HZ / s.baud.max(1200)); // BAUDDIV
    }
    fn rx_stamps(&self) -> (u32, u32) {
        self.ring.stamps()
    }
}

impl ErrorType for Uart {
    type Error = core::convert::Infallible;
}

impl ReadReady for Uart {
    fn read_ready(&mut self) -> Result<bool, Self::Error> {
        Ok(self.ring.ready())
    }
}

impl Read for Uart {
    fn read(&mut self, buf: &mut [u8]) -> Result<usize, Self::Error> {
        Ok(self.ring.read(buf))
    }
}

impl Write for Uart {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Self::Error> {
        for &b in buf {
            while rd(self.base + 0x4) & 1 != 0 {} // STATE.TXFULL
            wr(self.base, u32::from(b));
        }
        Ok(buf.len())
    }
    fn flush(&mut self) -> Result<(), Self::Error> {
        while rd(self.base + 0x4) & 1 != 0 {}
        Ok(())
    }
}

/// Nonces from HMAC-SHA-256 (see the module documentation: emulation only).
pub struct KeyedNonces {
    key: [u8; 32],
    counter: u64,
    clock: SysTickClock,
}

impl NonceSource for KeyedNonces {
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        self.counter += 1;
        let Ok(mut mac) = Hmac::<Sha256>::new_from_slice(&self.key) else {
            return;
        };
        mac.update(b"isochor/1/emulated-nonce");
        mac.update(&super::boots().to_le_bytes());
        mac.update(&self.counter.to_le_bytes());
        mac.update(&self.clock.now().as_millis().to_le_bytes());
        let tag = mac.finalize().into_bytes();
        for (d, s) in out.iter_mut().zip(tag.iter()) {
            *d = *s;
        }
    }
}

/// The CMSDK watchdog: 2 s to its interrupt (NMI: the boot record says
/// "watchdog", then the board resets), reset enabled.
pub struct Wdog(());

impl Watchdog for Wdog {
    fn start(&mut self) {
        wr(WATCHDOG + 0xC00, 0x1ACC_E551); // LOCK: unlock
        wr(WATCHDOG, 2 * CORE_HZ); // LOAD
        wr(WATCHDOG + 0x8, 0b11); // CONTROL: interrupt and reset enabled
        wr(WATCHDOG + 0xC00, 0); // lock
    }
    fn feed(&mut self) {
        wr(WATCHDOG + 0xC00, 0x1ACC_E551);
        wr(WATCHDOG + 0xC, 1); // INTCLR: clears and reloads
        wr(WATCHDOG + 0xC00, 0);
    }
}

fn provisioning() -> Option<Provisioning> {
    // SAFETY: the last KiB of PSRAM, mapped RAM.
    let block =
        unsafe { core::slice::from_raw_parts(PROVISIONING as *const u8, Provisioning::LEN) };
    Provisioning::from_bytes(block)
}

/// Board services.
pub struct Services(());

impl System for Services {
    fn provisioning(&mut self) -> Option<(u64, Secret)> {
        provisioning().map(|p| (p.serial, p.secret))
    }
    fn boot_report(&mut self) -> BootReport {
        let (report, armed) = retained::on_boot(super::kept(), None);
        super::keep(&armed);
        report
    }
    fn restart(&mut self, reason: ResetReason) -> ! {
        super::record_and_reset(reason, None)
    }
    fn idle(&mut self) {
        cortex_m::asm::wfi();
    }
    fn stack_usage(&self) -> (u32, u32) {
        super::stack_usage()
    }
}

/// The board.
pub struct Mps2 {
    syst: cortex_m::peripheral::SYST,
}

impl Mps2 {
    /// Takes the core peripherals (once; `None` after).
    pub fn take() -> Option<Mps2> {
        let cp = cortex_m::Peripherals::take()?;
        Some(Mps2 { syst: cp.SYST })
    }
}

impl Board for Mps2 {
    type Serial = Uart;
    type Field = Uart;
    type Flash = RamNor<'static>;
    type Sensors = Injected;
    type Clock = SysTickClock;
    type Watchdog = Wdog;
    type Rng = KeyedNonces;
    type System = Services;

    const HARDWARE_REV: u16 = 2;

    fn split(self) -> Parts<Self> {
        // SAFETY: the PSRAM window is written by this driver alone (nothing
        // else in the image writes it; `Board::map` reads it) and `split`
        // runs once.
        let mut flash = unsafe { RamNor::from_raw(STORE_START as *mut u8, STORE_LEN as usize) };
        let _ = format_if_blank(&mut flash);
        let key = provisioning().map_or([0; 32], |p| p.secret.derive(b"isochor/1/nonce-key"));
        Parts {
            serial: Uart::new(UART0, &RX, UART0_RX_IRQ),
            field: Some(Uart::new(UART1, &RX1, UART1_RX_IRQ)),
            flash,
            sensors: Injected,
            clock: SysTickClock::start(self.syst, CORE_HZ),
            watchdog: Wdog(()),
            rng: KeyedNonces {
                key,
                counter: 0,
                clock: SysTickClock::view(),
            },
            system: Services(()),
        }
    }

    fn layout(flash: &RamNor<'static>) -> Result<Layout, Error> {
        Layout::contiguous(flash, 0, BANK_LEN, SLOT_LEN)
    }

    fn map(offset: u32, len: u32) -> Option<&'static [u8]> {
        let end = offset.checked_add(len)?;
        if end > STORE_LEN {
            return None;
        }
        // SAFETY: inside the PSRAM window of the store, mapped RAM for the
        // program's life; the contract of `Board::map` keeps the range
        // unwritten while the slice is in use.
        Some(unsafe {
            core::slice::from_raw_parts((STORE_START + offset) as *const u8, len as usize)
        })
    }
}
