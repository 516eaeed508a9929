//! Alarms: thresholds with hysteresis and debounce, producing raise and clear
//! events.
//!
//! An alarm is evaluated in two steps:
//!
//! 1. **Conditions** (numbers, so mirrored: [`fixed::LimitsFx`] and
//!    [`float::Limits`]): from the present values, is the raise condition met
//!    (value beyond its threshold), and is the clear condition met (value back
//!    past the threshold by the hysteresis band)? Conditions computed by the
//!    tracker (leak, not settled) and the sensor fault come in as booleans.
//! 2. **Debounce** ([`Alarms`], no numbers, shared by both paths): an alarm is
//!    raised when its raise condition has held without a break for its
//!    `raise_delay`, and cleared when its clear condition has held for its
//!    `clear_delay`. Each change is an [`AlarmEvent`] value; the active set is
//!    mirrored into the [`Status`] word (bits 16–22).
//!
//! Time is the caller's [`Instant`]; nothing here reads a clock.

pub mod fixed;
pub mod float;

use crate::Status;
use crate::time::{Instant, Millis};

/// The alarms a gauge raises. The discriminant is the bit in [`AlarmSet`];
/// the status flag is bit `16 + discriminant`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum AlarmKind {
    /// The gas has not settled after a fast fill or draw: pressure and
    /// content still drift ([`Status::NOT_SETTLED`]).
    NotSettled = 0,
    /// Content is being lost faster than allowed ([`Status::LEAK`]).
    Leak = 1,
    /// Content (fraction or time to empty) below its threshold
    /// ([`Status::LOW_CONTENT`]).
    LowContent = 2,
    /// Content above the rated content (pressure above the rated pressure
    /// corrected to the present temperature), or pressure above 5/4 of the
    /// service pressure ([`Status::OVER_PRESSURE`]).
    OverPressure = 3,
    /// Gas temperature above its limit ([`Status::OVER_TEMPERATURE`]).
    OverTemperature = 4,
    /// Gas temperature below its limit ([`Status::UNDER_TEMPERATURE`]).
    UnderTemperature = 5,
    /// The sensor front end reports a fault ([`Status::SENSOR_FAULT`]).
    SensorFault = 6,
}

impl AlarmKind {
    /// Every alarm, in bit order.
    pub const ALL: [AlarmKind; 7] = [
        AlarmKind::NotSettled,
        AlarmKind::Leak,
        AlarmKind::LowContent,
        AlarmKind::OverPressure,
        AlarmKind::OverTemperature,
        AlarmKind::UnderTemperature,
        AlarmKind::SensorFault,
    ];

    /// The stable snake_case name (the same as its status flag's name).
    pub const fn name(self) -> &'static str {
        match self {
            AlarmKind::NotSettled => "not_settled",
            AlarmKind::Leak => "leak",
            AlarmKind::LowContent => "low_content",
            AlarmKind::OverPressure => "over_pressure",
            AlarmKind::OverTemperature => "over_temperature",
            AlarmKind::UnderTemperature => "under_temperature",
            AlarmKind::SensorFault => "sensor_fault",
        }
    }

    /// The alarm of a wire code (its bit), `None` for codes this version
    /// does not know.
    pub const fn from_code(code: u16) -> Option<AlarmKind> {
        Some(match code {
            0 => AlarmKind::NotSettled,
            1 => AlarmKind::Leak,
            2 => AlarmKind::LowContent,
            3 => AlarmKind::OverPressure,
            4 => AlarmKind::OverTemperature,
            5 => AlarmKind::UnderTemperature,
            6 => AlarmKind::SensorFault,
            _ => return None,
        })
    }

    /// The status flag that mirrors this alarm's active state.
    pub const fn status(self) -> Status {
        Status::from_bits(1 << (16 + self as u32))
    }

    /// This alarm alone, as a set.
    pub const fn set(self) -> AlarmSet {
        AlarmSet(1 << self as u8)
    }
}

/// A set of alarms, one bit per [`AlarmKind`].
#[derive(
    Clone, Copy, Debug, Default, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize,
)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AlarmSet(pub u8);

impl AlarmSet {
    /// No alarm.
    pub const EMPTY: AlarmSet = AlarmSet(0);

    /// True when `kind` is in the set.
    pub const fn contains(self, kind: AlarmKind) -> bool {
        self.0 & (1 << kind as u8) != 0
    }

    /// The set with `kind` added when `on` is true.
    #[must_use]
    pub const fn with(self, kind: AlarmKind, on: bool) -> AlarmSet {
        if on {
            AlarmSet(self.0 | (1 << kind as u8))
        } else {
            self
        }
    }

