//! Tracking over time: the sample pipeline, consumption rate, time to empty,
//! temperature-proof leak detection, thermal settling and alarms, with the
//! uncertainty of every estimate.
//!
//! Both paths ([`fixed::Tracker`], [`float::Tracker`]) run the same steps
//! under the same names; all state is a fixed-size struct the caller owns,
//! time is the caller's [`Instant`](crate::time::Instant), and the result of a
//! series of samples depends only on the samples and their times.
//!
//! # Per sample
//!
//! 1. `despike` — median of the last three readings, per channel (pressure,
//!    temperature): a single wild reading never reaches the estimate.
//!    Samples the sensor front end flags (any bit of
//!    [`Status::SENSOR_RANGE`](crate::Status::SENSOR_RANGE)) are not used at
//!    all; they only feed the `sensor_fault` alarm.
//! 2. `smooth` — first-order low-pass per channel, y += α·(x − y) with
//!    α = Δt/(τ + Δt) for the actual sample interval Δt (backward Euler; the
//!    fixed path recomputes α only when Δt changes).
//! 3. the content estimate on the smoothed pressure and temperature.
//! 4. `accumulate` — the fill fraction is summed into the current rate
//!    block. The fill fraction the sample's own (raw, not yet despiked or
//!    smoothed) reading implies, F·(p_raw/p)·(T/T_raw) (the gas-law scaling
//!    from the smoothed reading; a temperature change at constant content
//!    cancels), is compared with the previous block mean: beyond `settle_step` it marks a
//!    fast fill or draw at once (`fast_sample`, see Settling below), so
//!    `not_settled` is raised from the first sample of a fast change rather
//!    than at the end of its block, and before the smoothed reading (which
//!    lags a fast fill by a few samples) can be off unflagged. A single
//!    spike that passes the sensor's plausibility check can mark one too.
//! 5. alarm conditions and debounce ([`crate::alarm`]).
//!
//! # Per block (every `block`, default 60 s; the block divides one hour)
//!
//! * The block mean of the fill fraction (mass over rated mass: the
//!   temperature-compensated content) enters a window of the last
//!   [`RATE_WINDOW`] block means; the smoothed temperature at the block's
//!   close enters a window of the last [`TEMPERATURE_WINDOW`].
//! * **Rate**: least-squares slope over the window (at least
//!   [`RATE_MIN_BLOCKS`] blocks), in kg/h and standard m³/h, with its
//!   expanded uncertainty U (k = 2) from the budget of
//!   [`crate::uncertainty`]: the residuals' scatter (widened for their
//!   autocorrelation), the temperature dynamics (dT/dt and d²T/dt² from a
//!   parabola through the block temperatures, times the declared lag and
//!   gain uncertainties of the temperature sensor and the sensitivity c_T)
//!   and the scale errors; and a confidence 1 − U/|rate| (0 … 1).
//! * **Steady draw**: the slope of the newest [`SETTLE_WINDOW`] blocks
//!   against the window's; when they differ by more than
//!   1/[`STEADY_SHARE_DIVISOR`] of the window's slope plus
//!   [`STEADY_FLOOR_PER_H`] a draw started, stopped or changed within the
//!   window: the rate is reported with `steady: false` and no time to empty
//!   is given (the window's mix of draw and idle gives no basis for one).
//!   A time to empty also waits until the rate has been steady for
//!   [`STEADY_TIME_CONSTANTS`] gas time constants τ_v·F (a draw's cooling of
//!   the gas below a wall-mounted sensor still grows before).
//! * **Time to empty** down to the reserve fraction: (F_end − F_reserve)/rate,
//!   F_end the fitted value at the end of the window; earliest and latest
//!   from rate ± U_t, U_t the time to empty's own budget written as a rate
//!   spread (each input moves level and rate together).
//! * **Settling**: a block mean that differs from the previous one by more
//!   than `settle_step` (`fast_change`) — or, already during the block, a
//!   single sample (`fast_sample`, step 4) — marks a fast fill or draw; from
//!   then on the estimate is `not_settled`. (Judged only per block a fast
//!   fill could run unflagged for up to a whole block while the gas heats
//!   and the reading runs ahead of or behind the truth.) The gas relaxes to the sensor's temperature as a first
//!   order system, so the apparent content follows
//!   F(t) = F∞ + (F₀ − F∞)·e^(−t/τ) and F∞ = F + τ·dF/dt. From
//!   [`SETTLE_WINDOW`] blocks after the event on, the slope and mean of the
//!   last [`SETTLE_WINDOW`] blocks give the predicted settled content F∞ (at
//!   the window centre, where the slope belongs), its mass, and the predicted
//!   settled pressure (the pressure F∞ develops at the present temperature,
//!   through the gas model). `not_settled` clears when the predicted drift
//!   left |F∞ − F_last| is below `settle_tolerance`, or 3τ after the event.
//!   τ is configured (`settle_time_constant`); a draw during settling biases
//!   the prediction by τ × draw rate.
//! * The uncertainty of the content ([`crate::uncertainty`]), with the
//!   gas–sensor temperature difference from the rate window and the
//!   settling time constant taken as the vessel's gas–wall time constant
//!   τ_v, and the over-pressure reference (the pressure of the rated
//!   content at the present temperature) are refreshed. While the draw's
//!   cooling of the gas outweighs twice the rest of the fill fraction's
//!   uncertainty, `not_settled` is reported (without restarting the rate or
//!   predicting a settled content).
//!
//! # A close spread over the samples that follow it
//!
//! Only the block's bookkeeping runs at the sample that closes it: the
//! fast-change check, the windows and the gas temperature. The rest is
//! `CloseStep`s, one per following sample, in order: the content's
//! sensitivities (`Terms`), the rate window's line (`RateFit`), the block
//! temperatures' parabola (`TemperatureFit`), the rate budget (`Budget`),
//! rate, steady draw, time to empty and episodes (`Rate`), settling
//! (`Settle`), leak (`Leak`), the content's uncertainty (`Uncertainty`)
//! and the over-pressure reference (`Reference`). No sample then pays for a whole
//! close; the outputs of a close appear within `CloseStep::COUNT` (nine) samples
//! of it. Each step works on the close's own estimate and on the state as
//! it is when the step runs: a fill marked in between (which restarts the
//! rate window) leaves the rate of the window it emptied unreported.
//!
//! The steps are spread only when the samples come fast enough for them
//! to finish well inside the block (an interval Δt with
//! 2·`CloseStep::COUNT`·Δt ≤ `block`, see `spread`); slower samples
//! run a close whole, as do the steps still pending when a block closes,
//! when the windows restart after a gap and when outputs are withdrawn.
//! Both paths keep the same schedule, so their outputs change at the same
//! samples.
//!
//! # Per hour: leak detection on the compensated content
//!
//! Hourly means of the fill fraction go into a ring of [`LEAK_RING`] hours.
//! With the ring full, the loss per day is the mean of the older 24 hours
//! minus the mean of the newer 24 hours. Both means span exactly one day, so
//! every component that repeats daily — the day/night temperature swing and
//! what is left of it after compensation (sensor lag, small model and sensor
//! errors that follow temperature) — cancels, while a steady loss shows in
//! full. The loss is judged relative to the content (the older day's mean):
//!
//! * [`LeakMode::Standby`]: any loss above `leak_threshold_per_day` is a leak;
//! * [`LeakMode::InUse`]: the loss beyond the expected draw is judged; the
//!   expected draw is `declared_draw_kg_h`, or, when none is declared, the
//!   loss per day learned from the first full ring (kept until
//!   `relearn_draw`).
//!
//! The ring restarts at every fast fill or draw (and stays empty while not
//! settled) and after a gap in the samples, so a verdict always rests on two
//! whole settled days. It also stays empty
//!
//! * during a **draw episode** — use, not loss: the block's rate above
//!   [`EPISODE_RATE_PER_H`] of the rated content per hour (in use also above
//!   [`EPISODE_EXPECTED_FACTOR`] times the expected draw) starts one, a rate
//!   below half that ends it — and for [`SETTLE_TIME_CONSTANTS`] settling
//!   time constants after it (the gas warms back from the draw's cooling, as
//!   after a fill). In standby an episode longer than
//!   [`EPISODE_MAX_HOURS`] is no use but a loss and is judged;
//! * while the content is at or below the reserve fraction (an empty vessel's
//!   pressure is the regulator's and the day's, not a measure of loss).
//!
//! ## Declared draws
//!
//! A draw declared in kg/h is the user's figure; the loss the gauge measures
//! carries the instrument's scale errors (water capacity, pressure gain, gas
//! model, temperature offset), so the two differ by up to a few standard
//! uncertainties u_s of that scale even without a leak — 1 % of a 13 %/day
//! draw is more than a 0.1 %/day threshold. The in-use verdict against a
//! declared draw therefore adds [`DRAW_MARGIN`]·u_s·(expected draw) to the
//! threshold (u_s from the uncertainty declaration, prepared once). A learned
//! draw is measured on the gauge's own scale and needs no such margin. The
//! smallest leak found in use is then about the threshold plus 3·u_s of the
//! declared draw: a gauge on a busy cylinder cannot see a leak smaller than
//! what it knows of the draw.
//!
//! ## Early verdicts
//!
//! In the second day after a start (k of the 24 pairs of hours one day
//! apart in the ring, k ≥ [`EARLY_MIN_PAIRS`]) the loss is judged on those
//! k pairs, against the threshold raised by [`EARLY_FACTOR_Q8`] (1.3·√(24/k)):
//! a strong leak is reported before the ring is full. With a learned draw
//! (in use, nothing declared) the first whole day pair is still needed to
//! learn it.
//!
//! Before that, in the first day, a vessel in standby whose gas follows its
//! wall within [`FIRST_MAX_VESSEL_MS`] is judged from [`FIRST_MIN_HOURS`]
//! hourly means on: the mean of the older half of the hours against the
//! mean of the newer half, their distance in hours scaling the loss to a
//! day. The threshold is the full one plus a floor of [`FIRST_FLOOR_Q16`]
//! of the content (what part of a day's swing leaves in the compensated
//! content) and the weather margin, both scaled to a day like the loss: a
//! strong leak is reported within hours, a weak one when the distance has
//! grown enough to carry it. Not in use (a day's draw has its hours, which
//! halves of a day do not balance) nor for a gas that trails its wall by
//! hours (its swing in a day is larger than the floor).
//!
//! ## Weather
//!
//! A sensor on the wall runs ahead of the gas when the weather warms and
//! behind it when it cools; the content errs by about −F·τ·(dT/dt)/T for a
//! lag τ. Over one day that leaves −F·τ·s/T with s the day's mean dT/dt, and
//! in the loss of a pair of days −F·τ·(s_older − s_newer)/T: nothing when
//! the days warm and cool alike, up to a few tenths of a per cent per day
//! when a warm spell follows a cold front. The verdict therefore adds a
//! margin of [`LAG_MARGIN`]·F·u_τ·|s_older − s_newer|/T to the threshold
//! (over the k hours of each side for an early verdict),
//! u_τ the temperature lag uncertainty the rate budget uses (declared, plus
//! the difference of the smoothing time constants); s from the block
//! temperature at each hour's close, kept beside the hourly means (1/128 K).
//!
//! A vessel whose gas trails its wall by more than [`VESSEL_LAG_FROM_MS`]
//! (a large store with a sensor on the shell: its gas–wall time constant
//! declared as the settling time constant τ_v) leaves far more than the
//! sensor's lag in a day mean: the gas's lead at τ = τ_v·F (its heat
//! capacity goes with its amount) moves the day means of the compensated
//! content by up to ±0.6 %/day in changeable weather. For such a vessel the
//! tracker follows the gas temperature from the sensor's through that
//! first-order lag, evaluates once a block the content at the gas's
//! temperature against the content at the sensor's (same pressure, the
//! device's gas model: its non-linearity included), keeps the hour's mean
//! of that difference in place of the hourly temperature (Q19 of the
//! rated content, ±6.25 % held) and
//! adds its change between the sides to the loss. The margin becomes
//! 3·(share + u_τ/τ)·|Δc|, Δc that change and share
//! [`VESSEL_LAG_SHARE_Q8`] for the declared time constant's uncertainty.
//!
//! # Withdrawn outputs
//!
//! While the front end flags every sample (a dead or disconnected channel),
//! the last estimate is shown for at most `max_gap`; after that the content,
//! its uncertainty, rate, time to empty and settled prediction are withdrawn
//! (`None`: null in telemetry and CLI) until a usable sample comes back,
//! which restarts the windows. A frozen content is never shown longer.

