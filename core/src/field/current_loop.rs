//! The 4–20 mA output: the content or the fill fraction on a current loop,
//! with NAMUR NE 43 signalling.
//!
//! A configured range (`lower` → 4 mA, `upper` → 20 mA) maps the quantity
//! linearly; outside the range the current saturates at the ends of the
//! NE 43 measurement band, 3.8 mA and 20.5 mA. When the estimate is not
//! valid ([`NOT_A_VALUE`]: the status word's content-invalid bits, a
//! sensor fault, no estimate yet, no usable configuration) the output signals failure in the
//! configured direction: [`FAILURE_LOW`] (NE 43: ≤ 3.6 mA) or
//! [`FAILURE_HIGH`] (NE 43: ≥ 21 mA). NAMUR NE 43 (2003), "Standardization
//! of the signal level for the failure information of digital
//! transmitters": measurement 3.8 … 20.5 mA, failure ≤ 3.6 mA or ≥ 21 mA.
//!
//! The gain is prepared on the host ([`LoopScalars::prepare`], `f64`); the
//! device clamps, subtracts, shifts and multiplies once
//! ([`LoopScalars::current`]). [`current_f64`] is the reference the tests
//! hold it to.

use crate::error::FieldSetting;
use serde::{Deserialize, Serialize};

use super::{ma, q24};
use crate::content::fixed::Content;
use crate::{Error, Status, fx};

/// Lower end of the NE 43 measurement band: 3.8 mA.
pub const MEASURE_MIN: fx::Milliamps = ma(3.8);
/// Upper end of the NE 43 measurement band: 20.5 mA.
pub const MEASURE_MAX: fx::Milliamps = ma(20.5);
/// The low failure current: 3.5 mA, inside NE 43's failure band (≤ 3.6 mA)
/// with 0.1 mA left for the output stage's own error (common practice).
pub const FAILURE_LOW: fx::Milliamps = ma(3.5);
/// The high failure current: 21.5 mA, inside NE 43's failure band
/// (≥ 21 mA) with 0.5 mA left for the output stage's own error (common
/// practice).
pub const FAILURE_HIGH: fx::Milliamps = ma(21.5);

/// The status flags after which the content is not a value for the field
/// outputs: [`Status::CONTENT_INVALID`], a sensor fault of either channel
/// (open or short circuit, saturated converter, the alarm), a settled
/// pressure that did not converge, no usable configuration.
pub const NOT_A_VALUE: Status = Status::from_bits(
    Status::CONTENT_INVALID.bits()
        | Status::SENSOR_FAULT.bits()
        | Status::SENSOR_OPEN_CIRCUIT.bits()
        | Status::SENSOR_SHORT_CIRCUIT.bits()
        | Status::SENSOR_SATURATED.bits()
        | Status::NOT_CONVERGED.bits()
        | Status::CONFIG_UNUSABLE.bits(),
);

/// Where a board puts the loop current: a DAC or a filtered PWM driving a
/// loop transmitter. Contract: takes the set-point and returns at once;
/// called after every sample (and when the configuration changes).
pub trait LoopOutput {
    /// Sets the loop current.
    fn set_current(&mut self, current: fx::Milliamps);
}

/// The quantity on the loop.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LoopQuantity {
    /// Fill fraction (1 = rated content).
    #[default]
    FillFraction,
    /// Mass of gas, kg.
    Mass,
}

impl LoopQuantity {
    /// The quantity of an estimate, Q24.
    pub fn of(self, c: &Content) -> i64 {
        match self {
            LoopQuantity::FillFraction => q24(c.fill_fraction.to_bits() as i64, 32),
            LoopQuantity::Mass => q24(c.mass_kg.to_bits() as i64, 40),
        }
    }
}

/// The failure direction.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Failure {
    /// Downscale: [`FAILURE_LOW`].
    #[default]
    Low,
    /// Upscale: [`FAILURE_HIGH`].
    High,
}

