//! Instructions per full estimate — raw converter codes through the sensor
//! channels, plausibility checks, content estimate (the prepared gas
//! model), tracking, uncertainty and alarms — in fixed point (the firmware's own pipeline over a prepared
//! configuration, `isochor_core::app::fixed::Pipeline`) and for the same
//! algorithm in `f32` and `f64` (`app::float::Pipeline`), and where the
//! fixed-point instructions go, stage by stage.
//!
//! Method: run QEMU with `-icount shift=0`, so every executed instruction
//! advances virtual time by exactly 1 ns, and read SysTick (core clock) around
//! each sample: one tick is 1e9 / f_core instructions (62.5 on `microbit` at
//! 16 MHz, 40 on `mps2-an386` at 25 MHz). The first line checks the scale on
//! a loop of known length. A series of samples at 1 Hz of a 50 L nitrogen
//! cylinder being drawn down from 150 bar: two hours not timed (the tracker
//! fills its windows, so the figures are those of a tracker in steady
//! state), then one hour timed (3600 samples: sixty 60 s block closes and
//! the hourly leak step, each in its share); each figure is the mean per
//! sample less the loop overhead, and the largest single sample is printed
//! beside it.
//!
//! The configuration is the committed `firmware/data/nominal.izpc` (the
//! reference board's nominal sensors on that cylinder, prepared on a host;
//! a test of the `tests` crate keeps it equal to what the host prepares
//! today). The float paths run the same configuration as written (its
//! source) with the same gas-model table.
//!
//! Stages: built with the core's `probe` feature (the firmware's `budget`
//! feature), the sample path marks where each stage starts
//! (`isochor_core::probe`); the hook here reads SysTick at each mark and
//! charges the time since the previous one to the stage that ran, less the
//! cost of a mark itself (measured first on marks with nothing between
//! them). The link stage is the telemetry frame of the sample: its values
//! and its encoding (postcard, CRC-32C, COBS); it is reported beside the
//! estimate, not in it (the estimate ends with the tracker's output).
//!
//! Stack: the program paints the free stack before each path
//! (`isochor_firmware::arm::paint_stack`) and prints beside its figures the
//! deepest stack its run took below the frame that calls it (`stack_fixed=…`
//! bytes). The fixed pipeline lives in a static, as the firmware's gauge
//! does.
//!
//! `isochor budget` runs this; by hand (Cortex-M0 code with the `mps2` memory
//! map, on QEMU's Cortex-M3 `mps2-an385`):
//! ```sh
//! cd firmware && ISOCHOR_MEMORY=mps2 cargo build --release --features budget --bin budget --target-dir target/m0-on-mps2
//! qemu-system-arm -machine mps2-an385 -cpu cortex-m3 -icount shift=0 -nographic \
//!   -semihosting-config enable=on,target=native \
//!   -kernel target/m0-on-mps2/thumbv6m-none-eabi/release/budget
//! ```
#![no_std]
#![no_main]

use core::cell::RefCell;
use core::hint::black_box;
use cortex_m::interrupt::Mutex;
use cortex_m::peripheral::{Peripherals, SYST, syst::SystClkSource};
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use isochor_core::app::{Zero, fixed, float, telemetry};
use isochor_core::link::{self, FromDevice, MAX_FRAME_LEN};
use isochor_core::model::DeviceModel;
use isochor_core::prepared::{Lasting, Prepared, PreparedModel};
use isochor_core::probe::{self, Stage};
use isochor_core::sensor::channel::RawSample;
use isochor_core::time::Instant;
use isochor_core::{Real, Status};
use isochor_firmware::arm::{paint_stack, stack_usage};

/// Core clock of the emulated board, Hz.
const CORE_HZ: u64 = if cfg!(any(target_abi = "eabihf", isochor_mps2)) {
    25_000_000
} else {
    16_000_000
};

/// Samples before the timed ones (two hours at 1 Hz).
const WARM_UP: u32 = 7200;
/// Timed samples per run (one hour at 1 Hz).
const N: u32 = 3600;

/// Bytes aligned as a prepared configuration needs (4).
#[repr(C, align(4))]
struct Aligned<T: ?Sized>(T);

/// The configuration measured (see the module documentation).
static CONFIG: &Aligned<[u8]> = &Aligned(*include_bytes!("../../data/nominal.izpc"));

unsafe extern "C" {
    /// Top of the stack (cortex-m-rt).
    static _stack_start: u32;
}

/// Stack taken below the stack pointer `sp` since the last paint, bytes.
fn stack_below(sp: usize) -> usize {
    // Only the symbol's address is taken.
    let top = core::ptr::addr_of!(_stack_start) as usize;
    (stack_usage().0 as usize).saturating_sub(top.saturating_sub(sp))
}

fn ticks() -> u32 {
    SYST::get_current()
}

fn elapsed(a: u32, b: u32) -> u64 {
    u64::from(a.wrapping_sub(b) & 0x00FF_FFFF)
}

/// Instructions ×100 of `t` ticks.
fn instructions_x100(t: u64) -> u64 {
    t * (100_000_000_000 / CORE_HZ)
}

