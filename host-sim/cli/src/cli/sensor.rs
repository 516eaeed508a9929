//! `isochor sensor`: single values through the sensor front-ends, both ways,
//! in both core paths; the calibration fit; and reading back a record.
//!
//! JSON fields are SI and stable: `pressure_pa` (absolute), `gauge_pressure_pa`,
//! `temperature_k`, `ohms`, `milliamps`, `code`, `band`, `status` (flag names),
//! a `fixed` object with the device path's answer where there is one, the
//! `settings` the conversion used in SI units with snake_case names, and the
//! same as `config`: the stored form (raw fixed-point bits under the core's
//! type names), exact, which `sensor fit --sensor-config` reads back.
//! A value is `null` when the status says it is not a measurement.

use super::{Format, to_json};
use crate::Error;
use crate::sensor::{Quantity, fit, ohms, parse_points, pressure_range, settings};
use clap::{ArgGroup, Args, Subcommand, ValueEnum};
use isochor_core::constants::ZERO_CELSIUS_K;
use isochor_core::sensor::calibration::{CalibrationRecord, Channel, SensorConfig};
use isochor_core::sensor::current_loop::{self, LoopConfig};
use isochor_core::sensor::{PressureKind, VALUE_INVALID, bridge, gauge, ntc, resistive, rtd};
use isochor_core::time::Millis;
use isochor_core::{Status, fx};
use isochor_eos::{safety, units};
use serde_json::{Map, Value, json};

/// Arguments of `isochor sensor`.
#[derive(Debug, Args)]
pub struct SensorArgs {
    /// The front-end.
    #[command(subcommand)]
    pub command: SensorCommand,
}

/// The sensor subcommands.
#[derive(Debug, Subcommand)]
pub enum SensorCommand {
    /// Platinum RTD (IEC 60751): resistance or converter code → temperature,
    /// or temperature → resistance.
    Rtd(RtdArgs),
    /// NTC thermistor (beta or Steinhart–Hart): resistance or code →
    /// temperature, or temperature → resistance.
    Ntc(NtcArgs),
    /// 4–20 mA transmitter (NAMUR NE 43): current or code → pressure, or
    /// pressure → current.
    Loop(LoopArgs),
    /// Ratiometric bridge transducer: code → pressure, or pressure → code.
    Bridge(BridgeArgs),
    /// Gauge ↔ absolute pressure with a barometric pressure.
    Gauge(GaugeArgs),
    /// Multi-point least-squares calibration from a CSV file; optionally
    /// writes a calibration record.
    Fit(FitArgs),
    /// Reads back and checks a calibration record file.
    Record(RecordArgs),
}

/// Wiring of a resistive sensor.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum CircuitArg {
    /// Sensor in series with the reference resistor, one current (R = R_ref·x).
    Ratiometric,
    /// Reference resistor to the excitation, sensor to ground.
    DividerLow,
    /// Sensor to the excitation, reference resistor to ground.
    DividerHigh,
}

impl From<CircuitArg> for resistive::Circuit {
    fn from(c: CircuitArg) -> Self {
        match c {
            CircuitArg::Ratiometric => resistive::Circuit::Ratiometric,
            CircuitArg::DividerLow => resistive::Circuit::DividerLow,
            CircuitArg::DividerHigh => resistive::Circuit::DividerHigh,
        }
    }
}

/// The converter and corrections of a resistive input.
#[derive(Debug, Args)]
pub struct ResistiveArgs {
    /// Wiring (with --code).
    #[arg(long, value_enum)]
    pub circuit: Option<CircuitArg>,
    /// Reference resistor, Ω (with --code; default 4·R0 for an RTD, R25 for an NTC).
    #[arg(long)]
    pub reference_ohms: Option<String>,
    /// Converter resolution, bits.
    #[arg(long, default_value_t = 16)]
    pub bits: u8,
    /// Total 2-wire lead resistance to subtract, Ω.
    #[arg(long, default_value = "0")]
    pub lead_ohms: String,
    /// Excitation for the self-heating correction: V across a divider, A
    /// through the series circuit.
    #[arg(long, default_value = "0")]
    pub excitation: String,
    /// Self-heating of the sensor, K per mW (1/dissipation constant); 0: none.
    #[arg(long, default_value = "0")]
    pub self_heating_k_per_mw: String,
}

