//! Uncertainty of the content estimate, fixed-point form (the method is in
//! [`super`]; same steps and names as [`super::float`]).
//!
//! Cost per evaluation: one 64/32 division (1/(Z·T)), two integer square
//! roots of 64-bit values, about twenty 32×32→64 multiplies and a few wider
//! ones. The tracker evaluates it once per rate block, not per sample.

use fixed::types::{I8F24, U0F32};

use super::float::UncertaintyConfig;
use crate::content::fixed::{Content, Estimator};
use crate::fx::{self, Coef};
use crate::model::CompressibilityFx;
use crate::{Error, TankFx};

/// The declared standard uncertainties (k = 1) of the inputs, fixed-point
/// form (see [`UncertaintyConfig`] for meanings and limits).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct UncertaintyConfigFx {
    /// Full scale of the pressure sensor, Pa.
    pub pressure_full_scale_pa: fx::Pressure,
    /// Standard uncertainty of pressure, fraction of full scale.
    pub pressure_fs: U0F32,
    /// Standard uncertainty of pressure, fraction of reading.
    pub pressure_reading: U0F32,
    /// Standard uncertainty of temperature, K.
    pub temperature_k: fx::Temperature,
    /// Relative standard uncertainty of the water capacity.
    pub capacity: U0F32,
    /// Relative standard uncertainty of the gas model's density.
    pub model: U0F32,
}

impl UncertaintyConfigFx {
    /// Converts (rounding to nearest) and validates a float declaration.
    pub fn from_f64(c: &UncertaintyConfig<f64>) -> Result<Self, Error> {
        c.validate()?;
        let fx = UncertaintyConfigFx {
            pressure_full_scale_pa: fx::from_f64(c.pressure_full_scale_pa, "pressure full scale")?,
            pressure_fs: fx::from_f64(c.pressure_fs, "pressure uncertainty of full scale")?,
            pressure_reading: fx::from_f64(c.pressure_reading, "pressure uncertainty of reading")?,
            temperature_k: fx::from_f64(c.temperature_k, "temperature uncertainty")?,
            capacity: fx::from_f64(c.capacity, "capacity uncertainty")?,
            model: fx::from_f64(c.model, "model uncertainty")?,
        };
        fx.to_real::<f64>().validate()?;
        Ok(fx)
    }

    /// The exact float equivalent.
    pub fn to_real<F: crate::Real>(&self) -> UncertaintyConfig<F> {
        UncertaintyConfig {
            pressure_full_scale_pa: F::lit(fx::to_f64(self.pressure_full_scale_pa)),
            pressure_fs: F::lit(fx::to_f64(self.pressure_fs)),
            pressure_reading: F::lit(fx::to_f64(self.pressure_reading)),
            temperature_k: F::lit(fx::to_f64(self.temperature_k)),
            capacity: F::lit(fx::to_f64(self.capacity)),
            model: F::lit(fx::to_f64(self.model)),
        }
    }
}

/// Expanded uncertainties (k = 2) of one content estimate, fixed-point form.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct UncertaintyFx {
    /// Expanded uncertainty of the mass, kg (k = 2).
    pub mass_kg: fx::Mass,
    /// Expanded uncertainty of the fill fraction (k = 2).
    pub fill_fraction: fx::Fraction,
    /// Sensitivity coefficient c_p = ∂ln m/∂ln p (±128).
    pub c_p: I8F24,
    /// Sensitivity coefficient c_T = ∂ln m/∂ln T (±128).
    pub c_t: I8F24,
}

/// Fraction bits of the internal fraction-of-rated-content terms.
const Q: u32 = 28;
/// Fraction bits of 1/(Z·T) and 1/Z.
const INV: u32 = 36;
/// Largest term kept (4 rated contents in Q28): six squares fit in u64.
const TERM_MAX: u64 = 1 << 30;
/// Pa → MPa.
const PER_MPA: Coef = Coef::from_f64(1e-6);

/// Prepared uncertainty evaluation for one fixed-point estimator.
#[derive(Clone, Copy, Debug)]
pub struct EvaluatorFx {
    cfg: UncertaintyConfigFx,
    tank: TankFx,
    /// u_FS·p_FS·V₀·(M/R)/m_rated: the full-scale term per unit f/(Z·T).
    fs_term: Coef,
    /// u_rd, u_T, u_V, u_Z as constants.
    reading: Coef,
    temperature: Coef,
    capacity: Coef,
    model: Coef,
    /// The rated mass, per unit fraction.
    rated_mass: Coef,
}

impl EvaluatorFx {
    /// Prepares the evaluation for the estimates of `est` (all divisions here).
    pub fn new<M: CompressibilityFx>(
        cfg: UncertaintyConfigFx,
        est: &Estimator<M>,
    ) -> Result<Self, Error> {
        cfg.to_real::<f64>().validate()?;
        let setup = est.setup();
        let gas = setup.gas.info();
        let rated_mass = Coef::from_raw(est.rated_mass_kg().to_bits(), 40);
        let inv_rated = rated_mass
            .recip()
            .ok_or(Error::ModelUnusable("rated condition"))?;
        let frac = |v: U0F32| Coef::from_raw(v.to_bits() as u64, 32);
        Ok(EvaluatorFx {
            cfg,
            tank: setup.tank,
            fs_term: frac(cfg.pressure_fs)
                .mul(Coef::from_raw(
                    cfg.pressure_full_scale_pa.to_bits() as u64,
                    4,
                ))
                .mul(Coef::from_raw(setup.tank.water_capacity_m3.to_bits(), 40))
                .mul(gas.m_over_r)
                .mul(inv_rated),
            reading: frac(cfg.pressure_reading),
            temperature: Coef::from_raw(cfg.temperature_k.to_bits() as u64, 16),
            capacity: frac(cfg.capacity),
            model: frac(cfg.model),
            rated_mass,
        })
    }

