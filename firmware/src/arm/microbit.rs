//! The QEMU `microbit` machine: nRF51822, Cortex-M0 at 16 MHz, 256 KiB
//! flash, 16 KiB RAM. Written against the peripherals QEMU 7.2 emulates:
//! UART0 (0x4000_2000), NVMC (0x4001_E000, flash writes and page erases),
//! RNG (0x4000_D000). The watchdog (WDT, 0x4001_0000) and the reset-reason
//! register (POWER.RESETREAS, 0x4000_0400) are programmed as on the real
//! part, but QEMU 7.2 does not emulate them (its accesses are ignored and
//! read as zero), so they are untested there.
//!
//! Flash map: code from 0; the store (the configuration record's two banks
//! of 1 KiB, two 8 KiB prepared-configuration slots: 18 KiB) at
//! [`STORE_START`], read in place through the memory map; the provisioning
//! block in the last page ([`PROVISIONING`]).
//!
//! Samples are injected over the link: the emulated machine has no
//! converters. A real board with an SPI converter replaces
//! [`crate::board::Injected`] with [`crate::adc::AdcSampler`].

use embedded_io::{ErrorType, Read, ReadReady, Write};
use embedded_storage::nor_flash::{
    ErrorType as FlashErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
    check_erase, check_read, check_write,
};
use isochor_core::Error;
use isochor_core::auth::{NonceSource, Provisioning, Secret};
use isochor_core::link::{BootReport, NONCE_LEN, ResetReason};
use isochor_core::store::Layout;

use super::{RxRing, SysTickClock};
use crate::board::{Board, FieldSerial, Injected, Parts, System, Watchdog};
use crate::retained;
use isochor_core::field::{Parity, SerialSettings};

/// Core clock, Hz.
pub const CORE_HZ: u32 = 16_000_000;
/// Start of the store in flash.
pub const STORE_START: u32 = PROVISIONING - STORE_LEN;
/// Size of the store: the record's two 1 KiB banks, two configuration slots.
pub const STORE_LEN: u32 = Layout::size(BANK_LEN, SLOT_LEN);
/// Record bank length (one flash page).
pub const BANK_LEN: u32 = 1024;
/// Prepared-configuration slot length (the largest configuration).
pub const SLOT_LEN: u32 = 8192;
/// Address of the provisioning block (the last flash page).
pub const PROVISIONING: u32 = 0x3_FC00;
/// UART0 interrupt number.
pub const UART0_IRQ: u16 = 2;

const UART0: u32 = 0x4000_2000;
const NVMC: u32 = 0x4001_E000;
const RNG: u32 = 0x4000_D000;
const WDT: u32 = 0x4001_0000;
const POWER: u32 = 0x4000_0000;
const PAGE: u32 = 1024;

fn rd(addr: u32) -> u32 {
    // SAFETY: `addr` is a register of this board's memory map.
    unsafe { core::ptr::read_volatile(addr as *const u32) }
}

fn wr(addr: u32, v: u32) {
    // SAFETY: `addr` is a register of this board's memory map.
    unsafe { core::ptr::write_volatile(addr as *mut u32, v) }
}

/// Bytes the UART interrupt received.
pub static RX: RxRing = RxRing::new();

/// The UART0 interrupt: moves every received byte into [`RX`].
pub fn uart0_interrupt() {
    while rd(UART0 + 0x108) != 0 {
        wr(UART0 + 0x108, 0); // EVENTS_RXDRDY, cleared before RXD is read
        RX.push(rd(UART0 + 0x518) as u8);
    }
    if rd(UART0 + 0x124) != 0 {
        wr(UART0 + 0x124, 0); // EVENTS_ERROR
        wr(UART0 + 0x480, rd(UART0 + 0x480)); // ERRORSRC, write 1 to clear
    }
}

#[derive(Clone, Copy)]
struct Irq(u16);
// SAFETY: the number is a valid nRF51 interrupt.
unsafe impl cortex_m::interrupt::InterruptNumber for Irq {
    fn number(self) -> u16 {
        self.0
    }
}

/// UART0 at 115 200 Bd, 8N1, received bytes through [`RX`].
pub struct Uart(());

