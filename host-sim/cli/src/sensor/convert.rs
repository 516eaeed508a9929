//! The reports of `isochor sensor`: single values through the sensor
//! front-ends, both ways, in both core paths; the calibration fit; and
//! reading back a record.
//!
//! Each conversion takes a request in SI units (the command line's parsing is
//! the command's) and returns a typed [`Report`]: its JSON fields (SI, stable:
//! `pressure_pa` absolute, `gauge_pressure_pa`, `temperature_k`, `ohms`,
//! `milliamps`, `code`, `band`, `status` flag names, a `fixed` object with the
//! device path's answer where there is one, the `settings` the conversion used
//! and the same as `config`, the stored form) and the lines of its text form.
//! A value is `null` when the status says it is not a measurement. The
//! structs' fields are declared in name order, the order the command prints.

use super::{Fit, Quantity, fit, parse_points, settings};
use crate::Error;
use isochor_core::constants::ZERO_CELSIUS_K;
use isochor_core::sensor::calibration::{CalibrationRecord, Channel, SensorConfig};
use isochor_core::sensor::current_loop::{self, LoopConfig};
use isochor_core::sensor::{PressureKind, VALUE_INVALID, bridge, gauge, ntc, resistive, rtd};
use isochor_core::time::Millis;
use isochor_core::{Status, fx};
use isochor_eos::{safety, units};
use serde::Serialize;
use serde_json::Value;

/// A value that may be withheld: `null` in JSON when the status says it is
/// not a measurement.
pub type Measured = Option<f64>;

/// A converter code: a reading's integer code or a computed (fractional) one.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(untagged)]
pub enum Code {
    /// A code as read (unipolar or bipolar).
    Read(i64),
    /// The code a pressure gives (not rounded).
    Computed(f64),
}

/// The device path's (fixed-point) answer beside the `f64` one.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct FixedSide {
    /// Gauge pressure, Pa.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gauge_pressure_pa: Option<Measured>,
    /// Loop current, mA.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub milliamps: Option<f64>,
    /// Resistance, Ω.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ohms: Option<f64>,
    /// Absolute pressure, Pa.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pressure_pa: Option<Measured>,
    /// Status flag names.
    pub status: Vec<&'static str>,
    /// Temperature, K.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub temperature_k: Option<Measured>,
}

/// One conversion through a front-end (`rtd`, `ntc`, `loop`, `bridge`,
/// `gauge`). Fields absent from a conversion are not serialised.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Conversion {
    /// NAMUR NE 43 band of a loop current.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub band: Option<&'static str>,
    /// Barometric pressure, Pa (`gauge`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub barometric_pa: Option<f64>,
    /// Converter code, given or computed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub code: Option<Code>,
    /// The front-end's stored form (raw fixed-point bits).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub config: Option<SensorConfig>,
    /// The device path's answer.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fixed: Option<FixedSide>,
    /// Gauge pressure, Pa.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gauge_pressure_pa: Option<Measured>,
    /// Front-end kind: rtd, ntc, loop, bridge, gauge.
    pub kind: &'static str,
    /// Loop current, mA.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub milliamps: Option<f64>,
    /// Resistance, Ω.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ohms: Option<Measured>,
    /// Absolute pressure, Pa.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pressure_pa: Option<Measured>,
    /// RTD resistance at 0 °C, Ω.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub r0_ohms: Option<f64>,
    /// The front-end's settings in SI units.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub settings: Option<Value>,
    /// Status flag names of the `f64` path.
    pub status: Vec<&'static str>,
    /// Temperature, K.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub temperature_k: Option<Measured>,
    /// A bridge transducer's own temperature, K.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub transducer_temperature_k: Option<f64>,
}

/// A record written by `sensor fit --record`.
#[derive(Clone, Debug, Serialize)]
pub struct RecordWritten {
    /// Its length, bytes.
    pub bytes: usize,
    /// The file.
    pub file: String,
    /// The record kind.
    pub kind: u16,
    /// Its sequence number.
    pub sequence: u32,
    /// The record format version.
    pub version: u16,
}

/// The report of `sensor fit`.
#[derive(Clone, Debug, Serialize)]
pub struct FitReport {
    /// The correction as the device stores it.
    pub correction: isochor_core::sensor::calibration::Correction,
    /// The fit.
    pub fit: Fit,
    /// What the points measure.
    pub quantity: Quantity,
    /// The record written, if one was.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub record: Option<RecordWritten>,
    /// SI unit of the points.
    pub unit: &'static str,
}

