//! Gauge ↔ absolute pressure with a configured or measured barometric
//! pressure.
//!
//! `absolute = gauge + barometric`. An absolute pressure below zero can only
//! come from noise or an offset error: it is clamped to zero and flagged
//! [`Status::SENSOR_UNDER_RANGE`]. A measured barometric pressure outside
//! [`BAROMETRIC_MIN_PA`] … [`BAROMETRIC_MAX_PA`] is not believed: the
//! configured value is used instead and the barometer's reading is flagged
//! under or over range.
//!
//! Gauge pressure uses [`fx::GaugePressure`] (`I28F4`, ±1342 bar, 0.0625 Pa).

use crate::error::Measured;
use crate::sensor::{PressureKind, PressureReading};
use crate::{Error, Status, fx};

/// Lowest barometric pressure believed, Pa (about 5 500 m altitude).
pub const BAROMETRIC_MIN_PA: f64 = 50_000.0;
/// Highest barometric pressure believed, Pa (below sea level, storms).
pub const BAROMETRIC_MAX_PA: f64 = 110_000.0;

/// The fixed-point path.
pub mod fixed {
    use super::*;

    /// [`BAROMETRIC_MIN_PA`] in `Pressure` bits.
    const BARO_MIN: u32 = 800_000;
    /// [`BAROMETRIC_MAX_PA`] in `Pressure` bits.
    const BARO_MAX: u32 = 1_760_000;

    /// The barometric pressure to use: the measured one when it is given
    /// and plausible, else the configured one (the status then flags the
    /// barometer's reading).
    pub fn barometric(
        measured: Option<fx::Pressure>,
        configured: fx::Pressure,
    ) -> (fx::Pressure, Status) {
        match measured {
            None => (configured, Status::OK),
            Some(b) if b.to_bits() < BARO_MIN => (configured, Status::SENSOR_UNDER_RANGE),
            Some(b) if b.to_bits() > BARO_MAX => (configured, Status::SENSOR_OVER_RANGE),
            Some(b) => (b, Status::OK),
        }
    }

    /// A pressure reading from a value of the given kind (Pa at 2^-4, signed).
    pub fn reading(
        kind: PressureKind,
        value: i64,
        barometric: fx::Pressure,
    ) -> PressureReading<fx::Pressure, fx::GaugePressure> {
        let b = barometric.to_bits() as i64;
        let (abs, gauge) = match kind {
            PressureKind::Absolute => (value, value - b),
            PressureKind::Gauge => (value + b, value),
        };
        let mut status = Status::OK;
        let abs = if abs < 0 {
            status |= Status::SENSOR_UNDER_RANGE;
            0
        } else if abs > u32::MAX as i64 {
            status |= Status::SENSOR_SATURATED;
            u32::MAX
        } else {
            abs as u32
        };
        let (gauge, clamped) = crate::sensor::clamp_i32(gauge);
        if clamped {
            status |= Status::SENSOR_SATURATED;
        }
        PressureReading {
            pressure_pa: fx::Pressure::from_bits(abs),
            gauge_pa: fx::GaugePressure::from_bits(gauge),
            status,
        }
    }

    /// Absolute pressure from gauge pressure.
    pub fn absolute(
        gauge: fx::GaugePressure,
        barometric: fx::Pressure,
    ) -> PressureReading<fx::Pressure, fx::GaugePressure> {
        reading(PressureKind::Gauge, gauge.to_bits() as i64, barometric)
    }

    /// Gauge pressure from absolute pressure.
    pub fn gauge(
        absolute: fx::Pressure,
        barometric: fx::Pressure,
    ) -> PressureReading<fx::Pressure, fx::GaugePressure> {
        reading(
            PressureKind::Absolute,
            absolute.to_bits() as i64,
            barometric,
        )
    }
}

/// The float path (generic over [`Real`](crate::Real)).
pub mod float {
    use super::*;
    use crate::Real;
    use crate::sensor::finite;

