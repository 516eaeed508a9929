//! The content estimate in floating point, generic over [`Real`] (`f64` is the
//! reference the fixed-point path is tested against).

use super::{OVER_FILL_FRACTION, SETTLE_ITERATIONS, SETTLE_SLOPE_MIN};
use crate::constants::{MOLAR_GAS_CONSTANT_J_MOL_K, STANDARD_ATMOSPHERE_PA};
use crate::envelope as env;
use crate::error::{Condition, Measured};
use crate::model::{Compressibility, ZPoint};
use crate::{Error, Real, Setup, Status};

/// One content estimate, float form. Values are SI.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Content<F = f64> {
    /// Absolute pressure used, Pa (the sample, clamped to the envelope; a
    /// clamped sample's content is not valid, see [`Status::CONTENT_INVALID`]).
    pub pressure_pa: F,
    /// Temperature used, K (the sample, clamped to the envelope).
    pub temperature_k: F,
    /// Gas density, kg/m³.
    pub density_kg_m3: F,
    /// Gas mass in the tank, kg.
    pub mass_kg: F,
    /// Amount of substance in the tank, mol.
    pub amount_mol: F,
    /// Volume the content would take at the standard condition, m³.
    pub standard_volume_m3: F,
    /// Pressure the same content would have at the settled reference
    /// temperature, absolute, Pa.
    pub settled_pressure_pa: F,
    /// Content as a fraction of the rated content (1 = full).
    pub fill_fraction: F,
    /// The gas model's answer at (p, T): Z and its slopes.
    pub z: ZPoint<F>,
    /// Vessel volume over water capacity, V/V₀.
    pub vessel_factor: F,
    /// What the reader must know about these numbers.
    pub status: Status,
}

/// Prepared content estimator: a setup, a gas model and the constants derived
/// from them.
#[derive(Clone, Debug)]
pub struct Estimator<F: Real, M> {
    setup: Setup<F>,
    model: M,
    /// M/R, kg·K/J.
    k: F,
    /// Elastic expansion per Pa.
    elastic_per_pa: F,
    /// ρv at the rated condition, kg/m³.
    rho_v_rated: F,
    /// Outputs per unit ρv.
    mass_per_rho_v: F,
    fraction_per_rho_v: F,
    amount_per_rho_v: F,
    standard_volume_per_rho_v: F,
    /// τ per unit ρv: R·T_ref/M.
    target_per_rho_v: F,
    /// Flags raised while preparing (model range at the rated or standard condition).
    setup_status: Status,
}

impl<F: Real, M: Compressibility<F>> Estimator<F, M> {
    /// Prepares an estimator. Fails when the setup is out of range, the model
    /// is for another gas, or the model is two-phase at the rated or standard
    /// condition.
    pub fn new(setup: Setup<F>, model: M) -> Result<Self, Error> {
        setup.validate()?;
        if model.gas() != setup.gas {
            return Err(Error::ModelUnusable(Condition::GasOfSetup));
        }
        let r = F::lit(MOLAR_GAS_CONSTANT_J_MOL_K);
        let molar_mass = F::lit(setup.gas.molar_mass_kg_mol());
        let k = molar_mass / r;
        let tank = setup.tank;
        let mut est = Estimator {
            setup,
            model,
            k,
            elastic_per_pa: tank.elastic_expansion_per_mpa * F::lit(1e-6),
            rho_v_rated: F::ONE,
            mass_per_rho_v: tank.water_capacity_m3,
            fraction_per_rho_v: F::ONE,
            amount_per_rho_v: tank.water_capacity_m3 / molar_mass,
            standard_volume_per_rho_v: F::ZERO,
            target_per_rho_v: r * setup.settled_reference_k / molar_mass,
            setup_status: Status::OK,
        };

        let (p_r, t_r) = (tank.rated_pressure_pa, tank.rated_temperature_k);
        let zr = est.model.z(p_r, t_r);
        if zr.flags.intersects(Status::CONTENT_INVALID) {
            return Err(Error::ModelUnusable(Condition::RatedCondition));
        }
        est.rho_v_rated = est.density(p_r, t_r, zr.z) * est.vessel_factor(p_r, t_r);
        est.fraction_per_rho_v = F::ONE / est.rho_v_rated;

        let std = setup.standard;
        let zs = est.model.z(std.pressure_pa, std.temperature_k);
        if zs.flags.intersects(Status::CONTENT_INVALID) {
            return Err(Error::ModelUnusable(Condition::StandardCondition));
        }
        est.standard_volume_per_rho_v =
            est.amount_per_rho_v * zs.z * r * std.temperature_k / std.pressure_pa;
        est.setup_status = (zr.flags | zs.flags) & Status::MODEL_OUT_OF_RANGE;
        Ok(est)
    }

