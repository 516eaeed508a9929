//! Calibration: a polynomial correction of a converted quantity, the
//! two-point zero/span calibration that produces one on the device, and the
//! calibration record the configuration store keeps.
//!
//! # Correction
//!
//! A [`Correction`] maps a reading `v` (SI: Pa or K) over its calibrated
//! interval `[lo, hi]` with `x = (v − lo)/(hi − lo)` to
//! `v' = lo + (hi − lo)·P(x)`, `P(x) = c₀ + c₁x + c₂x² + c₃x³`
//! (identity: `P(x) = x`). Both paths evaluate it as
//! `v' = v + (hi − lo)·D(x)`, `D = P − x`, with `x` limited to
//! `[−0.5, 1.5]`: beyond, the correction's offset is held (a cubic is never
//! extrapolated far). Fixed point: 5 multiplies, no division.
//!
//! # Calibration flow
//!
//! 1. **Two-point zero/span** (device or host): reference readings at two
//!    points give `c₀, c₁` ([`Correction::two_point`], integer arithmetic).
//! 2. **Multi-point least squares** (host, `isochor sensor fit`): reference
//!    readings from a CSV give `c₀ … c₃`.
//! 3. The result goes into a [`CalibrationRecord`] with the sensor's
//!    configuration and a sequence number; [`CalibrationRecord::encode`]
//!    frames it for the configuration store (kind, version, length, postcard
//!    body, CRC-32C) and [`CalibrationRecord::decode`] checks all of it.

pub mod fixed;
pub mod float;

use crate::checksum::crc32c;
use crate::error::{Defect, SensorSetting};
use crate::sensor::PressureKind;
use crate::sensor::bridge::BridgeConfig;
use crate::sensor::current_loop::LoopConfig;
use crate::sensor::ntc::NtcConfig;
use crate::sensor::resistive::{Circuit, FrontEnd};
use crate::sensor::rtd::RtdConfig;
use crate::{Error, fx};

/// Lowest `x` at which the correction polynomial is evaluated.
pub const X_MIN: f64 = -0.5;
/// Highest `x` at which the correction polynomial is evaluated.
pub const X_MAX: f64 = 1.5;
/// Largest magnitude of a correction coefficient.
pub const COEFFICIENT_MAX: f64 = 2.0;

/// A polynomial correction of a quantity over a calibrated interval.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Correction {
    /// Low end of the calibrated interval (SI).
    pub lo: fx::Anchor,
    /// High end of the calibrated interval (SI).
    pub hi: fx::Anchor,
    /// `[c₀, c₁, c₂, c₃]` of `P(x)`, each within ±[`COEFFICIENT_MAX`].
    pub coefficients: [fx::Coefficient; 4],
}

impl Correction {
    /// No correction.
    pub const IDENTITY: Correction = Correction {
        lo: fx::Anchor::ZERO,
        hi: fx::Anchor::ONE,
        coefficients: [
            fx::Coefficient::ZERO,
            fx::Coefficient::ONE,
            fx::Coefficient::ZERO,
            fx::Coefficient::ZERO,
        ],
    };

    /// Checks the interval and the coefficients.
    pub fn validate(&self) -> Result<(), Error> {
        if self.hi <= self.lo {
            return Err(Error::OutOfRange(SensorSetting::CalibratedInterval.into()));
        }
        // Integer limit: 2.0 in I16F48 bits.
        let lim = 2i64 << 48;
        if self.coefficients.iter().any(|c| c.to_bits().abs() > lim) {
            return Err(Error::OutOfRange(
                SensorSetting::CorrectionCoefficient.into(),
            ));
        }
        Ok(())
    }

