//! `isochor sim`: run scenarios (built-in or TOML files) through the
//! simulator and score the gauge.

use super::{Format, to_json};
use crate::Error;
use crate::firmware::Board;
use crate::firmware_gauge::FirmwareGauge;
use clap::Args;
use isochor_tank::output::{self, Written};
use isochor_tank::population::Population;
use isochor_tank::run::{BackendKind, RunOptions, Summary, run, run_with};
use isochor_tank::scenario::{BUILTIN, Scenario, duration_s};
use rayon::prelude::*;
use std::path::PathBuf;

/// Arguments of `isochor sim`.
#[derive(Debug, Args)]
pub struct SimArgs {
    /// Scenarios: built-in names (see --list) or scenario files (*.toml).
    pub scenarios: Vec<String>,
    /// Run every built-in scenario (in parallel across cores).
    #[arg(long)]
    pub all: bool,
    /// List the built-in scenarios and exit.
    #[arg(long)]
    pub list: bool,
    /// The gauge under test: the in-process core in fixed point (the device
    /// path) or in f64.
    #[arg(long, value_enum, default_value_t = BackendArg::Fixed)]
    pub backend: BackendArg,
    /// Run the reference firmware in QEMU instead (board: microbit or
    /// mps2-an386), fed the raw codes over its serial link; needs
    /// qemu-system-arm and the firmware's source tree (it is built first).
    #[arg(long, value_name = "BOARD", conflicts_with = "backend")]
    pub firmware: Option<String>,
    /// Run for this long instead of the scenario's duration (e.g. 365d).
    #[arg(long)]
    pub duration: Option<String>,
    /// Seed instead of the scenario's (weather, noise, drawn instrument).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Folder for the summary JSON, time series and plots.
    #[arg(long, default_value = "isochor-out")]
    pub out: PathBuf,
    /// Interval of the recorded time series (e.g. 60s, 10min).
    #[arg(long, default_value = "60s")]
    pub every: String,
    /// Write no files (summary only).
    #[arg(long)]
    pub no_files: bool,
    /// Write no plots.
    #[arg(long)]
    pub no_plots: bool,
    /// Run each scenario as a population of N instruments instead of one:
    /// seeds from --seed (or the scenario's) on, every instrument drawn from
    /// the gauge's declaration, each in its own weather; reports false
    /// alarms per instrument-year, pooled k = 2 coverage, leak finds and
    /// time-to-empty coverage (no files are written).
    #[arg(long, value_name = "N", conflicts_with = "firmware")]
    pub population: Option<u64>,
    /// Output format of the summary.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// The in-process gauge on the command line (`--backend`).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum BackendArg {
    /// The fixed-point core (the device path).
    #[default]
    Fixed,
    /// The `f64` core (the reference mirror).
    Float,
}

impl From<BackendArg> for BackendKind {
    fn from(b: BackendArg) -> BackendKind {
        match b {
            BackendArg::Fixed => BackendKind::Fixed,
            BackendArg::Float => BackendKind::Float,
        }
    }
}

/// Loads one scenario argument: a built-in name or a file.
pub fn load(arg: &str) -> Result<Scenario, Error> {
    if BUILTIN.iter().any(|(n, _)| *n == arg) {
        return Ok(Scenario::builtin(arg)?);
    }
    let path = std::path::Path::new(arg);
    if path.exists() || arg.ends_with(".toml") {
        let text = std::fs::read_to_string(path).map_err(|e| Error::File {
            path: arg.to_string(),
            reason: e.to_string(),
        })?;
        return Ok(Scenario::from_toml(&text)?);
    }
    Ok(Scenario::builtin(arg)?)
}

/// One finished run, for printing.
pub struct Done {
    /// The scores.
    pub summary: Summary,
    /// The files written.
    pub written: Option<Written>,
}

/// Runs the scenarios (in parallel when there are several) on the
/// in-process `backend`.
pub fn execute(
    scenarios: Vec<Scenario>,
    backend: BackendKind,
    every_s: f64,
    out: Option<&std::path::Path>,
    plots: bool,
    progress: bool,
) -> Result<Vec<Done>, Error> {
    execute_on(scenarios, backend, None, every_s, out, plots, progress)
}

/// Longest run of the emulated firmware for one scenario.
const FIRMWARE_LIMIT: std::time::Duration = std::time::Duration::from_secs(24 * 3600);

