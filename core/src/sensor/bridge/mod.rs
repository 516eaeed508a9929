//! Ratiometric bridge pressure transducers (strain-gauge or piezoresistive
//! bridges read by a converter whose reference is the bridge excitation).
//!
//! The converter code gives the signal `s` as a fraction of the converter's
//! range (`code/2^(bits−1)` for bipolar converters, `code/2^bits` for
//! unipolar ones). With `ΔT = T − T_ref` the transducer's own temperature
//! minus the temperature of the coefficients:
//!
//! * zero: `z(ΔT) = z₀ + z₁·ΔT + z₂·ΔT²` (signal at the low end of the range);
//! * span: `S(ΔT) = S₀·(1 + k₁·ΔT + k₂·ΔT²)` (signal change over the range);
//! * normalised reading `u = (s − z(ΔT)) / S(ΔT)` (0 at the low end, 1 at full scale);
//! * linearity correction `q(u) = c₀ + c₁·u + c₂·u² + c₃·u³` (identity: 0, 1, 0, 0);
//! * pressure `p = p_lo + (p_hi − p_lo)·q(u)`, gauge or absolute by the
//!   transducer's [`PressureKind`], then both forms via [`gauge`](super::gauge).
//!
//! Faults: a code at either rail of the converter (or beyond its range) is
//! [`Status::SENSOR_SATURATED`](crate::Status::SENSOR_SATURATED) (amplifier or
//! converter clipped, or an open bridge wire pulled to a rail);
//! `q < −margin` is under range, `q > 1 + margin` over range (beyond full
//! scale); `|u| > 1.5` is saturated (the value is clamped there).
//!
//! Cost per code, fixed point: zero and span 4 multiplies, one division-free
//! reciprocal (7), `u` 1, the cubic 3, the pressure 1: 16 multiplies; with the
//! compensation prepared once per temperature (`compensation`,
//! `read_compensated`) 5 per code.

pub mod fixed;
pub mod float;

use crate::error::SensorSetting;
use crate::sensor::PressureKind;
use crate::{Error, fx};

/// Largest `|u|` converted (150 % of the range); beyond, the reading saturates.
pub const U_LIMIT: f64 = 1.5;

/// A bridge pressure channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BridgeConfig {
    /// Converter resolution, bits (8 … 24).
    pub adc_bits: u8,
    /// Bipolar converter (two's-complement codes, `s = code/2^(bits−1)`);
    /// else unipolar (`s = code/2^bits`).
    pub bipolar: bool,
    /// Zero `[z₀, z₁ per K, z₂ per K²]`, fractions of the converter range
    /// (`|z₀| ≤ 1`, `|z₁| ≤ 1e-2`, `|z₂| ≤ 1e-4`).
    pub zero: [fx::Coefficient; 3],
    /// Span `S₀` at the reference temperature, fraction of the converter
    /// range (1e-4 … 2).
    pub span: fx::Coefficient,
    /// Span temperature coefficients `[k₁ per K, k₂ per K²]`, relative
    /// (`|k₁| ≤ 1e-3`, `|k₂| ≤ 1e-5`).
    pub span_tc: [fx::Coefficient; 2],
    /// Temperature of the coefficients, K.
    pub reference_k: fx::Temperature,
    /// Linearity correction `[c₀, c₁, c₂, c₃]` (each within ±2).
    pub linearity: [fx::Coefficient; 4],
    /// Pressure at the low end of the range (`u = 0`), Pa, of `kind`.
    pub range_lo_pa: fx::GaugePressure,
    /// Pressure at full scale (`u = 1`), Pa, of `kind`.
    pub range_hi_pa: fx::GaugePressure,
    /// What the transducer measures.
    pub kind: PressureKind,
    /// Fraction of the range beyond 0 and 1 tolerated before the reading is
    /// flagged under or over range (0 … 0.5).
    pub range_margin: fx::Coefficient,
}

