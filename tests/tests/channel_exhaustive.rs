//! Exhaustive: every 16-bit converter code through each prepared channel
//! (the device path: curves and status maps prepared on the host) against
//! the `f64` channel on the same code (the front-ends' equations as
//! written, themselves checked against published values in
//! `sensor_references.rs`). Flags must be identical code for code; values
//! within the bounds asserted (where the channel flags a reading as out of
//! its measuring range the curve is held to a looser bound, see
//! `fixed::FLAGGED_WEIGHT`).

use isochor_core::Status;
use isochor_core::fx;
use isochor_core::sensor::PressureKind;
use isochor_core::sensor::TemperatureReading;
use isochor_core::sensor::VALUE_INVALID;
use isochor_core::sensor::bridge::BridgeConfig;
use isochor_core::sensor::calibration::{CalibrationRecord, Channel, Correction, SensorConfig};
use isochor_core::sensor::channel::{fixed, float};
use isochor_core::sensor::current_loop::LoopConfig;
use isochor_core::sensor::ntc::NtcConfig;
use isochor_core::sensor::resistive::Circuit;
use isochor_core::sensor::rtd::RtdConfig;
use isochor_core::time::{Instant, Millis};

fn record(channel: Channel, sensor: SensorConfig, correction: Correction) -> CalibrationRecord {
    CalibrationRecord {
        sequence: 1,
        channel,
        sensor,
        correction,
    }
}

/// Worst errors of one channel: readings the channel does not flag, and
/// readings flagged only as out of the measuring range.
#[derive(Default, Debug)]
struct Worst {
    plain: f64,
    flagged: f64,
    compared: u32,
    flag_mismatches: u32,
}

impl Worst {
    /// One reading: the error counts as is, or as a fraction of 1/1000 of
    /// the converter step `step` where a step is coarser than 30 mK (or
    /// 30 Pa); see `fixed::STEP_RATIO`.
    fn add_step(&mut self, status: Status, fixed: f64, float: f64, step: f64, coarse: f64) {
        let e = (fixed - float).abs();
        let e = if step > coarse {
            e * coarse / (step / 1000.0) * (3e-5 / coarse)
        } else {
            e
        };
        self.add_error(status, e);
    }

    fn add(&mut self, status: Status, fixed: f64, float: f64) {
        self.add_error(status, (fixed - float).abs());
    }

    fn add_error(&mut self, status: Status, e: f64) {
        if status.is_ok() {
            self.compared += 1;
            self.plain = self.plain.max(e);
        } else if !status.intersects(VALUE_INVALID) {
            self.flagged = self.flagged.max(e);
        }
    }
}

fn temperature_case(name: &str, rec: &CalibrationRecord) -> Worst {
    let fl = float::TemperatureChannel::<f64>::new(rec).unwrap();
    let (buf, fit) = fixed::TemperatureStageBuf::prepare(&fl).unwrap();
    let stage = buf.stage();
    let ch = fixed::TemperatureChannel::default();
    let mut w = Worst::default();
    for code in 0..=u16::MAX as u32 {
        let a = ch.read(&stage, code);
        let b = fl.read(code).unwrap();
        if a.status != b.status {
            w.flag_mismatches += 1;
        }
        let next = fl.read((code + 1).min(u16::MAX as u32)).unwrap();
        let step = (next.temperature_k - b.temperature_k).abs();
        w.add_step(
            b.status,
            fx::to_f64(a.temperature_k),
            b.temperature_k,
            step,
            0.03,
        );
    }
    println!(
        "{name}: {} pieces, fit {fit:.1e} K; worst {:.2e} K (as 3e-5 K per 1/1000 step where a step > 30 mK) over {} codes, flagged readings {:.2e} K; {} flag mismatches",
        stage.curve.pieces.len(),
        w.plain,
        w.compared,
        w.flagged,
        w.flag_mismatches
    );
    w
}