impl Failure {
    /// The failure current of this direction.
    pub const fn current(self) -> fx::Milliamps {
        match self {
            Failure::Low => FAILURE_LOW,
            Failure::High => FAILURE_HIGH,
        }
    }
}

/// Largest magnitude of a range end, Q24 units (10⁶ kg or 10⁶ rated
/// contents: far above the envelope, far below overflow).
const END_MAX: i64 = 1_000_000 << 24;

/// The loop output as configured.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct LoopOutputConfig {
    /// The quantity.
    pub quantity: LoopQuantity,
    /// The value at 4 mA (kg, or a fraction of the rated content).
    pub lower: fx::Anchor,
    /// The value at 20 mA; above `lower`.
    pub upper: fx::Anchor,
    /// The failure direction.
    pub failure: Failure,
}

impl Default for LoopOutputConfig {
    /// Fill fraction 0 → 4 mA, 1 → 20 mA, failure downscale.
    fn default() -> LoopOutputConfig {
        LoopOutputConfig {
            quantity: LoopQuantity::FillFraction,
            lower: fx::Anchor::ZERO,
            upper: fx::Anchor::ONE,
            failure: Failure::Low,
        }
    }
}

impl LoopOutputConfig {
    /// Checks the range: `lower < upper`, both within ±10⁶, and the span at
    /// least 2⁻¹⁶ (the smallest span the prepared gain keeps to 1e-6 mA).
    pub fn validate(&self) -> Result<(), Error> {
        let (lo, hi) = (self.lower.to_bits(), self.upper.to_bits());
        if lo.abs() > END_MAX || hi.abs() > END_MAX {
            return Err(Error::OutOfRange(FieldSetting::LoopOutputRangeEnd.into()));
        }
        if hi - lo < 1 << 8 {
            return Err(Error::OutOfRange(FieldSetting::LoopOutputRangeOrder.into()));
        }
        Ok(())
    }
}

/// The loop output prepared: the values at the ends of the measurement
/// band and the gain between them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct LoopScalars {
    /// The quantity.
    pub quantity: LoopQuantity,
    /// The value at 3.8 mA, Q24.
    pub lo: i64,
    /// The value at 20.5 mA, Q24.
    pub hi: i64,
    /// Shift of `value − lo` before the multiply (so it fits 32 bits).
    pub shift: u8,
    /// Milliamps bits per unit of the shifted difference, × 2^`gain_shift`;
    /// 0: not configured (the output signals failure).
    pub gain: u32,
    /// See `gain`.
    pub gain_shift: u8,
    /// The failure direction.
    pub failure: Failure,
}

impl LoopScalars {
    /// An output without a configuration: always failure, downscale.
    pub const UNCONFIGURED: LoopScalars = LoopScalars {
        quantity: LoopQuantity::FillFraction,
        lo: 0,
        hi: 0,
        shift: 0,
        gain: 0,
        gain_shift: 0,
        failure: Failure::Low,
    };

    /// Prepares `c` (hosts: `f64`).
    pub fn prepare(c: &LoopOutputConfig) -> Result<LoopScalars, Error> {
        c.validate()?;
        let (l, u) = (c.lower.to_bits() as f64, c.upper.to_bits() as f64);
        let span = u - l;
        // The measurement band's ends: 3.8 mA is 0.2/16 of the span below
        // `lower`, 20.5 mA is 0.5/16 above `upper`.
        let lo = libm::round(l - span * 0.2 / 16.0) as i64;
        let hi = libm::round(u + span * 0.5 / 16.0) as i64;
        let range = (hi - lo) as u64;
        let mut shift = 0u8;
        while range >> shift > u64::from(u32::MAX) {
            shift += 1;
        }
        let units = (range >> shift) as f64;
        let band = (MEASURE_MAX.to_bits() - MEASURE_MIN.to_bits()) as f64;
        let per_unit = band / units;
        let mut gain_shift = 0u8;
        while gain_shift < 62 && per_unit * libm::ldexp(1.0, i32::from(gain_shift) + 1) < 4.29e9 {
            gain_shift += 1;
        }
        let gain = libm::round(per_unit * libm::ldexp(1.0, i32::from(gain_shift)));
        if !(1.0..=u32::MAX as f64).contains(&gain) {
            return Err(Error::OutOfRange(FieldSetting::LoopOutputRange.into()));
        }
        let s = LoopScalars {
            quantity: c.quantity,
            lo,
            hi,
            shift,
            gain: gain as u32,
            gain_shift,
            failure: c.failure,
        };
        s.validate()?;
        Ok(s)
    }

