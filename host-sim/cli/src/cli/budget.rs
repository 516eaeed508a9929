//! `isochor budget`: the firmware's flash, static RAM and peak stack per
//! build, and instructions per full estimate on the Cortex-M0 (fixed point,
//! `f32`, `f64`), measured in QEMU. Needs `qemu-system-arm`, cargo and the
//! targets `thumbv6m-none-eabi` and `thumbv7em-none-eabihf`.

use std::path::PathBuf;

use clap::Args;

use super::{Format, to_json};
use crate::budget;
use crate::firmware;

/// Arguments of `isochor budget`.
#[derive(Debug, Args)]
pub struct BudgetArgs {
    /// The firmware folder (default: the one of this source tree).
    #[arg(long)]
    pub firmware: Option<PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Builds, measures and prints the budget.
pub fn run(args: &BudgetArgs) -> Result<String, crate::Error> {
    let dir = args
        .firmware
        .clone()
        .unwrap_or_else(firmware::default_firmware_dir);
    if !dir.join("Cargo.toml").is_file() {
        return Err(crate::Error::Invalid(format!(
            "{}: not a firmware folder (no Cargo.toml)",
            dir.display()
        )));
    }
    let b = budget::measure(&dir)?;
    match args.format {
        Format::Text => Ok(budget::render_text(&b)),
        Format::Json => to_json(&b),
    }
}
