//! The sample pipeline, float form (generic over [`Real`]; `f64` is the
//! reference). Same steps and names as [`super::fixed`]; the method is in
//! [`super`].

use super::{CompensationCache, RawSample, bucket_code, signed_code, temperature_bits};
use crate::content::float::Estimator;
use crate::model::Compressibility;
use crate::sensor::bridge::float::{Bridge, Compensation};
use crate::sensor::calibration::float::Corrector;
use crate::sensor::calibration::{CalibrationRecord, SensorConfig};
use crate::sensor::current_loop::LoopState;
use crate::sensor::current_loop::float::{Loop, Reading};
use crate::sensor::ntc::float::Ntc;
use crate::sensor::rtd::float::Rtd;
use crate::sensor::{PressureReading, TemperatureReading, VALUE_INVALID};
use crate::time::Instant;
use crate::track::float::{Track, TrackConfig, Tracker};
use crate::{Error, Real, Setup, Status};

/// The temperature front-end.
#[derive(Clone, Debug)]
enum TemperatureInput<F> {
    Rtd(Rtd<F>),
    Ntc(Ntc<F>),
}

impl<F: Real> TemperatureInput<F> {
    fn read(&self, code: u32) -> TemperatureReading<F> {
        match self {
            TemperatureInput::Rtd(r) => r.read(code),
            TemperatureInput::Ntc(n) => n.read(code),
        }
    }
}

/// The pressure front-end and its state.
#[allow(
    clippy::large_enum_variant,
    reason = "one per pipeline: the bridge keeps its compensations in place"
)]
#[derive(Clone, Debug)]
enum PressureInput<F> {
    /// A bridge with the compensations of the latest temperature buckets.
    Bridge {
        bridge: Bridge<F>,
        bits: u8,
        bipolar: bool,
        reference_k: F,
        compensation: CompensationCache<Compensation<F>>,
    },
    /// A 4–20 mA loop with its NE 43 persistence state.
    Loop {
        input: Loop<F>,
        state: LoopState<Reading<F>>,
    },
}

/// One sample's converted readings (float form).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Readings<F> {
    /// Pressure after the calibration correction.
    pub pressure: PressureReading<F, F>,
    /// Temperature after the calibration correction.
    pub temperature: TemperatureReading<F>,
    /// Absolute pressure before the correction.
    pub pressure_uncorrected: F,
    /// Temperature before the correction.
    pub temperature_uncorrected: F,
}

impl<F: Real> Readings<F> {
    /// Both channels' sensor flags.
    pub fn status(&self) -> Status {
        self.pressure.status | self.temperature.status
    }
}

/// Raw codes to tracker outputs, float form.
#[derive(Clone, Debug)]
pub struct Pipeline<F: Real, M> {
    temperature: TemperatureInput<F>,
    temperature_bits: u8,
    temperature_correction: Corrector<F>,
    pressure: PressureInput<F>,
    pressure_correction: Corrector<F>,
    barometric: F,
    tracker: Tracker<F, M>,
    last_valid: Option<Readings<F>>,
}

/// The fixed path's format limit of a temperature, K (`U16F16`).
const TEMPERATURE_FORMAT_MAX: f64 = 65_536.0;
/// The fixed path's format limit of a pressure, Pa (`U28F4`).
const PRESSURE_FORMAT_MAX: f64 = 268_435_456.0;

/// A corrected value limited as the fixed path's formats limit it:
/// negative values are 0 and under range, values beyond the format
/// saturate.
fn clamp<F: Real>(v: F, max: f64) -> (F, Status) {
    if v < F::ZERO {
        (F::ZERO, Status::SENSOR_UNDER_RANGE)
    } else if v > F::lit(max) {
        (F::lit(max), Status::SENSOR_SATURATED)
    } else {
        (v, Status::OK)
    }
}

