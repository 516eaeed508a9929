//! The simulator's physics against outside facts: textbook results of
//! filling and emptying vessels, orifice flow, and conservation of mass and
//! energy; and the adaptive steps against short fixed ones.

use isochor_core::Gas;
use isochor_eos::Eos;
use isochor_tank::physics::{
    Blowdown, Cylinder, DAY_S, Draw, Fill, Leak, LeakSize, Manifold, Plant, Simulator, Vessel,
    Weather, ix, orifice_flux,
};

fn weather(mean_k: f64, swing_k: f64, sun: f64) -> Weather {
    Weather {
        mean_k,
        swing_k,
        swing_spread: 0.2,
        warmest_hour: 15.0,
        day_to_day_k: 1.5,
        pressure_pa: 101_325.0,
        sun_peak_w_m2: sun,
        sunrise_hour: 6.0,
        sunset_hour: 20.0,
        clearness_min: 0.5,
        fronts: Vec::new(),
    }
}

/// A rigid vessel that exchanges no heat.
fn adiabatic_vessel(v_m3: f64) -> Vessel {
    let (area, _) = Vessel::cylinder_areas(v_m3, 4.0);
    Vessel {
        water_capacity_m3: v_m3,
        elastic_per_pa: 0.0,
        thermal_per_k: 0.0,
        reference_k: 288.15,
        wall_heat_capacity_j_k: 1e4,
        inner_area_m2: area,
        outer_area_m2: area,
        inner_htc: 0.0,
        fill_htc: 0.0,
        outer_htc: 0.0,
        sun_area_m2: 0.0,
    }
}

fn plant(gas: Gas, vessel: Vessel, p0: f64, t0: f64) -> Plant {
    Plant {
        gas,
        vessel,
        weather: weather(t0, 0.0, 0.0),
        initial_pressure_pa: p0,
        initial_temperature_k: Some(t0),
        draws: vec![],
        leaks: vec![],
        blowdowns: vec![],
        fills: vec![],
        seed: 1,
        manifold: None,
    }
}

/// Adiabatic filling of a rigid vessel from a supply of constant state: the
/// energy balance gives m·u = m₀·u₀ + Δm·h_in, which for an ideal gas of
/// constant heat capacities is T = (m₀·T₀ + γ·Δm·T_in)/(m₀ + Δm); from an
/// empty vessel T = γ·T_in (uniform-flow analysis of the first law, e.g.
/// Çengel & Boles, "Thermodynamics: An Engineering Approach", ch. 5; from
/// memory). Argon (γ = 5/3 exactly for its ideal-gas part) and nitrogen
/// (γ ≈ 1.40 at room temperature; from memory) from a 1.6 bar supply, where the real
/// gas's enthalpy differs from the ideal gas's by about (B − T·dB/dT)·p:
/// 0.15 % for argon, 0.05 % for nitrogen (second virial coefficients of
/// handbook tables; from memory) — the tolerances allow for that.
#[test]
fn adiabatic_fill_of_an_empty_vessel_reaches_gamma_t_in() {
    for (gas, gamma, tol) in [(Gas::Argon, 5.0 / 3.0, 2e-3), (Gas::Nitrogen, 1.4, 4e-3)] {
        let mut p = plant(gas, adiabatic_vessel(1e-3), 100.0, 300.0);
        p.fills.push(Fill {
            start_s: 1.0,
            supply_pressure_pa: 1.6e5,
            supply_temperature_k: 300.0,
            area_m2: 0.2e-6,
            to_pressure_pa: 1.5e5,
            max_duration_s: 600.0,
        });
        let mut sim = Simulator::new(p).unwrap();
        let m0 = sim.truth(0.0).unwrap().mass_kg;
        let end = sim.truth(700.0).unwrap();
        let dm = end.mass_kg - m0;
        let want = (m0 * 300.0 + gamma * dm * 300.0) / (m0 + dm);
        let rel = (end.gas_k / want - 1.0).abs();
        eprintln!(
            "{gas}: filled to {:.4} bar, T = {:.2} K, γ·T_in formula {:.2} K ({rel:.1e}); m₀/m = {:.1e}",
            end.pressure_pa / 1e5,
            end.gas_k,
            want,
            m0 / end.mass_kg
        );
        assert!(rel < tol, "{gas}: {} K vs {want} K", end.gas_k);
        // The fill stopped at its target pressure.
        assert!(
            (end.pressure_pa / 1.5e5 - 1.0).abs() < 1e-4,
            "{}",
            end.pressure_pa
        );
        assert!(m0 / end.mass_kg < 2e-3);
    }
}

