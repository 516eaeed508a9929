//! The built-in device gas models against the reference equations of state
//! (host-sim/eos/data, exported from CoolProp 8.0.0 and tested against it in
//! host-sim/eos/tests/eos_coolprop.rs), in fixed point and in f64, over the
//! envelope of each table; plus limits and monotonicity (common practice) and
//! the SAE J2601 rated state of hydrogen.

use isochor_core::content::{fixed, float};
use isochor_core::model::{Compressibility, CompressibilityFx, DeviceModel, ZPoint};
use isochor_core::{Gas, Setup, SetupFx, Status, Tank, fx};
use isochor_eos::Eos;

/// Bound asserted per gas on the relative density error (fixed and f64),
/// from the issue's target; measured values are in docs/gases.md ("isochor model
/// check").
fn bound(_gas: Gas) -> f64 {
    1e-4
}

#[test]
fn device_matches_reference_over_each_table() {
    for gas in Gas::ALL {
        let m = DeviceModel::builtin(gas).unwrap();
        let eos = Eos::of(gas);
        let r = m.table().range();
        let (mut worst, mut worst_f, mut n) = (0.0f64, 0.0f64, 0);
        for i in 0..=50 {
            let t = r.temperature_min_k
                + (r.temperature_max_k - r.temperature_min_k) * (i as f64 + 0.37) / 51.0;
            for j in 0..=120 {
                let p = r.pressure_max_pa * (j as f64 + 0.41) / 121.0;
                let (pf, tf) = (fx::Pressure::from_num(p), fx::Temperature::from_num(t));
                let a = m.z_fx(pf, tf);
                if !a.flags.is_ok() {
                    // Liquid, two-phase or beyond the table's density limit:
                    // flagged, not a number to compare.
                    continue;
                }
                let (p, t) = (fx::to_f64(pf), fx::to_f64(tf));
                let s = eos
                    .state(p, t)
                    .unwrap_or_else(|e| panic!("{gas} {p} {t}: unflagged {e}"));
                let b: ZPoint<f64> = m.z(p, t);
                worst = worst.max((s.z_eff / fx::to_f64(a.z) - 1.0).abs());
                worst_f = worst_f.max((s.z_eff / b.z - 1.0).abs());
                n += 1;
            }
        }
        assert!(n > 1000, "{gas}: only {n} states covered");
        assert!(worst <= bound(gas), "{gas}: fixed {worst:e}");
        assert!(worst_f <= bound(gas), "{gas}: f64 {worst_f:e}");
        eprintln!("{gas:<15} fixed {worst:.2e}  f64 {worst_f:.2e}  ({n} states)");
    }
}

#[test]
fn z_tends_to_the_ideal_gas_at_low_pressure() {
    // Common practice: Z -> 1 as p -> 0. The effective Z tends to
    // R_eos/R_CODATA, within 1.5e-5 of one for every gas here (oxygen:
    // R = 8.31434 J/(mol K) in Schmidt & Wagner 1985).
    for gas in Gas::ALL {
        let m = DeviceModel::builtin(gas).unwrap();
        let ratio = Eos::of(gas).gas_constant / isochor_core::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
        assert!((ratio - 1.0).abs() < 1.5e-5);
        for t in [240.0, 290.0, 350.0] {
            for p in [0.0, 1.0, 10.0] {
                let a = m.z_fx(fx::Pressure::from_num(p), fx::Temperature::from_num(t));
                // Within the model's accuracy (its minimax error is spread
                // over the whole table, low pressures included).
                assert!(
                    (fx::to_f64(a.z) - ratio).abs() < 5e-5,
                    "{gas} {p} {t}: {}",
                    a.z
                );
            }
        }
    }
}

#[test]
fn density_rises_with_pressure_and_falls_with_temperature() {
    // Common practice (mechanical and thermal stability of a single phase):
    // ∂ρ/∂p > 0 and, for a gas, ∂ρ/∂T < 0 at constant p. Checked on the
    // fixed-point density ρ ∝ p/(Z·T) of the device model.
    for gas in Gas::ALL {
        let m = DeviceModel::builtin(gas).unwrap();
        let r = m.table().range();
        let rho = |p: f64, t: f64| {
            let a = m.z_fx(fx::Pressure::from_num(p), fx::Temperature::from_num(t));
            (a.flags.is_ok()).then(|| p / (fx::to_f64(a.z) * t))
        };
        for i in 0..=20 {
            let t =
                r.temperature_min_k + (r.temperature_max_k - r.temperature_min_k) * i as f64 / 20.0;
            let mut last = 0.0;
            for j in 1..=200 {
                let p = r.pressure_max_pa * j as f64 / 200.0;
                if let Some(d) = rho(p, t) {
                    assert!(d > last, "{gas}: density falls with p at {p} Pa {t} K");
                    last = d;
                    if let Some(d2) = rho(p, t + 1.0) {
                        assert!(d2 < d, "{gas}: density rises with T at {p} Pa {t} K");
                    }
                }
            }
        }
    }
}