pub mod fixed;
pub mod float;

/// The work of a block close after its bookkeeping, one step per sample
/// when spread (see "A close spread over the samples that follow it").
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum CloseStep {
    /// The content's model slopes and its uncertainty sensitivities.
    Terms,
    /// The rate window's line.
    RateFit,
    /// The block temperatures' parabola.
    TemperatureFit,
    /// The rate budget (the uncertainties of rate and time to empty).
    Budget,
    /// Rate, steady draw, time to empty; draw episodes.
    Rate,
    /// Settling state and prediction.
    Settle,
    /// The leak step.
    Leak,
    /// The content's uncertainty.
    Uncertainty,
    /// The over-pressure reference.
    Reference,
}

impl CloseStep {
    /// Steps per close.
    const COUNT: u64 = 9;

    /// The step after this one (`None` after the last).
    fn next(self) -> Option<Self> {
        match self {
            CloseStep::Terms => Some(CloseStep::RateFit),
            CloseStep::RateFit => Some(CloseStep::TemperatureFit),
            CloseStep::TemperatureFit => Some(CloseStep::Budget),
            CloseStep::Budget => Some(CloseStep::Rate),
            CloseStep::Rate => Some(CloseStep::Settle),
            CloseStep::Settle => Some(CloseStep::Leak),
            CloseStep::Leak => Some(CloseStep::Uncertainty),
            CloseStep::Uncertainty => Some(CloseStep::Reference),
            CloseStep::Reference => None,
        }
    }
}