/// Adiabatic blow-down: what stays in the vessel expands isentropically,
/// T/T₀ = (p/p₀)^((γ−1)/γ) for an ideal gas (same reference; from memory).
#[test]
fn adiabatic_blowdown_follows_the_isentrope() {
    let mut p = plant(Gas::Nitrogen, adiabatic_vessel(10e-3), 3e5, 300.0);
    p.blowdowns.push(Blowdown {
        start_s: 1.0,
        area_m2: 1e-6,
        to_pressure_pa: 1.5e5,
        max_duration_s: 3600.0,
    });
    let mut sim = Simulator::new(p).unwrap();
    let end = sim.truth(3000.0).unwrap();
    let gamma: f64 = 1.4;
    let want = 300.0 * (end.pressure_pa / 3e5).powf((gamma - 1.0) / gamma);
    eprintln!(
        "blow-down 3 → {:.4} bar: T = {:.3} K, isentrope {want:.3} K",
        end.pressure_pa / 1e5,
        end.gas_k
    );
    assert!((end.gas_k / want - 1.0).abs() < 2e-3);
    assert!((end.pressure_pa / 1.5e5 - 1.0).abs() < 1e-4);
}

/// Choked flow of air: ṁ = 0.0404·A·p₀/√T₀ in SI units (γ = 1.4,
/// R = 287 J/(kg·K); Anderson, "Modern Compressible Flow", the numeric form
/// of the choked mass flow; from memory). Below the critical pressure ratio
/// the flow does not depend on the back pressure, above it falls to zero at
/// p_b = p₀, and both branches meet at the critical ratio.
#[test]
fn orifice_flow_chokes_like_the_textbook() {
    let (p0, t0) = (10e5, 300.0);
    let rho0 = p0 / (287.0 * t0);
    let flux = orifice_flux(p0, rho0, 1.4, 1e5);
    let want = 0.0404 * p0 / t0.sqrt();
    assert!((flux / want - 1.0).abs() < 2e-3, "{flux} vs {want}");
    let crit = (2.0f64 / 2.4).powf(1.4 / 0.4);
    let below = orifice_flux(p0, rho0, 1.4, p0 * crit * 0.999_999);
    let above = orifice_flux(p0, rho0, 1.4, p0 * crit * 1.000_001);
    assert!((below / flux - 1.0).abs() < 1e-12);
    assert!((above / flux - 1.0).abs() < 1e-5);
    let sub = orifice_flux(p0, rho0, 1.4, 0.9 * p0);
    assert!(sub > 0.0 && sub < 0.7 * flux);
    assert_eq!(orifice_flux(p0, rho0, 1.4, p0), 0.0);
}

