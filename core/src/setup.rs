//! What an estimate needs besides a sample: the tank, the gas, the standard
//! condition for standard volume and the reference temperature for settled
//! pressure. Each exists in float form (`Tank`, `Setup`, ...) and fixed-point
//! form (`TankFx`, `SetupFx`, ...); [`SetupFx::to_real`] converts exactly, so
//! the two paths can be run on identical configurations.

use crate::constants::{STANDARD_ATMOSPHERE_PA, ZERO_CELSIUS_K, fahrenheit_to_kelvin};
use crate::envelope as env;
use crate::error::TankSetting;
use crate::{Error, Gas, Real, fx};

/// A pressure vessel, float form.
///
/// The vessel's internal volume is
/// `V = V₀ · (1 + e_p·(p − p_atm) + e_T·(T − T_rated))` with `V₀` the water
/// capacity, `p_atm` one standard atmosphere, `e_p` the elastic expansion per
/// unit pressure and `e_T` the volumetric thermal expansion.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Tank<F = f64> {
    /// Water capacity V₀ (internal volume at atmospheric pressure and the rated
    /// temperature), m³. Accepted: 0.1 L … 100 m³.
    pub water_capacity_m3: F,
    /// Rated (service) pressure, absolute, Pa, at `rated_temperature_k`.
    /// Accepted: 1 … 1000 bar.
    pub rated_pressure_pa: F,
    /// Temperature the rated pressure refers to, K (trade practice: 15 °C).
    /// Accepted: inside the envelope.
    pub rated_temperature_k: F,
    /// Elastic volume expansion per MPa of internal pressure. Accepted: 0 … 1e-3.
    pub elastic_expansion_per_mpa: F,
    /// Volumetric thermal expansion per K. Accepted: −1e-4 … 1e-4.
    pub thermal_expansion_per_k: F,
}

impl<F: Real> Tank<F> {
    /// A rigid tank of `water_capacity_m3` rated at `rated_pressure_pa`
    /// (absolute) at 15 °C.
    pub fn new(water_capacity_m3: F, rated_pressure_pa: F) -> Tank<F> {
        Tank {
            water_capacity_m3,
            rated_pressure_pa,
            rated_temperature_k: F::lit(ZERO_CELSIUS_K + 15.0),
            elastic_expansion_per_mpa: F::ZERO,
            thermal_expansion_per_k: F::ZERO,
        }
    }

    /// Checks every field against its accepted range.
    pub fn validate(&self) -> Result<(), Error> {
        check(
            self.water_capacity_m3,
            env::CAPACITY_MIN_M3,
            env::CAPACITY_MAX_M3,
            ULP_VOLUME,
            TankSetting::WaterCapacity,
        )?;
        check(
            self.rated_pressure_pa,
            env::RATED_PRESSURE_MIN_PA,
            env::PRESSURE_MAX_PA,
            ULP_PRESSURE,
            TankSetting::RatedPressure,
        )?;
        check(
            self.rated_temperature_k,
            env::TEMPERATURE_MIN_K,
            env::TEMPERATURE_MAX_K,
            ULP_TEMPERATURE,
            TankSetting::RatedTemperature,
        )?;
        check(
            self.elastic_expansion_per_mpa,
            0.0,
            env::ELASTIC_EXPANSION_MAX_PER_MPA,
            ULP_EXPANSION,
            TankSetting::ElasticExpansion,
        )?;
        check(
            self.thermal_expansion_per_k,
            -env::THERMAL_EXPANSION_MAX_PER_K,
            env::THERMAL_EXPANSION_MAX_PER_K,
            ULP_EXPANSION,
            TankSetting::ThermalExpansion,
        )
    }
}

/// One unit in the last place of the fixed-point format of each field: the
/// float checks accept values that differ from a limit by no more than that,
/// so exact conversions of fixed-point configurations pass.
const ULP_VOLUME: f64 = 1.0 / 1_099_511_627_776.0;
const ULP_PRESSURE: f64 = 1.0 / 16.0;
const ULP_TEMPERATURE: f64 = 1.0 / 65_536.0;
const ULP_EXPANSION: f64 = 1.0 / 4_294_967_296.0;

fn check<F: Real>(v: F, lo: f64, hi: f64, ulp: f64, what: TankSetting) -> Result<(), Error> {
    if !v.is_finite() {
        return Err(Error::NotFinite(what.into()));
    }
    let x = v.to_f64();
    if x < lo - ulp || x > hi + ulp {
        return Err(Error::OutOfRange(what.into()));
    }
    Ok(())
}

