//! Uncertainty of the content estimate, float form (the method is in
//! [`super`]).

use crate::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
use crate::content::float::{Content, Estimator};
use crate::model::Compressibility;
use crate::{Error, Real, Tank};

/// The declared standard uncertainties (k = 1) of the inputs, float form.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct UncertaintyConfig<F = f64> {
    /// Full scale of the pressure sensor, Pa (what the full-scale part refers
    /// to). Accepted: 1 bar … 2000 bar.
    pub pressure_full_scale_pa: F,
    /// Standard uncertainty of pressure, fraction of full scale. Accepted: 0 … 0.5.
    pub pressure_fs: F,
    /// Standard uncertainty of pressure, fraction of reading. Accepted: 0 … 0.5.
    pub pressure_reading: F,
    /// Standard uncertainty of temperature, K. Accepted: 0 … 50 K.
    pub temperature_k: F,
    /// Relative standard uncertainty of the water capacity. Accepted: 0 … 0.5.
    pub capacity: F,
    /// Relative standard uncertainty of the gas model's density (of Z).
    /// Accepted: 0 … 0.5.
    pub model: F,
}

impl UncertaintyConfig<f64> {
    /// An example declaration: a 0–`full_scale_pa` sensor with ±0.25 % of
    /// full scale and ±0.1 % of reading (limits, rectangular: u = a/√3), a
    /// temperature sensor good to 0.5 K standard uncertainty, water capacity
    /// known to 0.5 % and a model good to 0.1 % (all standard uncertainties).
    /// Invented figures of a typical industrial pair; declare your own.
    pub fn example(full_scale_pa: f64) -> Self {
        UncertaintyConfig {
            pressure_full_scale_pa: full_scale_pa,
            pressure_fs: 0.0025 / SQRT_3,
            pressure_reading: 0.001 / SQRT_3,
            temperature_k: 0.5,
            capacity: 0.005,
            model: 0.001,
        }
    }
}

/// √3, for rectangular distributions (GUM 4.3.7).
pub const SQRT_3: f64 = 1.732_050_807_568_877_2;

impl<F: Real> UncertaintyConfig<F> {
    /// Checks every field against its accepted range.
    pub fn validate(&self) -> Result<(), Error> {
        let checks = [
            (self.pressure_full_scale_pa, 1e5, 2e8, "pressure full scale"),
            (
                self.pressure_fs,
                0.0,
                0.5,
                "pressure uncertainty of full scale",
            ),
            (
                self.pressure_reading,
                0.0,
                0.5,
                "pressure uncertainty of reading",
            ),
            (self.temperature_k, 0.0, 50.0, "temperature uncertainty"),
            (self.capacity, 0.0, 0.5, "capacity uncertainty"),
            (self.model, 0.0, 0.5, "model uncertainty"),
        ];
        for (v, lo, hi, what) in checks {
            if !v.is_finite() {
                return Err(Error::NotFinite(what));
            }
            // The limits are exact in the fixed-point form, so exact
            // conversions of an accepted value are accepted too.
            let x = v.to_f64();
            if x < lo || x > hi {
                return Err(Error::OutOfRange(what));
            }
        }
        Ok(())
    }
}

/// Expanded uncertainties (k = 2) of one content estimate.
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Uncertainty<F = f64> {
    /// Expanded uncertainty of the mass, kg (k = 2).
    pub mass_kg: F,
    /// Expanded uncertainty of the fill fraction (k = 2).
    pub fill_fraction: F,
    /// Sensitivity coefficient c_p = ∂ln m/∂ln p.
    pub c_p: F,
    /// Sensitivity coefficient c_T = ∂ln m/∂ln T.
    pub c_t: F,
}

/// Prepared uncertainty evaluation for one estimator.
#[derive(Clone, Copy, Debug)]
pub struct Evaluator<F: Real> {
    cfg: UncertaintyConfig<F>,
    tank: Tank<F>,
    /// V₀·M/R, kg·K/Pa: m/p = this·f/(Z·T).
    mass_per_pressure: F,
    rated_mass_kg: F,
}

impl<F: Real> Evaluator<F> {
    /// Prepares the evaluation for the estimates of `est`.
    pub fn new<M: Compressibility<F>>(
        cfg: UncertaintyConfig<F>,
        est: &Estimator<F, M>,
    ) -> Result<Self, Error> {
        cfg.validate()?;
        let setup = est.setup();
        let gas = setup.gas.info();
        Ok(Evaluator {
            cfg,
            tank: setup.tank,
            mass_per_pressure: setup.tank.water_capacity_m3 * F::lit(gas.molar_mass_kg_mol)
                / F::lit(MOLAR_GAS_CONSTANT_J_MOL_K),
            rated_mass_kg: est.rated_mass_kg(),
        })
    }

    /// The declared input uncertainties.
    pub fn config(&self) -> &UncertaintyConfig<F> {
        &self.cfg
    }

    /// Expanded uncertainties (k = 2) of the mass and fill fraction of `c`.
    pub fn evaluate(&self, c: &Content<F>) -> Uncertainty<F> {
        let cfg = &self.cfg;
        let (p, t, z) = (c.pressure_pa, c.temperature_k, c.z.z);
        let m = c.mass_kg;
        let c_p = F::ONE - p * F::lit(1e-6) * c.z.dz_dp_per_mpa / z
            + self.tank.elastic_expansion_per_mpa * F::lit(1e-6) * p;
        let c_t = -F::ONE - t * c.z.dz_dt_per_k / z + self.tank.thermal_expansion_per_k * t;
        let (c_p_abs, c_t_abs) = (c_p.abs(), c_t.abs());
        let inv_rated = F::ONE / self.rated_mass_kg;
        // Terms as fractions of the rated content.
        let fs = c_p_abs
            * self.mass_per_pressure
            * c.vessel_factor
            * (cfg.pressure_fs * cfg.pressure_full_scale_pa)
            / (z * t)
            * inv_rated;
        let f = m * inv_rated;
        let rd = c_p_abs * f * cfg.pressure_reading;
        let tt = c_t_abs * f * cfg.temperature_k / t;
        let cap = f * cfg.capacity;
        let model = f * cfg.model;
        let common = fs * fs + rd * rd + tt * tt;
        let two = F::lit(2.0);
        Uncertainty {
            mass_kg: two * (common + cap * cap + model * model).sqrt() * self.rated_mass_kg,
            fill_fraction: two * (common + two * model * model).sqrt(),
            c_p,
            c_t,
        }
    }
}
