//! `isochor model`: build and check device gas models.

use super::{Format, to_json};
use crate::Error;
use clap::{Args, Subcommand};
use isochor_core::Gas;
use isochor_core::model::device::{TableBuf, builtin};
use isochor_eos::composition::GasSpec;
use isochor_eos::fluid::Fluid;
use isochor_eos::model::{self, BuildSpec, Built, CheckReport};
use isochor_eos::{safety, units};
use serde::Serialize;
use std::collections::BTreeMap;

/// Arguments of `isochor model`.
#[derive(Debug, Args)]
pub struct ModelArgs {
    /// What to do.
    #[command(subcommand)]
    pub action: ModelAction,
}

/// The `model` actions.
#[derive(Debug, Subcommand)]
pub enum ModelAction {
    /// Build a device table from the reference equation of state.
    Build(BuildArgs),
    /// Measure a device table against the reference equation of state.
    Check(CheckArgs),
}

/// What `--emit` writes.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum Emit {
    /// A loadable blob (postcard, CRC-32C protected).
    #[default]
    Blob,
    /// The built-in tables as Rust source (core/src/model/device/builtin.rs).
    Rust,
}

/// Arguments of `isochor model build`.
#[derive(Debug, Args)]
pub struct BuildArgs {
    /// Gas name or formula, `all` (with --emit rust), or a mixture as mole
    /// fractions: argon=82%,carbon_dioxide=18%.
    #[arg(long, required_unless_present = "gas_file")]
    pub gas: Option<String>,
    /// A composition file (TOML: a `[composition]` table of name = fraction).
    #[arg(long, conflicts_with = "gas")]
    pub gas_file: Option<String>,
    /// Temperature range, e.g. -40C..85C (default: -40C..85C for a pure gas,
    /// -60C..85C for a mixture, so that its condensation guard covers the
    /// whole envelope).
    #[arg(long, allow_hyphen_values = true)]
    pub temperature: Option<String>,
    /// Pressure range from 0, e.g. 0..875bar (capped at the equation's limit).
    #[arg(long, default_value = "0..1000bar")]
    pub pressure: String,
    /// Largest density covered for gases that can be liquid in range, with
    /// unit kg/m3 (default: a third of the critical density).
    #[arg(long)]
    pub density_max: Option<String>,
    /// Target: largest relative density error on the check grid.
    #[arg(long, default_value_t = 9e-5)]
    pub target: f64,
    /// Size limit of the blob, bytes.
    #[arg(long, default_value_t = 2048)]
    pub max_bytes: usize,
    /// Output kind.
    #[arg(long, value_enum, default_value_t = Emit::Blob)]
    pub emit: Emit,
    /// Output file.
    #[arg(short = 'o', long)]
    pub output: String,
}

/// Arguments of `isochor model check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// Gas name or formula (its built-in table), `all`, or a mixture (its
    /// table as `content --model device` builds and keeps it; with --model,
    /// the composition the blob is checked against).
    #[arg(long, required_unless_present = "gas_file")]
    pub gas: Option<String>,
    /// A composition file (TOML: a `[composition]` table of name = fraction).
    #[arg(long, conflicts_with = "gas")]
    pub gas_file: Option<String>,
    /// A blob file to check instead of the built-in table.
    #[arg(long)]
    pub model: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

