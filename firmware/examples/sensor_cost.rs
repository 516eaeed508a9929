//! Instructions per sensor conversion on the device path, measured in QEMU.
//!
//! Method: SysTick counts the core clock; run QEMU with `-icount shift=0`
//! so that every executed instruction advances virtual time by exactly 1 ns.
//! Then one SysTick tick is `1e9 / f_core` instructions (62.5 on the
//! `microbit` machine at 16 MHz, 40 on `mps2-an386` at 25 MHz). The first
//! line checks the scale on a loop of known length. Each figure is the mean
//! over 1024 calls spread over the input range, minus the loop overhead.
//!
//! ```sh
//! cd firmware && cargo build --release --example sensor_cost
//! qemu-system-arm -machine microbit -icount shift=0 -nographic \
//!   -semihosting-config enable=on,target=native -kernel target/thumbv6m-none-eabi/release/examples/sensor_cost
//! ```
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m::peripheral::{SYST, syst::SystClkSource};
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use isochor_core::fxmath;
use isochor_core::sensor::bridge::{self, BridgeConfig};
use isochor_core::sensor::calibration::{Correction, fixed::Corrector};
use isochor_core::sensor::current_loop::{self, LoopConfig, LoopState};
use isochor_core::sensor::ntc::{self, NtcConfig, NtcModel};
use isochor_core::sensor::resistive::{Circuit, FrontEnd};
use isochor_core::sensor::rtd::{self, RtdConfig};
use isochor_core::sensor::{PressureKind, gauge};
use isochor_core::time::{Instant, Millis};
use isochor_core::{Error, fx};

/// Core clock of the emulated board, Hz.
const CORE_HZ: u64 = if cfg!(target_abi = "eabihf") {
    25_000_000
} else {
    16_000_000
};

/// Calls per measurement.
const N: u32 = 1024;

fn ticks() -> u32 {
    SYST::get_current()
}

/// Instructions ×100 per call of `f` over `N` calls, minus the overhead of
/// the same loop around an empty body.
fn measure(mut f: impl FnMut(u32) -> u32) -> u64 {
    let run = |g: &mut dyn FnMut(u32) -> u32| {
        let a = ticks();
        let mut acc = 0u32;
        for i in 0..N {
            acc = acc.wrapping_add(g(black_box(i)));
        }
        black_box(acc);
        let b = ticks();
        a.wrapping_sub(b) & 0x00FF_FFFF
    };
    let t = run(&mut f) as u64;
    let base = run(&mut |i| i) as u64;
    let per_tick_x100 = 100_000_000_000 / CORE_HZ;
    t.saturating_sub(base) * per_tick_x100 / N as u64
}

fn report(name: &str, x100: u64) {
    hprintln!("{:<44} {:>6}.{:02}", name, x100 / 100, x100 % 100);
}

fn front(circuit: Circuit, rref: &str, short: &str, open: &str) -> FrontEnd {
    FrontEnd {
        circuit,
        adc_bits: 16,
        reference_ohms: fx::Resistance::lit(rref),
        lead_ohms: fx::Resistance::ZERO,
        short_ohms: fx::Resistance::lit(short),
        open_ohms: fx::Resistance::lit(open),
        excitation: fx::Coefficient::ZERO,
        self_heating_k_per_mw: fx::Coefficient::ZERO,
    }
}