    /// True when the set is empty.
    pub const fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// The status flags of the alarms in the set.
    pub const fn status(self) -> Status {
        Status::from_bits((self.0 as u32 & 0x7F) << 16)
    }

    /// The alarms in the set, in bit order.
    pub fn iter(self) -> impl Iterator<Item = AlarmKind> {
        AlarmKind::ALL
            .into_iter()
            .filter(move |k| self.contains(*k))
    }
}

/// One alarm changing state.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AlarmEvent {
    /// Which alarm.
    pub kind: AlarmKind,
    /// True when raised, false when cleared.
    pub raised: bool,
    /// When (the sample's time).
    pub at: Instant,
}

/// The alarm changes of one sample: at most one event per alarm.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Events {
    /// Alarms raised at this sample.
    pub raised: AlarmSet,
    /// Alarms cleared at this sample.
    pub cleared: AlarmSet,
    /// The sample's time.
    pub at: Instant,
}

impl Events {
    /// True when nothing changed.
    pub const fn is_empty(&self) -> bool {
        self.raised.is_empty() && self.cleared.is_empty()
    }

    /// The changes as event values, raises first, each in bit order.
    pub fn iter(&self) -> impl Iterator<Item = AlarmEvent> {
        let at = self.at;
        self.raised
            .iter()
            .map(move |kind| AlarmEvent {
                kind,
                raised: true,
                at,
            })
            .chain(self.cleared.iter().map(move |kind| AlarmEvent {
                kind,
                raised: false,
                at,
            }))
    }
}

/// How long a condition must hold before an alarm changes state.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Debounce {
    /// The raise condition must hold this long without a break.
    pub raise_delay: Millis,
    /// The clear condition must hold this long without a break.
    pub clear_delay: Millis,
}

impl Debounce {
    /// Raise and clear after `raise_s` and `clear_s` seconds.
    pub const fn secs(raise_s: u64, clear_s: u64) -> Debounce {
        Debounce {
            raise_delay: Millis::from_secs(raise_s),
            clear_delay: Millis::from_secs(clear_s),
        }
    }
}

/// Debounce times per alarm, in [`AlarmKind`] bit order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DebounceTable(pub [Debounce; 7]);

impl Default for DebounceTable {
    /// Common practice for a gauge read about once a second (no published
    /// source): level alarms 10 s to raise and 30 s to clear, so a single
    /// noisy sample never toggles them; sensor fault 3 s / 10 s; leak and not
    /// settled act at once (their conditions are already averaged over
    /// blocks of samples).
    fn default() -> Self {
        DebounceTable([
            Debounce::secs(0, 0),   // not_settled
            Debounce::secs(0, 0),   // leak
            Debounce::secs(10, 30), // low_content
            Debounce::secs(10, 30), // over_pressure
            Debounce::secs(10, 30), // over_temperature
            Debounce::secs(10, 30), // under_temperature
            Debounce::secs(3, 10),  // sensor_fault
        ])
    }
}

impl DebounceTable {
    /// The debounce of one alarm.
    pub fn get(&self, kind: AlarmKind) -> Debounce {
        self.0
            .get(kind as usize)
            .copied()
            .unwrap_or(Debounce::secs(0, 0))
    }
}

/// The debounce state of every alarm (caller-owned, 64 bytes).
#[derive(Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Alarms {
    debounce: DebounceTable,
    active: AlarmSet,
    /// Per alarm: since when the condition that would change its state has
    /// held (raise condition while inactive, clear condition while active).
    pending_since: [Option<Instant>; 7],
}

impl Alarms {
    /// All alarms inactive.
    pub fn new(debounce: DebounceTable) -> Alarms {
        Alarms {
            debounce,
            active: AlarmSet::EMPTY,
            pending_since: [None; 7],
        }
    }

    /// The alarms now active.
    pub fn active(&self) -> AlarmSet {
        self.active
    }

    /// Clears every active alarm at `now` (a signed clear command): each
    /// gives a cleared event and its debounce starts afresh, so an alarm
    /// whose condition still holds is raised again after its raise delay.
    pub fn clear_all(&mut self, now: Instant) -> Events {
        let events = Events {
            raised: AlarmSet::EMPTY,
            cleared: self.active,
            at: now,
        };
        self.active = AlarmSet::EMPTY;
        self.pending_since = [None; 7];
        events
    }

