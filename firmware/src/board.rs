//! What a board implements: narrow traits over its hardware, each with a
//! written contract. The application ([`crate::run`]) sees nothing else.
//!
//! | trait | what | reference boards |
//! |---|---|---|
//! | [`Board`] | bundles the parts below, the storage layout and the memory map of the store | `microbit`, `mps2-an386` |
//! | serial: [`FieldSerial`] (`embedded_io::{Read, ReadReady, Write}`) | the host link, 8N1 (on a one-UART board also the Modbus line when configured so) | UART0 of each board |
//! | field: [`FieldSerial`] | the Modbus RTU line on boards with a second UART | UART1 of `mps2-an386`; none on the `microbit` |
//! | flash: `embedded_storage::nor_flash::NorFlash` | the configuration record and the prepared-configuration slots | nRF51 NVMC; RAM-backed NOR on `mps2-an386` |
//! | [`SampleSource`] | raw converter codes (or none: injected samples) | [`crate::adc::AdcSampler`] over an `embedded_hal::spi::SpiDevice`; in emulation none |
//! | [`Clock`] | monotonic milliseconds since start | SysTick |
//! | [`Watchdog`] | started once, fed every loop | nRF51 WDT; CMSDK watchdog |
//! | `isochor_core::auth::NonceSource` | unpredictable nonce bytes | nRF51 RNG; keyed generator on `mps2-an386` (emulation only) |
//! | [`System`] | provisioning, reset reason, restart, sleep, stack use | per board |

use embedded_io::{Read, ReadReady, Write};
use embedded_storage::nor_flash::NorFlash;
use isochor_core::Error;
use isochor_core::auth::{NonceSource, Secret};
use isochor_core::field::SerialSettings;
use isochor_core::link::{BootReport, ResetReason};
use isochor_core::sensor::channel::RawSample;
use isochor_core::store::Layout;
use isochor_core::time::Instant;

/// Where raw converter codes come from.
pub trait SampleSource {
    /// True when the board has no converters of its own and takes its
    /// samples from `InjectSample` messages instead (emulation, bench rigs).
    const INJECTED: bool;
    /// A new sample when one is due at `now` (the source paces itself: for
    /// example once a second), else `None`. Never blocks for long.
    fn poll(&mut self, now: Instant) -> Option<RawSample>;
}

/// A source with no converters: every sample is injected over the link.
pub struct Injected;

impl SampleSource for Injected {
    const INJECTED: bool = true;
    fn poll(&mut self, _now: Instant) -> Option<RawSample> {
        None
    }
}

/// Monotonic time since start.
pub trait Clock {
    /// Milliseconds since the board started; never goes back.
    fn now(&mut self) -> Instant;
    /// Microseconds since the board started (the Modbus silent intervals
    /// need better than a millisecond); by default the milliseconds × 1000.
    fn now_us(&mut self) -> u64 {
        self.now().0.saturating_mul(1000)
    }
}

/// A UART that carries the field protocol (Modbus RTU): it takes the
/// configured baud rate and parity, and tells when its last byte arrived.
pub trait FieldSerial: Read + ReadReady + Write {
    /// Applies the baud rate and parity, as far as the UART supports them
    /// (each board says what it does not).
    fn configure(&mut self, settings: &SerialSettings);
    /// When the first of the bytes waiting and the last received byte
    /// arrived: low 32 bits of [`Clock::now_us`], stamped by the receive
    /// interrupt (bytes wait in a ring while the loop is busy; the silent
    /// intervals are judged by when they arrived, not when they were
    /// taken). Read before the bytes are taken.
    fn rx_stamps(&self) -> (u32, u32);
}

/// The watchdog: once started it resets the board unless fed in time.
pub trait Watchdog {
    /// Starts the watchdog (it cannot be stopped again).
    fn start(&mut self);
    /// Feeds it; the application does so once per loop, at least every
    /// few milliseconds when idle.
    fn feed(&mut self);
}

/// Board services around the application.
pub trait System {
    /// The serial number and 256-bit secret written at manufacture, or
    /// `None` when the board was not provisioned (it then answers no signed
    /// command: it makes itself a random secret nobody knows).
    fn provisioning(&mut self) -> Option<(u64, Secret)>;
    /// Why the board started, from memory a reset keeps (and the board's
    /// reset-reason register where it has one). Called once at start; it
    /// also arms the record for the next start.
    fn boot_report(&mut self) -> BootReport;
    /// Records `reason` for the next start and resets the board.
    fn restart(&mut self, reason: ResetReason) -> !;
    /// Sleeps until an interrupt (a received byte, the clock tick).
    fn idle(&mut self);
    /// Deepest stack use so far and the stack size, bytes.
    fn stack_usage(&self) -> (u32, u32);
}

/// A board: its parts, its storage layout and the memory map of its store.
pub trait Board {
    /// The host link.
    type Serial: FieldSerial;
    /// The Modbus line of a board with a second UART.
    type Field: FieldSerial;
    /// The flash that keeps the configuration record and the prepared
    /// configurations (offsets from 0).
    type Flash: NorFlash;
    /// The converters.
    type Sensors: SampleSource;
    /// The clock.
    type Clock: Clock;
    /// The watchdog.
    type Watchdog: Watchdog;
    /// The random source of signing nonces.
    type Rng: NonceSource;
    /// Board services.
    type System: System;

    /// Hardware revision reported in the identity.
    const HARDWARE_REV: u16;

    /// Takes the board apart.
    fn split(self) -> Parts<Self>;

    /// Where the record and the configuration slots live in
    /// [`Board::Flash`].
    fn layout(flash: &Self::Flash) -> Result<Layout, Error>;

    /// The `len` bytes of the store at `offset` as read through the memory
    /// map (the gauge reads its prepared configuration in place: no RAM is
    /// spent on it). `None` when the range is not in the store. Contract:
    /// the application only maps a blob slot it does not write while the
    /// mapping is in use (a configuration load writes the other slot, and
    /// the previous mapping is dropped before its slot is next erased).
    fn map(offset: u32, len: u32) -> Option<&'static [u8]>;
}

/// The parts of a board.
pub struct Parts<B: Board + ?Sized> {
    /// The host link.
    pub serial: B::Serial,
    /// The Modbus line (`None` on a board with one UART: the link's UART
    /// serves Modbus when the configuration says so).
    pub field: Option<B::Field>,
    /// The configuration store.
    pub flash: B::Flash,
    /// The converters.
    pub sensors: B::Sensors,
    /// The clock.
    pub clock: B::Clock,
    /// The watchdog.
    pub watchdog: B::Watchdog,
    /// The random source.
    pub rng: B::Rng,
    /// Board services.
    pub system: B::System,
}
