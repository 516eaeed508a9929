//! Tracking over time, fixed-point form: the device path. Same steps and
//! names as [`super::float`]; the method is in [`super`].
//!
//! # Formats inside
//!
//! * fill fraction in blocks and windows: `u32` with 28 fraction bits (Q28,
//!   0 … 16 rated contents, 3.7e-9 resolution); fits and rates in `i64` Q36;
//! * smoothing states: the input's raw bits with 16 more fraction bits, and
//!   α in Q16 (α = Δt/(τ + Δt), recomputed only when Δt changes);
//! * block temperatures (the smoothing state at each block's close): K in
//!   Q23 (`u32`, below 512 K); their slope and curvature Q32 (K/h, K/h²);
//! * rates leave as `I32F32` (kg/h, m³/h, fraction per day).
//!
//! # Cost
//!
//! Per sample, besides the content estimate: two medians of three (six
//! compares), two smoothing steps (two 48×16-bit multiplies), one fraction
//! accumulation (one 64-bit add), the alarm conditions (about fifteen
//! compares) and the debounce (seven small state machines). No division per
//! sample unless the sample interval changed (then two 64/32 divisions for
//! α). Per block (default once a minute): one 64/32 division for the block
//! mean, the least-squares fits (about 100 multiply-adds, two 64-bit
//! divisions, two integer square roots), the autocorrelation of the rate
//! fit's residuals (32 more multiply-adds, one 64-bit and one 128-bit
//! division), the temperature parabola (≤ 64 multiply-adds, one 64-bit and
//! three 128-bit divisions), the uncertainty (one 64/32 division, two square
//! roots), the rate budget (one 64-bit and one 128-bit division, about forty
//! wide multiplies, three square roots) and two runs of the bounded pressure
//! solver (over-pressure reference and settled prediction). Per hour: two
//! 128-bit divisions for the reported leak rates. At a sample interval of
//! up to 1/18 of the block the per-block work is spread over the samples
//! after the close, one `CloseStep` each (see [`super`]), so no sample
//! pays for it whole.

use super::float::TrackConfig;
use super::{
    CloseStep, DAY_HOURS, EPISODE_EXPECTED_FACTOR, EPISODE_MAX_HOURS, EPISODE_RATE_PER_H, HOUR_MS,
    LAG_MARGIN, LEAD_BIAS, LEAD_Q, LEAK_RING, LeakMode, RATE_MIN_BLOCKS, RATE_WINDOW,
    SETTLE_TIME_CONSTANTS, SETTLE_WINDOW, STEADY_FLOOR_PER_H, STEADY_SHARE_DIVISOR,
    STEADY_TIME_CONSTANTS, TEMPERATURE_WINDOW, VESSEL_LAG_FROM_MS, VESSEL_LAG_SHARE_Q8,
    effective_lag, validate_timing, window,
};
use crate::alarm::fixed::{Inputs, LevelInputs, LimitsFx};
use crate::alarm::{AlarmSet, Alarms, DebounceTable, Events};
use crate::content::fixed::{Content, Estimator};
use crate::error::{Condition, TrackSetting};
use crate::fx::{self, Coef};
use crate::model::CompressibilityFx;
use crate::probe::{self, Stage};
use crate::time::{Instant, Millis};
use crate::uncertainty::fixed::{
    EvaluatorFx, QT_MEAN, RateBudgetFx, RateWindowFx, Terms, UncertaintyConfigFx, UncertaintyFx,
    isqrt,
};
use crate::{Error, Status};

pub use super::float::{NoTimeToEmpty, TimeToEmpty};

/// Fraction bits of block means and windows.
const Q: u32 = 28;
/// Fraction bits of fits and rates.
const QF: u32 = 36;
/// Extra fraction bits of the smoothing states.
const SMOOTH_FRAC: u32 = 16;
/// 1/(24 × 24): from the ×24 daily loss in fraction per day to per hour.
const PER_576: Coef = Coef::from_f64(1.0 / 576.0);
/// [`EPISODE_RATE_PER_H`] in Q36 (fraction of the rated content per hour).
const EPISODE_Q36: i64 = (EPISODE_RATE_PER_H * (1u64 << QF) as f64 + 0.5) as i64;
/// [`STEADY_FLOOR_PER_H`] in Q36.
const STEADY_FLOOR_Q36: i64 = (STEADY_FLOOR_PER_H * (1u64 << QF) as f64 + 0.5) as i64;
/// Largest raw input smoothed (2^31 − 1: far outside the envelope already).
const RAW_MAX: u32 = i32::MAX as u32;

/// Everything the tracker needs besides the estimator, fixed-point form (see
/// [`TrackConfig`] for meanings and limits).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrackConfigFx {
    /// Time constant of the pressure smoothing.
    pub smoothing_pressure: Millis,
    /// Time constant of the temperature smoothing.
    pub smoothing_temperature: Millis,
    /// Length of a rate block (divides one hour).
    pub block: Millis,
    /// A longer time between usable samples restarts the windows.
    pub max_gap: Millis,
    /// Time to empty counts down to this fill fraction.
    pub reserve_fraction: fx::Fraction,
    /// Time constant of thermal settling.
    pub settle_time_constant: Millis,
    /// Block-to-block change of the fill fraction that marks a fast fill or draw.
    pub settle_step: fx::SmallFraction,
    /// Settled when the predicted drift left is below this fraction.
    pub settle_tolerance: fx::SmallFraction,
    /// How losses are judged.
    pub leak_mode: LeakMode,
    /// In use: the expected draw, kg/h (`None`: learned).
    pub declared_draw_kg_h: Option<fx::MassRate>,
    /// Leak above this fraction of the content per day.
    pub leak_threshold_per_day: fx::SmallFraction,
    /// Declared input uncertainties.
    pub uncertainty: UncertaintyConfigFx,
    /// Alarm thresholds.
    pub limits: LimitsFx,
    /// Alarm debounce times.
    pub debounce: DebounceTable,
}

impl TrackConfigFx {
    /// Converts (rounding to nearest) and validates a float configuration.
    pub fn from_f64(c: &TrackConfig<f64>) -> Result<Self, Error> {
        c.validate()?;
        let declared_draw_kg_h = match c.declared_draw_kg_h {
            Some(d) => Some(fx::from_f64(d, TrackSetting::DeclaredDraw)?),
            None => None,
        };
        let fx = TrackConfigFx {
            smoothing_pressure: c.smoothing_pressure,
            smoothing_temperature: c.smoothing_temperature,
            block: c.block,
            max_gap: c.max_gap,
            reserve_fraction: fx::from_f64(c.reserve_fraction, TrackSetting::ReserveFraction)?,
            settle_time_constant: c.settle_time_constant,
            settle_step: fx::from_f64(c.settle_step, TrackSetting::SettleStep)?,
            settle_tolerance: fx::from_f64(c.settle_tolerance, TrackSetting::SettleTolerance)?,
            leak_mode: c.leak_mode,
            declared_draw_kg_h,
            leak_threshold_per_day: fx::from_f64(
                c.leak_threshold_per_day,
                TrackSetting::LeakThreshold,
            )?,
            uncertainty: UncertaintyConfigFx::from_f64(&c.uncertainty)?,
            limits: LimitsFx::from_f64(&c.limits)?,
            debounce: c.debounce,
        };
        fx.validate()?;
        Ok(fx)
    }

    /// The exact float equivalent.
    pub fn to_real<F: crate::Real>(&self) -> TrackConfig<F> {
        TrackConfig {
            smoothing_pressure: self.smoothing_pressure,
            smoothing_temperature: self.smoothing_temperature,
            block: self.block,
            max_gap: self.max_gap,
            reserve_fraction: F::lit(fx::to_f64(self.reserve_fraction)),
            settle_time_constant: self.settle_time_constant,
            settle_step: F::lit(fx::to_f64(self.settle_step)),
            settle_tolerance: F::lit(fx::to_f64(self.settle_tolerance)),
            leak_mode: self.leak_mode,
            declared_draw_kg_h: self.declared_draw_kg_h.map(|d| F::lit(fx::to_f64(d))),
            leak_threshold_per_day: F::lit(fx::to_f64(self.leak_threshold_per_day)),
            uncertainty: self.uncertainty.to_real(),
            limits: self.limits.to_real(),
            debounce: self.debounce,
        }
    }

