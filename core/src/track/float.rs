//! Tracking over time, float form (the reference; the method is in
//! [`super`], mirrored step by step by [`super::fixed`]).

use super::{
    CloseStep, DAY_HOURS, EPISODE_EXPECTED_FACTOR, EPISODE_MAX_HOURS, EPISODE_RATE_PER_H, HOUR_MS,
    LAG_MARGIN, LEAD_Q, LEAK_RING, LeakMode, RATE_MIN_BLOCKS, RATE_WINDOW, SETTLE_TIME_CONSTANTS,
    SETTLE_WINDOW, STEADY_FLOOR_PER_H, STEADY_SHARE_DIVISOR, STEADY_TIME_CONSTANTS,
    TEMPERATURE_WINDOW, VESSEL_LAG_FROM_MS, VESSEL_LAG_SHARE_Q8, effective_lag, validate_timing,
    window,
};
use crate::alarm::float::{Inputs, LevelInputs, Limits};
use crate::alarm::{Alarms, DebounceTable, Events};
use crate::content::float::{Content, Estimator};
use crate::error::{Measured, TrackSetting};
use crate::model::Compressibility;
use crate::time::{Instant, Millis};
use crate::uncertainty::float::{
    Evaluator, RateBudget, RateWindow, Terms, Uncertainty, UncertaintyConfig,
};
use crate::{Error, Real, Status, Tank};

/// Everything the tracker needs besides the estimator, float form.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct TrackConfig<F = f64> {
    /// Time constant of the pressure smoothing (0: none). Accepted: ≤ 1 h.
    pub smoothing_pressure: Millis,
    /// Time constant of the temperature smoothing (0: none). Accepted: ≤ 1 h.
    pub smoothing_temperature: Millis,
    /// Length of a rate block. Accepted: 1 s … 1 h, dividing one hour.
    pub block: Millis,
    /// A longer time between usable samples restarts the windows (rate,
    /// leak, filters). Accepted: 1 s … 24 h.
    pub max_gap: Millis,
    /// Time to empty counts down to this fill fraction. Accepted: 0 … 1.
    pub reserve_fraction: F,
    /// Time constant of thermal settling after a fast fill or draw.
    /// Accepted: 1 min … 24 h.
    pub settle_time_constant: Millis,
    /// A change of the block mean of the fill fraction from one block to the
    /// next larger than this marks a fast fill or draw. Accepted: 0 … 0.5.
    pub settle_step: F,
    /// Settled when the predicted drift left is below this fraction.
    /// Accepted: 0 … 0.5.
    pub settle_tolerance: F,
    /// How losses are judged.
    pub leak_mode: LeakMode,
    /// In use: the expected draw, kg/h; `None` learns it from the first two
    /// settled days. Accepted: 0 … 1e6 kg/h.
    pub declared_draw_kg_h: Option<F>,
    /// Leak when the (excess) loss per day exceeds this fraction of the
    /// content. Accepted: 0 … 0.5.
    pub leak_threshold_per_day: F,
    /// Declared input uncertainties.
    pub uncertainty: UncertaintyConfig<F>,
    /// Alarm thresholds.
    pub limits: Limits<F>,
    /// Alarm debounce times.
    pub debounce: DebounceTable,
}

impl TrackConfig<f64> {
    /// Defaults for a tank (common practice where no source is named; each
    /// value is explained in docs/tracking.md): smoothing 4 s,
    /// 60 s blocks, gaps over 5 min restart, reserve 5 %, settling τ = 30 min
    /// with a step of 0.5 % per block (30 %/h) and a tolerance of 0.2 %,
    /// standby leak threshold 0.1 % of the content per day, alarm limits from
    /// [`Limits::for_tank`].
    pub fn for_tank(tank: &Tank<f64>, uncertainty: UncertaintyConfig<f64>) -> Self {
        TrackConfig {
            smoothing_pressure: Millis::from_secs(4),
            smoothing_temperature: Millis::from_secs(4),
            block: Millis::from_secs(60),
            max_gap: Millis::from_secs(300),
            reserve_fraction: 0.05,
            settle_time_constant: Millis::from_secs(1800),
            settle_step: 0.005,
            settle_tolerance: 0.002,
            leak_mode: LeakMode::Standby,
            declared_draw_kg_h: None,
            leak_threshold_per_day: 0.001,
            uncertainty,
            limits: Limits::for_tank(tank),
            debounce: DebounceTable::default(),
        }
    }
}

impl<F: Real> TrackConfig<F> {
    /// Checks every field against its accepted range.
    pub fn validate(&self) -> Result<(), Error> {
        validate_timing(
            self.block,
            self.max_gap,
            [self.smoothing_pressure, self.smoothing_temperature],
            self.settle_time_constant,
        )?;
        let fractions = [
            (self.reserve_fraction, 1.0, TrackSetting::ReserveFraction),
            (self.settle_step, 0.5, TrackSetting::SettleStep),
            (self.settle_tolerance, 0.5, TrackSetting::SettleTolerance),
            (
                self.leak_threshold_per_day,
                0.5,
                TrackSetting::LeakThreshold,
            ),
        ];
        for (v, hi, what) in fractions {
            if !v.is_finite() {
                return Err(Error::NotFinite(what.into()));
            }
            if v < F::ZERO || v > F::lit(hi) {
                return Err(Error::OutOfRange(what.into()));
            }
        }
        if let Some(d) = self.declared_draw_kg_h {
            if !d.is_finite() {
                return Err(Error::NotFinite(TrackSetting::DeclaredDraw.into()));
            }
            if d < F::ZERO || d > F::lit(1e6) {
                return Err(Error::OutOfRange(TrackSetting::DeclaredDraw.into()));
            }
        }
        self.uncertainty.validate()?;
        self.limits.validate()
    }
}

/// Consumption rate from the compensated content, float form.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Rate<F = f64> {
    /// Consumption, kg/h (positive: gas leaving the tank).
    pub kg_h: F,
    /// Consumption, standard m³/h at the setup's standard condition.
    pub standard_m3_h: F,
    /// Expanded uncertainty of the rate (k = 2), kg/h.
    pub u_kg_h: F,
    /// 1 − U/|rate|, clamped to 0 … 1: 0 means the rate cannot be told
    /// from zero.
    pub confidence: F,
    /// Blocks in the fit.
    pub blocks: u32,
    /// The window holds a steady draw (false: a draw started, stopped or
    /// changed within it, and no time to empty is given; see [`super`]).
    pub steady: bool,
}

/// Time until the content reaches the reserve at the present rate.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TimeToEmpty {
    /// At the estimated rate.
    pub expected: Millis,
    /// At the rate plus its expanded uncertainty.
    pub earliest: Millis,
    /// At the rate minus its expanded uncertainty; `None` when that rate is
    /// not a consumption (the tank may never empty).
    pub latest: Option<Millis>,
}

