//! Uncertainty of the content estimate, fixed-point form (the method is in
//! [`super`]; same steps and names as [`super::float`]).
//!
//! Cost per evaluation: one 64/32 division (1/(Z·T)), two integer square
//! roots of 64-bit values, about twenty 32×32→64 multiplies and a few wider
//! ones. The tracker evaluates it once per rate block, not per sample, and
//! the rate budget once per block too (one more 64/32 division for 1/T,
//! about thirty wider multiplies, four integer square roots).

use crate::error::{Condition, UncertaintyInput};
use fixed::types::{I8F24, U0F32};

#[cfg(feature = "uncertainty")]
use super::float::GAS_SENSOR_UNSETTLED;
use super::float::{C_P_MIN, MAX_VESSEL_MS, R_OVER_CV, UncertaintyConfig, r_over_cv_class};
use crate::content::fixed::{Content, Estimator};
use crate::fx::{self, Coef};
use crate::model::CompressibilityFx;
use crate::time::Millis;
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
    /// Standard uncertainty of the temperature reading's lag behind the gas.
    pub temperature_lag: Millis,
    /// Relative standard uncertainty of the temperature sensor's slope.
    pub temperature_gain: U0F32,
}

impl UncertaintyConfigFx {
    /// Converts (rounding to nearest) and validates a float declaration.
    pub fn from_f64(c: &UncertaintyConfig<f64>) -> Result<Self, Error> {
        c.validate()?;
        let fx = UncertaintyConfigFx {
            pressure_full_scale_pa: fx::from_f64(
                c.pressure_full_scale_pa,
                UncertaintyInput::PressureFullScale,
            )?,
            pressure_fs: fx::from_f64(c.pressure_fs, UncertaintyInput::PressureOfFullScale)?,
            pressure_reading: fx::from_f64(
                c.pressure_reading,
                UncertaintyInput::PressureOfReading,
            )?,
            temperature_k: fx::from_f64(c.temperature_k, UncertaintyInput::Temperature)?,
            capacity: fx::from_f64(c.capacity, UncertaintyInput::Capacity)?,
            model: fx::from_f64(c.model, UncertaintyInput::Model)?,
            temperature_lag: c.temperature_lag,
            temperature_gain: fx::from_f64(c.temperature_gain, UncertaintyInput::TemperatureGain)?,
        };
        fx.to_real::<f64>().validate()?;
        Ok(fx)
    }

    /// The declaration of [`UncertaintyConfig::example`] for a pressure
    /// sensor of `full_scale` (integer constants, for a device without a
    /// stored declaration): pressure 0.25 % of full scale and 0.1 % of
    /// reading (each /√3), temperature 0.5 K, capacity 0.5 %, model 0.1 %,
    /// temperature lag 10 min, temperature gain 0.5 %/√3.
    pub fn example(full_scale: fx::Pressure) -> UncertaintyConfigFx {
        UncertaintyConfigFx {
            pressure_full_scale_pa: full_scale,
            // U0F32 bits of 0.0025/√3, 0.001/√3, 0.005, 0.001, 0.005/√3,
            // rounded to nearest.
            pressure_fs: U0F32::from_bits(6_199_251),
            pressure_reading: U0F32::from_bits(2_479_701),
            temperature_k: fx::Temperature::from_bits(1 << 15),
            capacity: U0F32::from_bits(21_474_836),
            model: U0F32::from_bits(4_294_967),
            temperature_lag: super::float::DEFAULT_TEMPERATURE_LAG,
            temperature_gain: U0F32::from_bits(12_398_503),
        }
    }