    /// The setup this estimator was prepared for.
    pub fn setup(&self) -> &Setup<F> {
        &self.setup
    }

    /// The gas model.
    pub fn model(&self) -> &M {
        &self.model
    }

    /// Mass at the rated condition (rated pressure and temperature), kg.
    pub fn rated_mass_kg(&self) -> F {
        self.rho_v_rated * self.mass_per_rho_v
    }

    /// Estimates the content from an absolute pressure (Pa) and a gas
    /// temperature (K). Fails only for NaN or infinite inputs; everything else
    /// is clamped to the envelope and flagged (the content of a clamped sample
    /// is not valid: [`Status::CONTENT_INVALID`]).
    pub fn estimate(&self, pressure_pa: F, temperature_k: F) -> Result<Content<F>, Error> {
        if !pressure_pa.is_finite() {
            return Err(Error::NotFinite(Measured::Pressure.into()));
        }
        if !temperature_k.is_finite() {
            return Err(Error::NotFinite(Measured::Temperature.into()));
        }
        let (p, t, mut status) = clamp_inputs(pressure_pa, temperature_k);
        status |= self.setup_status;

        let z = self.model.z(p, t);
        status |= z.flags;
        let density = self.density(p, t, z.z);
        let vessel_factor = self.vessel_factor(p, t);
        let rho_v = density * vessel_factor;
        let (settled_pressure_pa, settle_status) = self.settle(rho_v, z.z);
        status |= settle_status;
        let fill_fraction = rho_v * self.fraction_per_rho_v;
        status |= over_fill(fill_fraction, status);

        Ok(Content {
            pressure_pa: p,
            temperature_k: t,
            density_kg_m3: density,
            mass_kg: rho_v * self.mass_per_rho_v,
            amount_mol: rho_v * self.amount_per_rho_v,
            standard_volume_m3: rho_v * self.standard_volume_per_rho_v,
            settled_pressure_pa,
            fill_fraction,
            z,
            vessel_factor,
            status,
        })
    }

    /// ρ = p·M/(Z·R·T), kg/m³.
    fn density(&self, p: F, t: F, z: F) -> F {
        p * self.k / (t * z)
    }

    /// V/V₀ at (p, T).
    fn vessel_factor(&self, p: F, t: F) -> F {
        let tank = &self.setup.tank;
        F::ONE
            + self.elastic_per_pa * (p - F::lit(STANDARD_ATMOSPHERE_PA))
            + tank.thermal_expansion_per_k * (t - tank.rated_temperature_k)
    }

    /// The pressure (Pa, absolute) that a content given as a fill fraction
    /// develops at the temperature `temperature_k` in this tank: the same
    /// bounded Newton solver as the settled pressure, at another temperature.
    /// Used for the over-pressure limit (the rated content, fraction 1, at the
    /// present temperature) and for predicted settled pressures. Inputs are
    /// clamped: the fraction to 0…16, the temperature to the envelope.
    pub fn pressure_at(&self, fill_fraction: F, temperature_k: F) -> (F, Status) {
        let f = if fill_fraction.is_finite() {
            fill_fraction.clamp_to(F::ZERO, F::lit(16.0))
        } else {
            F::ZERO
        };
        let t = if temperature_k.is_finite() {
            temperature_k
        } else {
            self.setup.settled_reference_k
        };
        let t = t.clamp_to(
            F::lit(env::TEMPERATURE_MIN_K),
            F::lit(env::TEMPERATURE_MAX_K),
        );
        let rho_v = f * self.rho_v_rated;
        let target = rho_v * self.target_per_rho_v * t / self.setup.settled_reference_k;
        self.solve_pressure(target, t, F::ONE)
    }

