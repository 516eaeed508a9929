//! The fixed-point content estimate against the f64 reference path, ideal gas,
//! over the whole envelope: a dense grid for every gas and a spread of tanks,
//! plus random setups and samples (proptest).
//!
//! Bound asserted: 1e-5 relative on every output (below 1 bar: absolute error
//! up to 1e-5 of the value at 1 bar).

use isochor_core::model::Ideal;
use isochor_core::{Gas, Setup, StandardCondition, Status, Tank, envelope as env, fx};
use isochor_tests::{ErrorStats, compare_at, estimators, pressure_grid, temperature_grid};
use proptest::prelude::*;

const BOUND: f64 = 1e-5;

fn tanks() -> Vec<Tank> {
    let mut v = Vec::new();
    for (cap, rated) in [
        (env::CAPACITY_MIN_M3, 200e5),
        (0.05, 200e5),
        (0.05, 300e5),
        (0.12, 700e5),
        (1.0, env::RATED_PRESSURE_MIN_PA),
        (env::CAPACITY_MAX_M3, env::PRESSURE_MAX_PA),
    ] {
        v.push(Tank::new(cap, rated));
    }
    // Elastic and thermal expansion at their limits, both signs of thermal.
    for thermal in [
        env::THERMAL_EXPANSION_MAX_PER_K,
        -env::THERMAL_EXPANSION_MAX_PER_K,
    ] {
        v.push(Tank {
            water_capacity_m3: 0.0513,
            rated_pressure_pa: 350e5,
            rated_temperature_k: 293.15,
            elastic_expansion_per_mpa: env::ELASTIC_EXPANSION_MAX_PER_MPA,
            thermal_expansion_per_k: thermal,
        });
    }
    v
}

#[test]
fn dense_grid_every_gas_every_tank() {
    let pressures = pressure_grid(100, 60);
    let temperatures = temperature_grid(5.0);
    let mut all = ErrorStats::default();
    for gas in Gas::ALL {
        for (i, tank) in tanks().into_iter().enumerate() {
            let mut setup = Setup::new(gas, tank);
            // Rotate standard conditions and settled references through the tanks.
            let named = StandardCondition::named();
            setup.standard = named[i % named.len()].1;
            setup.settled_reference_k =
                [288.15, env::TEMPERATURE_MIN_K, env::TEMPERATURE_MAX_K][i % 3];
            let (fixed_est, float_est) = estimators(&setup, Ideal::new(gas), Ideal::new(gas));
            let mut stats = ErrorStats::default();
            for &p in &pressures {
                for &t in &temperatures {
                    let pf = fx::Pressure::from_num(p);
                    let tf = fx::Temperature::from_num(t);
                    compare_at(&mut stats, &fixed_est, &float_est, pf, tf);
                }
            }
            stats.assert_within(BOUND, &format!("{gas} tank #{i}"));
            assert_eq!(
                stats.status_mismatches, 0,
                "{gas} tank #{i}: status words differ"
            );
            all.merge(&stats);
        }
    }
    eprintln!("ideal gas, fixed vs f64 over {} samples:", all.samples);
    for (q, w) in isochor_tests::QUANTITIES.iter().zip(all.worst) {
        eprintln!("  {q:<20} {w:.2e}");
    }
}

#[test]
fn edges_and_outside_of_envelope() {
    // Just outside, on, and far outside the envelope edges: never panics,
    // clamps like the float path, flags the same.
    let mut stats = ErrorStats::default();
    for gas in Gas::ALL {
        let setup = Setup::new(gas, Tank::new(0.05, 200e5));
        let (fixed_est, float_est) = estimators(&setup, Ideal::new(gas), Ideal::new(gas));
        for p_bits in [
            0u32,
            1,
            15,
            16,
            1_599_999_999,
            1_600_000_000,
            1_600_000_001,
            u32::MAX,
        ] {
            for t_bits in [
                13_968_997u32,
                13_968_998,
                20_000_000,
                27_731_559,
                27_731_560,
                u32::MAX,
            ] {
                compare_at(
                    &mut stats,
                    &fixed_est,
                    &float_est,
                    fx::Pressure::from_bits(p_bits),
                    fx::Temperature::from_bits(t_bits),
                );
            }
        }
    }
    stats.assert_within(BOUND, "edges");
    assert_eq!(stats.status_mismatches, 0);
}

