//! The status word: one bit per condition a reader of an estimate must know.
//!
//! Every estimate carries a [`Status`]. An empty status means the numbers are
//! within the envelope and the model's range. Flags are additive: stages OR
//! their own flags into the word they pass on.
//!
//! Bit allocation (kept stable: the bits go over the wire):
//!
//! | bits  | owner                                   |
//! |-------|-----------------------------------------|
//! | 0–7   | content estimate and gas model           |
//! | 8–15  | sensors and plausibility                 |
//! | 16–23 | tracking over time and alarms (bit 23: the per-estimate over-fill verdict beside the debounced `over_pressure` alarm) |
//! | 24–30 | device: configuration, storage, link     |
//! | 31    | content: a mixture's `condensation_risk` (the content range was full) |
//!
//! Every bit is named: bit 31 was the last free one. Content flags are those
//! of [`Status::CONTENT_RANGE`] and bit 31; [`Status::DEVICE_RANGE`] is bits
//! 24–30.

use core::fmt;
use core::ops::{BitAnd, BitOr, BitOrAssign};

/// A set of condition flags. See the associated constants for each bit.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Default, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Status(u32);

macro_rules! flags {
    ($( $(#[doc = $doc:literal])* $name:ident = $bit:literal, $text:literal; )*) => {
        impl Status {
            $( $(#[doc = $doc])* pub const $name: Status = Status(1 << $bit); )*

            /// Every named flag with its stable snake_case name, in bit order.
            pub const NAMED: &'static [(Status, &'static str)] = &[ $( (Status::$name, $text), )* ];
        }
    };
}

flags! {
    /// Input pressure was outside 0–1000 bar absolute: it was clamped to the
    /// envelope's edge so nothing overflows, and the content outputs (those
    /// of the edge, not of the sample) are not valid
    /// ([`Status::CONTENT_INVALID`]).
    PRESSURE_OUTSIDE_ENVELOPE = 0, "pressure_outside_envelope";
    /// Input temperature was outside −60…+150 °C: it was clamped to the
    /// envelope's edge, and the content outputs are not valid
    /// ([`Status::CONTENT_INVALID`]).
    TEMPERATURE_OUTSIDE_ENVELOPE = 1, "temperature_outside_envelope";
    /// An output reached the limit of its number format and was clamped there.
    SATURATED = 2, "saturated";
    /// The gas model was asked about a state outside its declared validity range.
    MODEL_OUT_OF_RANGE = 3, "model_out_of_range";
    /// The gas is liquid or two-phase here: pressure does not tell the content,
    /// and the content outputs are not valid.
    TWO_PHASE = 4, "two_phase";
    /// The settled-pressure iteration stopped at its bound before converging.
    NOT_CONVERGED = 5, "not_converged";
    /// At the settled reference temperature the same content would be liquid or
    /// two-phase: the settled pressure is not valid.
    SETTLED_TWO_PHASE = 6, "settled_two_phase";
    /// The vessel is full of liquid (compressed liquid, no vapour space): the
    /// pressure lies well above the gas's vapour pressure at this temperature
    /// (more than 1/8 above the model's saturation curve, beyond what sensor
    /// and temperature errors explain), below the critical temperature. The
    /// content outputs are not valid, and the pressure of a liquid-full
    /// vessel rises by several bar per kelvin: a burst hazard. Set instead of
    /// [`Status::TWO_PHASE`], which means liquid and vapour together (the
    /// pressure is at the vapour pressure and says nothing about the
    /// content). Either way the content must be found by weighing.
    LIQUID_FULL = 7, "liquid_full";
    /// Alarm: the gas has not settled after a fast fill or draw; pressure and
    /// content still drift towards the predicted settled values.
    NOT_SETTLED = 16, "not_settled";
    /// Alarm: content is lost faster than allowed (standby: any loss; in use:
    /// loss beyond the declared or learned draw), judged on the
    /// temperature-compensated content.
    LEAK = 17, "leak";
    /// Alarm: content fraction or time to empty below its threshold.
    LOW_CONTENT = 18, "low_content";
    /// Alarm: content above the rated content (pressure above the rated
    /// pressure corrected to the present temperature) or pressure above 5/4
    /// of the service pressure.
    OVER_PRESSURE = 19, "over_pressure";
    /// Alarm: gas temperature above its limit.
    OVER_TEMPERATURE = 20, "over_temperature";
    /// Alarm: gas temperature below its limit.
    UNDER_TEMPERATURE = 21, "under_temperature";
    /// Alarm: the sensor front end has reported a fault (any flag of
    /// [`Status::SENSOR_RANGE`]) for longer than the debounce time.
    SENSOR_FAULT = 22, "sensor_fault";
    /// Over-fill, judged on this one estimate (no debounce, no settling
    /// prediction): the content is above [`OVER_FILL_FRACTION`] of the rated
    /// content, which is the same as the pressure being above the pressure
    /// the rated content develops at the present temperature (the rated
    /// pressure corrected to this temperature) by about that much. Set by
    /// the content estimate; the debounced alarm is
    /// [`Status::OVER_PRESSURE`].
    ///
    /// [`OVER_FILL_FRACTION`]: crate::content::OVER_FILL_FRACTION
    OVER_FILL = 23, "over_fill";
    /// A stored record's newest copy is unreadable: an older copy is in use.
    CONFIG_FALLBACK = 24, "config_fallback";
    /// No stored copy of a record is readable: its safe defaults are in use,
    /// and figures that depend on it mean nothing for a real tank.
    CONFIG_DEFAULT = 25, "config_default";
    /// Configuration storage holds unreadable bytes (an interrupted write or
    /// a flash fault); the values in use are still checked copies.
    STORAGE_DAMAGED = 26, "storage_damaged";
    /// A configuration write failed; the previous value is kept.
    STORAGE_WRITE_FAILED = 27, "storage_write_failed";
    /// Signed commands are refused for a while after failed signatures.
    AUTH_LOCKED_OUT = 28, "auth_locked_out";
    /// The stored setup, calibrations and gas model cannot be used together
    /// (no gas model for the setup's gas in this build, a setup the model
    /// refuses, or a sensor configuration that cannot be prepared): the
    /// device sends no content figures until the configuration is fixed.
    CONFIG_UNUSABLE = 29, "config_unusable";
    /// The device restarted after a fault (panic or watchdog); the reason was
    /// reported in its boot message. Latched until alarms are cleared by a
    /// signed command.
    RESTARTED_AFTER_FAULT = 30, "restarted_after_fault";
    /// A mixture is outside the single-phase range of its gas model: below
    /// its cricondentherm, at or above the dew pressure where a liquid can
    /// form (the stability limit found at build time by the tangent-plane
    /// test on GERG-2008). Liquid may have dropped out: pressure does not tell
    /// the content, and the content outputs are not valid. (Pure gases raise
    /// [`Status::TWO_PHASE`] instead.) A content flag in the device range:
    /// bit 31 was the last free bit (see the module documentation).
    CONDENSATION_RISK = 31, "condensation_risk";
    /// A resistive sensor or its wiring is open (resistance above the open
    /// threshold, or the converter driven to its upper rail by an open input).
    SENSOR_OPEN_CIRCUIT = 8, "sensor_open_circuit";
    /// A resistive sensor or its wiring is shorted (resistance below the short
    /// threshold).
    SENSOR_SHORT_CIRCUIT = 9, "sensor_short_circuit";
    /// The converter code is at a rail or outside the converter's range, or the
    /// reading lies beyond what the conversion can represent: the value is held
    /// at a limit and is not a measurement.
    SENSOR_SATURATED = 10, "sensor_saturated";
    /// The reading is below the sensor's measuring range (including a negative
    /// absolute pressure clamped to zero, and a 4–20 mA loop between 3.6 and
    /// 3.8 mA or in its failure band before the persistence time).
    SENSOR_UNDER_RANGE = 11, "sensor_under_range";
    /// The reading is above the sensor's measuring range (beyond full scale,
    /// or a loop between 20.5 and 21.0 mA or in its failure band before the
    /// persistence time).
    SENSOR_OVER_RANGE = 12, "sensor_over_range";
    /// A 4–20 mA transmitter signals failure (NAMUR NE 43: ≤ 3.6 mA or
    /// ≥ 21.0 mA for longer than the configured persistence time).
    SENSOR_LOOP_FAILURE = 13, "sensor_loop_failure";
    /// The reading changed faster than the configured plausible rate.
    SENSOR_RATE_IMPLAUSIBLE = 14, "sensor_rate_implausible";
    /// The reading has not moved beyond the configured band for longer than
    /// the configured time (frozen converter or sensor).
    SENSOR_STUCK = 15, "sensor_stuck";
}

impl Status {
    /// No flag set.
    pub const OK: Status = Status(0);

    /// Every bit of the content-and-model range (bits 0–7).
    pub const CONTENT_RANGE: Status = Status(0x0000_00FF);
    /// Every bit of the sensor range (bits 8–15): any of them means a sensor
    /// reading is faulty or implausible.
    pub const SENSOR_RANGE: Status = Status(0x0000_FF00);
    /// Every bit of the tracking-and-alarm range (bits 16–23).
    pub const TRACKING_RANGE: Status = Status(0x00FF_0000);
    /// Every bit of the device range (bits 24–30; bit 31 is the content flag
    /// [`Status::CONDENSATION_RISK`]).
    pub const DEVICE_RANGE: Status = Status(0x7F00_0000);

    /// Flags after which the content outputs (density, mass, amount, standard
    /// volume, settled pressure, fill fraction, and Z) must not be shown as
    /// valid numbers: the vessel holds liquid (two-phase or liquid-full), a
    /// mixture may have condensed ([`Status::CONDENSATION_RISK`]), or
    /// the sample lay outside the envelope (the outputs are then those of
    /// the envelope's edge, which is not where the tank is). The tracker
    /// leaves such samples out of its blocks; its alarms still judge them
    /// (a pressure clamped at 1000 bar is above 5/4 of every rated pressure
    /// up to 800 bar).
    pub const CONTENT_INVALID: Status = Status(
        Status::TWO_PHASE.0
            | Status::LIQUID_FULL.0
            | Status::PRESSURE_OUTSIDE_ENVELOPE.0
            | Status::TEMPERATURE_OUTSIDE_ENVELOPE.0
            | Status::CONDENSATION_RISK.0,
    );
    /// Either flag of a state outside the single-phase gas region: a pure
    /// gas's [`Status::TWO_PHASE`] or a mixture's
    /// [`Status::CONDENSATION_RISK`].
    pub const NOT_SINGLE_PHASE: Status = Status(Status::TWO_PHASE.0 | Status::CONDENSATION_RISK.0);

    /// The raw bits, for the wire.
    pub const fn bits(self) -> u32 {
        self.0
    }

    /// Rebuilds a status from raw bits (unknown bits are kept).
    pub const fn from_bits(bits: u32) -> Status {
        Status(bits)
    }

    /// True when no flag is set.
    pub const fn is_ok(self) -> bool {
        self.0 == 0
    }

    /// True when every flag of `other` is set in `self`.
    pub const fn contains(self, other: Status) -> bool {
        self.0 & other.0 == other.0
    }

    /// True when any flag of `other` is set in `self`.
    pub const fn intersects(self, other: Status) -> bool {
        self.0 & other.0 != 0
    }

    /// `self` without the flags of `other`.
    pub const fn without(self, other: Status) -> Status {
        Status(self.0 & !other.0)
    }

    /// The stable names of the flags that are set, in bit order. Bits without
    /// a name are skipped (see [`Status::unnamed_bits`]).
    pub fn names(self) -> impl Iterator<Item = &'static str> {
        Status::NAMED
            .iter()
            .filter(move |(flag, _)| self.contains(*flag))
            .map(|(_, name)| *name)
    }

    /// Bits that are set but have no name in this version.
    pub fn unnamed_bits(self) -> u32 {
        let named = Status::NAMED.iter().fold(0, |acc, (f, _)| acc | f.0);
        self.0 & !named
    }

    /// Looks a flag up by its stable name.
    pub fn from_name(name: &str) -> Option<Status> {
        Status::NAMED
            .iter()
            .find(|(_, n)| *n == name)
            .map(|(f, _)| *f)
    }
}

impl BitOr for Status {
    type Output = Status;
    fn bitor(self, rhs: Status) -> Status {
        Status(self.0 | rhs.0)
    }
}

impl BitAnd for Status {
    type Output = Status;
    fn bitand(self, rhs: Status) -> Status {
        Status(self.0 & rhs.0)
    }
}

impl BitOrAssign for Status {
    fn bitor_assign(&mut self, rhs: Status) {
        self.0 |= rhs.0;
    }
}

impl fmt::Debug for Status {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("Status(")?;
        fmt::Display::fmt(self, f)?;
        f.write_str(")")
    }
}

