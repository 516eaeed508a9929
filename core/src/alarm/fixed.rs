//! Alarm thresholds and their conditions, fixed-point form (mirrors
//! [`super::float`]; integer comparisons only).

use super::float::Limits;
use super::{AlarmKind, AlarmSet};
use crate::error::AlarmSetting;
use crate::time::Millis;
use crate::{Error, TankFx, fx};

/// Thresholds and hysteresis bands of the level alarms, fixed-point form
/// (see [`Limits`] for meanings and the trade rules behind the defaults).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LimitsFx {
    /// `low_content` below this fill fraction.
    pub low_fraction: fx::Fraction,
    /// `low_content` below this time to empty (0: off).
    pub low_time_to_empty: Millis,
    /// Hysteresis of the fill-fraction criteria.
    pub fraction_hysteresis: fx::Fraction,
    /// `over_pressure` above this fill fraction.
    pub over_fill_fraction: fx::Fraction,
    /// `over_pressure` above this absolute pressure.
    pub pressure_max_pa: fx::Pressure,
    /// Hysteresis of the pressure criterion.
    pub pressure_hysteresis_pa: fx::Pressure,
    /// `over_temperature` above this.
    pub temperature_max_k: fx::Temperature,
    /// `under_temperature` below this.
    pub temperature_min_k: fx::Temperature,
    /// Hysteresis of the temperature alarms.
    pub temperature_hysteresis_k: fx::Temperature,
}

impl LimitsFx {
    /// Converts (rounding to nearest) and validates float limits.
    pub fn from_f64(l: &Limits<f64>) -> Result<LimitsFx, Error> {
        l.validate()?;
        Ok(LimitsFx {
            low_fraction: fx::from_f64(l.low_fraction, AlarmSetting::LowFraction)?,
            low_time_to_empty: l.low_time_to_empty,
            fraction_hysteresis: fx::from_f64(
                l.fraction_hysteresis,
                AlarmSetting::FractionHysteresis,
            )?,
            over_fill_fraction: fx::from_f64(l.over_fill_fraction, AlarmSetting::OverFillFraction)?,
            pressure_max_pa: fx::from_f64(l.pressure_max_pa, AlarmSetting::MaximumPressure)?,
            pressure_hysteresis_pa: fx::from_f64(
                l.pressure_hysteresis_pa,
                AlarmSetting::PressureHysteresis,
            )?,
            temperature_max_k: fx::from_f64(l.temperature_max_k, AlarmSetting::MaximumTemperature)?,
            temperature_min_k: fx::from_f64(l.temperature_min_k, AlarmSetting::MinimumTemperature)?,
            temperature_hysteresis_k: fx::from_f64(
                l.temperature_hysteresis_k,
                AlarmSetting::TemperatureHysteresis,
            )?,
        })
    }

    /// The limits [`Limits::for_tank`] gives, computed in integers (on a
    /// device, from the stored tank): low content 10 % or 1 h, hysteresis
    /// 1 %, over-fill 1.02 × rated content, pressure at most
    /// p_atm + 1.25·(p_rated − p_atm) with a 1 % band, temperature −40 …
    /// +50 °C with 2 K. Equal to the float limits converted, within one unit
    /// of the last place.
    pub fn for_tank(tank: &TankFx) -> LimitsFx {
        // Fraction (U32F32) bits: 0.10, 0.01, 1.02 rounded to nearest.
        const LOW: u64 = 429_496_730;
        const HYST: u64 = 42_949_673;
        const OVER: u64 = crate::content::OVER_FILL_FRACTION_BITS;
        // 101 325 Pa in Pressure (U28F4) bits.
        const P_ATM: u64 = 1_621_200;
        // 323.15 K and 233.15 K in Temperature (U16F16) bits, 2 K.
        const T_MAX: u32 = 21_177_958;
        const T_MIN: u32 = 15_279_718;
        const T_HYST: u32 = 2 << 16;
        let rated = u64::from(tank.rated_pressure_pa.to_bits());
        // p_atm + 5/4·(p − p_atm), rounded to nearest, ties to even (as the
        // float conversion rounds).
        let above = 5 * rated.saturating_sub(P_ATM);
        let (q, r) = (above / 4, above % 4);
        let q = if r > 2 || (r == 2 && q % 2 == 1) {
            q + 1
        } else {
            q
        };
        let p_max = (P_ATM + q).min(u64::from(u32::MAX)) as u32;
        let p_hyst = ((rated + 50) / 100) as u32;
        LimitsFx {
            low_fraction: fx::Fraction::from_bits(LOW),
            low_time_to_empty: Millis::from_secs(3600),
            fraction_hysteresis: fx::Fraction::from_bits(HYST),
            over_fill_fraction: fx::Fraction::from_bits(OVER),
            pressure_max_pa: fx::Pressure::from_bits(p_max),
            pressure_hysteresis_pa: fx::Pressure::from_bits(p_hyst),
            temperature_max_k: fx::Temperature::from_bits(T_MAX),
            temperature_min_k: fx::Temperature::from_bits(T_MIN),
            temperature_hysteresis_k: fx::Temperature::from_bits(T_HYST),
        }
    }

