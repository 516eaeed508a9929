//! The gauge application, without hardware: what the reference firmware
//! runs, and what the host's emulated device runs too.
//!
//! One sample's way: raw converter codes → sensor front-ends and their
//! calibration corrections ([`fixed::Pipeline::convert`]) → the tracker
//! (content, rate, time to empty, leak, settling, uncertainty, alarms) →
//! telemetry and alarm frames ([`Gauge`]). Between samples the gauge answers
//! the host (records, signed commands, gas-model loads, diagnostics) through
//! the core's [`Responder`](crate::link::device::Responder).
//!
//! Hardware stays outside: the firmware owns the converters, the UART, the
//! flash driver (any `NorFlash`), the clock, the random source and the
//! watchdog, and drives the [`Gauge`] with bytes, samples and times. The
//! host's `EmulatedDevice` drives the same [`Gauge`] over a simulated flash,
//! so host tests and emulator tests run the same application code.
//!
//! The pipeline exists twice with the same steps and names, as every
//! computation of the crate: [`fixed::Pipeline`] (the device) and
//! [`float::Pipeline`] (generic over [`Real`](crate::Real); `f64` is the
//! reference the end-to-end tests compare telemetry with, `f32` and `f64`
//! are what the firmware budget measures the same algorithm in).
//!
//! # Steps per sample
//!
//! 1. `temperature`: the temperature front-end (RTD or NTC) converts its
//!    code; the calibration correction follows.
//! 2. `compensation`: a bridge transducer is compensated at the gas
//!    temperature (the transducer sits on the vessel); the compensation is
//!    prepared once per bucket of temperature codes ([`COMPENSATION_BUCKETS`]
//!    over the converter range, about 0.07 K for the reference board's
//!    Pt1000) from the bucket's central code, so both paths take the same
//!    decision from the same integer code; the latest few buckets' are kept
//!    ([`CompensationCache`]).
//! 3. `pressure`: the pressure front-end (bridge or 4–20 mA with NAMUR NE 43
//!    persistence) converts its code with the site's barometric pressure;
//!    the calibration correction follows.
//! 4. `track`: the tracker takes pressure, temperature, both channels' flags
//!    and the sample's time.
//!
//! # Zero calibration
//!
//! `zero` shifts a channel's correction so that the present reading (the
//! last valid one, before correction) reads as the reference: the
//! barometric pressure for the pressure channel (a vented vessel holds gas
//! at the ambient pressure), 0 °C for the temperature channel (an ice
//! bath). The correction's constant coefficient absorbs the offset
//! (`c₀ += δ/(hi − lo)`, an exact shift of every reading); an identity
//! correction first takes the transducer's range as its interval. The new
//! record gets the next sequence number and is stored like any record.
//!
//! A zero is only taken where the sensor plausibly sits at the reference
//! ([`check_zero`]): both the corrected reading and the front-end's own
//! reading must lie within [`zero_limit`] of it — for pressure 2 % of the
//! transducer's span and at least 10 kPa, for temperature 2 K. Otherwise the
//! command is refused with [`Error::ZeroNotPlausible`] and nothing changes:
//! zeroing a transducer under pressure would make a full vessel read nearly
//! empty and blind the over-pressure alarm. Checking the uncorrected reading
//! too keeps repeated zeros from walking the correction away step by step.

pub mod fixed;
pub mod float;
mod gauge;

pub use gauge::{
    FIRMWARE_VERSION, Gauge, GaugeIo, Models, decode_loaded_model, model_for, model_for_in,
    stored_gas,
};

use crate::link::{RawCode, SensorChannel, ZeroRefusal};
use crate::sensor::PressureKind;
use crate::sensor::calibration::{CalibrationRecord, Correction, SensorConfig};
use crate::{Error, fx};

/// Buckets of the temperature converter's range in which a bridge
/// transducer's compensation is prepared once.
pub const COMPENSATION_BUCKETS: u32 = 1 << 14;

/// One raw sample: the codes as the converters deliver them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RawSample {
    /// Pressure converter code (a bipolar converter's two's-complement code
    /// in its low `adc_bits` bits).
    pub pressure: u32,
    /// Temperature converter code.
    pub temperature: u32,
}

