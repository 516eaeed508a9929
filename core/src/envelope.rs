//! The operating envelope: where every output is guaranteed not to overflow
//! and the fixed-point path is tested against the float path.
//!
//! Samples outside the envelope are clamped to its edge and flagged
//! ([`Status::PRESSURE_OUTSIDE_ENVELOPE`](crate::Status::PRESSURE_OUTSIDE_ENVELOPE),
//! [`Status::TEMPERATURE_OUTSIDE_ENVELOPE`](crate::Status::TEMPERATURE_OUTSIDE_ENVELOPE)),
//! so the arithmetic never leaves its proven range; both flags are in
//! [`Status::CONTENT_INVALID`](crate::Status::CONTENT_INVALID): the content
//! computed at the edge is not the tank's and is never shown as a number.
//! Configuration outside its limits is refused with
//! [`Error::OutOfRange`](crate::Error::OutOfRange).
//!
//! The fixed-point bounds are the `f64` bounds rounded outwards, so any `f64`
//! value inside the envelope rounds to a fixed-point value inside it too.

use crate::fx;

/// Lowest absolute pressure, Pa.
pub const PRESSURE_MIN_PA: f64 = 0.0;
/// Highest absolute pressure, Pa (1000 bar).
pub const PRESSURE_MAX_PA: f64 = 1.0e8;
/// Lowest gas temperature, K (−60 °C).
pub const TEMPERATURE_MIN_K: f64 = 213.15;
/// Highest gas temperature, K (+150 °C).
pub const TEMPERATURE_MAX_K: f64 = 423.15;

/// Smallest water capacity accepted, m³ (0.1 L).
pub const CAPACITY_MIN_M3: f64 = 1.0e-4;
/// Largest water capacity accepted, m³.
pub const CAPACITY_MAX_M3: f64 = 100.0;
/// Lowest rated pressure accepted, Pa (1 bar).
pub const RATED_PRESSURE_MIN_PA: f64 = 1.0e5;
/// Largest elastic expansion accepted, 1/MPa (10 % at 1000 bar).
pub const ELASTIC_EXPANSION_MAX_PER_MPA: f64 = 1.0e-3;
/// Largest thermal expansion magnitude accepted, 1/K.
pub const THERMAL_EXPANSION_MAX_PER_K: f64 = 1.0e-4;
/// Lowest standard-condition pressure accepted, Pa.
pub const STANDARD_PRESSURE_MIN_PA: f64 = 5.0e4;
/// Highest standard-condition pressure accepted, Pa.
pub const STANDARD_PRESSURE_MAX_PA: f64 = 2.0e5;

/// Highest absolute pressure, fixed point.
pub const PRESSURE_MAX: fx::Pressure = fx::Pressure::from_bits(1_600_000_000);
/// Lowest gas temperature, fixed point (213.15 K rounded down).
pub const TEMPERATURE_MIN: fx::Temperature = fx::Temperature::from_bits(13_968_998);
/// Highest gas temperature, fixed point (423.15 K rounded up).
pub const TEMPERATURE_MAX: fx::Temperature = fx::Temperature::from_bits(27_731_559);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fixed_bounds_enclose_f64_bounds() {
        assert_eq!(PRESSURE_MAX.to_num::<f64>(), PRESSURE_MAX_PA);
        let tmin = TEMPERATURE_MIN.to_num::<f64>();
        let tmax = TEMPERATURE_MAX.to_num::<f64>();
        assert!(tmin <= TEMPERATURE_MIN_K && TEMPERATURE_MIN_K - tmin < 1.0 / 65536.0);
        assert!(tmax >= TEMPERATURE_MAX_K && tmax - TEMPERATURE_MAX_K < 1.0 / 65536.0);
    }
}
