//! Alarm thresholds and their conditions, float form (mirrored by
//! [`super::fixed`]).

use super::{AlarmKind, AlarmSet};
use crate::constants::{STANDARD_ATMOSPHERE_PA, ZERO_CELSIUS_K};
use crate::error::AlarmSetting;
use crate::time::Millis;
use crate::{Error, Real, Tank};

/// Thresholds and hysteresis bands of the level alarms, float form.
///
/// Each level alarm is raised when its value goes beyond the threshold and
/// cleared when it comes back past the threshold by the hysteresis band
/// (a value inside the band keeps the alarm as it is).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Limits<F = f64> {
    /// `low_content` when the fill fraction falls below this.
    pub low_fraction: F,
    /// `low_content` when the expected time to empty (down to the reserve)
    /// falls below this, with a rate known to better than ±50 % (k = 2).
    /// Zero turns the time criterion off.
    pub low_time_to_empty: Millis,
    /// Hysteresis of the fill-fraction criteria (low content, over-fill).
    pub fraction_hysteresis: F,
    /// `over_pressure` when the fill fraction exceeds this: 1 means the rated
    /// content, i.e. the pressure is above the rated (service) pressure
    /// corrected to the present temperature.
    pub over_fill_fraction: F,
    /// `over_pressure` when the pressure itself exceeds this, Pa absolute,
    /// whatever the temperature.
    pub pressure_max_pa: F,
    /// Hysteresis of the pressure criterion, Pa.
    pub pressure_hysteresis_pa: F,
    /// `over_temperature` above this, K.
    pub temperature_max_k: F,
    /// `under_temperature` below this, K.
    pub temperature_min_k: F,
    /// Hysteresis of the temperature alarms, K.
    pub temperature_hysteresis_k: F,
}

impl Limits<f64> {
    /// Limits for a tank, following the trade's rules:
    ///
    /// * over-fill above the rated content: the service (rated) pressure is
    ///   the settled pressure of a full vessel at its reference temperature,
    ///   15 °C in ISO practice (ISO 10286, definition of working pressure; from
    ///   memory), so a pressure above the rated pressure *corrected to the
    ///   present temperature* is a content above the rated content. The
    ///   default limit is 2 % above the rated content (common practice: about
    ///   the expanded uncertainty of a good gauge, so a cylinder filled
    ///   exactly to its rating does not raise the alarm);
    /// * the pressure itself never above 5/4 of the service pressure: US
    ///   practice, where the pressure at 55 °C (131 °F) must not exceed 5/4 of
    ///   the marked service pressure (49 CFR 173.301a(c); from memory). The
    ///   service pressure is a gauge pressure, so the limit is
    ///   p_atm + 1.25·(p_rated − p_atm) in absolute terms;
    /// * temperature between −40 °C and +50 °C. The upper limit is the
    ///   storage limit printed on cylinder labels and in section 7 of gas
    ///   safety data sheets: 50 °C in European wording ("do not expose to
    ///   temperatures exceeding 50 °C"; from memory) and 52 °C (125 °F) in US
    ///   practice ("Cylinder temperatures should not exceed 125 degrees F",
    ///   University of New England EHS, compressed gas cylinders,
    ///   <https://www.une.edu/campus/ehs/laboratory-safety/compressed-gas-cylinders>);
    ///   the lower of the two is taken. Gases under pressure carry H280
    ///   ("may explode if heated") and P410 + P403 ("protect from sunlight,
    ///   store in a well-ventilated place"; Regulation (EC) No 1272/2008,
    ///   Annex I, table 2.5.2). The lower limit is common practice (design
    ///   temperature range of ISO 9809 steel cylinders from −50 °C; from
    ///   memory). Vessels rated for more (vehicle hydrogen tanks: 85 °C)
    ///   set their own limit;
    /// * low content below 10 % or 1 h to the reserve (common practice).
    pub fn for_tank(tank: &Tank<f64>) -> Limits<f64> {
        let p_atm = STANDARD_ATMOSPHERE_PA;
        Limits {
            low_fraction: 0.10,
            low_time_to_empty: Millis::from_secs(3600),
            fraction_hysteresis: 0.01,
            over_fill_fraction: crate::content::OVER_FILL_FRACTION,
            pressure_max_pa: p_atm + 1.25 * (tank.rated_pressure_pa - p_atm).max(0.0),
            pressure_hysteresis_pa: 0.01 * tank.rated_pressure_pa,
            temperature_max_k: ZERO_CELSIUS_K + 50.0,
            temperature_min_k: ZERO_CELSIUS_K - 40.0,
            temperature_hysteresis_k: 2.0,
        }
    }
}

