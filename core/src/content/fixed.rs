//! The content estimate in fixed point: the device path.
//!
//! Same steps and names as [`super::float`]; formats in [`crate::fx`].
//! Internally density lives in a `u32` whose binary scale `2^-rho_shift` is
//! chosen per setup from the largest density the gas can reach in the envelope
//! (lighter gases get more fraction bits), so every extensive output keeps
//! about 1e-6 relative resolution down to 1 bar.
//!
//! Per sample: one 64/32 division for the density, one 64/64 division per
//! settled-pressure Newton step, a handful of 32×32→64 multiplies; no float.

use super::{SETTLE_ITERATIONS, SETTLE_SLOPE_MIN};
use crate::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
use crate::envelope as env;
use crate::fx::{self, Coef, sat_u32, shr_round, shr_round_i64};
use crate::model::{CompressibilityFx, ZPointFx};
use crate::{Error, SetupFx, Status};

/// One content estimate, fixed-point form (formats in [`crate::fx`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Content {
    /// Absolute pressure used, Pa (the sample, clamped to the envelope).
    pub pressure_pa: fx::Pressure,
    /// Temperature used, K (the sample, clamped to the envelope).
    pub temperature_k: fx::Temperature,
    /// Gas density, kg/m³.
    pub density_kg_m3: fx::Density,
    /// Gas mass in the tank, kg.
    pub mass_kg: fx::Mass,
    /// Amount of substance in the tank, mol.
    pub amount_mol: fx::Amount,
    /// Volume the content would take at the standard condition, m³.
    pub standard_volume_m3: fx::Volume,
    /// Pressure the same content would have at the settled reference
    /// temperature, absolute, Pa.
    pub settled_pressure_pa: fx::Pressure,
    /// Content as a fraction of the rated content (1 = full).
    pub fill_fraction: fx::Fraction,
    /// The gas model's answer at (p, T): Z and its slopes.
    pub z: ZPointFx,
    /// Vessel volume over water capacity, V/V₀.
    pub vessel_factor: fx::Compressibility,
    /// What the reader must know about these numbers.
    pub status: Status,
}

/// Fraction bits of the raw formats used below.
const P_FRAC: u32 = 4;
const T_FRAC: u32 = 16;
const Z_FRAC: u32 = 30;
/// Fraction bits of `Density` and `Fraction`.
const OUT_FRAC: u32 = 32;
/// Fraction bits of `Mass`, `Amount` and `Volume`.
const EXT_FRAC: u32 = 40;
/// One standard atmosphere in `Pressure` bits (101 325 Pa × 16, exact).
const P_ATM_RAW: u32 = 101_325 * 16;
/// 1.0 in Q30 (`Compressibility` bits).
const ONE_Q30: i64 = 1 << 30;
/// Pa → MPa.
const PER_MPA: Coef = Coef::from_f64(1e-6);
/// Molar gas constant, J/(mol·K).
const R: Coef = Coef::from_f64(MOLAR_GAS_CONSTANT_J_MOL_K);
/// [`SETTLE_SLOPE_MIN`] in Q30.
const SLOPE_MIN_Q30: i64 = (SETTLE_SLOPE_MIN * (1u64 << 30) as f64) as i64;

/// Prepared content estimator: a setup, a gas model and the fixed-point
/// constants derived from them (all divisions happen here, once).
#[derive(Clone, Debug)]
pub struct Estimator<M> {
    setup: SetupFx,
    model: M,
    /// M/R, kg·K/J.
    k: Coef,
    /// Internal density scale: ρ_int = ρ·2^rho_shift.
    rho_shift: u32,
    /// Right shift from the density quotient to ρ_int.
    rho_q_shift: i32,
    /// Elastic expansion per Pa.
    elastic: Coef,
    /// ρv at the rated condition, internal density scale.
    rho_v_rated: u32,
    /// Outputs per unit ρv.
    mass: Coef,
    fraction: Coef,
    amount: Coef,
    standard_volume: Coef,
    /// τ per unit ρv: R·T_ref/M, Pa per kg/m³.
    target: Coef,
    /// 1/T_ref, per K.
    inv_t_ref: Coef,
    /// Flags raised while preparing (model range at the rated or standard condition).
    setup_status: Status,
}