/// What the stage hook keeps: the stage running, when it started, and the
/// ticks and marks charged to each stage.
struct Stages {
    current: Stage,
    since: u32,
    ticks: [u64; 10],
    marks: [u64; 10],
}

static STAGES: Mutex<RefCell<Stages>> = Mutex::new(RefCell::new(Stages {
    current: Stage::Outside,
    since: 0,
    ticks: [0; 10],
    marks: [0; 10],
}));

/// The hook: charges the ticks since the last mark to the stage that ran.
fn on_mark(next: Stage) {
    let at = ticks();
    cortex_m::interrupt::free(|cs| {
        let mut guard = STAGES.borrow(cs).borrow_mut();
        let s = &mut *guard;
        let i = s.current as usize;
        let since = s.since;
        if let (Some(t), Some(m)) = (s.ticks.get_mut(i), s.marks.get_mut(i)) {
            // SysTick counts down.
            *t += elapsed(since, at);
            *m += 1;
        }
        s.current = next;
    });
    let now = ticks();
    cortex_m::interrupt::free(|cs| STAGES.borrow(cs).borrow_mut().since = now);
}

fn reset_stages() {
    cortex_m::interrupt::free(|cs| {
        let mut s = STAGES.borrow(cs).borrow_mut();
        s.ticks = [0; 10];
        s.marks = [0; 10];
        s.current = Stage::Outside;
        s.since = ticks();
    });
}

fn stage_totals() -> ([u64; 10], [u64; 10]) {
    cortex_m::interrupt::free(|cs| {
        let s = STAGES.borrow(cs).borrow();
        (s.ticks, s.marks)
    })
}

/// The cost of one mark, ticks ×1000 (marks with nothing between them).
fn mark_cost_x1000() -> u64 {
    reset_stages();
    for _ in 0..1000 {
        probe::enter(black_box(Stage::Outside));
    }
    let (t, m) = stage_totals();
    let i = Stage::Outside as usize;
    match (t.get(i), m.get(i)) {
        (Some(&t), Some(&m)) if m > 0 => t * 1000 / m,
        _ => 0,
    }
}

/// The codes of sample `i` (see [`isochor_firmware::sweep::codes`]).
fn sample(i: u32) -> RawSample {
    isochor_firmware::sweep::codes(i)
}

/// Runs `f` on every sample; (mean ×100, largest) instructions per sample.
fn measure(mut f: impl FnMut(Instant, &RawSample) -> u32) -> (u64, u64) {
    let mut total = 0u64;
    let mut worst = 0u64;
    let mut base = 0u64;
    for i in 0..WARM_UP {
        black_box(f(Instant(u64::from(i) * 1000), &sample(i)));
    }
    for i in WARM_UP..WARM_UP + N {
        let s = black_box(sample(i));
        let at = Instant(u64::from(i) * 1000);
        let a = ticks();
        black_box(f(at, &s));
        let b = ticks();
        let a2 = ticks();
        black_box((at, &s));
        let b2 = ticks();
        let t = elapsed(a, b);
        base += elapsed(a2, b2);
        total += t;
        worst = worst.max(t);
    }
    let net = total.saturating_sub(base);
    (
        instructions_x100(net) / u64::from(N),
        instructions_x100(worst) / 100,
    )
}

fn report(name: &str, (mean_x100, worst): (u64, u64)) {
    hprintln!(
        "{}={}.{:02} max={}",
        name,
        mean_x100 / 100,
        mean_x100 % 100,
        worst
    );
}

/// The fixed pipeline, in a static as the firmware keeps its gauge (so the
/// stack measured is that of preparing it and of its samples).
static mut FIXED: Option<fixed::Pipeline<Lasting>> = None;

fn prepared() -> Option<Prepared<Lasting>> {
    Prepared::new(Lasting(&CONFIG.0))
        .map_err(|e| hprintln!("configuration: {:?}", e))
        .ok()
}

/// The full estimate, then its stages.
#[inline(never)]
fn run_fixed() -> Option<(u64, u64)> {
    // SAFETY: the only reference to the static, taken once.
    let slot = unsafe { &mut *core::ptr::addr_of_mut!(FIXED) };
    fixed::Pipeline::new_in(slot, &prepared()?, Zero::default())
        .map_err(|e| hprintln!("fixed pipeline: {:?}", e))
        .ok()?;
    let pipe = slot.as_mut()?;
    let r = measure(|at, raw| {
        let out = pipe.sample(at, raw);
        out.status.bits() ^ out.content.map_or(0, |c| c.mass_kg.to_bits() as u32)
    });
    Some(r)
}

