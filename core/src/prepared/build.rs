//! Preparing a configuration (hosts): the physical configuration in, the
//! blob out.

use crate::error::{Condition, SensorSetting, TankSetting};
use heapless::Vec;
use serde::{Deserialize, Serialize};
use zerocopy::IntoBytes;

use super::{
    ArraySpan, BoundaryScalars, CurveDesc, HEADER_LEN, MAGIC, MAX_LEN, MAX_SCALARS_LEN,
    ModelScalars, Prepared, PressureScalars, Scalars, TemperatureScalars, VERSION,
};
use crate::checksum::crc32c;
use crate::content::{fixed, float};
use crate::curve::{CurveBuf, Piece};
use crate::field::FieldConfig;
use crate::model::device::{DeviceModel, Table, TableBuf, builtin};
use crate::sensor::calibration::{CalibrationRecord, Channel};
use crate::sensor::channel::fixed::{
    PressureFrontBuf, PressureStageBuf, StatusMapBuf, Step, TemperatureStageBuf,
};
use crate::sensor::channel::float::{PressureChannel, TemperatureChannel};
use crate::sensor::plausibility::PlausibilityConfig;
use crate::sensor::plausibility::fixed::Checker;
use crate::track::fixed::TrackConfigFx;
use crate::{Composition, Error, SetupFx, fx};

/// A gauge's physical configuration: what a person writes down, and what a
/// host prepares ([`PreparedBuf::build`]).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GaugeConfig {
    /// Gas, tank, standard condition, settled reference temperature.
    pub setup: SetupFx,
    /// The pressure sensor and its calibration.
    pub pressure: CalibrationRecord,
    /// The temperature sensor and its calibration.
    pub temperature: CalibrationRecord,
    /// Tracking, uncertainty declarations, alarm limits and debounce.
    pub track: TrackConfigFx,
    /// Barometric pressure at the site, absolute (500 … 1100 hPa).
    pub barometric_pa: fx::Pressure,
    /// A gas-model table of the setup's gas built on a host; `None` for the
    /// built-in table.
    pub model: Option<TableBuf>,
    /// Plausibility checks of the readings (range, rate of change, stuck
    /// value); `None`: no checks beyond the front-ends' own.
    pub plausibility: Option<Plausibility>,
    /// A mixture's composition (hosts show it when they read the
    /// configuration back; the device needs only the table and the molar
    /// mass in the setup's gas); `None` for a pure gas.
    pub composition: Option<Composition>,
    /// The serial line (Modbus address, baud rate, parity, protocol on a
    /// one-UART board) and the 4–20 mA output.
    pub field: FieldConfig,
}

/// The plausibility checks of both channels.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Plausibility {
    /// The pressure channel (values in Pa).
    pub pressure: PlausibilityConfig,
    /// The temperature channel (values in K).
    pub temperature: PlausibilityConfig,
}

/// One standard atmosphere, `fx::Pressure` bits (101 325 Pa × 16).
pub const STANDARD_ATMOSPHERE: fx::Pressure = fx::Pressure::from_bits(1_621_200);
/// Barometric range accepted, `fx::Pressure` bits (50 000 … 110 000 Pa).
pub(super) const BARO_BITS: core::ops::RangeInclusive<u32> = 800_000..=1_760_000;
/// Largest error aimed for of the settled-pressure curve, `fx::Pressure`
/// bits (1 Pa).
const SETTLE_TOLERANCE: f64 = 16.0;
/// Grid of the search for the end of the settled-pressure curve.
const SETTLE_GRID: u32 = 512;

impl GaugeConfig {
    /// The configuration of the reference board's nominal sensors (a
    /// 0–300 bar gauge bridge on a bipolar 24-bit converter, a Pt1000 on a
    /// 24-bit ratiometric input), the default tracking and alarm settings
    /// for the tank, one standard atmosphere and the built-in gas model.
    pub fn nominal(setup: SetupFx) -> GaugeConfig {
        let pressure = CalibrationRecord::nominal_pressure();
        let full_scale = pressure.full_scale();
        GaugeConfig {
            setup,
            pressure,
            temperature: CalibrationRecord::nominal_temperature(),
            track: TrackConfigFx::for_tank(
                &setup.tank,
                crate::uncertainty::fixed::UncertaintyConfigFx::example(full_scale),
            ),
            barometric_pa: STANDARD_ATMOSPHERE,
            model: None,
            plausibility: None,
            composition: None,
            field: FieldConfig::default(),
        }
    }