/// Why no time to empty is given (both trackers; the telemetry carries
/// [`code`](Self::code)).
#[derive(
    Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize, serde::Deserialize,
)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum NoTimeToEmpty {
    /// No usable content: no sample yet, a failed channel, or the outputs
    /// withdrawn after a gap longer than the maximum gap.
    NoContent = 1,
    /// The rate window is filling again (after start-up, a gap or a fill).
    Learning = 2,
    /// The content is not falling (idle, or filling), or not measurably:
    /// the rate lies within its own expanded uncertainty of zero.
    NotEmptying = 3,
    /// The content is at or below the reserve.
    AtReserve = 4,
    /// A draw started, stopped or changed within the rate window: the
    /// window's mix of draw and idle gives no basis for one.
    DrawChanging = 5,
    /// A steady draw, but not yet for two of the gas's time constants: the
    /// gas is still cooling below its sensor and the rate holds that
    /// cooling.
    DrawCooling = 6,
}

impl NoTimeToEmpty {
    /// Every reason, in code order.
    pub const ALL: [NoTimeToEmpty; 6] = [
        NoTimeToEmpty::NoContent,
        NoTimeToEmpty::Learning,
        NoTimeToEmpty::NotEmptying,
        NoTimeToEmpty::AtReserve,
        NoTimeToEmpty::DrawChanging,
        NoTimeToEmpty::DrawCooling,
    ];
    /// The reason's wire code (1 … 6; 0 is never used).
    pub const fn code(self) -> u8 {
        self as u8
    }
    /// The reason of a wire code, `None` for a code this version does not
    /// know.
    pub fn from_code(code: u8) -> Option<Self> {
        Self::ALL.into_iter().find(|r| r.code() == code)
    }
    /// The reason's name in reports (`snake_case`).
    pub const fn name(self) -> &'static str {
        match self {
            NoTimeToEmpty::NoContent => "no_content",
            NoTimeToEmpty::Learning => "learning",
            NoTimeToEmpty::NotEmptying => "not_emptying",
            NoTimeToEmpty::AtReserve => "at_reserve",
            NoTimeToEmpty::DrawChanging => "draw_changing",
            NoTimeToEmpty::DrawCooling => "draw_cooling",
        }
    }
}

/// Thermal settling state and prediction, float form.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Settling<F = f64> {
    /// A fast fill or draw happened and the gas has not settled yet.
    pub not_settled: bool,
    /// Predicted settled values, once the settling window is full.
    pub predicted: Option<SettledPrediction<F>>,
}

/// What the gauge will read once the gas has settled (float form).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SettledPrediction<F = f64> {
    /// Predicted settled pressure at the present temperature, Pa absolute.
    pub pressure_pa: F,
    /// Predicted settled mass, kg.
    pub mass_kg: F,
    /// Predicted settled fill fraction.
    pub fill_fraction: F,
}

/// The leak detector's latest verdict (float form).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Leak<F = f64> {
    /// Loss over the last day as a fraction of the content per day (day means).
    pub loss_per_day: F,
    /// Loss beyond the expected draw, fraction of the content per day.
    pub excess_per_day: F,
    /// The expected draw it was judged against, kg/h (0 in standby).
    pub expected_draw_kg_h: F,
    /// The excess loss exceeds the threshold.
    pub leaking: bool,
}

/// Everything the tracker reports for one sample (float form).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Track<F = f64> {
    /// The sample's time.
    pub at: Instant,
    /// The content estimate on the despiked, smoothed sample (`None` before
    /// the first usable sample).
    pub content: Option<Content<F>>,
    /// Expanded uncertainty (k = 2) of mass and fill fraction, refreshed per
    /// block.
    pub uncertainty: Option<Uncertainty<F>>,
    /// Consumption rate, once enough blocks are in the window.
    pub rate: Option<Rate<F>>,
    /// Time to empty, while the rate is a consumption.
    pub time_to_empty: Option<TimeToEmpty>,
    /// Why there is none (`None` while one is given).
    pub time_to_empty_withheld: Option<NoTimeToEmpty>,
    /// Thermal settling.
    pub settling: Settling<F>,
    /// Leak detector verdict, once two settled days are in (and, in use with
    /// a learned draw, after learning).
    pub leak: Option<Leak<F>>,
    /// The over-pressure reference: the pressure the rated content develops
    /// at the present temperature, Pa absolute (refreshed per block).
    pub rated_pressure_now_pa: Option<F>,
    /// Alarm raises and clears at this sample.
    pub events: Events,
    /// Content flags, the sample's sensor flags and the active alarms.
    pub status: Status,
}

/// One least-squares line through equally spaced block means.
#[derive(Clone, Copy, Debug)]
struct Fit<F> {
    mean: F,
    /// Per block.
    slope: F,
    /// Standard error of the slope, per block, corrected for the lag-1
    /// autocorrelation of the residuals.
    se: F,
}

/// Level, slope and curvature of the block temperatures over a window.
#[derive(Clone, Copy, Debug)]
struct TemperatureFit<F> {
    /// Mean, K.
    mean: F,
    /// dT/dt at the rate window's centre, K/h.
    slope_per_h: F,
    /// d²T/dt², K/h².
    curvature_per_h2: F,
}

/// A block close whose steps are still to run (see [`super`], "A close
/// spread over the samples that follow it").
#[derive(Clone, Copy, Debug)]
struct Close<F: Real> {
    /// The next step.
    step: CloseStep,
    /// The block's end and mean.
    end: Instant,
    mean: F,
    /// The estimate at the close.
    content: Content<F>,
    /// Its sensitivities and terms (from `Terms` on).
    terms: Option<Terms<F>>,
    /// The rate window's length and line (from `RateFit` on; `None`: too
    /// few blocks for a rate) …
    fit: Option<(usize, Fit<F>)>,
    /// … the block temperatures' parabola (from `TemperatureFit` on) …
    temperature: Option<TemperatureFit<F>>,
    /// … and the rate budget (from `Budget` on).
    budget: Option<RateBudget<F>>,
}

/// The tracker: all state of the pipeline for one tank (float form).
#[derive(Clone, Debug)]
pub struct Tracker<F: Real, M> {
    est: Estimator<F, M>,
    cfg: TrackConfig<F>,
    unc: Evaluator<F>,
    alarms: Alarms,
    rated_mass_kg: F,
    standard_m3_per_kg: F,
    blocks_per_hour: u32,
    tau_blocks: F,
    // Despike and smoothing.
    last_at: Option<Instant>,
    p_hist: [F; 2],
    t_hist: [F; 2],
    hist_len: u8,
    p_smooth: F,
    t_smooth: F,
    // Blocks.
    block_start: Instant,
    block_sum: F,
    block_n: u32,
    ring: [F; RATE_WINDOW],
    ring_len: usize,
    /// Smoothed temperature at each block's close (the last `ring_len`
    /// beside `ring`, and up to as many before), and how many are in.
    t_ring: [F; TEMPERATURE_WINDOW],
    t_len: usize,
    prev_block: Option<F>,
    /// The last close while its steps run.
    close: Option<Close<F>>,
    // Leak.
    hour_sum: F,
    hour_blocks: u32,
    day_ring: [F; LEAK_RING],
    /// The block temperature at each hour's close beside `day_ring`, K
    /// (rounded to 1/128 K as the fixed path keeps it).
    day_t: [F; LEAK_RING],
    /// The temperature lag uncertainty of the leak margin, ms.
    lag_ms: u64,
    /// A vessel slower than [`VESSEL_LAG_FROM_MS`] (see super, "Weather"):
    /// the gas temperature followed from the sensor's, the filter's gain
    /// per block at full content, the time constant τ_v (ms; 0 for a
    /// quicker vessel), and the hour's sum of the content the sensor's
    /// lead on the gas hides.
    t_gas: Option<F>,
    gas_gain: F,
    vessel_ms: u64,
    hour_lead: F,
    /// [`DRAW_MARGIN`](super::DRAW_MARGIN)·u_s, the margin for the gauge's
    /// scale as a share of a declared draw (u_s as the fixed path has it).
    draw_margin: F,
    day_len: usize,
    learned_draw_per_day: Option<F>,
    // Draw episodes: one is going on, its blocks, and until when the leak
    // ring stays empty after the last one.
    episode: bool,
    episode_blocks: u32,
    leak_hold_until: Instant,
    /// The rate of the last block, fraction of the rated content per hour.
    rate_per_h: Option<F>,
    /// The gas–sensor term of the content's budget (standard uncertainty,
    /// fraction of the rated content) from the last rate window, and whether
    /// it outweighs the rest of the budget (`not_settled`).
    gas_sensor: F,
    gas_draw: F,
    gas_transient: bool,
    /// How long the rate window has held a steady draw, ms.
    steady_ms: u64,
    // Settling.
    settle_active: bool,
    settle_blocks: usize,
    settle_since: Instant,
    // Latest outputs.
    content: Option<Content<F>>,
    uncertainty: Option<Uncertainty<F>>,
    rate: Option<Rate<F>>,
    /// The time to empty (an `Option`, not a `Result`: the outputs copy it
    /// every sample) …
    tte: Option<TimeToEmpty>,
    /// … and why there is none (meaningful while `tte` is `None`); both set
    /// by `set_tte`.
    tte_why: NoTimeToEmpty,
    predicted: Option<SettledPrediction<F>>,
    leak: Option<Leak<F>>,
    rated_pressure_now_pa: Option<F>,
}

