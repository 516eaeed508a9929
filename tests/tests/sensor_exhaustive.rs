//! Exhaustive: every 16-bit converter code through each conversion, fixed
//! point against the `f64` path on the same code, maximum error asserted.
//! (The `f64` paths themselves are checked against published values in
//! `sensor_references.rs`.)

use isochor_core::sensor::VALUE_INVALID;
use isochor_core::sensor::ntc::{self, NtcConfig};
use isochor_core::sensor::resistive::Circuit;
use isochor_core::sensor::rtd::{self, RtdConfig};
use isochor_core::{Status, fx};

/// The paths must give the same flags, except for a range flag on a value
/// within `tol` of a range limit (rounding decides which side it falls).
fn same_flags(a: Status, b: Status, value: f64, limits: [f64; 2], tol: f64, code: u32) {
    if a == b {
        return;
    }
    let range = Status::SENSOR_UNDER_RANGE | Status::SENSOR_OVER_RANGE;
    let near = limits.iter().any(|l| (value - l).abs() < tol);
    assert!(
        near && a.without(range) == b.without(range),
        "code {code}: fixed {a} float {b} at {value}"
    );
}

/// Worst absolute error and where it occurred.
#[derive(Default, Debug)]
struct Worst {
    error: f64,
    code: u32,
    compared: u32,
}

impl Worst {
    fn add(&mut self, code: u32, fixed: f64, float: f64) {
        self.compared += 1;
        let e = (fixed - float).abs();
        if e > self.error {
            self.error = e;
            self.code = code;
        }
    }
}

fn rtd_case(cfg: RtdConfig) -> Worst {
    let fixed = rtd::fixed::Rtd::new(&cfg).unwrap();
    let float = rtd::float::Rtd::<f64>::new(&cfg).unwrap();
    let mut w = Worst::default();
    for code in 0..=u16::MAX as u32 {
        let a = fixed.read(code);
        let b = float.read(code);
        let limits = [fx::to_f64(cfg.range_min_k), fx::to_f64(cfg.range_max_k)];
        same_flags(a.status, b.status, b.temperature_k, limits, 1e-4, code);
        if !a.status.intersects(VALUE_INVALID) {
            w.add(code, fx::to_f64(a.temperature_k), b.temperature_k);
        }
    }
    w
}

#[test]
fn rtd_every_code() {
    // Pt100 2-wire with 0.8 Ω of leads and self-heating at 1 mA, 0.1 K/mW
    // (invented sensor), besides the plain circuits.
    let mut corrected = RtdConfig::new(100.0, Circuit::Ratiometric, 16, 400.0).unwrap();
    corrected.front_end.lead_ohms = fx::Resistance::saturating_from_num(0.8);
    corrected.front_end.excitation = fx::Coefficient::from_num(1e-3);
    corrected.front_end.self_heating_k_per_mw = fx::Coefficient::from_num(0.1);
    let mut divider_heated = RtdConfig::new(1000.0, Circuit::DividerLow, 16, 4990.0).unwrap();
    divider_heated.front_end.excitation = fx::Coefficient::from_num(3.3);
    divider_heated.front_end.self_heating_k_per_mw = fx::Coefficient::from_num(0.2);
    let cfg = |r0, c, r| RtdConfig::new(r0, c, 16, r).unwrap();
    for (name, cfg) in [
        ("Pt100 series 400", cfg(100.0, Circuit::Ratiometric, 400.0)),
        (
            "Pt1000 series 4020",
            cfg(1000.0, Circuit::Ratiometric, 4020.0),
        ),
        (
            "Pt100 low divider 1000",
            cfg(100.0, Circuit::DividerLow, 1000.0),
        ),
        (
            "Pt1000 high divider 2000",
            cfg(1000.0, Circuit::DividerHigh, 2000.0),
        ),
        ("Pt100 series, leads, self-heating", corrected),
        ("Pt1000 low divider 4990, self-heating", divider_heated),
    ] {
        let w = rtd_case(cfg);
        println!(
            "RTD {name}: worst {:.2e} K at code {} ({} codes)",
            w.error, w.code, w.compared
        );
        assert!(w.compared > 20_000);
        // Target 0.001 °C; bound asserted with margin over the measured figure.
        assert!(w.error < 3e-5, "{w:?}");
    }
}