    /// Checks every field as [`UncertaintyConfig::validate`] does, with
    /// integer comparisons only: full scale 1 bar … 2000 bar, the relative
    /// parts ≤ 0.5, temperature ≤ 50 K, lag ≤
    /// [`MAX_TEMPERATURE_LAG`](super::float::MAX_TEMPERATURE_LAG).
    pub fn validate(&self) -> Result<(), Error> {
        // 1e5 Pa and 2e8 Pa in Pressure (U28F4) bits.
        let fs = self.pressure_full_scale_pa.to_bits();
        if !(1_600_000..=3_200_000_000).contains(&fs) {
            return Err(Error::OutOfRange(
                UncertaintyInput::PressureFullScale.into(),
            ));
        }
        let half = 1u32 << 31;
        for (v, what) in [
            (self.pressure_fs, UncertaintyInput::PressureOfFullScale),
            (self.pressure_reading, UncertaintyInput::PressureOfReading),
            (self.capacity, UncertaintyInput::Capacity),
            (self.model, UncertaintyInput::Model),
            (self.temperature_gain, UncertaintyInput::TemperatureGain),
        ] {
            if v.to_bits() > half {
                return Err(Error::OutOfRange(what.into()));
            }
        }
        if self.temperature_k.to_bits() > 50 << 16 {
            return Err(Error::OutOfRange(UncertaintyInput::Temperature.into()));
        }
        if self.temperature_lag > super::float::MAX_TEMPERATURE_LAG {
            return Err(Error::OutOfRange(UncertaintyInput::TemperatureLag.into()));
        }
        Ok(())
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
            temperature_lag: self.temperature_lag,
            temperature_gain: F::lit(fx::to_f64(self.temperature_gain)),
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

/// ms → h.
const PER_HOUR_MS: Coef = Coef::from_f64(1.0 / 3_600_000.0);
/// R/c_v of the ideal gas by class (see `super::float::ideal_r_over_cv`),
/// converted at compile time.
const R_OVER_CV_FX: [Coef; 5] = [
    Coef::from_f64(R_OVER_CV[0]),
    Coef::from_f64(R_OVER_CV[1]),
    Coef::from_f64(R_OVER_CV[2]),
    Coef::from_f64(R_OVER_CV[3]),
    Coef::from_f64(R_OVER_CV[4]),
];
/// The smallest c_p taken, Q30.
const C_P_MIN_Q30: u64 = (C_P_MIN * (1u64 << 30) as f64) as u64;
/// Fraction bits of the rate budget (fraction of the rated content, per
/// hour for rates), like the tracker's fits.
const QR: u32 = 36;
/// Fraction bits of temperatures, their rates and 1/T in the rate budget.
const QT: u32 = 32;
/// Fraction bits of the window's mean temperature.
pub(crate) const QT_MEAN: u32 = 23;

/// What a rate window tells the rate budget, fixed-point form (see
/// [`super::float`]'s `RateWindow`).
#[derive(Clone, Copy, Debug)]
pub(crate) struct RateWindowFx {
    /// dF/dt, per hour, Q36 (signed).
    pub slope_per_h: i64,
    /// Standard uncertainty of the slope from the fit, per hour, Q36.
    pub u_fit_per_h: u64,
    /// Mean fill fraction, Q36.
    pub fill_fraction: i64,
    /// Mean temperature, K, Q23.
    pub temperature: u32,
    /// dT/dt, K/h, Q32 (|·| ≤ 2^20 K/h).
    pub dt_per_h: i64,
    /// d²T/dt², K/h², Q32 (|·| ≤ 2^30 K/h²).
    pub d2t_per_h2: i64,
    /// Fill fraction above the reserve at the window's end, Q36.
    pub left_fraction: i64,
    /// The reserve fraction, Q36.
    pub reserve_fraction: i64,
    /// Blocks in the fit.
    pub blocks: u32,
    /// Blocks per hour.
    pub blocks_per_hour: u32,
}

/// Standard uncertainties (k = 1) behind the rate and the time to empty,
/// fixed-point form.
#[derive(Clone, Copy, Debug)]
pub(crate) struct RateBudgetFx {
    /// Of the consumption rate, per hour, Q36.
    pub rate_per_h: u64,
    /// Of the time to empty t, as the rate spread rate × u(t)/t, per hour,
    /// Q36.
    pub time_to_empty_per_h: u64,
    /// Of the fill fraction, from the gas–sensor temperature difference,
    /// Q36.
    pub gas_sensor: u64,
    /// Its part from the draw's own cooling, Q36.
    pub draw: u64,
}

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
    /// The temperature lag uncertainty in hours; the temperature gain.
    lag_h: Coef,
    gain: Coef,
    /// The rated mass, per unit fraction.
    #[cfg(feature = "uncertainty")]
    rated_mass: Coef,
    /// The vessel's gas–wall time constant at the rated content in hours
    /// (`None`: the gas–sensor term is left out) and R/c_v of the ideal gas
    /// (see [`super::float`]).
    vessel_h: Option<Coef>,
    r_over_cv: Coef,
}

/// The sensitivities of one estimate (Q30) and its terms (standard
/// uncertainties, fractions of the rated content, Q28): worked out once
/// per block close ([`EvaluatorFx::terms`]) for both the rate budget and
/// the content's uncertainty.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Terms {
    c_p: i128,
    c_t: i128,
    fs: u64,
    /// The content's own terms (feature `uncertainty`).
    #[cfg(feature = "uncertainty")]
    rd: u64,
    #[cfg(feature = "uncertainty")]
    tt: u64,
    #[cfg(feature = "uncertainty")]
    cap: u64,
    #[cfg(feature = "uncertainty")]
    model: u64,
}