impl<F: Real> Limits<F> {
    /// Checks the limits: finite, non-negative bands, fractions 0 … 16,
    /// pressures 0 … 2000 bar, temperatures 0 … 1000 K.
    pub fn validate(&self) -> Result<(), Error> {
        let checks = [
            (self.low_fraction, 16.0, AlarmSetting::LowFraction),
            (
                self.fraction_hysteresis,
                1.0,
                AlarmSetting::FractionHysteresis,
            ),
            (
                self.over_fill_fraction,
                16.0,
                AlarmSetting::OverFillFraction,
            ),
            (self.pressure_max_pa, 2e8, AlarmSetting::MaximumPressure),
            (
                self.pressure_hysteresis_pa,
                2e8,
                AlarmSetting::PressureHysteresis,
            ),
            (
                self.temperature_max_k,
                1000.0,
                AlarmSetting::MaximumTemperature,
            ),
            (
                self.temperature_min_k,
                1000.0,
                AlarmSetting::MinimumTemperature,
            ),
            (
                self.temperature_hysteresis_k,
                100.0,
                AlarmSetting::TemperatureHysteresis,
            ),
        ];
        for (v, hi, what) in checks {
            if !v.is_finite() {
                return Err(Error::NotFinite(what.into()));
            }
            if v < F::ZERO || v > F::lit(hi) {
                return Err(Error::OutOfRange(what.into()));
            }
        }
        Ok(())
    }

    /// Raise and clear conditions of every alarm for the present values.
    pub fn conditions(&self, v: &Inputs<F>) -> (AlarmSet, AlarmSet) {
        let mut raise = AlarmSet::EMPTY;
        let mut clear = AlarmSet::EMPTY;
        let h = self.fraction_hysteresis;
        if let Some(c) = &v.content {
            // Low content: fraction, or a confident time to empty.
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
                c.fill_fraction > self.low_fraction + h && tte_clear,
            );
            // Over-pressure: content above the limit, or pressure above the limit.
            raise = raise.with(
                AlarmKind::OverPressure,
                c.settled_fraction
                    .is_some_and(|f| f > self.over_fill_fraction)
                    || c.pressure_pa > self.pressure_max_pa,
            );
            clear = clear.with(
                AlarmKind::OverPressure,
                c.settled_fraction
                    .is_some_and(|f| f < self.over_fill_fraction - h)
                    && c.pressure_pa < self.pressure_max_pa - self.pressure_hysteresis_pa,
            );
            let th = self.temperature_hysteresis_k;
            raise = raise.with(
                AlarmKind::OverTemperature,
                c.temperature_k > self.temperature_max_k,
            );
            clear = clear.with(
                AlarmKind::OverTemperature,
                c.temperature_k < self.temperature_max_k - th,
            );
            raise = raise.with(
                AlarmKind::UnderTemperature,
                c.temperature_k < self.temperature_min_k,
            );
            clear = clear.with(
                AlarmKind::UnderTemperature,
                c.temperature_k > self.temperature_min_k + th,
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

/// The present values the level alarms look at (float form).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LevelInputs<F> {
    /// Smoothed absolute pressure, Pa.
    pub pressure_pa: F,
    /// Smoothed temperature, K.
    pub temperature_k: F,
    /// Fill fraction.
    pub fill_fraction: F,
    /// The fill fraction the over-fill criterion judges: the present one when
    /// settled, the predicted settled one while not settled (`None` until
    /// there is a prediction: right after a fast fill the warm gas reads
    /// high, so the over-fill criterion neither raises nor clears then, and
    /// only the absolute pressure limit can raise the alarm).
    pub settled_fraction: Option<F>,
    /// Expected time to empty down to the reserve, when the rate is known to
    /// better than ±50 % (k = 2).
    pub time_to_empty: Option<Millis>,
}

/// Everything the alarms look at for one sample (float form).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Inputs<F> {
    /// Level values; `None` before the first valid content estimate (the
    /// level alarms then keep their state).
    pub content: Option<LevelInputs<F>>,
    /// The sensor front end flags a fault on this sample.
    pub sensor_fault: bool,
    /// The leak detector's verdict.
    pub leak: bool,
    /// The settling tracker's state.
    pub not_settled: bool,
}