impl<F: Real, M: Compressibility<F>> Tracker<F, M> {
    /// A tracker for the tank of `est`, with no history.
    pub fn new(est: Estimator<F, M>, cfg: TrackConfig<F>) -> Result<Self, Error> {
        cfg.validate()?;
        let unc = Evaluator::new(
            UncertaintyConfig {
                temperature_lag: effective_lag(
                    cfg.uncertainty.temperature_lag,
                    cfg.smoothing_pressure,
                    cfg.smoothing_temperature,
                ),
                ..cfg.uncertainty
            },
            &est,
        )?
        .with_vessel_time_constant(cfg.settle_time_constant);
        let tank = est.setup().tank;
        let rated = est.estimate(tank.rated_pressure_pa, tank.rated_temperature_k)?;
        let rated_mass_kg = est.rated_mass_kg();
        let blocks_per_hour = (HOUR_MS / cfg.block.0) as u32;
        let lag_ms = unc.config().temperature_lag.0;
        let q16 = |v: F| libm::round(v.to_f64().clamp(0.0, 1.0) * 65_536.0) as u64;
        let u = &cfg.uncertainty;
        let t16 = |k: F| libm::round(k.to_f64().max(0.0) * 65_536.0) as u64;
        let u_scale = super::scale_uncertainty_q16(
            q16(u.capacity),
            q16(u.pressure_reading),
            q16(u.model),
            t16(u.temperature_k),
            t16(tank.rated_temperature_k),
        );
        let draw_margin = F::lit((super::DRAW_MARGIN * u_scale) as f64 / 65_536.0);
        // A vessel slower than VESSEL_LAG_FROM_MS (see super, "Weather").
        let tau = cfg.settle_time_constant.0.min(1 << 40);
        let slow = tau > VESSEL_LAG_FROM_MS;
        Ok(Tracker {
            unc,
            alarms: Alarms::new(cfg.debounce),
            rated_mass_kg,
            standard_m3_per_kg: rated.standard_volume_m3 / rated.mass_kg,
            blocks_per_hour,
            tau_blocks: F::lit(cfg.settle_time_constant.0 as f64) / F::lit(cfg.block.0 as f64),
            last_at: None,
            p_hist: [F::ZERO; 2],
            t_hist: [F::ZERO; 2],
            hist_len: 0,
            p_smooth: F::ZERO,
            t_smooth: F::ZERO,
            block_start: Instant(0),
            block_sum: F::ZERO,
            block_n: 0,
            ring: [F::ZERO; RATE_WINDOW],
            t_ring: [F::ZERO; TEMPERATURE_WINDOW],
            t_len: 0,
            ring_len: 0,
            prev_block: None,
            close: None,
            hour_sum: F::ZERO,
            hour_blocks: 0,
            day_ring: [F::ZERO; LEAK_RING],
            day_t: [F::ZERO; LEAK_RING],
            lag_ms,
            t_gas: None,
            gas_gain: if slow {
                F::lit(cfg.block.0 as f64 / tau as f64)
            } else {
                F::ZERO
            },
            vessel_ms: if slow { tau } else { 0 },
            hour_lead: F::ZERO,
            draw_margin,
            day_len: 0,
            learned_draw_per_day: None,
            episode: false,
            episode_blocks: 0,
            leak_hold_until: Instant(0),
            rate_per_h: None,
            gas_sensor: F::ZERO,
            gas_draw: F::ZERO,
            gas_transient: false,
            steady_ms: 0,
            settle_active: false,
            settle_blocks: 0,
            settle_since: Instant(0),
            content: None,
            uncertainty: None,
            rate: None,
            tte: None,
            tte_why: NoTimeToEmpty::Learning,
            predicted: None,
            leak: None,
            rated_pressure_now_pa: None,
            est,
            cfg,
        })
    }

    /// The content estimator.
    pub fn estimator(&self) -> &Estimator<F, M> {
        &self.est
    }

    /// The configuration.
    pub fn config(&self) -> &TrackConfig<F> {
        &self.cfg
    }

    /// Clears every active alarm at `at` (see
    /// [`Alarms::clear_all`](crate::alarm::Alarms::clear_all)); returns the
    /// cleared events.
    pub fn clear_alarms(&mut self, at: Instant) -> Events {
        self.alarms.clear_all(at)
    }

    /// Forgets the learned draw (in-use leak mode learns it again).
    pub fn relearn_draw(&mut self) {
        self.learned_draw_per_day = None;
    }

    /// The expected draw learned in use, kg/h.
    pub fn learned_draw_kg_h(&self) -> Option<F> {
        self.learned_draw_per_day
            .map(|d| d * self.rated_mass_kg / F::lit(DAY_HOURS as f64))
    }

