//! Sensor conversions against outside references (each check names its
//! source), NAMUR NE 43 boundaries, and refusal of non-numbers.

use isochor_core::constants::ZERO_CELSIUS_K;
use isochor_core::sensor::calibration::{Correction, float::Corrector};
use isochor_core::sensor::current_loop::{self, Band, LoopConfig, LoopState};
use isochor_core::sensor::ntc::{self, NtcConfig};
use isochor_core::sensor::resistive::Circuit;
use isochor_core::sensor::rtd::{self, RtdConfig};
use isochor_core::sensor::{PressureKind, gauge};
use isochor_core::time::{Instant, Millis};
use isochor_core::{Status, fx};

fn pt100() -> RtdConfig {
    RtdConfig::new(100.0, Circuit::Ratiometric, 16, 400.0).unwrap()
}

/// IEC 60751:2008 Table 1 (Pt100 resistance in Ω, printed to 0.01 Ω).
const IEC_60751_PT100: [(f64, f64); 5] = [
    (-40.0, 84.27),
    (0.0, 100.00),
    (50.0, 119.40),
    (100.0, 138.51),
    (200.0, 175.86),
];

#[test]
fn pt100_matches_the_iec_60751_table() {
    let fl = rtd::float::Rtd::<f64>::new(&pt100()).unwrap();
    let fi = rtd::fixed::Rtd::new(&pt100()).unwrap();
    for (t_c, ohms) in IEC_60751_PT100 {
        let t_k = t_c + ZERO_CELSIUS_K;
        // Resistance at the table temperature, to the table's rounding.
        let r = fl.ohms(t_k).unwrap();
        assert!((r - ohms).abs() <= 0.005, "{t_c} C: {r}");
        let (rf, s) = fi.ohms(fx::Temperature::from_num(t_k));
        assert!(s.is_ok());
        assert!(
            (fx::to_f64(rf) - ohms).abs() <= 0.005,
            "{t_c} C fixed: {rf}"
        );
        // Temperature at the table resistance: within the rounding (0.005 Ω
        // is about 0.013 °C at these slopes).
        let t = fl.read_ohms(ohms).unwrap().temperature_k - ZERO_CELSIUS_K;
        assert!((t - t_c).abs() < 0.014, "{t_c} C: {t}");
        let tf = fi
            .read_ohms(fx::Resistance::saturating_from_num(ohms))
            .temperature_k;
        assert!((fx::to_f64(tf) - ZERO_CELSIUS_K - t_c).abs() < 0.014);
    }
}

#[test]
fn rtd_round_trip_over_the_standard_range() {
    // IEC 60751 range −200 … 850 °C in 0.01 °C steps: temperature →
    // resistance → temperature. f64: within 1e-4 °C (asserted 1e-9).
    // Fixed point: within 2e-5 °C (stated bound, asserted).
    let fl = rtd::float::Rtd::<f64>::new(&pt100()).unwrap();
    let fi = rtd::fixed::Rtd::new(&pt100()).unwrap();
    let (mut worst_f, mut worst_x) = (0f64, 0f64);
    for i in -20_000..=85_000 {
        let t_c = i as f64 / 100.0;
        let t_k = t_c + ZERO_CELSIUS_K;
        let r = fl.ohms(t_k).unwrap();
        let back = fl.read_ohms(r).unwrap().temperature_k;
        worst_f = worst_f.max((back - t_k).abs());
        let tq = fx::Temperature::from_num(t_k);
        let (rq, _) = fi.ohms(tq);
        let backq = fi.read_ohms(rq).temperature_k;
        worst_x = worst_x.max((fx::to_f64(backq) - fx::to_f64(tq)).abs());
    }
    println!("RTD round trip: f64 {worst_f:.1e} K, fixed {worst_x:.1e} K");
    assert!(worst_f < 1e-9);
    assert!(worst_x < 2e-5);
}

