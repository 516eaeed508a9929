//! The gauge under test: raw codes in, the gauge's outputs out, behind one
//! trait so that several implementations can be scored the same way.
//!
//! [`Backend`] is the seam. Two implementations run the core in-process,
//! exactly the chain a device runs — sensor front-ends (with the NE 43
//! persistence of a loop and the plausibility checks), content estimate,
//! tracker with uncertainty and alarms:
//!
//! * [`FixedGauge`]: the fixed-point path (what a device computes);
//! * [`FloatGauge`]: the `f64` path (the reference mirror).
//!
//! `isochor_sim::firmware_gauge::FirmwareGauge` implements the same trait over the
//! reference firmware running in QEMU, driven over its serial link.
//!
//! Like a board, both prepare the bridge's temperature compensation (the
//! one reciprocal of the bridge path) again only when the temperature
//! reading has moved by more than [`COMPENSATION_STEP_K`] since it was last
//! prepared.

use super::sensors::{Codes, PressureCode, PressureFrontEnd, TemperatureFrontEnd};
use crate::Error;
use isochor_core::alarm::Events;
use isochor_core::content::{fixed as cfixed, float as cfloat};
use isochor_core::model::device::TableBuf;
use isochor_core::model::{
    Compressibility, CompressibilityFx, DeviceModel, Ideal, IsothermFx, ModelRange, ZPoint,
    ZPointFx,
};
use isochor_core::sensor::plausibility::{PlausibilityConfig, PlausibilityState};
use isochor_core::sensor::{TemperatureReading, bridge, current_loop, ntc, plausibility, rtd};
use isochor_core::time::Instant;
use isochor_core::track::fixed::{TrackConfigFx, Tracker as TrackerFx};
use isochor_core::track::float::{TrackConfig, Tracker};
use isochor_core::{Gas, Setup, SetupFx, Status, fx, fx::to_f64};
use isochor_eos::reference::ReferenceModel;

/// Temperature change after which the bridge compensation is prepared
/// again, K.
pub const COMPENSATION_STEP_K: f64 = 0.05;

/// What the gauge reports for one sample, in SI units whatever the backend.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Reading {
    /// Pressure the front-end converted, Pa absolute (`None`: not a
    /// measurement).
    pub pressure_pa: Option<f64>,
    /// Temperature the front-end converted, K.
    pub temperature_k: Option<f64>,
    /// Content estimate, kg (`None` before the first usable sample or when
    /// the content is not valid).
    pub mass_kg: Option<f64>,
    /// Fill fraction.
    pub fill_fraction: Option<f64>,
    /// Expanded uncertainty (k = 2) of the mass, kg.
    pub u_mass_kg: Option<f64>,
    /// Consumption rate, kg/h (positive: gas leaving).
    pub rate_kg_h: Option<f64>,
    /// Its expanded uncertainty (k = 2), kg/h.
    pub u_rate_kg_h: Option<f64>,
    /// Time to empty (to the reserve), s: expected, earliest, latest.
    pub time_to_empty_s: Option<(f64, f64, Option<f64>)>,
    /// Loss per day from the leak detector (fraction of content).
    pub loss_per_day: Option<f64>,
    /// Status word (content, sensors, alarms).
    pub status: Status,
    /// Alarm changes at this sample.
    pub events: Events,
}

/// The gauge under test.
pub trait Backend: Send {
    /// Short stable name (`fixed`, `float`, …).
    fn name(&self) -> &'static str;
    /// The rated content the gauge was configured with, kg.
    fn rated_mass_kg(&self) -> f64;
    /// One sample of raw codes taken at `at`.
    fn sample(&mut self, at: Instant, codes: &Codes) -> Result<Reading, Error>;
}

/// Which gas model the gauge runs.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ModelKind {
    /// The built-in device table (what a device runs).
    #[default]
    Device,
    /// The ideal gas.
    Ideal,
    /// The reference equation of state (host only).
    Reference,
}