/// A pressure vessel, fixed-point form (see [`Tank`] for meanings and limits).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TankFx {
    /// Water capacity, m³.
    pub water_capacity_m3: fx::Volume,
    /// Rated pressure, absolute, Pa.
    pub rated_pressure_pa: fx::Pressure,
    /// Temperature the rated pressure refers to, K.
    pub rated_temperature_k: fx::Temperature,
    /// Elastic volume expansion per MPa.
    pub elastic_expansion_per_mpa: fx::ElasticExpansion,
    /// Volumetric thermal expansion per K.
    pub thermal_expansion_per_k: fx::ThermalExpansion,
}

impl TankFx {
    /// Converts (rounding to nearest) and validates a float tank.
    pub fn from_f64(t: &Tank<f64>) -> Result<TankFx, Error> {
        t.validate()?;
        let fx = TankFx {
            water_capacity_m3: fx::from_f64(t.water_capacity_m3, TankSetting::WaterCapacity)?,
            rated_pressure_pa: fx::from_f64(t.rated_pressure_pa, TankSetting::RatedPressure)?,
            rated_temperature_k: fx::from_f64(
                t.rated_temperature_k,
                TankSetting::RatedTemperature,
            )?,
            elastic_expansion_per_mpa: fx::from_f64(
                t.elastic_expansion_per_mpa,
                TankSetting::ElasticExpansion,
            )?,
            thermal_expansion_per_k: fx::from_f64(
                t.thermal_expansion_per_k,
                TankSetting::ThermalExpansion,
            )?,
        };
        fx.validate()?;
        Ok(fx)
    }

    /// The exact float equivalent.
    pub fn to_real<F: Real>(&self) -> Tank<F> {
        Tank {
            water_capacity_m3: F::lit(fx::to_f64(self.water_capacity_m3)),
            rated_pressure_pa: F::lit(fx::to_f64(self.rated_pressure_pa)),
            rated_temperature_k: F::lit(fx::to_f64(self.rated_temperature_k)),
            elastic_expansion_per_mpa: F::lit(fx::to_f64(self.elastic_expansion_per_mpa)),
            thermal_expansion_per_k: F::lit(fx::to_f64(self.thermal_expansion_per_k)),
        }
    }

    /// Checks every field against its accepted range (integer comparisons).
    pub fn validate(&self) -> Result<(), Error> {
        // 0.1 L = 1e-4 m³ → U24F40 bits 109_951_162.8 (rounded down).
        let cap = self.water_capacity_m3.to_bits();
        if !(109_951_162..=100u64 << 40).contains(&cap) {
            return Err(Error::OutOfRange(TankSetting::WaterCapacity.into()));
        }
        let pr = self.rated_pressure_pa.to_bits();
        if !(1_600_000..=env::PRESSURE_MAX.to_bits()).contains(&pr) {
            return Err(Error::OutOfRange(TankSetting::RatedPressure.into()));
        }
        if !(env::TEMPERATURE_MIN..=env::TEMPERATURE_MAX).contains(&self.rated_temperature_k) {
            return Err(Error::OutOfRange(TankSetting::RatedTemperature.into()));
        }
        // 1e-3 per MPa → U0F32 bits 4_294_967.3 (rounded up).
        if self.elastic_expansion_per_mpa.to_bits() > 4_294_968 {
            return Err(Error::OutOfRange(TankSetting::ElasticExpansion.into()));
        }
        // 1e-4 per K → I0F32 bits 429_496.7 (rounded up).
        if self.thermal_expansion_per_k.to_bits().unsigned_abs() > 429_497 {
            return Err(Error::OutOfRange(TankSetting::ThermalExpansion.into()));
        }
        Ok(())
    }
}

/// The condition standard volume refers to, float form.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct StandardCondition<F = f64> {
    /// Temperature, K.
    pub temperature_k: F,
    /// Absolute pressure, Pa.
    pub pressure_pa: F,
}