/// A record's correction, in SI units.
#[derive(Clone, Debug, Serialize)]
pub struct CorrectionView {
    /// Polynomial coefficients.
    pub coefficients: Vec<f64>,
    /// Upper end of the interval.
    pub hi: f64,
    /// Lower end of the interval.
    pub lo: f64,
}

/// The report of `sensor record`.
#[derive(Clone, Debug, Serialize)]
pub struct RecordReport {
    /// The record's length, bytes.
    pub bytes: usize,
    /// The input the record belongs to.
    pub channel: Channel,
    /// Always `ok` (a bad checksum is an error).
    pub checksum: &'static str,
    /// The front-end's stored form.
    pub config: SensorConfig,
    /// The correction.
    pub correction: CorrectionView,
    /// Its sequence number.
    pub sequence: u32,
    /// The front-end's kind.
    pub sensor_kind: &'static str,
    /// The front-end's settings in SI units.
    pub settings: Value,
}

/// A report and the lines of its text form.
#[derive(Clone, Debug)]
pub struct Report<T> {
    /// The subcommand (`rtd`, `fit`, …).
    pub title: &'static str,
    /// The typed report (the JSON form).
    pub report: T,
    /// The text form's lines, in order.
    pub lines: Vec<String>,
}

impl<T> Report<T> {
    /// The text form: a title, the lines, and the cautions.
    pub fn render_text(&self) -> String {
        let mut s = format!("isochor sensor {}\n", self.title);
        for l in &self.lines {
            s.push_str("  ");
            s.push_str(l);
            s.push('\n');
        }
        s.push('\n');
        s.push_str(safety::GENERAL);
        s.push('\n');
        s.push_str(safety::HARDWARE);
        s.push('\n');
        s
    }
}

/// A value, or `None` (JSON `null`) when the status says it is not a
/// measurement.
fn valid(v: f64, status: Status) -> Measured {
    if status.intersects(VALUE_INVALID) {
        None
    } else {
        Some(v)
    }
}

fn names(status: Status) -> Vec<&'static str> {
    status.names().collect()
}

fn fx_value<T: isochor_core::fx::FixedValue>(v: f64, what: &'static str) -> Result<T, Error> {
    // The wording the core gave when it took the option's name.
    crate::error::fixed_option(v, what).map_err(|e| Error::Invalid(format!("{what}: {e}")))
}

fn fmt_status(s: Status) -> String {
    if s.is_ok() {
        "ok".to_string()
    } else {
        s.to_string()
    }
}

fn fmt_t(k: Measured) -> String {
    k.map(|k| {
        format!(
            "{} °C ({} K)",
            units::fmt_decimal(k - ZERO_CELSIUS_K, 4),
            units::fmt_decimal(k, 4)
        )
    })
    .unwrap_or_else(|| "not valid".to_string())
}

fn kind(gauge: bool) -> PressureKind {
    if gauge {
        PressureKind::Gauge
    } else {
        PressureKind::Absolute
    }
}

/// Checks a barometric pressure (50–110 kPa), `input` as given for the
/// message.
pub fn barometric(pa: f64, input: &str) -> Result<f64, Error> {
    if !(gauge::BAROMETRIC_MIN_PA..=gauge::BAROMETRIC_MAX_PA).contains(&pa) {
        return Err(Error::Invalid(format!(
            "--barometric {input}: outside 50-110 kPa, not a barometric pressure"
        )));
    }
    Ok(pa)
}

/// A front-end conversion's report, with its stored form and settings.
fn finish(
    title: &'static str,
    mut m: Conversion,
    lines: Vec<String>,
    cfg: SensorConfig,
) -> Report<Conversion> {
    m.config = Some(cfg);
    m.settings = Some(settings(&cfg));
    Report {
        title,
        report: m,
        lines,
    }
}