    /// The declared input uncertainties.
    pub fn config(&self) -> &UncertaintyConfigFx {
        &self.cfg
    }

    /// Expanded uncertainties (k = 2) of the mass and fill fraction of `c`.
    pub fn evaluate(&self, c: &Content) -> UncertaintyFx {
        let (p, t, z) = (
            c.pressure_pa.to_bits(),
            c.temperature_k.to_bits(),
            c.z.z.to_bits(),
        );
        // 1/(Z·T): Z·T at 2^-46 kept to 2^-21 (≤ 4 × 423.2 K < 2^11 → < 2^32),
        // then 2^57 / that = 1/(Z·T) at 2^-36 (≤ 1/(0.05 × 213 K) < 2^27).
        let zt = ((t as u64 * z as u64 + (1 << 24)) >> 25).max(1);
        let inv_zt = (1u64 << 57) / zt;
        // 1/Z = T/(Z·T) at 2^-36 (Z ≥ 2^-4 by the model floors in use: < 2^41).
        let inv_z = (t as u128 * inv_zt as u128) >> 16;

        // c_p = 1 − p·(∂Z/∂p)/Z + e_p·p, Q30.
        let (p_mpa, _) = PER_MPA.scale(p, 4, 20);
        let p_dz = p_mpa as i128 * c.z.dz_dp_per_mpa.to_bits() as i128; // 2^-44
        let p_dz_z = (p_dz * inv_z as i128) >> (44 + INV - 30);
        let ep = (self.tank.elastic_expansion_per_mpa.to_bits() as i128 * p_mpa as i128) >> 22;
        let c_p = (1i128 << 30) - p_dz_z + ep;
        // c_T = −1 − T·(∂Z/∂T)/Z + e_T·T, Q30.
        let t_dz = t as i128 * c.z.dz_dt_per_k.to_bits() as i128; // 2^-40
        let t_dz_z = (t_dz * inv_z as i128) >> (40 + INV - 30);
        let et = (self.tank.thermal_expansion_per_k.to_bits() as i128 * t as i128) >> 18;
        let c_t = -(1i128 << 30) - t_dz_z + et;
        let (c_p_abs, c_t_abs) = (c_p.unsigned_abs(), c_t.unsigned_abs());

        // Terms as fractions of the rated content, Q28.
        let f = (c.fill_fraction.to_bits() >> 4).min(u32::MAX as u64) as u32;
        let (fs, _) = self.fs_term.scale(sat(inv_zt), INV, Q);
        let fs = mul_q30(mul_q30(fs, c.vessel_factor.to_bits() as u128), c_p_abs);
        let (rd, _) = self.reading.scale(f, Q, Q);
        let rd = mul_q30(rd, c_p_abs);
        let (tf, _) = self.temperature.scale(f, Q, Q);
        // ×1/T = Z/(Z·T): inv_zt·Z at 2^-66 → 2^-36.
        let inv_t = (inv_zt as u128 * z as u128) >> 30;
        let tt = mul_q30(
            ((tf as u128 * inv_t) >> INV).min(TERM_MAX as u128) as u64,
            c_t_abs,
        );
        let (cap, _) = self.capacity.scale(f, Q, Q);
        let (model, _) = self.model.scale(f, Q, Q);

        let sq = |v: u64| {
            let v = v.min(TERM_MAX);
            v * v
        };
        let common = sq(fs) + sq(rd) + sq(tt);
        let u_mass = isqrt(common + sq(cap) + sq(model));
        let u_frac = isqrt(common + 2 * sq(model));
        let (mass, _) = self.rated_mass.scale(u_mass.saturating_mul(2), Q, 40);
        UncertaintyFx {
            mass_kg: fx::Mass::from_bits(mass),
            fill_fraction: fx::Fraction::from_bits((u_frac as u64) << 5),
            c_p: I8F24::from_bits((c_p >> 6).clamp(i32::MIN as i128, i32::MAX as i128) as i32),
            c_t: I8F24::from_bits((c_t >> 6).clamp(i32::MIN as i128, i32::MAX as i128) as i32),
        }
    }
}

/// `a·b` with `b` in Q30, rounded, saturated to the term limit.
fn mul_q30(a: u64, b: u128) -> u64 {
    let v = (a as u128 * b + (1 << 29)) >> 30;
    v.min(TERM_MAX as u128) as u64
}

/// Narrows to `u32`, clamping.
fn sat(v: u64) -> u32 {
    v.min(u32::MAX as u64) as u32
}

/// ⌊√v⌋ of a 64-bit value, bit by bit (32 rounds of shifts and compares).
pub fn isqrt(v: u64) -> u32 {
    let mut rem = v;
    let mut root = 0u64;
    let mut bit = 1u64 << 62;
    while bit > rem {
        bit >>= 2;
    }
    while bit != 0 {
        if rem >= root + bit {
            rem -= root + bit;
            root = (root >> 1) + bit;
        } else {
            root >>= 1;
        }
        bit >>= 2;
    }
    root as u32
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn isqrt_exact() {
        for v in [
            0u64,
            1,
            2,
            3,
            4,
            15,
            16,
            17,
            1 << 40,
            u64::MAX,
            (1 << 62) - 1,
        ] {
            let r = isqrt(v) as u64;
            assert!(r * r <= v, "{v}");
            assert!((r + 1).checked_mul(r + 1).is_none_or(|s| s > v), "{v}");
        }
    }
}