impl<M: CompressibilityFx> Estimator<M> {
    /// Prepares an estimator. Fails when the setup is out of range, the model
    /// is for another gas, or the model is two-phase at the rated or standard
    /// condition.
    pub fn new(setup: SetupFx, model: M) -> Result<Self, Error> {
        setup.validate()?;
        if model.gas() != setup.gas {
            return Err(Error::ModelUnusable("gas of the setup"));
        }
        let gas = setup.gas.info();
        let k = gas.m_over_r;
        let tank = setup.tank;

        // Largest density reachable: p_max·(M/R)/(T_min·Z_floor); it sets the
        // internal density scale.
        let inv_t_min = recip(Coef::from_raw(
            env::TEMPERATURE_MIN.to_bits() as u64,
            T_FRAC,
        ))?;
        let inv_z_floor = Coef::from_raw(model.z_floor().to_bits() as u64, Z_FRAC)
            .recip()
            .ok_or(Error::ModelUnusable("lowest compressibility factor"))?;
        let bound = Coef::from_raw(env::PRESSURE_MAX.to_bits() as u64, P_FRAC)
            .mul(k)
            .mul(inv_t_min)
            .mul(inv_z_floor);
        // One bit of headroom for ρv = ρ·V/V₀ (V/V₀ < 2 for accepted tanks).
        let rho_shift = (bound.shift() - 1).clamp(8, 31) as u32;

        let mass = Coef::from_raw(tank.water_capacity_m3.to_bits(), EXT_FRAC);
        let amount = mass.mul(gas.inv_molar_mass);
        let mut est = Estimator {
            setup,
            model,
            k,
            rho_shift,
            rho_q_shift: k.shift() - 17 - rho_shift as i32,
            elastic: Coef::from_raw(tank.elastic_expansion_per_mpa.to_bits() as u64, 32)
                .mul(PER_MPA),
            rho_v_rated: 0,
            mass,
            fraction: Coef::ZERO,
            amount,
            standard_volume: Coef::ZERO,
            target: R
                .mul(Coef::from_raw(
                    setup.settled_reference_k.to_bits() as u64,
                    T_FRAC,
                ))
                .mul(gas.inv_molar_mass),
            inv_t_ref: recip(Coef::from_raw(
                setup.settled_reference_k.to_bits() as u64,
                T_FRAC,
            ))?,
            setup_status: Status::OK,
        };

        let (p_r, t_r) = (tank.rated_pressure_pa, tank.rated_temperature_k);
        let zr = est.model.z_fx(p_r, t_r);
        if zr.flags.contains(Status::TWO_PHASE) {
            return Err(Error::ModelUnusable("rated condition"));
        }
        let (rho, _) = est.density(p_r.to_bits(), t_r.to_bits(), zr.z.to_bits());
        let vf = est.vessel_factor(p_r.to_bits(), t_r.to_bits());
        let (rho_v_rated, _) = mul_q30(rho, vf);
        est.rho_v_rated = rho_v_rated;
        est.fraction = Coef::from_raw(rho_v_rated as u64, rho_shift)
            .recip()
            .ok_or(Error::ModelUnusable("rated condition"))?;

        let std = setup.standard;
        let zs = est.model.z_fx(std.pressure_pa, std.temperature_k);
        if zs.flags.contains(Status::TWO_PHASE) {
            return Err(Error::ModelUnusable("standard condition"));
        }
        est.standard_volume = amount
            .mul(zs.z_coef())
            .mul(R)
            .mul(Coef::from_raw(std.temperature_k.to_bits() as u64, T_FRAC))
            .mul(recip(Coef::from_raw(
                std.pressure_pa.to_bits() as u64,
                P_FRAC,
            ))?);
        est.setup_status = (zr.flags | zs.flags) & Status::MODEL_OUT_OF_RANGE;
        Ok(est)
    }

    /// The setup this estimator was prepared for.
    pub fn setup(&self) -> &SetupFx {
        &self.setup
    }

    /// The gas model.
    pub fn model(&self) -> &M {
        &self.model
    }

    /// Mass at the rated condition (rated pressure and temperature), kg.
    pub fn rated_mass_kg(&self) -> fx::Mass {
        let (raw, _) = self.mass.scale(self.rho_v_rated, self.rho_shift, EXT_FRAC);
        fx::Mass::from_bits(raw)
    }