    /// Takes one sample: absolute pressure (Pa) and temperature (K) from the
    /// sensor front end, the front end's flags for this sample (only
    /// [`Status::SENSOR_RANGE`] bits are looked at) and the sample's time.
    /// Fails only for NaN or infinite readings that the front end did not
    /// flag; the state is then unchanged.
    pub fn update(
        &mut self,
        at: Instant,
        pressure_pa: F,
        temperature_k: F,
        sensor: Status,
    ) -> Result<Track<F>, Error> {
        let sensor = sensor & Status::SENSOR_RANGE;
        let fault = !sensor.is_ok();
        if !fault {
            if !pressure_pa.is_finite() {
                return Err(Error::NotFinite(Measured::Pressure.into()));
            }
            if !temperature_k.is_finite() {
                return Err(Error::NotFinite(Measured::Temperature.into()));
            }
        }
        self.close_step();
        if !fault {
            self.check_gap(at);
            let (p, t) = self.despike(pressure_pa, temperature_k);
            let (p, t) = self.smooth(at, p, t);
            let content = self.est.estimate(p, t)?;
            self.content = Some(content);
            self.close_blocks(at, &content);
            if !content.status.intersects(Status::CONTENT_INVALID) {
                self.block_sum += content.fill_fraction;
                self.block_n += 1;
                // Settling from the first sample of a fast change.
                if let Some(prev) = self.prev_block {
                    let raw = (pressure_pa.max(F::ZERO), temperature_k);
                    self.fast_sample(at, prev, content.fill_fraction, raw, (p, t));
                }
            }
            self.last_at = Some(at);
        } else {
            self.withdraw_if_stale(at);
        }

        let level = self.content.map(|c| LevelInputs {
            pressure_pa: c.pressure_pa,
            temperature_k: c.temperature_k,
            fill_fraction: c.fill_fraction,
            settled_fraction: if self.settle_active {
                self.predicted.map(|p| p.fill_fraction)
            } else {
                Some(c.fill_fraction)
            },
            time_to_empty: self.tte_for_alarm(),
        });
        let (raise, clear) = self.cfg.limits.conditions(&Inputs {
            content: level,
            sensor_fault: fault,
            leak: self.leak.is_some_and(|l| l.leaking),
            not_settled: self.not_settled(),
        });
        let events = self.alarms.update(at, raise, clear);
        let content_status = self.content.map_or(Status::OK, |c| c.status);
        Ok(Track {
            at,
            content: self.content,
            uncertainty: self.uncertainty,
            rate: self.rate,
            time_to_empty: self.tte,
            time_to_empty_withheld: self.tte_withheld(),
            settling: Settling {
                not_settled: self.not_settled(),
                predicted: if self.settle_active {
                    self.predicted
                } else {
                    None
                },
            },
            leak: self.leak,
            rated_pressure_now_pa: self.rated_pressure_now_pa,
            events,
            status: content_status | sensor | self.alarms.active().status(),
        })
    }

    /// Not settled: after a fast fill or draw (the settling above), or while
    /// the gas–sensor temperature difference outweighs the rest of the
    /// content's budget.
    fn not_settled(&self) -> bool {
        self.settle_active || self.gas_transient
    }

    /// At a flagged sample: once the last usable one is older than
    /// `max_gap`, the content and what rests on it are withdrawn (see
    /// [`super`]; a usable sample restarts the windows).
    fn withdraw_if_stale(&mut self, at: Instant) {
        if self.last_at.is_some_and(|l| at.since(l) > self.cfg.max_gap) {
            self.finish_close();
            self.content = None;
            self.uncertainty = None;
            self.rate = None;
            self.rate_per_h = None;
            self.set_tte(Err(NoTimeToEmpty::NoContent));
            self.predicted = None;
            self.gas_sensor = F::ZERO;
            self.gas_draw = F::ZERO;
            self.gas_transient = false;
        }
    }

    /// Why no time to empty is given, `None` while one is.
    fn tte_withheld(&self) -> Option<NoTimeToEmpty> {
        match (&self.content, &self.tte) {
            (None, _) => Some(NoTimeToEmpty::NoContent),
            (Some(_), Some(_)) => None,
            (Some(_), None) => Some(self.tte_why),
        }
    }

    /// Sets the time to empty, or why there is none.
    fn set_tte(&mut self, tte: Result<TimeToEmpty, NoTimeToEmpty>) {
        match tte {
            Ok(t) => self.tte = Some(t),
            Err(why) => {
                self.tte = None;
                self.tte_why = why;
            }
        }
    }

    /// The time to empty the low-content alarm may use: a rate known to
    /// better than ±50 % (confidence ≥ 0.5).
    fn tte_for_alarm(&self) -> Option<Millis> {
        match (self.rate, self.tte) {
            (Some(r), Some(t)) if r.confidence >= F::lit(0.5) => Some(t.expected),
            _ => None,
        }
    }

    /// Restarts the windows after a gap longer than `max_gap` or when time
    /// runs backwards. The previous block mean is kept, so a refill during
    /// the gap is still seen as a fast fill.
    fn check_gap(&mut self, at: Instant) {
        let restart = match self.last_at {
            None => true,
            Some(last) => at < last || at.since(last) > self.cfg.max_gap,
        };
        if restart {
            self.finish_close();
            self.hist_len = 0;
            self.block_start = at;
            self.block_sum = F::ZERO;
            self.block_n = 0;
            self.ring_len = 0;
            self.t_len = 0;
            self.t_gas = None;
            self.rate = None;
            self.set_tte(Err(NoTimeToEmpty::Learning));
            self.reset_leak();
            self.last_at = None;
        }
    }

    /// Median of the last three readings per channel.
    fn despike(&mut self, p: F, t: F) -> (F, F) {
        let [p0, p1] = self.p_hist;
        let [t0, t1] = self.t_hist;
        let out = if self.hist_len >= 2 {
            (median3(p0, p1, p), median3(t0, t1, t))
        } else {
            (p, t)
        };
        self.p_hist = [p1, p];
        self.t_hist = [t1, t];
        self.hist_len = self.hist_len.saturating_add(1);
        out
    }

    /// First-order low-pass per channel with α = Δt/(τ + Δt).
    fn smooth(&mut self, at: Instant, p: F, t: F) -> (F, F) {
        match self.last_at {
            None => {
                self.p_smooth = p;
                self.t_smooth = t;
            }
            Some(last) => {
                let dt = F::lit(at.since(last).0 as f64);
                let alpha = |tau: Millis| dt / (F::lit(tau.0 as f64) + dt);
                let (ap, at_) = (
                    alpha(self.cfg.smoothing_pressure),
                    alpha(self.cfg.smoothing_temperature),
                );
                if dt > F::ZERO {
                    self.p_smooth += ap * (p - self.p_smooth);
                    self.t_smooth += at_ * (t - self.t_smooth);
                }
            }
        }
        (self.p_smooth, self.t_smooth)
    }

    /// Closes the current block when `at` lies past its end.
    fn close_blocks(&mut self, at: Instant, content: &Content<F>) {
        let end = self.block_start + self.cfg.block;
        if at < end {
            return;
        }
        if self.block_n > 0 {
            let mean = self.block_sum / F::lit(self.block_n as f64);
            let spread = self
                .last_at
                .is_some_and(|l| super::spread(at.since(l), self.cfg.block));
            self.block(end, mean, content, spread);
        }
        // Blocks stay aligned; a skipped block (no sample) is a gap and was
        // handled by check_gap.
        self.block_start = end;
        if at >= self.block_start + self.cfg.block {
            self.block_start = at;
        }
        self.block_sum = F::ZERO;
        self.block_n = 0;
    }

    /// Settling from one sample: the fill fraction the sample's own reading
    /// implies, F·(p_raw/p)·(T/T_raw) (F at the smoothed pressure p and
    /// temperature T; the gas-law scaling from the smoothed to the raw
    /// reading), differs from the previous block mean `prev` by more than
    /// `settle_step`. The raw reading (`raw`, before despiking and
    /// smoothing) sees a fast fill or draw from its first sample; a change
    /// of temperature at constant content moves p and T together and
    /// cancels. Without a division:
    /// |F·p_raw·T − prev·p·T_raw| > step·p·T_raw.
    fn fast_sample(&mut self, at: Instant, prev: F, f: F, raw: (F, F), smooth: (F, F)) {
        let ((p_raw, t_raw), (p, t)) = (raw, smooth);
        if p <= F::ZERO || t_raw <= F::ZERO {
            return;
        }
        let now = f * p_raw * t;
        let before = prev * p * t_raw;
        if (now - before).abs() > self.cfg.settle_step * p * t_raw {
            self.unsettled(at, now > before);
        }
    }

