//! Resistive input, fixed point. Same steps as [`super::float`].
//!
//! Per sample: code checks (integer compares), one multiply for the lead
//! correction, one or two for self-heating.

use super::{Circuit, FrontEnd};
use crate::error::SensorSetting;
use crate::fx::{self, Coef, mul_u32, sat_u32};
use crate::{Error, Status};

/// One code, read: the measured resistance as `num/den` (lead-corrected,
/// `num` at 2^-`num_frac`), the self-heating and the flags.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Sample {
    /// Numerator of `R/R_ref`, lead-corrected, at 2^-`num_frac` (> 0).
    pub num: u32,
    /// Fraction bits of `num`: `32 − bits`, so that any code fits.
    pub num_frac: u32,
    /// Denominator of `R/R_ref` (> 0).
    pub den: u32,
    /// Self-heating of the sensor, K at 2^-16 (to subtract from the reading).
    pub heating: u32,
    /// [`Status::SENSOR_OPEN_CIRCUIT`], [`Status::SENSOR_SHORT_CIRCUIT`] or
    /// [`Status::SENSOR_SATURATED`] when they apply.
    pub status: Status,
}

/// A prepared resistive input.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Input {
    circuit: Circuit,
    bits: u32,
    full: u32,
    lo: u32,
    hi: u32,
    /// λ = R_lead/R_ref.
    lead: Coef,
    /// Self-heating per unit of the circuit's power variable (see `heating`).
    heating: Coef,
    /// Lead, short and open resistances, Ω at 2^-32.
    lead_ohms: u64,
    short_ohms: u64,
    open_ohms: u64,
}

impl Input {
    /// Prepares an input (integer arithmetic only).
    pub fn new(f: &FrontEnd) -> Result<Input, Error> {
        f.validate()?;
        let (lo, hi) = f.valid_codes();
        let rref = Coef::from_raw(f.reference_ohms.to_bits(), 32);
        let inv_rref = rref
            .recip()
            .ok_or(Error::OutOfRange(SensorSetting::ReferenceResistance.into()))?;
        let lead = Coef::from_raw(f.lead_ohms.to_bits(), 32).mul(inv_rref);
        let exc = Coef::from_raw(f.excitation.to_bits().unsigned_abs(), 48);
        // θ in K/W.
        let theta = Coef::from_raw(f.self_heating_k_per_mw.to_bits().unsigned_abs(), 48)
            .mul(const { Coef::from_f64(1000.0) });
        let heating = match f.circuit {
            // P = I²·R_ref·(num/den), den = 2^bits.
            Circuit::Ratiometric => theta.mul(exc).mul(exc).mul(rref),
            // P = V²/R_ref·x(1 − x).
            Circuit::DividerLow | Circuit::DividerHigh => theta.mul(exc).mul(exc).mul(inv_rref),
        };
        let bits = f.adc_bits as u32;
        Ok(Input {
            circuit: f.circuit,
            bits,
            full: 1 << bits,
            lo,
            hi,
            lead,
            heating,
            lead_ohms: f.lead_ohms.to_bits(),
            short_ohms: f.short_ohms.to_bits(),
            open_ohms: f.open_ohms.to_bits(),
        })
    }

    /// Reads a measured resistance (leads included): the open and short
    /// thresholds are applied (a faulty value is replaced by the threshold),
    /// then the leads are subtracted. Returns the sensor resistance (Ω at
    /// 2^-32) and the flags. No self-heating correction: it belongs to
    /// converter codes, where the circuit's state is known.
    pub fn sample_ohms(&self, ohms: fx::Resistance) -> (u64, Status) {
        let r = ohms.to_bits();
        let (r, status) = if r < self.short_ohms {
            (self.short_ohms, Status::SENSOR_SHORT_CIRCUIT)
        } else if r > self.open_ohms {
            (self.open_ohms, Status::SENSOR_OPEN_CIRCUIT)
        } else {
            (r, Status::OK)
        };
        (r.saturating_sub(self.lead_ohms).max(1), status)
    }

    /// Reads one code.
    pub fn sample(&self, code: u32) -> Sample {
        let (code, status) = self.check_code(code);
        let (num, den) = self.ratio(code);
        let num = self.lead_correct(num, den);
        Sample {
            num,
            num_frac: 32 - self.bits,
            den,
            heating: self.heating(code, num),
            status,
        }
    }

    /// Classifies a code and replaces a faulty one by the nearest valid code.
    fn check_code(&self, code: u32) -> (u32, Status) {
        if code >= self.full {
            return (self.hi, Status::SENSOR_SATURATED);
        }
        let (below, above) = match self.circuit {
            Circuit::Ratiometric | Circuit::DividerLow => {
                (Status::SENSOR_SHORT_CIRCUIT, Status::SENSOR_OPEN_CIRCUIT)
            }
            Circuit::DividerHigh => (Status::SENSOR_OPEN_CIRCUIT, Status::SENSOR_SHORT_CIRCUIT),
        };
        if code < self.lo {
            (self.lo, below)
        } else if code > self.hi {
            (self.hi, above)
        } else {
            (code, Status::OK)
        }
    }

    /// `R_measured/R_ref = num/den`.
    fn ratio(&self, code: u32) -> (u32, u32) {
        match self.circuit {
            Circuit::Ratiometric => (code, self.full),
            Circuit::DividerLow => (code, self.full - code),
            Circuit::DividerHigh => (self.full - code, code),
        }
    }

    /// `num − λ·den` at 2^-(32 − bits) (positive for valid codes: the lead
    /// resistance is below the short threshold).
    fn lead_correct(&self, num: u32, den: u32) -> u32 {
        let frac = 32 - self.bits;
        let n = (num as u64) << frac;
        let (l, _) = self.lead.scale(den, 0, frac);
        let (n, _) = sat_u32(n.saturating_sub(l).max(1));
        n
    }

    /// Self-heating, K at 2^-16.
    fn heating(&self, code: u32, num: u32) -> u32 {
        if self.heating.is_zero() {
            return 0;
        }
        let (h, _) = match self.circuit {
            // θ·I²·R_ref·num/2^bits, num at 2^-(32 − bits).
            Circuit::Ratiometric => self.heating.scale(num, 32, 16),
            // θ·V²/R_ref·x(1 − x), x(1 − x) at 2^-32 (≤ 2^30).
            Circuit::DividerLow | Circuit::DividerHigh => {
                // x ≥ 2^(32 − bits) for valid codes, so 1 − x fits 32 bits.
                let x = code << (32 - self.bits);
                let p = mul_u32(x, 0u32.wrapping_sub(x)) >> 32;
                self.heating.scale(p as u32, 32, 16)
            }
        };
        sat_u32(h).0
    }
}
