//! NTC thermistor, float (generic over [`Real`]; `f64` is the reference).
//! Same steps as [`super::fixed`]: `sample` → `log_resistance` →
//! `inverse_temperature` → `temperature` → `self_heating` → `check_range`.

use super::{NtcConfig, NtcModel};
use crate::error::Measured;
use crate::sensor::resistive::float::{Input, Sample};
use crate::sensor::{TemperatureReading, finite};
use crate::{Error, Real, Status, fx};

/// A prepared NTC channel, float.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Ntc<F> {
    config: NtcConfig,
    input: Input<F>,
    ln_rref: F,
    /// `1/T = c0 + c1·L + c3·L³`.
    c0: F,
    c1: F,
    c3: F,
    range_min_k: F,
    range_max_k: F,
}

impl<F: Real> Ntc<F> {
    /// Prepares a channel.
    pub fn new(config: &NtcConfig) -> Result<Ntc<F>, Error> {
        config.validate()?;
        let (c0, c1, c3) = match config.model {
            NtcModel::Beta {
                r0_ohms,
                t0_k,
                beta_k,
            } => {
                let inv_beta = F::ONE / F::lit(fx::to_f64(beta_k));
                let c0 =
                    F::ONE / F::lit(fx::to_f64(t0_k)) - F::lit(fx::to_f64(r0_ohms)).ln() * inv_beta;
                (c0, inv_beta, F::ZERO)
            }
            NtcModel::SteinhartHart { a, b, c } => (
                F::lit(fx::to_f64(a)),
                F::lit(fx::to_f64(b)),
                F::lit(fx::to_f64(c)),
            ),
        };
        let input = Input::<F>::new(&config.front_end)?;
        Ok(Ntc {
            config: *config,
            ln_rref: input.reference_ohms().ln(),
            input,
            c0,
            c1,
            c3,
            range_min_k: F::lit(fx::to_f64(config.range_min_k)),
            range_max_k: F::lit(fx::to_f64(config.range_max_k)),
        })
    }

    /// The front-end's valid codes (codes outside read as open or short).
    pub fn valid_codes(&self) -> (u32, u32) {
        self.config.front_end.valid_codes()
    }

    /// Converts one converter code.
    pub fn read(&self, code: u32) -> TemperatureReading<F> {
        self.convert(self.input.sample(code))
    }

    /// Converts a measured resistance (leads included), Ω. NaN and infinities
    /// are errors.
    pub fn read_ohms(&self, ohms: F) -> Result<TemperatureReading<F>, Error> {
        Ok(self.convert(self.input.sample_ohms(ohms, &self.config.front_end)?))
    }

    /// The resistance of the thermistor at `temperature_k`, Ω (the inverse;
    /// closed form for Steinhart–Hart). Errors for non-finite or
    /// non-positive temperatures.
    pub fn ohms(&self, temperature_k: F) -> Result<F, Error> {
        let t = finite(temperature_k, Measured::Temperature)?;
        if t <= F::ZERO {
            return Err(Error::OutOfRange(Measured::Temperature.into()));
        }
        let y = F::ONE / t;
        let l = match self.config.model {
            NtcModel::Beta { .. } => (y - self.c0) / self.c1,
            NtcModel::SteinhartHart { .. } if self.c3 == F::ZERO => (y - self.c0) / self.c1,
            NtcModel::SteinhartHart { .. } => {
                let x = (self.c0 - y) / self.c3;
                let b3 = self.c1 / (F::lit(3.0) * self.c3);
                let root = (b3 * b3 * b3 + x * x / F::lit(4.0)).sqrt();
                cbrt(root - x / F::lit(2.0)) - cbrt(root + x / F::lit(2.0))
            }
        };
        let r = l.exp();
        if !r.is_finite() {
            return Err(Error::OutOfRange(Measured::Temperature.into()));
        }
        Ok(r)
    }

    fn convert(&self, s: Sample<F>) -> TemperatureReading<F> {
        let l = self.log_resistance(&s);
        let y = self.inverse_temperature(l);
        let (t, mut status) = self.temperature(y);
        status |= s.status;
        let t = self.self_heating(t, &s);
        self.check_range(t, status)
    }

    /// `L = ln R = ln(num) − ln(den) + ln R_ref`.
    fn log_resistance(&self, s: &Sample<F>) -> F {
        s.num.ln() - s.den.ln() + self.ln_rref
    }

    /// `1/T = c0 + c1·L + c3·L³`.
    fn inverse_temperature(&self, l: F) -> F {
        self.c0 + l * (self.c1 + self.c3 * l * l)
    }

    /// `T = 1/y`; a non-positive `y` saturates.
    fn temperature(&self, y: F) -> (F, Status) {
        if y <= F::ZERO {
            (F::lit(65_535.0), Status::SENSOR_SATURATED)
        } else {
            (F::ONE / y, Status::OK)
        }
    }

    /// Removes the sensor's self-heating.
    fn self_heating(&self, t: F, s: &Sample<F>) -> F {
        t - s.heating
    }

    /// Flags readings outside the measuring range.
    fn check_range(&self, t: F, mut status: Status) -> TemperatureReading<F> {
        if t < self.range_min_k {
            status |= Status::SENSOR_UNDER_RANGE;
        } else if t > self.range_max_k {
            status |= Status::SENSOR_OVER_RANGE;
        }
        TemperatureReading {
            temperature_k: t,
            status,
        }
    }
}

/// Real cube root.
fn cbrt<F: Real>(v: F) -> F {
    if v < F::ZERO {
        -(-v).powf(F::ONE / F::lit(3.0))
    } else {
        v.powf(F::ONE / F::lit(3.0))
    }
}