impl RawSample {
    /// The sample of an injected message: exactly one code per channel.
    pub fn from_codes(codes: &[RawCode]) -> Result<RawSample, Error> {
        let mut p = None;
        let mut t = None;
        for c in codes {
            let slot = match c.channel {
                SensorChannel::Pressure => &mut p,
                SensorChannel::Temperature => &mut t,
            };
            if slot.replace(c.code).is_some() {
                return Err(Error::OutOfRange("sample codes"));
            }
        }
        match (p, t) {
            (Some(pressure), Some(temperature)) => Ok(RawSample {
                pressure,
                temperature,
            }),
            _ => Err(Error::OutOfRange("sample codes")),
        }
    }
}

/// A bipolar converter's code as a signed value (sign taken from bit
/// `bits − 1`; higher bits ignored); a unipolar code as it is.
pub fn signed_code(code: u32, bits: u8, bipolar: bool) -> i32 {
    let bits = u32::from(bits.clamp(8, 24));
    if bipolar {
        let shift = 32 - bits;
        ((code << shift) as i32) >> shift
    } else {
        (code & ((1 << bits) - 1)) as i32
    }
}

/// Compensations of the latest temperature buckets kept by a pipeline.
pub const COMPENSATION_CACHE: usize = 4;

/// The bridge compensations of the latest [`COMPENSATION_CACHE`] temperature
/// buckets, each with its bucket (both paths; no arithmetic). A temperature
/// whose converter noise dithers across a bucket boundary, or wanders over a
/// few neighbouring buckets, finds its compensation prepared: the value is
/// the one [`bucket_code`]'s central code gives, whichever sample prepared
/// it, so keeping more buckets changes no reading, only how often the
/// compensation is computed.
#[derive(Clone, Copy, Debug)]
pub struct CompensationCache<C> {
    entries: [Option<(u32, C)>; COMPENSATION_CACHE],
    /// The entry the next miss replaces (the oldest).
    next: usize,
}

impl<C: Copy> CompensationCache<C> {
    /// An empty cache.
    pub const fn new() -> Self {
        CompensationCache {
            entries: [None; COMPENSATION_CACHE],
            next: 0,
        }
    }

    /// The compensation of `bucket`: kept, or prepared by `make` and kept in
    /// place of the oldest. An error of `make` is returned and nothing kept.
    pub fn get_or_try<E>(
        &mut self,
        bucket: u32,
        make: impl FnOnce() -> Result<C, E>,
    ) -> Result<C, E> {
        if let Some((_, c)) = self.entries.iter().flatten().find(|(b, _)| *b == bucket) {
            return Ok(*c);
        }
        let c = make()?;
        if let Some(e) = self.entries.get_mut(self.next) {
            *e = Some((bucket, c));
        }
        self.next = (self.next + 1) % COMPENSATION_CACHE;
        Ok(c)
    }
}

impl<C: Copy> CompensationCache<C> {
    /// The compensation of `bucket`: kept, or prepared by `make` and kept in
    /// place of the oldest.
    pub fn get_or_insert_with(&mut self, bucket: u32, make: impl FnOnce() -> C) -> C {
        match self.get_or_try(bucket, || Ok::<C, core::convert::Infallible>(make())) {
            Ok(c) => c,
            Err(never) => match never {},
        }
    }
}

impl<C: Copy> Default for CompensationCache<C> {
    fn default() -> Self {
        Self::new()
    }
}

/// The central code of the compensation bucket of a temperature code.
pub fn bucket_code(code: u32, adc_bits: u8) -> (u32, u32) {
    let bits = u32::from(adc_bits.clamp(8, 24));
    let shift = bits.saturating_sub(COMPENSATION_BUCKETS.trailing_zeros());
    let bucket = code >> shift;
    let centre = if shift == 0 {
        code
    } else {
        (bucket << shift) | (1 << (shift - 1))
    };
    (bucket, centre)
}