fn ntc_case(cfg: NtcConfig) -> Worst {
    let fixed = ntc::fixed::Ntc::new(&cfg).unwrap();
    let float = ntc::float::Ntc::<f64>::new(&cfg).unwrap();
    let mut w = Worst::default();
    for code in 0..=u16::MAX as u32 {
        let a = fixed.read(code);
        let b = float.read(code);
        let limits = [fx::to_f64(cfg.range_min_k), fx::to_f64(cfg.range_max_k)];
        same_flags(a.status, b.status, b.temperature_k, limits, 1e-4, code);
        if !a.status.intersects(VALUE_INVALID) {
            w.add(code, fx::to_f64(a.temperature_k), b.temperature_k);
        }
    }
    w
}

#[test]
fn ntc_every_code() {
    let beta = NtcConfig::beta(10_000.0, 298.15, 3950.0).unwrap();
    let sh = NtcConfig::steinhart_hart(1.129148e-3, 2.34125e-4, 8.76741e-8).unwrap();
    let cfg = |m, c, r| NtcConfig::new(m, c, 16, r).unwrap();
    // 10 kΩ divider at 3.3 V with a 1.5 mW/K dissipation constant and 2 Ω of
    // leads (invented).
    let mut heated = cfg(beta, Circuit::DividerLow, 10_000.0);
    heated.front_end.excitation = fx::Coefficient::from_num(3.3);
    heated.front_end.self_heating_k_per_mw = fx::Coefficient::from_num(1.0 / 1.5);
    heated.front_end.lead_ohms = fx::Resistance::saturating_from_num(2.0);
    for (name, cfg) in [
        (
            "beta 3950 low divider 10k",
            cfg(beta, Circuit::DividerLow, 10_000.0),
        ),
        (
            "beta 3950 high divider 10k",
            cfg(beta, Circuit::DividerHigh, 10_000.0),
        ),
        (
            "Steinhart-Hart low divider 10k",
            cfg(sh, Circuit::DividerLow, 10_000.0),
        ),
        (
            "Steinhart-Hart series 2M",
            cfg(sh, Circuit::Ratiometric, 2_000_000.0),
        ),
        ("beta 3950, leads, self-heating", heated),
    ] {
        let w = ntc_case(cfg);
        println!(
            "NTC {name}: worst {:.2e} K at code {} ({} codes)",
            w.error, w.code, w.compared
        );
        assert!(w.compared > 20_000);
        assert!(w.error < 3e-5, "{w:?}");
    }
}

#[test]
fn bridge_every_code() {
    use isochor_core::sensor::PressureKind;
    use isochor_core::sensor::bridge::{self, BridgeConfig};
    // An invented 0–300 bar gauge transducer on a bipolar 16-bit converter:
    // zero 1 % of the range, span 80 %, with temperature coefficients and a
    // linearity correction of realistic size.
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
    let mut unipolar = cfg;
    unipolar.bipolar = false;
    let full_scale = 300e5;
    for cfg in [cfg, unipolar] {
        let fixed = bridge::fixed::Bridge::new(&cfg).unwrap();
        let float = bridge::float::Bridge::<f64>::new(&cfg).unwrap();
        let (lo, hi) = cfg.rails();
        let baro = fx::Pressure::from_num(97_000);
        let limits = [-0.02 * full_scale, 1.02 * full_scale];
        for t_c in [-40.0, 25.0, 85.0] {
            let t = fx::Temperature::from_num(273.15 + t_c);
            let mut w = Worst::default();
            for code in lo..=hi {
                let a = fixed.read(code, t, baro);
                let b = float.read(code, fx::to_f64(t), fx::to_f64(baro)).unwrap();
                same_flags(a.status, b.status, b.gauge_pa, limits, 1.0, code as u32);
                if !a.status.intersects(VALUE_INVALID) {
                    w.add(code as u32, fx::to_f64(a.gauge_pa), b.gauge_pa);
                    let e = (fx::to_f64(a.pressure_pa) - b.pressure_pa).abs();
                    assert!(e <= w.error.max(0.07) + 1e-6, "code {code}: {a:?} {b:?}");
                }
            }
            println!(
                "bridge bipolar={} at {t_c} C: worst {:.2e} of full scale at code {} ({} codes)",
                cfg.bipolar,
                w.error / full_scale,
                w.code as i32,
                w.compared
            );
            assert!(w.compared > 40_000);
            assert!(w.error / full_scale < 1e-6, "{w:?}");
        }
    }
}