    /// Estimates the content from an absolute pressure and a gas temperature.
    /// Never fails: samples outside the envelope are clamped and flagged, and
    /// outputs that do not fit their format saturate with
    /// [`Status::SATURATED`].
    pub fn estimate(&self, pressure: fx::Pressure, temperature: fx::Temperature) -> Content {
        let (p, t, mut status) = clamp_inputs(pressure, temperature);
        status |= self.setup_status;

        let z = self
            .model
            .z_fx(fx::Pressure::from_bits(p), fx::Temperature::from_bits(t));
        status |= z.flags;
        let (density, sat_density) = self.density(p, t, z.z.to_bits());
        let vessel_factor = self.vessel_factor(p, t);
        let (rho_v, sat_rho_v) = mul_q30(density, vessel_factor);
        let (settled, settle_status) = self.settle(rho_v, z.z.to_bits());
        status |= settle_status;

        let mut saturated = sat_density || sat_rho_v;
        let mut out = |c: Coef, frac: u32| {
            let (raw, sat) = c.scale(rho_v, self.rho_shift, frac);
            saturated |= sat;
            raw
        };
        let mass_kg = fx::Mass::from_bits(out(self.mass, EXT_FRAC));
        let amount_mol = fx::Amount::from_bits(out(self.amount, EXT_FRAC));
        let standard_volume_m3 = fx::Volume::from_bits(out(self.standard_volume, EXT_FRAC));
        let fill_fraction = fx::Fraction::from_bits(out(self.fraction, OUT_FRAC));
        if saturated {
            status |= Status::SATURATED;
        }

        Content {
            pressure_pa: fx::Pressure::from_bits(p),
            temperature_k: fx::Temperature::from_bits(t),
            density_kg_m3: fx::Density::from_bits((density as u64) << (OUT_FRAC - self.rho_shift)),
            mass_kg,
            amount_mol,
            standard_volume_m3,
            settled_pressure_pa: fx::Pressure::from_bits(settled),
            fill_fraction,
            z,
            vessel_factor: fx::Compressibility::from_bits(vessel_factor),
            status,
        }
    }

    /// ρ = p·M/(Z·R·T) at the internal density scale; the flag is true when
    /// the result saturated. `p`, `t`, `z` are raw `Pressure`,
    /// `Temperature` and `Compressibility` bits, `t` inside the envelope.
    fn density(&self, p: u32, t: u32, z: u32) -> (u32, bool) {
        // T·Z: ≤ 423.15 K × 4 < 2^11, at 2^-46 → < 2^57; kept to 2^-21 in 32 bits.
        let den = (t as u64 * z as u64).saturating_add(1 << 24) >> 25;
        let (den, _) = sat_u32(den);
        if den == 0 {
            return (u32::MAX, true);
        }
        // p·(M/R) at 2^-(4 + k.shift) over T·Z at 2^-21: ρ at 2^-(k.shift − 17).
        let q = (p as u64 * self.k.mantissa() as u64) / den as u64;
        let (rho, over) = shr_round(q, self.rho_q_shift);
        let (rho, sat) = sat_u32(rho);
        (rho, over || sat)
    }

    /// V/V₀ at (p, T) in Q30 (`Compressibility` bits).
    fn vessel_factor(&self, p: u32, t: u32) -> u32 {
        let tank = &self.setup.tank;
        let mut v = ONE_Q30;
        if !self.elastic.is_zero() {
            let dp = p as i64 - P_ATM_RAW as i64;
            // |dp| < 2^31 (p ≤ 2^32 − 1 bits is never used below 0 − p_atm).
            let mag = dp.unsigned_abs().min(u32::MAX as u64) as u32;
            let (e, _) = self.elastic.scale(mag, P_FRAC, Z_FRAC);
            v += if dp < 0 { -(e as i64) } else { e as i64 };
        }
        let beta_t = tank.thermal_expansion_per_k.to_bits() as i64;
        if beta_t != 0 {
            let dt = t as i64 - tank.rated_temperature_k.to_bits() as i64;
            // 2^-16 K × 2^-32 /K = 2^-48 → Q30.
            v += shr_round_i64(dt * beta_t, 18);
        }
        // Accepted expansions keep V/V₀ within 0.5 … 2 for any pressure format value.
        v.clamp(0, u32::MAX as i64) as u32
    }