/// Where the fixed-point instructions go: a second pipeline over the same
/// samples with the stage hook on; the link stage encodes each sample's
/// telemetry frame.
#[inline(never)]
fn run_stages() -> bool {
    // SAFETY: the only reference to the static, taken once (after the
    // full-estimate run is over).
    let slot = unsafe { &mut *core::ptr::addr_of_mut!(FIXED) };
    let Some(p) = prepared() else {
        return false;
    };
    if fixed::Pipeline::new_in(slot, &p, Zero::default()).is_err() {
        return false;
    }
    let Some(pipe) = slot.as_mut() else {
        return false;
    };
    probe::set_hook(on_mark);
    let cost = mark_cost_x1000();
    let mut seq = 0u32;
    let mut frame = [0u8; MAX_FRAME_LEN];
    let mut run = |i: u32| {
        let at = Instant(u64::from(i) * 1000);
        let raw = sample(i);
        let out = pipe.sample(at, &raw);
        probe::enter(Stage::Link);
        let tel = telemetry::from_track(seq, out, Status::OK);
        seq += 1;
        let n = link::encode(&FromDevice::Telemetry(tel), &mut frame).unwrap_or(0);
        probe::enter(Stage::Outside);
        black_box(n);
    };
    for i in 0..WARM_UP {
        run(i);
    }
    reset_stages();
    let mut worst = (0u64, [0u64; 10]);
    let mut before = [0u64; 10];
    for i in WARM_UP..WARM_UP + N {
        run(i);
        let (t, _) = stage_totals();
        let mut this = [0u64; 10];
        let mut sum = 0;
        for ((d, a), b) in this.iter_mut().zip(t.iter()).zip(before.iter()) {
            *d = a - b;
        }
        for (k, d) in this.iter().enumerate() {
            if k != Stage::Outside as usize && k != Stage::Link as usize {
                sum += d;
            }
        }
        if sum > worst.0 {
            worst = (sum, this);
        }
        before = t;
    }
    let (t, m) = stage_totals();
    for stage in Stage::ALL {
        if stage == Stage::Outside {
            continue;
        }
        let k = stage as usize;
        let (ticks, marks) = (
            t.get(k).copied().unwrap_or(0),
            m.get(k).copied().unwrap_or(0),
        );
        let net = (ticks * 1000).saturating_sub(marks * cost) / 1000;
        let mean_x100 = instructions_x100(net) / u64::from(N);
        let in_worst = instructions_x100(worst.1.get(k).copied().unwrap_or(0)) / 100;
        hprintln!(
            "stage_{}={}.{:02} worst={}",
            stage.name(),
            mean_x100 / 100,
            mean_x100 % 100,
            in_worst
        );
    }
    let c = instructions_x100(cost) / 1000;
    hprintln!("mark_cost={}.{:02}", c / 100, c % 100);
    true
}

#[inline(never)]
fn run_float<F: Real>() -> Option<(u64, u64)> {
    let prepared = prepared()?;
    let config = prepared
        .source_config()
        .map_err(|e| hprintln!("configuration source: {:?}", e))
        .ok()?;
    let pm = PreparedModel::new(&prepared).ok()?;
    let model = DeviceModel::new(pm.table()).ok()?;
    let mut pipe = float::Pipeline::<F, _>::new(&config, model, Zero::default())
        .map_err(|e| hprintln!("float pipeline: {:?}", e))
        .ok()?;
    let r = measure(|at, raw| match pipe.sample(at, raw) {
        Ok(out) => out.status.bits() ^ out.content.map_or(0, |c| c.mass_kg.to_f64() as u32),
        Err(_) => 0,
    });
    Some(r)
}

#[entry]
fn main() -> ! {
    let Some(mut cp) = Peripherals::take() else {
        debug::exit(debug::EXIT_FAILURE);
        loop {
            cortex_m::asm::wfi();
        }
    };
    cp.SYST.set_clock_source(SystClkSource::Core);
    cp.SYST.set_reload(0x00FF_FFFF);
    cp.SYST.clear_current();
    cp.SYST.enable_counter();

    // Scale check: a loop of exactly 2 instructions per iteration.
    let a = ticks();
    // SAFETY: a register-only countdown loop; no memory is touched.
    unsafe { core::arch::asm!("1:", "subs {0}, #1", "bne 1b", inout(reg) 100_000u32 => _) };
    let b = ticks();
    let x100 = instructions_x100(elapsed(a, b)) / 100_000;
    hprintln!("scale_check_2={}.{:02}", x100 / 100, x100 % 100);

    let mut ok = true;
    let sp = cortex_m::register::msp::read() as usize;
    paint_stack();
    match run_fixed() {
        Some(r) => report("instructions_fixed", r),
        None => ok = false,
    }
    hprintln!("stack_fixed={}", stack_below(sp));
    ok &= run_stages();
    paint_stack();
    match run_float::<f32>() {
        Some(r) => report("instructions_f32", r),
        None => ok = false,
    }
    hprintln!("stack_f32={}", stack_below(sp));
    paint_stack();
    match run_float::<f64>() {
        Some(r) => report("instructions_f64", r),
        None => ok = false,
    }
    hprintln!("stack_f64={}", stack_below(sp));
    debug::exit(if ok {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    loop {
        cortex_m::asm::wfi();
    }
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    if let Some(l) = info.location() {
        hprintln!("panic at {}:{}", l.file(), l.line());
    }
    debug::exit(debug::EXIT_FAILURE);
    loop {
        cortex_m::asm::wfi();
    }
}