fn run() -> Result<(), Error> {
    // Scale check: a loop of exactly 2 instructions per iteration.
    let a = ticks();
    // SAFETY: a register-only countdown loop; no memory is touched.
    unsafe { core::arch::asm!("1:", "subs {0}, #1", "bne 1b", inout(reg) 100_000u32 => _) };
    let b = ticks();
    let x100 = (a.wrapping_sub(b) & 0x00FF_FFFF) as u64 * (100_000_000_000 / CORE_HZ) / 100_000;
    report("scale check: 2-instruction loop body", x100);

    // Invented channels, fixed-point literals (no float on the device).
    let range = (
        fx::Temperature::lit("73.15"),
        fx::Temperature::lit("1123.15"),
    );
    let pt100 = |circuit, rref| RtdConfig {
        r0_ohms: fx::Resistance::lit("100"),
        front_end: front(circuit, rref, "9", "800"),
        range_min_k: range.0,
        range_max_k: range.1,
    };
    let series = rtd::fixed::Rtd::new(&pt100(Circuit::Ratiometric, "400"))?;
    let divider = rtd::fixed::Rtd::new(&pt100(Circuit::DividerLow, "1000"))?;
    // Codes for 0 … 850 °C and −200 … 0 °C with a 400 Ω series reference.
    let hot = |i: u32| 16_384 + (i * 23) % 47_600;
    let cold = |i: u32| 3_100 + (i * 11) % 13_280;
    report(
        "RTD Pt100 series, 0…850 °C",
        measure(|i| series.read(hot(i)).temperature_k.to_bits()),
    );
    report(
        "RTD Pt100 series, −200…0 °C",
        measure(|i| series.read(cold(i)).temperature_k.to_bits()),
    );
    report(
        "RTD Pt100 low divider, −200…850 °C",
        measure(|i| {
            divider
                .read(600 + (i * 29) % 19_000)
                .temperature_k
                .to_bits()
        }),
    );

    let ntc_range = (
        fx::Temperature::lit("213.15"),
        fx::Temperature::lit("423.15"),
    );
    let beta = NtcConfig {
        model: NtcModel::Beta {
            r0_ohms: fx::Resistance::lit("10000"),
            t0_k: fx::Temperature::lit("298.15"),
            beta_k: fx::Temperature::lit("3950"),
        },
        front_end: front(Circuit::DividerLow, "10000", "50", "4000000"),
        range_min_k: ntc_range.0,
        range_max_k: ntc_range.1,
    };
    let sh = NtcConfig {
        model: NtcModel::SteinhartHart {
            a: fx::Coefficient::lit("0.001129148"),
            b: fx::Coefficient::lit("0.000234125"),
            c: fx::Coefficient::lit("0.0000000876741"),
        },
        ..beta
    };
    let ntc_beta = ntc::fixed::Ntc::new(&beta)?;
    let ntc_sh = ntc::fixed::Ntc::new(&sh)?;
    let code = |i: u32| 400 + (i * 61) % 64_700;
    report(
        "NTC beta, low divider",
        measure(|i| ntc_beta.read(code(i)).temperature_k.to_bits()),
    );
    report(
        "NTC Steinhart–Hart, low divider",
        measure(|i| ntc_sh.read(code(i)).temperature_k.to_bits()),
    );

    let bcfg = BridgeConfig {
        adc_bits: 16,
        bipolar: true,
        zero: [
            fx::Coefficient::lit("0.01"),
            fx::Coefficient::lit("0.00002"),
            fx::Coefficient::lit("-0.00000003"),
        ],
        span: fx::Coefficient::lit("0.8"),
        span_tc: [
            fx::Coefficient::lit("-0.00015"),
            fx::Coefficient::lit("0.0000004"),
        ],
        reference_k: fx::Temperature::lit("298.15"),
        linearity: [
            fx::Coefficient::lit("0.001"),
            fx::Coefficient::lit("0.995"),
            fx::Coefficient::lit("0.006"),
            fx::Coefficient::lit("-0.002"),
        ],
        range_lo_pa: fx::GaugePressure::ZERO,
        range_hi_pa: fx::GaugePressure::lit("30000000"),
        kind: PressureKind::Gauge,
        range_margin: fx::Coefficient::lit("0.02"),
    };
    let br = bridge::fixed::Bridge::new(&bcfg)?;
    let t = fx::Temperature::lit("303.15");
    let baro = fx::Pressure::lit("101325");
    report(
        "bridge, tempcos and cubic linearity",
        measure(|i| {
            br.read(((i * 53) % 60_000) as i32 - 30_000, t, baro)
                .pressure_pa
                .to_bits()
        }),
    );

    let lcfg = LoopConfig {
        adc_bits: 16,
        adc_reference_v: fx::Coefficient::lit("3.3"),
        shunt_ohms: fx::Resistance::lit("150"),
        range_lo_pa: fx::GaugePressure::ZERO,
        range_hi_pa: fx::GaugePressure::lit("30000000"),
        kind: PressureKind::Gauge,
        persistence: Millis(2000),
    };
    let lp = current_loop::fixed::Loop::new(&lcfg)?;
    let mut state = LoopState::new();
    let comp = br.compensation(t);
    report(
        "bridge, compensation prepared (per code)",
        measure(|i| {
            br.read_compensated(((i * 53) % 60_000) as i32 - 30_000, &comp, baro)
                .pressure_pa
                .to_bits()
        }),
    );
    report(
        "4–20 mA loop with NE 43 persistence",
        measure(|i| {
            lp.read(
                12_000 + (i * 37) % 48_000,
                baro,
                Instant(i as u64),
                &mut state,
            )
            .pressure
            .pressure_pa
            .to_bits()
        }),
    );
    report(
        "gauge → absolute",
        measure(|i| {
            gauge::fixed::absolute(fx::GaugePressure::from_bits(i as i32 * 4099), baro)
                .pressure_pa
                .to_bits()
        }),
    );
    let corr = Corrector::new(
        &Correction {
            lo: fx::Anchor::lit("273.15"),
            hi: fx::Anchor::lit("473.15"),
            coefficients: [
                fx::Coefficient::lit("0.0002"),
                fx::Coefficient::lit("0.9995"),
                fx::Coefficient::lit("0.0001"),
                fx::Coefficient::ZERO,
            ],
        },
        16,
    )?;
    report(
        "calibration correction (cubic)",
        measure(|i| {
            corr.apply_temperature(fx::Temperature::from_bits(18_000_000 + i * 9_000))
                .0
                .to_bits()
        }),
    );
    report(
        "fxmath::ln",
        measure(|i| fxmath::ln(1 + i as u64 * 977, 0).unwrap_or(0) as u32),
    );
    report(
        "fxmath::recip",
        measure(|i| fxmath::recip(1 + i as u64 * 977, 0).map_or(0, |c| c.mantissa())),
    );
    report(
        "fxmath::sqrt",
        measure(|i| fxmath::sqrt(1 + i as u64 * 977, 0).mantissa()),
    );
    Ok(())
}

#[entry]
fn main() -> ! {
    let Some(mut p) = cortex_m::Peripherals::take() else {
        debug::exit(debug::EXIT_FAILURE);
        loop {
            cortex_m::asm::wfi();
        }
    };
    p.SYST.set_clock_source(SystClkSource::Core);
    p.SYST.set_reload(0x00FF_FFFF);
    p.SYST.clear_current();
    p.SYST.enable_counter();
    hprintln!(
        "instructions per call (QEMU -icount shift=0, mean of {} calls)",
        N
    );
    let code = match run() {
        Ok(()) => debug::EXIT_SUCCESS,
        Err(_) => debug::EXIT_FAILURE,
    };
    debug::exit(code);
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