    /// The settled pressure (Pa) of a content given as τ = ρv·R·T_ref/M
    /// (Pa): the settled-pressure solver at the reference temperature
    /// (what a prepared configuration's settled-pressure curve holds).
    pub fn settled_pressure_of(&self, tau_pa: F) -> (F, Status) {
        self.solve_pressure(tau_pa, self.setup.settled_reference_k, F::ONE)
    }

    /// Settled pressure for the content ρv, seeded with Z at the sample.
    fn settle(&self, rho_v: F, z_now: F) -> (F, Status) {
        let target = rho_v * self.target_per_rho_v;
        self.solve_pressure(target, self.setup.settled_reference_k, z_now)
    }

    /// Solves p·f(p, t) = τ·Z(p, t) for p with τ = `target`, seeded with
    /// τ·`z_seed`.
    fn solve_pressure(&self, target: F, t_ref: F, z_seed: F) -> (F, Status) {
        let p_max = F::lit(SETTLED_PRESSURE_MAX_PA);
        let mut p = (target * z_seed).clamp_to(F::ZERO, p_max);
        let mut flags = Status::OK;
        let mut converged = false;
        for _ in 0..SETTLE_ITERATIONS {
            let z = self.model.z(p, t_ref);
            flags = z.flags;
            let vf = self.vessel_factor(p, t_ref);
            let phi = p * vf - target * z.z;
            let slope = (vf + self.elastic_per_pa * p - target * z.dz_dp_per_mpa * F::lit(1e-6))
                .max(F::lit(SETTLE_SLOPE_MIN));
            let step = phi / slope;
            p = (p - step).clamp_to(F::ZERO, p_max);
            if step.abs() <= p * F::EPSILON * F::lit(256.0) + F::lit(1e-6) {
                converged = true;
                break;
            }
        }
        let mut status = Status::OK;
        if !converged {
            status |= Status::NOT_CONVERGED;
        }
        if p >= p_max {
            status |= Status::SATURATED;
        }
        if flags.intersects(Status::CONTENT_INVALID) {
            status |= Status::SETTLED_TWO_PHASE;
        }
        status |= flags & Status::MODEL_OUT_OF_RANGE;
        (p, status)
    }
}

/// The largest settled pressure representable, Pa (the fixed-point pressure
/// format's maximum; both paths clamp there and flag
/// [`Status::SATURATED`]).
pub const SETTLED_PRESSURE_MAX_PA: f64 = 268_435_455.937_5;

/// [`Status::OVER_FILL`] when the fill fraction is above
/// [`OVER_FILL_FRACTION`] and the content is valid (`status` so far).
fn over_fill<F: Real>(fill_fraction: F, status: Status) -> Status {
    if fill_fraction > F::lit(OVER_FILL_FRACTION) && !status.intersects(Status::CONTENT_INVALID) {
        Status::OVER_FILL
    } else {
        Status::OK
    }
}