fn range(
    s: &str,
    what: &'static str,
    parse: fn(&str, &'static str) -> Result<f64, isochor_eos::Error>,
) -> Result<(f64, f64), Error> {
    let (a, b) = s.split_once("..").ok_or_else(|| Error::Quantity {
        what,
        input: s.to_string(),
        reason: "expected LOW..HIGH with units, e.g. -40C..85C or 0..875bar".into(),
    })?;
    let hi = parse(b, what)?;
    // A bare 0 takes the unit of the upper end.
    let lo = if a.trim() == "0" {
        0.0
    } else {
        parse(a, what)?
    };
    Ok((lo, hi))
}

/// `--gas` or `--gas-file`.
fn gas_spec(gas: &Option<String>, file: &Option<String>) -> Result<GasSpec, Error> {
    super::gas::GasArgs {
        gas: gas.clone(),
        gas_file: file.clone(),
    }
    .spec()
}

fn specs(a: &BuildArgs) -> Result<Vec<BuildSpec>, Error> {
    let t_range = |mixture: bool| -> Result<(f64, f64), Error> {
        let default = if mixture { "-60C..85C" } else { "-40C..85C" };
        range(
            a.temperature.as_deref().unwrap_or(default),
            "--temperature",
            units::temperature_k,
        )
    };
    let (p_lo, p_hi) = range(&a.pressure, "--pressure", units::pressure_pa)?;
    if p_lo != 0.0 {
        return Err(Error::Invalid("--pressure: tables start at 0".into()));
    }
    let density = match &a.density_max {
        None => None,
        Some(d) => {
            let v = d
                .trim()
                .strip_suffix("kg/m3")
                .ok_or_else(|| Error::Quantity {
                    what: "--density-max",
                    input: d.clone(),
                    reason: "use kg/m3".into(),
                })?;
            Some(units::number(v, "--density-max")?)
        }
    };
    let fluids: Vec<Fluid> = if a.gas.as_deref() == Some("all") {
        Gas::ALL.iter().map(|&g| Fluid::pure(g)).collect()
    } else {
        vec![Fluid::of(&gas_spec(&a.gas, &a.gas_file)?)]
    };
    fluids
        .into_iter()
        .map(|fluid| {
            let (t_lo, t_hi) = t_range(matches!(fluid, Fluid::Mixture(_)))?;
            Ok(BuildSpec {
                fluid,
                t_min_k: t_lo,
                t_max_k: t_hi,
                p_max_pa: p_hi,
                density_max_kg_m3: density,
                target: a.target,
                max_bytes: a.max_bytes,
            })
        })
        .collect()
}

/// Builds several models, two at a time.
pub fn build_all(specs: &[BuildSpec]) -> Result<Vec<Built>, Error> {
    let mut out: Vec<Option<Result<Built, Error>>> = (0..specs.len()).map(|_| None).collect();
    for (chunk, slots) in specs.chunks(2).zip(out.chunks_mut(2)) {
        std::thread::scope(|s| {
            let handles: Vec<_> = chunk
                .iter()
                .map(|sp| s.spawn(move || model::build(sp)))
                .collect();
            for (h, slot) in handles.into_iter().zip(slots.iter_mut()) {
                *slot = Some(
                    h.join()
                        .unwrap_or_else(|_| {
                            Err(isochor_eos::Error::Build("builder thread failed".into()))
                        })
                        .map_err(Error::from),
                );
            }
        });
    }
    out.into_iter()
        .map(|r| r.unwrap_or_else(|| Err(Error::Build("not built".into()))))
        .collect()
}

fn write(path: &str, bytes: &[u8]) -> Result<(), Error> {
    std::fs::write(path, bytes).map_err(|e| Error::File {
        path: path.to_string(),
        reason: e.to_string(),
    })
}

fn summary(b: &Built) -> String {
    let t = b.table.table();
    format!(
        "{}: {} × {} knots, {} bytes, max density error {:.2e} (mean {:.1e}) over {} states, target {:.1e}",
        b.spec.fluid.label(),
        t.temperature_knots.len(),
        t.pressure_knots.len(),
        model::blob_len(&b.table).unwrap_or(0),
        b.check.max_rel_error,
        b.check.mean_rel_error,
        b.check.samples,
        b.spec.target
    )
}

/// Runs `isochor model`.
pub fn run(a: &ModelArgs) -> Result<String, Error> {
    match &a.action {
        ModelAction::Build(b) => run_build(b),
        ModelAction::Check(c) => run_check(c),
    }
}

fn run_build(a: &BuildArgs) -> Result<String, Error> {
    let specs = specs(a)?;
    if a.emit == Emit::Blob && specs.len() != 1 {
        return Err(Error::Invalid(
            "--emit blob builds one gas at a time".into(),
        ));
    }
    let built = build_all(&specs)?;
    let mut report = String::new();
    for b in &built {
        report += &summary(b);
        report.push('\n');
        if b.check.max_rel_error > b.spec.target {
            return Err(Error::Build(format!(
                "target not met within {} bytes: {}",
                b.spec.max_bytes,
                summary(b)
            )));
        }
    }
    match a.emit {
        Emit::Blob => write(&a.output, &model::blob(&built[0].table)?)?,
        Emit::Rust => {
            write(&a.output, model::rust_module(&built).as_bytes())?;
            // The committed file is rustfmt-formatted; format the output the
            // same way so a fresh build compares equal (CI diffs them).
            let fmt = std::process::Command::new("rustfmt")
                .args(["--edition", "2024", &a.output])
                .status();
            if !fmt.is_ok_and(|s| s.success()) {
                report +=
                    "note: rustfmt not run on the output; run `cargo fmt` before committing\n";
            }
        }
    }
    Ok(report + &format!("wrote {}\n", a.output))
}

/// The JSON answer of `isochor model check`.
#[derive(Clone, Debug, Serialize)]
pub struct CheckOutput {
    /// Gas name (a mixture: its composition in the `--gas` form).
    pub gas: String,
    /// Mole fractions by component (a pure gas: itself, 1).
    pub composition: BTreeMap<String, f64>,
    /// `builtin` or the blob file.
    pub model: String,
    /// Size of the blob, bytes.
    pub bytes: usize,
    /// Temperature range, K.
    pub temperature_min_k: f64,
    /// Temperature range, K.
    pub temperature_max_k: f64,
    /// Highest pressure, Pa.
    pub pressure_max_pa: f64,
    /// Knots along temperature and pressure.
    pub knots: [usize; 2],
    /// The measured errors.
    #[serde(flatten)]
    pub check: CheckReport,
    /// Safety cautions of the gas (and of building a gauge with the table).
    pub caution: String,
}

/// Checks one table against the reference equation of `fluid`.
pub fn check_one(table: &TableBuf, name: &str, fluid: &Fluid) -> Result<CheckOutput, Error> {
    let t = table.table();
    let r = t.range();
    let spec = fluid.spec();
    Ok(CheckOutput {
        gas: super::gas::gas_field(&spec),
        composition: super::gas::composition_map(&spec),
        model: name.to_string(),
        bytes: model::blob_len(table)?,
        temperature_min_k: r.temperature_min_k,
        temperature_max_k: r.temperature_max_k,
        pressure_max_pa: r.pressure_max_pa,
        knots: [t.temperature_knots.len(), t.pressure_knots.len()],
        check: model::check_fluid(&t, fluid)?,
        caution: safety::device_lines_for(&spec).join(" "),
    })
}

fn run_check(a: &CheckArgs) -> Result<String, Error> {
    let all = a.gas.as_deref() == Some("all");
    let spec = if all {
        None
    } else {
        Some(gas_spec(&a.gas, &a.gas_file)?)
    };
    let tables: Vec<(TableBuf, String, Fluid)> = match (&a.model, &spec) {
        (Some(path), _) => {
            let bytes = std::fs::read(path).map_err(|e| Error::File {
                path: path.clone(),
                reason: e.to_string(),
            })?;
            let t = TableBuf::from_blob(&bytes)?;
            let fluid = match &spec {
                Some(s) => Fluid::of(s),
                None => match t.gas.mixture() {
                    Some(_) => {
                        return Err(Error::Invalid(
                            "a mixture's table is checked against its composition: give --gas"
                                .into(),
                        ));
                    }
                    None => Fluid::pure(t.gas),
                },
            };
            vec![(t, path.clone(), fluid)]
        }
        (None, Some(GasSpec::Mixture(_))) => {
            let fluid = Fluid::of(spec.as_ref().unwrap_or(&GasSpec::Pure(Gas::Nitrogen)));
            let (t, note) = crate::model_cache::table_for(&fluid)?;
            let name = note.path.unwrap_or_else(|| note.source.clone());
            vec![(t, name, fluid)]
        }
        (None, _) => {
            let gases = match &spec {
                Some(GasSpec::Pure(g)) => vec![*g],
                _ => Gas::ALL.to_vec(),
            };
            gases
                .into_iter()
                .map(|g| {
                    let t = builtin::table(g).ok_or(Error::Core(
                        isochor_core::Error::ModelUnusable(isochor_core::Condition::BuiltinTable),
                    ))?;
                    Ok((
                        TableBuf::from_table(&t)?,
                        "builtin".to_string(),
                        Fluid::pure(g),
                    ))
                })
                .collect::<Result<_, Error>>()?
        }
    };
    let outs: Vec<CheckOutput> = tables
        .iter()
        .map(|(t, n, f)| check_one(t, n, f))
        .collect::<Result<_, _>>()?;
    match a.format {
        Format::Json if outs.len() == 1 => to_json(&outs[0]),
        Format::Json => to_json(&outs),
        Format::Text => {
            let mut s = String::from(
                "gas              knots T×p  bytes  max error  mean error  max (f64)  states\n",
            );
            for o in &outs {
                s += &format!(
                    "{:<16} {:>4} × {:<3} {:>6}  {:>9.2e}  {:>10.1e}  {:>9.2e}  {}\n",
                    o.gas,
                    o.knots[0],
                    o.knots[1],
                    o.bytes,
                    o.check.max_rel_error,
                    o.check.mean_rel_error,
                    o.check.max_rel_error_float,
                    o.check.samples
                );
            }
            s += "errors: relative density error of the fixed-point evaluation against the \
                  reference equation of state, on a 0.5 K grid off the build nodes.\n";
            s += "Tables cover the gas only: where a liquefiable gas is liquid the device \
                  flags two_phase or liquid_full and shows no content.\n\n";
            // The general and hardware cautions once, each gas's own after.
            s += safety::GENERAL;
            s.push('\n');
            let mut seen = Vec::new();
            for o in &outs {
                if let Ok(g) = Gas::from_name(&o.gas) {
                    for line in safety::lines(g).into_iter().skip(1) {
                        if !seen.contains(&line) {
                            seen.push(line);
                            s += line;
                            s.push('\n');
                        }
                    }
                }
            }
            s += safety::HARDWARE;
            s.push('\n');
            Ok(s)
        }
    }
}
