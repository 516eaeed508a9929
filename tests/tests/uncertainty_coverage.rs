//! The k = 2 uncertainty of mass and fill fraction against Monte Carlo truth:
//! instruments whose errors are drawn from their declared distributions
//! (normal, with the declared standard uncertainties), each read at points
//! across the tank's range; the share of readings whose interval contains the
//! truth must be at least 95 % (GUM, JCGM 100:2008, 6.2–6.3: k = 2 gives about
//! 95 % for a normal distribution). Plus: the sensitivity coefficients against
//! finite differences of the estimator, with a non-ideal test model, and the
//! fixed-point evaluation against the f64 one.

use isochor_core::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
use isochor_core::content::{fixed, float};
use isochor_core::model::{
    Compressibility, CompressibilityFx, Ideal, ModelRange, ZPoint, ZPointFx,
};
use isochor_core::uncertainty::fixed::{EvaluatorFx, UncertaintyConfigFx};
use isochor_core::uncertainty::float::{Evaluator, UncertaintyConfig};
use isochor_core::{Gas, Setup, SetupFx, Status, Tank, envelope as env, fx};
use isochor_tests::synth::normal;
use rand::SeedableRng;
use rand::rngs::ChaCha8Rng;

#[test]
fn k2_intervals_cover_at_least_95_percent_of_readings() {
    let gas = Gas::Nitrogen;
    let (cap, rated_p, rated_t) = (0.05, 200e5, 288.15);
    let setup = Setup::new(gas, Tank::new(cap, rated_p));
    let sfx = SetupFx::from_f64(&setup).unwrap();
    let est_fx = fixed::Estimator::new(sfx, Ideal::new(gas)).unwrap();
    let est_f = float::Estimator::new(sfx.to_real(), Ideal::new(gas)).unwrap();
    let decl = UncertaintyConfig::example(300e5);
    let dfx = UncertaintyConfigFx::from_f64(&decl).unwrap();
    let ev_fx = EvaluatorFx::new(dfx, &est_fx).unwrap();
    let ev_f = Evaluator::new(dfx.to_real(), &est_f).unwrap();
    let d = dfx.to_real::<f64>();
    let k = gas.info().molar_mass_kg_mol / MOLAR_GAS_CONSTANT_J_MOL_K;

    let mut rng = ChaCha8Rng::seed_from_u64(95);
    let (mut n, mut in_m, mut in_f, mut in_m_fx, mut in_f_fx) = (0u64, 0u64, 0u64, 0u64, 0u64);
    let mut worst_fx = 0.0f64;
    for _ in 0..6000 {
        // One instrument: its errors drawn once.
        let p_off = normal(&mut rng) * d.pressure_fs * d.pressure_full_scale_pa;
        let p_gain = normal(&mut rng) * d.pressure_reading;
        let t_off = normal(&mut rng) * d.temperature_k;
        let cap_true = cap * (1.0 + normal(&mut rng) * d.capacity);
        // Model error at the sample's state and, independently, at the rated
        // state (the assumption the fill-fraction uncertainty is built on).
        let model_rated = 1.0 + normal(&mut rng) * d.model;
        let m_rated_true = rated_p * cap_true * k / rated_t * model_rated;
        for i in 0..8 {
            let p_true = rated_p * (0.05 + 0.95 * i as f64 / 7.0);
            let t_true = 253.15 + 70.0 * ((i * 3) % 8) as f64 / 7.0;
            let model = 1.0 + normal(&mut rng) * d.model;
            let m_true = p_true * cap_true * k / t_true * model;
            let p_read = p_true * (1.0 + p_gain) + p_off;
            let t_read = t_true + t_off;
            let pf = fx::Pressure::from_num(p_read.max(0.0));
            let tf = fx::Temperature::from_num(t_read);
            let cf = est_f.estimate(fx::to_f64(pf), fx::to_f64(tf)).unwrap();
            let u = ev_f.evaluate(&cf);
            let cx = est_fx.estimate(pf, tf);
            let ux = ev_fx.evaluate(&est_fx.with_slopes(&cx));
            n += 1;
            let f_true = m_true / m_rated_true;
            in_m += ((cf.mass_kg - m_true).abs() <= u.mass_kg) as u64;
            in_f += ((cf.fill_fraction - f_true).abs() <= u.fill_fraction) as u64;
            in_m_fx += ((fx::to_f64(cx.mass_kg) - m_true).abs() <= fx::to_f64(ux.mass_kg)) as u64;
            in_f_fx += ((fx::to_f64(cx.fill_fraction) - f_true).abs()
                <= fx::to_f64(ux.fill_fraction)) as u64;
            worst_fx = worst_fx.max((fx::to_f64(ux.mass_kg) / u.mass_kg - 1.0).abs());
        }
    }
    let pct = |x: u64| x as f64 / n as f64 * 100.0;
    println!(
        "k = 2 coverage over {n} readings: mass {:.2} %, fill fraction {:.2} % (f64); fixed point {:.2} %, {:.2} %; fixed vs f64 U(m) worst {:.1e} relative",
        pct(in_m),
        pct(in_f),
        pct(in_m_fx),
        pct(in_f_fx),
        worst_fx
    );
    for (what, c) in [
        ("mass", in_m),
        ("fill fraction", in_f),
        ("mass, fixed", in_m_fx),
        ("fill fraction, fixed", in_f_fx),
    ] {
        assert!(pct(c) >= 95.0, "{what}: coverage {:.2} %", pct(c));
        // Not grossly conservative either: a k = 2 interval covers ~95.4 %.
        assert!(
            pct(c) <= 98.5,
            "{what}: coverage {:.2} % (too wide)",
            pct(c)
        );
    }
    assert!(worst_fx < 1e-5);
}

