//! The chain without the tracker (feature `tracking` off): what the
//! pipeline runs in place of [`crate::track`]. Both paths
//! ([`fixed::Tracker`], [`float::Tracker`]) take the same steps and give the
//! tracker's output types, so telemetry, Modbus and the tests see one shape.
//!
//! # Per sample
//!
//! 1. The content estimate on the sample's own reading: no despiking and no
//!    smoothing (those are the tracker's; the displayed content is the
//!    sample's content). Samples the front end flags (any bit of
//!    [`Status::SENSOR_RANGE`](crate::Status::SENSOR_RANGE)) are not used; after `max_gap` without a
//!    usable one the content and its uncertainty are withdrawn (`None`), as
//!    the tracker does.
//! 2. With feature `uncertainty`: the expanded uncertainty (k = 2) of that
//!    content, every sample, from the declared inputs (full scale, reading,
//!    temperature, capacity, model). The gas–sensor term (the wall sensor's
//!    difference from the gas during a draw, which the tracker takes from
//!    its rate window) is absent: U then covers the sensors, the capacity and
//!    the model, not the gas's cooling by a draw.
//! 3. The alarms that need no tracker: low content (on the fill fraction
//!    alone: no time to empty), over pressure (the absolute limit, and the
//!    over-fill criterion on the present fill fraction, there being no
//!    settled prediction), over and under temperature, sensor fault. `leak`
//!    and `not_settled` are never raised.
//!
//! Rate, time to empty (and its withheld reason), leak verdict, settled
//! prediction and the over-pressure reference are always `None`.

/// The rated standard volume, as the tracker computes it (rated mass ×
/// standard volume per kilogram at the rated state).
fn rated_standard_volume<M: crate::model::CompressibilityFx>(
    est: &crate::content::fixed::Estimator<M>,
) -> Result<crate::fx::Volume, crate::Error> {
    use crate::error::Condition;
    use crate::fx::Coef;
    let tank = est.setup().tank;
    let rated = est.estimate(tank.rated_pressure_pa, tank.rated_temperature_k);
    let rated_mass = Coef::from_raw(est.rated_mass_kg().to_bits(), 40);
    let v_per_kg = Coef::from_raw(rated.standard_volume_m3.to_bits(), 40).mul(
        Coef::from_raw(rated.mass_kg.to_bits(), 40)
            .recip()
            .ok_or(crate::Error::ModelUnusable(Condition::RatedCondition))?,
    );
    Ok(crate::fx::Volume::from_bits(
        rated_mass.mul(v_per_kg).scale(1, 0, 40).0,
    ))
}

pub mod fixed {
    //! Fixed-point form (the device path).

    use crate::alarm::fixed::{Inputs, LevelInputs};
    use crate::alarm::{Alarms, Events};
    use crate::content::fixed::{Content, Estimator};
    use crate::fx;
    use crate::model::CompressibilityFx;
    use crate::probe::{self, Stage};
    use crate::time::Instant;
    use crate::track::fixed::{TrackConfigFx, TrackFx};
    #[cfg(feature = "uncertainty")]
    use crate::uncertainty::fixed::EvaluatorFx;
    use crate::{Error, Status};

    /// The outputs before any sample. No rate, hence no time to empty:
    /// neither given nor withheld.
    const EMPTY: TrackFx = TrackFx {
        time_to_empty_withheld: None,
        ..TrackFx::EMPTY
    };

    /// Content, its uncertainty and the alarms of one tank, sample by
    /// sample (see [`super`]).
    #[derive(Clone, Debug)]
    pub struct Tracker<M> {
        est: Estimator<M>,
        cfg: TrackConfigFx,
        #[cfg(feature = "uncertainty")]
        unc: EvaluatorFx,
        alarms: Alarms,
        rated_volume: fx::Volume,
        last_at: Option<Instant>,
        /// The latest outputs, updated in place by each sample.
        out: TrackFx,
    }

