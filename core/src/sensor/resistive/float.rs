//! Resistive input, float. Same steps as [`super::fixed`].

use super::{Circuit, FrontEnd};
use crate::error::Measured;
use crate::sensor::finite;
use crate::{Error, Real, Status, fx};

/// One code, read: the measured resistance as `num/den` (lead-corrected), the
/// self-heating and the flags.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sample<F> {
    /// Numerator of `R/R_ref`, lead-corrected.
    pub num: F,
    /// Denominator of `R/R_ref`.
    pub den: F,
    /// Self-heating of the sensor, K (to subtract from the reading).
    pub heating: F,
    /// [`Status::SENSOR_OPEN_CIRCUIT`], [`Status::SENSOR_SHORT_CIRCUIT`] or
    /// [`Status::SENSOR_SATURATED`] when they apply.
    pub status: Status,
}

/// A prepared resistive input.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Input<F> {
    circuit: Circuit,
    full: u32,
    lo: u32,
    hi: u32,
    reference_ohms: F,
    lead: F,
    heating: F,
}

impl<F: Real> Input<F> {
    /// Prepares an input.
    pub fn new(f: &FrontEnd) -> Result<Input<F>, Error> {
        f.validate()?;
        let (lo, hi) = f.valid_codes();
        let rref = F::lit(fx::to_f64(f.reference_ohms));
        let exc = F::lit(fx::to_f64(f.excitation));
        let theta = F::lit(fx::to_f64(f.self_heating_k_per_mw)) * F::lit(1000.0);
        let heating = match f.circuit {
            Circuit::Ratiometric => theta * exc * exc * rref,
            Circuit::DividerLow | Circuit::DividerHigh => theta * exc * exc / rref,
        };
        Ok(Input {
            circuit: f.circuit,
            full: f.full_code(),
            lo,
            hi,
            reference_ohms: rref,
            lead: F::lit(fx::to_f64(f.lead_ohms)) / rref,
            heating,
        })
    }

    /// The reference resistance, Ω.
    pub fn reference_ohms(&self) -> F {
        self.reference_ohms
    }

    /// Reads one code.
    pub fn sample(&self, code: u32) -> Sample<F> {
        let (code, status) = self.check_code(code);
        let (num, den) = self.ratio(code);
        let num = self.lead_correct(num, den);
        Sample {
            num,
            den,
            heating: self.heating(code, num),
            status,
        }
    }

    /// Reads a measured resistance (leads included), Ω: the open and short
    /// thresholds are applied to `R` (a faulty value is replaced by the
    /// threshold), then the same steps with `num/den = R/R_ref`. No
    /// self-heating correction: it belongs to converter codes, where the
    /// circuit's state is known.
    pub fn sample_ohms(&self, ohms: F, f: &FrontEnd) -> Result<Sample<F>, Error> {
        let ohms = finite(ohms, Measured::Resistance)?;
        let short = F::lit(fx::to_f64(f.short_ohms));
        let open = F::lit(fx::to_f64(f.open_ohms));
        let mut status = Status::OK;
        let mut r = ohms;
        if r < short {
            status |= Status::SENSOR_SHORT_CIRCUIT;
            r = short;
        } else if r > open {
            status |= Status::SENSOR_OPEN_CIRCUIT;
            r = open;
        }
        let (num, den) = (r / self.reference_ohms, F::ONE);
        let num = self.lead_correct(num, den);
        Ok(Sample {
            num,
            den,
            heating: F::ZERO,
            status,
        })
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
    fn ratio(&self, code: u32) -> (F, F) {
        let (n, d) = match self.circuit {
            Circuit::Ratiometric => (code, self.full),
            Circuit::DividerLow => (code, self.full - code),
            Circuit::DividerHigh => (self.full - code, code),
        };
        (F::lit(n as f64), F::lit(d as f64))
    }

    /// `num − λ·den`.
    fn lead_correct(&self, num: F, den: F) -> F {
        num - self.lead * den
    }

    /// Self-heating, K.
    fn heating(&self, code: u32, num: F) -> F {
        let full = F::lit(self.full as f64);
        match self.circuit {
            Circuit::Ratiometric => self.heating * num / full,
            Circuit::DividerLow | Circuit::DividerHigh => {
                let x = F::lit(code as f64) / full;
                self.heating * x * (F::ONE - x)
            }
        }
    }
}
