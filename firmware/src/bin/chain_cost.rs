//! Measures the whole per-sample fixed-point chain on a Cortex-M0, in
//! instructions: raw converter codes → sensor conversions → content estimate
//! with a built-in device gas model → tracking and alarms, over realistic
//! sample sequences, with the per-block and per-hour work amortised.
//!
//! Method: QEMU's `microbit` machine (nRF51, Cortex-M0) with
//! `-icount shift=6`: every instruction advances virtual time by 64 ns, and
//! SysTick counts the 16 MHz core clock (62.5 ns), so one tick is
//! 0.9765625 instruction and every stage is resolved to about one
//! instruction (the `-icount shift=0` of the other cost programs gives one
//! tick per 62.5 instructions). The first line checks the scale on a loop of
//! known length; the cost of reading the timer is subtracted. Its stack does
//! not fit the `microbit`'s 16 KiB: build it with the `mps2` memory map and
//! run it on `mps2-an385` (Cortex-M0 code on QEMU's Cortex-M3, SysTick at
//! 25 MHz: 40 ns, 0.625 instruction per tick).
//!
//! Scenario (invented, 1 Hz samples, 60 s blocks, default tracking
//! configuration): a 50 L cylinder, first brought to a full state by two
//! simulated days of samples once a minute (every sample closes a block:
//! that phase is reported too), then three hours at 1 Hz: a steady draw of
//! 4 % of the rated content per hour with a ±8 K daily temperature swing,
//! converter noise, a fast refill at 1 h 30 min (the gas heats by 20 K and
//! settles with τ = 30 min), and a sensor fault of 20 s. Temperature: a
//! Pt1000 on a 16-bit ratiometric input; pressure: a 0–300 bar gauge bridge
//! on a 16-bit bipolar converter with zero and span temperature coefficients
//! (compensated at the measured temperature) — and the same sequence
//! through an NTC and a 4–20 mA loop.
//!
//! ```sh
//! cd firmware && ISOCHOR_MEMORY=mps2 cargo build --release --bin chain_cost --target-dir target/m0-on-mps2
//! qemu-system-arm -machine mps2-an385 -cpu cortex-m3 -icount shift=6 -nographic \
//!   -semihosting-config enable=on,target=native \
//!   -kernel target/m0-on-mps2/thumbv6m-none-eabi/release/chain_cost
//! ```
#![no_std]
#![no_main]

use core::hint::black_box;
use cortex_m::peripheral::{SYST, syst::SystClkSource};
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use isochor_core::alarm::fixed::{Inputs, LevelInputs, LimitsFx};
use isochor_core::alarm::{Alarms, DebounceTable};
use isochor_core::content::fixed::Estimator;
use isochor_core::model::{CompressibilityFx, DeviceModel};
use isochor_core::sensor::PressureKind;
use isochor_core::sensor::bridge::{self, BridgeConfig};
use isochor_core::sensor::current_loop::{self, LoopConfig, LoopState};
use isochor_core::sensor::ntc::{self, NtcConfig, NtcModel};
use isochor_core::sensor::resistive::{Circuit, FrontEnd};
use isochor_core::sensor::rtd::{self, RtdConfig};
use isochor_core::time::{Instant, Millis};
use isochor_core::track::LeakMode;
use isochor_core::track::fixed::{TrackConfigFx, Tracker};
use isochor_core::uncertainty::fixed::UncertaintyConfigFx;
use isochor_core::{Error, Gas, SetupFx, StandardConditionFx, Status, TankFx, fx};

/// Virtual nanoseconds per instruction (`-icount shift=6`).
const NS_PER_INSTRUCTION: u64 = 64;
/// SysTick period, ns × 10: the `microbit` machine's 16 MHz core clock, or
/// the 25 MHz of `mps2-an385` for a build with the `mps2` memory map.
const TICK_NS_X10: u64 = if cfg!(isochor_mps2) { 400 } else { 625 };

/// Reads SysTick (counts down, 24 bits).
#[inline(always)]
fn now() -> u32 {
    SYST::get_current()
}

/// Instructions × 10 between two SysTick readings.
fn instructions_x10(start: u32, end: u32) -> u64 {
    let ticks = (start.wrapping_sub(end) & 0x00FF_FFFF) as u64;
    ticks * TICK_NS_X10 / NS_PER_INSTRUCTION
}

