//! Time as the caller passes it in. The core never reads a clock: every
//! function that needs time takes an [`Instant`] (milliseconds since an
//! arbitrary start, usually boot) or a [`Millis`] span.

use core::ops::{Add, Sub};

/// A span of time in milliseconds.
#[derive(
    Clone,
    Copy,
    Debug,
    Default,
    PartialEq,
    Eq,
    PartialOrd,
    Ord,
    Hash,
    serde::Serialize,
    serde::Deserialize,
)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Millis(pub u64);

/// A point in time: milliseconds since the caller's epoch (usually boot).
/// 64 bits: no wrap in the life of a device.
#[derive(
    Clone,
    Copy,
    Debug,
    Default,
    PartialEq,
    Eq,
    PartialOrd,
    Ord,
    Hash,
    serde::Serialize,
    serde::Deserialize,
)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Instant(pub u64);

impl Millis {
    /// `s` seconds.
    pub const fn from_secs(s: u64) -> Millis {
        Millis(s.saturating_mul(1000))
    }
    /// Whole milliseconds.
    pub const fn as_millis(self) -> u64 {
        self.0
    }
}

impl Instant {
    /// Milliseconds since the epoch.
    pub const fn as_millis(self) -> u64 {
        self.0
    }
    /// Time since `earlier`, zero if `earlier` is later (time never runs back).
    pub const fn since(self, earlier: Instant) -> Millis {
        Millis(self.0.saturating_sub(earlier.0))
    }
}

impl Add<Millis> for Instant {
    type Output = Instant;
    fn add(self, d: Millis) -> Instant {
        Instant(self.0.saturating_add(d.0))
    }
}

impl Sub for Instant {
    type Output = Millis;
    fn sub(self, earlier: Instant) -> Millis {
        self.since(earlier)
    }
}
