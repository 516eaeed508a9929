//! Instructions per full estimate — raw converter codes through the sensor
//! front-ends, corrections, content estimate (device gas model), tracking,
//! uncertainty and alarms to the telemetry frame's values — in fixed point
//! (the firmware's own pipeline, `isochor_core::app::fixed::Pipeline`) and
//! for the same algorithm in `f32` and `f64` (`app::float::Pipeline`).
//!
//! Method: run QEMU with `-icount shift=0`, so every executed instruction
//! advances virtual time by exactly 1 ns, and read SysTick (core clock) around
//! each sample: one tick is 1e9 / f_core instructions (62.5 on `microbit` at
//! 16 MHz, 40 on `mps2-an386` at 25 MHz). The first line checks the scale on
//! a loop of known length. A series of samples at 1 Hz of a 50 L nitrogen
//! cylinder being drawn down from 150 bar: two hours not timed (the tracker
//! fills its 32-block rate window and its temperature window, so the
//! figures are those of a tracker in steady state), then one hour timed
//! (3600 samples: sixty 60 s block closes — rate, time to empty, their
//! uncertainty, settling — and one hourly leak step, each in its share);
//! each figure is the mean per sample less the loop overhead, and the
//! largest single sample (a block close) is printed beside it.
//!
//! Stack: the program paints the free stack before each path
//! (`isochor_firmware::arm::paint_stack`) and prints beside its figures the
//! deepest stack its run took below the frame that calls it (`stack_fixed=…`
//! bytes): the run's own frame (setup, records, the float pipelines
//! themselves), preparing the pipeline, its samples and the telemetry
//! frame's values. The fixed pipeline lives in a static, as the firmware's
//! gauge does. The program's own frames above (the gas model's preparation)
//! are not counted.
//!
//! `isochor budget` runs this; by hand (Cortex-M0 code with the `mps2` memory
//! map, on QEMU's Cortex-M3 `mps2-an385`):
//! ```sh
//! cd firmware && ISOCHOR_MEMORY=mps2 cargo build --release --bin budget --target-dir target/m0-on-mps2
//! qemu-system-arm -machine mps2-an385 -cpu cortex-m3 -icount shift=0 -nographic \
//!   -semihosting-config enable=on,target=native \
//!   -kernel target/m0-on-mps2/thumbv6m-none-eabi/release/budget
//! ```
#![no_std]
#![no_main]

use core::hint::black_box;
use core::mem::MaybeUninit;
use cortex_m::peripheral::{Peripherals, SYST, syst::SystClkSource};
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use isochor_core::app::{RawSample, fixed, float};
use isochor_core::link::Telemetry;
use isochor_core::model::DeviceModel;
use isochor_core::store::{
    AlarmThresholds, PressureCalibration, TemperatureCalibration, TrackingSettings, track_config,
};
use isochor_core::time::Instant;
use isochor_core::{Gas, Real, SetupFx, StandardConditionFx, Status, TankFx, fx};
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

fn setup() -> SetupFx {
    SetupFx {
        gas: Gas::Nitrogen,
        tank: TankFx {
            water_capacity_m3: fx::Volume::lit("0.05"),
            rated_pressure_pa: fx::Pressure::lit("20000000"),
            rated_temperature_k: fx::Temperature::lit("288.15"),
            elastic_expansion_per_mpa: fx::ElasticExpansion::ZERO,
            thermal_expansion_per_k: fx::ThermalExpansion::ZERO,
        },
        standard: StandardConditionFx {
            temperature_k: fx::Temperature::lit("288.15"),
            pressure_pa: fx::Pressure::lit("101325"),
        },
        settled_reference_k: fx::Temperature::lit("288.15"),
    }
}

/// The codes of sample `i`: the nominal 300 bar bridge (24-bit bipolar,
/// span half the converter range: 2^22 codes per 150 bar gauge) drawn down
/// from 150 bar at about 7 bar/h, with ±8 codes of noise; the nominal
/// Pt1000 (4.02 kΩ reference, 24-bit) around 20 °C (1077.9 Ω: code
/// 4 498 717), wandering by ±0.1 K.
fn sample(i: u32) -> RawSample {
    let noise = (i.wrapping_mul(2_654_435_761) >> 28) as i32 - 8;
    let p = 2_097_152 - (i * 27) as i32 + noise;
    let t = 4_498_717 + ((i * 37) % 97) as i32 * 17 - 800;
    RawSample {
        pressure: (p as u32) & 0x00FF_FFFF,
        temperature: t as u32,
    }
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
static mut FIXED: MaybeUninit<fixed::Pipeline<&'static DeviceModel<'static>>> =
    MaybeUninit::uninit();

#[inline(never)]
fn run_fixed(model: &'static DeviceModel<'static>) -> Option<(u64, u64)> {
    let s = setup();
    let p = PressureCalibration::nominal();
    let t = TemperatureCalibration::nominal();
    let tracking = TrackingSettings::for_tank(&s, p.full_scale());
    let cfg = track_config(&tracking, &AlarmThresholds::for_tank(&s));
    let made = match fixed::Pipeline::new(s, model, &p.0, &t.0, cfg, tracking.barometric_pa) {
        Ok(p) => p,
        Err(e) => {
            hprintln!("fixed pipeline: {:?}", e);
            return None;
        }
    };
    // SAFETY: the only reference to the static, taken once per run.
    let pipe = unsafe { (*core::ptr::addr_of_mut!(FIXED)).write(made) };
    let mut seq = 0u32;
    let r = measure(|at, raw| {
        let out = pipe.sample(at, raw);
        let tel = Telemetry::from_track(seq, &out, Status::OK);
        seq += 1;
        tel.status ^ tel.mass_kg as u32
    });
    Some(r)
}

#[inline(never)]
fn run_float<F: Real>(model: &DeviceModel<'static>) -> Option<(u64, u64)> {
    let s = setup();
    let p = PressureCalibration::nominal();
    let t = TemperatureCalibration::nominal();
    let tracking = TrackingSettings::for_tank(&s, p.full_scale());
    let cfg = track_config(&tracking, &AlarmThresholds::for_tank(&s));
    let mut pipe = float::Pipeline::<F, _>::new(
        s.to_real(),
        model,
        &p.0,
        &t.0,
        cfg.to_real(),
        F::lit(fx::to_f64(tracking.barometric_pa)),
    )
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

    // The model in a static: the Cortex-M0's 16 KiB hold it, one pipeline
    // at a time and the f64 tracker's frames.
    static mut MODEL: MaybeUninit<DeviceModel<'static>> = MaybeUninit::uninit();
    let Ok(m) = DeviceModel::builtin(Gas::Nitrogen) else {
        debug::exit(debug::EXIT_FAILURE);
        loop {
            cortex_m::asm::wfi();
        }
    };
    // SAFETY: written once here, before the only reference is taken.
    let model: &'static DeviceModel<'static> =
        unsafe { (*core::ptr::addr_of_mut!(MODEL)).write(m) };
    let mut ok = true;
    let sp = cortex_m::register::msp::read() as usize;
    paint_stack();
    match run_fixed(model) {
        Some(r) => report("instructions_fixed", r),
        None => ok = false,
    }
    hprintln!("stack_fixed={}", stack_below(sp));
    paint_stack();
    match run_float::<f32>(model) {
        Some(r) => report("instructions_f32", r),
        None => ok = false,
    }
    hprintln!("stack_f32={}", stack_below(sp));
    paint_stack();
    match run_float::<f64>(model) {
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
