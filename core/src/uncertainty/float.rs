//! Uncertainty of the content estimate, float form (the method is in
//! [`super`]).

use crate::constants::MOLAR_GAS_CONSTANT_J_MOL_K;
use crate::content::float::{Content, Estimator};
use crate::error::UncertaintyInput;
use crate::model::Compressibility;
use crate::time::Millis;
use crate::{Error, Gas, Real, Tank};

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
    /// Standard uncertainty of the time by which the temperature reading
    /// lags (or leads) the gas temperature: the sensor's own response, its
    /// mounting, and the gas following the wall. The reading is not
    /// corrected for it; it enters the uncertainty of the consumption rate
    /// through d²T/dt². Accepted: 0 … 2 h.
    pub temperature_lag: Millis,
    /// Relative standard uncertainty of the temperature sensor's slope (a
    /// gain error turns dT/dt into an apparent content rate). Accepted:
    /// 0 … 0.5.
    pub temperature_gain: F,
}

impl UncertaintyConfig<f64> {
    /// An example declaration: a 0–`full_scale_pa` sensor with ±0.25 % of
    /// full scale and ±0.1 % of reading (limits, rectangular: u = a/√3), a
    /// temperature sensor good to 0.5 K standard uncertainty, water capacity
    /// known to 0.5 % and a model good to 0.1 % (all standard uncertainties).
    /// Invented figures of a typical industrial pair; declare your own.
    ///
    /// The temperature dynamics: a lag of [`DEFAULT_TEMPERATURE_LAG`]
    /// (10 min standard uncertainty: conservative for a sensor bonded to the
    /// vessel wall, common practice; a sensor in a valve block, regulator or
    /// on a board can lag or lead the gas by much more — measure it with a
    /// temperature step) and a slope good to ±0.5 % (rectangular), the
    /// temperature-proportional part of the IEC 60751 class B tolerance
    /// ±(0.30 + 0.005·|t|) °C of platinum resistance thermometers (from
    /// memory).
    pub fn example(full_scale_pa: f64) -> Self {
        UncertaintyConfig {
            pressure_full_scale_pa: full_scale_pa,
            pressure_fs: 0.0025 / SQRT_3,
            pressure_reading: 0.001 / SQRT_3,
            temperature_k: 0.5,
            capacity: 0.005,
            model: 0.001,
            temperature_lag: DEFAULT_TEMPERATURE_LAG,
            temperature_gain: 0.005 / SQRT_3,
        }
    }
}

/// √3, for rectangular distributions (GUM 4.3.7).
pub const SQRT_3: f64 = 1.732_050_807_568_877_2;

/// The conservative default standard uncertainty of the temperature lag
/// behind the gas: 10 min (see [`UncertaintyConfig::example`]).
pub const DEFAULT_TEMPERATURE_LAG: Millis = Millis::from_secs(600);

/// Largest accepted temperature lag uncertainty: 2 h.
pub const MAX_TEMPERATURE_LAG: Millis = Millis::from_secs(7200);