    /// Checks every field against its accepted range (integer comparisons).
    pub fn validate(&self) -> Result<(), Error> {
        validate_timing(
            self.block,
            self.max_gap,
            [self.smoothing_pressure, self.smoothing_temperature],
            self.settle_time_constant,
        )?;
        if self.reserve_fraction > fx::Fraction::ONE {
            return Err(Error::OutOfRange(TrackSetting::ReserveFraction.into()));
        }
        let half = fx::SmallFraction::from_bits(1 << 31);
        for (v, what) in [
            (self.settle_step, TrackSetting::SettleStep),
            (self.settle_tolerance, TrackSetting::SettleTolerance),
            (self.leak_threshold_per_day, TrackSetting::LeakThreshold),
        ] {
            if v > half {
                return Err(Error::OutOfRange(what.into()));
            }
        }
        if let Some(d) = self.declared_draw_kg_h
            && (d < fx::MassRate::ZERO || d > fx::MassRate::from_bits(1_000_000 << 32))
        {
            return Err(Error::OutOfRange(TrackSetting::DeclaredDraw.into()));
        }
        self.uncertainty.validate()?;
        self.limits.validate()
    }

    /// The defaults of [`TrackConfig::for_tank`], computed in integers (on a
    /// device without stored tracking settings): smoothing 4 s, 60 s blocks,
    /// gaps over 5 min restart, reserve 5 %, settling τ = 30 min with a step
    /// of 0.5 % and a tolerance of 0.2 %, standby leak threshold 0.1 % per
    /// day, limits from [`LimitsFx::for_tank`], default debounce.
    pub fn for_tank(tank: &crate::TankFx, uncertainty: UncertaintyConfigFx) -> TrackConfigFx {
        TrackConfigFx {
            smoothing_pressure: Millis::from_secs(4),
            smoothing_temperature: Millis::from_secs(4),
            block: Millis::from_secs(60),
            max_gap: Millis::from_secs(300),
            // Fraction / SmallFraction bits of 0.05, 0.005, 0.002, 0.001.
            reserve_fraction: fx::Fraction::from_bits(214_748_365),
            settle_time_constant: Millis::from_secs(1800),
            settle_step: fx::SmallFraction::from_bits(21_474_836),
            settle_tolerance: fx::SmallFraction::from_bits(8_589_935),
            leak_mode: LeakMode::Standby,
            declared_draw_kg_h: None,
            leak_threshold_per_day: fx::SmallFraction::from_bits(4_294_967),
            uncertainty,
            limits: LimitsFx::for_tank(tank),
            debounce: DebounceTable::default(),
        }
    }
}

/// Consumption rate from the compensated content, fixed-point form (see
/// [`super::float::Rate`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RateFx {
    /// Consumption, kg/h (positive: gas leaving the tank).
    pub kg_h: fx::MassRate,
    /// Consumption, standard m³/h.
    pub standard_m3_h: fx::VolumeRate,
    /// Expanded uncertainty of the rate (k = 2), kg/h.
    pub u_kg_h: fx::MassRate,
    /// 1 − U/|rate|, 0 … 1.
    pub confidence: fx::Fraction,
    /// Blocks in the fit.
    pub blocks: u32,
    /// The window holds a steady draw (false: no time to empty).
    pub steady: bool,
}

/// Thermal settling state and prediction, fixed-point form.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SettlingFx {
    /// A fast fill or draw happened and the gas has not settled yet.
    pub not_settled: bool,
    /// Predicted settled values, once the settling window is full.
    pub predicted: Option<SettledPredictionFx>,
}

/// What the gauge will read once the gas has settled (fixed-point form).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SettledPredictionFx {
    /// Predicted settled pressure at the present temperature, absolute.
    pub pressure_pa: fx::Pressure,
    /// Predicted settled mass.
    pub mass_kg: fx::Mass,
    /// Predicted settled fill fraction.
    pub fill_fraction: fx::Fraction,
}

/// The leak detector's latest verdict (fixed-point form).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LeakFx {
    /// Loss over the last day, fraction of the content per day.
    pub loss_per_day: fx::FractionRate,
    /// Loss beyond the expected draw, fraction of the content per day.
    pub excess_per_day: fx::FractionRate,
    /// The expected draw it was judged against, kg/h.
    pub expected_draw_kg_h: fx::MassRate,
    /// The excess loss exceeds the threshold.
    pub leaking: bool,
}

/// Everything the tracker reports for one sample (fixed-point form; see
/// [`super::float::Track`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TrackFx {
    /// The sample's time.
    pub at: Instant,
    /// The content estimate on the despiked, smoothed sample.
    pub content: Option<Content>,
    /// Expanded uncertainty (k = 2) of mass and fill fraction.
    pub uncertainty: Option<UncertaintyFx>,
    /// Consumption rate.
    pub rate: Option<RateFx>,
    /// Time to empty.
    pub time_to_empty: Option<TimeToEmpty>,
    /// Why there is none (`None` while one is given).
    pub time_to_empty_withheld: Option<NoTimeToEmpty>,
    /// Thermal settling.
    pub settling: SettlingFx,
    /// Leak detector verdict.
    pub leak: Option<LeakFx>,
    /// The pressure the rated content develops at the present temperature.
    pub rated_pressure_now_pa: Option<fx::Pressure>,
    /// Alarm raises and clears at this sample.
    pub events: Events,
    /// Content flags, the sample's sensor flags and the active alarms.
    pub status: Status,
}

impl TrackFx {
    /// The outputs before any sample: no content, nothing derived from it,
    /// no events, no flags.
    pub const EMPTY: TrackFx = TrackFx {
        at: Instant(0),
        content: None,
        uncertainty: None,
        rate: None,
        time_to_empty: None,
        time_to_empty_withheld: Some(NoTimeToEmpty::NoContent),
        settling: SettlingFx {
            not_settled: false,
            predicted: None,
        },
        leak: None,
        rated_pressure_now_pa: None,
        events: Events {
            raised: AlarmSet::EMPTY,
            cleared: AlarmSet::EMPTY,
            at: Instant(0),
        },
        status: Status::OK,
    };
}

/// One least-squares line through equally spaced block means (Q36).
#[derive(Clone, Copy, Debug)]
struct Fit {
    mean: i64,
    /// Per block.
    slope: i64,
    /// Standard error of the slope, per block, corrected for the lag-1
    /// autocorrelation of the residuals.
    se: i64,
}

/// Level, slope and curvature of the block temperatures over a window.
#[derive(Clone, Copy, Debug)]
struct TemperatureFit {
    /// Mean, K, Q23.
    mean: u32,
    /// dT/dt at the rate window's centre, K/h, Q32.
    slope_per_h: i64,
    /// d²T/dt², K/h², Q32.
    curvature_per_h2: i64,
}

/// A block close whose steps are still to run (see [`super`], "A close
/// spread over the samples that follow it").
#[derive(Clone, Copy, Debug)]
struct Close {
    /// The next step.
    step: CloseStep,
    /// The block's end and mean (Q28).
    end: Instant,
    mean: u32,
    /// The estimate at the close (with its model slopes from `Terms` on).
    content: Content,
    /// Its sensitivities and terms (from `Terms` on).
    terms: Option<Terms>,
    /// The rate window's length and line (from `RateFit` on; `None`: too
    /// few blocks for a rate) …
    fit: Option<(usize, Fit)>,
    /// … the block temperatures' parabola (from `TemperatureFit` on) …
    temperature: Option<TemperatureFit>,
    /// … and the rate budget (from `Budget` on).
    budget: Option<RateBudgetFx>,
}