    /// The two-point zero/span correction: a reading of `measured[i]` should
    /// have been `reference[i]`. Integer arithmetic (two 128-bit divisions,
    /// at calibration time). The measured points must differ by at least
    /// 2^-16 and the correction must stay within ±2 per coefficient.
    pub fn two_point(
        measured: [fx::Anchor; 2],
        reference: [fx::Anchor; 2],
    ) -> Result<Correction, Error> {
        let (m1, m2) = (measured[0].to_bits() as i128, measured[1].to_bits() as i128);
        let (r1, r2) = (
            reference[0].to_bits() as i128,
            reference[1].to_bits() as i128,
        );
        let (lo, hi, rlo, rhi) = if m1 < m2 {
            (m1, m2, r1, r2)
        } else {
            (m2, m1, r2, r1)
        };
        let span = hi - lo;
        if span < 1 << 8 {
            return Err(Error::OutOfRange(SensorSetting::TwoPointSpacing.into()));
        }
        // c₀ = (r_lo − m_lo)/span, c₁ = (r_hi − r_lo)/span at 2^-48, rounded.
        let div = |n: i128| {
            let n = n << 48;
            let q = (n + if n < 0 { -span / 2 } else { span / 2 }) / span;
            i64::try_from(q)
                .map_err(|_| Error::OutOfRange(SensorSetting::CorrectionCoefficient.into()))
        };
        let c0 = div(rlo - lo)?;
        let c1 = div(rhi - rlo)?;
        let c = Correction {
            lo: fx::Anchor::from_bits(lo as i64),
            hi: fx::Anchor::from_bits(hi as i64),
            coefficients: [
                fx::Coefficient::from_bits(c0),
                fx::Coefficient::from_bits(c1),
                fx::Coefficient::ZERO,
                fx::Coefficient::ZERO,
            ],
        };
        c.validate()?;
        Ok(c)
    }

    /// A correction from `f64` values (host helper, e.g. a least-squares fit).
    pub fn from_f64(lo: f64, hi: f64, coefficients: [f64; 4]) -> Result<Correction, Error> {
        let mut c = [fx::Coefficient::ZERO; 4];
        for (d, s) in c.iter_mut().zip(coefficients) {
            *d = fx::from_f64(s, SensorSetting::CorrectionCoefficient)?;
        }
        let c = Correction {
            lo: fx::from_f64(lo, SensorSetting::CalibratedIntervalLowEnd)?,
            hi: fx::from_f64(hi, SensorSetting::CalibratedIntervalHighEnd)?,
            coefficients: c,
        };
        c.validate()?;
        Ok(c)
    }
}

/// Which input of the gauge a calibration belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Channel {
    /// The tank pressure.
    Pressure,
    /// The gas temperature.
    Temperature,
    /// The barometric pressure.
    Barometric,
    /// The pressure transducer's own temperature (bridge compensation).
    TransducerTemperature,
}

/// The configuration of one sensor front-end.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SensorConfig {
    /// Platinum RTD.
    Rtd(RtdConfig),
    /// NTC thermistor.
    Ntc(NtcConfig),
    /// Ratiometric bridge transducer.
    Bridge(BridgeConfig),
    /// 4–20 mA transmitter.
    Loop(LoopConfig),
}

impl SensorConfig {
    /// Checks the configuration.
    pub fn validate(&self) -> Result<(), Error> {
        match self {
            SensorConfig::Rtd(c) => c.validate(),
            SensorConfig::Ntc(c) => c.validate(),
            SensorConfig::Bridge(c) => c.validate(),
            SensorConfig::Loop(c) => c.validate(),
        }
    }

    /// Stable name of the sensor kind.
    pub fn kind_name(&self) -> &'static str {
        match self {
            SensorConfig::Rtd(_) => "rtd",
            SensorConfig::Ntc(_) => "ntc",
            SensorConfig::Bridge(_) => "bridge",
            SensorConfig::Loop(_) => "loop",
        }
    }
}

/// A stored calibration: what a configuration store keeps per channel.
///
/// Framed by [`CalibrationRecord::encode`] as
/// `kind (u16 LE) · version (u16 LE) · length (u16 LE) · postcard body ·
/// CRC-32C (u32 LE, over everything before it)`, at most
/// [`CalibrationRecord::MAX_SIZE`] bytes. A generic typed-record store can
/// hold it by [`CalibrationRecord::KIND`], [`CalibrationRecord::VERSION`] and
/// the size bound; the record checks itself on decoding. Among records of
/// the same channel, the highest `sequence` is the current one.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CalibrationRecord {
    /// Sequence number (increases with every new calibration of a channel).
    pub sequence: u32,
    /// The input it belongs to.
    pub channel: Channel,
    /// The front-end configuration.
    pub sensor: SensorConfig,
    /// The correction applied after conversion.
    pub correction: Correction,
}