/// Whether a close at a sample `dt` after the previous one is spread over
/// the samples that follow (all its steps done within half a `block` at
/// that interval) or run whole.
fn spread(dt: crate::time::Millis, block: crate::time::Millis) -> bool {
    dt.0 > 0 && dt.0.saturating_mul(2 * CloseStep::COUNT) <= block.0
}

/// Block means in the rate window.
pub const RATE_WINDOW: usize = 32;
// The rate budget's table of window spreads covers every window length.
const _: () = assert!(RATE_WINDOW < crate::uncertainty::fixed::SPREAD_TABLE_LEN);
/// Fewest blocks for a rate (three degrees of freedom for its standard error).
pub const RATE_MIN_BLOCKS: usize = 5;
/// Block temperatures kept for the temperature curvature of the rate
/// budget: the rate window and as many blocks before it.
pub const TEMPERATURE_WINDOW: usize = 2 * RATE_WINDOW;
/// Blocks in the settling window (slope and mean for the settled prediction).
pub const SETTLE_WINDOW: usize = 8;
/// Hours per day: the leak means span this many hourly means.
pub const DAY_HOURS: usize = 24;
/// Hourly means kept for leak detection: two days.
pub const LEAK_RING: usize = 2 * DAY_HOURS;
/// Milliseconds per hour.
pub const HOUR_MS: u64 = 3_600_000;
/// After this many settling time constants the gas counts as settled.
pub const SETTLE_TIME_CONSTANTS: u64 = 3;
/// A consumption above this share of the rated content per hour is a draw
/// episode (use, not loss): 2 %/h, five times the largest slow loss the leak
/// detector is made for (10 % of the content per day; common practice).
pub const EPISODE_RATE_PER_H: f64 = 0.02;
/// In use, an episode also needs a rate above this many times the expected
/// (declared or learned) draw (common practice).
pub const EPISODE_EXPECTED_FACTOR: u32 = 4;
/// The rate window holds no steady draw when the slope of its newest
/// [`SETTLE_WINDOW`] blocks differs from the window's by more than this
/// share of it (1/8) …
pub const STEADY_SHARE_DIVISOR: u32 = 8;
/// … plus this share of the rated content per hour (far above the short
/// slope's scatter from noise, about 0.01 %/h for a bridge transducer at
/// 1 Hz; common practice).
pub const STEADY_FLOOR_PER_H: f64 = 0.002;
/// A time to empty needs a steady draw for this many of the gas's time
/// constants τ_v·F (τ_v the settling time constant, F the fill fraction):
/// a draw cools the gas below a wall-mounted sensor toward a steady
/// difference with that time constant, and until then the apparent rate
/// holds the growing cooling (up to (R/c_v)·Z·c_T²/c_p times the rate, a
/// third or more of it; see "Steady draw" above).
pub const STEADY_TIME_CONSTANTS: u64 = 2;
/// Fewest pairs of hours one day apart for an early leak verdict (the
/// second day after a start; see "Early verdicts").
pub const EARLY_MIN_PAIRS: usize = 6;
/// The leak threshold's factor for a verdict on k pairs of hours one day
/// apart, in 1/256: 1.3·√(24/k) for k < 24 (the scatter of a mean of k
/// pairs grows as √(24/k); 1.3 more for what the day after a start still
/// holds; common practice, checked on the weather population), 1 for a
/// whole day; 0: no verdict.
pub const EARLY_FACTOR_Q8: [u32; DAY_HOURS + 1] = [
    0, 0, 0, 0, 0, 0, 666, 616, 576, 543, 516, 492, 471, 452, 436, 421, 408, 395, 384, 374, 365,
    356, 348, 340, 256,
];
/// Fewest hours after a start for a first-day leak verdict (the older half
/// of the hours against the newer; see "Early verdicts").
pub const FIRST_MIN_HOURS: usize = 6;
/// The longest gas time constant (the settling time constant) for which a
/// first-day verdict is given: a vessel whose gas trails its wall by hours
/// holds a day's swing in its compensated content (3–4 % in a 4 m³ store
/// at ±12 K), far beyond what halves of a day can tell from a loss; it
/// waits for hours one day apart (common practice, checked on populations).
pub const FIRST_MAX_VESSEL_MS: u64 = HOUR_MS;
/// The gas time constant (the settling time constant) above which the leak
/// verdict takes the gas's trailing of its wall into account (see
/// "Weather"): the hourly temperatures it compares are those of the gas,
/// followed from the sensor's through a first-order lag of that time
/// constant, and the day means' difference is corrected for it.
pub const VESSEL_LAG_FROM_MS: u64 = HOUR_MS;
/// The uncertainty of a declared gas time constant, as a share of it in
/// 1/256 (1/8: declared from the vessel's size and content, common
/// practice, checked on the large-store populations), for the weather
/// margin of a vessel slower than [`VESSEL_LAG_FROM_MS`].
pub const VESSEL_LAG_SHARE_Q8: u64 = 32;
/// A slow vessel's hourly content hidden by the sensor's lead on the gas,
/// as the fixed tracker keeps it beside the hourly means: Q19 of the rated
/// content (both trackers round to it), offset by [`LEAD_BIAS`] in a `u16`
/// (±6.25 % of the rated content, held there).
pub(crate) const LEAD_Q: u32 = 19;
/// See [`LEAD_Q`].
pub(crate) const LEAD_BIAS: i64 = 1 << 15;

