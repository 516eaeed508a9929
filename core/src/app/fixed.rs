//! The sample pipeline, fixed-point form (the device path). Same steps and
//! names as [`super::float`]; the method is in [`super`].

use super::{CompensationCache, RawSample, bucket_code, signed_code, temperature_bits};
use crate::content::fixed::Estimator;
use crate::model::CompressibilityFx;
use crate::sensor::bridge::fixed::{Bridge, Compensation};
use crate::sensor::calibration::fixed::Corrector;
use crate::sensor::calibration::{CalibrationRecord, SensorConfig};
use crate::sensor::current_loop::LoopState;
use crate::sensor::current_loop::fixed::{Loop, Reading};
use crate::sensor::ntc::fixed::Ntc;
use crate::sensor::rtd::fixed::Rtd;
use crate::sensor::{PressureReading, TemperatureReading, VALUE_INVALID};
use crate::time::Instant;
use crate::track::fixed::{TrackConfigFx, TrackFx, Tracker};
use crate::{Error, SetupFx, Status, fx};

/// The temperature front-end.
#[derive(Clone, Debug)]
enum TemperatureInput {
    Rtd(Rtd),
    Ntc(Ntc),
}

impl TemperatureInput {
    fn read(&self, code: u32) -> TemperatureReading<fx::Temperature> {
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
enum PressureInput {
    /// A bridge with the compensations of the latest temperature buckets.
    Bridge {
        bridge: Bridge,
        bits: u8,
        bipolar: bool,
        reference_k: fx::Temperature,
        compensation: CompensationCache<Compensation>,
    },
    /// A 4–20 mA loop with its NE 43 persistence state.
    Loop {
        input: Loop,
        state: LoopState<Reading>,
    },
}

/// One sample's converted readings.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Readings {
    /// Pressure after the calibration correction.
    pub pressure: PressureReading<fx::Pressure, fx::GaugePressure>,
    /// Temperature after the calibration correction.
    pub temperature: TemperatureReading<fx::Temperature>,
    /// Absolute pressure before the correction.
    pub pressure_uncorrected: fx::Pressure,
    /// Temperature before the correction.
    pub temperature_uncorrected: fx::Temperature,
}

impl Readings {
    /// Both channels' sensor flags.
    pub fn status(&self) -> Status {
        self.pressure.status | self.temperature.status
    }
}

/// Raw codes to tracker outputs, fixed point.
#[derive(Clone, Debug)]
pub struct Pipeline<M> {
    temperature: TemperatureInput,
    temperature_bits: u8,
    temperature_correction: Corrector,
    pressure: PressureInput,
    pressure_correction: Corrector,
    barometric: fx::Pressure,
    tracker: Tracker<M>,
    last_valid: Option<Readings>,
}

impl<M: CompressibilityFx> Pipeline<M> {
    /// Prepares the front-ends, corrections, estimator and tracker (all
    /// divisions happen here). The calibrations must be of a pressure and a
    /// temperature front-end.
    pub fn new(
        setup: SetupFx,
        model: M,
        pressure: &CalibrationRecord,
        temperature: &CalibrationRecord,
        track: TrackConfigFx,
        barometric: fx::Pressure,
    ) -> Result<Self, Error> {
        let mut slot = None;
        Self::new_in(
            &mut slot,
            setup,
            model,
            pressure,
            temperature,
            track,
            barometric,
        )?;
        slot.ok_or(Error::OutOfRange("configuration"))
    }

    /// [`Pipeline::new`] straight into `slot` (`None` after an error): a
    /// device rebuilding its pipeline then holds no second copy of it on
    /// the stack (2.3 KiB on a Cortex-M0).
    #[inline(never)]
    pub fn new_in(
        slot: &mut Option<Self>,
        setup: SetupFx,
        model: M,
        pressure: &CalibrationRecord,
        temperature: &CalibrationRecord,
        track: TrackConfigFx,
        barometric: fx::Pressure,
    ) -> Result<(), Error> {
        *slot = None;
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
                reference_k: c.reference_k,
                compensation: CompensationCache::new(),
            },
            SensorConfig::Loop(c) => PressureInput::Loop {
                input: Loop::new(c)?,
                state: LoopState::new(),
            },
            _ => return Err(Error::OutOfRange("pressure sensor kind")),
        };
        let est = Estimator::new(setup, model)?;
        let temperature_correction = Corrector::new(&temperature.correction, 16)?;
        let pressure_correction = Corrector::new(&pressure.correction, 4)?;
        *slot = Some(Pipeline {
            temperature: temperature_input,
            temperature_bits: temperature_bits(&temperature.sensor),
            temperature_correction,
            pressure: pressure_input,
            pressure_correction,
            barometric,
            tracker: Tracker::new(est, track)?,
            last_valid: None,
        });
        Ok(())
    }

    /// The tracker.
    pub fn tracker(&self) -> &Tracker<M> {
        &self.tracker
    }

    /// The tracker, to clear its alarms or relearn its draw.
    pub fn tracker_mut(&mut self) -> &mut Tracker<M> {
        &mut self.tracker
    }

    /// The barometric pressure the pressure front-end uses.
    pub fn barometric(&self) -> fx::Pressure {
        self.barometric
    }

    /// The readings of the latest sample whose values were measurements
    /// (no flag of [`VALUE_INVALID`]).
    pub fn last_valid(&self) -> Option<&Readings> {
        self.last_valid.as_ref()
    }

    /// Steps 1–3: the codes to corrected readings.
    pub fn convert(&mut self, at: Instant, raw: &RawSample) -> Readings {
        // 1. temperature
        let t_raw = self.temperature.read(raw.temperature);
        let (t, t_status) = self
            .temperature_correction
            .apply_temperature(t_raw.temperature_k);
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
                let comp = compensation.get_or_insert_with(bucket, || {
                    compensation_at(
                        bridge,
                        *reference_k,
                        &self.temperature,
                        &self.temperature_correction,
                        centre,
                    )
                });
                let code = signed_code(raw.pressure, *bits, *bipolar);
                bridge.read_compensated(code, &comp, self.barometric)
            }
            PressureInput::Loop { input, state } => {
                input
                    .read(raw.pressure, self.barometric, at, state)
                    .pressure
            }
        };
        let (p, p_status) = self.pressure_correction.apply_pressure(p_raw.pressure_pa);
        // The gauge reading follows the corrected absolute one.
        let gauge = i64::from(p.to_bits()) - i64::from(self.barometric.to_bits());
        let pressure = PressureReading {
            pressure_pa: p,
            gauge_pa: fx::GaugePressure::from_bits(
                gauge.clamp(i32::MIN.into(), i32::MAX.into()) as i32
            ),
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
        r
    }

    /// One sample: steps 1–4.
    pub fn sample(&mut self, at: Instant, raw: &RawSample) -> TrackFx {
        let r = self.convert(at, raw);
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
fn compensation_at(
    bridge: &Bridge,
    reference_k: fx::Temperature,
    input: &TemperatureInput,
    correction: &Corrector,
    centre: u32,
) -> Compensation {
    let r = input.read(centre);
    let t = if r.status.intersects(VALUE_INVALID) {
        reference_k
    } else {
        correction.apply_temperature(r.temperature_k).0
    };
    bridge.compensation(t)
}