/// Everything at once — fill, draw, leak, blow-down, heat exchange with a
/// day/night cycle and sun, an elastic and thermally expanding vessel —
/// conserves mass and energy: m − m₀ = ∫ṁ_in − ∫ṁ_out and
/// ΔU_gas + ΔU_wall = ∫(ṁ_in·h_in − ṁ_out·h) + ∫Q̇_ambient+sun − ∫p·dV
/// (first law for the gas and wall together; the running totals are
/// integrated with the state).
#[test]
fn mass_and_energy_are_conserved() {
    let (area, side) = Vessel::cylinder_areas(0.05, 5.0);
    let vessel = Vessel {
        water_capacity_m3: 0.05,
        elastic_per_pa: 1.2e-5 / 1e5,
        thermal_per_k: 3.6e-5,
        reference_k: 288.15,
        wall_heat_capacity_j_k: 58.0 * 480.0,
        inner_area_m2: area,
        outer_area_m2: 1.1 * area,
        inner_htc: 10.0,
        fill_htc: 250.0,
        outer_htc: 8.0,
        sun_area_m2: 0.5 * side,
    };
    let mut p = plant(Gas::Nitrogen, vessel, 60e5, 290.0);
    p.weather = weather(290.0, 8.0, 700.0);
    p.fills.push(Fill {
        start_s: 3.0 * 3600.0,
        supply_pressure_pa: 300e5,
        supply_temperature_k: 295.0,
        area_m2: 1.0e-6,
        to_pressure_pa: 200e5,
        max_duration_s: 3600.0,
    });
    p.draws.push(Draw {
        start_s: 0.5 * DAY_S,
        end_s: 2.0 * DAY_S,
        kg_s: 0.5 / 3600.0,
        windows: vec![(8.0, 12.0), (13.0, 17.5)],
        min_pressure_pa: 5e5,
        day_demand: Vec::new(),
    });
    p.leaks.push(Leak {
        start_s: DAY_S,
        size: LeakSize::LossPerDay(0.02),
    });
    p.blowdowns.push(Blowdown {
        start_s: 1.7 * DAY_S,
        area_m2: 0.3e-6,
        to_pressure_pa: 100e5,
        max_duration_s: 1800.0,
    });
    let mut sim = Simulator::new(p).unwrap();
    let e0 = sim.energy_j().unwrap();
    let (y0, ..) = sim.state();
    sim.truth(2.0 * DAY_S).unwrap();
    let (y, ..) = sim.state();
    let e1 = sim.energy_j().unwrap();
    let mass_err = (y[ix::MASS] - y0[ix::MASS] - y[ix::MASS_IN] + y[ix::MASS_OUT]).abs();
    let flows = y[ix::FLOW_ENERGY] + y[ix::AMBIENT_ENERGY] - y[ix::EXPANSION_WORK];
    // The enthalpy carried in and out, c_p·T per kilogram (nitrogen at
    // 300 K and 1 bar, c_p by its reference equation, about 1.04 kJ/(kg·K);
    // the equation's c_p is checked against CoolProp 8.0.0 in
    // host-sim/eos/tests/eos_caloric.rs), plus the heat exchanged: the size
    // of what the balance adds up.
    let n2 = Eos::of(Gas::Nitrogen);
    let low = n2.state(1e5, 300.0).unwrap();
    let cp = n2.caloric(low.density_mol_m3, 300.0).cp_j_mol_k / n2.molar_mass_kg_mol;
    let scale = (y[ix::MASS_IN] + y[ix::MASS_OUT]) * cp * 300.0 + y[ix::AMBIENT_ENERGY].abs();
    let energy_err = (e1 - e0 - flows).abs();
    eprintln!(
        "mass in {:.4} kg, out {:.4} kg, balance off by {mass_err:.1e} kg; energy: ΔU {:.4e} J vs flows {:.4e} J (off by {:.1e} of the exchanges); {} steps",
        y[ix::MASS_IN],
        y[ix::MASS_OUT],
        e1 - e0,
        flows,
        energy_err / scale,
        sim.steps
    );
    assert!(y[ix::MASS_IN] > 5.0 && y[ix::MASS_OUT] > 3.0);
    assert!(mass_err < 1e-9 * y[ix::MASS]);
    assert!(energy_err < 3e-5 * scale, "{energy_err} J of {scale} J");
}