impl Uart {
    fn new() -> Uart {
        wr(UART0 + 0x500, 0); // ENABLE off while configuring
        wr(UART0 + 0x50C, 24); // PSELTXD: P0.24 (micro:bit)
        wr(UART0 + 0x514, 25); // PSELRXD: P0.25
        wr(UART0 + 0x524, 0x01D7_E000); // BAUDRATE 115200
        wr(UART0 + 0x500, 4); // ENABLE
        wr(UART0 + 0x108, 0);
        wr(UART0 + 0x11C, 0);
        wr(UART0 + 0x304, 1 << 2); // INTENSET RXDRDY
        wr(UART0, 1); // TASKS_STARTRX
        wr(UART0 + 0x008, 1); // TASKS_STARTTX
        // SAFETY: the handler only touches UART0 and the ring.
        unsafe { cortex_m::peripheral::NVIC::unmask(Irq(UART0_IRQ)) };
        Uart(())
    }
}

impl ErrorType for Uart {
    type Error = core::convert::Infallible;
}

impl ReadReady for Uart {
    fn read_ready(&mut self) -> Result<bool, Self::Error> {
        Ok(RX.ready())
    }
}

impl Read for Uart {
    fn read(&mut self, buf: &mut [u8]) -> Result<usize, Self::Error> {
        Ok(RX.read(buf))
    }
}

/// BAUDRATE register values of the accepted rates (nRF51 Series
/// Reference Manual v3.0, UART BAUDRATE; from memory).
const BAUD: [(u32, u32); 8] = [
    (1200, 0x0004_F000),
    (2400, 0x0009_D000),
    (4800, 0x0013_B000),
    (9600, 0x0027_5000),
    (19_200, 0x004E_A000),
    (38_400, 0x009D_5000),
    (57_600, 0x00EB_F000),
    (115_200, 0x01D7_E000),
];

/// The nRF51 UART knows no odd parity and always sends one stop bit: odd
/// parity is sent as even, and no parity with one stop bit (a master
/// expecting two stop bits reads one fine; common practice). The settings
/// reach the line only when the configuration chooses Modbus; the link
/// stays at 115 200 Bd 8N1.
impl FieldSerial for Uart {
    fn configure(&mut self, s: &SerialSettings) {
        let baud = BAUD
            .iter()
            .find(|(b, _)| *b == s.baud)
            .map_or(0x01D7_E000, |(_, r)| *r);
        wr(UART0 + 0x524, baud); // BAUDRATE
        let parity = match s.parity {
            Parity::None => 0,
            Parity::Even | Parity::Odd => 0x7 << 1,
        };
        wr(UART0 + 0x56C, parity); // CONFIG.PARITY
    }
    fn rx_stamps(&self) -> (u32, u32) {
        RX.stamps()
    }
}

impl Write for Uart {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Self::Error> {
        for &b in buf {
            wr(UART0 + 0x51C, u32::from(b)); // TXD
            while rd(UART0 + 0x11C) == 0 {} // EVENTS_TXDRDY
            wr(UART0 + 0x11C, 0);
        }
        Ok(buf.len())
    }
    fn flush(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
}

/// The NVMC flash driver over the store's window of flash.
pub struct Nvmc {
    base: u32,
    len: u32,
}

/// A flash error (bounds or alignment).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FlashError(NorFlashErrorKind);

impl NorFlashError for FlashError {
    fn kind(&self) -> NorFlashErrorKind {
        self.0
    }
}

impl Nvmc {
    fn wait() {
        while rd(NVMC + 0x400) & 1 == 0 {} // READY
    }
}

impl FlashErrorType for Nvmc {
    type Error = FlashError;
}

impl ReadNorFlash for Nvmc {
    const READ_SIZE: usize = 1;
    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), FlashError> {
        check_read(self, offset, bytes.len()).map_err(FlashError)?;
        let at = (self.base + offset) as *const u8;
        for (i, b) in bytes.iter_mut().enumerate() {
            // SAFETY: inside the store's window of memory-mapped flash.
            *b = unsafe { core::ptr::read_volatile(at.add(i)) };
        }
        Ok(())
    }
    fn capacity(&self) -> usize {
        self.len as usize
    }
}

impl NorFlash for Nvmc {
    const WRITE_SIZE: usize = 4;
    const ERASE_SIZE: usize = PAGE as usize;
    fn erase(&mut self, from: u32, to: u32) -> Result<(), FlashError> {
        check_erase(self, from, to).map_err(FlashError)?;
        wr(NVMC + 0x504, 2); // CONFIG: erase enabled
        Self::wait();
        let mut page = from;
        while page < to {
            wr(NVMC + 0x508, self.base + page); // ERASEPAGE
            Self::wait();
            page += PAGE;
        }
        wr(NVMC + 0x504, 0);
        Self::wait();
        Ok(())
    }
    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), FlashError> {
        check_write(self, offset, bytes.len()).map_err(FlashError)?;
        wr(NVMC + 0x504, 1); // CONFIG: write enabled
        Self::wait();
        for (i, w) in bytes.chunks_exact(4).enumerate() {
            let word = u32::from_le_bytes([w[0], w[1], w[2], w[3]]);
            wr(self.base + offset + 4 * i as u32, word);
            Self::wait();
        }
        wr(NVMC + 0x504, 0);
        Self::wait();
        Ok(())
    }
}

