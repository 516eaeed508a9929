//! The device's records besides the setup and the gas-model reference: the
//! calibration of each sensor channel, the tracking settings and the alarm
//! thresholds.
//!
//! | kind | record | holds |
//! |---|---|---|
//! | 1 | [`SetupFx`](crate::SetupFx) | gas, tank, standard condition |
//! | 2 | [`PressureCalibration`] | pressure front-end (bridge or 4–20 mA) and its correction |
//! | 3 | [`AlarmThresholds`] | alarm limits and debounce times |
//! | 4 | [`GasModelRef`](super::GasModelRef) | the gas-model blob in use |
//! | 5 | [`TemperatureCalibration`] | temperature front-end (RTD or NTC) and its correction |
//! | 6 | [`TrackingSettings`] | smoothing, blocks, settling, leak, uncertainty declarations, barometric pressure |
//!
//! The tracker's whole configuration ([`TrackConfigFx`]) is
//! [`TrackingSettings`] and [`AlarmThresholds`] together ([`track_config`],
//! [`split_track_config`]): two records so that each fits one link frame.
//!
//! A calibration record is the [`CalibrationRecord`] of `isochor sensor fit`
//! (whose own file framing carries its file kind 4; on the device, the
//! store's kinds 2 and 5 name the channel). Each record checks that it
//! belongs to its channel and that the front-end can measure it.
//!
//! Every fixed-point value travels as the raw integer of its format
//! (postcard varints); the `MaxSize` bounds below count each integer at its
//! longest varint and are checked by a test against worst-case values.

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use super::{Record, RecordKind};
use crate::alarm::fixed::LimitsFx;
use crate::alarm::{Debounce, DebounceTable};
use crate::sensor::PressureKind;
use crate::sensor::bridge::BridgeConfig;
use crate::sensor::calibration::{CalibrationRecord, Channel, Correction, SensorConfig};
use crate::sensor::resistive::{Circuit, FrontEnd};
use crate::sensor::rtd::RtdConfig;
use crate::time::Millis;
use crate::track::LeakMode;
use crate::track::fixed::TrackConfigFx;
use crate::uncertainty::fixed::UncertaintyConfigFx;
use crate::{Error, SetupFx, fx};

/// Longest varint of each integer width, bytes.
const U32: usize = 5;
const U64: usize = 10;

/// The calibration of the pressure channel (record kind 2): a bridge
/// transducer or a 4–20 mA transmitter and the correction after it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PressureCalibration(pub CalibrationRecord);

/// The calibration of the temperature channel (record kind 5): an RTD or an
/// NTC thermistor and the correction after it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TemperatureCalibration(pub CalibrationRecord);

/// Largest postcard body of a [`CalibrationRecord`] (its framed size less the
/// 6-byte header and the 4-byte CRC of its file form).
const CALIBRATION_BODY_MAX: usize = CalibrationRecord::MAX_SIZE - 10;

impl MaxSize for PressureCalibration {
    const POSTCARD_MAX_SIZE: usize = CALIBRATION_BODY_MAX;
}

impl MaxSize for TemperatureCalibration {
    const POSTCARD_MAX_SIZE: usize = CALIBRATION_BODY_MAX;
}

impl PressureCalibration {
    /// The nominal pressure channel of the reference board, used when no
    /// calibration is stored (figures are then flagged `config_default`): a
    /// 24-bit bipolar converter on a bridge transducer of 0 … 300 bar gauge,
    /// zero 0 and span 0.5 of the converter range, no temperature
    /// coefficients, no linearity or calibration correction.
    pub fn nominal() -> PressureCalibration {
        let zero = fx::Coefficient::ZERO;
        PressureCalibration(CalibrationRecord {
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
        })
    }