#[test]
fn rtd_lead_and_self_heating_corrections() {
    // Pt100 at 100 °C reads 138.5055 Ω (IEC 60751 formula); with 2 × 0.5 Ω
    // of 2-wire leads the input sees 139.5055 Ω.
    let mut cfg = pt100();
    cfg.front_end.lead_ohms = fx::Resistance::saturating_from_num(1.0);
    let fl = rtd::float::Rtd::<f64>::new(&cfg).unwrap();
    let t = fl.read_ohms(139.5055).unwrap().temperature_k - ZERO_CELSIUS_K;
    assert!((t - 100.0).abs() < 1e-3, "{t}");
    let fi = rtd::fixed::Rtd::new(&cfg).unwrap();
    let tq = fx::to_f64(
        fi.read_ohms(fx::Resistance::saturating_from_num(139.5055))
            .temperature_k,
    );
    assert!((tq - ZERO_CELSIUS_K - 100.0).abs() < 1e-3, "{tq}");
    // Self-heating: 1 mA through the sensor, 0.1 K/mW (invented sensor):
    // P = I²R, about 0.1385 mW near 100 °C: the sensor reads 0.01385 K warm.
    // Applied to converter codes (the series circuit's current is known).
    cfg.front_end.lead_ohms = fx::Resistance::ZERO;
    let plain = rtd::float::Rtd::<f64>::new(&cfg).unwrap();
    cfg.front_end.excitation = fx::Coefficient::from_num(1e-3);
    cfg.front_end.self_heating_k_per_mw = fx::Coefficient::from_num(0.1);
    let fl = rtd::float::Rtd::<f64>::new(&cfg).unwrap();
    let code = (138.5055 / 400.0 * 65536.0) as u32;
    let r_code = 400.0 * code as f64 / 65536.0;
    let expected = plain.read(code).temperature_k - 0.1 * 1e-3 * 1e-3 * r_code * 1e3;
    let t = fl.read(code).temperature_k;
    assert!((t - expected).abs() < 1e-9, "{t} {expected}");
    assert!((plain.read(code).temperature_k - t - 0.01385).abs() < 1e-4);
    // The same code through both paths agrees.
    let fi = rtd::fixed::Rtd::new(&cfg).unwrap();
    let a = fx::to_f64(fi.read(code).temperature_k);
    assert!((a - t).abs() < 2e-5);
}

#[test]
fn steinhart_hart_10k_set() {
    // Widely used 10 kΩ thermistor coefficients A = 1.129148e-3,
    // B = 2.34125e-4, C = 8.76741e-8: 10 kΩ ≈ 25.0 °C (common practice, no
    // published source).
    let model = NtcConfig::steinhart_hart(1.129148e-3, 2.34125e-4, 8.76741e-8).unwrap();
    let cfg = NtcConfig::new(model, Circuit::DividerLow, 16, 10_000.0).unwrap();
    let fl = ntc::float::Ntc::<f64>::new(&cfg).unwrap();
    let fi = ntc::fixed::Ntc::new(&cfg).unwrap();
    let t = fl.read_ohms(10_000.0).unwrap().temperature_k - ZERO_CELSIUS_K;
    assert!((t - 25.0).abs() < 0.05, "{t}");
    let tf = fx::to_f64(
        fi.read_ohms(fx::Resistance::saturating_from_num(10_000))
            .temperature_k,
    );
    assert!((tf - ZERO_CELSIUS_K - t).abs() < 1e-5);
    // The closed-form inverse gives back the resistance over −60 … 150 °C.
    for t_c in (-60..=150).map(|c| c as f64) {
        let r = fl.ohms(t_c + ZERO_CELSIUS_K).unwrap();
        let back = fl.read_ohms(r).unwrap().temperature_k - ZERO_CELSIUS_K;
        assert!((back - t_c).abs() < 1e-9, "{t_c}: {back}");
    }
}

#[test]
fn beta_model_10k_3950() {
    // Beta model by its definition R = R25·exp(β(1/T − 1/T25)), R25 = 10 kΩ,
    // β = 3950 K: 10 kΩ at 25 °C; at 0 °C, 10 kΩ·exp(3950·(1/273.15 −
    // 1/298.15)) = 33 620.6 Ω (evaluated by hand from the definition).
    let model = NtcConfig::beta(10_000.0, 298.15, 3950.0).unwrap();
    let cfg = NtcConfig::new(model, Circuit::DividerLow, 16, 10_000.0).unwrap();
    let fl = ntc::float::Ntc::<f64>::new(&cfg).unwrap();
    let fi = ntc::fixed::Ntc::new(&cfg).unwrap();
    let expected = 10_000.0 * (3950.0f64 * (1.0 / 273.15 - 1.0 / 298.15)).exp();
    assert!((expected - 33_620.6).abs() < 0.05);
    // The configuration stores T25 as U16F16 (298.149994 K) and β as U16F16:
    // relative 3e-7 at 0 °C.
    assert!((fl.ohms(273.15).unwrap() - expected).abs() < 0.02);
    assert!((fl.ohms(298.15).unwrap() - 10_000.0).abs() < 0.005);
    let t = fl.read_ohms(33_620.6).unwrap().temperature_k - ZERO_CELSIUS_K;
    assert!(t.abs() < 1e-4, "{t}");
    let tf = fx::to_f64(
        fi.read_ohms(fx::Resistance::saturating_from_num(33_620.6))
            .temperature_k,
    );
    assert!((tf - ZERO_CELSIUS_K).abs() < 1e-4, "{tf}");
}