/// Converter bits of a temperature front-end.
pub(crate) fn temperature_bits(s: &SensorConfig) -> u8 {
    match s {
        SensorConfig::Rtd(c) => c.front_end.adc_bits,
        SensorConfig::Ntc(c) => c.front_end.adc_bits,
        SensorConfig::Bridge(c) => c.adc_bits,
        SensorConfig::Loop(c) => c.adc_bits,
    }
}

/// The absolute measuring range of a pressure front-end, as calibration
/// anchors (`Anchor` bits: Pa at 2^-24), with the barometric pressure for
/// gauge transducers.
fn pressure_range(s: &SensorConfig, barometric: fx::Pressure) -> Option<(i64, i64)> {
    let (lo, hi, kind) = match s {
        SensorConfig::Bridge(b) => (b.range_lo_pa, b.range_hi_pa, b.kind),
        SensorConfig::Loop(l) => (l.range_lo_pa, l.range_hi_pa, l.kind),
        _ => return None,
    };
    let base = match kind {
        PressureKind::Absolute => 0,
        PressureKind::Gauge => i64::from(barometric.to_bits()),
    };
    // Pa at 2^-4 → 2^-24.
    Some((
        (i64::from(lo.to_bits()) + base) << 20,
        (i64::from(hi.to_bits()) + base) << 20,
    ))
}

/// The measuring range of a temperature front-end, as anchors (K at 2^-24).
fn temperature_range(s: &SensorConfig) -> Option<(i64, i64)> {
    let (lo, hi) = match s {
        SensorConfig::Rtd(c) => (c.range_min_k, c.range_max_k),
        SensorConfig::Ntc(c) => (c.range_min_k, c.range_max_k),
        _ => return None,
    };
    Some((i64::from(lo.to_bits()) << 8, i64::from(hi.to_bits()) << 8))
}

/// The pressure zero bound: 2 % of the transducer's span, as a divisor.
///
/// Common practice, no published source: a healthy industrial pressure
/// transducer's zero offset stays well inside 2 % of its span (the total
/// error bands of such transducers are about 0.1–1 % of span; from memory),
/// so a larger apparent offset means gas pressure on the port, not a zero
/// error. For a 300 bar transducer the bound is 6 bar.
pub const ZERO_PRESSURE_SPAN_DIVISOR: i64 = 50;

/// The smallest pressure zero bound, Pa: 10 kPa. The zero reference is the
/// configured barometric pressure, while the weather moves the real one by
/// about ±5 kPa around its mean (common practice, from memory) and a site's
/// altitude may differ from the configured value: a vented absolute
/// transducer must not be refused for that.
pub const ZERO_PRESSURE_MIN_PA: i64 = 10_000;

/// The temperature zero bound, K: 2 K around the ice point. IEC 60751
/// class B allows ±0.3 K at 0 °C for a platinum resistance thermometer
/// (from memory) and interchangeable NTC thermistors are sold to about
/// ±0.2…1 K (common practice); 2 K leaves room for both and for a poorly
/// stirred ice bath, while a sensor at room temperature (15 K or more away)
/// is refused.
pub const ZERO_TEMPERATURE_MAX_K: i64 = 2;

/// The largest distance between a reading and its zero reference that a
/// zero calibration accepts, as an anchor (SI at 2^-24): for pressure
/// 2 % of the front-end's measuring span ([`ZERO_PRESSURE_SPAN_DIVISOR`]),
/// at least [`ZERO_PRESSURE_MIN_PA`]; for temperature
/// [`ZERO_TEMPERATURE_MAX_K`]. `None` when the record's sensor is not a
/// front-end of that channel.
pub fn zero_limit(record: &CalibrationRecord, channel: SensorChannel) -> Option<i64> {
    match channel {
        SensorChannel::Pressure => {
            // The span does not depend on the barometric pressure.
            let (lo, hi) = pressure_range(&record.sensor, fx::Pressure::ZERO)?;
            let span = hi.saturating_sub(lo).max(0);
            Some((span / ZERO_PRESSURE_SPAN_DIVISOR).max(ZERO_PRESSURE_MIN_PA << 24))
        }
        SensorChannel::Temperature => {
            temperature_range(&record.sensor)?;
            Some(ZERO_TEMPERATURE_MAX_K << 24)
        }
    }
}