/// Limits a sample to the envelope and flags what was clamped.
fn clamp_inputs<F: Real>(p: F, t: F) -> (F, F, Status) {
    let mut status = Status::OK;
    let (p_lo, p_hi) = (F::lit(env::PRESSURE_MIN_PA), F::lit(env::PRESSURE_MAX_PA));
    let (t_lo, t_hi) = (
        F::lit(env::TEMPERATURE_MIN_K),
        F::lit(env::TEMPERATURE_MAX_K),
    );
    if p < p_lo || p > p_hi {
        status |= Status::PRESSURE_OUTSIDE_ENVELOPE;
    }
    if t < t_lo || t > t_hi {
        status |= Status::TEMPERATURE_OUTSIDE_ENVELOPE;
    }
    (p.clamp_to(p_lo, p_hi), t.clamp_to(t_lo, t_hi), status)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Ideal;
    use crate::{Gas, Tank};

    fn nitrogen_50l() -> Estimator<f64, Ideal> {
        let setup = Setup::new(Gas::Nitrogen, Tank::new(0.05, 200e5));
        Estimator::new(setup, Ideal::new(Gas::Nitrogen)).unwrap()
    }

    #[test]
    fn ideal_gas_by_hand() {
        let e = nitrogen_50l();
        let c = e.estimate(200e5, 308.15).unwrap();
        let rho = 200e5 * 0.028_013_48 / (MOLAR_GAS_CONSTANT_J_MOL_K * 308.15);
        assert!((c.density_kg_m3 / rho - 1.0).abs() < 1e-14);
        assert!((c.mass_kg / (rho * 0.05) - 1.0).abs() < 1e-14);
        assert!((c.settled_pressure_pa / (200e5 * 288.15 / 308.15) - 1.0).abs() < 1e-12);
        assert!((c.fill_fraction - 288.15 / 308.15).abs() < 1e-12);
        assert!(c.status.is_ok());
    }

    #[test]
    fn not_a_number_is_an_error() {
        let e = nitrogen_50l();
        assert_eq!(
            e.estimate(f64::NAN, 300.0),
            Err(Error::NotFinite(Measured::Pressure.into()))
        );
        assert_eq!(
            e.estimate(1e5, f64::INFINITY),
            Err(Error::NotFinite(Measured::Temperature.into()))
        );
    }

    #[test]
    fn outside_envelope_is_clamped_and_flagged() {
        let e = nitrogen_50l();
        let c = e.estimate(-5.0, 500.0).unwrap();
        assert_eq!(c.pressure_pa, 0.0);
        assert_eq!(c.temperature_k, env::TEMPERATURE_MAX_K);
        assert!(c.status.contains(Status::PRESSURE_OUTSIDE_ENVELOPE));
        assert!(c.status.contains(Status::TEMPERATURE_OUTSIDE_ENVELOPE));
        assert_eq!(c.mass_kg, 0.0);
        assert_eq!(c.settled_pressure_pa, 0.0);
        assert!(c.status.intersects(Status::CONTENT_INVALID));
    }

    /// 2000 bar is computed at the 1000 bar edge (nothing overflows) and the
    /// content is marked not valid: the edge is not where the tank is. Inside
    /// the envelope, the edge itself is valid.
    #[test]
    fn outside_envelope_content_is_not_valid() {
        let e = nitrogen_50l();
        let edge = e.estimate(env::PRESSURE_MAX_PA, 288.15).unwrap();
        assert!(!edge.status.intersects(Status::CONTENT_INVALID));
        let over = e.estimate(2.0 * env::PRESSURE_MAX_PA, 288.15).unwrap();
        assert_eq!(over.pressure_pa, env::PRESSURE_MAX_PA);
        assert_eq!(over.mass_kg, edge.mass_kg);
        assert_eq!(
            over.status & Status::CONTENT_INVALID,
            Status::PRESSURE_OUTSIDE_ENVELOPE
        );
        for t in [env::TEMPERATURE_MIN_K - 1.0, env::TEMPERATURE_MAX_K + 1.0] {
            let c = e.estimate(100e5, t).unwrap();
            assert_eq!(
                c.status & Status::CONTENT_INVALID,
                Status::TEMPERATURE_OUTSIDE_ENVELOPE
            );
        }
        // Two-phase stays invalid too.
        assert!(Status::CONTENT_INVALID.contains(Status::TWO_PHASE));
    }

    #[test]
    fn wrong_gas_model_is_refused() {
        let setup = Setup::new(Gas::Nitrogen, Tank::new(0.05, 200e5));
        assert!(Estimator::new(setup, Ideal::new(Gas::Helium)).is_err());
    }

    #[test]
    fn f32_follows_f64() {
        let s64 = Setup::new(Gas::Hydrogen, Tank::new(0.1, 700e5));
        let s32 = Setup {
            gas: s64.gas,
            tank: Tank::new(0.1f32, 700e5),
            standard: crate::StandardCondition {
                temperature_k: 288.15f32,
                pressure_pa: 101_325.0,
            },
            settled_reference_k: 288.15f32,
        };
        let e64 = Estimator::new(s64, Ideal::new(Gas::Hydrogen)).unwrap();
        let e32 = Estimator::new(s32, Ideal::new(Gas::Hydrogen)).unwrap();
        let a = e64.estimate(500e5, 260.0).unwrap();
        let b = e32.estimate(500e5f32, 260.0).unwrap();
        assert!((b.mass_kg as f64 / a.mass_kg - 1.0).abs() < 1e-5);
        assert!((b.settled_pressure_pa as f64 / a.settled_pressure_pa - 1.0).abs() < 1e-5);
        assert!(b.status.is_ok(), "{:?}", b.status);
    }
}
