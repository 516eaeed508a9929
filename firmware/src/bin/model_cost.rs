//! Measures what the device gas models and the content estimate cost, in
//! instructions, in QEMU with `-icount shift=0` (one instruction per virtual
//! nanosecond): SysTick runs on the 25 MHz system clock of the `mps2-an385`
//! machine, so one tick is 40 instructions. The code is Cortex-M0
//! (thumbv6m) code; the Cortex-M3 of that machine runs it unchanged.
//!
//! Run: see docs/measured.md.
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m::peripheral::{Peripherals, SYST, syst::SystClkSource};
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use isochor_core::content::fixed::Estimator;
use isochor_core::model::{CompressibilityFx, DeviceModel, Ideal};
use isochor_core::{Gas, SetupFx, StandardConditionFx, TankFx, fx};

/// Instructions per SysTick tick (1 ns per instruction, 25 MHz clock).
const INSTRUCTIONS_PER_TICK: u32 = 40;
/// Evaluations per measurement.
const N: u32 = 200;

fn ticks<F: FnMut(u32)>(mut f: F) -> u32 {
    SYST::get_current(); // warm
    let start = SYST::get_current();
    for i in 0..N {
        f(i);
    }
    let end = SYST::get_current();
    start.wrapping_sub(end) & 0x00FF_FFFF
}

fn setup(gas: Gas, rated: &'static str) -> SetupFx {
    SetupFx {
        gas,
        tank: TankFx {
            water_capacity_m3: fx::Volume::lit("0.05"),
            rated_pressure_pa: fx::Pressure::lit(rated),
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

/// Samples spread over 0…700 bar and −40…+60 °C.
fn sample(i: u32) -> (fx::Pressure, fx::Temperature) {
    let p = fx::Pressure::from_bits((i % 50) * 22_000_000 + 1_000_000);
    let t = fx::Temperature::from_bits(15_279_718 + (i % 7) * 1_000_000);
    (p, t)
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

    let empty = ticks(|i| {
        black_box(sample(black_box(i)));
    });
    for (gas, rated) in [
        (Gas::Nitrogen, "20000000"),
        (Gas::Hydrogen, "70000000"),
        (Gas::Methane, "20000000"),
        (Gas::Krypton, "20000000"),
    ] {
        let Ok(model) = DeviceModel::builtin(gas) else {
            continue;
        };
        let z = ticks(|i| {
            let (p, t) = sample(black_box(i));
            black_box(model.z_fx(p, t));
        });
        let Ok(est) = Estimator::new(setup(gas, rated), &model) else {
            continue;
        };
        let e = ticks(|i| {
            let (p, t) = sample(black_box(i));
            black_box(est.estimate(p, t));
        });
        let Ok(ideal) = Estimator::new(setup(gas, rated), Ideal::new(gas)) else {
            continue;
        };
        let e0 = ticks(|i| {
            let (p, t) = sample(black_box(i));
            black_box(ideal.estimate(p, t));
        });
        let per = |x: u32| (x.saturating_sub(empty)) * INSTRUCTIONS_PER_TICK / N;
        hprintln!(
            "{}: model {} instructions/evaluation; estimate {} (device model), {} (ideal)",
            gas.name(),
            per(z),
            per(e),
            per(e0)
        );
    }
    debug::exit(debug::EXIT_SUCCESS);
    loop {
        cortex_m::asm::wfi();
    }
}

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    debug::exit(debug::EXIT_FAILURE);
    loop {
        cortex_m::asm::wfi();
    }
}
