//! Plausibility, fixed point: values are the raw bits of the reading's format
//! (as `i64`) with `frac` fraction bits. 1 multiply per sample (the rate).

use super::{PlausibilityConfig, PlausibilityState, decide};
use crate::error::SensorSetting;
use crate::fx::{self, Coef};
use crate::time::{Instant, Millis};
use crate::{Error, Status};

/// A prepared plausibility check, fixed point.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Checker {
    min: i64,
    max: i64,
    /// Raw units per millisecond (zero: no rate check).
    rate_per_ms: Coef,
    allowance: i64,
    band: i64,
    after: Millis,
}

impl Checker {
    /// Prepares a check for readings with `frac` fraction bits (0 … 24).
    pub fn new(config: &PlausibilityConfig, frac: u32) -> Result<Checker, Error> {
        config.validate()?;
        if frac > 24 {
            return Err(Error::OutOfRange(SensorSetting::FractionBits.into()));
        }
        let raw = |a: fx::Anchor| {
            let s = 24 - frac;
            if s == 0 {
                a.to_bits()
            } else {
                fx::shr_round_i64(a.to_bits(), s)
            }
        };
        Ok(Checker {
            min: raw(config.min),
            max: raw(config.max),
            rate_per_ms: Coef::from_raw(config.max_rate_per_s.to_bits() as u64, 24 - frac)
                .mul(const { Coef::from_f64(1e-3) }),
            allowance: raw(config.rate_allowance),
            band: raw(config.stuck_band),
            after: config.stuck_after,
        })
    }

    /// Checks one value (raw bits) at `now`.
    pub fn check(&self, value: i64, now: Instant, state: &mut PlausibilityState<i64>) -> Status {
        let rate = self.rate_per_ms;
        let allowance = self.allowance;
        let allowed = |dt: Millis| {
            if rate.is_zero() {
                return None;
            }
            let (dt, _) = fx::sat_u32(dt.as_millis());
            let (a, _) = rate.scale(dt, 0, 0);
            Some((a.min(i64::MAX as u64 / 2) as i64).saturating_add(allowance))
        };
        decide(
            state,
            value,
            now,
            (self.min, self.max),
            allowed,
            (self.band, self.after),
        )
    }
}
