//! Cortex-M support shared by the boards: the millisecond clock, the
//! receive ring the UART interrupt fills, stack painting, the boot record
//! in memory a reset keeps, and the restart.
//!
//! The exception handlers live in the binary (`main.rs`): it calls
//! [`tick`] from SysTick, the board's receive handler from the device
//! interrupt, and [`record_and_reset`] from the panic and fault handlers.
//!
//! Unsafe code here touches memory-mapped registers, linker symbols and
//! the statics shared with interrupt handlers; each block says why it is
//! sound.

pub mod microbit;
pub mod mps2;

use core::cell::UnsafeCell;
use core::mem::MaybeUninit;
use core::sync::atomic::{AtomicU32, AtomicUsize, Ordering};

use isochor_core::link::ResetReason;
use isochor_core::time::Instant;

use crate::board::Clock;
use crate::retained::{Retained, WORDS};

// ---- clock ----

static TICKS: AtomicU32 = AtomicU32::new(0);

/// One millisecond passed: called from the SysTick handler only (the only
/// writer, so a load and a store suffice on a Cortex-M0 without atomic
/// read-modify-write).
pub fn tick() {
    TICKS.store(
        TICKS.load(Ordering::Relaxed).wrapping_add(1),
        Ordering::Relaxed,
    );
}

/// Core clock cycles per microsecond (set when SysTick starts).
static CYCLES_PER_US: AtomicU32 = AtomicU32::new(1);

/// Microseconds since start, low 32 bits: the millisecond count and
/// SysTick's current value (callable from interrupts). A SysTick wrap whose
/// interrupt has not run yet reads up to 1 ms early (never late).
pub fn micros32() -> u32 {
    // SAFETY: reads of SysTick's value and reload registers only.
    let syst = unsafe { &*cortex_m::peripheral::SYST::PTR };
    loop {
        let t1 = TICKS.load(Ordering::Relaxed);
        let cvr = syst.cvr.read();
        let t2 = TICKS.load(Ordering::Relaxed);
        if t1 == t2 {
            let rvr = syst.rvr.read();
            let sub = rvr.saturating_sub(cvr) / CYCLES_PER_US.load(Ordering::Relaxed).max(1);
            return t1.wrapping_mul(1000).wrapping_add(sub.min(999));
        }
    }
}

/// Milliseconds from SysTick interrupts at 1 kHz, extended to 64 bits.
pub struct SysTickClock {
    last: u32,
    high: u64,
}

impl SysTickClock {
    /// Starts SysTick at 1 kHz from a core clock of `core_hz`.
    pub fn start(mut syst: cortex_m::peripheral::SYST, core_hz: u32) -> SysTickClock {
        use cortex_m::peripheral::syst::SystClkSource;
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(core_hz / 1000 - 1);
        CYCLES_PER_US.store(core_hz / 1_000_000, Ordering::Relaxed);
        syst.clear_current();
        syst.enable_interrupt();
        syst.enable_counter();
        SysTickClock { last: 0, high: 0 }
    }
}

impl SysTickClock {
    /// A second reader of the same clock (SysTick already running).
    pub fn view() -> SysTickClock {
        SysTickClock { last: 0, high: 0 }
    }
}

impl Clock for SysTickClock {
    fn now(&mut self) -> Instant {
        let t = TICKS.load(Ordering::Relaxed);
        if t < self.last {
            self.high += 1 << 32;
        }
        self.last = t;
        Instant(self.high | u64::from(t))
    }
    fn now_us(&mut self) -> u64 {
        let ms = self.now().0;
        let us = micros32();
        // The sub-millisecond part of the same moment (a tick between the
        // two reads: the later one's, within a millisecond).
        let sub = us.wrapping_sub((ms as u32).wrapping_mul(1000)).min(1999);
        ms.saturating_mul(1000) + u64::from(sub)
    }
}

// ---- receive ring ----

const RING: usize = 256;

/// Bytes received by the UART interrupt, taken by the main loop. One
/// producer (the interrupt) and one consumer (the loop): each index has a
/// single writer.
pub struct RxRing {
    buf: UnsafeCell<[u8; RING]>,
    head: AtomicUsize,
    tail: AtomicUsize,
    dropped: AtomicU32,
    stamp: AtomicU32,
    first: AtomicU32,
}

// SAFETY: `buf[head]` is written only by the producer before it publishes
// `head`; the consumer reads only slots below `head` and publishes `tail`
// after reading; the producer never writes a slot the consumer has not
// released. Single core, so Relaxed plus the compiler fences of the atomics
// order the accesses.
unsafe impl Sync for RxRing {}

impl RxRing {
    /// An empty ring.
    pub const fn new() -> RxRing {
        RxRing {
            buf: UnsafeCell::new([0; RING]),
            head: AtomicUsize::new(0),
            tail: AtomicUsize::new(0),
            dropped: AtomicU32::new(0),
            stamp: AtomicU32::new(0),
            first: AtomicU32::new(0),
        }
    }

    /// Producer side (interrupt): stores a byte, or counts it dropped when
    /// full (the host's frame check then fails and the frame is refused).
    pub fn push(&self, b: u8) {
        let now = micros32();
        let head = self.head.load(Ordering::Relaxed);
        if head == self.tail.load(Ordering::Acquire) {
            self.first.store(now, Ordering::Relaxed);
        }
        self.stamp.store(now, Ordering::Relaxed);
        let next = (head + 1) % RING;
        if next == self.tail.load(Ordering::Acquire) {
            self.dropped
                .store(self.dropped.load(Ordering::Relaxed) + 1, Ordering::Relaxed);
            return;
        }
        // SAFETY: see the `Sync` impl: slot `head` belongs to the producer.
        // `% RING` keeps the index in range without a bounds check (the
        // indices are always below RING; this spells it for the compiler).
        unsafe { (*self.buf.get())[head % RING] = b };
        self.head.store(next, Ordering::Release);
    }