/// A gas model chosen at run time (both seams, by delegation).
#[derive(Clone, Debug)]
pub enum GaugeModel {
    /// Built-in device table, or a mixture's table built for its
    /// composition (boxed: a prepared table is 2.7 kB).
    Device(Box<DeviceModel<'static>>),
    /// Ideal gas.
    Ideal(Ideal),
    /// Reference equation of state.
    Reference(Box<ReferenceModel>),
}

impl GaugeModel {
    /// The model of `kind` for `gas`.
    pub fn new(kind: ModelKind, gas: Gas) -> Result<GaugeModel, Error> {
        Ok(match kind {
            ModelKind::Device if gas.mixture().is_some() => {
                GaugeModel::Device(Box::new(DeviceModel::new(mixture_table(gas)?.table())?))
            }
            ModelKind::Device => GaugeModel::Device(Box::new(DeviceModel::builtin(gas)?)),
            ModelKind::Ideal => GaugeModel::Ideal(Ideal::new(gas)),
            ModelKind::Reference => GaugeModel::Reference(Box::new(ReferenceModel::new(gas)?)),
        })
    }
}

/// The device table of a mixture (whose composition this process has met),
/// built once per process with the built-in envelope and kept for the
/// process (`isochor_eos::model::BuildSpec::for_fluid`; a few seconds).
pub fn mixture_table(gas: Gas) -> Result<&'static TableBuf, Error> {
    use std::collections::HashMap;
    use std::sync::{Mutex, OnceLock};
    static TABLES: OnceLock<Mutex<HashMap<Gas, &'static TableBuf>>> = OnceLock::new();
    let tables = TABLES.get_or_init(|| Mutex::new(HashMap::new()));
    if let Some(t) = tables.lock().unwrap_or_else(|e| e.into_inner()).get(&gas) {
        return Ok(t);
    }
    let fluid = isochor_eos::fluid::Fluid::for_gas(gas)?;
    let built = isochor_eos::model::build(&isochor_eos::model::BuildSpec::for_fluid(fluid))?;
    // Kept for the rest of the process: one small table per composition.
    let table: &'static TableBuf = Box::leak(Box::new(built.table));
    tables
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .insert(gas, table);
    Ok(table)
}

impl CompressibilityFx for GaugeModel {
    fn gas(&self) -> Gas {
        match self {
            GaugeModel::Device(m) => CompressibilityFx::gas(m.as_ref()),
            GaugeModel::Ideal(m) => CompressibilityFx::gas(m),
            GaugeModel::Reference(m) => CompressibilityFx::gas(m.as_ref()),
        }
    }
    fn z_fx(&self, p: fx::Pressure, t: fx::Temperature) -> ZPointFx {
        match self {
            GaugeModel::Device(m) => m.z_fx(p, t),
            GaugeModel::Ideal(m) => m.z_fx(p, t),
            GaugeModel::Reference(m) => m.z_fx(p, t),
        }
    }
    fn z_floor(&self) -> fx::Compressibility {
        match self {
            GaugeModel::Device(m) => m.z_floor(),
            GaugeModel::Ideal(m) => m.z_floor(),
            GaugeModel::Reference(m) => m.z_floor(),
        }
    }
    // The prepared-isotherm seam too, so the estimator runs the same path as
    // on a device (settled-pressure table at the model's pressure knots, Z at
    // the reference temperature on the prepared isotherm).
    fn pressure_knots_fx(&self) -> &[u32] {
        match self {
            GaugeModel::Device(m) => m.pressure_knots_fx(),
            GaugeModel::Ideal(m) => m.pressure_knots_fx(),
            GaugeModel::Reference(m) => m.pressure_knots_fx(),
        }
    }
    fn isotherm_fx(&self, t: fx::Temperature) -> IsothermFx {
        match self {
            GaugeModel::Device(m) => m.isotherm_fx(t),
            GaugeModel::Ideal(m) => m.isotherm_fx(t),
            GaugeModel::Reference(m) => m.isotherm_fx(t),
        }
    }
    fn isotherm_z_fx(&self, iso: &IsothermFx, p: fx::Pressure) -> ZPointFx {
        match self {
            GaugeModel::Device(m) => m.isotherm_z_fx(iso, p),
            GaugeModel::Ideal(m) => m.isotherm_z_fx(iso, p),
            GaugeModel::Reference(m) => m.isotherm_z_fx(iso, p),
        }
    }
}