impl ResistiveArgs {
    fn apply(&self, fe: &mut resistive::FrontEnd) -> Result<(), Error> {
        let lead = units::number(&self.lead_ohms, "--lead-ohms")?;
        fe.lead_ohms = fx_value(lead, "--lead-ohms")?;
        fe.excitation = fx_value(
            units::number(&self.excitation, "--excitation")?,
            "--excitation",
        )?;
        fe.self_heating_k_per_mw = fx_value(
            units::number(&self.self_heating_k_per_mw, "--self-heating-k-per-mw")?,
            "--self-heating-k-per-mw",
        )?;
        fe.validate()
            .map_err(|e| Error::Invalid(format!("sensor input: {e}")))
    }
}

fn fx_value<T: isochor_core::fixed::traits::Fixed>(v: f64, what: &'static str) -> Result<T, Error> {
    fx::from_f64(v, what).map_err(|e| Error::Invalid(format!("{what}: {e}")))
}

/// Arguments of `isochor sensor rtd`.
#[derive(Debug, Args)]
#[command(group(ArgGroup::new("input").required(true).args(["ohms", "temperature", "code"])))]
pub struct RtdArgs {
    /// Resistance at 0 °C, Ω (100 for Pt100, 1000 for Pt1000).
    #[arg(long)]
    pub r0: String,
    /// Measured resistance, Ω → temperature.
    #[arg(long)]
    pub ohms: Option<String>,
    /// Temperature (with unit: K, C, F) → resistance.
    #[arg(long, allow_hyphen_values = true)]
    pub temperature: Option<String>,
    /// Converter code → temperature.
    #[arg(long)]
    pub code: Option<u32>,
    /// Converter and corrections.
    #[command(flatten)]
    pub input: ResistiveArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Arguments of `isochor sensor ntc`.
#[derive(Debug, Args)]
#[command(group(ArgGroup::new("input").required(true).args(["ohms", "temperature", "code"])))]
#[command(group(ArgGroup::new("model").required(true).args(["beta", "sh_a"])))]
pub struct NtcArgs {
    /// Beta model: β, K.
    #[arg(long, requires = "r25")]
    pub beta: Option<String>,
    /// Beta model: resistance at the reference temperature, Ω.
    #[arg(long)]
    pub r25: Option<String>,
    /// Beta model: reference temperature.
    #[arg(long, default_value = "25C", allow_hyphen_values = true)]
    pub t25: String,
    /// Steinhart–Hart A, 1/K.
    #[arg(long, requires_all = ["sh_b", "sh_c"], allow_hyphen_values = true)]
    pub sh_a: Option<String>,
    /// Steinhart–Hart B, 1/K.
    #[arg(long, allow_hyphen_values = true)]
    pub sh_b: Option<String>,
    /// Steinhart–Hart C, 1/K.
    #[arg(long, allow_hyphen_values = true)]
    pub sh_c: Option<String>,
    /// Measured resistance, Ω → temperature.
    #[arg(long)]
    pub ohms: Option<String>,
    /// Temperature (with unit) → resistance.
    #[arg(long, allow_hyphen_values = true)]
    pub temperature: Option<String>,
    /// Converter code → temperature.
    #[arg(long)]
    pub code: Option<u32>,
    /// Converter and corrections.
    #[command(flatten)]
    pub input: ResistiveArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Arguments of `isochor sensor loop`.
#[derive(Debug, Args)]
#[command(group(ArgGroup::new("input").required(true).args(["milliamps", "pressure", "code"])))]
pub struct LoopArgs {
    /// Pressure range at 4 and 20 mA, e.g. 0..300bar; absolute unless --gauge.
    #[arg(long, allow_hyphen_values = true)]
    pub range: String,
    /// The transmitter measures gauge pressure.
    #[arg(long)]
    pub gauge: bool,
    /// Barometric pressure between gauge and absolute.
    #[arg(long, default_value = "101.325kPa")]
    pub barometric: String,
    /// Loop current, mA → pressure.
    #[arg(long, allow_hyphen_values = true)]
    pub milliamps: Option<String>,
    /// Absolute pressure (with unit) → loop current.
    #[arg(long, allow_hyphen_values = true)]
    pub pressure: Option<String>,
    /// Converter code across the shunt → current and pressure.
    #[arg(long)]
    pub code: Option<u32>,
    /// Shunt resistor, Ω.
    #[arg(long, default_value = "150")]
    pub shunt_ohms: String,
    /// Converter full-scale voltage, V.
    #[arg(long, default_value = "3.3")]
    pub adc_reference_v: String,
    /// Converter resolution, bits.
    #[arg(long, default_value_t = 16)]
    pub bits: u8,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Arguments of `isochor sensor bridge`.
#[derive(Debug, Args)]
#[command(group(ArgGroup::new("input").required(true).args(["code", "pressure"])))]
pub struct BridgeArgs {
    /// Pressure range from zero to full scale, e.g. 0..300bar; absolute unless --gauge.
    #[arg(long, allow_hyphen_values = true)]
    pub range: String,
    /// The transducer measures gauge pressure.
    #[arg(long)]
    pub gauge: bool,
    /// Signal at zero, fraction of the converter range.
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    pub zero: String,
    /// Signal change from zero to full scale, fraction of the converter range.
    #[arg(long)]
    pub span: String,
    /// Converter resolution, bits.
    #[arg(long, default_value_t = 16)]
    pub bits: u8,
    /// Unipolar converter (codes 0 … 2^bits − 1); default bipolar.
    #[arg(long)]
    pub unipolar: bool,
    /// Transducer temperature.
    #[arg(long, default_value = "25C", allow_hyphen_values = true)]
    pub temperature: String,
    /// Barometric pressure between gauge and absolute.
    #[arg(long, default_value = "101.325kPa")]
    pub barometric: String,
    /// Converter code → pressure.
    #[arg(long, allow_hyphen_values = true)]
    pub code: Option<i32>,
    /// Absolute pressure (with unit) → code.
    #[arg(long, allow_hyphen_values = true)]
    pub pressure: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Arguments of `isochor sensor gauge`.
#[derive(Debug, Args)]
#[command(group(ArgGroup::new("input").required(true).args(["gauge", "absolute"])))]
pub struct GaugeArgs {
    /// Gauge pressure (with unit; bar, barg, psi, psig, …) → absolute.
    #[arg(long, allow_hyphen_values = true)]
    pub gauge: Option<String>,
    /// Absolute pressure (with unit; bar, bara, psi, psia, …) → gauge.
    #[arg(long, allow_hyphen_values = true)]
    pub absolute: Option<String>,
    /// Barometric pressure.
    #[arg(long, default_value = "101.325kPa")]
    pub barometric: String,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Which input a calibration belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum ChannelArg {
    /// Tank pressure.
    Pressure,
    /// Gas temperature.
    Temperature,
    /// Barometric pressure.
    Barometric,
    /// The pressure transducer's own temperature.
    TransducerTemperature,
}

impl From<ChannelArg> for Channel {
    fn from(c: ChannelArg) -> Self {
        match c {
            ChannelArg::Pressure => Channel::Pressure,
            ChannelArg::Temperature => Channel::Temperature,
            ChannelArg::Barometric => Channel::Barometric,
            ChannelArg::TransducerTemperature => Channel::TransducerTemperature,
        }
    }
}

/// Arguments of `isochor sensor fit`.
#[derive(Debug, Args)]
#[command(group(ArgGroup::new("record_out").args(["record"]).requires_all(["sensor_config", "sequence", "channel"])))]
pub struct FitArgs {
    /// CSV file: header `measured_pa,reference_pa` or `measured_k,reference_k`,
    /// then one pair per line (SI units).
    #[arg(long)]
    pub input: String,
    /// Polynomial degree (1 = zero and span, up to 3).
    #[arg(long, default_value_t = 1)]
    pub degree: usize,
    /// Write a calibration record to this file.
    #[arg(long)]
    pub record: Option<String>,
    /// JSON file with the sensor configuration: the output of
    /// `isochor sensor rtd|ntc|loop|bridge ... --format json` (or its `config`
    /// object).
    #[arg(long)]
    pub sensor_config: Option<String>,
    /// Sequence number of the record.
    #[arg(long)]
    pub sequence: Option<u32>,
    /// The input the record belongs to.
    #[arg(long, value_enum)]
    pub channel: Option<ChannelArg>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Arguments of `isochor sensor record`.
#[derive(Debug, Args)]
pub struct RecordArgs {
    /// The record file.
    pub file: String,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Runs `isochor sensor`.
pub fn run(a: &SensorArgs) -> Result<String, Error> {
    match &a.command {
        SensorCommand::Rtd(x) => run_rtd(x),
        SensorCommand::Ntc(x) => run_ntc(x),
        SensorCommand::Loop(x) => run_loop(x),
        SensorCommand::Bridge(x) => run_bridge(x),
        SensorCommand::Gauge(x) => run_gauge(x),
        SensorCommand::Fit(x) => run_fit(x),
        SensorCommand::Record(x) => run_record(x),
    }
}

/// A value, or `null` when the status says it is not a measurement.
fn valid(v: f64, status: Status) -> Value {
    if status.intersects(VALUE_INVALID) {
        Value::Null
    } else {
        json!(v)
    }
}

fn names(status: Status) -> Value {
    json!(status.names().collect::<Vec<_>>())
}

fn config_json<T: serde::Serialize>(c: &T) -> Result<Value, Error> {
    serde_json::to_value(c).map_err(|e| Error::Output(e.to_string()))
}

/// Prints a report: JSON as is; text as `label: value` lines, the status and
/// the cautions.
fn output(
    format: Format,
    title: &str,
    report: Map<String, Value>,
    lines: &[String],
) -> Result<String, Error> {
    match format {
        Format::Json => to_json(&Value::Object(report)),
        Format::Text => {
            let mut s = format!("isochor sensor {title}\n");
            for l in lines {
                s.push_str("  ");
                s.push_str(l);
                s.push('\n');
            }
            s.push('\n');
            s.push_str(safety::GENERAL);
            s.push('\n');
            s.push_str(safety::HARDWARE);
            s.push('\n');
            Ok(s)
        }
    }
}

fn fmt_status(s: Status) -> String {
    if s.is_ok() {
        "ok".to_string()
    } else {
        s.to_string()
    }
}

fn fmt_t(k: Option<f64>) -> String {
    k.map(|k| {
        format!(
            "{} °C ({} K)",
            units::fmt_decimal(k - ZERO_CELSIUS_K, 4),
            units::fmt_decimal(k, 4)
        )
    })
    .unwrap_or_else(|| "not valid".to_string())
}

fn opt(v: &Value) -> Option<f64> {
    v.as_f64()
}

fn run_rtd(a: &RtdArgs) -> Result<String, Error> {
    let r0 = ohms(&a.r0, "--r0")?;
    let circuit = a.input.circuit.unwrap_or(CircuitArg::Ratiometric);
    let rref = match &a.input.reference_ohms {
        Some(r) => ohms(r, "--reference-ohms")?,
        None => 4.0 * r0,
    };
    let mut cfg = rtd::RtdConfig::new(r0, circuit.into(), a.input.bits, rref)
        .map_err(|e| Error::Invalid(format!("RTD: {e}")))?;
    a.input.apply(&mut cfg.front_end)?;
    let fl = rtd::float::Rtd::<f64>::new(&cfg)?;
    let fi = rtd::fixed::Rtd::new(&cfg)?;
    let mut m = Map::new();
    m.insert("kind".into(), json!("rtd"));
    m.insert("r0_ohms".into(), json!(fx::to_f64(cfg.r0_ohms)));
    let mut lines = vec![format!(
        "IEC 60751 Callendar–Van Dusen, R0 = {} Ω",
        fx::to_f64(cfg.r0_ohms)
    )];
    if let Some(t) = &a.temperature {
        let t_k = units::temperature_k(t, "--temperature")?;
        let r = fl
            .ohms(t_k)
            .map_err(|e| Error::Invalid(format!("--temperature {t}: {e}")))?;
        let (rq, sq) = fi.ohms(fx_value(t_k, "--temperature")?);
        m.insert("temperature_k".into(), json!(t_k));
        m.insert("ohms".into(), json!(r));
        m.insert("status".into(), names(Status::OK));
        m.insert(
            "fixed".into(),
            json!({"ohms": fx::to_f64(rq), "status": names(sq)}),
        );
        lines.push(format!("temperature {}", fmt_t(Some(t_k))));
        lines.push(format!(
            "resistance  {r:.4} Ω (f64), {:.4} Ω (fixed point)",
            fx::to_f64(rq)
        ));
        lines.push("status      ok".to_string());
    } else {
        let (rb, xf, xq) = if let Some(o) = &a.ohms {
            let r = ohms(o, "--ohms")?;
            let b = fl.read_ohms(r)?;
            let q = fi.read_ohms(fx_value(r, "--ohms")?);
            (r, b, q)
        } else {
            let code = a.code.unwrap_or(0);
            m.insert("code".into(), json!(code));
            lines.push(format!(
                "code        {code} of {} bits, {circuit:?}, R_ref {rref} Ω",
                a.input.bits
            ));
            let b = fl.read(code);
            let q = fi.read(code);
            let r = r0 * rtd::float::ratio(b.temperature_k - ZERO_CELSIUS_K);
            (r, b, q)
        };
        let t = valid(xf.temperature_k, xf.status);
        m.insert("ohms".into(), valid(rb, xf.status));
        m.insert("temperature_k".into(), t.clone());
        m.insert("status".into(), names(xf.status));
        let tq = valid(fx::to_f64(xq.temperature_k), xq.status);
        m.insert(
            "fixed".into(),
            json!({"temperature_k": tq, "status": names(xq.status)}),
        );
        lines.push(format!("resistance  {rb:.4} Ω"));
        lines.push(format!("temperature {} (f64)", fmt_t(opt(&t))));
        lines.push(format!("            {} (fixed point)", fmt_t(opt(&tq))));
        lines.push(format!("status      {}", fmt_status(xf.status)));
    }
    m.insert("config".into(), config_json(&SensorConfig::Rtd(cfg))?);
    m.insert("settings".into(), settings(&SensorConfig::Rtd(cfg)));
    output(a.format, "rtd", m, &lines)
}

fn run_ntc(a: &NtcArgs) -> Result<String, Error> {
    let (model, describe, r_default) = if let Some(b) = &a.beta {
        let beta = units::number(b, "--beta")?;
        let r25 = ohms(a.r25.as_deref().unwrap_or_default(), "--r25")?;
        let t25 = units::temperature_k(&a.t25, "--t25")?;
        let m = ntc::NtcConfig::beta(r25, t25, beta)
            .map_err(|e| Error::Invalid(format!("NTC: {e}")))?;
        (
            m,
            format!(
                "beta model, β = {beta} K, R = {r25} Ω at {}",
                units::fmt_celsius(t25)
            ),
            r25,
        )
    } else {
        let num = |o: &Option<String>, w| units::number(o.as_deref().unwrap_or_default(), w);
        let (sa, sb, sc) = (
            num(&a.sh_a, "--sh-a")?,
            num(&a.sh_b, "--sh-b")?,
            num(&a.sh_c, "--sh-c")?,
        );
        let m = ntc::NtcConfig::steinhart_hart(sa, sb, sc)
            .map_err(|e| Error::Invalid(format!("NTC: {e}")))?;
        let r25 = ntc_ln_r(sa, sb, sc, 298.15).exp();
        (
            m,
            format!("Steinhart–Hart, A = {sa:e}, B = {sb:e}, C = {sc:e}"),
            r25,
        )
    };
    let circuit = a.input.circuit.unwrap_or(CircuitArg::DividerLow);
    let rref = match &a.input.reference_ohms {
        Some(r) => ohms(r, "--reference-ohms")?,
        None => r_default,
    };
    let mut cfg = ntc::NtcConfig::new(model, circuit.into(), a.input.bits, rref)
        .map_err(|e| Error::Invalid(format!("NTC: {e}")))?;
    a.input.apply(&mut cfg.front_end)?;
    let fl = ntc::float::Ntc::<f64>::new(&cfg)?;
    let fi = ntc::fixed::Ntc::new(&cfg)?;
    let mut m = Map::new();
    m.insert("kind".into(), json!("ntc"));
    let mut lines = vec![describe];
    if let Some(t) = &a.temperature {
        let t_k = units::temperature_k(t, "--temperature")?;
        let r = fl
            .ohms(t_k)
            .map_err(|e| Error::Invalid(format!("--temperature {t}: {e}")))?;
        m.insert("temperature_k".into(), json!(t_k));
        m.insert("ohms".into(), json!(r));
        m.insert("status".into(), names(Status::OK));
        lines.push(format!("temperature {}", fmt_t(Some(t_k))));
        lines.push(format!(
            "resistance  {r:.3} Ω (f64; the device path has no inverse)"
        ));
        lines.push("status      ok".to_string());
    } else {
        let (xf, xq, r) = if let Some(o) = &a.ohms {
            let r = ohms(o, "--ohms")?;
            (
                fl.read_ohms(r)?,
                fi.read_ohms(fx_value(r, "--ohms")?),
                Some(r),
            )
        } else {
            let code = a.code.unwrap_or(0);
            m.insert("code".into(), json!(code));
            lines.push(format!(
                "code        {code} of {} bits, {circuit:?}, R_ref {rref} Ω",
                a.input.bits
            ));
            let b = fl.read(code);
            let r = fl.ohms(b.temperature_k).ok();
            (b, fi.read(code), r)
        };
        let t = valid(xf.temperature_k, xf.status);
        let rv = r.map(|r| valid(r, xf.status)).unwrap_or(Value::Null);
        m.insert("ohms".into(), rv.clone());
        m.insert("temperature_k".into(), t.clone());
        m.insert("status".into(), names(xf.status));
        let tq = valid(fx::to_f64(xq.temperature_k), xq.status);
        m.insert(
            "fixed".into(),
            json!({"temperature_k": tq, "status": names(xq.status)}),
        );
        if let Some(r) = opt(&rv) {
            lines.push(format!("resistance  {r:.3} Ω"));
        }
        lines.push(format!("temperature {} (f64)", fmt_t(opt(&t))));
        lines.push(format!("            {} (fixed point)", fmt_t(opt(&tq))));
        lines.push(format!("status      {}", fmt_status(xf.status)));
    }
    m.insert("config".into(), config_json(&SensorConfig::Ntc(cfg))?);
    m.insert("settings".into(), settings(&SensorConfig::Ntc(cfg)));
    output(a.format, "ntc", m, &lines)
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

fn kind(gauge: bool) -> PressureKind {
    if gauge {
        PressureKind::Gauge
    } else {
        PressureKind::Absolute
    }
}

fn barometric(s: &str) -> Result<f64, Error> {
    let b = units::pressure_pa(s, "--barometric")?;
    if !(gauge::BAROMETRIC_MIN_PA..=gauge::BAROMETRIC_MAX_PA).contains(&b) {
        return Err(Error::Invalid(format!(
            "--barometric {s}: outside 50-110 kPa, not a barometric pressure"
        )));
    }
    Ok(b)
}

fn pressure_lines(lines: &mut Vec<String>, p: &Value, g: &Value, pq: &Value, status: Status) {
    let bar = |v: &Value| {
        opt(v)
            .map(units::fmt_bar)
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

fn run_loop(a: &LoopArgs) -> Result<String, Error> {
    let (lo, hi) = pressure_range(&a.range, "--range")?;
    let b = barometric(&a.barometric)?;
    let cfg = LoopConfig::new(
        a.bits,
        units::number(&a.adc_reference_v, "--adc-reference-v")?,
        ohms(&a.shunt_ohms, "--shunt-ohms")?,
        lo,
        hi,
        kind(a.gauge),
        Millis(0),
    )
    .map_err(|e| Error::Invalid(format!("loop: {e}")))?;
    let fl = current_loop::float::Loop::<f64>::new(&cfg)?;
    let fi = current_loop::fixed::Loop::new(&cfg)?;
    let bq: fx::Pressure = fx_value(b, "--barometric")?;
    let mut m = Map::new();
    m.insert("kind".into(), json!("loop"));
    let mut lines = vec![format!(
        "4–20 mA, {} … {} {}, NAMUR NE 43 bands",
        units::fmt_bar(lo),
        units::fmt_bar(hi),
        if a.gauge { "gauge" } else { "abs" }
    )];
    if let Some(p) = &a.pressure {
        let p = units::pressure_pa(p, "--pressure")?;
        let i = fl.milliamps(p, b)?;
        m.insert("pressure_pa".into(), json!(p));
        m.insert("milliamps".into(), json!(i));
        m.insert("band".into(), json!(current_loop::float::band(i).name()));
        m.insert("status".into(), names(Status::OK));
        lines.push(format!("pressure    {} abs", units::fmt_bar(p)));
        lines.push(format!(
            "current     {i:.4} mA ({})",
            current_loop::float::band(i).name()
        ));
    } else {
        let (i, iq, sat) = match (&a.milliamps, a.code) {
            (Some(s), _) => {
                let i = units::number(s, "--milliamps")?;
                (
                    i,
                    fx_value::<fx::Milliamps>(i.max(0.0), "--milliamps")?,
                    Status::OK,
                )
            }
            (None, code) => {
                let code = code.unwrap_or(0);
                m.insert("code".into(), json!(code));
                let (i, s) = fl.current(code);
                let (iq, _) = fi.current(code);
                (i, iq, s)
            }
        };
        let (band, mut r) = fl
            .convert_current(i, b)
            .map_err(|e| Error::Invalid(format!("--milliamps: {e}")))?;
        r.status |= sat;
        let (_, mut rq) = fi.convert_current(iq, bq);
        rq.status |= sat;
        let p = valid(r.pressure_pa, r.status);
        let g = valid(r.gauge_pa, r.status);
        let pq = valid(fx::to_f64(rq.pressure_pa), rq.status);
        m.insert("milliamps".into(), json!(i));
        m.insert("band".into(), json!(band.name()));
        m.insert("pressure_pa".into(), p.clone());
        m.insert("gauge_pressure_pa".into(), g.clone());
        m.insert("status".into(), names(r.status));
        m.insert(
            "fixed".into(),
            json!({"milliamps": fx::to_f64(iq), "pressure_pa": pq, "gauge_pressure_pa": valid(fx::to_f64(rq.gauge_pa), rq.status), "status": names(rq.status)}),
        );
        lines.push(format!("current     {i:.4} mA ({})", band.name()));
        pressure_lines(&mut lines, &p, &g, &pq, r.status);
    }
    m.insert("config".into(), config_json(&SensorConfig::Loop(cfg))?);
    m.insert("settings".into(), settings(&SensorConfig::Loop(cfg)));
    output(a.format, "loop", m, &lines)
}

fn run_bridge(a: &BridgeArgs) -> Result<String, Error> {
    let (lo, hi) = pressure_range(&a.range, "--range")?;
    let b = barometric(&a.barometric)?;
    let t = units::temperature_k(&a.temperature, "--temperature")?;
    let cfg = bridge::BridgeConfig::new(
        a.bits,
        !a.unipolar,
        units::number(&a.zero, "--zero")?,
        units::number(&a.span, "--span")?,
        lo,
        hi,
        kind(a.gauge),
    )
    .map_err(|e| Error::Invalid(format!("bridge: {e}")))?;
    let fl = bridge::float::Bridge::<f64>::new(&cfg)?;
    let fi = bridge::fixed::Bridge::new(&cfg)?;
    let mut m = Map::new();
    m.insert("kind".into(), json!("bridge"));
    m.insert("transducer_temperature_k".into(), json!(t));
    let mut lines = vec![format!(
        "ratiometric bridge, {} … {} {}, transducer at {}",
        units::fmt_bar(lo),
        units::fmt_bar(hi),
        if a.gauge { "gauge" } else { "abs" },
        units::fmt_celsius(t)
    )];
    if let Some(p) = &a.pressure {
        let p = units::pressure_pa(p, "--pressure")?;
        let code = fl
            .code(p, t, b)
            .map_err(|e| Error::Invalid(format!("--pressure: {e}")))?;
        m.insert("pressure_pa".into(), json!(p));
        m.insert("code".into(), json!(code));
        m.insert("status".into(), names(Status::OK));
        lines.push(format!("pressure    {} abs", units::fmt_bar(p)));
        lines.push(format!("code        {code:.2}"));
    } else {
        let code = a.code.unwrap_or(0);
        let r = fl.read(code, t, b)?;
        let rq = fi.read(
            code,
            fx_value(t, "--temperature")?,
            fx_value(b, "--barometric")?,
        );
        let p = valid(r.pressure_pa, r.status);
        let g = valid(r.gauge_pa, r.status);
        let pq = valid(fx::to_f64(rq.pressure_pa), rq.status);
        m.insert("code".into(), json!(code));
        m.insert("pressure_pa".into(), p.clone());
        m.insert("gauge_pressure_pa".into(), g.clone());
        m.insert("status".into(), names(r.status));
        m.insert(
            "fixed".into(),
            json!({"pressure_pa": pq, "gauge_pressure_pa": valid(fx::to_f64(rq.gauge_pa), rq.status), "status": names(rq.status)}),
        );
        lines.push(format!("code        {code}"));
        pressure_lines(&mut lines, &p, &g, &pq, r.status);
    }
    m.insert("config".into(), config_json(&SensorConfig::Bridge(cfg))?);
    m.insert("settings".into(), settings(&SensorConfig::Bridge(cfg)));
    output(a.format, "bridge", m, &lines)
}

fn run_gauge(a: &GaugeArgs) -> Result<String, Error> {
    let b = barometric(&a.barometric)?;
    let bq: fx::Pressure = fx_value(b, "--barometric")?;
    let (r, rq) = if let Some(g) = &a.gauge {
        let g = match units::pressure(g, "--gauge")? {
            (_, units::Reference::Absolute) => {
                return Err(Error::Invalid(format!(
                    "--gauge {g}: an absolute pressure (bara, psia); give it with --absolute"
                )));
            }
            (v, _) => v,
        };
        (
            gauge::float::absolute(g, b)?,
            gauge::fixed::absolute(fx_value(g, "--gauge")?, bq),
        )
    } else {
        let p = units::pressure_pa(a.absolute.as_deref().unwrap_or_default(), "--absolute")?;
        if p < 0.0 {
            return Err(Error::Invalid(
                "--absolute: an absolute pressure is never negative".into(),
            ));
        }
        (
            gauge::float::gauge(p, b)?,
            gauge::fixed::gauge(fx_value(p, "--absolute")?, bq),
        )
    };
    let mut m = Map::new();
    m.insert("kind".into(), json!("gauge"));
    m.insert("barometric_pa".into(), json!(b));
    m.insert("pressure_pa".into(), json!(r.pressure_pa));
    m.insert("gauge_pressure_pa".into(), json!(r.gauge_pa));
    m.insert("status".into(), names(r.status));
    m.insert(
        "fixed".into(),
        json!({"pressure_pa": fx::to_f64(rq.pressure_pa), "gauge_pressure_pa": fx::to_f64(rq.gauge_pa), "status": names(rq.status)}),
    );
    let lines = vec![
        format!("barometric  {}", units::fmt_bar(b)),
        format!(
            "pressure    {} abs, {} gauge",
            units::fmt_bar(r.pressure_pa),
            units::fmt_bar(r.gauge_pa)
        ),
        format!("status      {}", fmt_status(r.status)),
    ];
    output(a.format, "gauge", m, &lines)
}

fn run_fit(a: &FitArgs) -> Result<String, Error> {
    let text = std::fs::read_to_string(&a.input)
        .map_err(|e| Error::Invalid(format!("--input {}: {e}", a.input)))?;
    let (quantity, points) = parse_points(&text)?;
    let f = fit(&points, a.degree)?;
    let correction = f.correction()?;
    let mut m = Map::new();
    m.insert("quantity".into(), json!(quantity));
    m.insert("unit".into(), json!(quantity.unit()));
    m.insert("fit".into(), config_json(&f)?);
    m.insert("correction".into(), config_json(&correction)?);
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
    if let Some(path) = &a.record {
        let cfg_path = a.sensor_config.as_deref().unwrap_or_default();
        let cfg_text = std::fs::read_to_string(cfg_path)
            .map_err(|e| Error::Invalid(format!("--sensor-config {cfg_path}: {e}")))?;
        // The file may hold the configuration itself or a whole conversion
        // report with its `config` object.
        let bad = |e: serde_json::Error| Error::Invalid(format!("--sensor-config {cfg_path}: {e}"));
        let mut value: Value = serde_json::from_str(&cfg_text).map_err(bad)?;
        if let Some(inner) = value.get_mut("config") {
            value = inner.take();
        }
        let sensor: SensorConfig = serde_json::from_value(value).map_err(bad)?;
        let channel: Channel = a.channel.map(Into::into).unwrap_or(Channel::Pressure);
        let expects_pressure = matches!(channel, Channel::Pressure | Channel::Barometric);
        if expects_pressure != (quantity == Quantity::Pressure) {
            return Err(Error::Invalid(format!(
                "--channel {channel:?} does not match the {quantity:?} points"
            )));
        }
        let rec = CalibrationRecord {
            sequence: a.sequence.unwrap_or(0),
            channel,
            sensor,
            correction,
        };
        let mut buf = [0u8; CalibrationRecord::MAX_SIZE];
        let bytes = rec
            .encode(&mut buf)
            .map_err(|e| Error::Invalid(format!("calibration record: {e}")))?;
        std::fs::write(path, bytes).map_err(|e| Error::Output(format!("{path}: {e}")))?;
        m.insert(
            "record".into(),
            json!({"file": path, "bytes": bytes.len(), "sequence": rec.sequence, "kind": CalibrationRecord::KIND, "version": CalibrationRecord::VERSION}),
        );
        lines.push(format!(
            "record      {path}: {} bytes, sequence {}, {:?} channel, {} sensor",
            bytes.len(),
            rec.sequence,
            channel,
            rec.sensor.kind_name()
        ));
    }
    output(a.format, "fit", m, &lines)
}

fn run_record(a: &RecordArgs) -> Result<String, Error> {
    let bytes = std::fs::read(&a.file).map_err(|e| Error::Invalid(format!("{}: {e}", a.file)))?;
    let rec = CalibrationRecord::decode(&bytes)
        .map_err(|e| Error::Invalid(format!("{}: {e}", a.file)))?;
    let c = rec.correction;
    let coeffs: Vec<f64> = c.coefficients.iter().map(|v| fx::to_f64(*v)).collect();
    let mut m = Map::new();
    m.insert("sequence".into(), json!(rec.sequence));
    m.insert("channel".into(), config_json(&rec.channel)?);
    m.insert("sensor_kind".into(), json!(rec.sensor.kind_name()));
    m.insert(
        "correction".into(),
        json!({"lo": fx::to_f64(c.lo), "hi": fx::to_f64(c.hi), "coefficients": coeffs}),
    );
    m.insert("bytes".into(), json!(bytes.len()));
    m.insert("checksum".into(), json!("ok"));
    m.insert("config".into(), config_json(&rec.sensor)?);
    m.insert("settings".into(), settings(&rec.sensor));
    let lines = vec![
        format!("{}: {} bytes, CRC-32C ok", a.file, bytes.len()),
        format!("sequence    {}", rec.sequence),
        format!("channel     {:?}", rec.channel),
        format!("sensor      {}", rec.sensor.kind_name()),
        format!(
            "correction  {} … {}: {:?}",
            fx::to_f64(c.lo),
            fx::to_f64(c.hi),
            coeffs
        ),
    ];
    output(a.format, "record", m, &lines)
}