/// The tracker: all state of the pipeline for one tank (fixed-point form).
#[derive(Clone, Debug)]
pub struct Tracker<M> {
    est: Estimator<M>,
    cfg: TrackConfigFx,
    unc: EvaluatorFx,
    alarms: Alarms,
    /// Rated mass per unit fraction; rated standard volume per unit fraction.
    rated_mass: Coef,
    rated_volume: Coef,
    /// Rated mass / (24 × 24): kg/h per unit of the ×24 daily loss.
    draw_kg_h: Coef,
    /// Declared draw, Q28 fraction per day × 24.
    declared24: Option<i64>,
    /// The verdict's margin for the gauge's scale against the declared
    /// draw, Q28 × 24 ([`DRAW_MARGIN`](super::DRAW_MARGIN)·u_s·draw; 0
    /// without a declared draw).
    declared_margin24: i64,
    blocks_per_hour: u32,
    tau_blocks: Coef,
    // Despike and smoothing.
    last_at: Option<Instant>,
    p_hist: [u32; 2],
    t_hist: [u32; 2],
    hist_len: u8,
    p_smooth: i64,
    t_smooth: i64,
    alpha_dt: Millis,
    alpha_p: i64,
    alpha_t: i64,
    // Blocks.
    block_start: Instant,
    block_sum: u64,
    block_n: u32,
    ring: [u32; RATE_WINDOW],
    ring_len: usize,
    /// Smoothed temperature at each block's close, K, Q23 (the last
    /// `ring_len` beside `ring`, and up to as many before), and how many.
    t_ring: [u32; TEMPERATURE_WINDOW],
    t_len: usize,
    prev_block: Option<u32>,
    /// The last close while its steps run.
    close: Option<Close>,
    // Leak.
    hour_sum: u64,
    hour_blocks: u32,
    day_ring: [u32; LEAK_RING],
    /// The block temperature at each hour's close beside `day_ring`, K in
    /// Q7 (1/128 K, below 512 K); for a slow vessel the hour's mean content
    /// hidden by the sensor's lead on the gas (see [`LEAD_Q`](super::LEAD_Q)).
    day_t: [u16; LEAK_RING],
    /// The leak margin's lag factor, 3·u_τ/23 h in Q16 (u_τ the temperature
    /// lag uncertainty; below 2^16 for any accepted one).
    lag_q16: u64,
    /// A vessel slower than [`VESSEL_LAG_FROM_MS`] (see super, "Weather"):
    /// the gas temperature followed from the sensor's (Q23; 0: none yet, no
    /// valid estimate is at 0 K) and the hour's sum of the content the
    /// sensor's lead on the gas hides (Q28).
    t_gas: i64,
    hour_lead: i64,
    day_len: usize,
    learned24: Option<i64>,
    // Draw episodes: one is going on, its blocks, and until when the leak
    // ring stays empty after the last one.
    episode: bool,
    episode_blocks: u32,
    leak_hold_until: Instant,
    /// The rate of the last block, fraction of the rated content per hour, Q36.
    rate_per_h: Option<i64>,
    /// The gas–sensor term of the content's budget (standard uncertainty,
    /// fraction of the rated content, Q36) from the last rate window, and
    /// whether it outweighs the rest of the budget (`not_settled`).
    gas_sensor: u64,
    gas_draw: u64,
    gas_transient: bool,
    /// How long the rate window has held a steady draw, ms.
    steady_ms: u64,
    // Settling.
    settle_active: bool,
    settle_blocks: usize,
    settle_since: Instant,
    /// The latest outputs, kept in the form they are handed out in: a
    /// sample updates them in place and returns a reference (no copy of
    /// the whole record per sample). The time to empty in it is set with
    /// the reason there is none …
    out: TrackFx,
    /// … (meaningful while `out.time_to_empty` is `None`), both by
    /// `set_tte`.
    tte_why: NoTimeToEmpty,
    predicted: Option<SettledPredictionFx>,
}