impl Compressibility<f64> for GaugeModel {
    fn gas(&self) -> Gas {
        CompressibilityFx::gas(self)
    }
    fn kind(&self) -> &'static str {
        match self {
            GaugeModel::Device(_) => "device",
            GaugeModel::Ideal(_) => "ideal",
            GaugeModel::Reference(_) => "reference",
        }
    }
    fn range(&self) -> ModelRange {
        match self {
            GaugeModel::Device(m) => Compressibility::<f64>::range(m.as_ref()),
            GaugeModel::Ideal(m) => Compressibility::<f64>::range(m),
            GaugeModel::Reference(m) => Compressibility::<f64>::range(m.as_ref()),
        }
    }
    fn z(&self, p_pa: f64, t_k: f64) -> ZPoint<f64> {
        match self {
            GaugeModel::Device(m) => m.z(p_pa, t_k),
            GaugeModel::Ideal(m) => m.z(p_pa, t_k),
            GaugeModel::Reference(m) => m.z(p_pa, t_k),
        }
    }
}

/// The gauge's configuration: what a device would hold.
#[derive(Clone, Debug)]
pub struct GaugeConfig {
    /// Gas, tank (as declared to the gauge), standard condition.
    pub setup: Setup,
    /// The gas model.
    pub model: ModelKind,
    /// Pressure front-end.
    pub pressure: PressureFrontEnd,
    /// Temperature front-end.
    pub temperature: TemperatureFrontEnd,
    /// Barometric pressure the gauge assumes, Pa.
    pub barometric_pa: f64,
    /// Plausibility of pressure readings.
    pub pressure_plausibility: PlausibilityConfig,
    /// Plausibility of temperature readings.
    pub temperature_plausibility: PlausibilityConfig,
    /// Tracking, uncertainty and alarms.
    pub track: TrackConfig,
}

/// The gauge's fixed-point configuration, converted once (the float
/// backend runs its exact equivalent, so both see the same numbers).
fn fixed_parts(c: &GaugeConfig) -> Result<(SetupFx, TrackConfigFx), Error> {
    Ok((
        SetupFx::from_f64(&c.setup)?,
        TrackConfigFx::from_f64(&c.track)?,
    ))
}

/// The in-process fixed-point core.
pub struct FixedGauge {
    pressure: PressureFx,
    temperature: TemperatureFx,
    barometric: fx::Pressure,
    p_check: plausibility::fixed::Checker,
    t_check: plausibility::fixed::Checker,
    p_state: PlausibilityState<i64>,
    t_state: PlausibilityState<i64>,
    tracker: TrackerFx<GaugeModel>,
    rated_kg: f64,
    /// The last temperature code and its reading: the conversion is a pure
    /// function of the code, and a slowly changing temperature repeats it.
    last_temperature: Option<(u32, TemperatureReading<fx::Temperature>)>,
}

enum PressureFx {
    Bridge(
        bridge::fixed::Bridge,
        Option<(u32, bridge::fixed::Compensation)>,
    ),
    Loop(
        current_loop::fixed::Loop,
        current_loop::LoopState<current_loop::fixed::Reading>,
    ),
}

enum TemperatureFx {
    Rtd(rtd::fixed::Rtd),
    Ntc(ntc::fixed::Ntc),
}

impl FixedGauge {
    /// Prepares the fixed-point chain.
    pub fn new(c: &GaugeConfig) -> Result<FixedGauge, Error> {
        let (setup, track) = fixed_parts(c)?;
        let model = GaugeModel::new(c.model, c.setup.gas)?;
        let est = cfixed::Estimator::new(setup, model)?;
        let rated_kg = to_f64(est.rated_mass_kg());
        Ok(FixedGauge {
            pressure: match c.pressure {
                PressureFrontEnd::Bridge(b) => {
                    PressureFx::Bridge(bridge::fixed::Bridge::new(&b)?, None)
                }
                PressureFrontEnd::Loop(l) => PressureFx::Loop(
                    current_loop::fixed::Loop::new(&l)?,
                    current_loop::LoopState::new(),
                ),
            },
            temperature: match c.temperature {
                TemperatureFrontEnd::Rtd(r) => TemperatureFx::Rtd(rtd::fixed::Rtd::new(&r)?),
                TemperatureFrontEnd::Ntc(n) => TemperatureFx::Ntc(ntc::fixed::Ntc::new(&n)?),
            },
            barometric: fx::from_f64(c.barometric_pa, "barometric pressure")?,
            p_check: plausibility::fixed::Checker::new(&c.pressure_plausibility, 4)?,
            t_check: plausibility::fixed::Checker::new(&c.temperature_plausibility, 16)?,
            p_state: PlausibilityState::new(),
            t_state: PlausibilityState::new(),
            tracker: TrackerFx::new(est, track)?,
            rated_kg,
            last_temperature: None,
        })
    }
}