impl<F: Real, M: Compressibility<F>> Pipeline<F, M> {
    /// Prepares the front-ends, corrections, estimator and tracker from the
    /// same records as the fixed path.
    pub fn new(
        setup: Setup<F>,
        model: M,
        pressure: &CalibrationRecord,
        temperature: &CalibrationRecord,
        track: TrackConfig<F>,
        barometric: F,
    ) -> Result<Self, Error> {
        let temperature_input = match &temperature.sensor {
            SensorConfig::Rtd(c) => TemperatureInput::Rtd(Rtd::new(c)?),
            SensorConfig::Ntc(c) => TemperatureInput::Ntc(Ntc::new(c)?),
            _ => return Err(Error::OutOfRange("temperature sensor kind")),
        };
        let pressure_input = match &pressure.sensor {
            SensorConfig::Bridge(c) => PressureInput::Bridge {
                bridge: Bridge::new(c)?,
                bits: c.adc_bits,
                bipolar: c.bipolar,
                reference_k: F::lit(crate::fx::to_f64(c.reference_k)),
                compensation: CompensationCache::new(),
            },
            SensorConfig::Loop(c) => PressureInput::Loop {
                input: Loop::new(c)?,
                state: LoopState::new(),
            },
            _ => return Err(Error::OutOfRange("pressure sensor kind")),
        };
        let est = Estimator::new(setup, model)?;
        Ok(Pipeline {
            temperature: temperature_input,
            temperature_bits: temperature_bits(&temperature.sensor),
            temperature_correction: Corrector::new(&temperature.correction)?,
            pressure: pressure_input,
            pressure_correction: Corrector::new(&pressure.correction)?,
            barometric,
            tracker: Tracker::new(est, track)?,
            last_valid: None,
        })
    }

    /// The tracker.
    pub fn tracker(&self) -> &Tracker<F, M> {
        &self.tracker
    }

    /// The tracker, to clear its alarms or relearn its draw.
    pub fn tracker_mut(&mut self) -> &mut Tracker<F, M> {
        &mut self.tracker
    }

    /// The readings of the latest sample whose values were measurements.
    pub fn last_valid(&self) -> Option<&Readings<F>> {
        self.last_valid.as_ref()
    }

    /// Steps 1–3: the codes to corrected readings.
    pub fn convert(&mut self, at: Instant, raw: &RawSample) -> Result<Readings<F>, Error> {
        // 1. temperature
        let t_raw = self.temperature.read(raw.temperature);
        let (t, t_status) = clamp(
            self.temperature_correction.apply(t_raw.temperature_k)?,
            TEMPERATURE_FORMAT_MAX,
        );
        let temperature = TemperatureReading {
            temperature_k: t,
            status: t_raw.status | t_status,
        };
        // 2. compensation and 3. pressure
        let p_raw = match &mut self.pressure {
            PressureInput::Bridge {
                bridge,
                bits,
                bipolar,
                reference_k,
                compensation,
            } => {
                let (bucket, centre) = bucket_code(raw.temperature, self.temperature_bits);
                let comp = compensation.get_or_try(bucket, || {
                    compensation_at(
                        bridge,
                        *reference_k,
                        &self.temperature,
                        &self.temperature_correction,
                        centre,
                    )
                })?;
                let code = signed_code(raw.pressure, *bits, *bipolar);
                bridge.read_compensated(code, &comp, self.barometric)?
            }
            PressureInput::Loop { input, state } => {
                input
                    .read(raw.pressure, self.barometric, at, state)?
                    .pressure
            }
        };
        let (p, p_status) = clamp(
            self.pressure_correction.apply(p_raw.pressure_pa)?,
            PRESSURE_FORMAT_MAX,
        );
        let pressure = PressureReading {
            pressure_pa: p,
            gauge_pa: p - self.barometric,
            status: p_raw.status | p_status,
        };
        let r = Readings {
            pressure,
            temperature,
            pressure_uncorrected: p_raw.pressure_pa,
            temperature_uncorrected: t_raw.temperature_k,
        };
        if !r.status().intersects(VALUE_INVALID) {
            self.last_valid = Some(r);
        }
        Ok(r)
    }

    /// One sample: steps 1–4.
    pub fn sample(&mut self, at: Instant, raw: &RawSample) -> Result<Track<F>, Error> {
        let r = self.convert(at, raw)?;
        self.tracker.update(
            at,
            r.pressure.pressure_pa,
            r.temperature.temperature_k,
            r.status(),
        )
    }
}

/// The bridge compensation at the temperature of a bucket's central code
/// (the bridge's reference temperature when that code is not a valid
/// reading).
fn compensation_at<F: Real>(
    bridge: &Bridge<F>,
    reference_k: F,
    input: &TemperatureInput<F>,
    correction: &Corrector<F>,
    centre: u32,
) -> Result<Compensation<F>, Error> {
    let r = input.read(centre);
    let t = if r.status.intersects(VALUE_INVALID) {
        reference_k
    } else {
        clamp(correction.apply(r.temperature_k)?, TEMPERATURE_FORMAT_MAX).0
    };
    bridge.compensation(t)
}
