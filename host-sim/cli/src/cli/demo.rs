//! `isochor demo`: the built-in workshop scenario (a 50 L nitrogen cylinder
//! over a week, a valve leak from day four) on defaults: what is simulated,
//! the instrument under test, the scores each with how to read it, and
//! where the plots are.

use super::Format;
use super::sim::{execute, render};
use crate::Error;
use clap::Args;
use isochor_tank::run::BackendKind;
use isochor_tank::scenario::Scenario;
use std::path::PathBuf;

/// Arguments of `isochor demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Folder for the summary JSON, time series and plots.
    #[arg(long, default_value = "isochor-out")]
    pub out: PathBuf,
    /// Write no files (summary only).
    #[arg(long)]
    pub no_files: bool,
    /// Output format of the summary.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Runs `isochor demo`.
pub fn run(a: &DemoArgs) -> Result<String, Error> {
    let sc = Scenario::builtin("workshop-leak")?;
    let done = execute(
        vec![sc],
        BackendKind::Fixed,
        60.0,
        (!a.no_files).then_some(a.out.as_path()),
        true,
        a.format == Format::Text,
    )?;
    let mut s = String::new();
    if a.format == Format::Text {
        s += "A simulated week of a 50 L nitrogen cylinder in an unheated workshop: real physics,\n\
the day/night swing, a temperature sensor that opens for ten minutes on day two and a valve\n\
that starts leaking on day four. The gauge is the device's fixed-point core, reading the raw\n\
codes of simulated sensors that carry one instrument's errors (listed below, drawn from what\n\
the gauge declares); its content, uncertainty and alarms are scored against the truth, and\n\
each score comes with how to read it.\n\n";
    }
    s += &render(&done, a.format)?;
    if a.format == Format::Text && !a.no_files {
        s += "\nOpen the PNG above to see pressure, temperatures, content with its uncertainty \
band, the content error and the alarms. More: `isochor sim --list`.\n";
    }
    Ok(s)
}