/// Checks that a zero calibration of `channel` is plausible: the present
/// reading after the correction in use (`reading`) and as the front-end
/// gives it (`uncorrected`) both lie within [`zero_limit`] of the zero
/// reference (`reference`); all anchors (SI at 2^-24). Refused with
/// [`Error::ZeroNotPlausible`], which carries the numbers.
pub fn check_zero(
    record: &CalibrationRecord,
    channel: SensorChannel,
    reading: i64,
    uncorrected: i64,
    reference: i64,
) -> Result<(), Error> {
    let limit = zero_limit(record, channel).ok_or(Error::OutOfRange("calibration channel"))?;
    let far = |v: i64| v.abs_diff(reference) > limit.unsigned_abs();
    if far(reading) || far(uncorrected) {
        // Anchors to the wire's bits of the channel's format (Pressure:
        // 2^-4 Pa, Temperature: 2^-16 K), clamped to it.
        let shift = match channel {
            SensorChannel::Pressure => 20,
            SensorChannel::Temperature => 8,
        };
        let bits = |a: i64| (a >> shift).clamp(0, i64::from(u32::MAX)) as u32;
        return Err(Error::ZeroNotPlausible(ZeroRefusal {
            channel,
            reading: bits(reading),
            uncorrected: bits(uncorrected),
            reference: bits(reference),
            limit: bits(limit),
        }));
    }
    Ok(())
}

