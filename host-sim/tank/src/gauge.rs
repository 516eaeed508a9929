//! The gauge under test: raw codes in, the gauge's outputs out, behind one
//! trait so that several implementations can be scored the same way.
//!
//! [`Backend`] is the seam. Two implementations run the core in-process,
//! each a thin adapter over the core's one assembly of the chain
//! (`isochor_core::app`):
//!
//! * [`FixedGauge`]: the device's pipeline (`app::fixed::Pipeline`) over
//!   the configuration prepared exactly as the host prepares it for a
//!   device — the code that ships;
//! * [`FloatGauge`]: the `f64` pipeline (`app::float::Pipeline`), the
//!   physical configuration evaluated as written (the reference mirror).
//!
//! `isochor_sim::firmware_gauge::FirmwareGauge` implements the same trait
//! over the reference firmware running in QEMU, driven over its serial
//! link, with the same prepared configuration: it differs from
//! [`FixedGauge`] only in transport.

use std::sync::Arc;

use super::sensors::{Codes, PressureCode, PressureFrontEnd, TemperatureFrontEnd};
use crate::Error;
use isochor_core::alarm::Events;
use isochor_core::app::{self, Zero, fixed, float};
use isochor_core::link::Telemetry;
use isochor_core::model::device::{DeviceModel, Table, TableBuf};
use isochor_core::model::{Compressibility, Ideal, ModelRange, ZPoint};
use isochor_core::prepared::{self, Plausibility, Prepared, PreparedBuf};
use isochor_core::sensor::calibration::{CalibrationRecord, Channel, Correction, SensorConfig};
use isochor_core::sensor::channel::RawSample;
use isochor_core::sensor::plausibility::PlausibilityConfig;
use isochor_core::time::Instant;
use isochor_core::track::fixed::TrackConfigFx;
use isochor_core::track::float::{NoTimeToEmpty, TrackConfig};
use isochor_core::{Gas, Setup, SetupFx, Status, fx, fx::to_f64};
use isochor_eos::reference::ReferenceModel;
use zerocopy::IntoBytes;

/// What the gauge reports for one sample, in SI units whatever the backend.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Reading {
    /// Pressure the gauge reports, Pa absolute: the smoothed reading its
    /// content comes from (`None`: not a measurement).
    pub pressure_pa: Option<f64>,
    /// Temperature the gauge reports, K (smoothed likewise).
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
    /// Why no time to empty is given (`None` while one is).
    pub time_to_empty_withheld: Option<NoTimeToEmpty>,
    /// Loss per day from the leak detector, as a fraction of the content
    /// per day (0.005: 0.5 % a day).
    pub loss_fraction_per_day: Option<f64>,
    /// Status word (content, sensors, alarms).
    pub status: Status,
    /// Alarm changes at this sample.
    pub events: Events,
}