    /// Settling from a block: its mean `value` differs from the previous
    /// block mean `prev` by more than `settle_step`. Returns whether it did.
    fn fast_change(&mut self, at: Instant, prev: F, value: F) -> bool {
        let step = value - prev;
        if step.abs() <= self.cfg.settle_step {
            return false;
        }
        self.unsettled(at, step > F::ZERO);
        true
    }

    /// A fast fill (`rise`) or draw at `at`: not settled from now on, the
    /// prediction starts afresh; a fill also restarts the rate.
    fn unsettled(&mut self, at: Instant, rise: bool) {
        self.settle_active = true;
        self.settle_blocks = 0;
        self.settle_since = at;
        self.predicted = None;
        if rise {
            // A fill: the rate starts again.
            self.ring_len = 0;
            self.t_len = 0;
            self.rate = None;
            self.set_tte(Err(NoTimeToEmpty::Learning));
        }
    }

    /// Everything that happens once per block: the bookkeeping now, the
    /// rest as [`CloseStep`]s over the following samples when `spread`, at
    /// once otherwise (a close still running is finished first).
    fn block(&mut self, end: Instant, mean: F, content: &Content<F>, spread: bool) {
        self.finish_close();
        // Settling: a fast change between consecutive blocks.
        if let Some(prev) = self.prev_block
            && !self.fast_change(end, prev, mean)
            && self.settle_active
        {
            self.settle_blocks += 1;
        }
        self.prev_block = Some(mean);
        self.ring.rotate_left(1);
        if let Some(last) = self.ring.last_mut() {
            *last = mean;
        }
        self.t_ring.rotate_left(1);
        if let Some(last) = self.t_ring.last_mut() {
            *last = self.t_smooth;
        }
        if self.vessel_ms > 0 {
            // The gas follows the sensor's temperature through its time
            // constant τ_v·F (first order, one step a block; the gas's heat
            // capacity goes with its amount).
            let t = self.t_smooth;
            let f = mean.max(F::lit(1.0 / (1u64 << 28) as f64)).min(F::ONE);
            let gain = (self.gas_gain / f).min(F::ONE);
            self.t_gas = Some(match self.t_gas {
                None => t,
                Some(g) => g + (t - g) * gain,
            });
        }
        self.ring_len = (self.ring_len + 1).min(RATE_WINDOW);
        self.t_len = (self.t_len + 1).min(TEMPERATURE_WINDOW);

        self.close = Some(Close {
            step: CloseStep::Terms,
            end,
            mean,
            content: *content,
            terms: None,
            fit: None,
            temperature: None,
            budget: None,
        });
        if !spread {
            self.finish_close();
        }
    }

    /// Runs the next step of the close in progress, if any.
    fn close_step(&mut self) {
        let Some(step) = self.close.as_ref().map(|c| c.step) else {
            return;
        };
        match step {
            CloseStep::Terms => {
                if let Some(c) = &mut self.close {
                    // Its sensitivities and terms, once for both budgets.
                    c.terms = Some(self.unc.terms(&c.content));
                }
            }
            CloseStep::RateFit => {
                let n = self.ring_len.min(RATE_WINDOW);
                let fit = if n < RATE_MIN_BLOCKS {
                    self.rate = None;
                    self.rate_per_h = None;
                    self.set_tte(Err(NoTimeToEmpty::Learning));
                    self.gas_sensor = F::ZERO;
                    self.gas_draw = F::ZERO;
                    self.steady_ms = 0;
                    None
                } else {
                    Some((n, self.fit(n)))
                };
                if let Some(c) = &mut self.close {
                    c.fit = fit;
                }
            }
            CloseStep::TemperatureFit => {
                let n = self.close.as_ref().and_then(|c| c.fit).map(|(n, _)| n);
                let temperature = n
                    .filter(|&n| self.ring_len == n)
                    .map(|n| self.temperature_fit(n, self.t_len));
                if let Some(c) = &mut self.close {
                    c.temperature = temperature;
                }
            }
            CloseStep::Budget => self.rate_budget(),
            CloseStep::Rate => {
                self.rate_and_time_to_empty();
                if let Some(end) = self.close.as_ref().map(|c| c.end) {
                    self.episodes(end);
                }
            }
            CloseStep::Settle => {
                if let Some(c) = &self.close {
                    let (end, mean, t) = (c.end, c.mean, c.content.temperature_k);
                    self.settle(end, mean, t);
                }
            }
            CloseStep::Leak => {
                if let Some(c) = &self.close {
                    let (end, mean) = (c.end, c.mean);
                    let (p, f) = (c.content.pressure_pa, c.content.fill_fraction);
                    self.leak_block(end, mean, p, f);
                }
            }
            CloseStep::Uncertainty => {
                #[cfg(feature = "uncertainty")]
                if let Some(Close {
                    terms: Some(terms), ..
                }) = &self.close
                {
                    let (u, transient) =
                        self.unc
                            .evaluate_with(terms, self.gas_sensor, self.gas_draw);
                    self.uncertainty = Some(u);
                    self.gas_transient = transient;
                }
            }
            CloseStep::Reference => {
                if let Some(t) = self.close.as_ref().map(|c| c.content.temperature_k) {
                    self.rated_pressure_now_pa = Some(self.est.pressure_at(F::ONE, t).0);
                }
            }
        }
        match step.next() {
            Some(next) => {
                if let Some(c) = &mut self.close {
                    c.step = next;
                }
            }
            None => self.close = None,
        }
    }

    /// Runs the steps left of the close in progress.
    fn finish_close(&mut self) {
        while self.close.is_some() {
            self.close_step();
        }
    }

    /// The close's rate window, line and temperature parabola while the
    /// window is still the tracker's (a fill marked since restarts it).
    fn window_kept(&self) -> Option<(usize, Fit<F>, TemperatureFit<F>)> {
        let c = self.close.as_ref()?;
        let ((n, fit), temperature) = (c.fit?, c.temperature?);
        (self.ring_len == n).then_some((n, fit, temperature))
    }

    /// Standard uncertainties of the rate (the fit's scatter, the
    /// temperature dynamics and the scale errors) and of the content the
    /// time to empty counts down from (crate::uncertainty).
    fn rate_budget(&mut self) {
        let Some((n, fit, temp)) = self.window_kept() else {
            return;
        };
        let Some(Close {
            content,
            terms: Some(terms),
            ..
        }) = &self.close
        else {
            return;
        };
        let bph = F::lit(self.blocks_per_hour as f64);
        let budget: RateBudget<F> = self.unc.rate(
            content,
            terms,
            &RateWindow {
                slope_per_h: fit.slope * bph,
                u_fit_per_h: fit.se * bph,
                fill_fraction: fit.mean,
                temperature_k: temp.mean,
                dt_per_h: temp.slope_per_h,
                d2t_per_h2: temp.curvature_per_h2,
                left_fraction: self.left_fraction(&fit, n),
                reserve_fraction: self.cfg.reserve_fraction,
                blocks: n as u32,
                blocks_per_hour: self.blocks_per_hour,
            },
        );
        self.gas_sensor = budget.gas_sensor;
        self.gas_draw = budget.draw;
        if let Some(c) = &mut self.close {
            c.budget = Some(budget);
        }
    }