/// The converter and corrections of a resistive input.
#[derive(Clone, Copy, Debug)]
pub struct Converter {
    /// Wiring; `None`: the sensor's usual one (ratiometric for an RTD, a
    /// low-side divider for an NTC).
    pub circuit: Option<resistive::Circuit>,
    /// Reference resistor, Ω; `None`: 4·R0 for an RTD, R25 for an NTC.
    pub reference_ohms: Option<f64>,
    /// Converter resolution, bits.
    pub bits: u8,
    /// Total 2-wire lead resistance to subtract, Ω.
    pub lead_ohms: f64,
    /// Excitation for the self-heating correction (V or A).
    pub excitation: f64,
    /// Self-heating, K per mW.
    pub self_heating_k_per_mw: f64,
}

impl Converter {
    fn apply(&self, fe: &mut resistive::FrontEnd) -> Result<(), Error> {
        fe.lead_ohms = fx_value(self.lead_ohms, "--lead-ohms")?;
        fe.excitation = fx_value(self.excitation, "--excitation")?;
        fe.self_heating_k_per_mw = fx_value(self.self_heating_k_per_mw, "--self-heating-k-per-mw")?;
        fe.validate().map_err(|source| Error::Rejected {
            what: "sensor input",
            source,
        })
    }
}

/// What a resistive conversion starts from.
#[derive(Clone, Copy, Debug)]
pub enum ResistiveInput {
    /// A measured resistance, Ω → temperature.
    Ohms(f64),
    /// A temperature, K → resistance.
    Temperature(f64),
    /// A converter code → temperature.
    Code(u32),
}

/// `sensor rtd`: a platinum RTD (IEC 60751).
#[derive(Clone, Copy, Debug)]
pub struct RtdRequest {
    /// Resistance at 0 °C, Ω.
    pub r0_ohms: f64,
    /// Converter and corrections.
    pub converter: Converter,
    /// The input.
    pub input: ResistiveInput,
}

/// Runs an RTD conversion.
pub fn rtd(r: &RtdRequest) -> Result<Report<Conversion>, Error> {
    let r0 = r.r0_ohms;
    let circuit = r
        .converter
        .circuit
        .unwrap_or(resistive::Circuit::Ratiometric);
    let rref = r.converter.reference_ohms.unwrap_or(4.0 * r0);
    let mut cfg = rtd::RtdConfig::new(r0, circuit, r.converter.bits, rref).map_err(|source| {
        Error::Rejected {
            what: "RTD",
            source,
        }
    })?;
    r.converter.apply(&mut cfg.front_end)?;
    let fl = rtd::float::Rtd::<f64>::new(&cfg)?;
    let fi = rtd::fixed::Rtd::new(&cfg)?;
    let mut m = Conversion {
        kind: "rtd",
        r0_ohms: Some(fx::to_f64(cfg.r0_ohms)),
        ..Conversion::default()
    };
    let mut lines = vec![format!(
        "IEC 60751 Callendar–Van Dusen, R0 = {} Ω",
        fx::to_f64(cfg.r0_ohms)
    )];
    let (rb, xf, xq) = match r.input {
        ResistiveInput::Temperature(t_k) => {
            let ohms = fl.ohms(t_k).map_err(|e| {
                Error::Invalid(format!("--temperature {}: {e}", units::fmt_celsius(t_k)))
            })?;
            let (rq, sq) = fi.ohms(fx_value(t_k, "--temperature")?);
            m.temperature_k = Some(Some(t_k));
            m.ohms = Some(Some(ohms));
            m.status = names(Status::OK);
            m.fixed = Some(FixedSide {
                ohms: Some(fx::to_f64(rq)),
                status: names(sq),
                ..FixedSide::default()
            });
            lines.push(format!("temperature {}", fmt_t(Some(t_k))));
            lines.push(format!(
                "resistance  {ohms:.4} Ω (f64), {:.4} Ω (fixed point)",
                fx::to_f64(rq)
            ));
            lines.push("status      ok".to_string());
            return Ok(finish("rtd", m, lines, SensorConfig::Rtd(cfg)));
        }
        ResistiveInput::Ohms(ohms) => (
            ohms,
            fl.read_ohms(ohms)?,
            fi.read_ohms(fx_value(ohms, "--ohms")?),
        ),
        ResistiveInput::Code(code) => {
            m.code = Some(Code::Read(code.into()));
            lines.push(format!(
                "code        {code} of {} bits, {circuit:?}, R_ref {rref} Ω",
                r.converter.bits
            ));
            let b = fl.read(code);
            let q = fi.read(code);
            let ohms = r0 * rtd::float::ratio(b.temperature_k - ZERO_CELSIUS_K);
            (ohms, b, q)
        }
    };
    let t = valid(xf.temperature_k, xf.status);
    m.ohms = Some(valid(rb, xf.status));
    m.temperature_k = Some(t);
    m.status = names(xf.status);
    let tq = valid(fx::to_f64(xq.temperature_k), xq.status);
    m.fixed = Some(FixedSide {
        temperature_k: Some(tq),
        status: names(xq.status),
        ..FixedSide::default()
    });
    lines.push(format!("resistance  {rb:.4} Ω"));
    lines.push(format!("temperature {} (f64)", fmt_t(t)));
    lines.push(format!("            {} (fixed point)", fmt_t(tq)));
    lines.push(format!("status      {}", fmt_status(xf.status)));
    Ok(finish("rtd", m, lines, SensorConfig::Rtd(cfg)))
}