/// Bytes before the body: kind, version, length.
const HEADER: usize = 6;
/// Bytes after the body: CRC-32C.
const TRAILER: usize = 4;
/// Largest postcard body: sequence 5 + channel 1 + sensor 1 + 128 (bridge)
/// + correction 60 (every integer at its longest varint).
const BODY_MAX: usize = 195;

impl CalibrationRecord {
    /// Record kind id for a configuration store.
    pub const KIND: u16 = 0x0004;
    /// Layout version of the body.
    pub const VERSION: u16 = 1;
    /// Largest encoded size, bytes.
    pub const MAX_SIZE: usize = HEADER + BODY_MAX + TRAILER;

    /// Checks the sensor configuration and the correction.
    pub fn validate(&self) -> Result<(), Error> {
        self.sensor.validate()?;
        self.correction.validate()
    }

    /// Encodes into `buf` (at least [`Self::MAX_SIZE`] bytes is always
    /// enough) and returns the used part.
    pub fn encode<'a>(&self, buf: &'a mut [u8]) -> Result<&'a [u8], Error> {
        self.validate()?;
        let (head, rest) = buf
            .split_at_mut_checked(HEADER)
            .ok_or(Error::BufferTooSmall)?;
        let body_len = postcard::to_slice(self, rest)
            .map_err(|_| Error::BufferTooSmall)?
            .len();
        let len = u16::try_from(body_len).map_err(|_| Error::BufferTooSmall)?;
        head.copy_from_slice(&[
            Self::KIND.to_le_bytes()[0],
            Self::KIND.to_le_bytes()[1],
            Self::VERSION.to_le_bytes()[0],
            Self::VERSION.to_le_bytes()[1],
            len.to_le_bytes()[0],
            len.to_le_bytes()[1],
        ]);
        let end = HEADER + body_len;
        let crc = crc32c(buf.get(..end).ok_or(Error::BufferTooSmall)?);
        buf.get_mut(end..end + TRAILER)
            .ok_or(Error::BufferTooSmall)?
            .copy_from_slice(&crc.to_le_bytes());
        buf.get(..end + TRAILER).ok_or(Error::BufferTooSmall)
    }

    /// Decodes and checks a record: length, checksum, kind, version, body,
    /// and the validity of what it holds. Trailing bytes are refused.
    pub fn decode(bytes: &[u8]) -> Result<CalibrationRecord, Error> {
        let u16_at = |i: usize| -> Result<u16, Error> {
            let b = bytes
                .get(i..i + 2)
                .ok_or(Error::Malformed(Defect::RecordTooShort))?;
            Ok(u16::from_le_bytes([
                b.first().copied().unwrap_or(0),
                b.get(1).copied().unwrap_or(0),
            ]))
        };
        let kind = u16_at(0)?;
        let version = u16_at(2)?;
        let len = u16_at(4)? as usize;
        let end = HEADER + len;
        if bytes.len() != end + TRAILER {
            return Err(Error::Malformed(Defect::RecordLength));
        }
        let stored = bytes
            .get(end..end + TRAILER)
            .ok_or(Error::Malformed(Defect::RecordTooShort))?;
        let stored = u32::from_le_bytes([
            stored.first().copied().unwrap_or(0),
            stored.get(1).copied().unwrap_or(0),
            stored.get(2).copied().unwrap_or(0),
            stored.get(3).copied().unwrap_or(0),
        ]);
        let covered = bytes
            .get(..end)
            .ok_or(Error::Malformed(Defect::RecordTooShort))?;
        if crc32c(covered) != stored {
            return Err(Error::ChecksumMismatch);
        }
        if kind != Self::KIND {
            return Err(Error::Malformed(Defect::RecordKind));
        }
        if version != Self::VERSION {
            return Err(Error::Malformed(Defect::RecordVersion));
        }
        let body = bytes
            .get(HEADER..end)
            .ok_or(Error::Malformed(Defect::RecordTooShort))?;
        let (rec, rest): (CalibrationRecord, _) =
            postcard::take_from_bytes(body).map_err(|_| Error::Malformed(Defect::RecordBody))?;
        if !rest.is_empty() {
            return Err(Error::Malformed(Defect::RecordBody));
        }
        rec.validate()?;
        Ok(rec)
    }
}