impl<M: CompressibilityFx> Tracker<M> {
    /// A tracker for the tank of `est`, with no history. All divisions of
    /// the configuration happen here.
    // A device has one caller (the pipeline's preparation): inlined there,
    // the image is 152 bytes smaller.
    #[cfg_attr(target_arch = "arm", inline(always))]
    pub fn new(est: Estimator<M>, cfg: TrackConfigFx) -> Result<Self, Error> {
        cfg.validate()?;
        let unc = EvaluatorFx::new(
            UncertaintyConfigFx {
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
        let rated = est.estimate(tank.rated_pressure_pa, tank.rated_temperature_k);
        let rated_mass = Coef::from_raw(est.rated_mass_kg().to_bits(), 40);
        let inv_rated_mass = rated_mass
            .recip()
            .ok_or(Error::ModelUnusable(Condition::RatedCondition))?;
        // Rated standard volume = rated mass × (standard volume / mass).
        let v_per_kg = Coef::from_raw(rated.standard_volume_m3.to_bits(), 40).mul(
            Coef::from_raw(rated.mass_kg.to_bits(), 40)
                .recip()
                .ok_or(Error::ModelUnusable(Condition::RatedCondition))?,
        );
        let blocks_per_hour = HOUR_MS
            .checked_div(cfg.block.0)
            .ok_or(Error::OutOfRange(TrackSetting::TrackingBlock.into()))?
            as u32;
        let declared24 = match cfg.declared_draw_kg_h {
            Some(d) => {
                // kg/h × 24 h / rated mass = fraction per day; × 24 for the
                // ×24 daily sums; in Q28.
                let c = Coef::from_raw(d.to_bits().max(0) as u64, 32)
                    .mul(Coef::from_raw(24 * 24, 0))
                    .mul(inv_rated_mass);
                let (v, _) = c.scale(1, 0, Q);
                Some(v.min(i64::MAX as u64) as i64)
            }
            None => None,
        };
        let q16 = |v: fixed::types::U0F32| (v.to_bits() as u64 + (1 << 15)) >> 16;
        let u = &cfg.uncertainty;
        let u_scale = super::scale_uncertainty_q16(
            q16(u.capacity),
            q16(u.pressure_reading),
            q16(u.model),
            u.temperature_k.to_bits() as u64,
            tank.rated_temperature_k.to_bits() as u64,
        );
        let declared_margin24 = declared24.map_or(0, |d| {
            ((d.max(0) as u64).saturating_mul(super::DRAW_MARGIN * u_scale) >> 16)
                .min(i64::MAX as u64) as i64
        });
        Ok(Tracker {
            unc,
            alarms: Alarms::new(cfg.debounce),
            rated_mass,
            rated_volume: rated_mass.mul(v_per_kg),
            draw_kg_h: rated_mass.mul(PER_576),
            declared24,
            declared_margin24,
            blocks_per_hour,
            tau_blocks: Coef::from_raw(cfg.settle_time_constant.0, 0).mul(
                Coef::from_raw(cfg.block.0, 0)
                    .recip()
                    .ok_or(Error::OutOfRange(TrackSetting::Block.into()))?,
            ),
            last_at: None,
            p_hist: [0; 2],
            t_hist: [0; 2],
            hist_len: 0,
            p_smooth: 0,
            t_smooth: 0,
            alpha_dt: Millis(0),
            alpha_p: 1 << SMOOTH_FRAC,
            alpha_t: 1 << SMOOTH_FRAC,
            block_start: Instant(0),
            block_sum: 0,
            block_n: 0,
            ring: [0; RATE_WINDOW],
            t_ring: [0; TEMPERATURE_WINDOW],
            t_len: 0,
            ring_len: 0,
            prev_block: None,
            close: None,
            hour_sum: 0,
            hour_blocks: 0,
            day_ring: [0; LEAK_RING],
            day_t: [0; LEAK_RING],
            lag_q16: ((LAG_MARGIN
                * effective_lag(
                    cfg.uncertainty.temperature_lag,
                    cfg.smoothing_pressure,
                    cfg.smoothing_temperature,
                )
                .0)
                << 16)
                / (HOUR_MS * (DAY_HOURS as u64 - 1)),
            t_gas: 0,
            hour_lead: 0,
            day_len: 0,
            learned24: None,
            episode: false,
            episode_blocks: 0,
            leak_hold_until: Instant(0),
            rate_per_h: None,
            gas_sensor: 0,
            gas_draw: 0,
            gas_transient: false,
            steady_ms: 0,
            settle_active: false,
            settle_blocks: 0,
            settle_since: Instant(0),
            out: TrackFx::EMPTY,
            tte_why: NoTimeToEmpty::Learning,
            predicted: None,
            est,
            cfg,
        })
    }

    /// The content estimator.
    pub fn estimator(&self) -> &Estimator<M> {
        &self.est
    }

    /// The configuration.
    pub fn config(&self) -> &TrackConfigFx {
        &self.cfg
    }

    /// The standard volume of the rated content (saturating).
    pub fn rated_standard_volume(&self) -> fx::Volume {
        fx::Volume::from_bits(self.rated_volume.scale(1, 0, 40).0)
    }

    /// The latest content estimate (on the smoothed sample).
    pub fn latest_content(&self) -> Option<Content> {
        self.out.content
    }

    /// Clears every active alarm at `at` (see
    /// [`Alarms::clear_all`](crate::alarm::Alarms::clear_all)); returns the
    /// cleared events.
    pub fn clear_alarms(&mut self, at: Instant) -> Events {
        self.alarms.clear_all(at)
    }

    /// Forgets the learned draw (in-use leak mode learns it again).
    pub fn relearn_draw(&mut self) {
        self.learned24 = None;
    }

    /// The expected draw learned in use, kg/h.
    pub fn learned_draw_kg_h(&self) -> Option<fx::MassRate> {
        self.learned24
            .map(|d| fx::MassRate::from_bits(coef_mul(self.draw_kg_h, d, Q, 32)))
    }

    /// Takes one sample: absolute pressure and temperature from the sensor
    /// front end, the front end's flags for this sample (only
    /// [`Status::SENSOR_RANGE`] bits are looked at) and the sample's time.
    /// Returns the outputs, updated in place (see [`Tracker::output`]).
    /// Never fails.
    pub fn update(
        &mut self,
        at: Instant,
        pressure: fx::Pressure,
        temperature: fx::Temperature,
        sensor: Status,
    ) -> &TrackFx {
        probe::enter(Stage::Track);
        self.close_step();
        let sensor = sensor & Status::SENSOR_RANGE;
        let fault = !sensor.is_ok();
        if !fault {
            self.check_gap(at);
            let raw = (
                pressure.to_bits().min(RAW_MAX),
                temperature.to_bits().min(RAW_MAX),
            );
            let (p, t) = self.despike(raw.0, raw.1);
            let (p, t) = self.smooth(at, p, t);
            let content = self
                .est
                .estimate(fx::Pressure::from_bits(p), fx::Temperature::from_bits(t));
            probe::enter(Stage::Track);
            self.out.content = Some(content);
            self.close_blocks(at, &content);
            if !content.status.intersects(Status::CONTENT_INVALID) {
                let bits = content.fill_fraction.to_bits();
                let q = ((bits >> (32 - Q)) + ((bits >> (31 - Q)) & 1)).min(u32::MAX as u64);
                self.block_sum += q;
                self.block_n += 1;
                // Settling from the first sample of a fast change.
                if let Some(prev) = self.prev_block {
                    self.fast_sample(at, prev, q as u32, raw, (p, t));
                }
            }
            self.last_at = Some(at);
        } else {
            self.withdraw_if_stale(at);
        }

        probe::enter(Stage::Alarms);
        let level = self.out.content.map(|c| LevelInputs {
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
            leak: self.out.leak.is_some_and(|l| l.leaking),
            not_settled: self.not_settled(),
        });
        self.out.events = self.alarms.update(at, raise, clear);
        let content_status = self.out.content.map_or(Status::OK, |c| c.status);
        self.out.at = at;
        self.out.time_to_empty_withheld = self.tte_withheld();
        self.out.settling = SettlingFx {
            not_settled: self.not_settled(),
            predicted: if self.settle_active {
                self.predicted
            } else {
                None
            },
        };
        self.out.status = content_status | sensor | self.alarms.active().status();
        &self.out
    }

    /// The outputs of the latest sample ([`TrackFx::EMPTY`] before the
    /// first).
    pub fn output(&self) -> &TrackFx {
        &self.out
    }

    /// At a flagged sample: once the last usable one is older than
    /// `max_gap`, the content and what rests on it are withdrawn (see
    /// [`super`]; a usable sample restarts the windows).
    fn withdraw_if_stale(&mut self, at: Instant) {
        if self.last_at.is_some_and(|l| at.since(l) > self.cfg.max_gap) {
            self.finish_close();
            self.out.content = None;
            self.out.uncertainty = None;
            self.out.rate = None;
            self.rate_per_h = None;
            self.set_tte(Err(NoTimeToEmpty::NoContent));
            self.predicted = None;
            self.gas_sensor = 0;
            self.gas_draw = 0;
            self.gas_transient = false;
        }
    }

    /// Not settled: after a fast fill or draw, or while the gas–sensor
    /// temperature difference outweighs the rest of the content's budget.
    fn not_settled(&self) -> bool {
        self.settle_active || self.gas_transient
    }

    /// Why no time to empty is given, `None` while one is.
    fn tte_withheld(&self) -> Option<NoTimeToEmpty> {
        match (&self.out.content, &self.out.time_to_empty) {
            (None, _) => Some(NoTimeToEmpty::NoContent),
            (Some(_), Some(_)) => None,
            (Some(_), None) => Some(self.tte_why),
        }
    }

    /// Sets the time to empty, or why there is none.
    fn set_tte(&mut self, tte: Result<TimeToEmpty, NoTimeToEmpty>) {
        match tte {
            Ok(t) => self.out.time_to_empty = Some(t),
            Err(why) => {
                self.out.time_to_empty = None;
                self.tte_why = why;
            }
        }
    }

    /// The time to empty the low-content alarm may use (confidence ≥ 0.5).
    fn tte_for_alarm(&self) -> Option<Millis> {
        match (self.out.rate, self.out.time_to_empty) {
            (Some(r), Some(t)) if r.confidence >= fx::Fraction::from_bits(1 << 31) => {
                Some(t.expected)
            }
            _ => None,
        }
    }

    /// Restarts the windows after a gap longer than `max_gap` or when time
    /// runs backwards (the previous block mean is kept).
    fn check_gap(&mut self, at: Instant) {
        let restart = match self.last_at {
            None => true,
            Some(last) => at < last || at.since(last) > self.cfg.max_gap,
        };
        if restart {
            self.finish_close();
            self.hist_len = 0;
            self.block_start = at;
            self.block_sum = 0;
            self.block_n = 0;
            self.ring_len = 0;
            self.t_len = 0;
            self.t_gas = 0;
            self.out.rate = None;
            self.set_tte(Err(NoTimeToEmpty::Learning));
            self.reset_leak();
            self.last_at = None;
        }
    }

    /// Median of the last three readings per channel (raw bits).
    fn despike(&mut self, p: u32, t: u32) -> (u32, u32) {
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

    /// First-order low-pass per channel with α = Δt/(τ + Δt) in Q16.
    fn smooth(&mut self, at: Instant, p: u32, t: u32) -> (u32, u32) {
        match self.last_at {
            None => {
                self.p_smooth = (p as i64) << SMOOTH_FRAC;
                self.t_smooth = (t as i64) << SMOOTH_FRAC;
            }
            Some(last) => {
                let dt = at.since(last);
                if dt.0 > 0 {
                    if dt != self.alpha_dt {
                        // Two 64/32 divisions, only when the interval changes.
                        self.alpha_dt = dt;
                        self.alpha_p = alpha_q16(dt, self.cfg.smoothing_pressure);
                        self.alpha_t = alpha_q16(dt, self.cfg.smoothing_temperature);
                    }
                    // |x − y| < 2^47, α ≤ 2^16: the product fits in i64.
                    let step = |y: &mut i64, x: u32, a: i64| {
                        let d = ((x as i64) << SMOOTH_FRAC) - *y;
                        *y += fx::shr_round_i64(d * a, SMOOTH_FRAC);
                    };
                    step(&mut self.p_smooth, p, self.alpha_p);
                    step(&mut self.t_smooth, t, self.alpha_t);
                }
            }
        }
        let out = |y: i64| fx::shr_round_i64(y, SMOOTH_FRAC).clamp(0, RAW_MAX as i64) as u32;
        (out(self.p_smooth), out(self.t_smooth))
    }

    /// Closes the current block when `at` lies past its end.
    fn close_blocks(&mut self, at: Instant, content: &Content) {
        let end = self.block_start + self.cfg.block;
        if at < end {
            return;
        }
        if self.block_n > 0 {
            // One 64/32 division per block.
            let n = self.block_n as u64;
            let mean = ((self.block_sum + n / 2) / n).min(u32::MAX as u64) as u32;
            let spread = self
                .last_at
                .is_some_and(|l| super::spread(at.since(l), self.cfg.block));
            self.block(end, mean, content, spread);
        }
        self.block_start = end;
        if at >= self.block_start + self.cfg.block {
            self.block_start = at;
        }
        self.block_sum = 0;
        self.block_n = 0;
    }

    /// Settling from one sample: the fill fraction the sample's own reading
    /// implies, F·(p_raw/p)·(T/T_raw) (F, Q28, at the smoothed pressure p
    /// and temperature T; the gas-law scaling from the smoothed to the raw
    /// reading), differs from the previous block mean `prev` (Q28) by more
    /// than `settle_step`. The raw reading (`raw`, before despiking and
    /// smoothing) sees a fast fill or draw from its first sample; a change
    /// of temperature at constant content moves p and T together and
    /// cancels. Without a division:
    /// |F·p_raw·T − prev·p·T_raw| > step·p·T_raw, the pressure products
    /// brought below 2^32 by one common shift before the temperatures
    /// multiply them.
    fn fast_sample(&mut self, at: Instant, prev: u32, f: u32, raw: (u32, u32), smooth: (u32, u32)) {
        let ((p_raw, t_raw), (p, t)) = (raw, smooth);
        if p == 0 || t_raw == 0 {
            return;
        }
        let x = fx::mul_u32(f, p_raw);
        let y = fx::mul_u32(prev, p);
        // step (Q32) · p → Q28 · p.
        let z = fx::mul_u32(self.cfg.settle_step.to_bits(), p) >> (32 - Q);
        let s = (64 - x.max(y).max(z).leading_zeros()).saturating_sub(32);
        let low = |v: u64| (v >> s) as u32;
        let now = fx::mul_u32(low(x), t);
        let before = fx::mul_u32(low(y), t_raw);
        let limit = fx::mul_u32(low(z), t_raw);
        if now.abs_diff(before) > limit {
            self.unsettled(at, now > before);
        }
    }

    /// Settling from a block: its mean `value` (Q28) differs from the
    /// previous block mean `prev` by more than `settle_step`. Returns whether
    /// it did.
    fn fast_change(&mut self, at: Instant, prev: u32, value: u32) -> bool {
        let step = value as i64 - prev as i64;
        // |step| in Q28 against the threshold in Q32.
        if (step.unsigned_abs() << (32 - Q)) <= self.cfg.settle_step.to_bits() as u64 {
            return false;
        }
        self.unsettled(at, step > 0);
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
            self.ring_len = 0;
            self.t_len = 0;
            self.out.rate = None;
            self.set_tte(Err(NoTimeToEmpty::Learning));
        }
    }

    /// Everything that happens once per block: the bookkeeping now, the
    /// rest as [`CloseStep`]s over the following samples when `spread`, at
    /// once otherwise (a close still running is finished first).
    fn block(&mut self, end: Instant, mean: u32, content: &Content, spread: bool) {
        self.finish_close();
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
            // Q32 (raw U16F16 bits + 16) → Q23; below 512 K for any valid
            // estimate.
            let t = fx::shr_round_i64(self.t_smooth, 16 + 16 - QT_MEAN);
            *last = t.clamp(0, u32::MAX as i64) as u32;
        }
        // block/τ_v (Q16) for a slow vessel.
        if let Some(gain_full) = (self.cfg.block.0.min(1 << 40) << 16).checked_div(self.vessel_ms())
        {
            // The gas follows the sensor's temperature through its time
            // constant τ_v·F (first order, one step a block; the gas's heat
            // capacity goes with its amount).
            let t = self.t_ring.last().copied().unwrap_or(0) as i64;
            let f = (mean as u64).clamp(1, 1 << Q);
            let gain =
                ((gain_full.min(1 << 16) << Q).checked_div(f).unwrap_or(0)).min(1 << 16) as i64;
            let g = self.t_gas;
            self.t_gas = if g == 0 {
                t
            } else {
                g + fx::shr_round_i64((t - g) * gain, 16)
            };
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

    /// Runs the next step of the close in progress, if any. The steps
    /// work on the close in place (no copy of it per step).
    fn close_step(&mut self) {
        let Some(step) = self.close.as_ref().map(|c| c.step) else {
            return;
        };
        match step {
            CloseStep::Terms => {
                if let Some(c) = &mut self.close {
                    // The model's slopes, for the sensitivities of both
                    // budgets; its sensitivities and terms, once for both.
                    c.content = self.est.with_slopes(&c.content);
                    c.terms = Some(self.unc.terms(&c.content));
                }
            }
            CloseStep::RateFit => {
                let n = self.ring_len.min(RATE_WINDOW);
                let fit = if n < RATE_MIN_BLOCKS {
                    self.out.rate = None;
                    self.rate_per_h = None;
                    self.set_tte(Err(NoTimeToEmpty::Learning));
                    self.gas_sensor = 0;
                    self.gas_draw = 0;
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
                    probe::enter(Stage::Uncertainty);
                    let (u, transient) =
                        self.unc
                            .evaluate_with(terms, self.gas_sensor, self.gas_draw);
                    self.out.uncertainty = Some(u);
                    self.gas_transient = transient;
                    probe::enter(Stage::Track);
                }
            }
            CloseStep::Reference => {
                if let Some(t) = self.close.as_ref().map(|c| c.content.temperature_k) {
                    // Started from the last block's answer (the temperature
                    // moves little between blocks): one or two Newton steps
                    // instead of up to five.
                    let from = self.out.rated_pressure_now_pa;
                    let (p, _) = self.est.pressure_at_from(fx::Fraction::ONE, t, from);
                    self.out.rated_pressure_now_pa = Some(p);
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
    fn window_kept(&self) -> Option<(usize, Fit, TemperatureFit)> {
        let c = self.close.as_ref()?;
        let ((n, fit), temperature) = (c.fit?, c.temperature?);
        (self.ring_len == n).then_some((n, fit, temperature))
    }

    /// The standard uncertainties of the rate and of the content the time
    /// to empty counts down from (crate::uncertainty).
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
        let bph = self.blocks_per_hour as i64;
        let budget = self.unc.rate(
            content,
            terms,
            &RateWindowFx {
                slope_per_h: fit.slope * bph,
                u_fit_per_h: (fit.se * bph).unsigned_abs(),
                fill_fraction: fit.mean,
                temperature: temp.mean,
                dt_per_h: temp.slope_per_h,
                d2t_per_h2: temp.curvature_per_h2,
                left_fraction: self.left_fraction(&fit, n),
                reserve_fraction: self.reserve_q36(),
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

    /// The reserve fraction, Q36.
    fn reserve_q36(&self) -> i64 {
        (self.cfg.reserve_fraction.to_bits() << (QF - 32)) as i64
    }

    /// The fill fraction above the reserve (Q36) at the end of an `n`-block
    /// window: the fitted value there, mean + slope·(n − 1)/2, less the
    /// reserve.
    fn left_fraction(&self, fit: &Fit, n: usize) -> i64 {
        fit.mean + fx::shr_round_i64(fit.slope * (n as i64 - 1), 1) - self.reserve_q36()
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
        let bph = self.blocks_per_hour as i64;
        let per_h = -fit.slope * bph;
        self.rate_per_h = Some(per_h);
        let left = self.left_fraction(&fit, n);
        let u_per_h = budget.rate_per_h.saturating_mul(2).min(i64::MAX as u64) as i64;
        let confidence = if per_h != 0 {
            let mag = per_h.unsigned_abs();
            let u = u_per_h.unsigned_abs();
            if u >= mag {
                0
            } else {
                (1u64 << 32) - ratio_q32(u, mag)
            }
        } else {
            0
        };
        let kg_h = coef_mul(self.rated_mass, per_h, QF, 32);
        // A steady draw? The newest SETTLE_WINDOW blocks' slope against the
        // window's (see super), per hour in Q36.
        let steady = n < 2 * SETTLE_WINDOW || {
            // |short − long|·bph ≤ long·bph/8 + floor with short =
            // 6·Σ(2i − 7)·y·2^8/504 (the slope of the newest 8 blocks, Q36
            // per block; see `fit`), multiplied through by 504: no division.
            // Σ < 2^35, × 6 · 2^8 < 2^46; long·504 < 2^46; × bph < 2^58.
            let k = SETTLE_WINDOW as i64;
            let den = k * (k * k - 1);
            let [sum, sxy, _] = moments(
                self.ring
                    .iter()
                    .skip(RATE_WINDOW - SETTLE_WINDOW)
                    .map(|&y| y as i64),
            );
            let sxy2 = 2 * sxy - (k - 1) * sum;
            let short504 = (sxy2 * 6) << (QF - Q);
            let diff = (short504 - fit.slope * den)
                .saturating_mul(bph)
                .saturating_abs();
            let allowed = (fit.slope.saturating_abs() * bph / STEADY_SHARE_DIVISOR as i64
                + STEADY_FLOOR_Q36)
                .saturating_mul(den);
            diff <= allowed
        };
        self.out.rate = Some(RateFx {
            kg_h: fx::MassRate::from_bits(kg_h),
            standard_m3_h: fx::VolumeRate::from_bits(coef_mul(self.rated_volume, per_h, QF, 32)),
            u_kg_h: fx::MassRate::from_bits(coef_mul(self.rated_mass, u_per_h, QF, 32)),
            confidence: fx::Fraction::from_bits(confidence),
            blocks: n as u32,
            steady,
        });
        // The draw's cooling settles with τ_v·F (see the float form):
        // (≤ 2 × 24 h in ms < 2^28) × (F ≤ 2^36) < 2^64.
        self.steady_ms = if steady {
            self.steady_ms.saturating_add(self.cfg.block.0)
        } else {
            0
        };
        let f1 = fit.mean.clamp(0, 1 << QF) as u64;
        let need = (STEADY_TIME_CONSTANTS * self.cfg.settle_time_constant.0).saturating_mul(f1);
        let settled_draw = (self.steady_ms as u128) << QF >= need as u128;
        // Not emptying: the content is not falling, or not measurably (the
        // rate within its own expanded uncertainty of zero: an idle vessel's
        // scatter would give times to empty of years).
        let tte = if per_h <= u_per_h {
            Err(NoTimeToEmpty::NotEmptying)
        } else if left <= 0 {
            Err(NoTimeToEmpty::AtReserve)
        } else if !steady {
            Err(NoTimeToEmpty::DrawChanging)
        } else if !settled_draw {
            Err(NoTimeToEmpty::DrawCooling)
        } else {
            // left < 2^41 (Q36, ≤ 16 + margin), × 3.6e6 < 2^63.
            let ms = |rate: i64| {
                Millis(
                    (left.min(1 << 41) * HOUR_MS as i64)
                        .checked_div(rate)
                        .map_or(u64::MAX, |v| v as u64),
                )
            };
            // The bounds: left/(rate ± U) with U the rate spread of the
            // time to empty's own budget (k = 2).
            let u_t = budget
                .time_to_empty_per_h
                .saturating_mul(2)
                .min(i64::MAX as u64) as i64;
            Ok(TimeToEmpty {
                expected: ms(per_h),
                earliest: ms(per_h.saturating_add(u_t)),
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
    fn settle(&mut self, end: Instant, last: u32, temperature: fx::Temperature) {
        if !self.settle_active {
            return;
        }
        let tau = self.cfg.settle_time_constant;
        let mut settled = end.since(self.settle_since).0 >= tau.0 * SETTLE_TIME_CONSTANTS;
        if self.settle_blocks >= SETTLE_WINDOW && self.ring_len >= SETTLE_WINDOW {
            let fit = self.fit(SETTLE_WINDOW);
            let f_inf = (fit.mean + coef_mul(self.tau_blocks, fit.slope, QF, QF)).max(0);
            // Q36 → Q32 fraction.
            let f32 = fx::shr_round_i64(f_inf, QF - 32) as u64;
            let fraction = fx::Fraction::from_bits(f32);
            let (p, _) = self.est.pressure_at(fraction, temperature);
            let (mass, _) =
                self.rated_mass
                    .scale((f_inf >> (QF - Q)).min(u32::MAX as i64) as u32, Q, 40);
            self.predicted = Some(SettledPredictionFx {
                pressure_pa: p,
                mass_kg: fx::Mass::from_bits(mass),
                fill_fraction: fraction,
            });
            let drift = (f_inf - ((last as i64) << (QF - Q))).unsigned_abs();
            settled |= drift < (self.cfg.settle_tolerance.to_bits() as u64) << (QF - 32);
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
        let mut start = EPISODE_Q36;
        if let Some(d24) = self.expected24() {
            // d24: fraction per day × 24, Q28; per hour × factor in Q36:
            // d24 · 2^8 · factor / 576 (d24 < 2^40).
            let f = (EPISODE_EXPECTED_FACTOR as i64) << (QF - Q);
            start = start.max(d24.saturating_mul(f) / (DAY_HOURS * DAY_HOURS) as i64);
        }
        if !self.episode && per_h > start {
            self.episode = true;
            self.episode_blocks = 0;
        }
        if self.episode {
            self.episode_blocks = self.episode_blocks.saturating_add(1);
            if per_h < start / 2 {
                self.episode = false;
                let hold = self.cfg.settle_time_constant.0 * SETTLE_TIME_CONSTANTS;
                self.leak_hold_until = end + Millis(hold);
            }
        }
    }

    /// The expected draw of the in-use leak mode as a day sum (fraction per
    /// day × 24, Q28; `None`: standby, or not learned yet).
    fn expected24(&self) -> Option<i64> {
        match self.cfg.leak_mode {
            LeakMode::Standby => None,
            LeakMode::InUse => self.declared24.or(self.learned24),
        }
    }

    /// Whether the leak ring is held empty at a block ending at `end` with
    /// mean `mean` (Q28; see [`super`]).
    fn leak_held(&self, end: Instant, mean: u32) -> bool {
        let long = self.cfg.leak_mode == LeakMode::Standby
            && self.episode_blocks >= EPISODE_MAX_HOURS * self.blocks_per_hour;
        self.settle_active
            || (self.episode && !long)
            || end < self.leak_hold_until
            || ((mean as u64) << (32 - Q)) <= self.cfg.reserve_fraction.to_bits()
    }

    /// The gas–wall time constant τ_v, ms, of a vessel slower than
    /// [`VESSEL_LAG_FROM_MS`] (see super, "Weather"); 0 for a quicker one.
    fn vessel_ms(&self) -> u64 {
        let tau = self.cfg.settle_time_constant.0.min(1 << 40);
        if tau > VESSEL_LAG_FROM_MS { tau } else { 0 }
    }

    /// Leak detection: hourly means into the two-day ring.
    fn leak_block(&mut self, end: Instant, mean: u32, pressure: fx::Pressure, fill: fx::Fraction) {
        if self.leak_held(end, mean) {
            self.reset_leak();
            return;
        }
        self.hour_sum += mean as u64;
        if self.t_gas > 0 {
            let g = self.t_gas;
            // The content at the gas's temperature less the content at the
            // sensor's, at the same pressure (Q28 of the rated content).
            let tg = fx::Temperature::from_bits(
                fx::shr_round_i64(g, QT_MEAN - 16).clamp(0, u32::MAX as i64) as u32,
            );
            let gas = self.est.estimate(pressure, tg);
            probe::enter(Stage::Track);
            if !gas.status.intersects(Status::CONTENT_INVALID) {
                let q28 = |f: fx::Fraction| fx::shr_round_i64(f.to_bits() as i64, 32 - Q);
                self.hour_lead = self
                    .hour_lead
                    .saturating_add(q28(gas.fill_fraction) - q28(fill));
            }
        }
        self.hour_blocks += 1;
        if self.hour_blocks < self.blocks_per_hour {
            return;
        }
        let bph = self.blocks_per_hour as u64;
        let hour = (self.hour_sum + bph / 2)
            .checked_div(bph)
            .unwrap_or(0)
            .min(u32::MAX as u64) as u32;
        let lead = self.hour_lead.checked_div(bph as i64).unwrap_or(0);
        self.hour_sum = 0;
        self.hour_lead = 0;
        self.hour_blocks = 0;
        self.day_ring.rotate_left(1);
        if let Some(last) = self.day_ring.last_mut() {
            *last = hour;
        }
        let slow = self.vessel_ms() > 0;
        self.day_t.rotate_left(1);
        if let Some(last) = self.day_t.last_mut() {
            // Q23 → Q7, rounded. For a slow vessel the hour's mean content
            // the sensor's lead hides instead, Q19 offset by LEAD_BIAS
            // (±6.25 % of the rated content, held there).
            *last = if slow {
                (fx::shr_round_i64(lead, Q - LEAD_Q) + LEAD_BIAS).clamp(0, u16::MAX as i64) as u16
            } else {
                let t = self.t_ring.last().copied().unwrap_or(0);
                ((t as u64 + (1 << 15)) >> 16).min(u16::MAX as u64) as u16
            };
        }
        self.day_len = (self.day_len + 1).min(LEAK_RING);
        // Pairs of hours one day apart once the ring holds enough of them:
        // the older k of the ring against the k a day later (24 once the
        // ring is full); before that, from FIRST_MIN_HOURS after a start,
        // the older half of the hours against the newer (see super).
        let Some(w) = window(
            self.day_len,
            self.cfg.leak_mode,
            self.cfg.settle_time_constant,
        ) else {
            return;
        };
        let k = w.len;
        // Sums of the k hours of each side, Q28, as day sums (24 × the
        // means, brought to hours one day apart: exact for whole days, one
        // 64-bit division each otherwise).
        let sum = |from: usize| -> i64 {
            self.day_ring
                .iter()
                .skip(from)
                .take(k)
                .map(|&x| x as i64)
                .sum()
        };
        let (older_k, newer_k) = (sum(w.older), sum(w.newer));
        let per_day = |v: i64| {
            if k == DAY_HOURS {
                v
            } else {
                (v * DAY_HOURS as i64).checked_div(k as i64).unwrap_or(0)
            }
        };
        // A day apart from `apart` hours apart (< 2^42 before the division).
        let a_day = |v: i64| {
            if w.apart == DAY_HOURS {
                v
            } else {
                (v * DAY_HOURS as i64)
                    .checked_div(w.apart as i64)
                    .unwrap_or(0)
            }
        };
        let older = per_day(older_k);
        let loss24 = a_day(per_day(older_k - newer_k));
        let times = |x: u64, q16: u64| (x.saturating_mul(q16) >> 16).min(i64::MAX as u64 >> 5);
        let t = |i: usize| self.day_t.get(i).copied().unwrap_or(0) as i64;
        let mut loss24 = loss24;
        let vessel_ms = self.vessel_ms();
        let margin24 = if vessel_ms > 0 {
            // A slow vessel (see super, "Weather"): the loss corrected by the
            // change between the sides of the content the sensor's lead on
            // the gas hides (Δc, on the day sum); the margin
            // 3·(share + u_τ/τ)·|Δc| (share: the time constant's
            // uncertainty, τ = τ_v·F).
            let side = |from: usize| (0..k).map(|i| t(from + i) - LEAD_BIAS).sum::<i64>();
            let dc = a_day(per_day((side(w.older) - side(w.newer)) << (Q - LEAD_Q)));
            loss24 = loss24.saturating_add(dc);
            // F (Q16, at most 1) and τ = τ_v·F, ms.
            let f = ((older.max(0) as u64 / DAY_HOURS as u64) >> (Q - 16)).min(1 << 16);
            let tau = (vessel_ms.saturating_mul(f) >> 16).max(1);
            // 3·u_τ/τ from 3·u_τ/23 h (`lag_q16`), Q16.
            let lag = (self.lag_q16 * HOUR_MS * (DAY_HOURS as u64 - 1))
                .checked_div(tau)
                .unwrap_or(0);
            let factor = ((LAG_MARGIN * VESSEL_LAG_SHARE_Q8) << 8).saturating_add(lag);
            times(dc.unsigned_abs(), factor) as i64
        } else {
            // The sensor's lag (see super): older · |Δs|/T · 3·u_τ/23 h, Δs
            // over the k hours of each side brought to 23 h, then the lag
            // factor in Q16 (`lag_q16`), brought to sides a day apart.
            let last = k - 1;
            let mut ds = ((t(w.newer + last) - t(w.newer)) - (t(w.older + last) - t(w.older)))
                .unsigned_abs();
            if k < DAY_HOURS {
                ds = (ds * (DAY_HOURS as u64 - 1))
                    .checked_div(k.saturating_sub(1) as u64)
                    .unwrap_or(0);
            }
            // |Δs|/T in Q32 (one 64-bit division, |Δs| < 2^22), older
            // narrowed by 8 bits before it multiplies (< 2^61).
            let ratio = (ds << 32).checked_div(t(w.older + k) as u64).unwrap_or(0);
            let x = ((older.max(0) as u64 >> 8).saturating_mul(ratio)) >> 24;
            a_day(times(x, self.lag_q16) as i64)
        };
        let mut draw_margin24 = 0;
        let expected24 = match self.cfg.leak_mode {
            LeakMode::Standby => 0,
            LeakMode::InUse => match self.declared24 {
                Some(d) => {
                    draw_margin24 = self.declared_margin24;
                    d
                }
                None => match self.learned24 {
                    Some(d) => d,
                    None => {
                        if k == DAY_HOURS {
                            self.learned24 = Some(loss24.max(0));
                        }
                        return;
                    }
                },
            },
        };
        let excess24 = loss24 - expected24;
        // θ·older: U0F32 × Q28 sum → Q28; raised by the early factor (1/256)
        // for fewer than 24 pairs.
        let mut limit =
            ((self.cfg.leak_threshold_per_day.to_bits() as i128 * older as i128) >> 32) as i64;
        if k < DAY_HOURS {
            limit = limit.saturating_mul(w.factor_q8 as i64) >> 8;
        }
        // The first day's floor: FIRST_FLOOR_Q16 of the content between the
        // two halves, as a loss a day.
        limit = limit.saturating_add(a_day((older.max(0) * w.floor_q16 as i64) >> 16));
        let rel = |v: i64| {
            if older > 0 {
                ((v as i128) << 32)
                    .checked_div(older as i128)
                    .unwrap_or(0)
                    .max(i64::MIN as i128)
                    .min(i64::MAX as i128) as i64
            } else {
                0
            }
        };
        self.out.leak = Some(LeakFx {
            loss_per_day: fx::FractionRate::from_bits(rel(loss24)),
            excess_per_day: fx::FractionRate::from_bits(rel(excess24)),
            expected_draw_kg_h: fx::MassRate::from_bits(coef_mul(
                self.draw_kg_h,
                expected24,
                Q,
                32,
            )),
            leaking: excess24 > limit.saturating_add(margin24).saturating_add(draw_margin24),
        });
    }

    /// Empties the leak ring (its verdict goes with it).
    fn reset_leak(&mut self) {
        self.hour_sum = 0;
        self.hour_lead = 0;
        self.hour_blocks = 0;
        self.day_len = 0;
        self.out.leak = None;
    }

    /// Least-squares line through the last `n` block means (Q28 in, Q36 out).
    fn fit(&self, n: usize) -> Fit {
        let ys = self.ring.iter().skip(RATE_WINDOW - n);
        let ni = n as i64;
        let [sum, sxy, _] = moments(ys.clone().map(|&y| y as i64));
        // Mean in Q36: one 64-bit division (sum < 2^37, << 8 < 2^45).
        let mean = ((sum << (QF - Q)) + ni / 2) / ni;
        // Σ (2i − (n − 1))·y = 2·Σ(i − ī)·y, exact (< 2^42).
        let sxy2 = 2 * sxy - (ni - 1) * sum;
        // slope = Σ(i − ī)y / Σ(i − ī)² = 6·sxy2 / (n(n² − 1)), Q36.
        let den = ni * (ni * ni - 1);
        let num = (sxy2 as i128) << (QF - Q);
        let slope = div_round_i128(num * 6, den as i128) as i64;
        // c·slope for c = 2i − (n − 1), stepped by 2·slope (the same values
        // as the products, without a multiply per block).
        let mut c_slope = fx::mul_small(1 - n as i32, slope);
        // Residuals in Q36; the sums of their squares and of products of
        // neighbours in Q72.
        let (ssr, s1, _) = ys.enumerate().fold(
            (0u128, 0i128, None),
            |(ssr, s1, prev): (u128, i128, Option<i64>), (i, &y)| {
                if i > 0 {
                    c_slope += 2 * slope;
                }
                let fitted = mean + fx::shr_round_i64(c_slope, 1);
                let r = ((y as i64) << (QF - Q)) - fitted;
                let s1 = prev.map_or(s1, |q| s1 + fx::mul_i64_wide(q, r));
                (ssr + fx::mul_i64_wide(r, r).unsigned_abs(), s1, Some(r))
            },
        );
        // SE² = SSR/(n − 2) / Σ(i − ī)² = 12·SSR / ((n − 2)·n·(n² − 1)), Q72,
        // × (n − 2)/(n_e − 2) for the autocorrelation (see the float form).
        let se = if n > 2 {
            let d = ((ni - 2) * den) as u128;
            let rho = if ssr > 0 && s1 > 0 {
                // s1 ≤ SSR (Cauchy–Schwarz): ρ in Q32, both narrowed to 64 bits.
                let sh = (128 - ssr.leading_zeros()).saturating_sub(63);
                let (num, den) = ((s1 as u128 >> sh) as u64, (ssr >> sh) as u64);
                ratio_q32(num.min(den), den) as i64
            } else {
                0
            };
            let (up, down) = ((1i64 << 32) + rho, (1i64 << 32) - rho);
            let f_num = (ni - 2) * up;
            let f_den = (ni * down - 2 * up).max(up);
            let se2 = fx::div_u128(
                fx::saturating_mul_u128(fx::div_u128(ssr * 12, d), f_num as u128),
                f_den as u128,
            );
            isqrt(se2.min(u64::MAX as u128) as u64) as i64
        } else {
            0
        };
        Fit { mean, slope, se }
    }

    /// Level, curvature, and slope at the rate window's centre of a parabola
    /// through the last `m` ≥ `n` block temperatures (Q23), per hour, on the
    /// orthogonal polynomials of the float form written with integers:
    /// d = 2i − (m − 1) = 2(i − ī) and
    /// q = 3d² − (m² − 1) = 12((i − ī)² − (m² − 1)/12).
    fn temperature_fit(&self, n: usize, m: usize) -> TemperatureFit {
        // At least one block (a rate window has RATE_MIN_BLOCKS).
        let m = m.max(n).clamp(1, TEMPERATURE_WINDOW);
        let ts = self.t_ring.iter().skip(TEMPERATURE_WINDOW - m);
        let ni = m as i64;
        let sum: u64 = ts.clone().map(|&t| t as u64).sum();
        let mean = ((sum + m as u64 / 2) / m as u64).min(u32::MAX as u64) as i64;
        // Deviations from the mean (Q23, |·| < 2^32): Σd = Σq = 0, so the
        // sums against them equal those against the temperatures
        // (|s1| < 2^44, |s2| < 2^52). With d = 2i − (m − 1) and
        // q = 3d² − (m² − 1) = 12i² − 12(m − 1)i + 3(m − 1)² − (m² − 1),
        // both are sums of the moments Σx, Σi·x, Σi²·x of the deviations
        // (each below 2^50).
        let [a0, a1, a2] = moments(ts.map(|&t| t as i64 - mean));
        let k = ni - 1;
        let s1 = 2 * a1 - k * a0;
        let s2 = 12 * a2 - 12 * k * a1 + (3 * k * k - (ni * ni - 1)) * a0;
        // m(m² − 1) and m(m² − 1)(m² − 4) (< 2^31 for m ≤ 64).
        let n3 = (ni * (ni * ni - 1)) as i128;
        let n5 = n3 * (ni * ni - 4) as i128;
        let bph = self.blocks_per_hour as i128;
        let up = 1i128 << (32 - QT_MEAN);
        // Slope 6·s1/n3 per block, plus the curvature 30·s2/n5 per block²
        // times the (m − n)/2 blocks to the rate window's centre; Q23 → Q32.
        let (s1, s2) = (s1 as i128, s2 as i128);
        let slope = div_round_i128(6 * s1 * bph * up, n3)
            + div_round_i128(15 * s2 * (m - n) as i128 * bph * up, n5);
        let curvature = div_round_i128(30 * s2 * bph * bph * up, n5);
        TemperatureFit {
            mean: mean as u32,
            slope_per_h: slope.clamp(-(1 << 52), 1 << 52) as i64,
            curvature_per_h2: curvature.clamp(-(1 << 62), 1 << 62) as i64,
        }
    }
}

/// The moments Σxᵢ, Σi·xᵢ and Σi²·xᵢ (i from 0) of `xs`, exact, from
/// running sums taken from the back (no multiply per value): with
/// sᵢ = Σ_{j≥i} x_j, Σᵢ sᵢ = Σ(i + 1)·xᵢ and its own running sum gives
/// Σ(i + 1)(i + 2)/2·xᵢ. Each sum must fit `i64` (for |x| < 2^32 and up
/// to 64 values, the largest is below 2^48).
fn moments(xs: impl DoubleEndedIterator<Item = i64>) -> [i64; 3] {
    let (mut s, mut t, mut b) = (0i64, 0i64, 0i64);
    for x in xs.rev() {
        s += x;
        t += s;
        b += t;
    }
    let a1 = t - s;
    [s, a1, 2 * b - 3 * a1 - 2 * s]
}

/// The median of three values.
fn median3(a: u32, b: u32, c: u32) -> u32 {
    a.min(b).max(a.max(b).min(c))
}

/// α = Δt/(τ + Δt) in Q16 (rounded).
fn alpha_q16(dt: Millis, tau: Millis) -> i64 {
    let den = dt.0.saturating_add(tau.0).max(1);
    ((dt.0.min(1 << 40) << 16) + den / 2)
        .checked_div(den)
        .unwrap_or(1 << 16) as i64
}

/// `v × 2^-v_frac × c`, returned with `out_frac` fraction bits (signed,
/// rounded, saturated). Block-rate helper: one 64×32 multiply in 128 bits.
fn coef_mul(c: Coef, v: i64, v_frac: u32, out_frac: u32) -> i64 {
    let prod = v as i128 * c.mantissa() as i128;
    let shift = v_frac as i32 + c.shift() - out_frac as i32;
    let r = if shift > 0 {
        let s = shift.unsigned_abs().min(127);
        (prod >> s) + ((prod >> (s - 1)) & 1)
    } else {
        prod << shift.unsigned_abs().min(60)
    };
    r.max(i64::MIN as i128).min(i64::MAX as i128) as i64
}

/// `num/den` in Q32 for `num < den` (rounded down), without a 128-bit division.
fn ratio_q32(num: u64, den: u64) -> u64 {
    let s = 64 - den.leading_zeros();
    let shift = s.saturating_sub(31);
    let (n, d) = (num >> shift, (den >> shift).max(1));
    ((n << 32) / d).min(1 << 32)
}

/// `num/den` rounded to nearest, halves away from zero (0 unless den > 0).
fn div_round_i128(num: i128, den: i128) -> i128 {
    if den <= 0 {
        return 0;
    }
    let den = den.unsigned_abs();
    let q = fx::div_u128(num.unsigned_abs().saturating_add(den / 2), den) as i128;
    if num >= 0 { q } else { -q }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounded_wide_divisions_are_exact() {
        // Numerators of every size and divisors below and above 2^32,
        // against the native 128-bit division rounded half away from zero.
        let mut x = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = || {
            // xorshift64*
            x ^= x >> 12;
            x ^= x << 25;
            x ^= x >> 27;
            x.wrapping_mul(0x2545_F491_4F6C_DD1D)
        };
        for i in 0..20_000 {
            let n = (u128::from(next()) << 64 | u128::from(next())) >> (1 + i % 127);
            let d = (u128::from(next()) << 64 | u128::from(next())) >> (64 + i % 64);
            let (sn, sd) = (n as i128, (d as i128).max(1));
            let reference = |num: i128| {
                if num >= 0 {
                    (num + sd / 2) / sd
                } else {
                    -((-num + sd / 2) / sd)
                }
            };
            assert_eq!(div_round_i128(sn, sd), reference(sn), "{sn} / {sd}");
            assert_eq!(div_round_i128(-sn, sd), reference(-sn), "-{sn} / {sd}");
        }
        assert_eq!(div_round_i128(5, 0), 0);
        assert_eq!(div_round_i128(5, -2), 0);
    }

    #[test]
    fn moments_are_the_weighted_sums() {
        // Against the sums with their weights multiplied out, for lengths
        // 0 to 64 and values of both signs up to 2^32 in magnitude.
        let mut x = 0x2545_F491_4F6C_DD1Du64;
        for n in 0..=64usize {
            let xs: [i64; 64] = core::array::from_fn(|_| {
                x ^= x << 13;
                x ^= x >> 7;
                x ^= x << 17;
                (x as i64) >> 31
            });
            let xs = &xs[..n];
            let direct = xs.iter().enumerate().fold([0i64; 3], |[a, b, c], (i, &v)| {
                let i = i as i64;
                [a + v, b + i * v, c + i * i * v]
            });
            assert_eq!(moments(xs.iter().copied()), direct, "{n}");
        }
    }

    #[test]
    fn alpha_and_helpers() {
        assert_eq!(alpha_q16(Millis(1000), Millis(0)), 1 << 16);
        assert_eq!(alpha_q16(Millis(1000), Millis(3000)), 1 << 14);
        assert_eq!(ratio_q32(1, 4), 1 << 30);
        assert_eq!(ratio_q32(3 << 40, 4 << 40), 3 << 30);
        let c = Coef::from_f64(0.5);
        assert_eq!(coef_mul(c, -(1 << 20), 0, 0), -(1 << 19));
        assert_eq!(median3(7, 1, 100), 7);
        assert_eq!(div_round_i128(-7, 2), -4);
    }
}