    /// Checks every part (the checks each part's own validation makes).
    pub fn validate(&self) -> Result<(), Error> {
        self.setup.validate()?;
        self.pressure.validate_for(Channel::Pressure)?;
        self.temperature.validate_for(Channel::Temperature)?;
        self.track.validate()?;
        if !BARO_BITS.contains(&self.barometric_pa.to_bits()) {
            return Err(Error::OutOfRange(SensorSetting::BarometricPressure.into()));
        }
        if let Some(p) = &self.plausibility {
            p.pressure.validate()?;
            p.temperature.validate()?;
        }
        self.field.validate()?;
        if let Some(t) = &self.model {
            t.table().validate()?;
            if t.gas != self.setup.gas {
                return Err(Error::ModelUnusable(Condition::GasOfSetup));
            }
        }
        // A mixture names its composition; a pure gas has none.
        match (self.setup.gas.mixture(), &self.composition) {
            (None, None) => {}
            (Some(m), Some(c)) => {
                c.validate()?;
                if !c.is_of(&m) {
                    return Err(Error::OutOfRange(TankSetting::MixtureComposition.into()));
                }
            }
            _ => return Err(Error::OutOfRange(TankSetting::GasComposition.into())),
        }
        Ok(())
    }

    /// The gas-model table in use: the configuration's own or the built-in
    /// one of the setup's gas.
    pub fn table(&self) -> Result<Table<'_>, Error> {
        match &self.model {
            Some(t) => Ok(t.table()),
            None => {
                builtin::table(self.setup.gas).ok_or(Error::ModelUnusable(Condition::BuiltinTable))
            }
        }
    }
}

/// The width of the pressure transducer's range, `fx::Pressure` bits.
fn pressure_span(r: &CalibrationRecord) -> u32 {
    use crate::sensor::calibration::SensorConfig;
    let (lo, hi) = match &r.sensor {
        SensorConfig::Bridge(b) => (b.range_lo_pa, b.range_hi_pa),
        SensorConfig::Loop(l) => (l.range_lo_pa, l.range_hi_pa),
        _ => (fx::GaugePressure::ZERO, fx::GaugePressure::ZERO),
    };
    // Both in 2^-4 Pa, as `fx::Pressure`.
    (i64::from(hi.to_bits()) - i64::from(lo.to_bits())).clamp(0, i64::from(u32::MAX)) as u32
}

/// How closely a prepared configuration follows the `f64` reference paths
/// it was prepared from (largest errors on the fitting points).
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct Report {
    /// Temperature curve, K.
    pub temperature_k: f64,
    /// Pressure curves: Pa, or for a bridge the largest of that and the
    /// compensation curves' relative errors.
    pub pressure: f64,
    /// Settled-pressure curve, Pa (0 without a curve).
    pub settle_pa: f64,
    /// Pieces of all curves.
    pub pieces: usize,
}

/// A prepared configuration's bytes (hosts), kept in 32-bit words so that
/// the blob starts at a multiple of 4.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PreparedBuf {
    words: Vec<u32, { MAX_LEN / 4 }>,
    len: usize,
}

/// The arrays being laid out.
struct Arrays {
    bytes: Vec<u8, MAX_LEN>,
}

impl Arrays {
    fn push<T: IntoBytes + zerocopy::Immutable>(
        &mut self,
        items: &[T],
    ) -> Result<ArraySpan, Error> {
        while !self.bytes.len().is_multiple_of(4) {
            self.bytes.push(0).map_err(|_| Error::RecordTooLarge)?;
        }
        let offset = self.bytes.len() as u32;
        self.bytes
            .extend_from_slice(items.as_bytes())
            .map_err(|_| Error::RecordTooLarge)?;
        Ok(ArraySpan {
            offset,
            len: items.len() as u32,
        })
    }

    fn curve(&mut self, c: &CurveBuf) -> Result<CurveDesc, Error> {
        Ok(CurveDesc {
            pieces: self.push::<Piece>(&c.pieces)?,
            end: c.end,
            extra: c.extra,
        })
    }

    fn steps(&mut self, m: &StatusMapBuf) -> Result<ArraySpan, Error> {
        self.push::<Step>(&m.steps)
    }
}