/// The adaptive steps give the same truth as steps of at most 10 s, and a
/// quiet tank takes long steps.
#[test]
fn adaptive_steps_match_short_steps() {
    let eos = Eos::of(Gas::Methane);
    assert!(eos.state(150e5, 260.0).is_ok());
    let vessel = {
        let (area, _) = Vessel::cylinder_areas(0.08, 4.0);
        Vessel {
            water_capacity_m3: 0.08,
            elastic_per_pa: 1.5e-10,
            thermal_per_k: 3.6e-5,
            reference_k: 288.15,
            wall_heat_capacity_j_k: 70.0 * 480.0,
            inner_area_m2: area,
            outer_area_m2: 1.1 * area,
            inner_htc: 10.0,
            fill_htc: 250.0,
            outer_htc: 15.0,
            sun_area_m2: 0.0,
        }
    };
    let mut p = plant(Gas::Methane, vessel, 135e5, 255.0);
    p.weather = weather(260.0, 7.0, 0.0);
    p.draws.push(Draw {
        start_s: 0.0,
        end_s: f64::INFINITY,
        kg_s: 0.25 / 3600.0,
        windows: vec![(0.0, 8.0), (18.0, 24.0)],
        min_pressure_pa: 10e5,
        day_demand: Vec::new(),
    });
    let mut a = Simulator::new(p.clone()).unwrap();
    let mut b = Simulator::new(p).unwrap().with_max_step(10.0);
    let (mut dp, mut dt, mut dm) = (0.0f64, 0.0f64, 0.0f64);
    let mut t = 0.0;
    while t <= DAY_S {
        let x = a.truth(t).unwrap();
        let y = b.truth(t).unwrap();
        dp = dp.max((x.pressure_pa / y.pressure_pa - 1.0).abs());
        dt = dt.max((x.gas_k - y.gas_k).abs());
        dm = dm.max((x.mass_kg / y.mass_kg - 1.0).abs());
        t += 7.0;
    }
    eprintln!(
        "adaptive {} steps vs {} short steps over a day: pressure {dp:.1e} rel, gas temperature {dt:.1e} K, mass {dm:.1e} rel",
        a.steps, b.steps
    );
    assert!(dp < 1e-6 && dt < 1e-4 && dm < 1e-7);
    assert!(a.steps < 200, "{} steps", a.steps);
}

/// A steel cylinder of `v_m3` that exchanges heat (sun on half its side).
fn steel_vessel(v_m3: f64) -> Vessel {
    let (area, side) = Vessel::cylinder_areas(v_m3, 5.0);
    Vessel {
        water_capacity_m3: v_m3,
        elastic_per_pa: 1.2e-5 / 1e5,
        thermal_per_k: 3.6e-5,
        reference_k: 288.15,
        wall_heat_capacity_j_k: 58.0 * 480.0,
        inner_area_m2: area,
        outer_area_m2: 1.1 * area,
        inner_htc: 10.0,
        fill_htc: 250.0,
        outer_htc: 8.0,
        sun_area_m2: 0.5 * side,
    }
}

fn cylinder(vessel: Vessel, p0: f64, t0: f64, open: bool, switches: Vec<(f64, bool)>) -> Cylinder {
    Cylinder {
        vessel,
        initial_pressure_pa: p0,
        initial_temperature_k: Some(t0),
        valve_area_m2: 2e-6,
        open,
        switches,
    }
}

/// Two identical cylinders on a manifold, drawn and leaking through the
/// header, against one cylinder of twice the capacity with twice the wall
/// (heat capacity, areas, sun): the same state within the step control's
/// tolerance (asserted 1e-6 relative in pressure and content, 1e-4 K),
/// over two days of sun, day/night and a draw.
#[test]
fn two_identical_cylinders_equal_one_of_twice_the_capacity() {
    let one = steel_vessel(0.05);
    let mut double = one.clone();
    double.water_capacity_m3 *= 2.0;
    double.wall_heat_capacity_j_k *= 2.0;
    double.inner_area_m2 *= 2.0;
    double.outer_area_m2 *= 2.0;
    double.sun_area_m2 *= 2.0;
    let mut p = plant(Gas::Nitrogen, double, 150e5, 290.0);
    p.weather = weather(290.0, 8.0, 700.0);
    p.draws.push(Draw {
        start_s: 0.3 * DAY_S,
        end_s: 2.0 * DAY_S,
        kg_s: 0.5 / 3600.0,
        windows: vec![(8.0, 12.0), (13.0, 17.5)],
        min_pressure_pa: 5e5,
        day_demand: Vec::new(),
    });
    p.leaks.push(Leak {
        start_s: DAY_S,
        size: LeakSize::LossPerDay(0.02),
    });
    let mut m = p.clone();
    m.manifold = Some(Manifold {
        cylinders: vec![
            cylinder(one.clone(), 150e5, 290.0, true, vec![]),
            cylinder(one, 150e5, 290.0, true, vec![]),
        ],
        sensor: 1,
    });
    let mut a = Simulator::new(p).unwrap();
    let mut b = Simulator::new(m).unwrap();
    let (mut worst_p, mut worst_m, mut worst_t) = (0.0f64, 0.0f64, 0.0f64);
    for i in 0..=2 * 24 * 60 {
        let t = i as f64 * 60.0;
        let (x, y) = (a.truth(t).unwrap(), b.truth(t).unwrap());
        worst_p = worst_p.max((x.pressure_pa / y.pressure_pa - 1.0).abs());
        worst_m = worst_m.max((x.mass_kg / y.mass_kg - 1.0).abs());
        worst_t = worst_t.max((x.gas_k - y.gas_k).abs().max((x.wall_k - y.wall_k).abs()));
    }
    eprintln!(
        "manifold of two vs one double cylinder: p {worst_p:.1e}, m {worst_m:.1e}, T {worst_t:.1e} K"
    );
    assert!(worst_p < 1e-6 && worst_m < 1e-6 && worst_t < 1e-4);
}