impl EvaluatorFx {
    /// Prepares the evaluation for the estimates of `est` (all divisions here).
    pub fn new<M: CompressibilityFx>(
        cfg: UncertaintyConfigFx,
        est: &Estimator<M>,
    ) -> Result<Self, Error> {
        cfg.validate()?;
        let setup = est.setup();
        let rated_mass = Coef::from_raw(est.rated_mass_kg().to_bits(), 40);
        let inv_rated = rated_mass
            .recip()
            .ok_or(Error::ModelUnusable(Condition::RatedCondition))?;
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
                .mul(setup.gas.m_over_r())
                .mul(inv_rated),
            reading: frac(cfg.pressure_reading),
            temperature: Coef::from_raw(cfg.temperature_k.to_bits() as u64, 16),
            capacity: frac(cfg.capacity),
            model: frac(cfg.model),
            lag_h: Coef::from_raw(cfg.temperature_lag.0, 0).mul(PER_HOUR_MS),
            gain: frac(cfg.temperature_gain),
            #[cfg(feature = "uncertainty")]
            rated_mass,
            vessel_h: None,
            r_over_cv: R_OVER_CV_FX
                .get(r_over_cv_class(setup.gas))
                .copied()
                .unwrap_or(R_OVER_CV_FX[0]),
        })
    }

    /// The same evaluation with the vessel's gas–wall time constant τ_v
    /// (see [`super::float::Evaluator::with_vessel_time_constant`]).
    pub fn with_vessel_time_constant(mut self, tau: Millis) -> Self {
        let v = tau.0.min(MAX_VESSEL_MS);
        self.vessel_h = (v > 0).then(|| Coef::from_raw(v, 0).mul(PER_HOUR_MS));
        self
    }

    /// The declared input uncertainties.
    pub fn config(&self) -> &UncertaintyConfigFx {
        &self.cfg
    }

    /// Sensitivity coefficients and terms of `c` (an estimate with its
    /// model slopes), for [`Self::rate`] and [`Self::evaluate_with`].
    pub(crate) fn terms(&self, c: &Content) -> Terms {
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
        let inv_z = fx::mul_u64_wide(t as u64, inv_zt) >> 16;

        // c_p = 1 − p·(∂Z/∂p)/Z + e_p·p, Q30.
        let (p_mpa, _) = PER_MPA.scale(p, 4, 20);
        let p_dz = fx::saturating_mul_i128(p_mpa as i128, c.z.dz_dp_per_mpa.to_bits() as i128); // 2^-44
        let p_dz_z = fx::saturating_mul_i128(p_dz, inv_z as i128) >> (44 + INV - 30);
        let ep = fx::saturating_mul_i128(
            self.tank.elastic_expansion_per_mpa.to_bits() as i128,
            p_mpa as i128,
        ) >> 22;
        let c_p = (1i128 << 30) - p_dz_z + ep;
        // c_T = −1 − T·(∂Z/∂T)/Z + e_T·T, Q30.
        let t_dz = fx::saturating_mul_i128(t as i128, c.z.dz_dt_per_k.to_bits() as i128); // 2^-40
        let t_dz_z = fx::saturating_mul_i128(t_dz, inv_z as i128) >> (40 + INV - 30);
        let et = fx::saturating_mul_i128(
            self.tank.thermal_expansion_per_k.to_bits() as i128,
            t as i128,
        ) >> 18;
        let c_t = -(1i128 << 30) - t_dz_z + et;
        let (c_p_abs, c_t_abs) = (c_p.unsigned_abs(), c_t.unsigned_abs());

        // Terms as fractions of the rated content, Q28.
        let f = (c.fill_fraction.to_bits() >> 4).min(u32::MAX as u64) as u32;
        let (fs, _) = self.fs_term.scale(sat(inv_zt), INV, Q);
        let fs = mul_q30(mul_q30(fs, c.vessel_factor.to_bits() as u128), c_p_abs);
        let m = |v: u64| v.min(TERM_MAX);
        #[cfg(feature = "uncertainty")]
        let (rd, tt, cap, model) = {
            let (rd, _) = self.reading.scale(f, Q, Q);
            let rd = mul_q30(rd, c_p_abs);
            let (tf, _) = self.temperature.scale(f, Q, Q);
            // ×1/T = Z/(Z·T): inv_zt·Z at 2^-66 → 2^-36.
            let inv_t = fx::mul_u64_wide(inv_zt, z as u64) >> 30;
            let tt = mul_q30(
                (fx::saturating_mul_u128(tf as u128, inv_t) >> INV).min(TERM_MAX as u128) as u64,
                c_t_abs,
            );
            let (cap, _) = self.capacity.scale(f, Q, Q);
            let (model, _) = self.model.scale(f, Q, Q);
            (m(rd), m(tt), m(cap), m(model))
        };
        #[cfg(not(feature = "uncertainty"))]
        let _ = (f, z, c_t_abs);
        Terms {
            c_p,
            c_t,
            fs: m(fs),
            #[cfg(feature = "uncertainty")]
            rd,
            #[cfg(feature = "uncertainty")]
            tt,
            #[cfg(feature = "uncertainty")]
            cap,
            #[cfg(feature = "uncertainty")]
            model,
        }
    }

    /// Expanded uncertainties (k = 2) of the mass and fill fraction of `c`,
    /// which must carry the model's slopes
    /// ([`Estimator::with_slopes`](crate::content::fixed::Estimator::with_slopes)).
    #[cfg(feature = "uncertainty")]
    pub fn evaluate(&self, c: &Content) -> UncertaintyFx {
        self.evaluate_with(&self.terms(c), 0, 0).0
    }

    /// Expanded uncertainties (k = 2) of `c` with the gas–sensor term
    /// `gas_sensor` (Q36, from [`Self::rate`]), and whether its part from
    /// the draw's cooling, `draw` (Q36), outweighs the rest of the fill
    /// fraction's budget (see [`super::float`]).
    #[cfg(feature = "uncertainty")]
    pub(crate) fn evaluate_with(
        &self,
        k: &Terms,
        gas_sensor: u64,
        draw: u64,
    ) -> (UncertaintyFx, bool) {
        let sq = |v: u64| v * v;
        // Q36 → Q28, rounded; at most the term limit (six squares in u64).
        let q28 = |v: u64| (v.saturating_add(1 << 7) >> 8).min(TERM_MAX);
        let g2 = sq(q28(gas_sensor));
        let common = sq(k.fs) + sq(k.rd) + sq(k.tt);
        let fraction = common + 2 * sq(k.model);
        let u_mass = isqrt(common + sq(k.cap) + sq(k.model) + g2);
        let u_frac = isqrt(fraction + g2);
        let (mass, _) = self.rated_mass.scale(u_mass.saturating_mul(2), Q, 40);
        let c_i8f24 =
            |v: i128| I8F24::from_bits((v >> 6).max(i32::MIN as i128).min(i32::MAX as i128) as i32);
        (
            UncertaintyFx {
                mass_kg: fx::Mass::from_bits(mass),
                fill_fraction: fx::Fraction::from_bits((u_frac as u64) << 5),
                c_p: c_i8f24(k.c_p),
                c_t: c_i8f24(k.c_t),
            },
            sq(q28(draw)) > GAS_SENSOR_UNSETTLED * fraction,
        )
    }

    /// Standard uncertainties (k = 1) of the consumption rate measured over
    /// a rate window and of the time to empty, input by input; the same
    /// steps as the float form (the budget is in [`super`]).
    pub(crate) fn rate(&self, c: &Content, k: &Terms, w: &RateWindowFx) -> RateBudgetFx {
        // 1/T, Q32 per K (T ≥ 1 K: ≤ 2^32).
        let inv_t = (1u64 << (QT + QT_MEAN)) / (w.temperature as u64).max(1 << QT_MEAN);
        let inv_t = inv_t as i128;
        // k = c_T/T, Q32 per K (signed), and |k|.
        let kt = fx::saturating_mul_i128(k.c_t, inv_t) >> 30;
        let ct = kt.unsigned_abs();
        let f = w.fill_fraction.max(0) as i128;
        let fdot = w.slope_per_h as i128;
        let (td, tdd) = (w.dt_per_h as i128, w.d2t_per_h2 as i128);
        // 1/t = rate/left, Q36 per hour (0 without a time to empty).
        let rho = if fdot < 0 && w.left_fraction > 0 {
            (fx::div_u128((-fdot << QR) as u128, w.left_fraction as u128) as i128).min(1 << 62)
        } else {
            0
        };
        let reserve = w.reserve_fraction.max(0) as i128;
        let q36 = |v: i128| v >> QR;
        // F·dT/dt and F·(dT/dt)/T, Q36 (signed).
        let f_td = fx::saturating_mul_i128(f, td) >> QT;
        let f_td_t = fx::saturating_mul_i128(f_td, inv_t) >> QT;
        // A = F·(d²T/dt² − (dT/dt)²/T) + dF/dt·dT/dt, Q68 → Q36.
        let td2_t = fx::saturating_mul_i128(fx::saturating_mul_i128(td, td) >> QT, inv_t) >> QT;
        let a = fx::saturating_mul_i128(f, tdd - td2_t)
            .saturating_add(fx::saturating_mul_i128(fdot, td))
            >> QT;
        let per_k = |v: i128| sat64(fx::saturating_mul_u128(v.unsigned_abs(), ct) >> QT);
        // The gas's time constant τ = τ_v·F (F ≤ 1), and the lag of the
        // gas (τ) and the sensor (u(τ)) behind the wall in quadrature (see
        // the float form), hours in Q36: one root.
        let f1 = f.min(1 << QR) as u128;
        let by_f = |v: u64| sat64(fx::saturating_mul_u128(v as u128, f1) >> QR);
        let lag36 = apply(self.lag_h, 1 << QR);
        let lags36 = match self.vessel_h {
            Some(vessel_h) => hypot(&[lag36, by_f(apply(vessel_h, 1 << QR))]),
            None => lag36,
        };
        let lags = |v: u64| sat64(fx::mul_u64_wide(v, lags36) >> QR);
        let lag = lags(per_k(a));
        let lag_t = lags(per_k(q36(fx::saturating_mul_i128(f_td, rho)) + a));
        let gain = apply(self.gain, per_k(f_td));
        let offset = apply(self.temperature, per_k(fdot - f_td_t));
        let reserve_rho = q36(fx::saturating_mul_i128(reserve, rho));
        let offset_t = apply(self.temperature, per_k(reserve_rho - f_td_t));
        // The full-scale term (Q28 → Q36) times |k|·|dT/dt| and |1/t + k·dT/dt|.
        let fs = (k.fs as i128) << (QR - Q);
        let k_td = fx::saturating_mul_i128(kt, td) >> (2 * QT - QR);
        let fs_rate = sat64(q36(fx::saturating_mul_i128(fs, k_td.abs())).unsigned_abs());
        let fs_t = sat64(q36(fx::saturating_mul_i128(fs, (rho + k_td).abs())).unsigned_abs());
        // Scale errors (see the float form).
        let c_p = k.c_p.unsigned_abs() as i128;
        let fdot_abs = fdot.abs();
        let reading = apply(self.reading, sat64(((fdot_abs * c_p) >> 30).unsigned_abs()));
        let reading_t = apply(
            self.reading,
            sat64(((reserve_rho * c_p) >> 30).unsigned_abs()),
        );
        let fdot_abs = sat64(fdot_abs.unsigned_abs());
        let capacity = apply(self.capacity, fdot_abs);
        let model = apply(self.model, fdot_abs);
        let model_t = apply(self.model, sat64(reserve_rho.unsigned_abs()));
        // The gas–sensor temperature difference (see the float form), with
        // τ = τ_v·F: the draw's cooling τ·(R/c_v)·Z·c_T²/c_p·|dF/dt| and
        // the trail of gas (τ) and sensor (u(τ)) behind the wall, times
        // |k|·F·|dT/dt|. φ = Z·c_T²/c_p in Q24 with one 64-bit division:
        // c_T² in Q24 (|c_T| < 2^3 for any gas state in the models'
        // envelopes, kept below 2^30) times Z in Q30 (< 2^32), over c_p in Q30
        // (at least C_P_MIN).
        let (gas_sensor, gas_draw, draw_t) = match self.vessel_h {
            Some(vessel_h) => {
                let c_t2 = ((k.c_t.unsigned_abs().pow(2)) >> 36).min((1 << 30) - 1) as u64;
                let z = c.z.z.to_bits() as u64;
                let c_p = (k.c_p.unsigned_abs().min(u64::MAX as u128) as u64).max(C_P_MIN_Q30);
                let phi = (c_t2 * z) / c_p;
                let draw = by_f(apply(
                    vessel_h,
                    apply(self.r_over_cv, sat64(fx::mul_u64_wide(phi, fdot_abs) >> 24)),
                ));
                (
                    hypot(&[draw, lags(per_k(f_td))]),
                    draw,
                    sat64(q36(fx::saturating_mul_i128(draw as i128, rho)).unsigned_abs()),
                )
            }
            None => (0, 0, 0),
        };
        let u = w.u_fit_per_h;
        // The fit's scatter through the slope and F_end (see the float
        // form): r = (1/t) per block, Q36; √((n² − 1)/12) in Q16.
        let n = w.blocks as u64;
        let r = (rho as u64) / (w.blocks_per_hour.max(1) as u64);
        let lead = (r as u128 * (n.saturating_sub(1)) as u128) >> 1;
        let u_end0 = sat64(fx::saturating_mul_u128(u as u128, (1u128 << QR) + lead) >> QR);
        let spread_n = SPREAD_Q16
            .get(n as usize)
            .copied()
            .unwrap_or_else(|| spread_q16(n)) as u128;
        let u_end1 = sat64(fx::saturating_mul_u128(fx::mul_u64_wide(u, r) >> QR, spread_n) >> 16);
        RateBudgetFx {
            rate_per_h: hypot(&[u, lag, gain, offset, fs_rate, reading, capacity, model]),
            time_to_empty_per_h: hypot(&[
                u_end0, u_end1, lag_t, gain, offset_t, fs_t, reading_t, model_t, model_t, draw_t,
            ]),
            gas_sensor,
            draw: gas_draw,
        }
    }
}