/// The first-day verdict's floor, Q16 of the content: the two halves' means
/// must differ by this much more than the threshold and the weather's
/// margin allow (what a day's swing leaves in the compensated content
/// beside the lag: 0.3 %, common practice, checked on the weather
/// populations).
pub const FIRST_FLOOR_Q16: u32 = 197;

/// The hours a leak verdict sets against each other: `len` hourly means
/// from ring index `older` against as many from `newer`, `apart` hours
/// later; the threshold's factor (1/256) and the first day's floor (Q16 of
/// the content). One choice for both trackers.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Window {
    pub older: usize,
    pub newer: usize,
    pub len: usize,
    pub apart: usize,
    pub factor_q8: u32,
    pub floor_q16: u32,
}

/// The verdict's window with `n` hourly means in the ring (the newest at
/// its end), or none yet: pairs of hours one day apart from
/// [`EARLY_MIN_PAIRS`] of them, before that, in standby, from
/// [`FIRST_MIN_HOURS`] the older half against the newer (in use a day's
/// draw has its hours, and a gas slower than [`FIRST_MAX_VESSEL_MS`] a
/// day's swing: only hours one day apart compare).
pub(crate) fn window(n: usize, mode: LeakMode, vessel: crate::time::Millis) -> Option<Window> {
    let n = n.min(LEAK_RING);
    let k = n.saturating_sub(DAY_HOURS);
    if k >= EARLY_MIN_PAIRS {
        Some(Window {
            older: DAY_HOURS - k,
            newer: LEAK_RING - k,
            len: k,
            apart: DAY_HOURS,
            factor_q8: EARLY_FACTOR_Q8.get(k).copied().unwrap_or(256),
            floor_q16: 0,
        })
    } else if n >= FIRST_MIN_HOURS && mode == LeakMode::Standby && vessel.0 <= FIRST_MAX_VESSEL_MS {
        let h = n / 2;
        Some(Window {
            older: LEAK_RING - n,
            newer: LEAK_RING - h,
            len: h,
            apart: n - h,
            factor_q8: 256,
            floor_q16: FIRST_FLOOR_Q16,
        })
    } else {
        None
    }
}