impl<F: Real> UncertaintyConfig<F> {
    /// Checks every field against its accepted range.
    pub fn validate(&self) -> Result<(), Error> {
        let checks = [
            (
                self.pressure_full_scale_pa,
                1e5,
                2e8,
                UncertaintyInput::PressureFullScale,
            ),
            (
                self.pressure_fs,
                0.0,
                0.5,
                UncertaintyInput::PressureOfFullScale,
            ),
            (
                self.pressure_reading,
                0.0,
                0.5,
                UncertaintyInput::PressureOfReading,
            ),
            (self.temperature_k, 0.0, 50.0, UncertaintyInput::Temperature),
            (self.capacity, 0.0, 0.5, UncertaintyInput::Capacity),
            (self.model, 0.0, 0.5, UncertaintyInput::Model),
            (
                self.temperature_gain,
                0.0,
                0.5,
                UncertaintyInput::TemperatureGain,
            ),
        ];
        for (v, lo, hi, what) in checks {
            if !v.is_finite() {
                return Err(Error::NotFinite(what.into()));
            }
            // The limits are exact in the fixed-point form, so exact
            // conversions of an accepted value are accepted too.
            let x = v.to_f64();
            if x < lo || x > hi {
                return Err(Error::OutOfRange(what.into()));
            }
        }
        if self.temperature_lag > MAX_TEMPERATURE_LAG {
            return Err(Error::OutOfRange(UncertaintyInput::TemperatureLag.into()));
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

/// What a rate window tells the rate budget (per hour; see [`super`]).
#[derive(Clone, Copy, Debug)]
pub(crate) struct RateWindow<F> {
    /// dF/dt of the fill fraction (the fitted slope), per hour; negative
    /// while gas leaves.
    pub slope_per_h: F,
    /// Standard uncertainty of the slope from the scatter of the fit
    /// (corrected for autocorrelation), per hour.
    pub u_fit_per_h: F,
    /// Mean fill fraction over the window.
    pub fill_fraction: F,
    /// Mean temperature over the window, K.
    pub temperature_k: F,
    /// dT/dt at the window centre, K/h.
    pub dt_per_h: F,
    /// d²T/dt² over the window, K/h².
    pub d2t_per_h2: F,
    /// Fill fraction above the reserve at the window's end (what the time
    /// to empty counts down).
    pub left_fraction: F,
    /// The reserve fraction.
    pub reserve_fraction: F,
    /// Blocks in the fit.
    pub blocks: u32,
    /// Blocks per hour.
    pub blocks_per_hour: u32,
}

/// Standard uncertainties (k = 1) behind the rate and the time to empty.
#[derive(Clone, Copy, Debug)]
pub(crate) struct RateBudget<F> {
    /// Of the consumption rate, fraction of the rated content per hour.
    pub rate_per_h: F,
    /// Of the time to empty t, as the rate spread with the same relative
    /// size: rate × u(t)/t, per hour.
    pub time_to_empty_per_h: F,
    /// Of the fill fraction, from the difference between the gas and its
    /// temperature sensor (the draw's own cooling and the gas and sensor
    /// following the wall; see [`super`]).
    pub gas_sensor: F,
    /// Its part from the draw's own cooling.
    pub draw: F,
}

/// Prepared uncertainty evaluation for one estimator.
#[derive(Clone, Copy, Debug)]
pub struct Evaluator<F: Real> {
    cfg: UncertaintyConfig<F>,
    tank: Tank<F>,
    /// V₀·M/R, kg·K/Pa: m/p = this·f/(Z·T).
    mass_per_pressure: F,
    rated_mass_kg: F,
    /// The temperature lag uncertainty, h.
    lag_h: F,
    /// The vessel's gas–wall time constant, h (0: the gas–sensor term is
    /// left out).
    vessel_h: F,
    /// R/c_v of the ideal gas (see [`ideal_r_over_cv`]).
    r_over_cv: F,
}

/// R/c_v⁰ of the gas's ideal part, a lower bound of c_v over the
/// envelope so that the draw's cooling is not underestimated: monatomic
/// gases 3/2 R, the diatomic ones (and air) 5/2 R, methane and carbon
/// dioxide 3.2 R, ethane 4.8 R, propane 7.0 R (c_v⁰ of the polyatomic ones
/// near 250 K, rising with temperature; from memory); a mixture is taken as
/// monatomic (the largest cooling). The real gas's c_v is larger than the
/// ideal part's near saturation, so this bounds the cooling from above.
pub fn ideal_r_over_cv(gas: Gas) -> f64 {
    R_OVER_CV
        .get(r_over_cv_class(gas))
        .copied()
        .unwrap_or(R_OVER_CV[0])
}

/// R/c_v⁰ by class (see [`ideal_r_over_cv`]).
pub(crate) const R_OVER_CV: [f64; 5] = [
    2.0 / 3.0,
    0.4,
    0.3125,
    0.208_333_333_333_333_34,
    0.142_857_142_857_142_85,
];

/// The class of `gas` in [`R_OVER_CV`].
pub(crate) fn r_over_cv_class(gas: Gas) -> usize {
    match gas {
        Gas::Helium | Gas::Neon | Gas::Argon | Gas::Krypton | Gas::Xenon | Gas::Mixture(_) => 0,
        Gas::Hydrogen | Gas::Nitrogen | Gas::Oxygen | Gas::Air => 1,
        Gas::Methane | Gas::CarbonDioxide => 2,
        Gas::Ethane => 3,
        Gas::Propane => 4,
    }
}

/// The sensitivities of one estimate and its terms (standard
/// uncertainties as fractions of the rated content), shared by both budgets:
/// worked out once per block close ([`Evaluator::terms`]).
#[derive(Clone, Copy, Debug)]
pub(crate) struct Terms<F> {
    c_p: F,
    c_t: F,
    /// Pressure: full-scale part, reading part.
    fs: F,
    #[cfg(feature = "uncertainty")]
    rd: F,
    /// Temperature.
    #[cfg(feature = "uncertainty")]
    tt: F,
    /// Water capacity, gas model.
    #[cfg(feature = "uncertainty")]
    cap: F,
    #[cfg(feature = "uncertainty")]
    model: F,
}

#[cfg(feature = "uncertainty")]
impl<F: Real> Terms<F> {
    /// u(F)², the fill fraction's combined variance.
    fn fraction_variance(&self) -> F {
        self.common() + F::lit(2.0) * self.model * self.model
    }

    /// The pressure and temperature part of both variances.
    fn common(&self) -> F {
        self.fs * self.fs + self.rd * self.rd + self.tt * self.tt
    }
}

impl<F: Real> Evaluator<F> {
    /// Prepares the evaluation for the estimates of `est`.
    pub fn new<M: Compressibility<F>>(
        cfg: UncertaintyConfig<F>,
        est: &Estimator<F, M>,
    ) -> Result<Self, Error> {
        cfg.validate()?;
        let setup = est.setup();
        Ok(Evaluator {
            cfg,
            tank: setup.tank,
            mass_per_pressure: setup.tank.water_capacity_m3 * F::lit(setup.gas.molar_mass_kg_mol())
                / F::lit(MOLAR_GAS_CONSTANT_J_MOL_K),
            rated_mass_kg: est.rated_mass_kg(),
            lag_h: F::lit(cfg.temperature_lag.0 as f64 / HOUR_MS),
            vessel_h: F::ZERO,
            r_over_cv: F::lit(ideal_r_over_cv(setup.gas)),
        })
    }

    /// The same evaluation with the vessel's gas–wall time constant τ_v at
    /// the rated content (the tracker's settling time constant): the
    /// content's budget then carries the gas–sensor temperature difference
    /// (see [`super`]).
    pub fn with_vessel_time_constant(mut self, tau: Millis) -> Self {
        self.vessel_h = F::lit(tau.0.min(MAX_VESSEL_MS) as f64 / HOUR_MS);
        self
    }

    /// The declared input uncertainties.
    pub fn config(&self) -> &UncertaintyConfig<F> {
        &self.cfg
    }

    /// Sensitivity coefficients and the full-scale term of `c`, for
    /// [`Self::rate`] and [`Self::evaluate_with`].
    pub(crate) fn terms(&self, c: &Content<F>) -> Terms<F> {
        let cfg = &self.cfg;
        let (p, t, z) = (c.pressure_pa, c.temperature_k, c.z.z);
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
        #[cfg(feature = "uncertainty")]
        let f = c.mass_kg * inv_rated;
        #[cfg(not(feature = "uncertainty"))]
        let _ = c_t_abs;
        Terms {
            c_p,
            c_t,
            fs,
            #[cfg(feature = "uncertainty")]
            rd: c_p_abs * f * cfg.pressure_reading,
            #[cfg(feature = "uncertainty")]
            tt: c_t_abs * f * cfg.temperature_k / t,
            #[cfg(feature = "uncertainty")]
            cap: f * cfg.capacity,
            #[cfg(feature = "uncertainty")]
            model: f * cfg.model,
        }
    }

    /// Expanded uncertainties (k = 2) of the mass and fill fraction of `c`.
    #[cfg(feature = "uncertainty")]
    pub fn evaluate(&self, c: &Content<F>) -> Uncertainty<F> {
        self.evaluate_with(&self.terms(c), F::ZERO, F::ZERO).0
    }

    /// Expanded uncertainties (k = 2) of `c` with the gas–sensor term
    /// `gas_sensor` (a standard uncertainty of the fill fraction, from
    /// [`Self::rate`]), and whether its part from the draw's cooling, `draw`,
    /// outweighs the rest of the fill fraction's budget (the gas a draw
    /// cooled has not settled to its sensor: `not_settled`).
    #[cfg(feature = "uncertainty")]
    pub(crate) fn evaluate_with(
        &self,
        k: &Terms<F>,
        gas_sensor: F,
        draw: F,
    ) -> (Uncertainty<F>, bool) {
        let two = F::lit(2.0);
        let g2 = gas_sensor * gas_sensor;
        let fraction = k.fraction_variance();
        (
            Uncertainty {
                mass_kg: two
                    * (k.common() + k.cap * k.cap + k.model * k.model + g2).sqrt()
                    * self.rated_mass_kg,
                fill_fraction: two * (fraction + g2).sqrt(),
                c_p: k.c_p,
                c_t: k.c_t,
            },
            draw * draw > F::lit(GAS_SENSOR_UNSETTLED as f64) * fraction,
        )
    }

    /// Standard uncertainties (k = 1) of the consumption rate measured over
    /// a rate window and of the time to empty, input by input (the budget is
    /// in [`super`]). `c` is the latest estimate (sensitivities).
    pub(crate) fn rate(&self, c: &Content<F>, k: &Terms<F>, w: &RateWindow<F>) -> RateBudget<F> {
        let cfg = &self.cfg;
        let inv_t = F::ONE / w.temperature_k.max(F::ONE);
        // k = c_T/T: relative content error per kelvin of temperature error.
        let kt = k.c_t * inv_t;
        let ct = kt.abs();
        let (f, fdot) = (w.fill_fraction, w.slope_per_h);
        let (td, tdd) = (w.dt_per_h, w.d2t_per_h2);
        // 1/t = rate/left (0 when there is no time to empty), and F_reserve.
        let rho = if -fdot > F::ZERO && w.left_fraction > F::ZERO {
            -fdot / w.left_fraction
        } else {
            F::ZERO
        };
        let reserve = w.reserve_fraction;
        // A reading error ε of the temperature shifts the content by
        // e = k·F·ε and its slope by ė: a lag (ε = −τ·dT/dt:
        // ė = −k·τ·A), a gain error (ε̇ = g·dT/dt), an offset (ε = δ). The
        // time to empty t = left/rate moves by δt/t = e/left + ė/rate: as a
        // rate, e·rate/left + ė.
        let a = f * (tdd - td * td * inv_t) + fdot * td;
        // The gas trails its wall by τ = τ_v·F besides the sensor's lag
        // (see super): the two lags in quadrature.
        let tau = self.vessel_h * f.clamp_to(F::ZERO, F::ONE);
        let lags = |v: F| {
            let (x, y) = (self.lag_h * v, tau * v);
            (x * x + y * y).sqrt()
        };
        let lag = lags(ct * a.abs());
        let lag_t = lags(ct * (f * td * rho + a).abs());
        let gain = ct * cfg.temperature_gain * f * td.abs();
        let offset = ct * cfg.temperature_k * (fdot - f * td * inv_t).abs();
        let offset_t = ct * cfg.temperature_k * (reserve * rho - f * td * inv_t).abs();
        // The pressure offset's apparent content goes as 1/(Z·T).
        let fs = ct * k.fs * td.abs();
        let fs_t = k.fs * (rho + kt * td).abs();
        // Scale errors: the rate in kg/h scales with the pressure reading
        // part, the capacity and the model; in the time to empty only the
        // reserve's share is left of the reading part and of the model's
        // (sample and rated state).
        let fdot_abs = fdot.abs();
        let reading = fdot_abs * k.c_p.abs() * cfg.pressure_reading;
        let reading_t = reserve * rho * k.c_p.abs() * cfg.pressure_reading;
        let capacity = fdot_abs * cfg.capacity;
        let model = fdot_abs * cfg.model;
        let model_t = reserve * rho * cfg.model;
        let hypot = |v: &[F]| v.iter().fold(F::ZERO, |s, &x| s + x * x).sqrt();
        // The gas–sensor temperature difference (see super), with the gas's
        // time constant τ = τ_v·F (its heat capacity goes with its mass):
        // the draw's own cooling, τ·(∂ln T/∂ln ρ)_s·T·(dF/dt)/F with
        // (∂ln T/∂ln ρ)_s = (R/c_v)·Z·|c_T|/c_p, reads as the content
        // |c_T|·F/T times that: τ·(R/c_v)·Z·c_T²/c_p·|dF/dt|; and the gas
        // (by τ) and the sensor (by u(τ)) trailing the wall's dT/dt.
        // Uncorrected; a standard uncertainty each. The draw's part is a
        // level error the time to empty counts down from.
        let phi = self.r_over_cv * c.z.z * k.c_t * k.c_t / k.c_p.abs().max(F::lit(C_P_MIN));
        let draw = tau * phi * fdot.abs();
        let x = ct * f * td.abs();
        let (gas_sensor, draw) = if self.vessel_h > F::ZERO {
            (hypot(&[draw, tau * x, self.lag_h * x]), draw)
        } else {
            (F::ZERO, F::ZERO)
        };
        let draw_t = draw * rho;
        let u = w.u_fit_per_h;
        // The fit's scatter reaches the time to empty through the slope and
        // through F_end = mean + slope·(n − 1)/2 (mean and slope
        // independent): with r = (1/t) per block, u·(1 + r·(n − 1)/2) and
        // u·r·√((n² − 1)/12).
        let n = F::lit(w.blocks as f64);
        let r = rho / F::lit(w.blocks_per_hour.max(1) as f64);
        let u_end = [
            u * (F::ONE + r * (n - F::ONE) / F::lit(2.0)),
            u * r * ((n * n - F::ONE) / F::lit(12.0)).sqrt(),
        ];
        RateBudget {
            rate_per_h: hypot(&[u, lag, gain, offset, fs, reading, capacity, model]),
            time_to_empty_per_h: hypot(&[
                u_end[0], u_end[1], lag_t, gain, offset_t, fs_t, reading_t, model_t, model_t,
                draw_t,
            ]),
            gas_sensor,
            draw,
        }
    }
}

/// Milliseconds per hour, as a float.
const HOUR_MS: f64 = 3_600_000.0;

/// Largest vessel time constant taken: 24 h (the tracker's settling time
/// constant accepts no more).
pub(crate) const MAX_VESSEL_MS: u64 = 24 * 3_600_000;

/// Smallest c_p = ∂ln m/∂ln p taken in the draw's cooling (a gas near its
/// critical point; common practice).
pub(crate) const C_P_MIN: f64 = 0.25;

/// `not_settled` while the variance of the draw's cooling exceeds this
/// many times the rest of the fill fraction's (the term more than twice the
/// rest's standard uncertainty: a draw has cooled the gas far below its
/// sensor's reading; common practice).
#[cfg(feature = "uncertainty")]
pub(crate) const GAS_SENSOR_UNSETTLED: u64 = 4;