/// [`execute`], or on the firmware of `firmware` in QEMU when given.
pub fn execute_on(
    scenarios: Vec<Scenario>,
    backend: BackendKind,
    firmware: Option<Board>,
    every_s: f64,
    out: Option<&std::path::Path>,
    plots: bool,
    progress: bool,
) -> Result<Vec<Done>, Error> {
    let one = scenarios.len() == 1;
    let opts = RunOptions {
        backend,
        trace_every_s: if out.is_some() { every_s } else { 0.0 },
        progress: progress && one,
    };
    scenarios
        .par_iter()
        .map(|sc| {
            let r = match firmware {
                None => run(sc, &opts)?,
                Some(board) => {
                    let gauge = FirmwareGauge::start(board, &sc.gauge, FIRMWARE_LIMIT)?;
                    run_with(sc, Box::new(gauge), &opts)?
                }
            };
            let written = match out {
                Some(dir) => Some(output::write_all(dir, &r, plots)?),
                None => None,
            };
            Ok(Done {
                summary: r.summary,
                written,
            })
        })
        .collect()
}

/// Runs `scenario` as a population of `runs` instruments (seeds from
/// `seed` on; see [`isochor_tank::population`]) in parallel on the
/// in-process `backend`, and pools their scores.
pub fn population(
    scenario: &Scenario,
    runs: u64,
    seed: u64,
    duration_s: Option<f64>,
    backend: BackendKind,
) -> Result<Population, Error> {
    let members = isochor_tank::population::members(scenario, runs, seed, duration_s)?;
    let opts = RunOptions {
        backend,
        trace_every_s: 0.0,
        progress: false,
    };
    let summaries = members
        .par_iter()
        .map(|sc| run(sc, &opts).map(|r| r.summary))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(Population::from_runs(&summaries, seed)?)
}

/// Prints the summaries.
pub fn render(done: &[Done], format: Format) -> Result<String, Error> {
    match format {
        Format::Json => {
            if let [d] = done {
                to_json(&d.summary)
            } else {
                to_json(&done.iter().map(|d| &d.summary).collect::<Vec<_>>())
            }
        }
        Format::Text => Ok(done
            .iter()
            .map(|d| output::render_text(&d.summary, d.written.as_ref()))
            .collect::<Vec<_>>()
            .join("\n")),
    }
}

/// Runs `isochor sim`.
pub fn run_cmd(a: &SimArgs) -> Result<String, Error> {
    if a.list {
        let mut s = String::new();
        for (name, text) in BUILTIN {
            let sc = Scenario::from_toml(text)?;
            s += &format!("{name:<22} {}\n", sc.title);
        }
        return Ok(s);
    }
    let mut names: Vec<String> = a.scenarios.clone();
    if a.all {
        names.extend(BUILTIN.iter().map(|(n, _)| n.to_string()));
    }
    if names.is_empty() {
        return Err(Error::Invalid(
            "name a scenario (built-in or file), or --all; --list shows the built-ins".into(),
        ));
    }
    let duration = a
        .duration
        .as_deref()
        .map(|d| duration_s(d, "--duration"))
        .transpose()?;
    let every = duration_s(&a.every, "--every")?;
    if let Some(n) = a.population {
        let reports = names
            .iter()
            .map(|name| {
                let sc = load(name)?;
                population(
                    &sc,
                    n,
                    a.seed.unwrap_or(sc.source.seed),
                    duration,
                    a.backend.into(),
                )
            })
            .collect::<Result<Vec<_>, Error>>()?;
        return match a.format {
            Format::Json => match reports.as_slice() {
                [one] => to_json(one),
                many => to_json(&many),
            },
            Format::Text => Ok(reports
                .iter()
                .map(Population::render_text)
                .collect::<Vec<_>>()
                .join("\n")),
        };
    }
    let scenarios = names
        .iter()
        .map(|n| load(n).map(|s| s.with(duration, a.seed)))
        .collect::<Result<Vec<_>, _>>()?;
    let out = (!a.no_files).then_some(a.out.as_path());
    let firmware = a.firmware.as_deref().map(Board::from_name).transpose()?;
    let done = execute_on(
        scenarios,
        a.backend.into(),
        firmware,
        every,
        out,
        !a.no_plots,
        a.format == Format::Text,
    )?;
    render(&done, a.format)
}
