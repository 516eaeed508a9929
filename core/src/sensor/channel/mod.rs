//! A sensor channel: a front-end, its calibration correction, the zero
//! offset taken on site and, for a bridge transducer, its temperature
//! compensation — a raw converter code to a reading with its flags.
//!
//! Two forms, with the same steps:
//!
//! * [`float::TemperatureChannel`] / [`float::PressureChannel`] (generic over
//!   [`Real`]; `f64` is the reference): the front-ends'
//!   equations evaluated as written ([`crate::sensor::rtd`],
//!   [`crate::sensor::ntc`], [`crate::sensor::bridge`],
//!   [`crate::sensor::current_loop`], [`crate::sensor::calibration`]);
//! * [`fixed::TemperatureChannel`] / [`fixed::PressureChannel`] (the
//!   device): the same channel *prepared* from the `f64` one on a host —
//!   the whole chain from code to corrected reading as a
//!   [`Curve`](crate::curve::Curve) of the code (for a bridge: the
//!   compensation as curves of the temperature and the pressure as a curve
//!   of the normalised signal), and the flags as a [`StatusMap`](fixed::StatusMap) of the
//!   input, located exactly on the `f64` channel. Per sample the device
//!   evaluates curves and compares integers; it never runs the front-ends'
//!   equations.
//!
//! # Steps
//!
//! 1. `temperature`: the temperature code through the front-end and the
//!    correction; the zero offset added; the value limited to the fixed
//!    path's format (negative: 0 and `sensor_under_range`; beyond
//!    65 536 K: `sensor_saturated`).
//! 2. `compensation`: a bridge is compensated at the gas temperature of
//!    the same sample (the transducer sits on the vessel), or at its
//!    reference temperature when the temperature reading is not a value
//!    (a flag of [`VALUE_INVALID`](crate::sensor::VALUE_INVALID)).
//! 3. `pressure`: the pressure code through the front-end (with the site's
//!    barometric pressure for gauge transducers, NAMUR NE 43 persistence
//!    for a 4–20 mA loop) and the correction of the absolute pressure; the
//!    zero offset added; limited to the format as above; the gauge
//!    pressure follows from the result.

pub mod fixed;
pub mod float;

use crate::{Real, Status};

/// One raw sample: the codes as the converters deliver them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RawSample {
    /// Pressure converter code (a bipolar converter's two's-complement code
    /// in its low `adc_bits` bits).
    pub pressure: u32,
    /// Temperature converter code.
    pub temperature: u32,
}

/// A bipolar converter's code as a signed value (sign taken from bit
/// `bits − 1`; higher bits ignored); a unipolar code as it is.
pub fn signed_code(code: u32, bits: u8, bipolar: bool) -> i32 {
    let bits = u32::from(bits.clamp(8, 24));
    if bipolar {
        let shift = 32 - bits;
        ((code << shift) as i32) >> shift
    } else {
        (code & ((1 << bits) - 1)) as i32
    }
}

/// The fixed path's format limit of a temperature, K (`U16F16`).
pub const TEMPERATURE_FORMAT_MAX: f64 = 65_536.0;
/// The fixed path's format limit of a pressure, Pa (`U28F4`).
pub const PRESSURE_FORMAT_MAX: f64 = 268_435_456.0;

/// A corrected value limited as the fixed path's formats limit it:
/// negative values are 0 and under range, values beyond the format
/// saturate.
pub fn limit<F: Real>(v: F, max: f64) -> (F, Status) {
    if v < F::ZERO {
        (F::ZERO, Status::SENSOR_UNDER_RANGE)
    } else if v > F::lit(max) {
        (F::lit(max), Status::SENSOR_SATURATED)
    } else {
        (v, Status::OK)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codes_are_signed() {
        assert_eq!(signed_code(0x00FF_FFFF, 24, true), -1);
        assert_eq!(signed_code(0x007F_FFFF, 24, true), 0x7F_FFFF);
        assert_eq!(signed_code(0xFF80_0000, 24, true), -0x80_0000);
        assert_eq!(signed_code(0x1234, 16, false), 0x1234);
        assert_eq!(signed_code(0x1_1234, 16, false), 0x1234);
    }
}