    impl<M: CompressibilityFx> Tracker<M> {
        /// The chain for the tank of `est`; of `cfg` it uses the alarm
        /// limits and debounce, the declared uncertainties and `max_gap`.
        pub fn new(est: Estimator<M>, cfg: TrackConfigFx) -> Result<Self, Error> {
            cfg.limits.validate()?;
            cfg.uncertainty.validate()?;
            Ok(Tracker {
                #[cfg(feature = "uncertainty")]
                unc: EvaluatorFx::new(cfg.uncertainty, &est)?,
                alarms: Alarms::new(cfg.debounce),
                rated_volume: super::rated_standard_volume(&est)?,
                last_at: None,
                out: EMPTY,
                est,
                cfg,
            })
        }

        /// The content estimator.
        pub fn estimator(&self) -> &Estimator<M> {
            &self.est
        }

        /// The configuration.
        pub fn config(&self) -> &TrackConfigFx {
            &self.cfg
        }

        /// The standard volume of the rated content (saturating).
        pub fn rated_standard_volume(&self) -> fx::Volume {
            self.rated_volume
        }

        /// The latest content estimate.
        pub fn latest_content(&self) -> Option<Content> {
            self.out.content
        }

        /// The outputs of the latest sample ([`TrackFx::EMPTY`] before the
        /// first).
        pub fn output(&self) -> &TrackFx {
            &self.out
        }

        /// Clears every active alarm at `at`; returns the cleared events.
        pub fn clear_alarms(&mut self, at: Instant) -> Events {
            self.alarms.clear_all(at)
        }

        /// Takes one sample (see [`super`]); returns the outputs, updated in
        /// place. Never fails.
        pub fn update(
            &mut self,
            at: Instant,
            pressure: fx::Pressure,
            temperature: fx::Temperature,
            sensor: Status,
        ) -> &TrackFx {
            probe::enter(Stage::Content);
            let sensor = sensor & Status::SENSOR_RANGE;
            let fault = !sensor.is_ok();
            if !fault {
                let c = self.est.estimate(pressure, temperature);
                self.out.content = Some(c);
                #[cfg(feature = "uncertainty")]
                {
                    probe::enter(Stage::Uncertainty);
                    self.out.uncertainty = Some(self.unc.evaluate(&self.est.with_slopes(&c)));
                }
                self.last_at = Some(at);
            } else if self.last_at.is_some_and(|l| at.since(l) > self.cfg.max_gap) {
                self.out.content = None;
                #[cfg(feature = "uncertainty")]
                {
                    self.out.uncertainty = None;
                }
            }
            probe::enter(Stage::Alarms);
            let level = self.out.content.map(|c| LevelInputs {
                pressure_pa: c.pressure_pa,
                temperature_k: c.temperature_k,
                fill_fraction: c.fill_fraction,
                settled_fraction: Some(c.fill_fraction),
                time_to_empty: None,
            });
            let (raise, clear) = self.cfg.limits.conditions(&Inputs {
                content: level,
                sensor_fault: fault,
                leak: false,
                not_settled: false,
            });
            self.out.events = self.alarms.update(at, raise, clear);
            let content_status = self.out.content.map_or(Status::OK, |c| c.status);
            self.out.at = at;
            self.out.status = content_status | sensor | self.alarms.active().status();
            &self.out
        }
    }
}

pub mod float {
    //! Float form (the reference the device is tested against).

    use crate::alarm::Alarms;
    use crate::alarm::Events;
    use crate::alarm::float::{Inputs, LevelInputs};
    use crate::content::float::{Content, Estimator};
    use crate::error::Measured;
    use crate::model::Compressibility;
    use crate::time::Instant;
    use crate::track::float::{Settling, Track, TrackConfig};
    #[cfg(feature = "uncertainty")]
    use crate::uncertainty::float::{Evaluator, Uncertainty};
    use crate::{Error, Real, Status};

