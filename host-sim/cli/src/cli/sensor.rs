//! `isochor sensor`: single values through the sensor front-ends, both ways,
//! in both core paths; the calibration fit; and reading back a record.
//! The options become a request, [`crate::sensor::convert`] makes the typed
//! report (its JSON fields are described there), and this renders it.
//!
//! The JSON's `settings` are the conversion's settings in SI units with
//! snake_case names, and `config` the same in the stored form (raw
//! fixed-point bits under the core's type names), exact, which
//! `sensor fit --sensor-config` reads back.

use super::{Format, to_json};
use crate::Error;
use crate::sensor::convert::{
    self, BridgeInput, BridgeRequest, Converter, GaugeInput, LoopInput, LoopRequest, NtcModel,
    NtcRequest, RecordRequest, Report, ResistiveInput, RtdRequest,
};
use crate::sensor::{ohms, pressure_range};
use clap::{ArgGroup, Args, Subcommand, ValueEnum};
use isochor_core::sensor::calibration::Channel;
use isochor_core::sensor::resistive;
use isochor_eos::units;

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

impl ResistiveArgs {
    fn converter(&self) -> Result<Converter, Error> {
        Ok(Converter {
            circuit: self.circuit.map(Into::into),
            reference_ohms: self
                .reference_ohms
                .as_deref()
                .map(|r| ohms(r, "--reference-ohms"))
                .transpose()?,
            bits: self.bits,
            lead_ohms: units::number(&self.lead_ohms, "--lead-ohms")?,
            excitation: units::number(&self.excitation, "--excitation")?,
            self_heating_k_per_mw: units::number(
                &self.self_heating_k_per_mw,
                "--self-heating-k-per-mw",
            )?,
        })
    }
}

/// The input of `rtd` and `ntc`: --ohms, --temperature or --code (clap makes
/// one of them required).
fn resistive_input(
    ohms_arg: &Option<String>,
    temperature: &Option<String>,
    code: Option<u32>,
) -> Result<ResistiveInput, Error> {
    Ok(match (ohms_arg, temperature) {
        (_, Some(t)) => ResistiveInput::Temperature(units::temperature_k(t, "--temperature")?),
        (Some(o), None) => ResistiveInput::Ohms(ohms(o, "--ohms")?),
        (None, None) => ResistiveInput::Code(code.unwrap_or(0)),
    })
}

/// `--barometric`, checked.
fn barometric(s: &str) -> Result<f64, Error> {
    convert::barometric(units::pressure_pa(s, "--barometric")?, s)
}

/// Renders a report in the format asked for; JSON objects with their keys
/// in name order at every level (as the command has always printed them).
fn render<T: serde::Serialize>(format: Format, r: &Report<T>) -> Result<String, Error> {
    match format {
        Format::Json => {
            to_json(&serde_json::to_value(&r.report).map_err(|e| Error::Output(e.to_string()))?)
        }
        Format::Text => Ok(r.render_text()),
    }
}

/// Runs `isochor sensor`.
pub fn run(a: &SensorArgs) -> Result<String, Error> {
    match &a.command {
        SensorCommand::Rtd(x) => render(
            x.format,
            &convert::rtd(&RtdRequest {
                r0_ohms: ohms(&x.r0, "--r0")?,
                converter: x.input.converter()?,
                input: resistive_input(&x.ohms, &x.temperature, x.code)?,
            })?,
        ),
        SensorCommand::Ntc(x) => render(
            x.format,
            &convert::ntc(&NtcRequest {
                model: ntc_model(x)?,
                converter: x.input.converter()?,
                input: resistive_input(&x.ohms, &x.temperature, x.code)?,
            })?,
        ),
        SensorCommand::Loop(x) => render(x.format, &convert::current_loop(&loop_request(x)?)?),
        SensorCommand::Bridge(x) => render(x.format, &convert::bridge(&bridge_request(x)?)?),
        SensorCommand::Gauge(x) => run_gauge(x),
        SensorCommand::Fit(x) => run_fit(x),
        SensorCommand::Record(x) => {
            let bytes = std::fs::read(&x.file).map_err(|e| Error::InputFile {
                what: None,
                path: x.file.clone(),
                reason: e.to_string(),
            })?;
            render(x.format, &convert::read_record(&bytes, &x.file)?)
        }
    }
}