/// Two cylinders at 200 and 50 bar on one header, no draw: the gas flows
/// from the full one to the other until their pressures agree, the total
/// mass stays what it was (to 1e-12 relative), and energy is conserved with
/// the heat exchanged with the ambient (as in the single tank's check).
/// While the second valve is closed (the first hour) nothing flows: each
/// cylinder keeps its mass exactly.
#[test]
fn manifold_flows_conserve_mass_and_a_closed_valve_stops_them() {
    let v = steel_vessel(0.05);
    let mut p = plant(Gas::Argon, v.clone(), 200e5, 293.0);
    p.weather = weather(293.0, 3.0, 0.0);
    p.manifold = Some(Manifold {
        cylinders: vec![
            cylinder(v.clone(), 200e5, 293.0, true, vec![]),
            cylinder(v, 50e5, 293.0, false, vec![(3600.0, true)]),
        ],
        sensor: 0,
    });
    let mut sim = Simulator::new(p).unwrap();
    let (m1, _, _, p1) = sim.vessel_state(0).unwrap();
    let (m2, _, _, p2) = sim.vessel_state(1).unwrap();
    assert!(p1 > 3.0 * p2);
    let total = m1 + m2;
    let e0 = sim.energy_j().unwrap();
    let (y0, ..) = sim.state();
    // Closed: the content open to the header is the first cylinder's alone.
    let t = sim.truth(3599.0).unwrap();
    assert_eq!(sim.vessel_state(0).unwrap().0, m1);
    assert_eq!(sim.vessel_state(1).unwrap().0, m2);
    assert!((t.mass_kg - m1).abs() < 1e-12 * m1);
    let t = sim.truth(2.0 * 3600.0).unwrap();
    let (a, _, _, pa) = sim.vessel_state(0).unwrap();
    let (b, _, _, pb) = sim.vessel_state(1).unwrap();
    assert!(
        (a + b - total).abs() < 1e-12 * total,
        "{} vs {total}",
        a + b
    );
    assert!((pa - pb).abs() < 0.01 * pa, "{pa} vs {pb}");
    assert!((t.mass_kg - total).abs() < 1e-12 * total);
    let _ = sim.truth(DAY_S).unwrap();
    let (y, ..) = sim.state();
    let tot = ix::totals(2);
    assert_eq!(y[tot], 0.0);
    assert_eq!(y[tot + 1], 0.0);
    let e1 = sim.energy_j().unwrap();
    let exchanged = y[tot + 3] - y[tot + 4] - (y0[tot + 3] - y0[tot + 4]);
    let err = (e1 - e0 - exchanged).abs();
    eprintln!(
        "manifold: mass {:.1e} rel, energy {err:.3e} J of {:.3e} J exchanged",
        ((a + b) / total - 1.0).abs(),
        y[tot + 3].abs()
    );
    assert!(err < 1e-5 * (y[tot + 3].abs() + total * 300.0 * 312.0));
}