/// The leak verdict's margin for the temperature sensor's lag behind the
/// gas, in lag uncertainties (see "Weather" below; common practice: about
/// three standard uncertainties).
pub const LAG_MARGIN: u64 = 3;
/// The in-use verdict's margin for the gauge's own scale against a declared
/// draw, in standard uncertainties (see "Declared draws" below; common
/// practice: about three standard uncertainties).
pub const DRAW_MARGIN: u64 = 3;

/// The relative standard uncertainty of the gauge's scale, Q16: how far the
/// loss it measures in a day may differ from a draw declared in kg/h for
/// the instrument's own errors, √(u_V² + u_rd² + u_Z² + (u_T/T_r)²) — the
/// water capacity, the pressure reading's gain, the gas model and the
/// temperature offset relative to the rated temperature (each Q16; the
/// temperature and the rated temperature in `fx::Temperature` bits). One
/// integer path for both trackers.
#[inline(never)]
pub(crate) fn scale_uncertainty_q16(
    capacity: u64,
    reading: u64,
    model: u64,
    temperature: u64,
    rated_temperature: u64,
) -> u64 {
    let t = (temperature << 16)
        .checked_div(rated_temperature)
        .unwrap_or(0)
        .min(1 << 16);
    let sq = |v: u64| {
        let v = v.min(1 << 16);
        v * v
    };
    // The floor of the root, by the integer root the uncertainty already
    // links.
    let sum = sq(capacity) + sq(reading) + sq(model) + sq(t);
    u64::from(crate::uncertainty::fixed::isqrt(sum))
}
/// In standby, an episode longer than this many hours is no use but a loss:
/// it is judged by the leak detector like any other.
pub const EPISODE_MAX_HOURS: u32 = 12;