impl fmt::Display for Status {
    /// Comma-separated flag names, or `ok`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.is_ok() {
            return f.write_str("ok");
        }
        let mut first = true;
        for name in self.names() {
            if !first {
                f.write_str(",")?;
            }
            f.write_str(name)?;
            first = false;
        }
        let rest = self.unnamed_bits();
        if rest != 0 {
            if !first {
                f.write_str(",")?;
            }
            write!(f, "bits_{rest:#x}")?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_snake_case_and_bits_distinct() {
        let mut seen = 0u32;
        for (i, (flag, name)) in Status::NAMED.iter().enumerate() {
            assert_eq!(flag.bits().count_ones(), 1);
            assert_eq!(seen & flag.bits(), 0, "bit reused by {name}");
            seen |= flag.bits();
            assert!(name.chars().all(|c| c.is_ascii_lowercase() || c == '_'));
            assert_eq!(Status::from_name(name), Some(*flag));
            for (_, other) in &Status::NAMED[i + 1..] {
                assert_ne!(name, other);
            }
        }
    }

    #[test]
    fn display_lists_flags() {
        let s = Status::SATURATED | Status::TWO_PHASE;
        assert_eq!(s.to_string(), "saturated,two_phase");
        assert_eq!(Status::OK.to_string(), "ok");
        assert_eq!(
            (Status::CONDENSATION_RISK | Status::TWO_PHASE).to_string(),
            "two_phase,condensation_risk"
        );
    }

    #[test]
    fn every_bit_is_named_and_the_ranges_split_the_word() {
        // Bit 31 was the last free bit: no bit is left without a name.
        assert_eq!(Status::from_bits(u32::MAX).unnamed_bits(), 0);
        let ranges = [
            Status::CONTENT_RANGE,
            Status::SENSOR_RANGE,
            Status::TRACKING_RANGE,
            Status::DEVICE_RANGE,
            Status::CONDENSATION_RISK,
        ];
        assert_eq!(ranges.iter().fold(0, |a, r| a | r.bits()), u32::MAX);
        assert_eq!(
            ranges.iter().map(|r| r.bits().count_ones()).sum::<u32>(),
            32
        );
        assert!(!Status::DEVICE_RANGE.intersects(Status::CONDENSATION_RISK));
        assert!(Status::CONTENT_INVALID.contains(Status::NOT_SINGLE_PHASE));
    }
}