#[test]
fn rtd_channels_every_code() {
    // Pt100 2-wire with 0.8 Ω of leads and self-heating at 1 mA, 0.1 K/mW
    // (invented sensor), besides the plain circuits; a gas-gauge range
    // −60…150 °C and the whole IEC 60751 range.
    let mut leads = RtdConfig::new(100.0, Circuit::Ratiometric, 16, 400.0).unwrap();
    leads.front_end.lead_ohms = fx::Resistance::saturating_from_num(0.8);
    leads.front_end.excitation = fx::Coefficient::from_num(1e-3);
    leads.front_end.self_heating_k_per_mw = fx::Coefficient::from_num(0.1);
    let mut divider_heated = RtdConfig::new(1000.0, Circuit::DividerLow, 16, 4990.0).unwrap();
    divider_heated.front_end.excitation = fx::Coefficient::from_num(3.3);
    divider_heated.front_end.self_heating_k_per_mw = fx::Coefficient::from_num(0.2);
    let cfg = |r0, c, r| RtdConfig::new(r0, c, 16, r).unwrap();
    let gauge_range = |mut c: RtdConfig| {
        c.range_min_k = fx::Temperature::from_num(213.15);
        c.range_max_k = fx::Temperature::from_num(423.15);
        c
    };
    // A correction as a calibration lab gives it (invented): 0.05 K offset,
    // a span error of 2e-4 and a small curvature over 250…400 K.
    let lab = Correction::from_f64(250.0, 400.0, [0.05 / 150.0, 1.0002, -1e-5, 4e-6]).unwrap();
    for (name, c, corr, bound) in [
        (
            "Pt100 series 400, IEC range",
            cfg(100.0, Circuit::Ratiometric, 400.0),
            Correction::IDENTITY,
            2.5e-5,
        ),
        (
            "Pt1000 series 4020, IEC range",
            cfg(1000.0, Circuit::Ratiometric, 4020.0),
            Correction::IDENTITY,
            2.5e-5,
        ),
        (
            "Pt100 low divider 1000, IEC range",
            cfg(100.0, Circuit::DividerLow, 1000.0),
            Correction::IDENTITY,
            3e-5,
        ),
        (
            "Pt1000 high divider 2000, IEC range",
            cfg(1000.0, Circuit::DividerHigh, 2000.0),
            Correction::IDENTITY,
            3e-5,
        ),
        (
            "Pt100 series, leads, self-heating, IEC range",
            leads,
            Correction::IDENTITY,
            2.5e-5,
        ),
        (
            "Pt1000 low divider 4990, self-heating, IEC range",
            divider_heated,
            Correction::IDENTITY,
            3e-5,
        ),
        (
            "Pt1000 series 4020, gauge range",
            gauge_range(cfg(1000.0, Circuit::Ratiometric, 4020.0)),
            Correction::IDENTITY,
            1.2e-5,
        ),
        (
            "Pt1000 series 4020, gauge range, lab correction",
            gauge_range(cfg(1000.0, Circuit::Ratiometric, 4020.0)),
            lab,
            1.2e-5,
        ),
        (
            "Pt1000 high divider 2000, gauge range",
            gauge_range(cfg(1000.0, Circuit::DividerHigh, 2000.0)),
            Correction::IDENTITY,
            1.2e-5,
        ),
    ] {
        let rec = record(Channel::Temperature, SensorConfig::Rtd(c), corr);
        let w = temperature_case(name, &rec);
        assert_eq!(w.flag_mismatches, 0, "{name}");
        assert!(w.compared > 2_000, "{name}");
        assert!(w.plain < bound && w.flagged < 5e-3, "{name}: {w:?}");
    }
}

