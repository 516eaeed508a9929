//! GERG-2008 against an independent implementation and the limits of the
//! mixing rules.
//!
//! Source of the reference values: teqp 0.23.1 (PyPI; model
//! "GERG2008resid"), exported by `host-sim/eos/tools/export_gerg.py` into
//! `tests/data/teqp_gerg_points.csv` (400 random compositions of 1–6 of the
//! 21 components, 200–450 K, densities up to 1.2 times the reducing density)
//! and `tests/data/teqp_gerg_dew.csv` (dew points of argon + carbon dioxide
//! and methane + propane from teqp's isotherm traces of the binary
//! vapour–liquid equilibrium). Loose check: CoolProp 8.0.0's mixture model
//! (`tests/data/coolprop_mixture_points.csv`, `coolprop_mixture_dew.csv`),
//! which is not GERG-2008.

use isochor_eos::composition::{Component, Composition};
use isochor_eos::gerg::{Branch, Gerg, stability};
use proptest::prelude::*;

fn data(name: &str) -> Vec<Vec<String>> {
    let path = format!("{}/../../tests/data/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    text.lines()
        .skip(1)
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect()
}

fn composition(names: &str, fractions: &str) -> (Composition, Vec<f64>) {
    let pairs: Vec<(Component, f64)> = names
        .split('+')
        .zip(fractions.split('+'))
        .map(|(n, f)| (Component::from_name(n).unwrap(), f.parse().unwrap()))
        .collect();
    let c = Composition::new(&pairs).unwrap();
    let x = c.parts().iter().map(|p| p.1).collect();
    (c, x)
}

#[test]
fn residual_and_fugacities_match_teqp() {
    // Tolerance: 1e-9 of max(1, |value|) for the αʳ derivatives and 1e-8
    // for ln φ — both implementations evaluate the same equation in double
    // precision; teqp differentiates with automatic differentiation.
    let (mut worst_a, mut worst_phi, mut n) = (0.0f64, 0.0f64, 0);
    for r in data("teqp_gerg_points.csv") {
        let (c, x) = composition(&r[0], &r[1]);
        let t: f64 = r[2].parse().unwrap();
        let rho: f64 = r[3].parse().unwrap();
        let g = Gerg::new(&c);
        let a = g.residual(&g.tau_cache(t), rho);
        let ours = [a.a00, a.a01, a.a02, a.a10, a.a11, a.a20];
        for (k, v) in ours.iter().enumerate() {
            let want: f64 = r[4 + k].parse().unwrap();
            let e = (v - want).abs() / want.abs().max(1.0);
            worst_a = worst_a.max(e);
            assert!(
                e < 1e-9,
                "{} {} at {t} K, {rho} mol/m³: a{k} {v} vs teqp {want}",
                r[0],
                r[1]
            );
        }
        if !r[10].is_empty() {
            let (lnphi, _) = g.ln_fugacity_coefficients(&x, rho, t);
            // teqp's order is the file's; ours is GERG order: match by name.
            let names: Vec<&str> = r[0].split('+').collect();
            for (name, want) in names.iter().zip(r[10].split('+')) {
                let want: f64 = want.parse().unwrap();
                if !want.is_finite() || want.abs() > 700.0 {
                    // teqp: no real fugacity coefficient (negative p·φ), or
                    // φ under- or overflowed.
                    continue;
                }
                let i = c
                    .parts()
                    .iter()
                    .position(|p| p.0 == Component::from_name(name).unwrap())
                    .unwrap();
                let e = (lnphi[i] - want).abs() / want.abs().max(1.0);
                worst_phi = worst_phi.max(e);
                assert!(
                    e < 1e-8,
                    "{} at {t} K, {rho}: ln φ({name}) {} vs teqp {want}",
                    r[1],
                    lnphi[i]
                );
            }
        }
        n += 1;
    }
    assert_eq!(n, 400);
    eprintln!(
        "teqp: worst αʳ derivative {worst_a:.1e}, worst ln φ {worst_phi:.1e} over {n} states"
    );
}

#[test]
fn dew_points_match_teqp_vle() {
    // The tangent-plane test's onset of instability is the dew point.
    // Tolerance 1e-4 of the dew pressure (the bisection's own is 1e-5).
    let mut worst = 0.0f64;
    let rows = data("teqp_gerg_dew.csv");
    assert!(rows.len() > 40);
    for r in rows {
        let first = Component::from_name(&r[1]).unwrap();
        let second = Component::from_name(&r[2]).unwrap();
        let t: f64 = r[3].parse().unwrap();
        let y: f64 = r[4].parse().unwrap();
        let want: f64 = r[5].parse().unwrap();
        let c = Composition::new(&[(first, y), (second, 1.0 - y)]).unwrap();
        let g = Gerg::new(&c);
        let p = stability::dew_pressure(&g, t, 70e6, 40, 1e-5).unwrap_or(f64::NAN);
        let e = (p / want - 1.0).abs();
        worst = worst.max(e);

        assert!(
            e < 1e-4,
            "{} y={y} at {t} K: dew {} bar vs teqp {} bar",
            r[0],
            p / 1e5,
            want / 1e5
        );
    }
    eprintln!("dew points vs teqp: worst {worst:.1e}");
}

#[test]
fn dew_points_agree_loosely_with_coolprop() {
    // CoolProp 8.0.0's mixture model (its pure fluids' reference equations
    // with GERG-2008's binary parameters; tests/data/coolprop_mixture_dew.csv)
    // is not GERG-2008: tolerance 3 % of the dew pressure.
    let rows = data("coolprop_mixture_dew.csv");
    assert!(rows.len() >= 6);
    let mut worst = 0.0f64;
    for r in rows {
        let first = Component::from_name(&r[0]).unwrap();
        let second = Component::from_name(&r[1]).unwrap();
        let t: f64 = r[2].parse().unwrap();
        let y: f64 = r[3].parse().unwrap();
        let want: f64 = r[4].parse().unwrap();
        let g = Gerg::new(&Composition::new(&[(first, y), (second, 1.0 - y)]).unwrap());
        let p = stability::dew_pressure(&g, t, 70e6, 40, 1e-5).unwrap_or(f64::NAN);
        let e = (p / want - 1.0).abs();
        worst = worst.max(e);
        assert!(
            e < 0.03,
            "{first}+{second} y={y} at {t} K: {p} vs CoolProp {want}"
        );
    }
    eprintln!("dew points vs CoolProp: worst {worst:.1e}");
}

#[test]
fn densities_agree_loosely_with_coolprop() {
    // CoolProp 8.0.0's mixture model is not GERG-2008 (pure-fluid reference
    // equations): the issue measured 0.4 % (argon–CO2 82/18) and 1 %
    // (helium–oxygen 21/79) at 200–300 bar. Tolerance: 1.5 %.
    let mut worst = 0.0f64;
    for r in data("coolprop_mixture_points.csv") {
        let c = Composition::parse(&r[0].replace(';', ",")).unwrap();
        let t: f64 = r[1].parse().unwrap();
        let p: f64 = r[2].parse().unwrap();
        let want: f64 = r[3].parse().unwrap();
        let g = Gerg::new(&c);
        let s = g.solve(&g.tau_cache(t), p, Branch::Gas, 0.0).unwrap();
        let e = (s.density_mol_m3 / want - 1.0).abs();
        worst = worst.max(e);
        assert!(
            e < 0.015,
            "{} at {t} K {p} Pa: {} vs CoolProp {want}",
            r[0],
            s.density_mol_m3
        );
    }
    eprintln!("CoolProp mixtures: worst density difference {worst:.2e}");
}

#[test]
fn ideal_gas_limit_and_a_component_alone() {
    let c = Composition::parse("argon=82%,carbon_dioxide=18%").unwrap();
    let g = Gerg::new(&c);
    for t in [220.0, 288.15, 400.0] {
        let s = g.solve(&g.tau_cache(t), 1.0, Branch::Gas, 0.0).unwrap();
        assert!((s.z - 1.0).abs() < 1e-6, "{t}: {}", s.z);
    }
    // A binary with a vanishing second component tends to the first alone.
    for (a, b) in [
        (Component::Argon, Component::CarbonDioxide),
        (Component::Methane, Component::Propane),
    ] {
        let pure = Gerg::new(&Composition::new(&[(a, 1.0)]).unwrap());
        let near = Gerg::new(&Composition::new(&[(a, 1.0 - 1e-9), (b, 1e-9)]).unwrap());
        let t = 300.0;
        let zp = pure
            .solve(&pure.tau_cache(t), 100e5, Branch::Gas, 0.0)
            .unwrap()
            .z;
        let zn = near
            .solve(&near.tau_cache(t), 100e5, Branch::Gas, 0.0)
            .unwrap()
            .z;
        assert!((zp - zn).abs() < 1e-8, "{a}: {zp} vs {zn}");
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    /// Swapping the order in which components are given changes nothing:
    /// the same composition, fingerprint and αʳ (to rounding).
    #[test]
    fn component_order_does_not_matter(
        picks in proptest::sample::subsequence((0..21usize).collect::<Vec<_>>(), 2..6),
        weights in proptest::collection::vec(0.05f64..1.0, 6),
        t in 220.0f64..400.0, p in 1e5f64..300e5,
    ) {
        let total: f64 = picks.iter().enumerate().map(|(i, _)| weights[i]).sum();
        let pairs: Vec<(Component, f64)> = picks.iter().enumerate()
            .map(|(i, &k)| (Component::ALL[k], weights[i] / total)).collect();
        let mut rev = pairs.clone();
        rev.reverse();
        let a = Composition::new(&pairs).unwrap();
        let b = Composition::new(&rev).unwrap();
        prop_assert_eq!(a.fingerprint(), b.fingerprint());
        let (ga, gb) = (Gerg::new(&a), Gerg::new(&b));
        let ra = ga.residual(&ga.tau_cache(t), p / (8.314 * t));
        let rb = gb.residual(&gb.tau_cache(t), p / (8.314 * t));
        // Equal but for the rounding of the normalisation (sums in another
        // order).
        for (u, v) in [(ra.a00, rb.a00), (ra.a01, rb.a01), (ra.a02, rb.a02), (ra.a10, rb.a10), (ra.a11, rb.a11), (ra.a20, rb.a20)] {
            prop_assert!((u - v).abs() <= 1e-11 * u.abs().max(1e-3), "{} vs {}", u, v);
        }
        // The general evaluation (fugacities) takes the components in any
        // order: the same ln φ per component when the order is reversed.
        let x: Vec<f64> = a.parts().iter().map(|q| q.1).collect();
        let (phi, z) = ga.ln_fugacity_coefficients(&x, p / (8.314 * t), t);
        prop_assert!((z - (1.0 + ra.a01)).abs() < 1e-10 * z.abs().max(1.0), "{} vs {}", z, 1.0 + ra.a01);
        if z > 0.0 {
            prop_assert!(phi.iter().all(|v| v.is_finite()));
        }
    }
}