    /// The barometric pressure to use: the measured one when it is given
    /// and plausible, else the configured one (the status then flags the
    /// barometer's reading). NaN or infinite inputs are errors.
    pub fn barometric<F: Real>(measured: Option<F>, configured: F) -> Result<(F, Status), Error> {
        let configured = finite(configured, Measured::BarometricPressure)?;
        Ok(match measured {
            None => (configured, Status::OK),
            Some(b) => {
                let b = finite(b, Measured::MeasuredBarometricPressure)?;
                if b < F::lit(BAROMETRIC_MIN_PA) {
                    (configured, Status::SENSOR_UNDER_RANGE)
                } else if b > F::lit(BAROMETRIC_MAX_PA) {
                    (configured, Status::SENSOR_OVER_RANGE)
                } else {
                    (b, Status::OK)
                }
            }
        })
    }

    /// A pressure reading from a value of the given kind, Pa. The limits
    /// are those of the fixed formats, so both paths flag alike.
    pub fn reading<F: Real>(kind: PressureKind, value: F, barometric: F) -> PressureReading<F, F> {
        let (abs, gauge) = match kind {
            PressureKind::Absolute => (value, value - barometric),
            PressureKind::Gauge => (value + barometric, value),
        };
        let mut status = Status::OK;
        let abs_max = F::lit(fx::to_f64(fx::Pressure::MAX));
        let abs = if abs < F::ZERO {
            status |= Status::SENSOR_UNDER_RANGE;
            F::ZERO
        } else if abs > abs_max {
            status |= Status::SENSOR_SATURATED;
            abs_max
        } else {
            abs
        };
        let (g_min, g_max) = (
            F::lit(fx::to_f64(fx::GaugePressure::MIN)),
            F::lit(fx::to_f64(fx::GaugePressure::MAX)),
        );
        if gauge < g_min || gauge > g_max {
            status |= Status::SENSOR_SATURATED;
        }
        PressureReading {
            pressure_pa: abs,
            gauge_pa: gauge.clamp_to(g_min, g_max),
            status,
        }
    }

    /// Absolute pressure from gauge pressure. NaN or infinite inputs are errors.
    pub fn absolute<F: Real>(gauge: F, barometric: F) -> Result<PressureReading<F, F>, Error> {
        let g = finite(gauge, Measured::GaugePressure)?;
        let b = finite(barometric, Measured::BarometricPressure)?;
        Ok(reading(PressureKind::Gauge, g, b))
    }

    /// Gauge pressure from absolute pressure. NaN or infinite inputs are errors.
    pub fn gauge<F: Real>(absolute: F, barometric: F) -> Result<PressureReading<F, F>, Error> {
        let p = finite(absolute, Measured::AbsolutePressure)?;
        let b = finite(barometric, Measured::BarometricPressure)?;
        Ok(reading(PressureKind::Absolute, p, b))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn negative_absolute_clamps_and_flags() {
        let b = fx::Pressure::from_num(101_325);
        let r = fixed::absolute(fx::GaugePressure::from_num(-101_400), b);
        assert_eq!(r.pressure_pa, fx::Pressure::ZERO);
        assert_eq!(r.status, Status::SENSOR_UNDER_RANGE);
        let r = float::absolute(-101_400.0, 101_325.0).unwrap();
        assert_eq!(r.pressure_pa, 0.0);
        assert_eq!(r.status, Status::SENSOR_UNDER_RANGE);
        let r = fixed::gauge(fx::Pressure::from_num(200e5), b);
        assert_eq!(r.gauge_pa, fx::GaugePressure::from_num(200e5 - 101_325.0));
        assert!(r.status.is_ok());
        assert!(float::gauge(f64::NAN, 1e5).is_err());
        assert!(float::absolute(1e5, f64::INFINITY).is_err());
    }

    #[test]
    fn implausible_barometer_falls_back() {
        let conf = fx::Pressure::from_num(101_325);
        let (b, s) = fixed::barometric(Some(fx::Pressure::from_num(20_000)), conf);
        assert_eq!((b, s), (conf, Status::SENSOR_UNDER_RANGE));
        let (b, s) = fixed::barometric(Some(fx::Pressure::from_num(95_000)), conf);
        assert_eq!((b, s), (fx::Pressure::from_num(95_000), Status::OK));
        let (b, s) = float::barometric(Some(120_000.0), 101_325.0).unwrap();
        assert_eq!((b, s), (101_325.0, Status::SENSOR_OVER_RANGE));
        assert!(float::barometric(Some(f64::NAN), 101_325.0).is_err());
    }
}
