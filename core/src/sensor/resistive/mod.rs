//! Resistive sensor inputs (RTD, NTC) read ratiometrically by an ADC.
//!
//! Three circuits, all ratiometric (the converter's reference follows the
//! excitation, so its value cancels), with `x = code / 2^bits`:
//!
//! | [`Circuit`] | wiring | measured resistance |
//! |---|---|---|
//! | `Ratiometric` | sensor in series with a reference resistor, one current through both; the converter reads the sensor voltage against the reference-resistor voltage | `R = R_ref·x` |
//! | `DividerLow` | excitation → R_ref → input → sensor → ground | `R = R_ref·x/(1 − x)` |
//! | `DividerHigh` | excitation → sensor → input → R_ref → ground | `R = R_ref·(1 − x)/x` |
//!
//! Both paths write the measured resistance as a ratio `num/den` of two
//! integers of the code (`code/2^bits`, `code/(2^bits − code)` or
//! `(2^bits − code)/code`) so that no division is needed where only a
//! logarithm follows (NTC), then:
//!
//! * **2-wire lead resistance** (`lead_ohms`, both leads together) is
//!   subtracted: `R = R_ref·(num − λ·den)/den`, `λ = R_lead/R_ref`;
//! * **open and short circuit** are decided on the code against thresholds
//!   prepared from `open_ohms` and `short_ohms` (measured resistance, leads
//!   included), plus the rails: a code outside `0 … 2^bits − 1` is
//!   [`Status::SENSOR_SATURATED`](crate::Status::SENSOR_SATURATED), and the top
//!   code of the `Ratiometric` circuit (an open sensor drives the converter
//!   there) is an open circuit. A faulty code is replaced by the nearest
//!   valid one so the value stays defined;
//! * **self-heating**: the power in the sensor is
//!   `P = V²·x(1 − x)/R_ref` for the dividers (`excitation` in V) and
//!   `P = I²·R` for the series circuit (`excitation` in A); the sensor reads
//!   `P·θ` warm, with `θ = self_heating_k_per_mw` (the inverse of the
//!   data-sheet dissipation constant). Lead dissipation is neglected.

pub mod fixed;
pub mod float;

use crate::error::SensorSetting;
use crate::{Error, fx};

/// How the sensor is wired to the converter (see the module table).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Circuit {
    /// Sensor and reference resistor in series with one current; `R = R_ref·x`.
    Ratiometric,
    /// Sensor to ground, reference resistor to the excitation; `R = R_ref·x/(1 − x)`.
    DividerLow,
    /// Sensor to the excitation, reference resistor to ground; `R = R_ref·(1 − x)/x`.
    DividerHigh,
}

/// A resistive input: circuit, converter and the optional corrections.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FrontEnd {
    /// The circuit.
    pub circuit: Circuit,
    /// Converter resolution, bits (8 … 24); codes are `0 … 2^bits − 1`.
    pub adc_bits: u8,
    /// Reference resistor, Ω (> 0).
    pub reference_ohms: fx::Resistance,
    /// Total resistance of both leads of a 2-wire connection, Ω (0 for 3- or
    /// 4-wire or when not corrected); must be below `short_ohms`.
    pub lead_ohms: fx::Resistance,
    /// Measured resistance below which the input is a short circuit, Ω.
    pub short_ohms: fx::Resistance,
    /// Measured resistance above which the input is an open circuit, Ω.
    pub open_ohms: fx::Resistance,
    /// Excitation for the self-heating correction: volts across the divider,
    /// or amperes through the series circuit. 0 with no correction.
    pub excitation: fx::Coefficient,
    /// Self-heating of the sensor, K per mW dissipated (1 / dissipation
    /// constant). 0: no correction.
    pub self_heating_k_per_mw: fx::Coefficient,
}

impl FrontEnd {
    /// A front-end without lead or self-heating correction (host helper:
    /// converts from `f64`, rounding to the fixed formats).
    pub fn new(
        circuit: Circuit,
        adc_bits: u8,
        reference_ohms: f64,
        short_ohms: f64,
        open_ohms: f64,
    ) -> Result<FrontEnd, Error> {
        let f = FrontEnd {
            circuit,
            adc_bits,
            reference_ohms: fx::from_f64(reference_ohms, SensorSetting::ReferenceResistance)?,
            lead_ohms: fx::Resistance::ZERO,
            short_ohms: fx::from_f64(short_ohms, SensorSetting::ShortCircuitThreshold)?,
            open_ohms: fx::from_f64(open_ohms, SensorSetting::OpenCircuitThreshold)?,
            excitation: fx::Coefficient::ZERO,
            self_heating_k_per_mw: fx::Coefficient::ZERO,
        };
        f.validate()?;
        Ok(f)
    }