/// How losses are judged.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LeakMode {
    /// The tank is not in use: any loss beyond the threshold is a leak.
    Standby,
    /// The tank feeds a consumer: only loss beyond the expected draw
    /// (declared or learned) counts.
    InUse,
}

/// Checks the timing fields shared by both configuration forms.
pub(crate) fn validate_timing(
    block: crate::time::Millis,
    max_gap: crate::time::Millis,
    smoothing: [crate::time::Millis; 2],
    settle_time_constant: crate::time::Millis,
) -> Result<(), crate::Error> {
    use crate::{Error, TrackSetting};
    let b = block.0;
    if !(1000..=HOUR_MS).contains(&b) || !HOUR_MS.is_multiple_of(b) {
        return Err(Error::OutOfRange(TrackSetting::Block.into()));
    }
    if max_gap.0 < 1000 || max_gap.0 > 24 * HOUR_MS {
        return Err(Error::OutOfRange(TrackSetting::MaximumGap.into()));
    }
    for s in smoothing {
        if s.0 > HOUR_MS {
            return Err(Error::OutOfRange(
                TrackSetting::SmoothingTimeConstant.into(),
            ));
        }
    }
    if !(60_000..=24 * HOUR_MS).contains(&settle_time_constant.0) {
        return Err(Error::OutOfRange(TrackSetting::SettleTimeConstant.into()));
    }
    Ok(())
}