fn loop_config() -> LoopConfig {
    // Invented 0–300 bar gauge transmitter, 150 Ω shunt, 3.3 V converter.
    LoopConfig::new(
        16,
        3.3,
        150.0,
        0.0,
        300e5,
        PressureKind::Gauge,
        Millis(2000),
    )
    .unwrap()
}

#[test]
fn namur_ne_43_boundaries() {
    // NAMUR NE 43: measuring 3.8–20.5 mA, failure at ≤ 3.6 mA or ≥ 21.0 mA.
    let fl = current_loop::float::Loop::<f64>::new(&loop_config()).unwrap();
    let fi = current_loop::fixed::Loop::new(&loop_config()).unwrap();
    let baro = 101_325.0;
    // 3.8 mA is a measurement of −3.75 bar gauge: the absolute pressure is
    // negative there, clamped to zero and flagged under range.
    let negative = Status::SENSOR_UNDER_RANGE;
    for (ma, band, status) in [
        (3.59, Band::FailureLow, Status::SENSOR_LOOP_FAILURE),
        (3.60, Band::FailureLow, Status::SENSOR_LOOP_FAILURE),
        (3.70, Band::BelowRange, Status::SENSOR_UNDER_RANGE),
        (3.80, Band::Measuring, negative),
        (20.50, Band::Measuring, Status::OK),
        (20.70, Band::AboveRange, Status::SENSOR_OVER_RANGE),
        (21.00, Band::FailureHigh, Status::SENSOR_LOOP_FAILURE),
        (21.01, Band::FailureHigh, Status::SENSOR_LOOP_FAILURE),
    ] {
        assert_eq!(current_loop::float::band(ma), band, "{ma} mA");
        assert_eq!(
            current_loop::fixed::band(fx::Milliamps::from_num(ma)),
            band,
            "{ma} mA fixed"
        );
        let (b, r) = fl.convert_current(ma, baro).unwrap();
        assert_eq!(b, band);
        assert_eq!(r.status, status, "{ma} mA");
        let (bq, rq) =
            fi.convert_current(fx::Milliamps::from_num(ma), fx::Pressure::from_num(baro));
        assert_eq!(bq, band);
        assert_eq!(rq.status, status);
    }
    // Inside the measuring band: 12 mA is mid-range, 150 bar gauge.
    let (_, r) = fl.convert_current(12.0, baro).unwrap();
    assert!((r.gauge_pa - 150e5).abs() < 1e-6);
    assert!((r.pressure_pa - 150e5 - baro).abs() < 1e-6);
    // 3.9 mA lies in the measuring band, below 4 mA: −1.875 bar gauge, an
    // absolute pressure below zero: clamped to 0 and flagged under range.
    let (b, r) = fl.convert_current(3.9, baro).unwrap();
    assert_eq!(b, Band::Measuring);
    assert!((r.gauge_pa + 1.875e5).abs() < 1e-6);
    assert_eq!(r.pressure_pa, 0.0);
    assert_eq!(r.status, Status::SENSOR_UNDER_RANGE);
}

#[test]
fn ne_43_persistence_holds_then_declares() {
    let cfg = loop_config();
    let fi = current_loop::fixed::Loop::new(&cfg).unwrap();
    let fl = current_loop::float::Loop::<f64>::new(&cfg).unwrap();
    let baro = fx::Pressure::from_num(101_325);
    let code = |ma: f64| (ma / 22.0 * 65536.0).round() as u32;
    let mut s = LoopState::new();
    let mut sf = LoopState::new();
    // 12 mA at t = 0, then 2.0 mA (broken loop) from t = 1 s.
    let good = fi.read(code(12.0), baro, Instant(0), &mut s);
    let _ = fl.read(code(12.0), 101_325.0, Instant(0), &mut sf).unwrap();
    assert!(good.pressure.status.is_ok());
    for (t, flag) in [
        (1_000, Status::SENSOR_UNDER_RANGE),
        (2_999, Status::SENSOR_UNDER_RANGE),
        (3_000, Status::SENSOR_LOOP_FAILURE),
        (9_000, Status::SENSOR_LOOP_FAILURE),
    ] {
        let r = fi.read(code(2.0), baro, Instant(t), &mut s);
        assert_eq!(r.band, Band::FailureLow);
        assert_eq!(r.pressure.status, flag, "t = {t}");
        // The last valid value is held.
        assert_eq!(r.pressure.pressure_pa, good.pressure.pressure_pa);
        let rf = fl.read(code(2.0), 101_325.0, Instant(t), &mut sf).unwrap();
        assert_eq!(rf.pressure.status, flag);
    }
    // Recovery clears the failure.
    let r = fi.read(code(12.0), baro, Instant(10_000), &mut s);
    assert!(r.pressure.status.is_ok());
    assert!(!s.failing());
}