/// `a·b` with `b` in Q30, rounded, saturated to the term limit.
fn mul_q30(a: u64, b: u128) -> u64 {
    let v = fx::saturating_mul_u128(a as u128, b).saturating_add(1 << 29) >> 30;
    v.min(TERM_MAX as u128) as u64
}

/// Narrows to `u32`, clamping.
fn sat(v: u64) -> u32 {
    v.min(u32::MAX as u64) as u32
}

/// Narrows to `u64`, clamping.
fn sat64(v: u128) -> u64 {
    v.min(u64::MAX as u128) as u64
}

/// `v × c` (saturated): one 64×32-bit multiply.
fn apply(c: Coef, v: u64) -> u64 {
    let prod = fx::mul_u64_wide(v, u64::from(c.mantissa()));
    let shift = c.shift();
    sat64(if shift >= 0 {
        prod >> shift.unsigned_abs().min(127)
    } else {
        prod.saturating_mul(1 << shift.unsigned_abs().min(32))
    })
}

/// √(Σ vᵢ²) of at most sixteen values, to 2^-29 relative: the values are
/// shifted down together until the largest is below 2^29, so the squares
/// and their sum fit in 64 bits.
fn hypot(v: &[u64]) -> u64 {
    let max = v.iter().copied().max().unwrap_or(0);
    let s = (64 - max.leading_zeros()).saturating_sub(29);
    let sum: u64 = v.iter().take(16).map(|&x| (x >> s) * (x >> s)).sum();
    (isqrt(sum) as u64) << s
}

