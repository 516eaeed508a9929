//! `isochor content`: one tank, one sample.

use super::{Format, to_json};
use crate::Error;
use crate::content::{ContentRequest, ModelChoice, render_text, report};
use clap::Args;
use isochor_core::constants::ZERO_CELSIUS_K;
use isochor_core::{StandardCondition, Tank};
use isochor_eos::units;

/// Arguments of `isochor content`.
#[derive(Debug, Args)]
pub struct ContentArgs {
    /// The gas or mixture.
    #[command(flatten)]
    pub gas: super::gas::GasArgs,
    /// Water capacity of the tank, with unit (L, mL, m3).
    #[arg(long, allow_hyphen_values = true)]
    pub capacity: String,
    /// Measured pressure, with unit (Pa, kPa, MPa, bar, mbar, psi); absolute
    /// unless --gauge. bara/psia mark an absolute, barg/psig a gauge pressure
    /// (the barometric pressure is added), whatever --gauge says.
    #[arg(long, allow_hyphen_values = true)]
    pub pressure: String,
    /// Gas temperature, with unit (K, C, F).
    #[arg(long, allow_hyphen_values = true)]
    pub temperature: String,
    /// Rated (service) pressure of the tank, with unit; absolute unless
    /// --gauge or a barg/psig unit. The working pressure marked on a cylinder
    /// is a gauge pressure: give it as e.g. 200barg or 2015psig (or use
    /// --gauge), so the barometric pressure is added.
    #[arg(long, allow_hyphen_values = true)]
    pub rated_pressure: String,
    /// Temperature the rated pressure refers to. 15 °C in ISO practice; some
    /// markings (US practice) refer to 70 °F (21.1 °C): give 70F then, or the
    /// rated content comes out about 2 % too high.
    #[arg(long, default_value = "15C", allow_hyphen_values = true)]
    pub rated_temperature: String,
    /// Pressures with a plain unit (bar, psi, ...) are gauge readings (the
    /// barometric pressure is added).
    #[arg(long)]
    pub gauge: bool,
    /// Barometric pressure added to gauge readings (--gauge, barg, psig).
    #[arg(long, default_value = "101.325kPa", allow_hyphen_values = true)]
    pub barometric: String,
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
    /// Elastic volume expansion of the vessel per bar of pressure (e.g.
    /// 1.2e-5); reported in JSON both per bar (`elastic_expansion_per_bar`)
    /// and per MPa (`elastic_expansion_per_mpa`, ten times larger).
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    pub elastic_expansion_per_bar: String,
    /// Volumetric thermal expansion of the vessel per kelvin (e.g. 3.6e-5).
    #[arg(long, default_value = "0", allow_hyphen_values = true)]
    pub thermal_expansion_per_k: String,
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
    let barometric = units::pressure_pa(&a.barometric, "--barometric")?;
    let gauge_unit = |v: &str| {
        units::pressure(v, "")
            .map(|(_, r)| r == units::Reference::Gauge)
            .unwrap_or(false)
    };
    let uses_barometric = a.gauge || gauge_unit(&a.pressure) || gauge_unit(&a.rated_pressure);
    if uses_barometric && !(50e3..=110e3).contains(&barometric) {
        return Err(Error::Invalid(format!(
            "--barometric {}: outside 50-110 kPa, not a barometric pressure",
            a.barometric
        )));
    }
    let pressure = units::absolute_pa(&a.pressure, "--pressure", a.gauge, barometric)?;
    if pressure < 0.0 {
        return Err(Error::Invalid(format!(
            "--pressure {}: absolute pressure would be negative ({})",
            a.pressure,
            units::fmt_bar(pressure)
        )));
    }
    let rated = units::absolute_pa(&a.rated_pressure, "--rated-pressure", a.gauge, barometric)?;
    let tank = Tank {
        water_capacity_m3: units::volume_m3(&a.capacity, "--capacity")?,
        rated_pressure_pa: rated,
        rated_temperature_k: units::temperature_k(&a.rated_temperature, "--rated-temperature")?,
        elastic_expansion_per_mpa: units::number(
            &a.elastic_expansion_per_bar,
            "--elastic-expansion-per-bar",
        )? * 10.0,
        thermal_expansion_per_k: units::number(
            &a.thermal_expansion_per_k,
            "--thermal-expansion-per-k",
        )?,
    };
    tank.validate()
        .map_err(|e| Error::Invalid(format!("tank: {e}")))?;
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