/// The temperature lag uncertainty the rate budget uses: the declared one
/// plus the difference of the smoothing time constants (a temperature
/// smoothed longer than the pressure lags it by the difference; a known
/// effect left uncorrected, added to the uncertainty as GUM F.2.4.5 allows),
/// at most [`MAX_TEMPERATURE_LAG`](crate::uncertainty::float::MAX_TEMPERATURE_LAG).
pub(crate) fn effective_lag(
    declared: crate::time::Millis,
    smoothing_pressure: crate::time::Millis,
    smoothing_temperature: crate::time::Millis,
) -> crate::time::Millis {
    let max = crate::uncertainty::float::MAX_TEMPERATURE_LAG;
    let diff = smoothing_temperature.0.abs_diff(smoothing_pressure.0);
    crate::time::Millis(declared.0.saturating_add(diff).min(max.0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::time::Millis;

    #[test]
    fn effective_lag_adds_the_smoothing_difference_and_saturates() {
        let s = Millis::from_secs;
        assert_eq!(effective_lag(s(600), s(4), s(4)), s(600));
        assert_eq!(effective_lag(s(600), s(4), s(64)), s(660));
        assert_eq!(effective_lag(s(600), s(64), s(4)), s(660));
        assert_eq!(effective_lag(s(7000), s(0), s(3600)), s(7200));
    }

    #[test]
    fn verdict_windows_from_the_first_hours_to_a_full_ring() {
        let quick = Millis::from_secs(1800);
        let standby = LeakMode::Standby;
        assert_eq!(window(FIRST_MIN_HOURS - 1, standby, quick), None);
        // First day, standby: the older half against the newer.
        let w = window(11, standby, quick).unwrap();
        assert_eq!((w.older, w.newer, w.len, w.apart), (37, 43, 5, 6));
        assert_eq!((w.factor_q8, w.floor_q16), (256, FIRST_FLOOR_Q16));
        let w = window(29, standby, quick).unwrap();
        assert_eq!((w.older, w.newer, w.len, w.apart), (19, 34, 14, 15));
        // Not in use, nor for a gas that trails its wall by hours.
        assert_eq!(window(29, LeakMode::InUse, quick), None);
        assert_eq!(window(29, standby, Millis::from_secs(7200)), None);
        // Pairs one day apart from EARLY_MIN_PAIRS of them, in every mode.
        for mode in [standby, LeakMode::InUse] {
            let w = window(DAY_HOURS + EARLY_MIN_PAIRS, mode, Millis::from_secs(7200)).unwrap();
            assert_eq!((w.older, w.newer, w.len, w.apart), (18, 42, 6, 24));
            assert_eq!((w.factor_q8, w.floor_q16), (EARLY_FACTOR_Q8[6], 0));
            let w = window(LEAK_RING + 5, mode, quick).unwrap();
            assert_eq!((w.older, w.newer, w.len, w.apart), (0, 24, 24, 24));
            assert_eq!(w.factor_q8, 256);
        }
    }

    #[test]
    fn scale_uncertainty_of_the_example_declaration() {
        // Capacity 0.5 %, pressure reading 0.1 %/√3, model 0.1 %, 0.5 K at
        // a rated 15 °C: √(0.5² + 0.0577² + 0.1² + 0.1735²) % = 0.5420 %.
        let q = |v: f64| (v * 65_536.0).round() as u64;
        let t = |k: f64| (k * 65_536.0).round() as u64;
        let u = scale_uncertainty_q16(
            q(0.005),
            q(0.001 / 3f64.sqrt()),
            q(0.001),
            t(0.5),
            t(288.15),
        );
        assert!((u as f64 / 65_536.0 - 0.005420).abs() < 2e-5, "{u}");
        assert_eq!(scale_uncertainty_q16(0, 0, 0, 0, t(288.15)), 0);
        // No rated temperature: the temperature part is left out, no panic.
        assert_eq!(scale_uncertainty_q16(q(0.005), 0, 0, t(0.5), 0), q(0.005));
        // Each part at most 1 (the root of four).
        assert_eq!(
            scale_uncertainty_q16(u64::MAX, u64::MAX, u64::MAX, u64::MAX, 1),
            2 << 16
        );
    }
}