impl StandardCondition<f64> {
    /// ISO 13443 standard reference conditions: 15 °C, 101.325 kPa (the default).
    pub const ISO_13443: StandardCondition = StandardCondition {
        temperature_k: ZERO_CELSIUS_K + 15.0,
        pressure_pa: STANDARD_ATMOSPHERE_PA,
    };
    /// "Normal" conditions: 0 °C, 101.325 kPa (DIN 1343; the normal cubic metre).
    pub const NORMAL: StandardCondition = StandardCondition {
        temperature_k: ZERO_CELSIUS_K,
        pressure_pa: STANDARD_ATMOSPHERE_PA,
    };
    /// 20 °C, 101.325 kPa (NIST "normal temperature and pressure").
    pub const NTP: StandardCondition = StandardCondition {
        temperature_k: ZERO_CELSIUS_K + 20.0,
        pressure_pa: STANDARD_ATMOSPHERE_PA,
    };

    /// 60 °F, 14.696 psia (US gas-industry standard cubic foot conditions).
    pub fn us_60f() -> StandardCondition {
        StandardCondition {
            temperature_k: fahrenheit_to_kelvin(60.0),
            pressure_pa: 14.696 * crate::constants::PSI_PA,
        }
    }

    /// The named conditions with their stable names.
    pub fn named() -> [(&'static str, StandardCondition); 4] {
        [
            ("iso13443", StandardCondition::ISO_13443),
            ("normal", StandardCondition::NORMAL),
            ("ntp", StandardCondition::NTP),
            ("60f", StandardCondition::us_60f()),
        ]
    }
}

impl<F: Real> StandardCondition<F> {
    /// Checks the condition against its accepted range: temperature inside the
    /// envelope, pressure 50 … 200 kPa.
    pub fn validate(&self) -> Result<(), Error> {
        check(
            self.temperature_k,
            env::TEMPERATURE_MIN_K,
            env::TEMPERATURE_MAX_K,
            ULP_TEMPERATURE,
            TankSetting::StandardTemperature,
        )?;
        check(
            self.pressure_pa,
            env::STANDARD_PRESSURE_MIN_PA,
            env::STANDARD_PRESSURE_MAX_PA,
            ULP_PRESSURE,
            TankSetting::StandardPressure,
        )
    }
}

/// The condition standard volume refers to, fixed-point form.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StandardConditionFx {
    /// Temperature, K.
    pub temperature_k: fx::Temperature,
    /// Absolute pressure, Pa.
    pub pressure_pa: fx::Pressure,
}

/// Everything an estimator needs besides the model, float form.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Setup<F = f64> {
    /// The gas in the tank.
    pub gas: Gas,
    /// The tank.
    pub tank: Tank<F>,
    /// Reference condition for standard volume.
    pub standard: StandardCondition<F>,
    /// Temperature the settled pressure refers to, K (default 15 °C).
    pub settled_reference_k: F,
}

impl Setup<f64> {
    /// A setup with ISO 13443 standard conditions and settled pressure at 15 °C.
    pub fn new(gas: Gas, tank: Tank<f64>) -> Setup<f64> {
        Setup {
            gas,
            tank,
            standard: StandardCondition::ISO_13443,
            settled_reference_k: ZERO_CELSIUS_K + 15.0,
        }
    }
}

impl<F: Real> Setup<F> {
    /// Checks every field against its accepted range.
    pub fn validate(&self) -> Result<(), Error> {
        self.tank.validate()?;
        self.standard.validate()?;
        check(
            self.settled_reference_k,
            env::TEMPERATURE_MIN_K,
            env::TEMPERATURE_MAX_K,
            ULP_TEMPERATURE,
            TankSetting::SettledReferenceTemperature,
        )
    }
}

/// Everything an estimator needs besides the model, fixed-point form.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SetupFx {
    /// The gas in the tank.
    pub gas: Gas,
    /// The tank.
    pub tank: TankFx,
    /// Reference condition for standard volume.
    pub standard: StandardConditionFx,
    /// Temperature the settled pressure refers to, K.
    pub settled_reference_k: fx::Temperature,
}

impl SetupFx {
    /// Converts (rounding to nearest) and validates a float setup.
    pub fn from_f64(s: &Setup<f64>) -> Result<SetupFx, Error> {
        s.validate()?;
        let fx = SetupFx {
            gas: s.gas,
            tank: TankFx::from_f64(&s.tank)?,
            standard: StandardConditionFx {
                temperature_k: fx::from_f64(
                    s.standard.temperature_k,
                    TankSetting::StandardTemperature,
                )?,
                pressure_pa: fx::from_f64(s.standard.pressure_pa, TankSetting::StandardPressure)?,
            },
            settled_reference_k: fx::from_f64(
                s.settled_reference_k,
                TankSetting::SettledReferenceTemperature,
            )?,
        };
        fx.validate()?;
        Ok(fx)
    }