/// Times stages; knows the cost of an empty measurement (two back-to-back
/// readings), which it subtracts from every figure.
#[derive(Clone, Copy)]
struct Meter {
    overhead_x10: u64,
}

impl Meter {
    fn calibrate() -> Meter {
        let mut least = u64::MAX;
        for _ in 0..16 {
            let a = now();
            let b = now();
            least = least.min(instructions_x10(a, b));
        }
        Meter {
            overhead_x10: least,
        }
    }

    /// Times one closure, in instructions × 10, the timer's own cost removed.
    #[inline(always)]
    fn timed<R>(&self, f: impl FnOnce() -> R) -> (R, u64) {
        let a = now();
        let r = f();
        let b = now();
        (r, instructions_x10(a, b).saturating_sub(self.overhead_x10))
    }
}

/// Min / sum / max / count of a per-sample cost, in instructions × 10.
#[derive(Clone, Copy)]
struct Stat {
    min: u64,
    max: u64,
    sum: u64,
    n: u64,
}

impl Stat {
    const fn new() -> Stat {
        Stat {
            min: u64::MAX,
            max: 0,
            sum: 0,
            n: 0,
        }
    }
    fn add(&mut self, x10: u64) {
        self.min = self.min.min(x10);
        self.max = self.max.max(x10);
        self.sum += x10;
        self.n += 1;
    }
    fn mean(&self) -> u64 {
        self.sum.checked_div(self.n).unwrap_or(0)
    }
    fn print(&self, name: &str) {
        if self.n == 0 {
            hprintln!("  {:<40} {:>8} {:>8} {:>8} {:>7}", name, "-", "-", "-", 0);
            return;
        }
        hprintln!(
            "  {:<40} {:>8} {:>8} {:>8} {:>7}",
            name,
            (self.min + 5) / 10,
            (self.mean() + 5) / 10,
            (self.max + 5) / 10,
            self.n
        );
    }
}

/// A deterministic noise source (64-bit LCG, Knuth's MMIX constants).
struct Noise(u64);

impl Noise {
    /// Uniform in `-a ..= a`.
    fn next(&mut self, a: i32) -> i32 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let r = (self.0 >> 33) as u32;
        (r % (2 * a as u32 + 1)) as i32 - a
    }
}

/// The temperature channel under test.
enum TempSensor {
    Rtd(rtd::fixed::Rtd),
    Ntc(ntc::fixed::Ntc),
}

/// The pressure channel under test.
enum PresSensor {
    Bridge(bridge::fixed::Bridge),
    Loop(
        current_loop::fixed::Loop,
        LoopState<current_loop::fixed::Reading>,
    ),
}

fn pt1000() -> RtdConfig {
    RtdConfig {
        r0_ohms: fx::Resistance::lit("1000"),
        front_end: FrontEnd {
            circuit: Circuit::Ratiometric,
            adc_bits: 16,
            reference_ohms: fx::Resistance::lit("4000"),
            lead_ohms: fx::Resistance::ZERO,
            short_ohms: fx::Resistance::lit("90"),
            open_ohms: fx::Resistance::lit("3990"),
            excitation: fx::Coefficient::ZERO,
            self_heating_k_per_mw: fx::Coefficient::ZERO,
        },
        range_min_k: fx::Temperature::lit("213.15"),
        range_max_k: fx::Temperature::lit("423.15"),
    }
}

fn ntc10k() -> NtcConfig {
    NtcConfig {
        model: NtcModel::Beta {
            r0_ohms: fx::Resistance::lit("10000"),
            t0_k: fx::Temperature::lit("298.15"),
            beta_k: fx::Temperature::lit("3950"),
        },
        front_end: FrontEnd {
            circuit: Circuit::DividerLow,
            adc_bits: 16,
            reference_ohms: fx::Resistance::lit("10000"),
            lead_ohms: fx::Resistance::ZERO,
            short_ohms: fx::Resistance::lit("50"),
            open_ohms: fx::Resistance::lit("4000000"),
            excitation: fx::Coefficient::ZERO,
            self_heating_k_per_mw: fx::Coefficient::ZERO,
        },
        range_min_k: fx::Temperature::lit("213.15"),
        range_max_k: fx::Temperature::lit("423.15"),
    }
}