impl Backend for FixedGauge {
    fn name(&self) -> &'static str {
        "fixed"
    }

    fn rated_mass_kg(&self) -> f64 {
        self.rated_kg
    }

    fn sample(&mut self, at: Instant, codes: &Codes) -> Result<Reading, Error> {
        let t = match self.last_temperature {
            Some((code, reading)) if code == codes.temperature => reading,
            _ => {
                let reading = match &self.temperature {
                    TemperatureFx::Rtd(r) => r.read(codes.temperature),
                    TemperatureFx::Ntc(n) => n.read(codes.temperature),
                };
                self.last_temperature = Some((codes.temperature, reading));
                reading
            }
        };
        let p = match (&mut self.pressure, codes.pressure) {
            (PressureFx::Bridge(b, comp), PressureCode::Bridge(code)) => {
                let bits = t.temperature_k.to_bits();
                let step = (COMPENSATION_STEP_K * 65_536.0) as u32;
                let c = match comp {
                    Some((at, c)) if at.abs_diff(bits) <= step => *c,
                    _ => {
                        let c = b.compensation(t.temperature_k);
                        *comp = Some((bits, c));
                        c
                    }
                };
                b.read_compensated(code, &c, self.barometric)
            }
            (PressureFx::Loop(l, state), PressureCode::Loop(code)) => {
                l.read(code, self.barometric, at, state).pressure
            }
            _ => return Err(Error::Invalid("pressure code of another front-end".into())),
        };
        let mut sensor = p.status | t.status;
        sensor |= self
            .p_check
            .check(i64::from(p.pressure_pa.to_bits()), at, &mut self.p_state);
        sensor |= self
            .t_check
            .check(i64::from(t.temperature_k.to_bits()), at, &mut self.t_state);
        let r = self
            .tracker
            .update(at, p.pressure_pa, t.temperature_k, sensor);
        let valid = |s: Status| !s.intersects(isochor_core::sensor::VALUE_INVALID);
        let content = r
            .content
            .filter(|c| !c.status.intersects(Status::CONTENT_INVALID));
        Ok(Reading {
            pressure_pa: valid(p.status).then(|| to_f64(p.pressure_pa)),
            temperature_k: valid(t.status).then(|| to_f64(t.temperature_k)),
            mass_kg: content.map(|c| to_f64(c.mass_kg)),
            fill_fraction: content.map(|c| to_f64(c.fill_fraction)),
            u_mass_kg: r.uncertainty.map(|u| to_f64(u.mass_kg)),
            rate_kg_h: r.rate.map(|x| to_f64(x.kg_h)),
            u_rate_kg_h: r.rate.map(|x| to_f64(x.u_kg_h)),
            time_to_empty_s: r.time_to_empty.map(|t| {
                (
                    t.expected.0 as f64 / 1e3,
                    t.earliest.0 as f64 / 1e3,
                    t.latest.map(|l| l.0 as f64 / 1e3),
                )
            }),
            loss_per_day: r.leak.map(|l| to_f64(l.loss_per_day)),
            status: r.status | sensor,
            events: r.events,
        })
    }
}

/// The in-process `f64` core.
pub struct FloatGauge {
    pressure: PressureF,
    temperature: TemperatureF,
    barometric: f64,
    p_check: plausibility::float::Checker<f64>,
    t_check: plausibility::float::Checker<f64>,
    p_state: PlausibilityState<f64>,
    t_state: PlausibilityState<f64>,
    tracker: Tracker<f64, GaugeModel>,
    rated_kg: f64,
}

enum PressureF {
    Bridge(
        bridge::float::Bridge<f64>,
        Option<(f64, bridge::float::Compensation<f64>)>,
    ),
    Loop(
        current_loop::float::Loop<f64>,
        current_loop::LoopState<current_loop::float::Reading<f64>>,
    ),
}

enum TemperatureF {
    Rtd(rtd::float::Rtd<f64>),
    Ntc(ntc::float::Ntc<f64>),
}

