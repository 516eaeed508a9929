//! GERG-2008 against published check values.
//!
//! Source: the example output published with NIST's AGA8 reference code
//! (GERG2008 module; AGA Report No. 8 Part 2, 2017): the 21-component gas
//! below at 400 K and 50 000 kPa. The same values are repeated in the tests
//! of the `aga8` crate 0.6.1 (`tests/gerg-tests.rs`). Tolerances: 1e-9
//! relative (both evaluate the same formulas in double precision).

use isochor_eos::composition::{Component as C, Composition};
use isochor_eos::gerg::{Branch, Gerg};

fn nist_gas() -> Composition {
    Composition::new(&[
        (C::Methane, 0.77824),
        (C::Nitrogen, 0.02),
        (C::CarbonDioxide, 0.06),
        (C::Ethane, 0.08),
        (C::Propane, 0.03),
        (C::Isobutane, 0.0015),
        (C::NButane, 0.003),
        (C::Isopentane, 0.0005),
        (C::NPentane, 0.00165),
        (C::NHexane, 0.00215),
        (C::NHeptane, 0.00088),
        (C::NOctane, 0.00024),
        (C::NNonane, 0.00015),
        (C::NDecane, 0.00009),
        (C::Hydrogen, 0.004),
        (C::Oxygen, 0.005),
        (C::CarbonMonoxide, 0.002),
        (C::Water, 0.0001),
        (C::HydrogenSulfide, 0.0025),
        (C::Helium, 0.007),
        (C::Argon, 0.001),
    ])
    .unwrap()
}

fn close(what: &str, got: f64, want: f64, rel: f64) {
    assert!(
        (got / want - 1.0).abs() <= rel,
        "{what}: {got} vs published {want} ({:.2e})",
        (got / want - 1.0).abs()
    );
}

#[test]
fn aga8_part2_21_component_gas_at_400_k_50_mpa() {
    let g = Gerg::new(&nist_gas());
    close(
        "molar mass g/mol",
        g.molar_mass_kg_mol() * 1000.0,
        20.5427445016,
        1e-12,
    );
    let t = 400.0;
    let tc = g.tau_cache(t);
    let s = g.solve(&tc, 50.0e6, Branch::Gas, 0.0).unwrap();
    close(
        "density mol/l",
        s.density_mol_m3 / 1000.0,
        12.79828626082062,
        1e-10,
    );
    close("Z", s.z, 1.174690666383717, 1e-10);
    // dP/dρ in kPa per mol/l is Pa per mol/m³.
    close("dp/drho", s.dp_drho, 7000.694030193327, 1e-9);
    close("dp/dT kPa/K", s.dp_dt / 1000.0, 235.9832292593096, 1e-9);
    let c = g.caloric(s.density_mol_m3, t);
    close("u J/mol", c.u_j_mol, -2746.49290121253, 1e-9);
    close("h J/mol", c.h_j_mol, 1160.280160510973, 1e-9);
    close("cv", c.cv_j_mol_k, 39.02948218156372, 1e-9);
    close("cp", c.cp_j_mol_k, 58.45522051000366, 1e-9);
    close("w m/s", c.speed_of_sound_m_s, 714.4248840596024, 1e-9);
    let (sj, gj) = g.entropy_gibbs(s.density_mol_m3, t);
    close("s", sj, -38.57590392409089, 1e-9);
    close("g", gj, 16590.64173014733, 1e-9);
}