/// 0–300 bar gauge, 16-bit bipolar: s = 0.01 + 0.8·p/300 bar.
fn bridge300() -> BridgeConfig {
    BridgeConfig {
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
            fx::Coefficient::lit("0.0"),
            fx::Coefficient::lit("0.998"),
            fx::Coefficient::lit("0.003"),
            fx::Coefficient::lit("-0.001"),
        ],
        range_lo_pa: fx::GaugePressure::ZERO,
        range_hi_pa: fx::GaugePressure::lit("30000000"),
        kind: PressureKind::Gauge,
        range_margin: fx::Coefficient::lit("0.02"),
    }
}

/// 0–300 bar gauge on 4–20 mA, 150 Ω shunt, 3.3 V 16-bit converter.
fn loop300() -> LoopConfig {
    LoopConfig {
        adc_bits: 16,
        adc_reference_v: fx::Coefficient::lit("3.3"),
        shunt_ohms: fx::Resistance::lit("150"),
        range_lo_pa: fx::GaugePressure::ZERO,
        range_hi_pa: fx::GaugePressure::lit("30000000"),
        kind: PressureKind::Gauge,
        persistence: Millis(2000),
    }
}

fn setup(gas: Gas, rated: fx::Pressure) -> SetupFx {
    SetupFx {
        gas,
        tank: TankFx {
            water_capacity_m3: fx::Volume::lit("0.05"),
            rated_pressure_pa: rated,
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

/// The defaults of `TrackConfig::for_tank` with `UncertaintyConfig::example`
/// and `Limits::for_tank`, as fixed-point literals (no float on the device).
fn track_config(rated_bar: u32) -> TrackConfigFx {
    let p_atm = 101_325u32;
    let rated_pa = rated_bar * 100_000;
    TrackConfigFx {
        smoothing_pressure: Millis::from_secs(4),
        smoothing_temperature: Millis::from_secs(4),
        block: Millis::from_secs(60),
        max_gap: Millis::from_secs(300),
        reserve_fraction: fx::Fraction::lit("0.05"),
        settle_time_constant: Millis::from_secs(1800),
        settle_step: fx::SmallFraction::lit("0.005"),
        settle_tolerance: fx::SmallFraction::lit("0.002"),
        leak_mode: LeakMode::Standby,
        declared_draw_kg_h: None,
        leak_threshold_per_day: fx::SmallFraction::lit("0.001"),
        uncertainty: UncertaintyConfigFx {
            pressure_full_scale_pa: fx::Pressure::lit("30000000"),
            pressure_fs: fx::SmallFraction::lit("0.0014433756729740644"),
            pressure_reading: fx::SmallFraction::lit("0.0005773502691896258"),
            temperature_k: fx::Temperature::lit("0.5"),
            capacity: fx::SmallFraction::lit("0.005"),
            model: fx::SmallFraction::lit("0.001"),
            temperature_lag: Millis::from_secs(600),
            temperature_gain: fx::SmallFraction::lit("0.0028867513459481288"),
        },
        limits: LimitsFx {
            low_fraction: fx::Fraction::lit("0.1"),
            low_time_to_empty: Millis::from_secs(3600),
            fraction_hysteresis: fx::Fraction::lit("0.01"),
            over_fill_fraction: fx::Fraction::lit("1.02"),
            pressure_max_pa: fx::Pressure::from_num(p_atm + (rated_pa - p_atm) / 4 * 5),
            pressure_hysteresis_pa: fx::Pressure::from_num(rated_pa / 100),
            temperature_max_k: fx::Temperature::lit("338.15"),
            temperature_min_k: fx::Temperature::lit("233.15"),
            temperature_hysteresis_k: fx::Temperature::lit("2"),
        },
        debounce: DebounceTable::default(),
    }
}

/// The simulated truth at second `s`: gauge pressure (Pa) and temperature
/// (mK). `slow`: the two-day phase (once a minute, no draw).
struct Truth {
    /// Gas pressure before the thermal effects, Pa at 15 °C.
    p15_pa: i64,
    /// Extra gas temperature after a fill, mK (decays with τ = 30 min).
    heat_mk: i64,
}

impl Truth {
    /// Ambient temperature, mK: a ±8 K daily triangle around 15 °C.
    fn ambient_mk(s: u64) -> i64 {
        let day = 86_400u64;
        let x = (s % day) as i64; // 0 … day
        let half = (day / 2) as i64;
        let tri = if x < half { x } else { 2 * half - x }; // 0 … half
        288_150 - 8_000 + 16_000 * tri / half
    }
}

/// RTD code for a temperature (mK), through the channel's own inverse.
fn rtd_code(ch: &rtd::fixed::Rtd, t_mk: i64) -> u32 {
    let t = fx::Temperature::from_bits(((t_mk << 16) / 1000) as u32);
    let (r, _) = ch.ohms(t);
    // code = R/R_ref · 2^16, R_ref = 4000 Ω.
    ((r.to_bits() as u128 * 65_536 / (4000u128 << 32)) as u32).min(65_535)
}

/// NTC code for a temperature (mK): R = R₀·exp(β(1/T − 1/T₀)) on a low
/// divider with R_ref = R₀, by bisection on the channel's own conversion
/// (set-up only, not measured).
fn ntc_code(ch: &ntc::fixed::Ntc, t_mk: i64) -> u32 {
    let want = ((t_mk << 16) / 1000) as u32;
    let (mut lo, mut hi) = (1u32, 65_534u32);
    // The reading falls as the code rises (R grows with the code, T falls).
    while hi - lo > 1 {
        let mid = (lo + hi) / 2;
        if ch.read(mid).temperature_k.to_bits() > want {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    lo
}

/// Bridge code for a gauge pressure (Pa): s = 0.01 + 0.8·p/300 bar, code =
/// s·2^15 (ignoring the transducer's temperature coefficients).
fn bridge_code(p_pa: i64) -> i32 {
    (327 + p_pa * 262_144 / 300_000_000) as i32
}

/// Loop code for a gauge pressure: I = 4 + 16·p/300 bar mA; code =
/// I·150 Ω/3.3 V·2^16.
fn loop_code(p_pa: i64) -> u32 {
    let ua = 4_000 + p_pa * 16_000 / 30_000_000; // µA
    (ua * 150 * 65_536 / 3_300_000) as u32
}

/// Costs of one run.
struct Costs {
    temperature: Stat,
    pressure: Stat,
    update_plain: Stat,
    update_block: Stat,
    update_hour: Stat,
    update_fault: Stat,
    estimate: Stat,
    model: Stat,
    alarms: Stat,
    chain_plain: Stat,
    chain_all: Stat,
    slow_update: Stat,
}

impl Costs {
    const fn new() -> Costs {
        Costs {
            temperature: Stat::new(),
            pressure: Stat::new(),
            update_plain: Stat::new(),
            update_block: Stat::new(),
            update_hour: Stat::new(),
            update_fault: Stat::new(),
            estimate: Stat::new(),
            model: Stat::new(),
            alarms: Stat::new(),
            chain_plain: Stat::new(),
            chain_all: Stat::new(),
            slow_update: Stat::new(),
        }
    }
}

/// Runs the scenario through one chain and prints its costs.
fn run(
    m: Meter,
    name: &str,
    gas: Gas,
    rated_bar: u32,
    mut temp: TempSensor,
    mut pres: PresSensor,
) -> Result<(), Error> {
    let model = DeviceModel::builtin(gas)?;
    let rated = fx::Pressure::from_num(rated_bar * 100_000);
    let est = Estimator::new(setup(gas, rated), &model)?;
    let mut tracker = Tracker::new(est.clone(), track_config(rated_bar))?;
    let mut alarms = Alarms::new(DebounceTable::default());
    let limits = track_config(rated_bar).limits;
    let baro = fx::Pressure::lit("101325");
    let mut noise = Noise(0x2545_F491_4F6C_DD1D);
    let mut c = Costs::new();
    let mut truth = Truth {
        p15_pa: (rated_bar as i64) * 100_000 * 9 / 10,
        heat_mk: 0,
    };

    // Draw per second at 4 %/h of the rated pressure; refill at 5400 s.
    let draw_per_h = rated_bar as i64 * 100_000 * 4 / 100;
    // Two days and an hour once a minute, then three hours at 1 Hz (shorter
    // when built for instruction profiling: CHAIN_COST_PROFILE=1).
    let (slow_samples, fast_seconds) = if option_env!("CHAIN_COST_PROFILE").is_some() {
        (20u64, 300u64)
    } else {
        (2 * 24 * 60 + 60, 3 * 3600)
    };
    let t0 = 0u64;
    let total = slow_samples + fast_seconds;
    for k in 0..total {
        let slow = k < slow_samples;
        let s = if slow {
            t0 + k * 60
        } else {
            t0 + slow_samples * 60 + (k - slow_samples)
        };
        let fast_s = if slow { None } else { Some(k - slow_samples) };
        // Truth: the draw only in the fast phase; a refill of 35 % of the
        // rated pressure over 300 s at 5400 s; the gas heats by 20 K over
        // the fill and cools with τ = 30 min.
        if let Some(fs) = fast_s {
            truth.p15_pa -= draw_per_h / 3600;
            if (5400..5700).contains(&fs) {
                truth.p15_pa += rated_bar as i64 * 100_000 * 35 / 100 / 300;
                truth.heat_mk += 20_000 / 300;
            }
            // e^(−1/1800) ≈ 1 − 1/1800.
            truth.heat_mk -= truth.heat_mk / 1800;
        }
        let t_mk = Truth::ambient_mk(s) + truth.heat_mk;
        // Ideal-gas scaling of the pressure with temperature (scenario only).
        let p_pa = truth.p15_pa * t_mk / 288_150 - 101_325;
        let fault = matches!(fast_s, Some(fs) if (9000..9020).contains(&fs));

        let t_code = match &temp {
            TempSensor::Rtd(ch) => rtd_code(ch, t_mk) as i32 + noise.next(2),
            TempSensor::Ntc(ch) => ntc_code(ch, t_mk) as i32 + noise.next(2),
        };
        let p_noise = noise.next(3);
        let at = Instant(s * 1000);

        // The measured chain: codes → readings → tracker (estimate, alarms).
        let (t_reading, ct) = m.timed(|| match &mut temp {
            TempSensor::Rtd(ch) => ch.read(black_box(t_code.max(0) as u32)),
            TempSensor::Ntc(ch) => ch.read(black_box(t_code.max(0) as u32)),
        });
        let t_reading = black_box(t_reading);
        let (p_reading, cp) = m.timed(|| match &mut pres {
            PresSensor::Bridge(ch) => {
                let code = if fault {
                    32_767
                } else {
                    bridge_code(p_pa) + p_noise
                };
                ch.read(black_box(code), t_reading.temperature_k, baro)
            }
            PresSensor::Loop(ch, state) => {
                let code = if fault {
                    100
                } else {
                    loop_code(p_pa) as i32 + p_noise
                };
                ch.read(black_box(code.max(0) as u32), baro, at, state)
                    .pressure
            }
        });
        let p_reading = black_box(p_reading);
        let sensor = t_reading.status | p_reading.status;
        let (out, cu) =
            m.timed(|| tracker.update(at, p_reading.pressure_pa, t_reading.temperature_k, sensor));
        let out = black_box(out);

        if slow {
            c.slow_update.add(ct + cp + cu);
            continue;
        }
        c.temperature.add(ct);
        c.pressure.add(cp);
        c.chain_all.add(ct + cp + cu);
        let block = s % 60 == 0;
        let hour = s % 3600 == 0;
        let faulty = !(sensor & Status::SENSOR_RANGE).is_ok();
        if faulty {
            c.update_fault.add(cu);
        } else if hour {
            c.update_hour.add(cu);
        } else if block {
            c.update_block.add(cu);
        } else {
            c.update_plain.add(cu);
            c.chain_plain.add(ct + cp + cu);
        }

        // Attribution, measured beside the chain on the same values.
        if let Some(content) = out.content
            && !faulty
        {
            let (_, ce) =
                m.timed(|| est.estimate(black_box(content.pressure_pa), content.temperature_k));
            c.estimate.add(ce);
            let (_, cm) =
                m.timed(|| model.z_fx(black_box(content.pressure_pa), content.temperature_k));
            c.model.add(cm);
            let inputs = Inputs {
                content: Some(LevelInputs {
                    pressure_pa: content.pressure_pa,
                    temperature_k: content.temperature_k,
                    fill_fraction: content.fill_fraction,
                    settled_fraction: Some(content.fill_fraction),
                    time_to_empty: out.time_to_empty.map(|t| t.expected),
                }),
                sensor_fault: false,
                leak: false,
                not_settled: out.settling.not_settled,
            };
            let (_, ca) = m.timed(|| {
                let (raise, clear) = limits.conditions(black_box(&inputs));
                alarms.update(at, raise, clear)
            });
            c.alarms.add(ca);
        }
    }

    hprintln!("{}", name);
    hprintln!(
        "  {:<40} {:>8} {:>8} {:>8} {:>7}",
        "instructions per sample",
        "min",
        "mean",
        "max",
        "samples"
    );
    c.temperature.print("temperature conversion");
    c.pressure.print("pressure conversion");
    c.update_plain.print("tracker update, plain sample");
    c.update_block
        .print("tracker update, sample closing a block");
    c.update_hour
        .print("tracker update, sample closing an hour");
    c.update_fault.print("tracker update, sensor fault");
    c.estimate.print("  of which: content estimate");
    c.model.print("  of which: one gas-model call at (p, T)");
    c.alarms.print("  of which: alarm conditions + debounce");
    c.chain_plain.print("CHAIN, plain sample");
    c.chain_all.print("CHAIN, all samples (blocks amortised)");
    c.slow_update.print("chain at one sample per minute");
    Ok(())
}

fn scale_check() {
    // A loop of exactly 2 instructions per iteration, 100 000 times.
    let a = now();
    // SAFETY: a register-only countdown loop; no memory is touched.
    unsafe { core::arch::asm!("1:", "subs {0}, #1", "bne 1b", inout(reg) 100_000u32 => _) };
    let b = now();
    let x10 = instructions_x10(a, b);
    hprintln!(
        "scale check: 200000 instructions measured as {}.{}",
        x10 / 10,
        x10 % 10
    );
}

fn all(m: Meter) -> Result<(), Error> {
    let rtd = || rtd::fixed::Rtd::new(&pt1000());
    let ntc = || ntc::fixed::Ntc::new(&ntc10k());
    let bridge = || bridge::fixed::Bridge::new(&bridge300());
    let lp = || current_loop::fixed::Loop::new(&loop300());
    hprintln!(
        "RAM: tracker {} B (with estimator {} B), device model {} B, RTD {} B, NTC {} B, bridge {} B, loop {} B",
        core::mem::size_of::<Tracker<&DeviceModel<'static>>>(),
        core::mem::size_of::<Estimator<&DeviceModel<'static>>>(),
        core::mem::size_of::<DeviceModel<'static>>(),
        core::mem::size_of::<rtd::fixed::Rtd>(),
        core::mem::size_of::<ntc::fixed::Ntc>(),
        core::mem::size_of::<bridge::fixed::Bridge>(),
        core::mem::size_of::<current_loop::fixed::Loop>(),
    );
    run(
        m,
        "nitrogen 200 bar, Pt1000 + bridge",
        Gas::Nitrogen,
        200,
        TempSensor::Rtd(rtd()?),
        PresSensor::Bridge(bridge()?),
    )?;
    if option_env!("CHAIN_COST_PROFILE").is_some() {
        return Ok(());
    }
    run(
        m,
        "nitrogen 200 bar, NTC + 4-20 mA",
        Gas::Nitrogen,
        200,
        TempSensor::Ntc(ntc()?),
        PresSensor::Loop(lp()?, LoopState::new()),
    )?;
    run(
        m,
        "methane 200 bar, Pt1000 + bridge",
        Gas::Methane,
        200,
        TempSensor::Rtd(rtd()?),
        PresSensor::Bridge(bridge()?),
    )?;
    run(
        m,
        "hydrogen 250 bar, Pt1000 + bridge",
        Gas::Hydrogen,
        250,
        TempSensor::Rtd(rtd()?),
        PresSensor::Bridge(bridge()?),
    )?;
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
    let m = Meter::calibrate();
    scale_check();
    hprintln!(
        "timer overhead subtracted: {}.{} instructions",
        m.overhead_x10 / 10,
        m.overhead_x10 % 10
    );
    let code = match all(m) {
        Ok(()) => debug::EXIT_SUCCESS,
        Err(_) => {
            hprintln!("set-up failed");
            debug::EXIT_FAILURE
        }
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