    /// The pressure that a content given as a fill fraction develops at the
    /// temperature `temperature` in this tank: the same bounded Newton solver
    /// as the settled pressure, at another temperature. Used for the
    /// over-pressure limit (the rated content, fraction 1, at the present
    /// temperature) and for predicted settled pressures. The fraction is
    /// clamped to 0…16 and the temperature to the envelope. Cost: two
    /// constant products plus the solver (one 64/64 division per step).
    pub fn pressure_at(
        &self,
        fill_fraction: fx::Fraction,
        temperature: fx::Temperature,
    ) -> (fx::Pressure, Status) {
        // Fraction Q32 clamped below 16 → Q28 in 32 bits.
        let f_q28 = (fill_fraction.to_bits().min((16u64 << 32) - 1) >> 4) as u32;
        let t = temperature.to_bits().clamp(
            env::TEMPERATURE_MIN.to_bits(),
            env::TEMPERATURE_MAX.to_bits(),
        );
        // ρv = f·ρv_rated, internal density scale (≤ 16 × rated, see new()).
        let (rho_v, over) = shr_round(f_q28 as u64 * self.rho_v_rated as u64, 28);
        let (rho_v, sat) = sat_u32(rho_v);
        // τ per unit ρv at t: R·T_ref/M × t/T_ref.
        let per = self
            .target
            .mul(Coef::from_raw(t as u64, T_FRAC))
            .mul(self.inv_t_ref);
        let (p, mut status) =
            self.solve_pressure(per, fx::Temperature::from_bits(t), rho_v, ONE_Q30 as u32);
        if over || sat {
            status |= Status::SATURATED;
        }
        (fx::Pressure::from_bits(p), status)
    }

    /// Settled pressure (raw `Pressure` bits) for the content ρv, seeded with
    /// Z at the sample (raw `Compressibility` bits).
    fn settle(&self, rho_v: u32, z_now: u32) -> (u32, Status) {
        self.solve_pressure(self.target, self.setup.settled_reference_k, rho_v, z_now)
    }

    /// Solves p·f(p, t_ref) = τ·Z(p, t_ref) for p (raw `Pressure` bits) with
    /// τ = `per_rho_v`·ρv, seeded with τ·`z_now`.
    fn solve_pressure(
        &self,
        per_rho_v: Coef,
        t_ref: fx::Temperature,
        rho_v: u32,
        z_now: u32,
    ) -> (u32, Status) {
        let mut status = Status::OK;
        // τ = ρv·R·T_ref/M in Pressure bits.
        let (target, over) = per_rho_v.scale(rho_v, self.rho_shift, P_FRAC);
        let (target, sat) = sat_u32(target);
        if over || sat {
            status |= Status::SATURATED;
        }
        // τ in MPa at 2^-20 (≤ 268.5 MPa → < 2^29).
        let (target_mpa, _) = PER_MPA.scale(target, P_FRAC, 20);
        let target_mpa = target_mpa as i64;

        let (mut p, _) = mul_q30(target, z_now);
        let mut flags = Status::OK;
        let mut converged = false;
        for _ in 0..SETTLE_ITERATIONS {
            let z = self.model.z_fx(fx::Pressure::from_bits(p), t_ref);
            flags = z.flags;
            let vf = self.vessel_factor(p, t_ref.to_bits());
            let pv = (p as u64 * vf as u64 + (1 << 29)) >> 30;
            let tz = (target as u64 * z.z.to_bits() as u64 + (1 << 29)) >> 30;
            let phi = (pv as i64 - tz as i64).clamp(-(1 << 32), 1 << 32);
            let (ep, _) = self.elastic.scale(p, P_FRAC, Z_FRAC);
            // τ·∂Z/∂p: 2^-20 MPa × 2^-24 /MPa = 2^-44 → Q30.
            let tdz = shr_round_i64(target_mpa * z.dz_dp_per_mpa.to_bits() as i64, 14);
            let slope = (vf as i64 + ep as i64 - tdz).max(SLOPE_MIN_Q30);
            let step = (phi << 30) / slope;
            p = (p as i64 - step).clamp(0, u32::MAX as i64) as u32;
            // Converged when the step is below 2^-16 of p: device tables
            // resolve Z to about 1e-5, so smaller steps only chase rounding
            // (Newton converges quadratically, so the error left is far
            // smaller than the last step).
            if step.unsigned_abs() <= (p as u64 >> 16).max(4) {
                converged = true;
                break;
            }
        }
        if !converged {
            status |= Status::NOT_CONVERGED;
        }
        if p == u32::MAX {
            status |= Status::SATURATED;
        }
        if flags.contains(Status::TWO_PHASE) {
            status |= Status::SETTLED_TWO_PHASE;
        }
        status |= flags & Status::MODEL_OUT_OF_RANGE;
        (p, status)
    }
}

