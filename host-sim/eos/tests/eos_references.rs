//! The reference equations of state against published values (each check
//! names its source).

use isochor_core::Gas;
use isochor_eos::Eos;

#[test]
fn nist_hydrogen_density_correlation_check_values() {
    // Lemmon, Huber, Leachman, "Revised Standardized Equation for Hydrogen Gas
    // Densities for Fuel Consumption Applications", J. Res. NIST 113(6):341
    // (2008), check values of the correlation (itself fitted to the
    // Leachman et al. 2009 reference equation): Z(300 K, 10 MPa) = 1.05985282,
    // Z(400 K, 50 MPa) = 1.24304763. The correlation reproduces the reference
    // equation within 0.01 % over 200-1000 K, up to 200 MPa.
    let h2 = Eos::of(Gas::Hydrogen);
    for (t, p, z) in [(300.0, 10e6, 1.059_852_82), (400.0, 50e6, 1.243_047_63)] {
        let s = h2.state(p, t).unwrap();
        assert!((s.z / z - 1.0).abs() < 1e-4, "{t} K {p} Pa: {} vs {z}", s.z);
    }
}

#[test]
fn sae_j2601_hydrogen_densities_at_15c() {
    // SAE J2601 (fuelling protocols for light-duty gaseous hydrogen vehicles):
    // density of hydrogen at 15 °C is 24.0 g/L at 35 MPa and 40.2 g/L at
    // 70 MPa (values given to 0.1 g/L; the 100 % state-of-charge densities,
    // edition not checked, from memory).
    let h2 = Eos::of(Gas::Hydrogen);
    for (p, rho) in [(35e6, 24.0), (70e6, 40.2)] {
        let s = h2.state(p, 288.15).unwrap();
        assert!(
            (s.density_kg_m3 - rho).abs() <= 0.05,
            "{p}: {}",
            s.density_kg_m3
        );
    }
}

#[test]
fn ideal_gas_limit_and_monotonicity() {
    // Common practice: every real-gas EOS reduces to the ideal gas as p -> 0,
    // and density rises with pressure and falls with temperature in the gas.
    for g in Gas::ALL {
        let e = Eos::of(g);
        let s = e.state(1.0, 300.0).unwrap();
        assert!((s.z - 1.0).abs() < 1e-6, "{g}: {}", s.z);
        let mut last = 0.0;
        for p in [1e4, 1e5, 1e6, 5e6, 1e7, 3e7] {
            if let Ok(s) = e.state(p, 300.0) {
                assert!(s.density_kg_m3 > last, "{g} at {p}");
                assert!(s.drho_dp_mol_m3_pa > 0.0 && s.drho_dt_mol_m3_k < 0.0, "{g}");
                last = s.density_kg_m3;
            }
        }
    }
}