fn ntc_model(a: &NtcArgs) -> Result<NtcModel, Error> {
    if let Some(b) = &a.beta {
        return Ok(NtcModel::Beta {
            beta: units::number(b, "--beta")?,
            r25_ohms: ohms(a.r25.as_deref().unwrap_or_default(), "--r25")?,
            t25_k: units::temperature_k(&a.t25, "--t25")?,
        });
    }
    let num = |o: &Option<String>, w| units::number(o.as_deref().unwrap_or_default(), w);
    Ok(NtcModel::SteinhartHart {
        a: num(&a.sh_a, "--sh-a")?,
        b: num(&a.sh_b, "--sh-b")?,
        c: num(&a.sh_c, "--sh-c")?,
    })
}

fn loop_request(a: &LoopArgs) -> Result<LoopRequest, Error> {
    let range_pa = pressure_range(&a.range, "--range")?;
    let barometric_pa = barometric(&a.barometric)?;
    let shunt_ohms = ohms(&a.shunt_ohms, "--shunt-ohms")?;
    let adc_reference_v = units::number(&a.adc_reference_v, "--adc-reference-v")?;
    let input = match (&a.pressure, &a.milliamps) {
        (Some(p), _) => LoopInput::Pressure(units::pressure_pa(p, "--pressure")?),
        (None, Some(i)) => LoopInput::Milliamps(units::number(i, "--milliamps")?),
        (None, None) => LoopInput::Code(a.code.unwrap_or(0)),
    };
    Ok(LoopRequest {
        range_pa,
        gauge: a.gauge,
        barometric_pa,
        shunt_ohms,
        adc_reference_v,
        bits: a.bits,
        input,
    })
}

fn bridge_request(a: &BridgeArgs) -> Result<BridgeRequest, Error> {
    let range_pa = pressure_range(&a.range, "--range")?;
    let barometric_pa = barometric(&a.barometric)?;
    let temperature_k = units::temperature_k(&a.temperature, "--temperature")?;
    let zero = units::number(&a.zero, "--zero")?;
    let span = units::number(&a.span, "--span")?;
    let input = match &a.pressure {
        Some(p) => BridgeInput::Pressure(units::pressure_pa(p, "--pressure")?),
        None => BridgeInput::Code(a.code.unwrap_or(0)),
    };
    Ok(BridgeRequest {
        range_pa,
        gauge: a.gauge,
        zero,
        span,
        bits: a.bits,
        unipolar: a.unipolar,
        temperature_k,
        barometric_pa,
        input,
    })
}

fn run_gauge(a: &GaugeArgs) -> Result<String, Error> {
    let b = barometric(&a.barometric)?;
    let input = if let Some(g) = &a.gauge {
        match units::pressure(g, "--gauge")? {
            (_, units::Reference::Absolute) => {
                return Err(Error::Invalid(format!(
                    "--gauge {g}: an absolute pressure (bara, psia); give it with --absolute"
                )));
            }
            (v, _) => GaugeInput::Gauge(v),
        }
    } else {
        GaugeInput::Absolute(units::pressure_pa(
            a.absolute.as_deref().unwrap_or_default(),
            "--absolute",
        )?)
    };
    render(a.format, &convert::gauge_absolute(input, b)?)
}

fn run_fit(a: &FitArgs) -> Result<String, Error> {
    let csv = std::fs::read_to_string(&a.input).map_err(|e| Error::InputFile {
        what: Some("--input"),
        path: a.input.clone(),
        reason: e.to_string(),
    })?;
    let record = match &a.record {
        None => None,
        Some(path) => {
            let cfg_path = a.sensor_config.as_deref().unwrap_or_default();
            let cfg_text = std::fs::read_to_string(cfg_path).map_err(|e| Error::InputFile {
                what: Some("--sensor-config"),
                path: cfg_path.to_string(),
                reason: e.to_string(),
            })?;
            Some(RecordRequest {
                file: path.clone(),
                sensor_config: (cfg_text, cfg_path.to_string()),
                sequence: a.sequence.unwrap_or(0),
                channel: a.channel.map(Into::into).unwrap_or(Channel::Pressure),
            })
        }
    };
    let (report, bytes) = convert::fit_points(&csv, a.degree, record.as_ref())?;
    if let (Some(path), Some(bytes)) = (&a.record, bytes) {
        std::fs::write(path, bytes).map_err(|e| Error::Output(format!("{path}: {e}")))?;
    }
    render(a.format, &report)
}
