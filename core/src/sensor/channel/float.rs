//! Sensor channels, float form (generic over [`Real`]; `f64` is the
//! reference the device's prepared channels are built from and tested
//! against). Steps in [`super`].

use super::{PRESSURE_FORMAT_MAX, TEMPERATURE_FORMAT_MAX, limit, signed_code};
use crate::error::{Measured, SensorSetting};
use crate::sensor::bridge::float::Bridge;
use crate::sensor::calibration::float::Corrector;
use crate::sensor::calibration::{CalibrationRecord, SensorConfig};
use crate::sensor::current_loop::LoopState;
use crate::sensor::current_loop::float::{Loop, Reading};
use crate::sensor::ntc::float::Ntc;
use crate::sensor::rtd::float::Rtd;
use crate::sensor::{PressureReading, TemperatureReading, VALUE_INVALID};
use crate::time::Instant;
use crate::{Error, Real, fx};

/// The temperature front-end.
#[derive(Clone, Debug)]
pub enum TemperatureFront<F> {
    /// A platinum resistance thermometer (IEC 60751).
    Rtd(Rtd<F>),
    /// A thermistor.
    Ntc(Ntc<F>),
}

impl<F: Real> TemperatureFront<F> {
    /// The front-end's reading of a code (before the correction).
    pub fn read(&self, code: u32) -> TemperatureReading<F> {
        match self {
            TemperatureFront::Rtd(r) => r.read(code),
            TemperatureFront::Ntc(n) => n.read(code),
        }
    }
}

/// A temperature channel: front-end, correction, zero offset.
#[derive(Clone, Debug)]
pub struct TemperatureChannel<F> {
    front: TemperatureFront<F>,
    correction: Corrector<F>,
    offset: F,
    full: u32,
}

impl<F: Real> TemperatureChannel<F> {
    /// The channel of a temperature sensor's calibration record.
    pub fn new(record: &CalibrationRecord) -> Result<Self, Error> {
        let (front, bits) = match &record.sensor {
            SensorConfig::Rtd(c) => (TemperatureFront::Rtd(Rtd::new(c)?), c.front_end.adc_bits),
            SensorConfig::Ntc(c) => (TemperatureFront::Ntc(Ntc::new(c)?), c.front_end.adc_bits),
            _ => {
                return Err(Error::OutOfRange(
                    SensorSetting::TemperatureSensorKind.into(),
                ));
            }
        };
        Ok(TemperatureChannel {
            front,
            correction: Corrector::new(&record.correction)?,
            offset: F::ZERO,
            full: 1 << bits.clamp(8, 24),
        })
    }

    /// Sets the zero offset added after the correction, K.
    pub fn set_offset(&mut self, offset_k: F) {
        self.offset = offset_k;
    }

    /// The zero offset, K.
    pub fn offset(&self) -> F {
        self.offset
    }

    /// Codes of the converter: `0 .. full`.
    pub fn full_code(&self) -> u32 {
        self.full
    }

    /// The front-end.
    pub fn front(&self) -> &TemperatureFront<F> {
        &self.front
    }

    /// The correction.
    pub fn correction(&self) -> &Corrector<F> {
        &self.correction
    }

    /// Step 1: a code to the corrected temperature with its flags.
    pub fn read(&self, code: u32) -> Result<TemperatureReading<F>, Error> {
        let raw = self.front.read(code);
        let corrected = self.correction.apply(raw.temperature_k)? + self.offset;
        let (t, status) = limit(corrected, TEMPERATURE_FORMAT_MAX);
        Ok(TemperatureReading {
            temperature_k: t,
            status: raw.status | status,
        })
    }
}

/// The pressure front-end and its state.
#[derive(Clone, Debug)]
pub enum PressureFront<F> {
    /// A bridge transducer on a converter.
    Bridge {
        /// The bridge.
        bridge: Bridge<F>,
        /// Converter bits.
        bits: u8,
        /// Two's-complement codes.
        bipolar: bool,
        /// The temperature the compensation uses when the sample's
        /// temperature is not a value, K.
        reference_k: F,
    },
    /// A 4–20 mA loop with its NE 43 persistence state.
    Loop {
        /// The loop input.
        input: Loop<F>,
        /// The persistence state.
        state: LoopState<Reading<F>>,
    },
}

/// A pressure channel: front-end, correction, zero offset, barometric
/// pressure.
#[derive(Clone, Debug)]
pub struct PressureChannel<F> {
    front: PressureFront<F>,
    correction: Corrector<F>,
    barometric: F,
    offset: F,
}

impl<F: Real> PressureChannel<F> {
    /// The channel of a pressure sensor's calibration record, with the
    /// site's barometric pressure (Pa).
    pub fn new(record: &CalibrationRecord, barometric_pa: F) -> Result<Self, Error> {
        let front = match &record.sensor {
            SensorConfig::Bridge(c) => PressureFront::Bridge {
                bridge: Bridge::new(c)?,
                bits: c.adc_bits,
                bipolar: c.bipolar,
                reference_k: F::lit(fx::to_f64(c.reference_k)),
            },
            SensorConfig::Loop(c) => PressureFront::Loop {
                input: Loop::new(c)?,
                state: LoopState::new(),
            },
            _ => return Err(Error::OutOfRange(SensorSetting::PressureSensorKind.into())),
        };
        Ok(PressureChannel {
            front,
            correction: Corrector::new(&record.correction)?,
            barometric: crate::sensor::finite(barometric_pa, Measured::BarometricPressure)?,
            offset: F::ZERO,
        })
    }

    /// Sets the zero offset added after the correction, Pa.
    pub fn set_offset(&mut self, offset_pa: F) {
        self.offset = offset_pa;
    }

    /// The zero offset, Pa.
    pub fn offset(&self) -> F {
        self.offset
    }

    /// The barometric pressure, Pa.
    pub fn barometric(&self) -> F {
        self.barometric
    }

    /// The front-end.
    pub fn front(&self) -> &PressureFront<F> {
        &self.front
    }

    /// The correction.
    pub fn correction(&self) -> &Corrector<F> {
        &self.correction
    }

    /// Steps 2 and 3: a code to the corrected pressure with its flags, the
    /// bridge compensated at `temperature` (the sample's corrected
    /// temperature reading).
    pub fn read(
        &mut self,
        at: Instant,
        code: u32,
        temperature: &TemperatureReading<F>,
    ) -> Result<PressureReading<F, F>, Error> {
        let raw = match &mut self.front {
            PressureFront::Bridge {
                bridge,
                bits,
                bipolar,
                reference_k,
            } => {
                let t = if temperature.status.intersects(VALUE_INVALID) {
                    *reference_k
                } else {
                    temperature.temperature_k
                };
                let comp = bridge.compensation(t)?;
                bridge.read_compensated(
                    signed_code(code, *bits, *bipolar),
                    &comp,
                    self.barometric,
                )?
            }
            PressureFront::Loop { input, state } => {
                input.read(code, self.barometric, at, state)?.pressure
            }
        };
        let corrected = self.correction.apply(raw.pressure_pa)? + self.offset;
        let (p, status) = limit(corrected, PRESSURE_FORMAT_MAX);
        Ok(PressureReading {
            pressure_pa: p,
            gauge_pa: p - self.barometric,
            status: raw.status | status,
        })
    }
}