    /// Advances every alarm by one sample at `now`: `raise` holds the alarms
    /// whose raise condition is met, `clear` those whose clear condition is
    /// met (an alarm in neither set is inside its hysteresis band and keeps
    /// its state and its pending timer is reset).
    pub fn update(&mut self, now: Instant, raise: AlarmSet, clear: AlarmSet) -> Events {
        let mut events = Events {
            at: now,
            ..Events::default()
        };
        // The usual sample: no alarm wants to change state and none has a
        // timer running; nothing to do (the loop below would find the same).
        let wanted = (raise.0 & !self.active.0) | (clear.0 & self.active.0);
        if wanted == 0 && self.pending_since.iter().all(Option::is_none) {
            return events;
        }
        for (kind, pending) in AlarmKind::ALL
            .into_iter()
            .zip(self.pending_since.iter_mut())
        {
            let active = self.active.contains(kind);
            let d = self.debounce.get(kind);
            let (wanted, delay) = if active {
                (clear.contains(kind), d.clear_delay)
            } else {
                (raise.contains(kind), d.raise_delay)
            };
            if !wanted {
                *pending = None;
                continue;
            }
            let since = *pending.get_or_insert(now);
            if now.since(since) >= delay {
                *pending = None;
                if active {
                    self.active = AlarmSet(self.active.0 & !(1 << kind as u8));
                    events.cleared = events.cleared.with(kind, true);
                } else {
                    self.active = self.active.with(kind, true);
                    events.raised = events.raised.with(kind, true);
                }
            }
        }
        events
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kinds_match_status_flags() {
        assert_eq!(AlarmKind::from_code(AlarmKind::ALL.len() as u16), None);
        for k in AlarmKind::ALL {
            assert_eq!(AlarmKind::from_code(k as u16), Some(k));
            assert_eq!(Status::from_name(k.name()), Some(k.status()), "{k:?}");
            assert!(Status::TRACKING_RANGE.contains(k.status()));
            assert_eq!(k.set().status(), k.status());
        }
    }

    #[test]
    fn debounce_raise_and_clear() {
        let mut a = Alarms::new(DebounceTable::default());
        let k = AlarmKind::OverTemperature;
        let on = k.set();
        let t = |s: u64| Instant(s * 1000);
        // Condition for 9 s, a break, then 10 s: raised at the 10th second.
        for s in 0..9 {
            assert!(a.update(t(s), on, AlarmSet::EMPTY).is_empty());
        }
        assert!(a.update(t(9), AlarmSet::EMPTY, AlarmSet::EMPTY).is_empty());
        for s in 10..20 {
            assert!(a.update(t(s), on, AlarmSet::EMPTY).is_empty());
        }
        let e = a.update(t(20), on, AlarmSet::EMPTY);
        assert_eq!(e.raised, on);
        assert!(a.active().contains(k));
        let ev: Vec<_> = e.iter().collect();
        assert_eq!(
            ev,
            vec![AlarmEvent {
                kind: k,
                raised: true,
                at: t(20)
            }]
        );
        // Inside the hysteresis band (neither set): stays raised.
        for s in 21..100 {
            assert!(a.update(t(s), AlarmSet::EMPTY, AlarmSet::EMPTY).is_empty());
        }
        // Clear condition for 30 s clears it.
        for s in 100..130 {
            assert!(a.update(t(s), AlarmSet::EMPTY, on).is_empty());
        }
        let e = a.update(t(130), AlarmSet::EMPTY, on);
        assert_eq!(e.cleared, on);
        assert!(a.active().is_empty());
    }

    #[test]
    fn clear_all_clears_and_rearms() {
        let mut a = Alarms::new(DebounceTable::default());
        let k = AlarmKind::SensorFault.set();
        for s in 0..=3 {
            a.update(Instant(s * 1000), k, AlarmSet::EMPTY);
        }
        assert_eq!(a.active(), k);
        let e = a.clear_all(Instant(3500));
        assert_eq!((e.raised, e.cleared), (AlarmSet::EMPTY, k));
        assert!(a.active().is_empty());
        // The condition still holds: raised again after its 3 s delay.
        assert!(a.update(Instant(4000), k, AlarmSet::EMPTY).is_empty());
        assert_eq!(a.update(Instant(7000), k, AlarmSet::EMPTY).raised, k);
    }

    #[test]
    fn zero_delay_acts_at_once() {
        let mut a = Alarms::new(DebounceTable::default());
        let e = a.update(Instant(5), AlarmKind::Leak.set(), AlarmSet::EMPTY);
        assert_eq!(e.raised, AlarmKind::Leak.set());
        assert_eq!(a.active().status(), Status::LEAK);
    }
}