    /// The full scale of the transducer, absolute Pa (the high end of its
    /// range; for gauge transducers plus one standard atmosphere).
    pub fn full_scale(&self) -> fx::Pressure {
        let (hi, kind) = match &self.0.sensor {
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
}

impl TemperatureCalibration {
    /// The nominal temperature channel of the reference board, used when no
    /// calibration is stored (figures are then flagged `config_default`): a
    /// Pt1000 RTD in series with a 4.02 kΩ reference resistor, read
    /// ratiometrically by a 24-bit converter, −50 … +150 °C, short below
    /// 90 Ω, open above 3.95 kΩ, no correction.
    pub fn nominal() -> TemperatureCalibration {
        let ohms = |r: u64| fx::Resistance::from_bits(r << 32);
        TemperatureCalibration(CalibrationRecord {
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
        })
    }
}

impl Record for PressureCalibration {
    const KIND: RecordKind = RecordKind::PRESSURE_CALIBRATION;
    const VERSION: u16 = 1;
    fn validate(&self) -> Result<(), Error> {
        if self.0.channel != Channel::Pressure {
            return Err(Error::OutOfRange("calibration channel"));
        }
        if !matches!(
            self.0.sensor,
            SensorConfig::Bridge(_) | SensorConfig::Loop(_)
        ) {
            return Err(Error::OutOfRange("pressure sensor kind"));
        }
        self.0.validate()
    }
    fn safe_default() -> Self {
        PressureCalibration::nominal()
    }
}

impl Record for TemperatureCalibration {
    const KIND: RecordKind = RecordKind::TEMPERATURE_CALIBRATION;
    const VERSION: u16 = 1;
    fn validate(&self) -> Result<(), Error> {
        if self.0.channel != Channel::Temperature {
            return Err(Error::OutOfRange("calibration channel"));
        }
        if !matches!(self.0.sensor, SensorConfig::Rtd(_) | SensorConfig::Ntc(_)) {
            return Err(Error::OutOfRange("temperature sensor kind"));
        }
        self.0.validate()
    }
    fn safe_default() -> Self {
        TemperatureCalibration::nominal()
    }
}

/// The tracking settings (record kind 6): everything of [`TrackConfigFx`]
/// but the alarm thresholds, and the site's barometric pressure (used to
/// turn gauge transducer readings into absolute pressure).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrackingSettings {
    /// See [`TrackConfigFx::smoothing_pressure`].
    pub smoothing_pressure: Millis,
    /// See [`TrackConfigFx::smoothing_temperature`].
    pub smoothing_temperature: Millis,
    /// See [`TrackConfigFx::block`].
    pub block: Millis,
    /// See [`TrackConfigFx::max_gap`].
    pub max_gap: Millis,
    /// See [`TrackConfigFx::reserve_fraction`].
    pub reserve_fraction: fx::Fraction,
    /// See [`TrackConfigFx::settle_time_constant`].
    pub settle_time_constant: Millis,
    /// See [`TrackConfigFx::settle_step`].
    pub settle_step: fx::SmallFraction,
    /// See [`TrackConfigFx::settle_tolerance`].
    pub settle_tolerance: fx::SmallFraction,
    /// See [`TrackConfigFx::leak_mode`].
    pub leak_mode: LeakMode,
    /// See [`TrackConfigFx::declared_draw_kg_h`].
    pub declared_draw_kg_h: Option<fx::MassRate>,
    /// See [`TrackConfigFx::leak_threshold_per_day`].
    pub leak_threshold_per_day: fx::SmallFraction,
    /// See [`TrackConfigFx::uncertainty`].
    pub uncertainty: UncertaintyConfigFx,
    /// Barometric pressure at the site, absolute (500 … 1100 hPa).
    pub barometric_pa: fx::Pressure,
}

impl MaxSize for TrackingSettings {
    // Five spans, the reserve (u64 bits), three small fractions, the mode,
    // the optional draw (tag + i64 bits), and the uncertainty declaration:
    // full scale, five fractions, temperature, lag.
    const POSTCARD_MAX_SIZE: usize =
        5 * U64 + U64 + 3 * U32 + 1 + (1 + U64) + (7 * U32 + U64) + U32;
}

/// The alarm thresholds (record kind 3): limits and debounce times.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AlarmThresholds {
    /// Thresholds and hysteresis bands.
    pub limits: LimitsFx,
    /// Debounce times per alarm.
    pub debounce: DebounceTable,
}

impl MaxSize for AlarmThresholds {
    // A bound for values that validate (the store and the link only ever
    // encode validated records, and a decoded record longer than the bound
    // is refused): limits of three fractions (u64 bits), the time-to-empty
    // threshold (≤ 30 days: below 2^35 ms, 5 varint bytes) and five u32
    // formats; debounce 7 × two delays of at most one day (below 2^28 ms,
    // 4 varint bytes).
    const POSTCARD_MAX_SIZE: usize = 3 * U64 + 5 + 5 * U32 + 14 * 4;
}