    /// The fill fraction above the reserve at the end of an `n`-block
    /// window: the fitted value there, mean + slope·(n − 1)/2, less the
    /// reserve.
    fn left_fraction(&self, fit: &Fit<F>, n: usize) -> F {
        fit.mean + fit.slope * F::lit((n - 1) as f64 / 2.0) - self.cfg.reserve_fraction
    }

    /// Rate, steady draw and time to empty from the window's fit and
    /// budget.
    fn rate_and_time_to_empty(&mut self) {
        let (Some((n, fit, _)), Some(budget)) = (
            self.window_kept(),
            self.close.as_ref().and_then(|c| c.budget),
        ) else {
            return;
        };
        let bph = F::lit(self.blocks_per_hour as f64);
        let per_h = -fit.slope * bph;
        self.rate_per_h = Some(per_h);
        let left = self.left_fraction(&fit, n);
        let two = F::lit(2.0);
        let u_per_h = two * budget.rate_per_h;
        let confidence = if per_h.abs() > F::ZERO {
            (F::ONE - u_per_h / per_h.abs()).clamp_to(F::ZERO, F::ONE)
        } else {
            F::ZERO
        };
        let kg_h = per_h * self.rated_mass_kg;
        // A steady draw? The newest SETTLE_WINDOW blocks' slope against the
        // window's (see super).
        let steady = n < 2 * SETTLE_WINDOW || {
            let short = self.fit(SETTLE_WINDOW).slope;
            let allowed = F::lit(1.0 / STEADY_SHARE_DIVISOR as f64) * fit.slope.abs() * bph
                + F::lit(STEADY_FLOOR_PER_H);
            (short - fit.slope).abs() * bph <= allowed
        };
        self.rate = Some(Rate {
            kg_h,
            standard_m3_h: kg_h * self.standard_m3_per_kg,
            u_kg_h: u_per_h * self.rated_mass_kg,
            confidence,
            blocks: n as u32,
            steady,
        });
        // The draw's cooling settles with the gas's time constant τ_v·F:
        // before STEADY_TIME_CONSTANTS of them the rate still holds the gas
        // cooling toward its steady difference (see super).
        self.steady_ms = if steady {
            self.steady_ms.saturating_add(self.cfg.block.0)
        } else {
            0
        };
        let settled_draw = F::lit(self.steady_ms as f64)
            >= F::lit((STEADY_TIME_CONSTANTS * self.cfg.settle_time_constant.0) as f64)
                * fit.mean.clamp_to(F::ZERO, F::ONE);
        // Not emptying: the content is not falling, or not measurably (the
        // rate within its own expanded uncertainty of zero: an idle vessel's
        // scatter would give times to empty of years).
        let tte = if per_h <= u_per_h {
            Err(NoTimeToEmpty::NotEmptying)
        } else if left <= F::ZERO {
            Err(NoTimeToEmpty::AtReserve)
        } else if !steady {
            Err(NoTimeToEmpty::DrawChanging)
        } else if !settled_draw {
            Err(NoTimeToEmpty::DrawCooling)
        } else {
            let ms = |rate: F| Millis((left / rate * F::lit(HOUR_MS as f64)).to_f64() as u64);
            // The bounds: left/(rate ± U) with U the rate spread of the
            // time to empty's own budget (k = 2).
            let u_t = two * budget.time_to_empty_per_h;
            Ok(TimeToEmpty {
                expected: ms(per_h),
                earliest: ms(per_h + u_t),
                latest: if per_h > u_t {
                    Some(ms(per_h - u_t))
                } else {
                    None
                },
            })
        };
        self.set_tte(tte);
    }

    /// Settling state and prediction.
    fn settle(&mut self, end: Instant, last: F, temperature_k: F) {
        if !self.settle_active {
            return;
        }
        let tau = self.cfg.settle_time_constant;
        let mut settled = end.since(self.settle_since).0 >= tau.0 * SETTLE_TIME_CONSTANTS;
        if self.settle_blocks >= SETTLE_WINDOW && self.ring_len >= SETTLE_WINDOW {
            let fit = self.fit(SETTLE_WINDOW);
            let f_inf = (fit.mean + self.tau_blocks * fit.slope).max(F::ZERO);
            let (p, _) = self.est.pressure_at(f_inf, temperature_k);
            self.predicted = Some(SettledPrediction {
                pressure_pa: p,
                mass_kg: f_inf * self.rated_mass_kg,
                fill_fraction: f_inf,
            });
            settled |= (f_inf - last).abs() < self.cfg.settle_tolerance;
        }
        if settled {
            self.settle_active = false;
            self.predicted = None;
        }
    }

    /// Draw episodes (see [`super`]): the rate above the episode threshold
    /// starts one, below half of it ends one; the leak ring stays empty until
    /// [`SETTLE_TIME_CONSTANTS`] settling time constants after its end.
    fn episodes(&mut self, end: Instant) {
        let Some(per_h) = self.rate_per_h else {
            self.episode = false;
            return;
        };
        let mut start = F::lit(EPISODE_RATE_PER_H);
        if let Some(d) = self.expected_per_day() {
            start = start.max(F::lit(EPISODE_EXPECTED_FACTOR as f64 / DAY_HOURS as f64) * d);
        }
        if !self.episode && per_h > start {
            self.episode = true;
            self.episode_blocks = 0;
        }
        if self.episode {
            self.episode_blocks = self.episode_blocks.saturating_add(1);
            if per_h < start / F::lit(2.0) {
                self.episode = false;
                let hold = self.cfg.settle_time_constant.0 * SETTLE_TIME_CONSTANTS;
                self.leak_hold_until = end + Millis(hold);
            }
        }
    }

    /// The expected draw of the in-use leak mode, fraction of the rated
    /// content per day (`None`: standby, or not learned yet).
    fn expected_per_day(&self) -> Option<F> {
        match (self.cfg.leak_mode, self.cfg.declared_draw_kg_h) {
            (LeakMode::Standby, _) => None,
            (LeakMode::InUse, Some(kg_h)) => {
                Some(kg_h * F::lit(DAY_HOURS as f64) / self.rated_mass_kg)
            }
            (LeakMode::InUse, None) => self.learned_draw_per_day,
        }
    }

    /// Whether the leak ring is held empty at a block ending at `end` with
    /// mean `mean` (see [`super`]).
    fn leak_held(&self, end: Instant, mean: F) -> bool {
        let long = self.cfg.leak_mode == LeakMode::Standby
            && self.episode_blocks >= EPISODE_MAX_HOURS * self.blocks_per_hour;
        self.settle_active
            || (self.episode && !long)
            || end < self.leak_hold_until
            || mean <= self.cfg.reserve_fraction
    }