/// √((n² − 1)/12) in Q16, rounded down: the spread of a fit's block
/// positions about their centre (see [`EvaluatorFx::rate`]).
const fn spread_q16(n: u64) -> u32 {
    isqrt((n.saturating_mul(n).saturating_sub(1) << 32) / 12)
}

/// Window lengths [`SPREAD_Q16`] holds: 0 to 32 blocks (the tracker's rate
/// window; longer windows work the value out).
pub(crate) const SPREAD_TABLE_LEN: usize = 33;

/// [`spread_q16`] for every window length up to the rate window, worked out
/// when the crate is built (a block's rate budget then takes no division
/// and no square root for it).
#[allow(
    clippy::indexing_slicing,
    reason = "n < t.len() by the loop's condition, and a constant: an index out of range would fail the build, not the device"
)]
const SPREAD_Q16: [u32; SPREAD_TABLE_LEN] = {
    let mut t = [0u32; SPREAD_TABLE_LEN];
    let mut n = 0;
    while n < t.len() {
        t[n] = spread_q16(n as u64);
        n += 1;
    }
    t
};

/// ⌊√v⌋ of a 64-bit value. Below 2^32 bit by bit on 32-bit words (16
/// rounds); above, the root of the top 32 bits of v (normalised by an even
/// shift) gives the upper 16 bits of the root, one tangent step (a 32-bit
/// division) the lower 16, and at most two corrections make it exact (the
/// tangent step overshoots by less than two). On a core without 64-bit
/// arithmetic a third of the 32 rounds on 64-bit words it replaces.
pub const fn isqrt(v: u64) -> u32 {
    if v >> 32 == 0 {
        return isqrt32(v as u32);
    }
    // m = v·4^j with its top two bits not both zero: 2^62 ≤ m < 2^64.
    let shift = v.leading_zeros() & !1;
    let m = v << shift;
    // s = ⌊√(m / 2^32)⌋, 2^15 ≤ s < 2^16; a = s·2^16 ≤ √m.
    let s = isqrt32((m >> 32) as u32) as u64;
    // m − a² < (2s + 1)·2^32 ≤ 2^49: the tangent step (m − a²)/(2a) as a
    // 32-bit division, ⌊⌊(m − a²)/2^17⌋/s⌋ = ⌊(m − a²)/(2a)⌋.
    let rem = m - ((s * s) << 32);
    // (s ≥ 2^15: the division never sees zero.)
    let step = match ((rem >> 17) as u32).checked_div(s as u32) {
        Some(q) => q as u64,
        None => 0,
    };
    // √ is concave: a + step ≥ ⌊√m⌋, by less than 2 (step²/(2a) < 1 and
    // the floor); below 2^32 so its square fits 64 bits.
    let mut r = (s << 16) + step;
    if r > u32::MAX as u64 {
        r = u32::MAX as u64;
    }
    let mut k = 0;
    while k < 2 && r * r > m {
        r -= 1;
        k += 1;
    }
    // ⌊⌊√m⌋ / 2^(shift/2)⌋ = ⌊√v⌋.
    (r >> (shift / 2)) as u32
}

