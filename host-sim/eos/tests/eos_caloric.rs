//! The ideal-gas part of the reference equations of state: caloric
//! properties against CoolProp 8.0.0.

use isochor_core::Gas;
use isochor_eos::Eos;

/// Internal energy, enthalpy, heat capacities and speed of sound computed by
/// CoolProp 8.0.0 (PropsSI, HEOS backend), committed by
/// `host-sim/eos/tools/export_eos.py`.
const POINTS: &str = include_str!("../../../tests/data/coolprop_caloric.csv");

#[test]
fn caloric_properties_match_coolprop_8() {
    let mut worst = [0.0f64; 5];
    let mut count = [0usize; 13];
    for line in POINTS.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let gas = Gas::from_name(f[0]).unwrap();
        let v: Vec<f64> = f[1..].iter().map(|x| x.parse().unwrap()).collect();
        let (t, p) = (v[0], v[1]);
        let eos = Eos::of(gas);
        let s = eos.state(p, t).unwrap();
        let c = eos.caloric(s.density_mol_m3, t);
        // u and h are compared against R·T (their scale: absolute values
        // depend on the reference state and can pass through zero); heat
        // capacities and the speed of sound relatively.
        let rt = eos.gas_constant * t;
        let errs = [
            (c.u_j_mol - v[2]).abs() / rt,
            (c.h_j_mol - v[3]).abs() / rt,
            (c.cv_j_mol_k / v[4] - 1.0).abs(),
            (c.cp_j_mol_k / v[5] - 1.0).abs(),
            (c.speed_of_sound_m_s / v[6] - 1.0).abs(),
        ];
        let names = ["u", "h", "cv", "cp", "w"];
        for (i, e) in errs.iter().enumerate() {
            assert!(*e <= 1e-7, "{gas} {p} Pa {t} K: {} off by {e:e}", names[i]);
            worst[i] = worst[i].max(*e);
        }
        assert!((c.pressure_pa / p - 1.0).abs() < 1e-9);
        count[Gas::ALL.iter().position(|&g| g == gas).unwrap()] += 1;
    }
    assert!(count.iter().all(|&c| c >= 15), "{count:?}");
    eprintln!(
        "vs CoolProp 8.0.0: u {:.1e}·RT, h {:.1e}·RT, cv {:.1e}, cp {:.1e}, w {:.1e}",
        worst[0], worst[1], worst[2], worst[3], worst[4]
    );
}

/// Low-pressure limits of monatomic and diatomic gases: c_p → 5R/2 and 7R/2
/// near room temperature (kinetic theory, equipartition; handbook values of
/// c_p/R at 300 K: argon 2.50, nitrogen 3.50; from memory).
#[test]
fn ideal_gas_limits() {
    for (gas, want) in [(Gas::Argon, 2.5), (Gas::Helium, 2.5), (Gas::Nitrogen, 3.5)] {
        let eos = Eos::of(gas);
        let s = eos.state(1e3, 300.0).unwrap();
        let c = eos.caloric(s.density_mol_m3, 300.0);
        let cp_r = c.cp_j_mol_k / eos.gas_constant;
        assert!((cp_r - want).abs() < 0.01, "{gas}: cp/R = {cp_r}");
    }
}