/// A virial-form test model, Z = 1 + B(T)·p/(R·T) with B(T) = b0 − b1/T:
/// not a gas, just smooth non-zero slopes to check the sensitivities with
/// (coefficients chosen to give Z within a few per cent of one up to 200 bar).
#[derive(Clone, Copy)]
struct Virial;

impl Virial {
    const B0: f64 = 4.5e-5;
    const B1: f64 = 0.0147;
    fn point(p: f64, t: f64) -> (f64, f64, f64) {
        let r = MOLAR_GAS_CONSTANT_J_MOL_K;
        let b = Self::B0 - Self::B1 / t;
        let db = Self::B1 / (t * t);
        let z = 1.0 + b * p / (r * t);
        let dz_dp = b / (r * t) * 1e6;
        let dz_dt = p / r * (db / t - b / (t * t));
        (z, dz_dp, dz_dt)
    }
}

impl Compressibility<f64> for Virial {
    fn gas(&self) -> Gas {
        Gas::Nitrogen
    }
    fn kind(&self) -> &'static str {
        "test"
    }
    fn range(&self) -> ModelRange {
        ModelRange {
            pressure_max_pa: env::PRESSURE_MAX_PA,
            temperature_min_k: env::TEMPERATURE_MIN_K,
            temperature_max_k: env::TEMPERATURE_MAX_K,
        }
    }
    fn z(&self, p: f64, t: f64) -> ZPoint<f64> {
        let (z, dz_dp_per_mpa, dz_dt_per_k) = Self::point(p, t);
        ZPoint {
            z,
            dz_dp_per_mpa,
            dz_dt_per_k,
            flags: Status::OK,
        }
    }
}

impl CompressibilityFx for Virial {
    fn gas(&self) -> Gas {
        Gas::Nitrogen
    }
    fn z_fx(&self, p: fx::Pressure, t: fx::Temperature) -> ZPointFx {
        let (z, a, b) = Self::point(fx::to_f64(p), fx::to_f64(t));
        ZPointFx {
            z: fx::Compressibility::from_num(z),
            dz_dp_per_mpa: fx::ZSlope::from_num(a),
            dz_dt_per_k: fx::ZSlope::from_num(b),
            flags: Status::OK,
        }
    }
    fn z_floor(&self) -> fx::Compressibility {
        fx::Compressibility::from_num(0.5)
    }
}

#[test]
fn sensitivities_match_finite_differences_and_fixed_matches_f64() {
    let mut tank = Tank::new(0.05, 300e5);
    tank.elastic_expansion_per_mpa = 1e-4;
    tank.thermal_expansion_per_k = 3.6e-5;
    let setup = Setup::new(Gas::Nitrogen, tank);
    let sfx = SetupFx::from_f64(&setup).unwrap();
    let est_f = float::Estimator::new(sfx.to_real(), Virial).unwrap();
    let est_fx = fixed::Estimator::new(sfx, Virial).unwrap();
    let decl = UncertaintyConfigFx::from_f64(&UncertaintyConfig::example(400e5)).unwrap();
    let ev_f = Evaluator::new(decl.to_real(), &est_f).unwrap();
    let ev_fx = EvaluatorFx::new(decl, &est_fx).unwrap();
    let mut worst_c = 0.0f64;
    let mut worst_fx = 0.0f64;
    for &p in &[5e5, 50e5, 150e5, 300e5, 450e5] {
        for &t in &[233.15, 273.15, 300.0, 350.0] {
            let c = est_f.estimate(p, t).unwrap();
            let u = ev_f.evaluate(&c);
            // Central differences of ln m.
            let h = 1e-5;
            let m = |p: f64, t: f64| est_f.estimate(p, t).unwrap().mass_kg.ln();
            let cp = (m(p * (1.0 + h), t) - m(p * (1.0 - h), t)) / (2.0 * h);
            let ct = (m(p, t * (1.0 + h)) - m(p, t * (1.0 - h))) / (2.0 * h);
            // The vessel factor's denominator is taken as 1 (second order: e·p
            // and e·T are below 5e-3 here).
            worst_c = worst_c.max((u.c_p - cp).abs()).max((u.c_t - ct).abs());
            let cx = est_fx.estimate(fx::Pressure::from_num(p), fx::Temperature::from_num(t));
            let ux = ev_fx.evaluate(&est_fx.with_slopes(&cx));
            worst_fx = worst_fx
                .max((fx::to_f64(ux.mass_kg) / u.mass_kg - 1.0).abs())
                .max((fx::to_f64(ux.fill_fraction) / u.fill_fraction - 1.0).abs())
                .max((fx::to_f64(ux.c_p) - u.c_p).abs())
                .max((fx::to_f64(ux.c_t) - u.c_t).abs());
        }
    }
    println!(
        "sensitivities vs finite differences: worst {worst_c:.1e}; fixed vs f64 uncertainty: worst {worst_fx:.1e}"
    );
    assert!(worst_c < 2e-3, "{worst_c}");
    assert!(worst_fx < 1e-5, "{worst_fx}");
}