    /// Leak detection: hourly means into the two-day ring.
    fn leak_block(&mut self, end: Instant, mean: F, pressure_pa: F, fill: F) {
        if self.leak_held(end, mean) {
            self.reset_leak();
            return;
        }
        self.hour_sum += mean;
        if let Some(g) = self.t_gas {
            // The content at the gas's temperature less the content at the
            // sensor's, at the same pressure (fraction of the rated
            // content; none when the model refuses it).
            if let Ok(gas) = self.est.estimate(pressure_pa, g)
                && !gas.status.intersects(Status::CONTENT_INVALID)
            {
                self.hour_lead += gas.fill_fraction - fill;
            }
        }
        self.hour_blocks += 1;
        if self.hour_blocks < self.blocks_per_hour {
            return;
        }
        let hour = self.hour_sum / F::lit(self.blocks_per_hour as f64);
        let lead = self.hour_lead / F::lit(self.blocks_per_hour as f64);
        self.hour_sum = F::ZERO;
        self.hour_lead = F::ZERO;
        self.hour_blocks = 0;
        self.day_ring.rotate_left(1);
        if let Some(last) = self.day_ring.last_mut() {
            *last = hour;
        }
        self.day_t.rotate_left(1);
        if let Some(last) = self.day_t.last_mut() {
            // For a slow vessel the hour's mean content the sensor's lead
            // hides instead (on the fixed path's grid and range).
            *last = if self.vessel_ms > 0 {
                let q = (1u64 << LEAD_Q) as f64;
                F::lit(libm::round(lead.to_f64() * q).clamp(-32_768.0, 32_767.0) / q)
            } else {
                F::lit(libm::round(self.t_smooth.to_f64() * 128.0) / 128.0)
            };
        }
        self.day_len = (self.day_len + 1).min(LEAK_RING);
        // Pairs of hours one day apart, or in the first day the older half
        // against the newer (see super).
        let Some(w) = window(
            self.day_len,
            self.cfg.leak_mode,
            self.cfg.settle_time_constant,
        ) else {
            return;
        };
        let k = w.len;
        let older: F = self
            .day_ring
            .iter()
            .skip(w.older)
            .take(k)
            .fold(F::ZERO, |a, &x| a + x);
        let newer: F = self
            .day_ring
            .iter()
            .skip(w.newer)
            .take(k)
            .fold(F::ZERO, |a, &x| a + x);
        let hours = F::lit(DAY_HOURS as f64);
        let kf = F::lit(k as f64);
        // A day apart from `apart` hours apart.
        let a_day = F::lit(DAY_HOURS as f64 / w.apart as f64);
        let content = older / kf;
        let t = |i: usize| self.day_t.get(i).copied().unwrap_or(F::ZERO);
        // Loss per day as a fraction of the rated content.
        let mut loss = (older - newer) / kf * a_day;
        let margin = if self.vessel_ms > 0 {
            // A slow vessel (see super, "Weather"): the loss corrected by the
            // change between the sides of the content the sensor's lead on
            // the gas hides; the margin 3·(share + u_τ/τ)·|Δc| (share: the
            // time constant's uncertainty, τ = τ_v·F).
            let side = |from: usize| (0..k).fold(F::ZERO, |a, i| a + t(from + i));
            let dc = (side(w.older) - side(w.newer)) / kf * a_day;
            loss += dc;
            let f = content.max(F::ZERO).min(F::ONE);
            let tau = (F::lit(self.vessel_ms as f64) * f).max(F::ONE);
            let share = F::lit((LAG_MARGIN * VESSEL_LAG_SHARE_Q8) as f64 / 256.0);
            dc.abs() * (share + F::lit((LAG_MARGIN * self.lag_ms) as f64) / tau)
        } else {
            // The sensor's lag (see super): the change of the mean
            // temperature slope over the k hours of each side.
            let last = k - 1;
            let ds = ((t(w.newer + last) - t(w.newer)) - (t(w.older + last) - t(w.older))).abs();
            let mid = t(w.older + k);
            if mid > F::ZERO {
                content * ds * F::lit((LAG_MARGIN * self.lag_ms) as f64)
                    / (F::lit(HOUR_MS as f64 * (k - 1) as f64) * mid)
                    * a_day
            } else {
                F::ZERO
            }
        };
        let mut draw_margin = F::ZERO;
        let expected = match self.cfg.leak_mode {
            LeakMode::Standby => F::ZERO,
            LeakMode::InUse => match self.cfg.declared_draw_kg_h {
                Some(kg_h) => {
                    let d = kg_h * hours / self.rated_mass_kg;
                    draw_margin = d * self.draw_margin;
                    d
                }
                None => match self.learned_draw_per_day {
                    Some(d) => d,
                    None => {
                        if k == DAY_HOURS {
                            self.learned_draw_per_day = Some(loss.max(F::ZERO));
                        }
                        return;
                    }
                },
            },
        };
        let excess = loss - expected;
        let (loss_rel, excess_rel) = if content > F::ZERO {
            (loss / content, excess / content)
        } else {
            (F::ZERO, F::ZERO)
        };
        let factor = F::lit(w.factor_q8 as f64 / 256.0);
        let floor = content * F::lit(w.floor_q16 as f64 / 65_536.0) * a_day;
        self.leak = Some(Leak {
            loss_per_day: loss_rel,
            excess_per_day: excess_rel,
            expected_draw_kg_h: expected * self.rated_mass_kg / hours,
            leaking: excess
                > self.cfg.leak_threshold_per_day * factor * content + floor + margin + draw_margin,
        });
    }

    /// Empties the leak ring (its verdict goes with it).
    fn reset_leak(&mut self) {
        self.hour_sum = F::ZERO;
        self.hour_lead = F::ZERO;
        self.hour_blocks = 0;
        self.day_len = 0;
        self.leak = None;
    }

    /// Least-squares line through the last `n` block means of the window.
    fn fit(&self, n: usize) -> Fit<F> {
        let nf = F::lit(n as f64);
        let centre = F::lit((n as f64 - 1.0) / 2.0);
        let ys = self.ring.iter().skip(RATE_WINDOW - n);
        let mean = ys.clone().fold(F::ZERO, |a, &y| a + y) / nf;
        let sxy = ys
            .clone()
            .enumerate()
            .fold(F::ZERO, |a, (i, &y)| a + (F::lit(i as f64) - centre) * y);
        // Σ(i − ī)² = n(n² − 1)/12.
        let sxx = nf * (nf * nf - F::ONE) / F::lit(12.0);
        let slope = sxy / sxx;
        // Sum of squared residuals and of products of neighbours.
        let (ssr, s1, _) = ys.enumerate().fold(
            (F::ZERO, F::ZERO, None),
            |(ssr, s1, prev): (F, F, Option<F>), (i, &y)| {
                let r = y - mean - slope * (F::lit(i as f64) - centre);
                (ssr + r * r, prev.map_or(s1, |q| s1 + q * r), Some(r))
            },
        );
        let se = if n > 2 {
            let two = F::lit(2.0);
            // Lag-1 autocorrelation ρ of the residuals (0 … 1) and the
            // effective number of blocks n_e = n(1 − ρ)/(1 + ρ), kept ≥ 3:
            // SE² × (n − 2)/(n_e − 2).
            let rho = if ssr > F::ZERO {
                (s1 / ssr).clamp_to(F::ZERO, F::ONE)
            } else {
                F::ZERO
            };
            let (up, down) = (F::ONE + rho, F::ONE - rho);
            let factor = (nf - two) * up / (nf * down - two * up).max(up);
            (ssr / (nf - two) / sxx * factor).sqrt()
        } else {
            F::ZERO
        };
        Fit { mean, slope, se }
    }