    /// Checks what [`LoopScalars::current`] relies on.
    pub fn validate(&self) -> Result<(), Error> {
        if self.gain == 0 {
            return Ok(());
        }
        let bad = Error::OutOfRange(FieldSetting::LoopOutput.into());
        if self.lo.abs() > 2 * END_MAX || self.hi.abs() > 2 * END_MAX || self.hi <= self.lo {
            return Err(bad);
        }
        if self.shift > 40 || self.gain_shift > 62 {
            return Err(bad);
        }
        if ((self.hi - self.lo) as u64) >> self.shift > u64::from(u32::MAX) {
            return Err(bad);
        }
        Ok(())
    }

    /// The loop current for an estimate of `value` (Q24) whose status is
    /// `status`; `None`: no estimate. Never panics; the result lies in the
    /// measurement band or is a failure current.
    pub fn current(&self, value: Option<i64>, status: Status) -> fx::Milliamps {
        let failure = self.failure.current();
        let Some(v) = value else { return failure };
        if self.gain == 0 || status.intersects(NOT_A_VALUE) {
            return failure;
        }
        // `max`/`min`, not `clamp`: no panic path (docs/budget.md).
        let v = v.max(self.lo).min(self.hi);
        // 0 … (hi − lo) >> shift < 2³² (validated).
        let d = (v.wrapping_sub(self.lo) as u64) >> (self.shift & 63);
        let d = d.min(u64::from(u32::MAX));
        // d < 2³², gain < 2³²: the product fits 64 bits.
        let add = (d * u64::from(self.gain)) >> (self.gain_shift & 63);
        let bits = u64::from(MEASURE_MIN.to_bits()).saturating_add(add);
        fx::Milliamps::from_bits(bits.min(u64::from(MEASURE_MAX.to_bits())) as u32)
    }

    /// The loop current of a tracker output (see [`LoopScalars::current`]).
    pub fn of_content(&self, content: Option<&Content>, status: Status) -> fx::Milliamps {
        self.current(content.map(|c| self.quantity.of(c)), status)
    }
}

/// The reference loop current, mA: `value` in the quantity's unit, `valid`
/// false for an estimate that is not a value.
pub fn current_f64(c: &LoopOutputConfig, value: Option<f64>, valid: bool) -> f64 {
    let failure = fx::to_f64(c.failure.current());
    match value {
        Some(v) if valid && v.is_finite() => {
            let (l, u) = (fx::to_f64(c.lower), fx::to_f64(c.upper));
            (4.0 + 16.0 * (v - l) / (u - l)).clamp(3.8, 20.5)
        }
        _ => failure,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bands_are_ne43() {
        // NAMUR NE 43: measurement 3.8 … 20.5 mA, failure ≤ 3.6 or ≥ 21 mA.
        assert!((fx::to_f64(MEASURE_MIN) - 3.8).abs() < 1e-7);
        assert!((fx::to_f64(MEASURE_MAX) - 20.5).abs() < 1e-7);
        assert!(fx::to_f64(FAILURE_LOW) <= 3.6);
        assert!(fx::to_f64(FAILURE_HIGH) >= 21.0);
    }
}
