//! Alarm thresholds and their conditions, fixed-point form (mirrors
//! [`super::float`]; integer comparisons only).

use super::float::Limits;
use super::{AlarmKind, AlarmSet};
use crate::time::Millis;
use crate::{Error, fx};

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
            low_fraction: fx::from_f64(l.low_fraction, "low fraction")?,
            low_time_to_empty: l.low_time_to_empty,
            fraction_hysteresis: fx::from_f64(l.fraction_hysteresis, "fraction hysteresis")?,
            over_fill_fraction: fx::from_f64(l.over_fill_fraction, "over-fill fraction")?,
            pressure_max_pa: fx::from_f64(l.pressure_max_pa, "maximum pressure")?,
            pressure_hysteresis_pa: fx::from_f64(l.pressure_hysteresis_pa, "pressure hysteresis")?,
            temperature_max_k: fx::from_f64(l.temperature_max_k, "maximum temperature")?,
            temperature_min_k: fx::from_f64(l.temperature_min_k, "minimum temperature")?,
            temperature_hysteresis_k: fx::from_f64(
                l.temperature_hysteresis_k,
                "temperature hysteresis",
            )?,
        })
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
