//! The ideal-gas content estimate, both paths, against values and laws from
//! outside the project. Each check names its source.

use isochor_core::constants::{
    AVOGADRO_PER_MOL, BOLTZMANN_J_K, MOLAR_GAS_CONSTANT_J_MOL_K, STANDARD_ATMOSPHERE_PA,
};
use isochor_core::content::{fixed, float};
use isochor_core::model::Ideal;
use isochor_core::{Gas, Setup, SetupFx, StandardCondition, Tank, fx};

fn float_est(gas: Gas, cap: f64, rated: f64) -> float::Estimator<f64, Ideal> {
    float::Estimator::new(Setup::new(gas, Tank::new(cap, rated)), Ideal::new(gas)).unwrap()
}

fn fixed_est(gas: Gas, cap: f64, rated: f64) -> fixed::Estimator<Ideal> {
    let s = SetupFx::from_f64(&Setup::new(gas, Tank::new(cap, rated))).unwrap();
    fixed::Estimator::new(s, Ideal::new(gas)).unwrap()
}

/// Runs both paths; returns (float, fixed-as-f64) mass, amount and settled pressure.
fn both(gas: Gas, cap: f64, p: f64, t: f64) -> [(f64, f64); 3] {
    let a = float_est(gas, cap, 200e5).estimate(p, t).unwrap();
    let b = fixed_est(gas, cap, 200e5)
        .estimate(fx::Pressure::from_num(p), fx::Temperature::from_num(t));
    [
        (a.mass_kg, fx::to_f64(b.mass_kg)),
        (a.amount_mol, fx::to_f64(b.amount_mol)),
        (a.settled_pressure_pa, fx::to_f64(b.settled_pressure_pa)),
    ]
}

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

#[test]
fn codata_2018_constants() {
    // CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010): exact values.
    assert_eq!(BOLTZMANN_J_K, 1.380_649e-23);
    assert_eq!(AVOGADRO_PER_MOL, 6.022_140_76e23);
    // R = k_B·N_A = 8.314 462 618... J/(mol K), exact.
    assert!((BOLTZMANN_J_K * AVOGADRO_PER_MOL - MOLAR_GAS_CONSTANT_J_MOL_K).abs() < 1e-14);
    assert!((MOLAR_GAS_CONSTANT_J_MOL_K - 8.314_462_618).abs() < 1e-9);
}

#[test]
fn ideal_molar_volume_codata() {
    // CODATA 2018: molar volume of an ideal gas at 273.15 K, 101.325 kPa is
    // 22.413 969 54... L/mol; at 288.15 K it is R·T/p = 23.644 830 04 L/mol.
    for (t, expected_l) in [(273.15, 22.413_969_54), (288.15, 23.644_830_04)] {
        // A 1 m³ tank at exactly that condition holds 1/V_m mol (any gas).
        for gas in Gas::ALL {
            let [_, (n_float, n_fixed), _] = both(gas, 1.0, STANDARD_ATMOSPHERE_PA, t);
            let vm = 1000.0 / n_float;
            assert!((vm - expected_l).abs() < 1e-8, "{gas}: {vm}");
            assert!(
                rel(n_fixed, n_float) < 1e-6,
                "{gas}: fixed {n_fixed} float {n_float}"
            );
        }
    }
    // Standard volume of 1 mol at "normal" conditions is the same molar volume.
    let mut setup = Setup::new(Gas::Nitrogen, Tank::new(1.0, 200e5));
    setup.standard = StandardCondition::NORMAL;
    let e = float::Estimator::new(setup, Ideal::new(Gas::Nitrogen)).unwrap();
    let c = e.estimate(10e5, 300.0).unwrap();
    assert!(rel(c.standard_volume_m3 / c.amount_mol, 22.413_969_54e-3) < 1e-9);
}

#[test]
fn boyles_law() {
    // Boyle's law (fact of the trade): at constant temperature p·V is constant
    // for a fixed amount. Halving the volume at the same content doubles p.
    for gas in [Gas::Nitrogen, Gas::Helium, Gas::Hydrogen] {
        let [(m1, f1), ..] = both(gas, 0.05, 100e5, 293.15);
        let [(m2, f2), ..] = both(gas, 0.025, 200e5, 293.15);
        assert!(rel(m1, m2) < 1e-12);
        assert!(rel(f1, f2) < 2e-6, "{gas}: {f1} {f2}");
    }
}

#[test]
fn charles_law() {
    // Charles's law (fact of the trade): at constant pressure V/T is constant
    // for a fixed amount. 1.5 times T needs 1.5 times the volume for the same mass.
    for gas in [Gas::Nitrogen, Gas::Argon] {
        let [(m1, f1), ..] = both(gas, 0.05, 50e5, 250.0);
        let [(m2, f2), ..] = both(gas, 0.075, 50e5, 375.0);
        assert!(rel(m1, m2) < 1e-12);
        assert!(rel(f1, f2) < 2e-6);
    }
}

#[test]
fn avogadros_law() {
    // Avogadro's law (fact of the trade): equal volumes of ideal gases at the
    // same p and T hold the same amount of substance, whatever the gas.
    let [_, (n0, n0x), _] = both(Gas::Nitrogen, 0.05, 150e5, 300.0);
    for gas in Gas::ALL {
        let [_, (n, nx), _] = both(gas, 0.05, 150e5, 300.0);
        assert!(rel(n, n0) < 1e-12, "{gas}");
        assert!(rel(nx, n0x) < 2e-6, "{gas}");
    }
}

#[test]
fn pressure_change_per_kelvin_at_15c() {
    // Common practice figure for gauges: at constant content an ideal gas
    // changes pressure by 1/T ≈ 0.347 %/K at 15 °C (1/288.15 K = 0.3470 %).
    // Seen through the settled pressure: the same content 1 K warmer reads
    // 0.347 % higher than its settled (15 °C) pressure.
    let [.., (ps, psx)] = both(Gas::Nitrogen, 0.05, 200e5, 289.15);
    let per_k = 200e5 / ps - 1.0;
    assert!((per_k - 0.003_47).abs() < 0.000_005, "{per_k}");
    let per_k_fixed = 200e5 / psx - 1.0;
    assert!((per_k_fixed - per_k).abs() < 1e-6);
}

#[test]
fn nitrogen_cylinder_worked_example() {
    // Independent hand computation (ideal gas law, CODATA R, molar mass of
    // N2 28.01348 g/mol per Span et al. 2000): 50 L at 200 bar, 35 °C.
    let n = 200e5 * 0.05 / (8.314_462_618_153_24 * 308.15);
    let m = n * 0.028_013_48;
    let [(mf, mx), (nf, nx), (pf, px)] = both(Gas::Nitrogen, 0.05, 200e5, 308.15);
    assert!(rel(mf, m) < 1e-13 && rel(nf, n) < 1e-13);
    assert!(rel(mx, m) < 2e-6 && rel(nx, n) < 2e-6);
    // Settled to 15 °C: Gay-Lussac's law p/T constant.
    let ps = 200e5 * 288.15 / 308.15;
    assert!(rel(pf, ps) < 1e-12 && rel(px, ps) < 2e-6);
}