    /// The exact float equivalent.
    pub fn to_real<F: Real>(&self) -> Setup<F> {
        Setup {
            gas: self.gas,
            tank: self.tank.to_real(),
            standard: StandardCondition {
                temperature_k: F::lit(fx::to_f64(self.standard.temperature_k)),
                pressure_pa: F::lit(fx::to_f64(self.standard.pressure_pa)),
            },
            settled_reference_k: F::lit(fx::to_f64(self.settled_reference_k)),
        }
    }

    /// Checks every field against its accepted range (integer comparisons).
    pub fn validate(&self) -> Result<(), Error> {
        self.tank.validate()?;
        let t_ok = env::TEMPERATURE_MIN..=env::TEMPERATURE_MAX;
        if !t_ok.contains(&self.standard.temperature_k) {
            return Err(Error::OutOfRange(TankSetting::StandardTemperature.into()));
        }
        // 50 kPa … 200 kPa in U28F4 bits.
        if !(800_000..=3_200_000).contains(&self.standard.pressure_pa.to_bits()) {
            return Err(Error::OutOfRange(TankSetting::StandardPressure.into()));
        }
        if !t_ok.contains(&self.settled_reference_k) {
            return Err(Error::OutOfRange(
                TankSetting::SettledReferenceTemperature.into(),
            ));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tank() -> Tank {
        Tank {
            water_capacity_m3: 0.05,
            rated_pressure_pa: 200e5,
            rated_temperature_k: 288.15,
            elastic_expansion_per_mpa: 1.2e-4,
            thermal_expansion_per_k: 3.6e-5,
        }
    }

    #[test]
    fn round_trip_is_close_and_exact_back() {
        let s = Setup::new(Gas::Nitrogen, tank());
        let f = SetupFx::from_f64(&s).unwrap();
        let back: Setup<f64> = f.to_real();
        assert!((back.tank.water_capacity_m3 / 0.05 - 1.0).abs() < 1e-8);
        assert!((back.tank.elastic_expansion_per_mpa / 1.2e-4 - 1.0).abs() < 1e-5);
        // Converting the exact equivalent again gives the same fixed setup.
        assert_eq!(SetupFx::from_f64(&back).unwrap(), f);
    }

    #[test]
    fn limits_are_enforced_in_both_forms() {
        let mut t = tank();
        t.water_capacity_m3 = 0.5e-4;
        assert_eq!(
            t.validate(),
            Err(Error::OutOfRange(TankSetting::WaterCapacity.into()))
        );
        assert!(TankFx::from_f64(&t).is_err());
        let mut t = tank();
        t.rated_pressure_pa = f64::NAN;
        assert_eq!(
            t.validate(),
            Err(Error::NotFinite(TankSetting::RatedPressure.into()))
        );
        let mut t = tank();
        t.thermal_expansion_per_k = -2e-4;
        assert_eq!(
            t.validate(),
            Err(Error::OutOfRange(TankSetting::ThermalExpansion.into()))
        );
        // Edges are accepted in both forms.
        let mut t = tank();
        t.water_capacity_m3 = env::CAPACITY_MIN_M3;
        t.rated_pressure_pa = env::PRESSURE_MAX_PA;
        t.elastic_expansion_per_mpa = env::ELASTIC_EXPANSION_MAX_PER_MPA;
        t.thermal_expansion_per_k = -env::THERMAL_EXPANSION_MAX_PER_K;
        TankFx::from_f64(&t).unwrap();
        let mut t = tank();
        t.water_capacity_m3 = env::CAPACITY_MAX_M3;
        t.rated_pressure_pa = env::RATED_PRESSURE_MIN_PA;
        TankFx::from_f64(&t).unwrap();
    }

    #[test]
    fn named_standards() {
        let us = StandardCondition::us_60f();
        // 60 °F = 288.705556 K; 14.696 psi = 101 325.35 Pa (NIST SP 811 factors).
        assert!((us.temperature_k - 288.705_555_6).abs() < 1e-6);
        assert!((us.pressure_pa - 101_325.353).abs() < 1e-2);
        for (_, s) in StandardCondition::named() {
            s.validate().unwrap();
        }
    }
}