/// A calibration re-zeroed: the correction shifted by `target − present`
/// (both anchors: SI at 2^-24; `present` is the corrected reading now), the
/// sequence number advanced. Integer arithmetic (one 128-bit division).
pub fn rezero(
    record: &CalibrationRecord,
    present: i64,
    target: i64,
    barometric: fx::Pressure,
) -> Result<CalibrationRecord, Error> {
    let mut c = record.correction;
    if c == Correction::IDENTITY {
        let (lo, hi) = match record.channel {
            crate::sensor::calibration::Channel::Pressure => {
                pressure_range(&record.sensor, barometric)
            }
            _ => temperature_range(&record.sensor),
        }
        .ok_or(Error::OutOfRange("calibration channel"))?;
        c.lo = fx::Anchor::from_bits(lo);
        c.hi = fx::Anchor::from_bits(hi);
    }
    let span = i128::from(c.hi.to_bits()) - i128::from(c.lo.to_bits());
    if span <= 0 {
        return Err(Error::OutOfRange("calibrated interval"));
    }
    // δ/(hi − lo) at 2^-48, rounded to nearest.
    let delta = (i128::from(target) - i128::from(present)) << 48;
    let half = span / 2;
    let step = if delta < 0 {
        (delta - half) / span
    } else {
        (delta + half) / span
    };
    let [c0, c1, c2, c3] = c.coefficients;
    let c0 = i128::from(c0.to_bits()) + step;
    let c0 = i64::try_from(c0).map_err(|_| Error::OutOfRange("correction coefficient"))?;
    c.coefficients = [fx::Coefficient::from_bits(c0), c1, c2, c3];
    c.validate()?;
    Ok(CalibrationRecord {
        sequence: record.sequence.wrapping_add(1),
        correction: c,
        ..*record
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codes_are_signed_and_bucketed() {
        assert_eq!(signed_code(0x00FF_FFFF, 24, true), -1);
        assert_eq!(signed_code(0x007F_FFFF, 24, true), 0x7F_FFFF);
        assert_eq!(signed_code(0xFF80_0000, 24, true), -0x80_0000);
        assert_eq!(signed_code(0x1234, 16, false), 0x1234);
        assert_eq!(signed_code(0x1_1234, 16, false), 0x1234);
        let (b, c) = bucket_code(0x12_3456, 24);
        assert_eq!(b, 0x12_3456 >> 10);
        assert_eq!(c, (b << 10) | 512);
        assert_eq!(bucket_code(300, 12), (300, 300));
    }

    /// Anchor (SI at 2^-24) of a value.
    fn anchor(v: f64) -> i64 {
        (v * 16_777_216.0).round() as i64
    }

    #[test]
    fn zero_is_refused_away_from_the_reference() {
        use crate::sensor::PressureKind;
        use crate::sensor::bridge::BridgeConfig;
        use crate::sensor::calibration::{Channel, SensorConfig};
        use crate::sensor::resistive::Circuit;
        use crate::sensor::rtd::RtdConfig;
        // A 0–300 bar absolute transducer: bound 2 % of 300 bar = 6 bar.
        let b = BridgeConfig::new(24, true, 0.0, 0.5, 0.0, 300e5, PressureKind::Absolute).unwrap();
        let p = CalibrationRecord {
            sequence: 0,
            channel: Channel::Pressure,
            sensor: SensorConfig::Bridge(b),
            correction: Correction::IDENTITY,
        };
        let baro = anchor(101_325.0);
        assert_eq!(zero_limit(&p, SensorChannel::Pressure), Some(anchor(6e5)));
        let ch = SensorChannel::Pressure;
        // Vented, 0.2 bar off: accepted; 5.9 bar off: accepted.
        assert!(check_zero(&p, ch, anchor(121_325.0), anchor(121_325.0), baro).is_ok());
        assert!(check_zero(&p, ch, anchor(691_325.0), anchor(691_325.0), baro).is_ok());
        // Under pressure (a full cylinder, 200 bar): refused, with the numbers.
        let e = check_zero(&p, ch, anchor(200e5), anchor(200e5), baro).unwrap_err();
        // On the wire in Pressure bits (Pa × 16).
        assert_eq!(
            e,
            Error::ZeroNotPlausible(ZeroRefusal {
                channel: ch,
                reading: 200e5 as u32 * 16,
                uncorrected: 200e5 as u32 * 16,
                reference: 101_325 * 16,
                limit: 6e5 as u32 * 16,
            })
        );
        // The corrected reading looks vented but the transducer itself reads
        // 10 bar (an earlier zero taken under pressure): refused too.
        assert!(check_zero(&p, ch, baro, anchor(10e5), baro).is_err());
        // A 0–10 bar transducer: 2 % is 0.2 bar, the floor 10 kPa does not bite.
        let small =
            BridgeConfig::new(24, true, 0.0, 0.5, 0.0, 10e5, PressureKind::Absolute).unwrap();
        let q = CalibrationRecord {
            sensor: SensorConfig::Bridge(small),
            ..p
        };
        assert_eq!(zero_limit(&q, ch), Some(anchor(0.2e5)));
        // A 0–1 bar gauge transducer: 2 % is 2 kPa, the floor gives 10 kPa.
        let tiny = BridgeConfig::new(24, true, 0.0, 0.5, 0.0, 1e5, PressureKind::Gauge).unwrap();
        let q = CalibrationRecord {
            sensor: SensorConfig::Bridge(tiny),
            ..p
        };
        assert_eq!(zero_limit(&q, ch), Some(anchor(1e4)));

        // Temperature: 2 K around the ice point.
        let rtd = RtdConfig::new(1000.0, Circuit::Ratiometric, 16, 4000.0).unwrap();
        let t = CalibrationRecord {
            sequence: 0,
            channel: Channel::Temperature,
            sensor: SensorConfig::Rtd(rtd),
            correction: Correction::IDENTITY,
        };
        let ice = anchor(273.15);
        let ch = SensorChannel::Temperature;
        assert!(check_zero(&t, ch, anchor(273.65), anchor(273.65), ice).is_ok());
        match check_zero(&t, ch, anchor(294.15), anchor(294.15), ice) {
            Err(Error::ZeroNotPlausible(z)) => {
                assert!((z.si(z.reading) - 294.15).abs() < 1e-4);
                assert!((z.si(z.reference) - 273.15).abs() < 1e-4);
                assert_eq!(z.si(z.limit), 2.0);
            }
            other => panic!("{other:?}"),
        }
        // The pressure front-end is no temperature sensor.
        assert_eq!(
            check_zero(&p, ch, ice, ice, ice),
            Err(Error::OutOfRange("calibration channel"))
        );
    }
}