/// Longest debounce time accepted: one day.
const DEBOUNCE_MAX: Millis = Millis::from_secs(86_400);
/// Longest time-to-empty threshold accepted: 30 days.
const LOW_TTE_MAX: Millis = Millis::from_secs(30 * 86_400);
/// Barometric range accepted, Pressure bits (50 000 … 110 000 Pa, as the
/// gauge conversion believes a barometer).
const BARO_MIN: u32 = 800_000;
const BARO_MAX: u32 = 1_760_000;

/// The tracker configuration of both records.
pub fn track_config(t: &TrackingSettings, a: &AlarmThresholds) -> TrackConfigFx {
    TrackConfigFx {
        smoothing_pressure: t.smoothing_pressure,
        smoothing_temperature: t.smoothing_temperature,
        block: t.block,
        max_gap: t.max_gap,
        reserve_fraction: t.reserve_fraction,
        settle_time_constant: t.settle_time_constant,
        settle_step: t.settle_step,
        settle_tolerance: t.settle_tolerance,
        leak_mode: t.leak_mode,
        declared_draw_kg_h: t.declared_draw_kg_h,
        leak_threshold_per_day: t.leak_threshold_per_day,
        uncertainty: t.uncertainty,
        limits: a.limits,
        debounce: a.debounce,
    }
}

/// The two records of a tracker configuration, with the site's barometric
/// pressure.
pub fn split_track_config(
    c: &TrackConfigFx,
    barometric_pa: fx::Pressure,
) -> (TrackingSettings, AlarmThresholds) {
    (
        TrackingSettings {
            smoothing_pressure: c.smoothing_pressure,
            smoothing_temperature: c.smoothing_temperature,
            block: c.block,
            max_gap: c.max_gap,
            reserve_fraction: c.reserve_fraction,
            settle_time_constant: c.settle_time_constant,
            settle_step: c.settle_step,
            settle_tolerance: c.settle_tolerance,
            leak_mode: c.leak_mode,
            declared_draw_kg_h: c.declared_draw_kg_h,
            leak_threshold_per_day: c.leak_threshold_per_day,
            uncertainty: c.uncertainty,
            barometric_pa,
        },
        AlarmThresholds {
            limits: c.limits,
            debounce: c.debounce,
        },
    )
}

/// One standard atmosphere in Pressure bits.
pub const STANDARD_ATMOSPHERE: fx::Pressure = fx::Pressure::from_bits(1_621_200);

impl TrackingSettings {
    /// The defaults for a tank and a pressure sensor of `full_scale`
    /// ([`TrackConfigFx::for_tank`], [`UncertaintyConfigFx::example`]) at one
    /// standard atmosphere.
    pub fn for_tank(setup: &SetupFx, full_scale: fx::Pressure) -> TrackingSettings {
        let c = TrackConfigFx::for_tank(&setup.tank, UncertaintyConfigFx::example(full_scale));
        split_track_config(&c, STANDARD_ATMOSPHERE).0
    }
}

impl AlarmThresholds {
    /// The defaults for a tank ([`LimitsFx::for_tank`], default debounce).
    pub fn for_tank(setup: &SetupFx) -> AlarmThresholds {
        AlarmThresholds {
            limits: LimitsFx::for_tank(&setup.tank),
            debounce: DebounceTable::default(),
        }
    }
}

impl Record for TrackingSettings {
    const KIND: RecordKind = RecordKind::TRACKING;
    const VERSION: u16 = 1;
    fn validate(&self) -> Result<(), Error> {
        let whole = track_config(self, &AlarmThresholds::safe_default());
        whole.validate()?;
        if !(BARO_MIN..=BARO_MAX).contains(&self.barometric_pa.to_bits()) {
            return Err(Error::OutOfRange("barometric pressure"));
        }
        Ok(())
    }
    /// The defaults of a 300 bar sensor at one standard atmosphere (a device
    /// uses [`TrackingSettings::for_tank`] with its own sensor instead when
    /// nothing is stored).
    fn safe_default() -> Self {
        TrackingSettings::for_tank(
            &SetupFx::safe_default(),
            // 300 bar in Pressure bits.
            fx::Pressure::from_bits(480_000_000),
        )
    }
}