impl CalibrationRecord {
    /// The nominal pressure channel of the reference board: a 0–300 bar
    /// gauge bridge on a bipolar 24-bit converter (span half the converter
    /// range), no temperature coefficients, linear, no correction.
    pub fn nominal_pressure() -> CalibrationRecord {
        let zero = fx::Coefficient::ZERO;
        CalibrationRecord {
            sequence: 0,
            channel: Channel::Pressure,
            sensor: SensorConfig::Bridge(BridgeConfig {
                adc_bits: 24,
                bipolar: true,
                zero: [zero; 3],
                span: fx::Coefficient::from_bits(1 << 47),
                span_tc: [zero; 2],
                // 25 °C = 298.15 K in U16F16 bits.
                reference_k: fx::Temperature::from_bits(19_539_558),
                linearity: [zero, fx::Coefficient::ONE, zero, zero],
                range_lo_pa: fx::GaugePressure::ZERO,
                // 300 bar = 3e7 Pa in I28F4 bits.
                range_hi_pa: fx::GaugePressure::from_bits(480_000_000),
                kind: PressureKind::Gauge,
                range_margin: zero,
            }),
            correction: Correction::IDENTITY,
        }
    }

    /// The nominal temperature channel of the reference board: a Pt1000 RTD
    /// in series with a 4.02 kΩ reference resistor, read ratiometrically by
    /// a 24-bit converter, −50 … +150 °C, short below 90 Ω, open above
    /// 3.95 kΩ, no correction.
    pub fn nominal_temperature() -> CalibrationRecord {
        let ohms = |r: u64| fx::Resistance::from_bits(r << 32);
        CalibrationRecord {
            sequence: 0,
            channel: Channel::Temperature,
            sensor: SensorConfig::Rtd(RtdConfig {
                r0_ohms: ohms(1000),
                front_end: FrontEnd {
                    circuit: Circuit::Ratiometric,
                    adc_bits: 24,
                    reference_ohms: ohms(4020),
                    lead_ohms: fx::Resistance::ZERO,
                    short_ohms: ohms(90),
                    open_ohms: ohms(3950),
                    excitation: fx::Coefficient::ZERO,
                    self_heating_k_per_mw: fx::Coefficient::ZERO,
                },
                // 223.15 K and 423.15 K in U16F16 bits.
                range_min_k: fx::Temperature::from_bits(14_624_358),
                range_max_k: fx::Temperature::from_bits(27_731_558),
            }),
            correction: Correction::IDENTITY,
        }
    }

    /// The full scale of a pressure transducer, absolute Pa (the high end of
    /// its range; for gauge transducers plus one standard atmosphere); zero
    /// for a temperature sensor.
    pub fn full_scale(&self) -> fx::Pressure {
        let (hi, kind) = match &self.sensor {
            SensorConfig::Bridge(b) => (b.range_hi_pa, b.kind),
            SensorConfig::Loop(l) => (l.range_hi_pa, l.kind),
            _ => (fx::GaugePressure::ZERO, PressureKind::Absolute),
        };
        let abs = match kind {
            PressureKind::Absolute => i64::from(hi.to_bits()),
            // 101 325 Pa in Pressure bits.
            PressureKind::Gauge => i64::from(hi.to_bits()) + 1_621_200,
        };
        fx::Pressure::from_bits(abs.clamp(0, i64::from(u32::MAX)) as u32)
    }