/// The hardware random generator, bias correction on.
pub struct Rng(());

impl NonceSource for Rng {
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        wr(RNG + 0x504, 1); // CONFIG: bias correction
        wr(RNG + 0x100, 0);
        wr(RNG, 1); // TASKS_START
        for b in out.iter_mut() {
            while rd(RNG + 0x100) == 0 {} // EVENTS_VALRDY
            *b = rd(RNG + 0x508) as u8;
            wr(RNG + 0x100, 0);
        }
        wr(RNG + 0x004, 1); // TASKS_STOP
    }
}

/// The watchdog: 2 s, keeps running while the core sleeps.
pub struct Wdt(());

impl Watchdog for Wdt {
    fn start(&mut self) {
        wr(WDT + 0x504, 2 * 32_768); // CRV: 2 s of the 32.768 kHz clock
        wr(WDT + 0x508, 1); // RREN: RR[0]
        wr(WDT + 0x50C, 1); // CONFIG: run while sleeping
        wr(WDT, 1); // TASKS_START
    }
    fn feed(&mut self) {
        wr(WDT + 0x600, 0x6E52_4635); // RR[0] reload value
    }
}

/// Board services.
pub struct Services(());

impl System for Services {
    fn provisioning(&mut self) -> Option<(u64, Secret)> {
        // SAFETY: the last flash page, memory-mapped and readable.
        let block =
            unsafe { core::slice::from_raw_parts(PROVISIONING as *const u8, Provisioning::LEN) };
        Provisioning::from_bytes(block).map(|p| (p.serial, p.secret))
    }
    fn boot_report(&mut self) -> BootReport {
        let cause = rd(POWER + 0x400); // RESETREAS
        wr(POWER + 0x400, cause); // write 1 to clear
        let hardware = if cause & (1 << 1) != 0 {
            Some(ResetReason::Watchdog)
        } else if cause & (1 << 3) != 0 {
            Some(ResetReason::HardFault) // lockup
        } else {
            None
        };
        let (report, armed) = retained::on_boot(super::kept(), hardware);
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
pub struct Microbit {
    syst: cortex_m::peripheral::SYST,
}

impl Microbit {
    /// Takes the core peripherals (once; `None` after).
    pub fn take() -> Option<Microbit> {
        let cp = cortex_m::Peripherals::take()?;
        Some(Microbit { syst: cp.SYST })
    }
}

impl Board for Microbit {
    type Serial = Uart;
    type Field = Uart;
    type Flash = Nvmc;
    type Sensors = Injected;
    type Clock = SysTickClock;
    type Watchdog = Wdt;
    type Rng = Rng;
    type System = Services;

    const HARDWARE_REV: u16 = 1;

    fn split(self) -> Parts<Self> {
        let mut flash = Nvmc {
            base: STORE_START,
            len: STORE_LEN,
        };
        // QEMU starts flash outside the image at zero; see `format_if_blank`.
        let _ = crate::ram_nor::format_if_blank(&mut flash);
        Parts {
            serial: Uart::new(),
            field: None,
            flash,
            sensors: Injected,
            clock: SysTickClock::start(self.syst, CORE_HZ),
            watchdog: Wdt(()),
            rng: Rng(()),
            system: Services(()),
        }
    }

    fn layout(flash: &Nvmc) -> Result<Layout, Error> {
        Layout::contiguous(flash, 0, BANK_LEN, SLOT_LEN)
    }

    fn map(offset: u32, len: u32) -> Option<&'static [u8]> {
        let end = offset.checked_add(len)?;
        if end > STORE_LEN {
            return None;
        }
        // SAFETY: inside the store's window of memory-mapped flash, which
        // stays mapped for ever; the contract of `Board::map` keeps the
        // range unwritten while the slice is in use.
        Some(unsafe {
            core::slice::from_raw_parts((STORE_START + offset) as *const u8, len as usize)
        })
    }
}