impl Record for AlarmThresholds {
    const KIND: RecordKind = RecordKind::ALARM_THRESHOLDS;
    const VERSION: u16 = 1;
    fn validate(&self) -> Result<(), Error> {
        self.limits.validate()?;
        if self.limits.low_time_to_empty > LOW_TTE_MAX {
            return Err(Error::OutOfRange("low time to empty"));
        }
        let long = |d: &Debounce| d.raise_delay > DEBOUNCE_MAX || d.clear_delay > DEBOUNCE_MAX;
        if self.debounce.0.iter().any(long) {
            return Err(Error::OutOfRange("debounce time"));
        }
        Ok(())
    }
    /// The limits of the safe default setup (a device uses
    /// [`AlarmThresholds::for_tank`] with its own setup instead when nothing
    /// is stored).
    fn safe_default() -> Self {
        AlarmThresholds::for_tank(&SetupFx::safe_default())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::alarm::float::Limits;
    use crate::store::{decode_record, encode_record};
    use crate::track::float::TrackConfig;
    use crate::uncertainty::float::UncertaintyConfig;
    use crate::{Setup, Tank};

    #[test]
    fn nominal_records_validate_and_round_trip() {
        let p = PressureCalibration::nominal();
        let t = TemperatureCalibration::nominal();
        p.validate().unwrap();
        t.validate().unwrap();
        let bytes = encode_record(&p).unwrap();
        assert_eq!(decode_record::<PressureCalibration>(1, &bytes).unwrap(), p);
        let bytes = encode_record(&t).unwrap();
        assert_eq!(
            decode_record::<TemperatureCalibration>(1, &bytes).unwrap(),
            t
        );
        // A calibration of the other channel is refused.
        assert_eq!(
            PressureCalibration(t.0).validate(),
            Err(Error::OutOfRange("calibration channel"))
        );
        let mut wrong = t.0;
        wrong.channel = Channel::Pressure;
        assert_eq!(
            PressureCalibration(wrong).validate(),
            Err(Error::OutOfRange("pressure sensor kind"))
        );
        // Full scale of a 300 bar gauge transducer: 300 bar + 1 atm.
        assert_eq!(fx::to_f64(p.full_scale()), 30_101_325.0);
    }

    #[test]
    fn worst_case_encodings_fit_their_bounds() {
        let max_ms = Millis(u64::MAX);
        let mut t = TrackingSettings::safe_default();
        t.smoothing_pressure = max_ms;
        t.smoothing_temperature = max_ms;
        t.block = max_ms;
        t.max_gap = max_ms;
        t.settle_time_constant = max_ms;
        t.reserve_fraction = fx::Fraction::MAX;
        t.settle_step = fx::SmallFraction::MAX;
        t.settle_tolerance = fx::SmallFraction::MAX;
        t.declared_draw_kg_h = Some(fx::MassRate::MIN);
        t.leak_threshold_per_day = fx::SmallFraction::MAX;
        t.uncertainty.pressure_full_scale_pa = fx::Pressure::MAX;
        t.uncertainty.temperature_lag = max_ms;
        t.barometric_pa = fx::Pressure::MAX;
        let mut buf = [0u8; 512];
        let n = postcard::to_slice(&t, &mut buf).unwrap().len();
        assert!(n <= TrackingSettings::POSTCARD_MAX_SIZE, "{n}");
        // The alarm bound holds for every value that validates: each field
        // at its largest accepted value (fractions keep their low bits set
        // for the longest varint).
        let mut a = AlarmThresholds::safe_default();
        a.limits.low_fraction = fx::Fraction::from_bits((16 << 32) - 1);
        a.limits.fraction_hysteresis = fx::Fraction::from_bits((1 << 32) - 1);
        a.limits.over_fill_fraction = fx::Fraction::from_bits((16 << 32) - 1);
        a.limits.low_time_to_empty = LOW_TTE_MAX;
        a.limits.pressure_max_pa = fx::Pressure::from_bits(3_200_000_000);
        a.limits.pressure_hysteresis_pa = fx::Pressure::from_bits(3_200_000_000);
        a.limits.temperature_max_k = fx::Temperature::from_bits(1000 << 16);
        a.limits.temperature_min_k = fx::Temperature::from_bits(1000 << 16);
        a.limits.temperature_hysteresis_k = fx::Temperature::from_bits(100 << 16);
        a.debounce = DebounceTable(
            [Debounce {
                raise_delay: DEBOUNCE_MAX,
                clear_delay: DEBOUNCE_MAX,
            }; 7],
        );
        a.validate().unwrap();
        let n = postcard::to_slice(&a, &mut buf).unwrap().len();
        assert!(n <= AlarmThresholds::POSTCARD_MAX_SIZE, "{n}");
        // One step beyond is refused, so no longer encoding is ever stored.
        let mut b = a;
        b.debounce.0[3].clear_delay = Millis(DEBOUNCE_MAX.0 + 1);
        assert!(b.validate().is_err());
        let mut b = a;
        b.limits.low_time_to_empty = Millis(LOW_TTE_MAX.0 + 1);
        assert!(b.validate().is_err());
    }

    #[test]
    fn fixed_defaults_equal_the_float_defaults_converted() {
        for rated_bar in [1.5, 10.0, 200.0, 300.0, 700.0, 999.0] {
            for capacity in [0.001, 0.05, 80.0] {
                let setup = Setup::new(Gas::Nitrogen, Tank::new(capacity, rated_bar * 1e5));
                let fxs = SetupFx::from_f64(&setup).unwrap();
                let tank = fxs.to_real::<f64>().tank;
                let float = TrackConfig::for_tank(&tank, UncertaintyConfig::example(3e7));
                let want = TrackConfigFx::from_f64(&float).unwrap();
                let got = TrackConfigFx::for_tank(
                    &fxs.tank,
                    UncertaintyConfigFx::example(fx::from_f64(3e7, "fs").unwrap()),
                );
                let lsb = |a: u32, b: u32| a.abs_diff(b) <= 1;
                assert!(lsb(
                    got.limits.pressure_max_pa.to_bits(),
                    want.limits.pressure_max_pa.to_bits()
                ));
                assert!(lsb(
                    got.limits.pressure_hysteresis_pa.to_bits(),
                    want.limits.pressure_hysteresis_pa.to_bits()
                ));
                let mut g = got;
                g.limits.pressure_max_pa = want.limits.pressure_max_pa;
                g.limits.pressure_hysteresis_pa = want.limits.pressure_hysteresis_pa;
                assert_eq!(g, want, "{rated_bar} bar");
            }
        }
        let _ = Limits::for_tank(&Tank::new(0.05, 2e7));
    }

    #[test]
    fn integer_validation_agrees_with_float_validation() {
        let base = TrackConfigFx::from_f64(&TrackConfig::for_tank(
            &Tank::new(0.05, 2e7),
            UncertaintyConfig::example(3e7),
        ))
        .unwrap();
        let mut cases = Vec::new();
        let mut c = base;
        c.limits.low_fraction = fx::Fraction::from_num(16.5);
        cases.push(c);
        let mut c = base;
        c.limits.fraction_hysteresis = fx::Fraction::from_num(1.25);
        cases.push(c);
        let mut c = base;
        c.limits.pressure_max_pa = fx::Pressure::from_num(2.5e8);
        cases.push(c);
        let mut c = base;
        c.limits.temperature_hysteresis_k = fx::Temperature::from_num(101);
        cases.push(c);
        let mut c = base;
        c.uncertainty.pressure_full_scale_pa = fx::Pressure::from_num(9e4);
        cases.push(c);
        let mut c = base;
        c.uncertainty.model = fixed::types::U0F32::from_num(0.75);
        cases.push(c);
        let mut c = base;
        c.uncertainty.temperature_k = fx::Temperature::from_num(51);
        cases.push(c);
        for c in cases {
            let float = c.to_real::<f64>().validate();
            let fixed = c.validate();
            assert!(float.is_err());
            assert_eq!(fixed, float);
        }
        assert_eq!(base.validate(), Ok(()));
    }

    use crate::Gas;
}
