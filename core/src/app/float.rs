//! The sample pipeline, float form (generic over [`Real`]; `f64` is the
//! reference): the physical configuration evaluated as written. Same steps
//! and names as [`super::fixed`]; the method is in [`super`].

use super::Zero;
#[cfg(not(feature = "tracking"))]
use super::untracked::float::Tracker;
use crate::content::float::Estimator;
use crate::model::Compressibility;
use crate::prepared::GaugeConfig;
use crate::sensor::channel::RawSample;
use crate::sensor::channel::float::{PressureChannel, TemperatureChannel};
use crate::sensor::plausibility::PlausibilityState;
use crate::sensor::plausibility::float::Checker;
use crate::sensor::{PressureReading, TemperatureReading, VALUE_INVALID};
use crate::time::Instant;
use crate::track::float::Track;
#[cfg(feature = "tracking")]
use crate::track::float::Tracker;
use crate::{Error, Real, Status, fx};

/// One sample's converted readings (float form).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Readings<F> {
    /// Pressure after the correction and the zero offset.
    pub pressure: PressureReading<F, F>,
    /// Temperature after the correction and the zero offset.
    pub temperature: TemperatureReading<F>,
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
    temperature: TemperatureChannel<F>,
    pressure: PressureChannel<F>,
    tracker: Tracker<F, M>,
    plausibility: Option<(Checker<F>, Checker<F>)>,
    states: [PlausibilityState<F>; 2],
    last_valid: Option<Readings<F>>,
}

impl<F: Real, M: Compressibility<F>> Pipeline<F, M> {
    /// The pipeline of a physical configuration, with `model` as its gas
    /// model (the configuration's table for the device's own algorithm, or
    /// the reference equation of state) and the zero offsets in force.
    pub fn new(config: &GaugeConfig, model: M, zero: Zero) -> Result<Self, Error> {
        config.validate()?;
        let mut temperature = TemperatureChannel::new(&config.temperature)?;
        let mut pressure =
            PressureChannel::new(&config.pressure, F::lit(fx::to_f64(config.barometric_pa)))?;
        let (zp, zt) = zero.to_f64();
        temperature.set_offset(F::lit(zt));
        pressure.set_offset(F::lit(zp));
        let est = Estimator::new(config.setup.to_real(), model)?;
        let plausibility = match &config.plausibility {
            Some(p) => Some((Checker::new(&p.pressure)?, Checker::new(&p.temperature)?)),
            None => None,
        };
        Ok(Pipeline {
            temperature,
            pressure,
            tracker: Tracker::new(est, config.track.to_real())?,
            plausibility,
            states: [PlausibilityState::new(), PlausibilityState::new()],
            last_valid: None,
        })
    }

    /// The tracker.
    pub fn tracker(&self) -> &Tracker<F, M> {
        &self.tracker
    }

    /// The tracker, to clear its alarms.
    pub fn tracker_mut(&mut self) -> &mut Tracker<F, M> {
        &mut self.tracker
    }

    /// The readings of the latest sample whose values were measurements.
    pub fn last_valid(&self) -> Option<&Readings<F>> {
        self.last_valid.as_ref()
    }

    /// Sets the zero offsets (from the next sample on).
    pub fn set_zero(&mut self, zero: Zero) {
        let (zp, zt) = zero.to_f64();
        self.temperature.set_offset(F::lit(zt));
        self.pressure.set_offset(F::lit(zp));
    }

    /// Steps 1–4: the codes to corrected, checked readings.
    pub fn convert(&mut self, at: Instant, raw: &RawSample) -> Result<Readings<F>, Error> {
        // 1. temperature
        let temperature = self.temperature.read(raw.temperature)?;
        // 2. compensation and 3. pressure
        let mut pressure = self.pressure.read(at, raw.pressure, &temperature)?;
        // 4. plausibility
        let mut temperature = temperature;
        if let Some((pc, tc)) = &self.plausibility {
            let [ps, ts] = &mut self.states;
            pressure.status |= pc.check(pressure.pressure_pa, at, ps)?;
            temperature.status |= tc.check(temperature.temperature_k, at, ts)?;
        }
        let r = Readings {
            pressure,
            temperature,
        };
        if !r.status().intersects(VALUE_INVALID) {
            self.last_valid = Some(r);
        }
        Ok(r)
    }

    /// One sample: steps 1–5.
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