/// An NTC thermistor's model.
#[derive(Clone, Copy, Debug)]
pub enum NtcModel {
    /// Beta model: β (K), the resistance (Ω) at the reference temperature (K).
    Beta {
        /// β, K.
        beta: f64,
        /// Resistance at `t25_k`, Ω.
        r25_ohms: f64,
        /// Reference temperature, K.
        t25_k: f64,
    },
    /// Steinhart–Hart coefficients, 1/K.
    SteinhartHart {
        /// A.
        a: f64,
        /// B.
        b: f64,
        /// C.
        c: f64,
    },
}

/// `sensor ntc`: an NTC thermistor.
#[derive(Clone, Copy, Debug)]
pub struct NtcRequest {
    /// The model.
    pub model: NtcModel,
    /// Converter and corrections.
    pub converter: Converter,
    /// The input.
    pub input: ResistiveInput,
}

/// Runs an NTC conversion.
pub fn ntc(r: &NtcRequest) -> Result<Report<Conversion>, Error> {
    let (model, describe, r_default) = match r.model {
        NtcModel::Beta {
            beta,
            r25_ohms,
            t25_k,
        } => (
            ntc::NtcConfig::beta(r25_ohms, t25_k, beta).map_err(|source| Error::Rejected {
                what: "NTC",
                source,
            })?,
            format!(
                "beta model, β = {beta} K, R = {r25_ohms} Ω at {}",
                units::fmt_celsius(t25_k)
            ),
            r25_ohms,
        ),
        NtcModel::SteinhartHart { a, b, c } => (
            ntc::NtcConfig::steinhart_hart(a, b, c).map_err(|source| Error::Rejected {
                what: "NTC",
                source,
            })?,
            format!("Steinhart–Hart, A = {a:e}, B = {b:e}, C = {c:e}"),
            ntc_ln_r(a, b, c, 298.15).exp(),
        ),
    };
    let circuit = r
        .converter
        .circuit
        .unwrap_or(resistive::Circuit::DividerLow);
    let rref = r.converter.reference_ohms.unwrap_or(r_default);
    let mut cfg =
        ntc::NtcConfig::new(model, circuit, r.converter.bits, rref).map_err(|source| {
            Error::Rejected {
                what: "NTC",
                source,
            }
        })?;
    r.converter.apply(&mut cfg.front_end)?;
    let fl = ntc::float::Ntc::<f64>::new(&cfg)?;
    let fi = ntc::fixed::Ntc::new(&cfg)?;
    let mut m = Conversion {
        kind: "ntc",
        ..Conversion::default()
    };
    let mut lines = vec![describe];
    let (xf, xq, rb) = match r.input {
        ResistiveInput::Temperature(t_k) => {
            let ohms = fl.ohms(t_k).map_err(|e| {
                Error::Invalid(format!("--temperature {}: {e}", units::fmt_celsius(t_k)))
            })?;
            m.temperature_k = Some(Some(t_k));
            m.ohms = Some(Some(ohms));
            m.status = names(Status::OK);
            lines.push(format!("temperature {}", fmt_t(Some(t_k))));
            lines.push(format!(
                "resistance  {ohms:.3} Ω (f64; the device path has no inverse)"
            ));
            lines.push("status      ok".to_string());
            return Ok(finish("ntc", m, lines, SensorConfig::Ntc(cfg)));
        }
        ResistiveInput::Ohms(ohms) => (
            fl.read_ohms(ohms)?,
            fi.read_ohms(fx_value(ohms, "--ohms")?),
            Some(ohms),
        ),
        ResistiveInput::Code(code) => {
            m.code = Some(Code::Read(code.into()));
            lines.push(format!(
                "code        {code} of {} bits, {circuit:?}, R_ref {rref} Ω",
                r.converter.bits
            ));
            let b = fl.read(code);
            let ohms = fl.ohms(b.temperature_k).ok();
            (b, fi.read(code), ohms)
        }
    };
    let t = valid(xf.temperature_k, xf.status);
    let rv = rb.and_then(|x| valid(x, xf.status));
    m.ohms = Some(rv);
    m.temperature_k = Some(t);
    m.status = names(xf.status);
    let tq = valid(fx::to_f64(xq.temperature_k), xq.status);
    m.fixed = Some(FixedSide {
        temperature_k: Some(tq),
        status: names(xq.status),
        ..FixedSide::default()
    });
    if let Some(x) = rv {
        lines.push(format!("resistance  {x:.3} Ω"));
    }
    lines.push(format!("temperature {} (f64)", fmt_t(t)));
    lines.push(format!("            {} (fixed point)", fmt_t(tq)));
    lines.push(format!("status      {}", fmt_status(xf.status)));
    Ok(finish("ntc", m, lines, SensorConfig::Ntc(cfg)))
}