impl Reading {
    /// What one telemetry frame says, with the sample's alarm changes: the
    /// one decoding of device telemetry into readings. The in-process
    /// fixed-point gauge passes its pipeline's output through the device's
    /// own frame builder ([`app::telemetry::from_track`]) and this, the
    /// firmware backends decode the frames they receive with it, so both
    /// report exactly what a device sends. Content values are `None` when
    /// the status voids them or the frame carries none (zeros before the
    /// first usable sample and while a channel is dead); pressure and
    /// temperature when the sensor flags say they are not measurements.
    pub fn from_telemetry(t: &Telemetry, events: Events) -> Reading {
        let status = t.status();
        let content =
            t.content_valid() && (t.mass_kg != 0 || t.fill_fraction != 0 || t.density_kg_m3 != 0);
        let measured = !status.intersects(isochor_core::sensor::VALUE_INVALID);
        Reading {
            pressure_pa: (measured && t.pressure_pa != 0).then(|| to_f64(t.pressure())),
            temperature_k: (measured && t.temperature_k != 0).then(|| to_f64(t.temperature())),
            mass_kg: content.then(|| to_f64(t.mass())),
            fill_fraction: content.then(|| to_f64(t.fill_fraction())),
            u_mass_kg: t.mass_uncertainty().filter(|_| content).map(to_f64),
            // Telemetry carries the change of the mass (negative while the
            // tank empties); readings carry the consumption.
            rate_kg_h: t.rate().map(|r| -to_f64(r)),
            u_rate_kg_h: t.rate_uncertainty().map(to_f64),
            time_to_empty_s: t.time_to_empty_s.map(|e| {
                (
                    f64::from(e),
                    f64::from(t.time_to_empty_earliest_s.unwrap_or(e)),
                    t.time_to_empty_latest_s.map(f64::from),
                )
            }),
            time_to_empty_withheld: t.time_to_empty_withheld(),
            loss_fraction_per_day: t.leak_loss_per_day().map(to_f64),
            status,
            events,
        }
    }
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

/// A gas model chosen at run time, for the `f64` pipeline.
#[derive(Clone, Debug)]
pub enum GaugeModel {
    /// Built-in device table, or a mixture's table built for its
    /// composition, evaluated in `f64`.
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

impl Compressibility<f64> for GaugeModel {
    fn gas(&self) -> Gas {
        match self {
            GaugeModel::Device(m) => Compressibility::<f64>::gas(m.as_ref()),
            GaugeModel::Ideal(m) => Compressibility::<f64>::gas(m),
            GaugeModel::Reference(m) => Compressibility::<f64>::gas(m.as_ref()),
        }
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

impl GaugeConfig {
    /// The device's physical configuration (the core's form: what a host
    /// prepares and sends to a device). The front-ends carry no correction
    /// (the simulated instruments' errors are the truth's, not the gauge's).
    pub fn core(&self) -> Result<prepared::GaugeConfig, Error> {
        let record = |channel, sensor| CalibrationRecord {
            sequence: 1,
            channel,
            sensor,
            correction: Correction::IDENTITY,
        };
        Ok(prepared::GaugeConfig {
            setup: SetupFx::from_f64(&self.setup)?,
            pressure: record(
                Channel::Pressure,
                match self.pressure {
                    PressureFrontEnd::Bridge(b) => SensorConfig::Bridge(b),
                    PressureFrontEnd::Loop(l) => SensorConfig::Loop(l),
                },
            ),
            temperature: record(
                Channel::Temperature,
                match self.temperature {
                    TemperatureFrontEnd::Rtd(r) => SensorConfig::Rtd(r),
                    TemperatureFrontEnd::Ntc(n) => SensorConfig::Ntc(n),
                },
            ),
            track: TrackConfigFx::from_f64(&self.track)?,
            barometric_pa: fx::from_f64(
                self.barometric_pa,
                isochor_core::SensorSetting::BarometricPressure,
            )?,
            // A mixture's table, built for its composition (no built-in
            // table names it).
            model: match self.setup.gas.mixture() {
                Some(_) => Some(mixture_table(self.setup.gas)?.clone()),
                None => None,
            },
            plausibility: Some(Plausibility {
                pressure: self.pressure_plausibility,
                temperature: self.temperature_plausibility,
            }),
            composition: crate::run::spec_of(self.setup.gas).core_composition(),
            field: Default::default(),
        })
    }
}

impl GaugeConfig {
    /// The configuration a device is given for this gauge ([`Self::core`]
    /// with the gauge model as a device table): a device runs table models
    /// only, so an `ideal` gauge model becomes a table of Z = 1, and
    /// `reference` is refused (the `f64` backend runs it).
    pub fn device(&self) -> Result<prepared::GaugeConfig, Error> {
        let mut cfg = self.core()?;
        match self.model {
            ModelKind::Device => {}
            ModelKind::Ideal => cfg.model = Some(ideal_table(self.setup.gas)?),
            ModelKind::Reference => {
                return Err(Error::Invalid(
                    "a device runs gas-model tables; use the float backend for the reference model"
                        .into(),
                ));
            }
        }
        Ok(cfg)
    }
}

/// A prepared configuration's bytes shared by a pipeline and its model
/// (kept in 32-bit words: the blob starts at a multiple of 4).
#[derive(Clone, Debug)]
pub struct SharedBlob {
    words: Arc<[u32]>,
    len: usize,
}

/// Derives its views on every use (a host's division is cheap).
impl isochor_core::prepared::PreparedBytes for SharedBlob {}

impl SharedBlob {
    /// The bytes of `buf`.
    pub fn new(buf: &PreparedBuf) -> SharedBlob {
        SharedBlob::from_bytes(buf.bytes())
    }

    /// A copy of `bytes`.
    pub fn from_bytes(bytes: &[u8]) -> SharedBlob {
        let words: Vec<u32> = bytes
            .chunks(4)
            .map(|c| {
                let mut w = [0u8; 4];
                w[..c.len()].copy_from_slice(c);
                u32::from_le_bytes(w)
            })
            .collect();
        SharedBlob {
            words: words.into(),
            len: bytes.len(),
        }
    }
}

impl AsRef<[u8]> for SharedBlob {
    fn as_ref(&self) -> &[u8] {
        &self.words.as_bytes()[..self.len]
    }
}

/// The codes of a sample as the converters deliver them (a bipolar code in
/// the converter's low bits).
fn raw(codes: &Codes, pressure: &PressureFrontEnd) -> Result<RawSample, Error> {
    let p = match (codes.pressure, pressure) {
        (PressureCode::Bridge(c), PressureFrontEnd::Bridge(b)) => {
            let bits = u32::from(b.adc_bits.clamp(8, 24));
            (c as u32) & ((1u32 << bits) - 1)
        }
        (PressureCode::Loop(c), PressureFrontEnd::Loop(_)) => c,
        _ => return Err(Error::Invalid("pressure code of another front-end".into())),
    };
    Ok(RawSample {
        pressure: p,
        temperature: codes.temperature,
    })
}

/// The in-process device pipeline (fixed point, prepared configuration):
/// the device's chain (`app::fixed::Pipeline::sample`) and its telemetry
/// frame, read back as a host reads a device's.
pub struct FixedGauge {
    pipeline: fixed::Pipeline<SharedBlob>,
    pressure: PressureFrontEnd,
    rated_kg: f64,
    seq: u32,
}

impl FixedGauge {
    /// Prepares the configuration as a host does for a device
    /// ([`GaugeConfig::device`]) and starts the device's pipeline on it.
    pub fn new(c: &GaugeConfig) -> Result<FixedGauge, Error> {
        let (buf, _) = PreparedBuf::build(&c.device()?)?;
        FixedGauge::from_prepared(&buf, c.pressure)
    }

    /// The device pipeline over a prepared configuration.
    pub fn from_prepared(
        buf: &PreparedBuf,
        pressure: PressureFrontEnd,
    ) -> Result<FixedGauge, Error> {
        let prepared = Prepared::new(SharedBlob::new(buf))?;
        let pipeline = fixed::Pipeline::new(prepared, Zero::default())?;
        let rated_kg = to_f64(pipeline.tracker().estimator().rated_mass_kg());
        Ok(FixedGauge {
            pipeline,
            pressure,
            rated_kg,
            seq: 0,
        })
    }
}

/// A device table of Z = 1 (the ideal gas) for `gas`, over the envelope.
fn ideal_table(gas: Gas) -> Result<isochor_core::model::device::TableBuf, Error> {
    let t = match gas.mixture() {
        Some(_) => mixture_table(gas)?.table(),
        None => isochor_core::model::device::builtin::table(gas)
            .ok_or_else(|| Error::Invalid(format!("no table of {gas}")))?,
    };
    let cols = t.columns();
    let rows = t.rows();
    let ideal = Table {
        z_offset: 1 << 30,
        z_floor: 1 << 29,
        coefs: &vec![0u16; rows * cols],
        boundary: None,
        ..t
    };
    Ok(isochor_core::model::device::TableBuf::from_table(&ideal)?)
}

impl Backend for FixedGauge {
    fn name(&self) -> &'static str {
        "fixed"
    }

    fn rated_mass_kg(&self) -> f64 {
        self.rated_kg
    }

    fn sample(&mut self, at: Instant, codes: &Codes) -> Result<Reading, Error> {
        let raw = raw(codes, &self.pressure)?;
        let out = self.pipeline.sample(at, &raw);
        let frame = app::telemetry::from_track(self.seq, out, Status::OK);
        self.seq = self.seq.wrapping_add(1);
        Ok(Reading::from_telemetry(&frame, out.events))
    }
}

/// The in-process `f64` pipeline.
pub struct FloatGauge {
    pipeline: float::Pipeline<f64, GaugeModel>,
    pressure: PressureFrontEnd,
    rated_kg: f64,
}

impl FloatGauge {
    /// The `f64` pipeline of the same physical configuration as the fixed
    /// gauge's.
    pub fn new(c: &GaugeConfig) -> Result<FloatGauge, Error> {
        let cfg = c.core()?;
        let model = GaugeModel::new(c.model, c.setup.gas)?;
        let pipeline = float::Pipeline::new(&cfg, model, Zero::default())?;
        let rated_kg = pipeline.tracker().estimator().rated_mass_kg();
        Ok(FloatGauge {
            pipeline,
            pressure: c.pressure,
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
        let raw = raw(codes, &self.pressure)?;
        let readings = self.pipeline.convert(at, &raw)?;
        let sensor = readings.status();
        let r = self.pipeline.tracker_mut().update(
            at,
            readings.pressure.pressure_pa,
            readings.temperature.temperature_k,
            sensor,
        )?;
        // Read as [`Reading::from_telemetry`] reads the fixed-point gauge's
        // frames: pressure and temperature are the content's (smoothed)
        // ones, shown when measured; content values when valid.
        let measured = !(r.status | sensor).intersects(isochor_core::sensor::VALUE_INVALID);
        let shown = r.content.filter(|_| measured);
        let content = r
            .content
            .filter(|c| !c.status.intersects(Status::CONTENT_INVALID));
        Ok(Reading {
            pressure_pa: shown.map(|c| c.pressure_pa),
            temperature_k: shown.map(|c| c.temperature_k),
            mass_kg: content.map(|c| c.mass_kg),
            fill_fraction: content.map(|c| c.fill_fraction),
            u_mass_kg: r
                .uncertainty
                .filter(|_| content.is_some())
                .map(|u| u.mass_kg),
            rate_kg_h: r.rate.map(|x| x.kg_h),
            u_rate_kg_h: r.rate.map(|x| x.u_kg_h),
            time_to_empty_s: r.time_to_empty.map(|t| {
                (
                    t.expected.0 as f64 / 1e3,
                    t.earliest.0 as f64 / 1e3,
                    t.latest.map(|l| l.0 as f64 / 1e3),
                )
            }),
            time_to_empty_withheld: r.time_to_empty_withheld,
            loss_fraction_per_day: r.leak.map(|l| l.loss_per_day),
            status: r.status | sensor,
            events: r.events,
        })
    }
}