/// ⌊√v⌋ of a 32-bit value, bit by bit on 32-bit words (16 rounds).
const fn isqrt32(v: u32) -> u32 {
    let mut rem = v;
    let mut root = 0u32;
    let mut bit = 1u32 << 30;
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
    root
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Ideal;
    use crate::uncertainty::float::{Evaluator, RateWindow};
    use crate::{Gas, Setup, SetupFx, Tank};

    /// ⌊√v⌋ against its definition r² ≤ v < (r + 1)² (in 128 bits): every
    /// value up to 2^20, the squares and their neighbours across the range,
    /// the largest values, and 200,000 values of every magnitude
    /// (xorshift, common practice for test data).
    #[test]
    fn square_roots_are_exact() {
        let check = |v: u64| {
            let r = isqrt(v) as u128;
            assert!(r * r <= v as u128 && (r + 1) * (r + 1) > v as u128, "{v}");
        };
        (0..1u64 << 20).for_each(check);
        let mut x = 0x9E37_79B9_7F4A_7C15u64;
        for i in 0..200_000u32 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let v = x >> (i % 64);
            check(v);
            let r = (v >> 32).max(1) as u128 + (x & 0xFFFF_FFFF) as u128;
            let r = r.min(u32::MAX as u128) as u64;
            for sq in [r * r, r * r - 1, r * r + 1, r * r + 2 * r] {
                check(sq);
            }
        }
        for v in [
            u64::MAX,
            u64::MAX - 1,
            1 << 62,
            (1 << 62) - 1,
            1 << 32,
            (1 << 32) - 1,
        ] {
            check(v);
        }
        let top = u32::MAX as u64;
        for r in (top - 4096..=top).chain((1 << 31) - 4096..(1 << 31) + 4096) {
            for sq in [r * r, r * r - 1, r * r + 2 * r] {
                check(sq);
            }
        }
    }

    /// The rate budget of both paths on the same window, over a grid of
    /// fill fractions, rates, temperatures and temperature dynamics, without
    /// and with a vessel time constant (the gas–sensor term), and the
    /// content's uncertainty with that term.
    #[test]
    fn rate_budget_fixed_matches_float() {
        for vessel in [
            None,
            Some(Millis::from_secs(1800)),
            Some(Millis::from_secs(86_400)),
        ] {
            rate_budget_case(vessel);
        }
    }

    fn rate_budget_case(vessel: Option<Millis>) {
        let setup = Setup::new(Gas::Nitrogen, Tank::new(0.05, 200e5));
        let sfx = SetupFx::from_f64(&setup).unwrap();
        let est_fx = crate::content::fixed::Estimator::new(sfx, Ideal::new(Gas::Nitrogen)).unwrap();
        let est_f =
            crate::content::float::Estimator::new(sfx.to_real::<f64>(), Ideal::new(Gas::Nitrogen))
                .unwrap();
        let decl = UncertaintyConfig::example(300e5);
        let dfx = UncertaintyConfigFx::from_f64(&decl).unwrap();
        let (mut efx, mut ef) = (
            EvaluatorFx::new(dfx, &est_fx).unwrap(),
            Evaluator::new(dfx.to_real::<f64>(), &est_f).unwrap(),
        );
        if let Some(v) = vessel {
            efx = efx.with_vessel_time_constant(v);
            ef = ef.with_vessel_time_constant(v);
        }
        let mut worst = [0.0f64; 4];
        let mut largest_gas_sensor = 0.0f64;
        for &(p, t) in &[(20e5, 250.0), (120e5, 288.15), (190e5, 330.0)] {
            let cfx = est_fx.estimate(fx::Pressure::from_num(p), fx::Temperature::from_num(t));
            let cf = est_f
                .estimate(fx::to_f64(cfx.pressure_pa), fx::to_f64(cfx.temperature_k))
                .unwrap();
            for &rate in &[-0.2, -0.01, 0.0, 3e-4] {
                for &(td, tdd) in &[(0.0, 0.0), (3.8, -0.9), (-12.0, 4.0), (0.2, 0.05)] {
                    for &u_fit in &[0.0, 1e-5, 3e-3] {
                        let f = cf.fill_fraction;
                        let q36 = |v: f64| (v * (1u64 << 36) as f64).round() as i64;
                        let q32 = |v: f64| (v * (1u64 << 32) as f64).round() as i64;
                        let wfx = RateWindowFx {
                            slope_per_h: q36(rate),
                            u_fit_per_h: q36(u_fit) as u64,
                            fill_fraction: q36(f),
                            temperature: (t * (1u64 << QT_MEAN) as f64).round() as u32,
                            dt_per_h: q32(td),
                            d2t_per_h2: q32(tdd),
                            left_fraction: q36(f - 0.05),
                            reserve_fraction: q36(0.05),
                            blocks: 32,
                            blocks_per_hour: 60,
                        };
                        let wf = RateWindow {
                            slope_per_h: wfx.slope_per_h as f64 / 2f64.powi(36),
                            u_fit_per_h: wfx.u_fit_per_h as f64 / 2f64.powi(36),
                            fill_fraction: wfx.fill_fraction as f64 / 2f64.powi(36),
                            temperature_k: wfx.temperature as f64 / 2f64.powi(QT_MEAN as i32),
                            dt_per_h: wfx.dt_per_h as f64 / 2f64.powi(32),
                            d2t_per_h2: wfx.d2t_per_h2 as f64 / 2f64.powi(32),
                            left_fraction: wfx.left_fraction as f64 / 2f64.powi(36),
                            reserve_fraction: wfx.reserve_fraction as f64 / 2f64.powi(36),
                            blocks: 32,
                            blocks_per_hour: 60,
                        };
                        let (kfx, kf) = (efx.terms(&cfx), ef.terms(&cf));
                        let (bfx, bf) = (efx.rate(&cfx, &kfx, &wfx), ef.rate(&cf, &kf, &wf));
                        largest_gas_sensor = largest_gas_sensor.max(bf.gas_sensor);
                        let pairs = [
                            (bfx.rate_per_h, bf.rate_per_h),
                            (bfx.time_to_empty_per_h, bf.time_to_empty_per_h),
                            (bfx.gas_sensor, bf.gas_sensor),
                        ];
                        for (k, (a, b)) in pairs.into_iter().enumerate() {
                            let a = a as f64 / 2f64.powi(36);
                            // Relative, judged against at least 1e-4 per
                            // hour (Q36 steps are 1.5e-11).
                            let rel = (a - b).abs() / b.max(1e-4);
                            worst[k] = worst[k].max(rel);
                        }
                        // The content's U(F) with the term, absolute (a
                        // fraction of the rated content; the tracker's
                        // comparisons assert 1e-6).
                        #[cfg(feature = "uncertainty")]
                        {
                            let (ufx, tfx) = efx.evaluate_with(&kfx, bfx.gas_sensor, bfx.draw);
                            let (uf, tf) = ef.evaluate_with(&kf, bf.gas_sensor, bf.draw);
                            let a = fx::to_f64(ufx.fill_fraction);
                            worst[3] = worst[3].max((a - uf.fill_fraction).abs());
                            // The not-settled verdicts agree away from the edge.
                            let s2 = (uf.fill_fraction / 2.0).powi(2) - bf.gas_sensor.powi(2);
                            if (bf.draw / s2.max(1e-30).sqrt() - 2.0).abs() > 1e-3 {
                                assert_eq!(tfx, tf, "{p} {t} {rate} {td} {tdd}");
                            }
                        }
                    }
                }
            }
        }
        // Relative error of the budget arithmetic itself (inputs identical).
        assert!(worst.iter().all(|&w| w < 1e-6), "{vessel:?} {worst:?}");
        // The term is there when a vessel time constant is declared.
        assert_eq!(
            vessel.is_some(),
            largest_gas_sensor > 1e-3,
            "{largest_gas_sensor}"
        );
    }

    #[test]
    fn spread_table_is_the_formula() {
        for (n, &v) in SPREAD_Q16.iter().enumerate() {
            let want = (((n * n).saturating_sub(1)) as f64 / 12.0).sqrt() * 65536.0;
            assert_eq!(v, want.floor() as u32, "{n}");
            assert_eq!(v, spread_q16(n as u64), "{n}");
        }
    }

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