    /// Checks that the record is of `channel` and its sensor can measure it
    /// (a bridge or a loop for pressure, an RTD or an NTC for temperature),
    /// then the record itself.
    pub fn validate_for(&self, channel: Channel) -> Result<(), Error> {
        if self.channel != channel {
            return Err(Error::OutOfRange(SensorSetting::CalibrationChannel.into()));
        }
        let fits = match channel {
            Channel::Pressure => {
                matches!(self.sensor, SensorConfig::Bridge(_) | SensorConfig::Loop(_))
            }
            Channel::Temperature => {
                matches!(self.sensor, SensorConfig::Rtd(_) | SensorConfig::Ntc(_))
            }
            _ => false,
        };
        if !fits {
            return Err(Error::OutOfRange(SensorSetting::ChannelSensorKind.into()));
        }
        self.validate()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sensor::PressureKind;
    use crate::sensor::resistive::Circuit;

    fn bridge_record() -> CalibrationRecord {
        let mut b = BridgeConfig::new(24, true, -0.9, 1.9, -1e7, 1e8, PressureKind::Gauge).unwrap();
        // Every field at a large magnitude: long varints.
        b.zero = [-0.99, -9e-3, -9e-5].map(fx::Coefficient::from_num);
        b.span_tc = [-9e-4, -9e-6].map(fx::Coefficient::from_num);
        b.linearity = [-1.99, 1.99, -1.99, -1.99].map(fx::Coefficient::from_num);
        b.range_margin = fx::Coefficient::from_num(0.49);
        CalibrationRecord {
            sequence: u32::MAX,
            channel: Channel::TransducerTemperature,
            sensor: SensorConfig::Bridge(b),
            correction: Correction::from_f64(-5e11, 5e11, [-1.99, -1.99, -1.99, -1.99]).unwrap(),
        }
    }

    #[test]
    fn records_round_trip_within_the_size_bound() {
        let rtd = RtdConfig::new(100.0, Circuit::Ratiometric, 16, 400.0).unwrap();
        let small = CalibrationRecord {
            sequence: 7,
            channel: Channel::Temperature,
            sensor: SensorConfig::Rtd(rtd),
            correction: Correction::IDENTITY,
        };
        for rec in [small, bridge_record()] {
            let mut buf = [0u8; CalibrationRecord::MAX_SIZE];
            let bytes = rec.encode(&mut buf).unwrap().to_vec();
            assert!(bytes.len() <= CalibrationRecord::MAX_SIZE);
            assert_eq!(CalibrationRecord::decode(&bytes), Ok(rec));
            // Any single corrupted byte is detected.
            for i in 0..bytes.len() {
                let mut bad = bytes.clone();
                bad[i] ^= 0x5A;
                assert!(CalibrationRecord::decode(&bad).is_err(), "byte {i}");
            }
            // Truncated or extended records are refused.
            assert!(CalibrationRecord::decode(&bytes[..bytes.len() - 1]).is_err());
            let mut long = bytes.clone();
            long.push(0);
            assert!(CalibrationRecord::decode(&long).is_err());
            // A buffer one byte short fails cleanly.
            let mut short = vec![0u8; bytes.len() - 1];
            assert_eq!(rec.encode(&mut short), Err(Error::BufferTooSmall));
        }
        let mut buf = [0u8; CalibrationRecord::MAX_SIZE];
        let n = bridge_record().encode(&mut buf).unwrap().len();
        println!(
            "largest test record: {n} of {} bytes",
            CalibrationRecord::MAX_SIZE
        );
    }

    #[test]
    fn wrong_kind_or_version_with_a_valid_checksum_is_refused() {
        let mut buf = [0u8; CalibrationRecord::MAX_SIZE];
        let mut bytes = bridge_record().encode(&mut buf).unwrap().to_vec();
        bytes[0] = 9;
        let n = bytes.len() - 4;
        let crc = crc32c(&bytes[..n]).to_le_bytes();
        bytes[n..].copy_from_slice(&crc);
        assert_eq!(
            CalibrationRecord::decode(&bytes),
            Err(Error::Malformed(Defect::RecordKind))
        );
        bytes[0] = 4;
        bytes[2] = 2;
        let crc = crc32c(&bytes[..n]).to_le_bytes();
        bytes[n..].copy_from_slice(&crc);
        assert_eq!(
            CalibrationRecord::decode(&bytes),
            Err(Error::Malformed(Defect::RecordVersion))
        );
    }
}