/// `ln R` of a Steinhart–Hart set at `t_k` (the closed-form inverse).
fn ntc_ln_r(a: f64, b: f64, c: f64, t_k: f64) -> f64 {
    if c == 0.0 {
        return (1.0 / t_k - a) / b;
    }
    let x = (a - 1.0 / t_k) / c;
    let y = ((b / (3.0 * c)).powi(3) + x * x / 4.0).sqrt();
    (y - x / 2.0).cbrt() - (y + x / 2.0).cbrt()
}

fn pressure_lines(lines: &mut Vec<String>, p: Measured, g: Measured, pq: Measured, status: Status) {
    let bar = |v: Measured| {
        v.map(units::fmt_bar)
            .unwrap_or_else(|| "not valid".to_string())
    };
    lines.push(format!(
        "pressure    {} abs, {} gauge (f64)",
        bar(p),
        bar(g)
    ));
    lines.push(format!("            {} abs (fixed point)", bar(pq)));
    lines.push(format!("status      {}", fmt_status(status)));
}

/// What a loop conversion starts from.
#[derive(Clone, Copy, Debug)]
pub enum LoopInput {
    /// A loop current, mA → pressure.
    Milliamps(f64),
    /// An absolute pressure, Pa → current.
    Pressure(f64),
    /// A converter code across the shunt → current and pressure.
    Code(u32),
}

/// `sensor loop`: a 4–20 mA transmitter (NAMUR NE 43).
#[derive(Clone, Copy, Debug)]
pub struct LoopRequest {
    /// Pressure at 4 and 20 mA, Pa (of `gauge`'s kind).
    pub range_pa: (f64, f64),
    /// The transmitter measures gauge pressure.
    pub gauge: bool,
    /// Barometric pressure, Pa (checked with [`barometric`]).
    pub barometric_pa: f64,
    /// Shunt resistor, Ω.
    pub shunt_ohms: f64,
    /// Converter full-scale voltage, V.
    pub adc_reference_v: f64,
    /// Converter resolution, bits.
    pub bits: u8,
    /// The input.
    pub input: LoopInput,
}