impl FloatGauge {
    /// Prepares the `f64` chain on the exact equivalent of the fixed-point
    /// configuration.
    pub fn new(c: &GaugeConfig) -> Result<FloatGauge, Error> {
        let (setup, track) = fixed_parts(c)?;
        let model = GaugeModel::new(c.model, c.setup.gas)?;
        let est = cfloat::Estimator::new(setup.to_real(), model)?;
        let rated_kg = est.rated_mass_kg();
        let baro: fx::Pressure = fx::from_f64(c.barometric_pa, "barometric pressure")?;
        Ok(FloatGauge {
            pressure: match c.pressure {
                PressureFrontEnd::Bridge(b) => {
                    PressureF::Bridge(bridge::float::Bridge::new(&b)?, None)
                }
                PressureFrontEnd::Loop(l) => PressureF::Loop(
                    current_loop::float::Loop::new(&l)?,
                    current_loop::LoopState::new(),
                ),
            },
            temperature: match c.temperature {
                TemperatureFrontEnd::Rtd(r) => TemperatureF::Rtd(rtd::float::Rtd::new(&r)?),
                TemperatureFrontEnd::Ntc(n) => TemperatureF::Ntc(ntc::float::Ntc::new(&n)?),
            },
            barometric: to_f64(baro),
            p_check: plausibility::float::Checker::new(&c.pressure_plausibility)?,
            t_check: plausibility::float::Checker::new(&c.temperature_plausibility)?,
            p_state: PlausibilityState::new(),
            t_state: PlausibilityState::new(),
            tracker: Tracker::new(est, track.to_real())?,
            rated_kg,
        })
    }
}

impl Backend for FloatGauge {
    fn name(&self) -> &'static str {
        "float"
    }

    fn rated_mass_kg(&self) -> f64 {
        self.rated_kg
    }

    fn sample(&mut self, at: Instant, codes: &Codes) -> Result<Reading, Error> {
        let t = match &self.temperature {
            TemperatureF::Rtd(r) => r.read(codes.temperature),
            TemperatureF::Ntc(n) => n.read(codes.temperature),
        };
        let p = match (&mut self.pressure, codes.pressure) {
            (PressureF::Bridge(b, comp), PressureCode::Bridge(code)) => {
                // The same decision as the fixed path, on the same bits.
                let bits = (t.temperature_k * 65_536.0).round() as u32;
                let step = (COMPENSATION_STEP_K * 65_536.0) as u32;
                let c = match comp {
                    Some((at, c)) if (*at as u32).abs_diff(bits) <= step => *c,
                    _ => {
                        let c = b.compensation(t.temperature_k)?;
                        *comp = Some((f64::from(bits), c));
                        c
                    }
                };
                b.read_compensated(code, &c, self.barometric)?
            }
            (PressureF::Loop(l, state), PressureCode::Loop(code)) => {
                l.read(code, self.barometric, at, state)?.pressure
            }
            _ => return Err(Error::Invalid("pressure code of another front-end".into())),
        };
        let mut sensor = p.status | t.status;
        sensor |= self.p_check.check(p.pressure_pa, at, &mut self.p_state)?;
        sensor |= self.t_check.check(t.temperature_k, at, &mut self.t_state)?;
        let r = self
            .tracker
            .update(at, p.pressure_pa, t.temperature_k, sensor)?;
        let valid = |s: Status| !s.intersects(isochor_core::sensor::VALUE_INVALID);
        let content = r
            .content
            .filter(|c| !c.status.intersects(Status::CONTENT_INVALID));
        Ok(Reading {
            pressure_pa: valid(p.status).then_some(p.pressure_pa),
            temperature_k: valid(t.status).then_some(t.temperature_k),
            mass_kg: content.map(|c| c.mass_kg),
            fill_fraction: content.map(|c| c.fill_fraction),
            u_mass_kg: r.uncertainty.map(|u| u.mass_kg),
            rate_kg_h: r.rate.map(|x| x.kg_h),
            u_rate_kg_h: r.rate.map(|x| x.u_kg_h),
            time_to_empty_s: r.time_to_empty.map(|t| {
                (
                    t.expected.0 as f64 / 1e3,
                    t.earliest.0 as f64 / 1e3,
                    t.latest.map(|l| l.0 as f64 / 1e3),
                )
            }),
            loss_per_day: r.leak.map(|l| l.loss_per_day),
            status: r.status | sensor,
            events: r.events,
        })
    }
}