    /// Level, curvature, and slope at the centre of the rate window (its
    /// last `n` blocks) of a parabola through the last `m` ≥ `n` block
    /// temperatures, per hour: least squares on the orthogonal polynomials
    /// 1, (i − ī) and (i − ī)² − (m² − 1)/12 of equally spaced points. The
    /// longer window steadies the curvature (its noise falls as m^−2.5).
    fn temperature_fit(&self, n: usize, m: usize) -> TemperatureFit<F> {
        let m = m.clamp(n, TEMPERATURE_WINDOW);
        // The rate window's centre lies (m − n)/2 blocks after this one's.
        let offset = F::lit((m - n) as f64 / 2.0);
        let nf = F::lit(m as f64);
        let centre = F::lit((m as f64 - 1.0) / 2.0);
        let ts = self.t_ring.iter().skip(TEMPERATURE_WINDOW - m);
        let mean = ts.clone().fold(F::ZERO, |a, &t| a + t) / nf;
        let q = (nf * nf - F::ONE) / F::lit(12.0);
        let (s1, s2) = ts
            .enumerate()
            .fold((F::ZERO, F::ZERO), |(s1, s2), (i, &t)| {
                let d = F::lit(i as f64) - centre;
                let dev = t - mean;
                (s1 + d * dev, s2 + (d * d - q) * dev)
            });
        // Σ(i − ī)² = n(n² − 1)/12; Σ((i − ī)² − q)² = n(n² − 1)(n² − 4)/180.
        let n2 = nf * nf;
        let sxx = nf * (n2 - F::ONE) / F::lit(12.0);
        let s22 = nf * (n2 - F::ONE) * (n2 - F::lit(4.0)) / F::lit(180.0);
        let bph = F::lit(self.blocks_per_hour as f64);
        let curvature = F::lit(2.0) * s2 / s22;
        TemperatureFit {
            mean,
            slope_per_h: (s1 / sxx + curvature * offset) * bph,
            curvature_per_h2: curvature * bph * bph,
        }
    }
}

/// The median of three values.
fn median3<F: Real>(a: F, b: F, c: F) -> F {
    a.min(b).max(a.max(b).min(c))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Ideal;
    use crate::{Gas, Setup, StandardCondition};

    fn tracker_f32() -> Tracker<f32, Ideal> {
        let setup = Setup {
            gas: Gas::Nitrogen,
            tank: Tank::new(0.05f32, 200e5),
            standard: StandardCondition {
                temperature_k: 288.15f32,
                pressure_pa: 101_325.0,
            },
            settled_reference_k: 288.15f32,
        };
        let est = Estimator::new(setup, Ideal::new(Gas::Nitrogen)).unwrap();
        let c = TrackConfig::for_tank(&Tank::new(0.05, 200e5), UncertaintyConfig::example(300e5));
        let cfg = TrackConfig {
            smoothing_pressure: c.smoothing_pressure,
            smoothing_temperature: c.smoothing_temperature,
            block: c.block,
            max_gap: c.max_gap,
            reserve_fraction: 0.05f32,
            settle_time_constant: c.settle_time_constant,
            settle_step: 0.005,
            settle_tolerance: 0.002,
            leak_mode: c.leak_mode,
            declared_draw_kg_h: None,
            leak_threshold_per_day: 0.001,
            uncertainty: UncertaintyConfig {
                pressure_full_scale_pa: 300e5f32,
                pressure_fs: 0.0015,
                pressure_reading: 0.0006,
                temperature_k: 0.5,
                capacity: 0.005,
                model: 0.001,
                temperature_lag: Millis::from_secs(600),
                temperature_gain: 0.003,
            },
            limits: Limits {
                low_fraction: 0.1f32,
                low_time_to_empty: c.limits.low_time_to_empty,
                fraction_hysteresis: 0.01,
                over_fill_fraction: 1.02,
                pressure_max_pa: 250e5,
                pressure_hysteresis_pa: 2e5,
                temperature_max_k: 338.15,
                temperature_min_k: 233.15,
                temperature_hysteresis_k: 2.0,
            },
            debounce: c.debounce,
        };
        Tracker::new(est, cfg).unwrap()
    }

    #[test]
    fn single_precision_runs_a_steady_draw() {
        // f32 exists for firmware budgets: the same algorithm must work.
        let mut t = tracker_f32();
        let mut last = None;
        for i in 0..3600u64 {
            // 180 bar falling 10 bar per hour at 15 °C.
            let p = 180e5f32 - 10e5 * i as f32 / 3600.0;
            last = Some(t.update(Instant(i * 1000), p, 288.15, Status::OK).unwrap());
        }
        let r = last.unwrap().rate.unwrap();
        // 10 bar/h of 200 bar rated = 5 %/h of the rated mass (11.7 kg).
        let expected = 0.05 * t.estimator().rated_mass_kg();
        assert!((r.kg_h / expected - 1.0).abs() < 1e-3, "{r:?}");
    }

    #[test]
    fn bad_readings_are_errors_and_gaps_restart_the_windows() {
        let mut t = tracker_f32();
        for i in 0..900u64 {
            t.update(Instant(i * 1000), 150e5, 288.15, Status::OK)
                .unwrap();
        }
        assert!(
            t.update(Instant(900_000), f32::NAN, 288.15, Status::OK)
                .is_err()
        );
        // A flagged reading is no error: it is skipped and counted as a fault.
        let r = t
            .update(
                Instant(901_000),
                f32::NAN,
                288.15,
                Status::from_bits(1 << 8),
            )
            .unwrap();
        assert!(r.status.intersects(Status::SENSOR_RANGE));
        assert!(r.rate.is_some());
        // Ten minutes without samples (more than max_gap): windows restart.
        let r = t
            .update(Instant(1_600_000), 150e5, 288.15, Status::OK)
            .unwrap();
        assert!(r.rate.is_none());
    }

    /// A reading outside the envelope (1100 bar) gives no content to show and
    /// feeds no block, yet the over-pressure alarm still judges it.
    #[test]
    fn samples_outside_the_envelope_alarm_but_feed_no_block() {
        let mut t = tracker_f32();
        let mut last = None;
        for i in 0..90u64 {
            last = Some(
                t.update(Instant(i * 1000), 1100e5, 288.15, Status::OK)
                    .unwrap(),
            );
        }
        let r = last.unwrap();
        assert!(
            r.content
                .unwrap()
                .status
                .contains(Status::PRESSURE_OUTSIDE_ENVELOPE)
        );
        assert!(r.status.intersects(Status::CONTENT_INVALID));
        assert!(r.status.contains(Status::OVER_PRESSURE), "{:?}", r.status);
        assert_eq!((t.block_n, t.ring_len, t.prev_block), (0, 0, None));
        assert!(r.rate.is_none() && r.uncertainty.is_none());
    }

    #[test]
    fn median_of_three() {
        assert_eq!(median3(1.0, 2.0, 3.0), 2.0);
        assert_eq!(median3(3.0, 1.0, 2.0), 2.0);
        assert_eq!(median3(2.0, 3.0, 1.0), 2.0);
        assert_eq!(median3(5.0, 5.0, 100.0), 5.0);
    }
}