#[test]
fn sae_j2601_hydrogen_rated_state() {
    // SAE J2601: 40.2 g/L at 70 MPa and 15 °C is the full (100 % state of
    // charge) condition; 24.0 g/L at 35 MPa (the 100 % state-of-charge
    // densities of its H70 and H35 fuelling; edition not checked, from
    // memory). A tank rated 70 MPa at 15 °C
    // read at 70 MPa and 15 °C is exactly full, in both paths, with the device
    // model; the densities match J2601 to its 0.1 g/L.
    let setup = Setup::new(Gas::Hydrogen, Tank::new(0.1, 700e5));
    let m = DeviceModel::builtin(Gas::Hydrogen).unwrap();
    let f = float::Estimator::new(setup, m.clone()).unwrap();
    let x = fixed::Estimator::new(SetupFx::from_f64(&setup).unwrap(), m).unwrap();
    let a = f.estimate(700e5, 288.15).unwrap();
    let b = x.estimate(
        fx::Pressure::from_num(700e5),
        fx::Temperature::from_num(288.15),
    );
    assert!((a.fill_fraction - 1.0).abs() < 1e-12);
    assert!((fx::to_f64(b.fill_fraction) - 1.0).abs() < 1e-6);
    assert!(
        (a.density_kg_m3 - 40.2).abs() <= 0.05,
        "{}",
        a.density_kg_m3
    );
    assert!((fx::to_f64(b.density_kg_m3) - 40.2).abs() <= 0.05);
    let c = f.estimate(350e5, 288.15).unwrap();
    assert!(
        (c.density_kg_m3 - 24.0).abs() <= 0.05,
        "{}",
        c.density_kg_m3
    );
    assert!(a.status.is_ok() && b.status.is_ok());
}

#[test]
fn liquefiable_gases_flag_two_phase_and_liquid_full() {
    // Carbon dioxide at 15 °C saturates at 50.9 bar (CoolProp 8.0.0:
    // PropsSI("P","T",288.15,"Q",1,"CO2") = 5.0851e6 Pa); propane at 15 °C at
    // 7.3 bar (7.3e5 Pa, same source). Just above the vapour pressure:
    // two-phase; 1.5 times it (no vapour space left): liquid-full, a flag of
    // its own (the margin between them is 1/8 of the vapour pressure, see
    // LIQUID_FULL_MARGIN). The device model in both arithmetics and the
    // reference equation agree.
    let reference = |gas| isochor_eos::reference::ReferenceModel::new(gas).unwrap();
    for (gas, p_sat) in [(Gas::CarbonDioxide, 50.85e5), (Gas::Propane, 7.3e5)] {
        let m = DeviceModel::builtin(gas).unwrap();
        let r = reference(gas);
        let t = fx::Temperature::from_num(288.15);
        let flags = |p: f64| {
            [
                m.z_fx(fx::Pressure::from_num(p), t).flags,
                Compressibility::<f64>::z(&m, p, 288.15).flags,
                Compressibility::<f64>::z(&r, p, 288.15).flags,
            ]
        };
        for f in flags(p_sat * 1.01) {
            assert!(f.contains(Status::TWO_PHASE), "{gas}: {f}");
            assert!(!f.contains(Status::LIQUID_FULL), "{gas}: {f}");
        }
        for f in flags(p_sat * 1.5) {
            assert!(f.contains(Status::LIQUID_FULL), "{gas}: {f}");
            assert!(!f.contains(Status::TWO_PHASE), "{gas}: {f}");
            assert!(f.intersects(Status::CONTENT_INVALID));
        }
        for f in flags(p_sat * 0.5) {
            assert!(!f.intersects(Status::CONTENT_INVALID), "{gas}: {f}");
        }
        // The estimators refuse a rated condition that is liquid (two-phase
        // or liquid-full).
        for k in [1.05, 1.5] {
            let setup = Setup::new(gas, Tank::new(0.01, p_sat * k));
            assert!(float::Estimator::new(setup, m.clone()).is_err());
            let fx_setup = SetupFx::from_f64(&setup).unwrap();
            assert!(fixed::Estimator::new(fx_setup, m.clone()).is_err());
        }
    }
}