impl ZPointFx {
    /// Z as a prepared constant.
    fn z_coef(&self) -> Coef {
        Coef::from_raw(self.z.to_bits() as u64, Z_FRAC)
    }
}

/// Reciprocal of a constant that cannot be zero by construction.
fn recip(c: Coef) -> Result<Coef, Error> {
    c.recip().ok_or(Error::ModelUnusable("reference condition"))
}

/// `a·b` with `b` in Q30, rounded; the flag is true when it saturated.
fn mul_q30(a: u32, b: u32) -> (u32, bool) {
    sat_u32((a as u64 * b as u64 + (1 << 29)) >> 30)
}

/// Limits a sample to the envelope (raw bits) and flags what was clamped.
fn clamp_inputs(p: fx::Pressure, t: fx::Temperature) -> (u32, u32, Status) {
    let mut status = Status::OK;
    let mut p = p.to_bits();
    if p > env::PRESSURE_MAX.to_bits() {
        p = env::PRESSURE_MAX.to_bits();
        status |= Status::PRESSURE_OUTSIDE_ENVELOPE;
    }
    let (lo, hi) = (
        env::TEMPERATURE_MIN.to_bits(),
        env::TEMPERATURE_MAX.to_bits(),
    );
    let t = t.to_bits();
    if t < lo || t > hi {
        status |= Status::TEMPERATURE_OUTSIDE_ENVELOPE;
    }
    (p, t.clamp(lo, hi), status)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Ideal;
    use crate::{Gas, Setup, Tank};

    fn est(gas: Gas) -> Estimator<Ideal> {
        let s = SetupFx::from_f64(&Setup::new(gas, Tank::new(0.05, 200e5))).unwrap();
        Estimator::new(s, Ideal::new(gas)).unwrap()
    }

    #[test]
    fn nitrogen_by_hand() {
        let e = est(Gas::Nitrogen);
        let c = e.estimate(
            fx::Pressure::from_num(200e5),
            fx::Temperature::from_num(308.15),
        );
        let rho = 200e5 * 0.028_013_48 / (MOLAR_GAS_CONSTANT_J_MOL_K * 308.15);
        assert!((c.density_kg_m3.to_num::<f64>() / rho - 1.0).abs() < 2e-7);
        assert!((c.mass_kg.to_num::<f64>() / (0.05 * rho) - 1.0).abs() < 2e-7);
        let ps = 200e5 * 288.15 / 308.15;
        assert!((c.settled_pressure_pa.to_num::<f64>() / ps - 1.0).abs() < 1e-7);
        assert!(c.status.is_ok(), "{}", c.status);
    }

    #[test]
    fn zero_pressure_gives_zero_content() {
        let e = est(Gas::Hydrogen);
        let c = e.estimate(fx::Pressure::ZERO, fx::Temperature::from_num(300));
        assert_eq!(c.mass_kg, fx::Mass::ZERO);
        assert_eq!(c.settled_pressure_pa, fx::Pressure::ZERO);
        assert!(c.status.is_ok());
    }

    #[test]
    fn extremes_never_panic_and_are_flagged() {
        for g in Gas::ALL {
            let e = est(g);
            for p in [0, 1, 1_599_999_999, 1_600_000_000, u32::MAX] {
                for t in [0, 1, 13_968_997, 27_731_560, u32::MAX] {
                    let c = e.estimate(fx::Pressure::from_bits(p), fx::Temperature::from_bits(t));
                    if p > 1_600_000_000 {
                        assert!(c.status.contains(Status::PRESSURE_OUTSIDE_ENVELOPE));
                    }
                    if !(13_968_998..=27_731_559).contains(&t) {
                        assert!(c.status.contains(Status::TEMPERATURE_OUTSIDE_ENVELOPE));
                    }
                }
            }
        }
    }
}