impl PreparedBuf {
    /// Prepares a configuration (see the [module](super) documentation).
    /// Fails with the reason when a part is out of range or cannot be
    /// prepared (e.g. a setup whose rated condition is two-phase).
    pub fn build(cfg: &GaugeConfig) -> Result<(PreparedBuf, Report), Error> {
        cfg.validate()?;
        let table = cfg.table()?;
        let device = DeviceModel::new(table)?;
        let mut report = Report::default();
        let mut arrays = Arrays { bytes: Vec::new() };

        // Sensor channels.
        let baro = fx::to_f64(cfg.barometric_pa);
        let t_ch = TemperatureChannel::<f64>::new(&cfg.temperature)?;
        let p_ch = PressureChannel::<f64>::new(&cfg.pressure, baro)?;
        let (t_stage, t_err) = TemperatureStageBuf::prepare(&t_ch)?;
        let (p_stage, p_err) = PressureStageBuf::prepare(&p_ch, &t_stage.stage())?;
        report.temperature_k = t_err;
        report.pressure = p_err;
        report.pieces += t_stage.curve.pieces.len();
        let temperature = TemperatureScalars {
            full: t_stage.full,
            lo: t_stage.lo,
            hi: t_stage.hi,
            status: arrays.steps(&t_stage.status)?,
            curve: arrays.curve(&t_stage.curve)?,
        };
        let pressure = match &p_stage.front {
            PressureFrontBuf::Bridge(b) => {
                report.pieces +=
                    b.zero.pieces.len() + b.inv_span.pieces.len() + b.curve.pieces.len();
                PressureScalars::Bridge {
                    bits: b.bits,
                    bipolar: b.bipolar,
                    rails: b.rails,
                    signal_frac: b.signal_frac,
                    code_shift: b.code_shift,
                    zero: arrays.curve(&b.zero)?,
                    inv_span: arrays.curve(&b.inv_span)?,
                    inv_frac: b.inv_frac,
                    reference: b.reference,
                    status: arrays.steps(&b.status)?,
                    curve: arrays.curve(&b.curve)?,
                }
            }
            PressureFrontBuf::Loop(l) => {
                report.pieces += l.curve.pieces.len();
                PressureScalars::Loop {
                    top: l.top,
                    bands: l.bands,
                    status: arrays.steps(&l.status)?,
                    curve: arrays.curve(&l.curve)?,
                    persistence: l.persistence,
                }
            }
        };

        // The estimator and the settled-pressure curve.
        let est = fixed::Estimator::new(cfg.setup, &device)?;
        let est_f = float::Estimator::<f64, _>::new(cfg.setup.to_real(), &device)?;
        let settle = match settle_curve(&est_f, table.pressure_knots.last().copied())? {
            Some((c, err)) => {
                report.settle_pa = err / 16.0;
                report.pieces += c.pieces.len();
                Some(arrays.curve(&c)?)
            }
            None => None,
        };

        // The table.
        let boundary = match &table.boundary {
            Some(b) => Some(BoundaryScalars {
                critical_temperature: b.critical_temperature,
                saturation_pressure: arrays.push::<u32>(b.saturation_pressure)?,
                limit_pressure: arrays.push::<u32>(b.limit_pressure)?,
            }),
            None => None,
        };
        let model = ModelScalars {
            gas: table.gas,
            z_offset: table.z_offset,
            z_step_exp: table.z_step_exp,
            z_floor: table.z_floor,
            temperature_knots: arrays.push::<u32>(table.temperature_knots)?,
            pressure_knots: arrays.push::<u32>(table.pressure_knots)?,
            coefs: arrays.push::<u16>(table.coefs)?,
            boundary,
            settle,
        };

        // The source configuration.
        let mut src = [0u8; 4096];
        let src = postcard::to_slice(cfg, &mut src).map_err(|_| Error::RecordTooLarge)?;
        let source = arrays.push::<u8>(src)?;

        let plausibility = match &cfg.plausibility {
            Some(p) => Some((
                Checker::new(&p.pressure, 4)?,
                Checker::new(&p.temperature, 16)?,
            )),
            None => None,
        };
        let scalars = Scalars {
            temperature,
            pressure,
            plausibility,
            barometric: cfg.barometric_pa.to_bits(),
            zero_pressure_limit: super::zero_pressure_limit(pressure_span(&cfg.pressure)),
            model,
            estimator: est.parts(),
            track: cfg.track,
            source,
            field: cfg.field.prepare()?,
        };
        let buf = assemble(&scalars, &arrays.bytes)?;
        // What the device will check, checked here.
        buf.prepared()?;
        Ok((buf, report))
    }

    /// The blob.
    pub fn bytes(&self) -> &[u8] {
        self.words
            .as_slice()
            .as_bytes()
            .get(..self.len)
            .unwrap_or(&[])
    }