    /// Content, its uncertainty and the alarms of one tank, sample by
    /// sample (see [`super`]).
    #[derive(Clone, Debug)]
    pub struct Tracker<F: Real, M> {
        est: Estimator<F, M>,
        cfg: TrackConfig<F>,
        #[cfg(feature = "uncertainty")]
        unc: Evaluator<F>,
        alarms: Alarms,
        last_at: Option<Instant>,
        content: Option<Content<F>>,
        #[cfg(feature = "uncertainty")]
        uncertainty: Option<Uncertainty<F>>,
    }

    impl<F: Real, M: Compressibility<F>> Tracker<F, M> {
        /// The chain for the tank of `est`; of `cfg` it uses the alarm
        /// limits and debounce, the declared uncertainties and `max_gap`.
        pub fn new(est: Estimator<F, M>, cfg: TrackConfig<F>) -> Result<Self, Error> {
            cfg.validate()?;
            Ok(Tracker {
                #[cfg(feature = "uncertainty")]
                unc: Evaluator::new(cfg.uncertainty, &est)?,
                alarms: Alarms::new(cfg.debounce),
                last_at: None,
                content: None,
                #[cfg(feature = "uncertainty")]
                uncertainty: None,
                est,
                cfg,
            })
        }

        /// The content estimator.
        pub fn estimator(&self) -> &Estimator<F, M> {
            &self.est
        }

        /// The configuration.
        pub fn config(&self) -> &TrackConfig<F> {
            &self.cfg
        }

        /// Clears every active alarm at `at`; returns the cleared events.
        pub fn clear_alarms(&mut self, at: Instant) -> Events {
            self.alarms.clear_all(at)
        }

        /// Takes one sample (see [`super`]). Fails only for NaN or infinite
        /// readings the front end did not flag; the state is then unchanged.
        pub fn update(
            &mut self,
            at: Instant,
            pressure_pa: F,
            temperature_k: F,
            sensor: Status,
        ) -> Result<Track<F>, Error> {
            let sensor = sensor & Status::SENSOR_RANGE;
            let fault = !sensor.is_ok();
            if !fault {
                if !pressure_pa.is_finite() {
                    return Err(Error::NotFinite(Measured::Pressure.into()));
                }
                if !temperature_k.is_finite() {
                    return Err(Error::NotFinite(Measured::Temperature.into()));
                }
                let c = self.est.estimate(pressure_pa, temperature_k)?;
                self.content = Some(c);
                #[cfg(feature = "uncertainty")]
                {
                    self.uncertainty = Some(self.unc.evaluate(&c));
                }
                self.last_at = Some(at);
            } else if self.last_at.is_some_and(|l| at.since(l) > self.cfg.max_gap) {
                self.content = None;
                #[cfg(feature = "uncertainty")]
                {
                    self.uncertainty = None;
                }
            }
            let level = self.content.map(|c| LevelInputs {
                pressure_pa: c.pressure_pa,
                temperature_k: c.temperature_k,
                fill_fraction: c.fill_fraction,
                settled_fraction: Some(c.fill_fraction),
                time_to_empty: None,
            });
            let (raise, clear) = self.cfg.limits.conditions(&Inputs {
                content: level,
                sensor_fault: fault,
                leak: false,
                not_settled: false,
            });
            let events = self.alarms.update(at, raise, clear);
            let content_status = self.content.map_or(Status::OK, |c| c.status);
            Ok(Track {
                at,
                content: self.content,
                #[cfg(feature = "uncertainty")]
                uncertainty: self.uncertainty,
                #[cfg(not(feature = "uncertainty"))]
                uncertainty: None,
                rate: None,
                time_to_empty: None,
                time_to_empty_withheld: None,
                settling: Settling {
                    not_settled: false,
                    predicted: None,
                },
                leak: None,
                rated_pressure_now_pa: None,
                events,
                status: content_status | sensor | self.alarms.active().status(),
            })
        }
    }
}
