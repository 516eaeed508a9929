//! `isochor content`: one tank, one sample.

use super::{Format, to_json};
use crate::Error;
use crate::content::{ContentRequest, ModelChoice, render_text, report};
use clap::Args;
use isochor_core::StandardCondition;
use isochor_core::constants::ZERO_CELSIUS_K;
use isochor_eos::units;

/// Arguments of `isochor content`.
#[derive(Debug, Args)]
pub struct ContentArgs {
    /// The gas or mixture.
    #[command(flatten)]
    pub gas: super::gas::GasArgs,
    /// The tank, and how its pressures read (gauge or absolute).
    #[command(flatten)]
    pub tank: super::tank::TankArgs,
    /// Measured pressure, with unit (Pa, kPa, MPa, bar, mbar, psi), read as
    /// --rated-pressure is: absolute unless --gauge; bara/psia mark an
    /// absolute, barg/psig a gauge pressure (the barometric pressure is
    /// added), whatever --gauge says.
    #[arg(long, allow_hyphen_values = true)]
    pub pressure: String,
    /// Gas temperature, with unit (K, C, F).
    #[arg(long, allow_hyphen_values = true)]
    pub temperature: String,
    /// Temperature the settled pressure refers to.
    #[arg(long, default_value = "15C", allow_hyphen_values = true)]
    pub reference_temperature: String,
    /// Standard condition for standard volume: iso13443 (15 °C, 101.325 kPa),
    /// normal (0 °C, 101.325 kPa), ntp (20 °C, 101.325 kPa), 60f (60 °F,
    /// 14.696 psia), or TEMPERATURE,PRESSURE such as 25C,100kPa.
    #[arg(long, default_value = "iso13443", allow_hyphen_values = true)]
    pub standard: String,
    /// Gas model: device (the built-in table a device runs; for a mixture,
    /// a table built for its composition, cached), reference (the reference
    /// equation of state; GERG-2008 for a mixture) or ideal.
    #[arg(long, value_enum, default_value_t = ModelChoice::Device)]
    pub model: ModelChoice,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Parses `--standard`.
pub fn parse_standard(s: &str) -> Result<(String, StandardCondition), Error> {
    if let Some((name, cond)) = StandardCondition::named()
        .into_iter()
        .find(|(name, _)| name.eq_ignore_ascii_case(s.trim()))
    {
        return Ok((name.to_string(), cond));
    }
    let Some((t, p)) = s.split_once(',') else {
        return Err(Error::Quantity {
            what: "--standard",
            input: s.to_string(),
            reason: "use iso13443, normal, ntp, 60f, or TEMPERATURE,PRESSURE (e.g. 25C,100kPa)"
                .to_string(),
        });
    };
    Ok((
        "custom".to_string(),
        StandardCondition {
            temperature_k: units::temperature_k(t, "--standard temperature")?,
            pressure_pa: units::pressure_pa(p, "--standard pressure")?,
        },
    ))
}

/// Turns the arguments into a request (all validation of units and signs).
pub fn request(a: &ContentArgs) -> Result<ContentRequest, Error> {
    let gas = a.gas.spec()?;
    let pressure = a.tank.absolute_pa(&a.pressure, "--pressure")?;
    if pressure < 0.0 {
        return Err(Error::Invalid(format!(
            "--pressure {}: absolute pressure would be negative ({})",
            a.pressure,
            units::fmt_bar(pressure)
        )));
    }
    let tank = a.tank.tank()?;
    let standard = parse_standard(&a.standard)?;
    standard
        .1
        .validate()
        .map_err(|e| Error::Invalid(format!("--standard {}: {e}", a.standard)))?;
    let settled_reference_k =
        units::temperature_k(&a.reference_temperature, "--reference-temperature")?;
    if !(ZERO_CELSIUS_K - 60.0..=ZERO_CELSIUS_K + 150.0).contains(&settled_reference_k) {
        return Err(Error::Invalid(format!(
            "--reference-temperature {}: outside -60...150 C",
            a.reference_temperature
        )));
    }
    Ok(ContentRequest {
        gas,
        model: a.model,
        tank,
        pressure_pa: pressure,
        temperature_k: units::temperature_k(&a.temperature, "--temperature")?,
        standard,
        settled_reference_k,
    })
}

/// Runs the command.
pub fn run(a: &ContentArgs) -> Result<String, Error> {
    let r = report(&request(a)?)?;
    match a.format {
        Format::Json => to_json(&r),
        Format::Text => Ok(render_text(&r)),
    }
}