    /// The blob, validated.
    pub fn prepared(&self) -> Result<Prepared<&[u8]>, Error> {
        Prepared::new(self.bytes())
    }

    /// A blob received as bytes, copied into words (so that it starts at a
    /// multiple of 4); not validated.
    pub fn from_bytes(bytes: &[u8]) -> Result<PreparedBuf, Error> {
        if bytes.len() > MAX_LEN {
            return Err(Error::RecordTooLarge);
        }
        let mut words: Vec<u32, { MAX_LEN / 4 }> = Vec::new();
        for chunk in bytes.chunks(4) {
            let mut w = [0u8; 4];
            w.get_mut(..chunk.len())
                .ok_or(Error::BufferTooSmall)?
                .copy_from_slice(chunk);
            words
                .push(u32::from_le_bytes(w))
                .map_err(|_| Error::RecordTooLarge)?;
        }
        Ok(PreparedBuf {
            words,
            len: bytes.len(),
        })
    }
}

/// Header, scalars, arrays and checksum in one blob.
fn assemble(scalars: &Scalars, arrays: &[u8]) -> Result<PreparedBuf, Error> {
    let mut enc = [0u8; MAX_SCALARS_LEN];
    let enc = postcard::to_slice(scalars, &mut enc).map_err(|_| Error::RecordTooLarge)?;
    let arrays_at = (HEADER_LEN + enc.len()).div_ceil(4) * 4;
    let total = arrays_at + arrays.len().div_ceil(4) * 4 + 4;
    if total > MAX_LEN {
        return Err(Error::RecordTooLarge);
    }
    let mut bytes: Vec<u8, MAX_LEN> = Vec::new();
    let mut put = |b: &[u8]| {
        bytes
            .extend_from_slice(b)
            .map_err(|_| Error::RecordTooLarge)
    };
    put(&MAGIC)?;
    put(&VERSION.to_le_bytes())?;
    put(&[0, 0])?;
    put(&(total as u32).to_le_bytes())?;
    put(&(enc.len() as u32).to_le_bytes())?;
    put(&(arrays_at as u32).to_le_bytes())?;
    put(enc)?;
    while bytes.len() < arrays_at {
        bytes.push(0).map_err(|_| Error::RecordTooLarge)?;
    }
    bytes
        .extend_from_slice(arrays)
        .map_err(|_| Error::RecordTooLarge)?;
    while bytes.len() < total - 4 {
        bytes.push(0).map_err(|_| Error::RecordTooLarge)?;
    }
    let crc = crc32c(&bytes);
    bytes
        .extend_from_slice(&crc.to_le_bytes())
        .map_err(|_| Error::RecordTooLarge)?;
    PreparedBuf::from_bytes(&bytes)
}

/// The settled pressure as a curve of τ/2 (`fx::Pressure` bits), from zero
/// to where the solver stops giving a clean answer (the model's range or
/// the gas region ends) or the pressure passes `p_max` (bits); `None` when
/// there is no clean stretch. Returns the curve and its largest error
/// (bits).
fn settle_curve<M: crate::model::Compressibility<f64>>(
    est: &float::Estimator<f64, M>,
    p_max: Option<u32>,
) -> Result<Option<(CurveBuf, f64)>, Error> {
    let p_max = p_max.map_or(f64::INFINITY, |p| p as f64 / 16.0);
    // τ/2 bits → settled pressure, Pa; clean or not.
    let at = |x: i64| -> (f64, bool) {
        let tau = 2.0 * x as f64 / 16.0;
        let (p, st) = est.settled_pressure_of(tau);
        (p, st.is_ok() && p <= p_max && p.is_finite())
    };
    let top = i32::MAX as i64;
    let mut end = 0i64;
    for i in 1..=SETTLE_GRID as i64 {
        let x = top * i / SETTLE_GRID as i64;
        if at(x).1 {
            end = x;
        } else {
            // The end lies in (end, x): bisection.
            let (mut a, mut b) = (end, x);
            while b - a > 1 {
                let m = a + (b - a) / 2;
                if at(m).1 {
                    a = m;
                } else {
                    b = m;
                }
            }
            end = a;
            break;
        }
    }
    if end < 16 {
        return Ok(None);
    }
    let f = |x: f64| at(x as i64).0 * 16.0;
    let (c, err) = CurveBuf::fit(&f, 0, end as i32, SETTLE_TOLERANCE)?;
    Ok(Some((c, err)))
}