    /// Checks every field.
    pub fn validate(&self) -> Result<(), Error> {
        if !(8..=24).contains(&self.adc_bits) {
            return Err(Error::OutOfRange(SensorSetting::ConverterBits.into()));
        }
        if self.reference_ohms.to_bits() < 1 << 32 {
            return Err(Error::OutOfRange(SensorSetting::ReferenceResistance.into()));
        }
        if self.short_ohms >= self.open_ohms {
            return Err(Error::OutOfRange(
                SensorSetting::ShortCircuitThreshold.into(),
            ));
        }
        if self.lead_ohms >= self.short_ohms && self.lead_ohms != fx::Resistance::ZERO {
            return Err(Error::OutOfRange(SensorSetting::LeadResistance.into()));
        }
        if self.excitation < 0 || self.excitation > 100 {
            return Err(Error::OutOfRange(SensorSetting::Excitation.into()));
        }
        if self.self_heating_k_per_mw < 0 || self.self_heating_k_per_mw > 100 {
            return Err(Error::OutOfRange(SensorSetting::SelfHeating.into()));
        }
        Ok(())
    }

    /// `2^bits`.
    pub fn full_code(&self) -> u32 {
        1 << self.adc_bits.clamp(8, 24)
    }

    /// The codes that are still valid readings: `(lowest, highest)`; codes
    /// outside are open or short circuits. Integer arithmetic on the
    /// configuration (one 128-bit division per threshold, at configuration
    /// time), shared by both paths so they classify every code alike.
    pub fn valid_codes(&self) -> (u32, u32) {
        let full = self.full_code() as u128;
        let rref = self.reference_ohms.to_bits() as u128;
        let s = self.short_ohms.to_bits() as u128;
        let o = self.open_ohms.to_bits() as u128;
        let ceil = |n: u128, d: u128| n.div_ceil(d.max(1));
        let floor = |n: u128, d: u128| n / d.max(1);
        let (lo, hi) = match self.circuit {
            // R = R_ref·c/full, increasing: short below ⌈S·full/R_ref⌉, open
            // above ⌊O·full/R_ref⌋ and at the top code.
            Circuit::Ratiometric => (ceil(s * full, rref), floor(o * full, rref).min(full - 2)),
            // R = R_ref·c/(full − c), increasing: c = full·R/(R + R_ref).
            Circuit::DividerLow => (ceil(full * s, s + rref), floor(full * o, o + rref)),
            // R = R_ref·(full − c)/c, decreasing: c = full·R_ref/(R + R_ref).
            Circuit::DividerHigh => (ceil(full * rref, o + rref), floor(full * rref, s + rref)),
        };
        let lo = lo.max(1).min(full - 1) as u32;
        let hi = hi.min(full - 1) as u32;
        (lo, hi.max(lo))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thresholds_match_the_circuit_formulas() {
        // Ratiometric, 16 bits, 400 Ω reference: R = 400·c/65536.
        let f = FrontEnd::new(Circuit::Ratiometric, 16, 400.0, 5.0, 390.0).unwrap();
        let (lo, hi) = f.valid_codes();
        assert!(400.0 * lo as f64 / 65536.0 >= 5.0);
        assert!(400.0 * (lo - 1) as f64 / 65536.0 < 5.0);
        assert!(400.0 * hi as f64 / 65536.0 <= 390.0);
        assert!(400.0 * (hi + 1) as f64 / 65536.0 > 390.0);
        // Divider low: R = 10k·c/(65536 − c).
        let f = FrontEnd::new(Circuit::DividerLow, 16, 1e4, 50.0, 2e6).unwrap();
        let (lo, hi) = f.valid_codes();
        let r = |c: u32| 1e4 * c as f64 / (65536 - c) as f64;
        assert!(r(lo) >= 50.0 && r(lo - 1) < 50.0);
        assert!(r(hi) <= 2e6 && r(hi + 1) > 2e6);
        // Divider high: R = 10k·(65536 − c)/c, decreasing.
        let f = FrontEnd::new(Circuit::DividerHigh, 16, 1e4, 50.0, 2e6).unwrap();
        let (lo, hi) = f.valid_codes();
        let r = |c: u32| 1e4 * (65536 - c) as f64 / c as f64;
        assert!(r(lo) <= 2e6 && r(lo - 1) > 2e6);
        assert!(r(hi) >= 50.0 && r(hi + 1) < 50.0);
    }

    #[test]
    fn bad_front_ends_are_refused() {
        assert!(FrontEnd::new(Circuit::Ratiometric, 7, 400.0, 5.0, 390.0).is_err());
        assert!(FrontEnd::new(Circuit::Ratiometric, 16, 0.5, 5.0, 390.0).is_err());
        assert!(FrontEnd::new(Circuit::Ratiometric, 16, 400.0, 500.0, 390.0).is_err());
        assert!(FrontEnd::new(Circuit::Ratiometric, 16, f64::NAN, 5.0, 390.0).is_err());
        let mut f = FrontEnd::new(Circuit::Ratiometric, 16, 400.0, 5.0, 390.0).unwrap();
        f.lead_ohms = fx::Resistance::from_bits(6 << 32);
        assert_eq!(
            f.validate(),
            Err(Error::OutOfRange(SensorSetting::LeadResistance.into()))
        );
    }
}
