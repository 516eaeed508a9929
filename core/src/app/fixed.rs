//! The sample pipeline, fixed-point form (the device path): a prepared
//! configuration at work. Same steps and names as [`super::float`]; the
//! method is in [`super`].

use super::Zero;
#[cfg(not(feature = "tracking"))]
use super::untracked::fixed::Tracker;
use crate::content::fixed::Estimator;
use crate::error::DeviceSetting;
use crate::prepared::{Prepared, PreparedBytes, PreparedModel};
use crate::probe::{self, Stage};
use crate::sensor::channel::RawSample;
use crate::sensor::channel::fixed::{
    PressureChannel, PressureStage, PressureValue, TemperatureChannel, TemperatureStage,
};
use crate::sensor::plausibility::PlausibilityState;
use crate::sensor::{TemperatureReading, VALUE_INVALID};
use crate::time::Instant;
use crate::track::fixed::TrackFx;
#[cfg(feature = "tracking")]
use crate::track::fixed::Tracker;
use crate::{Error, Status, fx};

/// One sample's converted readings.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Readings {
    /// Pressure after the correction and the zero offset.
    pub pressure: PressureValue,
    /// Temperature after the correction and the zero offset.
    pub temperature: TemperatureReading<fx::Temperature>,
}

impl Readings {
    /// Both channels' sensor flags.
    pub fn status(&self) -> Status {
        self.pressure.status | self.temperature.status
    }
}

/// Raw codes to tracker outputs, fixed point, over a prepared
/// configuration's bytes `B` (a `&'static [u8]` on a device: its flash or a
/// RAM copy; a shared buffer on a host).
#[derive(Clone, Debug)]
pub struct Pipeline<B> {
    prepared: Prepared<B>,
    temperature: TemperatureChannel,
    pressure: PressureChannel,
    tracker: Tracker<PreparedModel<B>>,
    plausibility: [PlausibilityState<i64>; 2],
    last_valid: Option<Readings>,
    /// Both stages' views over bytes that last
    /// ([`PreparedBytes::lasting`]), derived once per configuration.
    stages: Option<(TemperatureStage<'static>, PressureStage<'static>)>,
}

impl<B: PreparedBytes + Clone> Pipeline<B> {
    /// The pipeline of a (validated) prepared configuration with the zero
    /// offsets in force. No division happens here: the configuration was
    /// prepared on a host.
    pub fn new(prepared: Prepared<B>, zero: Zero) -> Result<Self, Error> {
        let mut slot = None;
        Self::new_in(&mut slot, &prepared, zero)?;
        slot.ok_or(Error::OutOfRange(DeviceSetting::Configuration.into()))
    }

    /// [`Pipeline::new`] straight into `slot` (`None` after an error): a
    /// device holds no second copy of its pipeline on the stack. The
    /// prepared configuration is read through a reference and copied once,
    /// into the pipeline (a caller's frame then holds one copy of it, not
    /// two).
    #[inline(never)]
    pub fn new_in(
        slot: &mut Option<Self>,
        prepared: &Prepared<B>,
        zero: Zero,
    ) -> Result<(), Error> {
        *slot = None;
        let model = PreparedModel::new(prepared)?;
        let est = Estimator::from_parts(prepared.scalars().estimator, model)?;
        let track = prepared.scalars().track;
        let stages = prepared.lasting_stages();
        *slot = Some(Pipeline {
            stages,
            temperature: TemperatureChannel {
                offset: zero.temperature,
            },
            pressure: PressureChannel::new(zero.pressure),
            tracker: Tracker::new(est, track)?,
            prepared: prepared.clone(),
            plausibility: [PlausibilityState::new(); 2],
            last_valid: None,
        });
        Ok(())
    }
}

impl<B: AsRef<[u8]>> Pipeline<B> {
    /// The prepared configuration.
    pub fn prepared(&self) -> &Prepared<B> {
        &self.prepared
    }

    /// The tracker.
    pub fn tracker(&self) -> &Tracker<PreparedModel<B>> {
        &self.tracker
    }

    /// The outputs of the latest sample.
    pub fn output(&self) -> &TrackFx {
        self.tracker.output()
    }

    /// The tracker, to clear its alarms.
    pub fn tracker_mut(&mut self) -> &mut Tracker<PreparedModel<B>> {
        &mut self.tracker
    }

    /// The barometric pressure of the site.
    pub fn barometric(&self) -> fx::Pressure {
        fx::Pressure::from_bits(self.prepared.scalars().barometric)
    }

    /// The zero offsets in force.
    pub fn zero(&self) -> Zero {
        Zero {
            pressure: self.pressure.offset,
            temperature: self.temperature.offset,
        }
    }

    /// Sets the zero offsets (from the next sample on).
    pub fn set_zero(&mut self, zero: Zero) {
        self.pressure.offset = zero.pressure;
        self.temperature.offset = zero.temperature;
    }

    /// The readings of the latest sample whose values were measurements
    /// (no flag of [`VALUE_INVALID`]).
    pub fn last_valid(&self) -> Option<&Readings> {
        self.last_valid.as_ref()
    }

    /// Steps 1–4: the codes to corrected, checked readings.
    pub fn convert(&mut self, at: Instant, raw: &RawSample) -> Readings {
        probe::enter(Stage::Sensor);
        let fresh;
        let (ts, ps) = match &self.stages {
            Some((t, p)) => (t, p),
            None => {
                fresh = (self.prepared.temperature(), self.prepared.pressure());
                (&fresh.0, &fresh.1)
            }
        };
        // 1. temperature
        let temperature = self.temperature.read(ts, raw.temperature);
        // 2. compensation and 3. pressure
        let mut pressure = self.pressure.read(ps, at, raw.pressure, &temperature);
        // 4. plausibility
        let mut temperature = temperature;
        if let Some((pc, tc)) = &self.prepared.scalars().plausibility {
            probe::enter(Stage::Plausibility);
            let [ps, ts] = &mut self.plausibility;
            pressure.status |= pc.check(i64::from(pressure.pressure_pa.to_bits()), at, ps);
            temperature.status |= tc.check(i64::from(temperature.temperature_k.to_bits()), at, ts);
        }
        let r = Readings {
            pressure,
            temperature,
        };
        if !r.status().intersects(VALUE_INVALID) {
            self.last_valid = Some(r);
        }
        r
    }

    /// One sample: steps 1–5. Returns the tracker's outputs, updated in
    /// place (see [`Pipeline::output`]).
    pub fn sample(&mut self, at: Instant, raw: &RawSample) -> &TrackFx {
        let r = self.convert(at, raw);
        self.tracker.update(
            at,
            r.pressure.pressure_pa,
            r.temperature.temperature_k,
            r.status(),
        )
    }
}