#[test]
fn ntc_channels_every_code() {
    let beta = NtcConfig::beta(10_000.0, 298.15, 3950.0).unwrap();
    let sh = NtcConfig::steinhart_hart(1.129148e-3, 2.34125e-4, 8.76741e-8).unwrap();
    let cfg = |m, c, r| NtcConfig::new(m, c, 16, r).unwrap();
    // 10 kΩ divider at 3.3 V with a 1.5 mW/K dissipation constant and 2 Ω of
    // leads (invented).
    let mut heated = cfg(beta, Circuit::DividerLow, 10_000.0);
    heated.front_end.excitation = fx::Coefficient::from_num(3.3);
    heated.front_end.self_heating_k_per_mw = fx::Coefficient::from_num(1.0 / 1.5);
    heated.front_end.lead_ohms = fx::Resistance::saturating_from_num(2.0);
    for (name, c) in [
        (
            "NTC beta 3950 low divider 10k",
            cfg(beta, Circuit::DividerLow, 10_000.0),
        ),
        (
            "NTC beta 3950 high divider 10k",
            cfg(beta, Circuit::DividerHigh, 10_000.0),
        ),
        (
            "NTC Steinhart-Hart low divider 10k",
            cfg(sh, Circuit::DividerLow, 10_000.0),
        ),
        (
            "NTC Steinhart-Hart series 2M",
            cfg(sh, Circuit::Ratiometric, 2_000_000.0),
        ),
        ("NTC beta 3950, leads, self-heating", heated),
    ] {
        let rec = record(
            Channel::Temperature,
            SensorConfig::Ntc(c),
            Correction::IDENTITY,
        );
        let w = temperature_case(name, &rec);
        assert_eq!(w.flag_mismatches, 0, "{name}");
        assert!(w.compared > 2_000, "{name}");
        assert!(w.plain < 3e-5 && w.flagged < 5e-3, "{name}: {w:?}");
    }
}

/// An invented 0–300 bar gauge transducer on a bipolar 16-bit converter:
/// zero 1 % of the range, span 80 %, with temperature coefficients and a
/// linearity correction of realistic size.
fn bridge_config() -> BridgeConfig {
    let mut cfg = BridgeConfig::new(16, true, 0.01, 0.8, 0.0, 300e5, PressureKind::Gauge).unwrap();
    cfg.zero[1] = fx::Coefficient::from_num(2e-5);
    cfg.zero[2] = fx::Coefficient::from_num(-3e-8);
    cfg.span_tc = [
        fx::Coefficient::from_num(-1.5e-4),
        fx::Coefficient::from_num(4e-7),
    ];
    cfg.linearity = [
        fx::Coefficient::from_num(1e-3),
        fx::Coefficient::from_num(0.995),
        fx::Coefficient::from_num(6e-3),
        fx::Coefficient::from_num(-2e-3),
    ];
    cfg.range_margin = fx::Coefficient::from_num(0.02);
    cfg
}

/// The nominal Pt1000 channel that reads the bridge's temperature.
fn pt1000() -> CalibrationRecord {
    let mut c = RtdConfig::new(1000.0, Circuit::Ratiometric, 16, 4020.0).unwrap();
    c.range_min_k = fx::Temperature::from_num(213.15);
    c.range_max_k = fx::Temperature::from_num(423.15);
    record(
        Channel::Temperature,
        SensorConfig::Rtd(c),
        Correction::IDENTITY,
    )
}