/// Runs a loop conversion.
pub fn current_loop(r: &LoopRequest) -> Result<Report<Conversion>, Error> {
    let (lo, hi) = r.range_pa;
    let b = r.barometric_pa;
    let cfg = LoopConfig::new(
        r.bits,
        r.adc_reference_v,
        r.shunt_ohms,
        lo,
        hi,
        kind(r.gauge),
        Millis(0),
    )
    .map_err(|source| Error::Rejected {
        what: "loop",
        source,
    })?;
    let fl = current_loop::float::Loop::<f64>::new(&cfg)?;
    let fi = current_loop::fixed::Loop::new(&cfg)?;
    let bq: fx::Pressure = fx_value(b, "--barometric")?;
    let mut m = Conversion {
        kind: "loop",
        ..Conversion::default()
    };
    let mut lines = vec![format!(
        "4–20 mA, {} … {} {}, NAMUR NE 43 bands",
        units::fmt_bar(lo),
        units::fmt_bar(hi),
        if r.gauge { "gauge" } else { "abs" }
    )];
    let (i, iq, sat) = match r.input {
        LoopInput::Pressure(p) => {
            let i = fl.milliamps(p, b)?;
            let band = current_loop::float::band(i).name();
            m.pressure_pa = Some(Some(p));
            m.milliamps = Some(i);
            m.band = Some(band);
            m.status = names(Status::OK);
            lines.push(format!("pressure    {} abs", units::fmt_bar(p)));
            lines.push(format!("current     {i:.4} mA ({band})"));
            return Ok(finish("loop", m, lines, SensorConfig::Loop(cfg)));
        }
        LoopInput::Milliamps(i) => (
            i,
            fx_value::<fx::Milliamps>(i.max(0.0), "--milliamps")?,
            Status::OK,
        ),
        LoopInput::Code(code) => {
            m.code = Some(Code::Read(code.into()));
            let (i, s) = fl.current(code);
            let (iq, _) = fi.current(code);
            (i, iq, s)
        }
    };
    let (band, mut x) = fl.convert_current(i, b).map_err(|source| Error::Rejected {
        what: "--milliamps",
        source,
    })?;
    x.status |= sat;
    let (_, mut xq) = fi.convert_current(iq, bq);
    xq.status |= sat;
    let p = valid(x.pressure_pa, x.status);
    let g = valid(x.gauge_pa, x.status);
    let pq = valid(fx::to_f64(xq.pressure_pa), xq.status);
    m.milliamps = Some(i);
    m.band = Some(band.name());
    m.pressure_pa = Some(p);
    m.gauge_pressure_pa = Some(g);
    m.status = names(x.status);
    m.fixed = Some(FixedSide {
        milliamps: Some(fx::to_f64(iq)),
        pressure_pa: Some(pq),
        gauge_pressure_pa: Some(valid(fx::to_f64(xq.gauge_pa), xq.status)),
        status: names(xq.status),
        ..FixedSide::default()
    });
    lines.push(format!("current     {i:.4} mA ({})", band.name()));
    pressure_lines(&mut lines, p, g, pq, x.status);
    Ok(finish("loop", m, lines, SensorConfig::Loop(cfg)))
}

/// What a bridge conversion starts from.
#[derive(Clone, Copy, Debug)]
pub enum BridgeInput {
    /// A converter code → pressure.
    Code(i32),
    /// An absolute pressure, Pa → code.
    Pressure(f64),
}

/// `sensor bridge`: a ratiometric bridge transducer.
#[derive(Clone, Copy, Debug)]
pub struct BridgeRequest {
    /// Pressure from zero to full scale, Pa (of `gauge`'s kind).
    pub range_pa: (f64, f64),
    /// The transducer measures gauge pressure.
    pub gauge: bool,
    /// Signal at zero, fraction of the converter range.
    pub zero: f64,
    /// Signal change from zero to full scale, fraction of the range.
    pub span: f64,
    /// Converter resolution, bits.
    pub bits: u8,
    /// Unipolar converter.
    pub unipolar: bool,
    /// Transducer temperature, K.
    pub temperature_k: f64,
    /// Barometric pressure, Pa (checked with [`barometric`]).
    pub barometric_pa: f64,
    /// The input.
    pub input: BridgeInput,
}