#[test]
fn loop_every_code() {
    use isochor_core::sensor::PressureKind;
    use isochor_core::sensor::current_loop::{self, LoopConfig};
    use isochor_core::time::Millis;
    // An invented 0–300 bar gauge transmitter, 150 Ω shunt, 16-bit converter
    // with a 3.3 V reference (22 mA full scale).
    let cfg =
        LoopConfig::new(16, 3.3, 150.0, 0.0, 300e5, PressureKind::Gauge, Millis(500)).unwrap();
    let fixed = current_loop::fixed::Loop::new(&cfg).unwrap();
    let float = current_loop::float::Loop::<f64>::new(&cfg).unwrap();
    let baro = fx::Pressure::from_num(101_325);
    let full_scale = 300e5;
    let (mut wi, mut wp) = (Worst::default(), Worst::default());
    let mut band_edges = 0;
    for code in 0..=u16::MAX as u32 {
        let (ia, sa) = fixed.current(code);
        let (ib, sb) = float.current(code);
        assert_eq!(sa, sb);
        wi.add(code, fx::to_f64(ia), ib);
        let (ba, a) = fixed.convert_current(ia, baro);
        let (bb, b) = float.convert_current(ib, fx::to_f64(baro)).unwrap();
        if ba != bb {
            // Only where the current lies within one fixed-point step of a boundary.
            band_edges += 1;
            assert!(
                [3.6, 3.8, 20.5, 21.0].iter().any(|e| (ib - e).abs() < 1e-7),
                "code {code}"
            );
            continue;
        }
        assert_eq!(a.status, b.status, "code {code}");
        wp.add(code, fx::to_f64(a.gauge_pa), b.gauge_pa);
    }
    println!(
        "loop: current worst {:.2e} mA, pressure worst {:.2e} of full scale ({} band-edge codes)",
        wi.error,
        wp.error / full_scale,
        band_edges
    );
    assert!(wi.error < 1e-7);
    assert!(wp.error / full_scale < 1e-6, "{wp:?}");
}

#[test]
fn resistance_inputs_agree_between_paths() {
    // Resistances given directly (leads included): 20 000 log-spaced values
    // from 1 Ω to 10 MΩ through both paths, with 2-wire leads configured.
    let mut rtd_cfg = RtdConfig::new(100.0, Circuit::Ratiometric, 16, 400.0).unwrap();
    rtd_cfg.front_end.lead_ohms = fx::Resistance::saturating_from_num(0.7);
    let model = NtcConfig::beta(10_000.0, 298.15, 3950.0).unwrap();
    let mut ntc_cfg = NtcConfig::new(model, Circuit::DividerLow, 16, 10_000.0).unwrap();
    ntc_cfg.front_end.lead_ohms = fx::Resistance::saturating_from_num(2.0);
    let (ri, rf) = (
        rtd::fixed::Rtd::new(&rtd_cfg).unwrap(),
        rtd::float::Rtd::<f64>::new(&rtd_cfg).unwrap(),
    );
    let (ni, nf) = (
        ntc::fixed::Ntc::new(&ntc_cfg).unwrap(),
        ntc::float::Ntc::<f64>::new(&ntc_cfg).unwrap(),
    );
    let (mut wr, mut wn) = (Worst::default(), Worst::default());
    for i in 0..20_000u32 {
        let ohms = fx::to_f64(fx::Resistance::saturating_from_num(
            10f64.powf(i as f64 * 7.0 / 20_000.0),
        ));
        let q = fx::Resistance::saturating_from_num(ohms);
        let (a, b) = (ri.read_ohms(q), rf.read_ohms(ohms).unwrap());
        let limits = [
            fx::to_f64(rtd_cfg.range_min_k),
            fx::to_f64(rtd_cfg.range_max_k),
        ];
        same_flags(a.status, b.status, b.temperature_k, limits, 1e-4, i);
        wr.add(i, fx::to_f64(a.temperature_k), b.temperature_k);
        let (a, b) = (ni.read_ohms(q), nf.read_ohms(ohms).unwrap());
        let limits = [
            fx::to_f64(ntc_cfg.range_min_k),
            fx::to_f64(ntc_cfg.range_max_k),
        ];
        same_flags(a.status, b.status, b.temperature_k, limits, 1e-4, i);
        wn.add(i, fx::to_f64(a.temperature_k), b.temperature_k);
    }
    println!(
        "resistance inputs: RTD worst {:.2e} K, NTC worst {:.2e} K",
        wr.error, wn.error
    );
    assert!(wr.error < 3e-5 && wn.error < 3e-5, "{wr:?} {wn:?}");
}
