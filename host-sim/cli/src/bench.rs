//! A bench rig in software: the converter codes a gauge's front-ends deliver
//! for a pressure and a temperature (the inverse of the sensor front-ends,
//! in f64), to drive a device that takes injected samples — the emulated
//! device, or the firmware in QEMU.
//!
//! The codes are those of the front-ends' own models: a value read back by
//! the front-end (before its calibration correction) is the value asked
//! for, within one converter step. Lead resistance is added to resistive
//! sensors; self-heating is not modelled.

use isochor_core::sensor::calibration::{CalibrationRecord, SensorConfig};
use isochor_core::sensor::channel::RawSample;
use isochor_core::sensor::resistive::{Circuit, FrontEnd};
use isochor_core::{fx, sensor};

use crate::Error;

/// Turns readings into codes for one pair of calibration records.
#[derive(Clone, Debug)]
pub struct Bench {
    pressure: CalibrationRecord,
    temperature: CalibrationRecord,
    barometric_pa: f64,
}

/// The code of a resistive front-end for a sensor resistance (leads added).
fn resistive_code(f: &FrontEnd, sensor_ohms: f64) -> Result<u32, Error> {
    let r = sensor_ohms + fx::to_f64(f.lead_ohms);
    let rref = fx::to_f64(f.reference_ohms);
    let x = match f.circuit {
        Circuit::Ratiometric => r / rref,
        Circuit::DividerLow => r / (r + rref),
        Circuit::DividerHigh => rref / (r + rref),
    };
    code_of(x * f.full_code() as f64, f.full_code() - 1)
}

fn code_of(x: f64, top: u32) -> Result<u32, Error> {
    if !x.is_finite() || x < 0.0 || x > top as f64 {
        return Err(Error::Invalid(format!("code {x} outside the converter")));
    }
    Ok(x.round() as u32)
}

impl Bench {
    /// A bench for the sensors of two calibration records, at a site with
    /// this barometric pressure (Pa).
    pub fn new(
        pressure: CalibrationRecord,
        temperature: CalibrationRecord,
        barometric_pa: f64,
    ) -> Bench {
        Bench {
            pressure,
            temperature,
            barometric_pa,
        }
    }

    /// The temperature code for `t_k`.
    pub fn temperature_code(&self, t_k: f64) -> Result<u32, Error> {
        match &self.temperature.sensor {
            SensorConfig::Rtd(c) => {
                let r = sensor::rtd::float::Rtd::<f64>::new(c)?.ohms(t_k)?;
                resistive_code(&c.front_end, r)
            }
            SensorConfig::Ntc(c) => {
                let r = sensor::ntc::float::Ntc::<f64>::new(c)?.ohms(t_k)?;
                resistive_code(&c.front_end, r)
            }
            _ => Err(Error::Invalid("not a temperature sensor".into())),
        }
    }

    /// The pressure code for an absolute pressure `p_pa` with the
    /// transducer at `t_k` (a bipolar converter's code in two's complement
    /// in its low bits).
    pub fn pressure_code(&self, p_pa: f64, t_k: f64) -> Result<u32, Error> {
        match &self.pressure.sensor {
            SensorConfig::Bridge(c) => {
                let b = sensor::bridge::float::Bridge::<f64>::new(c)?;
                let x = b.code(p_pa, t_k, self.barometric_pa)?.round();
                let (lo, hi) = c.rails();
                if x <= lo as f64 || x >= hi as f64 {
                    return Err(Error::Invalid(format!("bridge code {x} at a rail")));
                }
                let mask = if c.adc_bits >= 32 {
                    u32::MAX
                } else {
                    (1u32 << c.adc_bits) - 1
                };
                Ok((x as i32 as u32) & mask)
            }
            SensorConfig::Loop(c) => {
                let l = sensor::current_loop::float::Loop::<f64>::new(c)?;
                let ma = l.milliamps(p_pa, self.barometric_pa)?;
                let per_code = fx::to_f64(c.adc_reference_v) / fx::to_f64(c.shunt_ohms) * 1000.0
                    / (1u64 << c.adc_bits) as f64;
                code_of(ma / per_code, (1 << c.adc_bits) - 1)
            }
            _ => Err(Error::Invalid("not a pressure sensor".into())),
        }
    }

    /// Both codes of a sample.
    pub fn sample(&self, p_pa: f64, t_k: f64) -> Result<RawSample, Error> {
        Ok(RawSample {
            pressure: self.pressure_code(p_pa, t_k)?,
            temperature: self.temperature_code(t_k)?,
        })
    }
}
