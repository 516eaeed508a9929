//! The reference equations of state against values from outside the project.

use isochor_core::Gas;
use isochor_eos::Eos;

/// States computed by CoolProp 8.0.0 (PropsSI, HEOS backend), committed by
/// `host-sim/eos/tools/export_eos.py`.
const POINTS: &str = include_str!("../../../tests/data/coolprop_points.csv");

#[test]
fn every_gas_matches_coolprop_8() {
    let mut worst_rho = 0.0f64;
    let mut worst_z = 0.0f64;
    let mut worst_d = 0.0f64;
    let mut count = [0usize; 13];
    for line in POINTS.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let gas = Gas::from_name(f[0]).unwrap();
        let v: Vec<f64> = f[1..].iter().map(|x| x.parse().unwrap()).collect();
        let (t, p, rho, z, drdp, drdt) = (v[0], v[1], v[2], v[3], v[4], v[5]);
        let s = Eos::of(gas)
            .state(p, t)
            .unwrap_or_else(|e| panic!("{gas} {p} Pa {t} K: {e}"));
        let e_rho = (s.density_mol_m3 / rho - 1.0).abs();
        let e_z = (s.z - z).abs();
        let e_d = (s.drho_dp_mol_m3_pa / drdp - 1.0)
            .abs()
            .max((s.drho_dt_mol_m3_k - drdt).abs() / drdt.abs().max(1e-3));
        assert!(e_rho <= 1e-9, "{gas} {p} Pa {t} K: density {e_rho:e}");
        assert!(e_z <= 1e-7, "{gas} {p} Pa {t} K: Z {e_z:e}");
        assert!(e_d <= 1e-6, "{gas} {p} Pa {t} K: derivatives {e_d:e}");
        worst_rho = worst_rho.max(e_rho);
        worst_z = worst_z.max(e_z);
        worst_d = worst_d.max(e_d);
        count[Gas::ALL.iter().position(|&g| g == gas).unwrap()] += 1;
    }
    assert!(count.iter().all(|&c| c >= 40), "{count:?}");
    eprintln!(
        "vs CoolProp 8.0.0: density {worst_rho:.1e}, Z {worst_z:.1e}, derivatives {worst_d:.1e}"
    );
}