    /// Checks the limits as [`Limits::validate`] does, with integer
    /// comparisons only (fractions 0 … 16, fraction hysteresis ≤ 1,
    /// pressures ≤ 2000 bar, temperatures ≤ 1000 K, temperature hysteresis
    /// ≤ 100 K; the formats cannot be negative).
    pub fn validate(&self) -> Result<(), Error> {
        let fraction = |v: fx::Fraction, max: u64, what: AlarmSetting| {
            if v.to_bits() > max << 32 {
                Err(Error::OutOfRange(what.into()))
            } else {
                Ok(())
            }
        };
        fraction(self.low_fraction, 16, AlarmSetting::LowFraction)?;
        fraction(
            self.fraction_hysteresis,
            1,
            AlarmSetting::FractionHysteresis,
        )?;
        fraction(self.over_fill_fraction, 16, AlarmSetting::OverFillFraction)?;
        // 2e8 Pa in Pressure bits.
        const P_MAX: u32 = 3_200_000_000;
        for (v, what) in [
            (self.pressure_max_pa, AlarmSetting::MaximumPressure),
            (
                self.pressure_hysteresis_pa,
                AlarmSetting::PressureHysteresis,
            ),
        ] {
            if v.to_bits() > P_MAX {
                return Err(Error::OutOfRange(what.into()));
            }
        }
        for (v, max, what) in [
            (
                self.temperature_max_k,
                1000,
                AlarmSetting::MaximumTemperature,
            ),
            (
                self.temperature_min_k,
                1000,
                AlarmSetting::MinimumTemperature,
            ),
            (
                self.temperature_hysteresis_k,
                100,
                AlarmSetting::TemperatureHysteresis,
            ),
        ] {
            if v.to_bits() > max << 16 {
                return Err(Error::OutOfRange(what.into()));
            }
        }
        Ok(())
    }

    /// The exact float equivalent.
    pub fn to_real<F: crate::Real>(&self) -> Limits<F> {
        Limits {
            low_fraction: F::lit(fx::to_f64(self.low_fraction)),
            low_time_to_empty: self.low_time_to_empty,
            fraction_hysteresis: F::lit(fx::to_f64(self.fraction_hysteresis)),
            over_fill_fraction: F::lit(fx::to_f64(self.over_fill_fraction)),
            pressure_max_pa: F::lit(fx::to_f64(self.pressure_max_pa)),
            pressure_hysteresis_pa: F::lit(fx::to_f64(self.pressure_hysteresis_pa)),
            temperature_max_k: F::lit(fx::to_f64(self.temperature_max_k)),
            temperature_min_k: F::lit(fx::to_f64(self.temperature_min_k)),
            temperature_hysteresis_k: F::lit(fx::to_f64(self.temperature_hysteresis_k)),
        }
    }

    /// Raise and clear conditions of every alarm for the present values.
    pub fn conditions(&self, v: &Inputs) -> (AlarmSet, AlarmSet) {
        let mut raise = AlarmSet::EMPTY;
        let mut clear = AlarmSet::EMPTY;
        let h = self.fraction_hysteresis;
        if let Some(c) = &v.content {
            let tte_low = self.low_time_to_empty.0 > 0
                && c.time_to_empty.is_some_and(|t| t < self.low_time_to_empty);
            let tte_clear = self.low_time_to_empty.0 == 0
                || c.time_to_empty
                    .is_none_or(|t| t.0 >= self.low_time_to_empty.0.saturating_mul(5) / 4);
            raise = raise.with(
                AlarmKind::LowContent,
                c.fill_fraction < self.low_fraction || tte_low,
            );
            clear = clear.with(
                AlarmKind::LowContent,
                c.fill_fraction > self.low_fraction.saturating_add(h) && tte_clear,
            );
            raise = raise.with(
                AlarmKind::OverPressure,
                c.settled_fraction
                    .is_some_and(|f| f > self.over_fill_fraction)
                    || c.pressure_pa > self.pressure_max_pa,
            );
            clear = clear.with(
                AlarmKind::OverPressure,
                c.settled_fraction
                    .is_some_and(|f| f < self.over_fill_fraction.saturating_sub(h))
                    && c.pressure_pa
                        < self
                            .pressure_max_pa
                            .saturating_sub(self.pressure_hysteresis_pa),
            );
            let th = self.temperature_hysteresis_k;
            raise = raise.with(
                AlarmKind::OverTemperature,
                c.temperature_k > self.temperature_max_k,
            );
            clear = clear.with(
                AlarmKind::OverTemperature,
                c.temperature_k < self.temperature_max_k.saturating_sub(th),
            );
            raise = raise.with(
                AlarmKind::UnderTemperature,
                c.temperature_k < self.temperature_min_k,
            );
            clear = clear.with(
                AlarmKind::UnderTemperature,
                c.temperature_k > self.temperature_min_k.saturating_add(th),
            );
        }
        for (kind, on) in [
            (AlarmKind::SensorFault, v.sensor_fault),
            (AlarmKind::Leak, v.leak),
            (AlarmKind::NotSettled, v.not_settled),
        ] {
            raise = raise.with(kind, on);
            clear = clear.with(kind, !on);
        }
        (raise, clear)
    }
}

/// The present values the level alarms look at (fixed-point form).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct LevelInputs {
    /// Smoothed absolute pressure.
    pub pressure_pa: fx::Pressure,
    /// Smoothed temperature.
    pub temperature_k: fx::Temperature,
    /// Fill fraction.
    pub fill_fraction: fx::Fraction,
    /// The fill fraction the over-fill criterion judges: the present one when
    /// settled, the predicted settled one while not settled (`None` until
    /// there is a prediction: right after a fast fill the warm gas reads
    /// high, so the over-fill criterion neither raises nor clears then, and
    /// only the absolute pressure limit can raise the alarm).
    pub settled_fraction: Option<fx::Fraction>,
    /// Expected time to empty, when the rate is known to better than ±50 %.
    pub time_to_empty: Option<Millis>,
}

/// Everything the alarms look at for one sample (fixed-point form).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Inputs {
    /// Level values; `None` before the first valid content estimate.
    pub content: Option<LevelInputs>,
    /// The sensor front end flags a fault on this sample.
    pub sensor_fault: bool,
    /// The leak detector's verdict.
    pub leak: bool,
    /// The settling tracker's state.
    pub not_settled: bool,
}