#[test]
fn non_numbers_and_impossible_inputs_are_errors() {
    let rtd = rtd::float::Rtd::<f64>::new(&pt100()).unwrap();
    assert!(rtd.read_ohms(f64::NAN).is_err());
    assert!(rtd.read_ohms(f64::INFINITY).is_err());
    assert!(rtd.ohms(f64::NAN).is_err());
    assert!(rtd.ohms(ZERO_CELSIUS_K + 900.0).is_err());
    assert!(rtd.ohms(ZERO_CELSIUS_K - 250.0).is_err());
    let model = NtcConfig::beta(10_000.0, 298.15, 3950.0).unwrap();
    let ntc =
        ntc::float::Ntc::<f64>::new(&NtcConfig::new(model, Circuit::DividerLow, 16, 1e4).unwrap())
            .unwrap();
    assert!(ntc.read_ohms(f64::NEG_INFINITY).is_err());
    assert!(ntc.ohms(-5.0).is_err());
    assert!(ntc.ohms(f64::NAN).is_err());
    let lp = current_loop::float::Loop::<f64>::new(&loop_config()).unwrap();
    assert!(lp.convert_current(f64::NAN, 1e5).is_err());
    assert!(lp.convert_current(-1.0, 1e5).is_err());
    assert!(lp.convert_current(12.0, f64::INFINITY).is_err());
    assert!(gauge::float::absolute(f64::NAN, 1e5).is_err());
    let c = Corrector::<f64>::new(&Correction::IDENTITY).unwrap();
    assert!(c.apply(f64::INFINITY).is_err());
    // Configurations out of range are refused with the field named.
    assert!(RtdConfig::new(f64::NAN, Circuit::Ratiometric, 16, 400.0).is_err());
    assert!(NtcConfig::beta(10_000.0, 298.15, f64::INFINITY).is_err());
    assert!(LoopConfig::new(16, 1.0, 150.0, 0.0, 300e5, PressureKind::Gauge, Millis(0)).is_err());
}

#[test]
fn open_and_short_circuits_are_flagged_in_both_paths() {
    let cfg = pt100();
    let fl = rtd::float::Rtd::<f64>::new(&cfg).unwrap();
    let fi = rtd::fixed::Rtd::new(&cfg).unwrap();
    for (code, flag) in [
        (0, Status::SENSOR_SHORT_CIRCUIT),
        (100, Status::SENSOR_SHORT_CIRCUIT),
        (65_535, Status::SENSOR_OPEN_CIRCUIT),
        (70_000, Status::SENSOR_SATURATED),
    ] {
        assert!(fl.read(code).status.contains(flag), "{code}");
        assert!(fi.read(code).status.contains(flag), "{code}");
    }
    assert!(
        fl.read_ohms(0.2)
            .unwrap()
            .status
            .contains(Status::SENSOR_SHORT_CIRCUIT)
    );
    assert!(
        fl.read_ohms(1e6)
            .unwrap()
            .status
            .contains(Status::SENSOR_OPEN_CIRCUIT)
    );
    // NTC in a low-side divider: code 0 is a short, the top code an open input.
    let model = NtcConfig::beta(10_000.0, 298.15, 3950.0).unwrap();
    let ncfg = NtcConfig::new(model, Circuit::DividerLow, 16, 1e4).unwrap();
    let n = ntc::fixed::Ntc::new(&ncfg).unwrap();
    assert!(n.read(0).status.contains(Status::SENSOR_SHORT_CIRCUIT));
    assert!(n.read(65_535).status.contains(Status::SENSOR_OPEN_CIRCUIT));
    assert!(n.read(32_768).status.is_ok());
}