#[test]
fn bridge_channels_every_code() {
    let full_scale = 300e5;
    let mut unipolar = bridge_config();
    unipolar.bipolar = false;
    let mut absolute = bridge_config();
    absolute.kind = PressureKind::Absolute;
    absolute.range_hi_pa = fx::GaugePressure::from_num(1000e5);
    let lab = Correction::from_f64(1e5, 301e5, [2e-4, 0.9995, 3e-4, -1e-4]).unwrap();
    let t_stage = fixed::TemperatureStageBuf::prepare(
        &float::TemperatureChannel::<f64>::new(&pt1000()).unwrap(),
    )
    .unwrap()
    .0;
    for (name, c, corr) in [
        (
            "bridge 300 bar gauge, bipolar",
            bridge_config(),
            Correction::IDENTITY,
        ),
        (
            "bridge 300 bar gauge, unipolar",
            unipolar,
            Correction::IDENTITY,
        ),
        (
            "bridge 300 bar gauge, bipolar, lab correction",
            bridge_config(),
            lab,
        ),
        ("bridge 1000 bar absolute", absolute, Correction::IDENTITY),
    ] {
        let rec = record(Channel::Pressure, SensorConfig::Bridge(c), corr);
        let mut fl = float::PressureChannel::<f64>::new(&rec, 97_000.0).unwrap();
        let (buf, fit) = fixed::PressureStageBuf::prepare(&fl, &t_stage.stage()).unwrap();
        let stage = buf.stage();
        let mut ch = fixed::PressureChannel::new(0);
        let (lo, hi) = c.rails();
        let scale = fx::to_f64(c.range_hi_pa) - fx::to_f64(c.range_lo_pa);
        for t_c in [-40.0, 25.0, 85.0] {
            let t = fx::Temperature::from_num(273.15 + t_c);
            let tr_fixed = TemperatureReading {
                temperature_k: t,
                status: Status::OK,
            };
            let tr_float = TemperatureReading {
                temperature_k: fx::to_f64(t),
                status: Status::OK,
            };
            let mut w = Worst::default();
            for code in lo..=hi {
                let raw = (code as u32) & 0xFFFF;
                let a = ch.read(&stage, Instant(0), raw, &tr_fixed);
                let b = fl.read(Instant(0), raw, &tr_float).unwrap();
                if a.status != b.status {
                    w.flag_mismatches += 1;
                }
                w.add(b.status, fx::to_f64(a.pressure_pa), b.pressure_pa);
            }
            println!(
                "{name} at {t_c} °C: fit {fit:.1e}; worst {:.2e} of full scale over {} codes, flagged {:.2e}; {} flag mismatches",
                w.plain / scale,
                w.compared,
                w.flagged / scale,
                w.flag_mismatches
            );
            assert_eq!(w.flag_mismatches, 0, "{name}");
            assert!(w.compared > 50_000 / 2, "{name}");
            // Bound asserted: 1e-6 of full scale (target 1e-5).
            assert!(
                w.plain / scale < 1e-6 && w.flagged / scale < 1e-4,
                "{name}: {w:?}"
            );
        }
        let _ = full_scale;
    }
}

#[test]
fn loop_channels_every_code() {
    // A 4–20 mA loop over a 100 Ω shunt on a 16-bit converter with a
    // 2.5 V reference, 0–400 bar gauge, 2 s persistence (invented).
    let cfg = LoopConfig::new(
        16,
        2.5,
        100.0,
        0.0,
        400e5,
        PressureKind::Gauge,
        Millis(2000),
    )
    .unwrap();
    let lab = Correction::from_f64(1e5, 401e5, [-1e-4, 1.0003, 0.0, 0.0]).unwrap();
    let t_stage = fixed::TemperatureStageBuf::prepare(
        &float::TemperatureChannel::<f64>::new(&pt1000()).unwrap(),
    )
    .unwrap()
    .0;
    for (name, corr) in [
        ("loop 400 bar", Correction::IDENTITY),
        ("loop 400 bar, lab correction", lab),
    ] {
        let rec = record(Channel::Pressure, SensorConfig::Loop(cfg), corr);
        let mut fl = float::PressureChannel::<f64>::new(&rec, 101_325.0).unwrap();
        let (buf, fit) = fixed::PressureStageBuf::prepare(&fl, &t_stage.stage()).unwrap();
        let stage = buf.stage();
        let mut ch = fixed::PressureChannel::new(0);
        let tr_fixed = TemperatureReading {
            temperature_k: fx::Temperature::from_num(290),
            status: Status::OK,
        };
        let tr_float = TemperatureReading {
            temperature_k: 290.0,
            status: Status::OK,
        };
        let mut w = Worst::default();
        // Codes in order, one sample per 100 ms: persistence runs alike.
        for code in 0..=u16::MAX as u32 {
            let at = Instant(code as u64 * 100);
            let a = ch.read(&stage, at, code, &tr_fixed);
            let b = fl.read(at, code, &tr_float).unwrap();
            if a.status != b.status {
                w.flag_mismatches += 1;
            }
            w.add(b.status, fx::to_f64(a.pressure_pa), b.pressure_pa);
        }
        println!(
            "{name}: fit {fit:.1e} Pa; worst {:.2e} of full scale over {} codes, flagged {:.2e}; {} flag mismatches",
            w.plain / 400e5,
            w.compared,
            w.flagged / 400e5,
            w.flag_mismatches
        );
        assert_eq!(w.flag_mismatches, 0, "{name}");
        assert!(w.compared > 20_000, "{name}");
        assert!(
            w.plain / 400e5 < 1e-6 && w.flagged / 400e5 < 1e-4,
            "{name}: {w:?}"
        );
    }
}