impl BridgeConfig {
    /// A transducer without temperature coefficients or linearity correction
    /// (host helper, from `f64`): `zero` and `span` in fractions of the
    /// converter range, reference temperature 25 °C, no margin.
    pub fn new(
        adc_bits: u8,
        bipolar: bool,
        zero: f64,
        span: f64,
        range_lo_pa: f64,
        range_hi_pa: f64,
        kind: PressureKind,
    ) -> Result<BridgeConfig, Error> {
        let c = BridgeConfig {
            adc_bits,
            bipolar,
            zero: [
                fx::from_f64(zero, SensorSetting::Zero)?,
                fx::Coefficient::ZERO,
                fx::Coefficient::ZERO,
            ],
            span: fx::from_f64(span, SensorSetting::Span)?,
            span_tc: [fx::Coefficient::ZERO; 2],
            reference_k: fx::Temperature::lit("298.15"),
            linearity: [
                fx::Coefficient::ZERO,
                fx::Coefficient::ONE,
                fx::Coefficient::ZERO,
                fx::Coefficient::ZERO,
            ],
            range_lo_pa: fx::from_f64(range_lo_pa, SensorSetting::RangeLowEnd)?,
            range_hi_pa: fx::from_f64(range_hi_pa, SensorSetting::RangeHighEnd)?,
            kind,
            range_margin: fx::Coefficient::ZERO,
        };
        c.validate()?;
        Ok(c)
    }

    /// Checks every field.
    pub fn validate(&self) -> Result<(), Error> {
        if !(8..=24).contains(&self.adc_bits) {
            return Err(Error::OutOfRange(SensorSetting::ConverterBits.into()));
        }
        // Integer comparisons on the coefficients' bits (a device validates
        // records at start and on every write: no float there); the limits
        // are the largest bit patterns not above them, made at compile time.
        const fn limit(x: f64) -> u64 {
            (x * (1u64 << 48) as f64) as u64
        }
        let within = |v: fx::Coefficient, lim: u64, what: SensorSetting| {
            if v.to_bits().unsigned_abs() > lim {
                Err(Error::OutOfRange(what.into()))
            } else {
                Ok(())
            }
        };
        within(self.zero[0], const { limit(1.0) }, SensorSetting::Zero)?;
        within(
            self.zero[1],
            const { limit(1e-2) },
            SensorSetting::ZeroTempco,
        )?;
        within(
            self.zero[2],
            const { limit(1e-4) },
            SensorSetting::ZeroTempco2,
        )?;
        // span < 1e-4 ⟺ bits ≤ ⌊1e-4·2^48⌋ (1e-4·2^48 is not an integer).
        if self.span.to_bits() <= const { limit(1e-4) as i64 } || self.span > 2 {
            return Err(Error::OutOfRange(SensorSetting::Span.into()));
        }
        within(
            self.span_tc[0],
            const { limit(1e-3) },
            SensorSetting::SpanTempco,
        )?;
        within(
            self.span_tc[1],
            const { limit(1e-5) },
            SensorSetting::SpanTempco2,
        )?;
        if self.reference_k < 150 || self.reference_k > 500 {
            return Err(Error::OutOfRange(
                SensorSetting::ReferenceTemperature.into(),
            ));
        }
        for c in self.linearity {
            within(c, const { limit(2.0) }, SensorSetting::LinearityCoefficient)?;
        }
        if self.range_hi_pa <= self.range_lo_pa {
            return Err(Error::OutOfRange(SensorSetting::RangeHighEnd.into()));
        }
        if self.range_margin < 0 || self.range_margin.to_bits() > 1 << 47 {
            return Err(Error::OutOfRange(SensorSetting::RangeMargin.into()));
        }
        Ok(())
    }

    /// Lowest and highest valid codes (codes at or beyond them are at a rail).
    pub fn rails(&self) -> (i32, i32) {
        let bits = self.adc_bits.clamp(8, 24) as u32;
        if self.bipolar {
            (-(1 << (bits - 1)), (1 << (bits - 1)) - 1)
        } else {
            (0, (1 << bits) - 1)
        }
    }

    /// `log2` of the code that represents a signal of 1.
    pub(crate) fn signal_bits(&self) -> u32 {
        let bits = self.adc_bits.clamp(8, 24) as u32;
        if self.bipolar { bits - 1 } else { bits }
    }
}
