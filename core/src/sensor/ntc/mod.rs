//! NTC thermistors in a resistive input: beta model and Steinhart–Hart.
//!
//! Both models give the inverse temperature as a polynomial in `L = ln R`:
//!
//! * beta: `1/T = 1/T₀ + (L − ln R₀)/β`;
//! * Steinhart–Hart (Steinhart & Hart, Deep-Sea Research 15, 497, 1968):
//!   `1/T = A + B·L + C·L³`.
//!
//! Both paths compute `L = ln(num) − ln(den) + ln R_ref` from the resistive
//! input's ratio (no division), `y = c₀ + c₁·L + c₃·L³`, then `T = 1/y`. The
//! fixed path uses the division-free [`fxmath::ln`](crate::fxmath::ln) and
//! [`fxmath::recip`](crate::fxmath::recip): 23–26 multiplies per code.
//!
//! The inverse (resistance at a temperature) is float only (host tools and
//! simulation): `R = R₀·exp(β(1/T − 1/T₀))`, and for Steinhart–Hart the
//! closed form `x = (A − 1/T)/C`, `y = √((B/(3C))³ + x²/4)`,
//! `R = exp(∛(y − x/2) − ∛(y + x/2))`.

pub mod fixed;
pub mod float;

use crate::error::SensorSetting;
use crate::sensor::resistive::{Circuit, FrontEnd};
use crate::{Error, envelope, fx};

/// The resistance–temperature model of a thermistor.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum NtcModel {
    /// `R = R₀·exp(β·(1/T − 1/T₀))`.
    Beta {
        /// Resistance at `t0_k`, Ω (R25 when T₀ = 25 °C).
        r0_ohms: fx::Resistance,
        /// Reference temperature T₀, K.
        t0_k: fx::Temperature,
        /// β, K (1000 … 10 000).
        beta_k: fx::Temperature,
    },
    /// `1/T = A + B·ln R + C·(ln R)³` (R in Ω, T in K).
    SteinhartHart {
        /// A, 1/K.
        a: fx::Coefficient,
        /// B, 1/K.
        b: fx::Coefficient,
        /// C, 1/K.
        c: fx::Coefficient,
    },
}

/// An NTC channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NtcConfig {
    /// The model.
    pub model: NtcModel,
    /// How the sensor is read.
    pub front_end: FrontEnd,
    /// Lowest temperature of the measuring range, K.
    pub range_min_k: fx::Temperature,
    /// Highest temperature of the measuring range, K.
    pub range_max_k: fx::Temperature,
}

impl NtcConfig {
    /// A channel over the gauge envelope (−60 … 150 °C), with open and short
    /// thresholds at twice the resistance at −60 °C and half the resistance
    /// at 150 °C (host helper, from `f64`).
    pub fn new(
        model: NtcModel,
        circuit: Circuit,
        adc_bits: u8,
        reference_ohms: f64,
    ) -> Result<NtcConfig, Error> {
        let probe = NtcConfig {
            model,
            front_end: FrontEnd::new(circuit, adc_bits, reference_ohms, 1.0, 2.0)?,
            range_min_k: fx::from_f64(envelope::TEMPERATURE_MIN_K, SensorSetting::RangeMinimum)?,
            range_max_k: fx::from_f64(envelope::TEMPERATURE_MAX_K, SensorSetting::RangeMaximum)?,
        };
        probe.validate_model()?;
        let ntc = float::Ntc::<f64>::new(&probe)?;
        let short = 0.5 * ntc.ohms(envelope::TEMPERATURE_MAX_K)?;
        let open = 2.0 * ntc.ohms(envelope::TEMPERATURE_MIN_K)?;
        let c = NtcConfig {
            front_end: FrontEnd::new(circuit, adc_bits, reference_ohms, short, open)?,
            ..probe
        };
        c.validate()?;
        Ok(c)
    }

    /// The beta model from `f64` values (host helper).
    pub fn beta(r0_ohms: f64, t0_k: f64, beta_k: f64) -> Result<NtcModel, Error> {
        Ok(NtcModel::Beta {
            r0_ohms: fx::from_f64(r0_ohms, SensorSetting::R0)?,
            t0_k: fx::from_f64(t0_k, SensorSetting::T0)?,
            beta_k: fx::from_f64(beta_k, SensorSetting::Beta)?,
        })
    }

    /// The Steinhart–Hart model from `f64` values (host helper).
    pub fn steinhart_hart(a: f64, b: f64, c: f64) -> Result<NtcModel, Error> {
        Ok(NtcModel::SteinhartHart {
            a: fx::from_f64(a, SensorSetting::SteinhartHartA)?,
            b: fx::from_f64(b, SensorSetting::SteinhartHartB)?,
            c: fx::from_f64(c, SensorSetting::SteinhartHartC)?,
        })
    }

    fn validate_model(&self) -> Result<(), Error> {
        match self.model {
            NtcModel::Beta {
                r0_ohms,
                t0_k,
                beta_k,
            } => {
                if !(1..=10_000_000).contains(&r0_ohms.to_fixed()) {
                    return Err(Error::OutOfRange(SensorSetting::R0.into()));
                }
                if !(150..=500).contains(&t0_k) {
                    return Err(Error::OutOfRange(SensorSetting::T0.into()));
                }
                if !(1000..=10_000).contains(&beta_k) {
                    return Err(Error::OutOfRange(SensorSetting::Beta.into()));
                }
            }
            NtcModel::SteinhartHart { a, b, c } => {
                // Usual magnitudes: A ~ 1e-3, B ~ 2e-4, C ~ 1e-7 (all 1/K).
                if a.abs() > 0.1 {
                    return Err(Error::OutOfRange(SensorSetting::SteinhartHartA.into()));
                }
                if b <= 0 || b > 0.01 {
                    return Err(Error::OutOfRange(SensorSetting::SteinhartHartB.into()));
                }
                if c < 0 || c > 1e-4 {
                    return Err(Error::OutOfRange(SensorSetting::SteinhartHartC.into()));
                }
            }
        }
        Ok(())
    }

    /// Checks every field.
    pub fn validate(&self) -> Result<(), Error> {
        self.front_end.validate()?;
        self.validate_model()?;
        if self.range_min_k < 150 || self.range_min_k >= self.range_max_k {
            return Err(Error::OutOfRange(SensorSetting::RangeMinimum.into()));
        }
        if self.range_max_k > 500 {
            return Err(Error::OutOfRange(SensorSetting::RangeMaximum.into()));
        }
        Ok(())
    }
}