/// Runs a bridge conversion.
pub fn bridge(r: &BridgeRequest) -> Result<Report<Conversion>, Error> {
    let (lo, hi) = r.range_pa;
    let (b, t) = (r.barometric_pa, r.temperature_k);
    let cfg = bridge::BridgeConfig::new(r.bits, !r.unipolar, r.zero, r.span, lo, hi, kind(r.gauge))
        .map_err(|source| Error::Rejected {
            what: "bridge",
            source,
        })?;
    let fl = bridge::float::Bridge::<f64>::new(&cfg)?;
    let fi = bridge::fixed::Bridge::new(&cfg)?;
    let mut m = Conversion {
        kind: "bridge",
        transducer_temperature_k: Some(t),
        ..Conversion::default()
    };
    let mut lines = vec![format!(
        "ratiometric bridge, {} … {} {}, transducer at {}",
        units::fmt_bar(lo),
        units::fmt_bar(hi),
        if r.gauge { "gauge" } else { "abs" },
        units::fmt_celsius(t)
    )];
    match r.input {
        BridgeInput::Pressure(p) => {
            let code = fl.code(p, t, b).map_err(|source| Error::Rejected {
                what: "--pressure",
                source,
            })?;
            m.pressure_pa = Some(Some(p));
            m.code = Some(Code::Computed(code));
            m.status = names(Status::OK);
            lines.push(format!("pressure    {} abs", units::fmt_bar(p)));
            lines.push(format!("code        {code:.2}"));
        }
        BridgeInput::Code(code) => {
            let x = fl.read(code, t, b)?;
            let xq = fi.read(
                code,
                fx_value(t, "--temperature")?,
                fx_value(b, "--barometric")?,
            );
            let p = valid(x.pressure_pa, x.status);
            let g = valid(x.gauge_pa, x.status);
            let pq = valid(fx::to_f64(xq.pressure_pa), xq.status);
            m.code = Some(Code::Read(code.into()));
            m.pressure_pa = Some(p);
            m.gauge_pressure_pa = Some(g);
            m.status = names(x.status);
            m.fixed = Some(FixedSide {
                pressure_pa: Some(pq),
                gauge_pressure_pa: Some(valid(fx::to_f64(xq.gauge_pa), xq.status)),
                status: names(xq.status),
                ..FixedSide::default()
            });
            lines.push(format!("code        {code}"));
            pressure_lines(&mut lines, p, g, pq, x.status);
        }
    }
    Ok(finish("bridge", m, lines, SensorConfig::Bridge(cfg)))
}

/// What a gauge ↔ absolute conversion starts from.
#[derive(Clone, Copy, Debug)]
pub enum GaugeInput {
    /// A gauge pressure, Pa → absolute.
    Gauge(f64),
    /// An absolute pressure, Pa → gauge (never negative).
    Absolute(f64),
}

/// `sensor gauge`: gauge ↔ absolute with a barometric pressure (Pa, checked
/// with [`barometric`]).
pub fn gauge_absolute(input: GaugeInput, barometric_pa: f64) -> Result<Report<Conversion>, Error> {
    let b = barometric_pa;
    let bq: fx::Pressure = fx_value(b, "--barometric")?;
    let (x, xq) = match input {
        GaugeInput::Gauge(g) => (
            gauge::float::absolute(g, b)?,
            gauge::fixed::absolute(fx_value(g, "--gauge")?, bq),
        ),
        GaugeInput::Absolute(p) => {
            if p < 0.0 {
                return Err(Error::Invalid(
                    "--absolute: an absolute pressure is never negative".into(),
                ));
            }
            (
                gauge::float::gauge(p, b)?,
                gauge::fixed::gauge(fx_value(p, "--absolute")?, bq),
            )
        }
    };
    let m = Conversion {
        kind: "gauge",
        barometric_pa: Some(b),
        pressure_pa: Some(Some(x.pressure_pa)),
        gauge_pressure_pa: Some(Some(x.gauge_pa)),
        status: names(x.status),
        fixed: Some(FixedSide {
            pressure_pa: Some(Some(fx::to_f64(xq.pressure_pa))),
            gauge_pressure_pa: Some(Some(fx::to_f64(xq.gauge_pa))),
            status: names(xq.status),
            ..FixedSide::default()
        }),
        ..Conversion::default()
    };
    let lines = vec![
        format!("barometric  {}", units::fmt_bar(b)),
        format!(
            "pressure    {} abs, {} gauge",
            units::fmt_bar(x.pressure_pa),
            units::fmt_bar(x.gauge_pa)
        ),
        format!("status      {}", fmt_status(x.status)),
    ];
    Ok(Report {
        title: "gauge",
        report: m,
        lines,
    })
}

/// A calibration record to make with a fit: the sensor it belongs to (the
/// JSON of a conversion report, or its `config` object), its sequence
/// number and input.
#[derive(Clone, Debug)]
pub struct RecordRequest {
    /// Where the record goes (named in the report; the command writes it).
    pub file: String,
    /// The sensor configuration's JSON text, and where it came from (for
    /// messages).
    pub sensor_config: (String, String),
    /// Sequence number.
    pub sequence: u32,
    /// The input the record belongs to.
    pub channel: Channel,
}

