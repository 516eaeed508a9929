//! Plausibility of a stream of readings: range, rate of change and stuck
//! value, with time passed in by the caller and state in a caller-owned
//! [`PlausibilityState`].
//!
//! * **range**: a value below `min` or above `max` is flagged
//!   [`Status::SENSOR_UNDER_RANGE`] / [`Status::SENSOR_OVER_RANGE`];
//! * **rate**: a change since the previous sample larger than
//!   `max_rate_per_s·Δt + rate_allowance` is flagged
//!   [`Status::SENSOR_RATE_IMPLAUSIBLE`] (the allowance absorbs noise between
//!   close samples). The previous sample is always the reference, so a single
//!   spike flags the jump out and the jump back;
//! * **stuck**: a value that stays within `stuck_band` of an anchor for
//!   `stuck_after` or longer is flagged [`Status::SENSOR_STUCK`]; any move
//!   beyond the band sets a new anchor. A band of 0 means "exactly the same
//!   value" (a frozen converter repeats its code; a live one dithers).
//!
//! Quantities are SI ([`fx::Anchor`] in the configuration); the fixed path
//! works on the raw bits of the reading's format (`frac` fraction bits:
//! 4 for pressures, 16 for temperatures). A rate or a stuck time of 0
//! disables that check.

pub mod fixed;
pub mod float;

use crate::error::SensorSetting;
use crate::time::{Instant, Millis};
use crate::{Error, Status, fx};

/// Plausibility limits of one quantity (SI units).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PlausibilityConfig {
    /// Lowest plausible value.
    pub min: fx::Anchor,
    /// Highest plausible value.
    pub max: fx::Anchor,
    /// Largest plausible rate of change per second (0: no rate check).
    pub max_rate_per_s: fx::Anchor,
    /// Change always accepted between two samples (noise allowance).
    pub rate_allowance: fx::Anchor,
    /// Changes within this band count as "not moving" for the stuck check.
    pub stuck_band: fx::Anchor,
    /// Time without movement after which the value is stuck (0: no check).
    pub stuck_after: Millis,
}

impl PlausibilityConfig {
    /// Limits from `f64` values (host helper).
    pub fn new(
        min: f64,
        max: f64,
        max_rate_per_s: f64,
        rate_allowance: f64,
        stuck_band: f64,
        stuck_after: Millis,
    ) -> Result<PlausibilityConfig, Error> {
        let c = PlausibilityConfig {
            min: fx::from_f64(min, SensorSetting::PlausibleMinimum)?,
            max: fx::from_f64(max, SensorSetting::PlausibleMaximum)?,
            max_rate_per_s: fx::from_f64(max_rate_per_s, SensorSetting::PlausibleRate)?,
            rate_allowance: fx::from_f64(rate_allowance, SensorSetting::RateAllowance)?,
            stuck_band: fx::from_f64(stuck_band, SensorSetting::StuckBand)?,
            stuck_after,
        };
        c.validate()?;
        Ok(c)
    }

    /// Checks every field.
    pub fn validate(&self) -> Result<(), Error> {
        if self.max <= self.min {
            return Err(Error::OutOfRange(SensorSetting::PlausibleMaximum.into()));
        }
        if self.max_rate_per_s < 0 {
            return Err(Error::OutOfRange(SensorSetting::PlausibleRate.into()));
        }
        if self.rate_allowance < 0 {
            return Err(Error::OutOfRange(SensorSetting::RateAllowance.into()));
        }
        if self.stuck_band < 0 {
            return Err(Error::OutOfRange(SensorSetting::StuckBand.into()));
        }
        Ok(())
    }
}

/// The caller-owned state of a plausibility check.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PlausibilityState<V> {
    last: Option<(V, Instant)>,
    anchor: Option<(V, Instant)>,
}

impl<V> PlausibilityState<V> {
    /// A fresh state (no previous sample).
    pub const fn new() -> PlausibilityState<V> {
        PlausibilityState {
            last: None,
            anchor: None,
        }
    }
}

/// Range, rate and stuck decisions shared by both paths, on values that
/// can be subtracted and compared.
pub(crate) fn decide<V: Copy + PartialOrd + core::ops::Sub<Output = V>>(
    state: &mut PlausibilityState<V>,
    v: V,
    now: Instant,
    limits: (V, V),
    allowed_change: impl Fn(Millis) -> Option<V>,
    stuck: (V, Millis),
) -> Status {
    let mut status = Status::OK;
    let (min, max) = limits;
    if v < min {
        status |= Status::SENSOR_UNDER_RANGE;
    } else if v > max {
        status |= Status::SENSOR_OVER_RANGE;
    }
    let diff = |a: V, b: V| if a > b { a - b } else { b - a };
    if let Some((v0, t0)) = state.last
        && let Some(allowed) = allowed_change(now.since(t0))
        && diff(v, v0) > allowed
    {
        status |= Status::SENSOR_RATE_IMPLAUSIBLE;
    }
    state.last = Some((v, now));
    let (band, after) = stuck;
    if after.as_millis() > 0 {
        match state.anchor {
            Some((va, ta)) if diff(v, va) <= band => {
                if now.since(ta) >= after {
                    status |= Status::SENSOR_STUCK;
                }
            }
            _ => state.anchor = Some((v, now)),
        }
    }
    status
}