    /// Consumer side: true when bytes wait.
    pub fn ready(&self) -> bool {
        self.head.load(Ordering::Acquire) != self.tail.load(Ordering::Relaxed)
    }

    /// Consumer side: takes waiting bytes into `out`.
    pub fn take(&self, out: &mut [u8]) -> usize {
        let head = self.head.load(Ordering::Acquire);
        let mut tail = self.tail.load(Ordering::Relaxed);
        let mut n = 0;
        for slot in out.iter_mut() {
            if tail == head {
                break;
            }
            // SAFETY: slots from tail to head were published by the producer.
            *slot = unsafe { (*self.buf.get())[tail % RING] };
            tail = (tail + 1) % RING;
            n += 1;
        }
        self.tail.store(tail, Ordering::Release);
        n
    }

    /// Consumer side, the boards' blocking UART read (`embedded_io::Read`):
    /// takes waiting bytes into `out`, sleeping until an interrupt when none
    /// wait; returns 0 only for an empty `out`.
    pub fn read(&self, out: &mut [u8]) -> usize {
        loop {
            let n = self.take(out);
            if n > 0 || out.is_empty() {
                return n;
            }
            cortex_m::asm::wfi();
        }
    }

    /// When the first byte waiting (or last taken) and the last byte
    /// arrived ([`micros32`]).
    pub fn stamps(&self) -> (u32, u32) {
        (
            self.first.load(Ordering::Relaxed),
            self.stamp.load(Ordering::Relaxed),
        )
    }

    /// Bytes dropped because the ring was full.
    pub fn dropped(&self) -> u32 {
        self.dropped.load(Ordering::Relaxed)
    }
}

impl Default for RxRing {
    fn default() -> Self {
        RxRing::new()
    }
}

// ---- stack painting ----

const PAINT: u32 = 0xC0DE_5AFE;

unsafe extern "C" {
    /// Lowest address the stack may reach (end of static data; cortex-m-rt).
    static mut __sheap: u32;
    /// Top of the stack (cortex-m-rt).
    static _stack_start: u32;
}

fn stack_bounds() -> (usize, usize) {
    // Only the addresses of the linker symbols are taken.
    (
        core::ptr::addr_of!(__sheap) as usize,
        core::ptr::addr_of!(_stack_start) as usize,
    )
}

/// Paints the unused stack (from the end of static data up to a little
/// below the present stack pointer) so [`stack_usage`] can find the deepest
/// point the stack reached. Called once, first thing in `main`.
pub fn paint_stack() {
    let (bottom, _) = stack_bounds();
    let sp = cortex_m::register::msp::read() as usize;
    let mut p = (bottom + 3) & !3;
    while p + 64 < sp {
        // SAFETY: the words between the end of static data and the stack
        // pointer (less a margin for this frame) belong to nobody yet.
        unsafe { core::ptr::write_volatile(p as *mut u32, PAINT) };
        p += 4;
    }
}

/// Deepest stack use since [`paint_stack`] and the stack size, bytes.
pub fn stack_usage() -> (u32, u32) {
    let (bottom, top) = stack_bounds();
    let mut p = (bottom + 3) & !3;
    // SAFETY: reads of the stack region's words, all mapped RAM.
    while p < top && unsafe { core::ptr::read_volatile(p as *const u32) } == PAINT {
        p += 4;
    }
    ((top - p) as u32, (top - bottom) as u32)
}

// ---- boot record and restart ----

/// The boot record: in `.uninit`, which neither a reset nor the start-up
/// code clears.
#[unsafe(link_section = ".uninit.isochor_boot")]
static mut BOOT: MaybeUninit<[u32; WORDS]> = MaybeUninit::uninit();

/// Starts since power-on of this run (for records written later).
static BOOTS: AtomicU32 = AtomicU32::new(1);

/// The record a reset kept, if any.
pub fn kept() -> Option<Retained> {
    // SAFETY: any bit pattern is a valid `[u32; WORDS]` (the CRC tells a
    // record from noise); read once at start, before any writer runs.
    let words =
        unsafe { core::ptr::read_volatile(core::ptr::addr_of!(BOOT).cast::<[u32; WORDS]>()) };
    Retained::decode(&words)
}

/// Writes the record for the next start.
pub fn keep(r: &Retained) {
    BOOTS.store(r.boots, Ordering::Relaxed);
    let words = r.encode();
    // SAFETY: plain volatile stores into our own static; handlers that call
    // this never return to the code they interrupted.
    unsafe {
        core::ptr::write_volatile(core::ptr::addr_of_mut!(BOOT).cast::<[u32; WORDS]>(), words)
    };
}

/// Starts since power-on, as recorded at this start.
pub fn boots() -> u32 {
    BOOTS.load(Ordering::Relaxed)
}

/// Records `reason` (and a panic location) for the next start and resets.
pub fn record_and_reset(reason: ResetReason, location: Option<(&str, u32)>) -> ! {
    let mut r = Retained::new(reason, boots());
    if let Some((file, line)) = location {
        r = r.at(file, line);
    }
    keep(&r);
    cortex_m::peripheral::SCB::sys_reset()
}