fn any_gas() -> impl Strategy<Value = Gas> {
    (0..Gas::ALL.len()).prop_map(|i| Gas::ALL[i])
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    #[test]
    fn random_setups_and_samples(
        gas in any_gas(),
        log_cap in (env::CAPACITY_MIN_M3.log10())..(env::CAPACITY_MAX_M3.log10()),
        rated in env::RATED_PRESSURE_MIN_PA..env::PRESSURE_MAX_PA,
        rated_t in env::TEMPERATURE_MIN_K..env::TEMPERATURE_MAX_K,
        elastic in 0.0..env::ELASTIC_EXPANSION_MAX_PER_MPA,
        thermal in -env::THERMAL_EXPANSION_MAX_PER_K..env::THERMAL_EXPANSION_MAX_PER_K,
        std_t in env::TEMPERATURE_MIN_K..env::TEMPERATURE_MAX_K,
        std_p in env::STANDARD_PRESSURE_MIN_PA..env::STANDARD_PRESSURE_MAX_PA,
        t_ref in env::TEMPERATURE_MIN_K..env::TEMPERATURE_MAX_K,
        samples in proptest::collection::vec((0.0..1.05e8f64, 200.0..440.0f64), 1..20),
    ) {
        let tank = Tank {
            water_capacity_m3: 10f64.powf(log_cap),
            rated_pressure_pa: rated,
            rated_temperature_k: rated_t,
            elastic_expansion_per_mpa: elastic,
            thermal_expansion_per_k: thermal,
        };
        let setup = Setup {
            gas,
            tank,
            standard: StandardCondition { temperature_k: std_t, pressure_pa: std_p },
            settled_reference_k: t_ref,
        };
        let (fixed_est, float_est) = estimators(&setup, Ideal::new(gas), Ideal::new(gas));
        let mut stats = ErrorStats::default();
        for (p, t) in samples {
            compare_at(&mut stats, &fixed_est, &float_est, fx::Pressure::from_num(p), fx::Temperature::from_num(t));
        }
        stats.assert_within(BOUND, "random");
        prop_assert_eq!(stats.status_mismatches, 0);
    }
}

/// Bound of the fixed-point estimate against the f64 estimate with the same
/// device model: the model's fixed-point evaluation differs from its f64
/// evaluation by up to half a coefficient step (≤ 2^-16 in Z, see
/// core/src/model/device/fixed.rs), on top of the estimator's 1e-5.
const DEVICE_BOUND: f64 = 5e-5;

#[test]
fn device_models_dense_grid_every_gas() {
    use isochor_core::model::DeviceModel;
    let pressures = pressure_grid(100, 40);
    let temperatures = temperature_grid(5.0);
    let mut all = ErrorStats::default();
    let mut compared = 0u64;
    let mut differ = 0u64;
    for gas in Gas::ALL {
        let model = DeviceModel::builtin(gas).unwrap();
        // Rated at a state every table covers as gas: 5 bar at 15 °C for the
        // liquefiable gases, service pressures for the others.
        let tanks = if gas.liquefiable_in_envelope() && gas != Gas::Krypton {
            vec![Tank::new(0.05, 5e5), Tank::new(1.0, 3e5)]
        } else {
            vec![Tank::new(0.05, 200e5), Tank::new(0.12, 700e5)]
        };
        for (i, tank) in tanks.into_iter().enumerate() {
            let setup = Setup::new(gas, tank);
            let (fixed_est, float_est) = estimators(&setup, model.clone(), model.clone());
            let mut stats = ErrorStats::default();
            for &p in &pressures {
                for &t in &temperatures {
                    let pf = fx::Pressure::from_num(p);
                    let tf = fx::Temperature::from_num(t);
                    let a = fixed_est.estimate(pf, tf);
                    let b = float_est.estimate(fx::to_f64(pf), fx::to_f64(tf)).unwrap();
                    // Values are compared where both paths call them valid and
                    // agree on the model's flags (the boundary curves of
                    // liquefiable gases are evaluated in each arithmetic).
                    let edge = isochor_tests::BOUNDARY_FLAGS;
                    // Where either path calls the state invalid (outside the
                    // table, liquid or two-phase, now or settled), the solver's
                    // not_converged may differ and nothing is shown as valid.
                    let invalid = Status::MODEL_OUT_OF_RANGE
                        | Status::TWO_PHASE
                        | Status::LIQUID_FULL
                        | Status::SETTLED_TWO_PHASE;
                    let either_invalid =
                        a.status.intersects(invalid) || b.status.intersects(invalid);
                    if a.status.without(edge) != b.status.without(edge) {
                        if !either_invalid {
                            differ += 1;
                        }
                        continue;
                    }
                    // Over-filled states are valid estimates: compared too.
                    if !a.status.without(edge | Status::OVER_FILL).is_ok() {
                        continue;
                    }
                    compare_at(&mut stats, &fixed_est, &float_est, pf, tf);
                    compared += 1;
                }
            }
            stats.assert_within(DEVICE_BOUND, &format!("{gas} device tank #{i}"));
            all.merge(&stats);
        }
    }
    assert!(compared > 50_000, "{compared}");
    // Status words differ only for samples within rounding of a flag's edge
    // (table range, boundary curves, the solver's stopping rule).
    assert!(
        differ * 1000 < compared,
        "{differ} of {compared} status words differ"
    );
    eprintln!(
        "device models, fixed vs f64 over {} samples ({differ} with different status):",
        all.samples
    );
    for (q, w) in isochor_tests::QUANTITIES.iter().zip(all.worst) {
        eprintln!("  {q:<20} {w:.2e}");
    }
}