/// `sensor fit`: the least-squares correction of the CSV points `csv`
/// (`input` names them in messages) of degree `degree`, and when asked the
/// calibration record's bytes to store.
pub fn fit_points(
    csv: &str,
    degree: usize,
    record: Option<&RecordRequest>,
) -> Result<(Report<FitReport>, Option<Vec<u8>>), Error> {
    let (quantity, points) = parse_points(csv)?;
    let f = fit(&points, degree)?;
    let correction = f.correction()?;
    let u = quantity.unit();
    let mut lines = vec![
        format!(
            "{} points, degree {}, {:?} in {u}",
            f.points, f.degree, quantity
        ),
        format!("interval    {} … {} {u}", f.lo, f.hi),
        format!(
            "P(x)        {:+.9e} {:+.9e}·x {:+.9e}·x² {:+.9e}·x³",
            f.coefficients[0], f.coefficients[1], f.coefficients[2], f.coefficients[3]
        ),
        format!(
            "residuals   max {:.6e} {u}, rms {:.6e} {u}",
            f.residual_max, f.residual_rms
        ),
    ];
    let mut written = None;
    let mut bytes_out = None;
    if let Some(req) = record {
        let (cfg_text, cfg_path) = &req.sensor_config;
        // The text may hold the configuration itself or a whole conversion
        // report with its `config` object.
        let bad = |e: serde_json::Error| Error::Malformed {
            what: format!("--sensor-config {cfg_path}"),
            line: None,
            reason: e.to_string(),
        };
        let mut value: Value = serde_json::from_str(cfg_text).map_err(bad)?;
        if let Some(inner) = value.get_mut("config") {
            value = inner.take();
        }
        let sensor: SensorConfig = serde_json::from_value(value).map_err(bad)?;
        let channel = req.channel;
        let expects_pressure = matches!(channel, Channel::Pressure | Channel::Barometric);
        if expects_pressure != (quantity == Quantity::Pressure) {
            return Err(Error::Invalid(format!(
                "--channel {channel:?} does not match the {quantity:?} points"
            )));
        }
        let rec = CalibrationRecord {
            sequence: req.sequence,
            channel,
            sensor,
            correction,
        };
        let mut buf = [0u8; CalibrationRecord::MAX_SIZE];
        let bytes = rec.encode(&mut buf).map_err(|source| Error::Rejected {
            what: "calibration record",
            source,
        })?;
        written = Some(RecordWritten {
            bytes: bytes.len(),
            file: req.file.clone(),
            kind: CalibrationRecord::KIND,
            sequence: rec.sequence,
            version: CalibrationRecord::VERSION,
        });
        lines.push(format!(
            "record      {}: {} bytes, sequence {}, {:?} channel, {} sensor",
            req.file,
            bytes.len(),
            rec.sequence,
            channel,
            rec.sensor.kind_name()
        ));
        bytes_out = Some(bytes.to_vec());
    }
    Ok((
        Report {
            title: "fit",
            report: FitReport {
                correction,
                fit: f,
                quantity,
                record: written,
                unit: u,
            },
            lines,
        },
        bytes_out,
    ))
}

/// `sensor record`: reads back and checks a calibration record (`file` names
/// it in the report).
pub fn read_record(bytes: &[u8], file: &str) -> Result<Report<RecordReport>, Error> {
    let rec = CalibrationRecord::decode(bytes).map_err(|e| Error::Malformed {
        what: file.to_string(),
        line: None,
        reason: e.to_string(),
    })?;
    let c = rec.correction;
    let coefficients: Vec<f64> = c.coefficients.iter().map(|v| fx::to_f64(*v)).collect();
    let lines = vec![
        format!("{file}: {} bytes, CRC-32C ok", bytes.len()),
        format!("sequence    {}", rec.sequence),
        format!("channel     {:?}", rec.channel),
        format!("sensor      {}", rec.sensor.kind_name()),
        format!(
            "correction  {} … {}: {:?}",
            fx::to_f64(c.lo),
            fx::to_f64(c.hi),
            coefficients
        ),
    ];
    Ok(Report {
        title: "record",
        report: RecordReport {
            bytes: bytes.len(),
            channel: rec.channel,
            checksum: "ok",
            config: rec.sensor,
            correction: CorrectionView {
                coefficients,
                hi: fx::to_f64(c.hi),
                lo: fx::to_f64(c.lo),
            },
            sequence: rec.sequence,
            sensor_kind: rec.sensor.kind_name(),
            settings: settings(&rec.sensor),
        },
        lines,
    })
}
