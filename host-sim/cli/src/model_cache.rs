//! Device tables of mixtures, built on demand and kept on disk.
//!
//! `isochor content --model device` with a mixture runs the device path on a
//! table built for that composition (the built-in envelope: −60…+85 °C,
//! 0…700 bar or GERG-2008's limit, target 9e-5, at most 2 KiB), exactly as
//! `isochor model build` would write it. The blob is kept in
//! `$ISOCHOR_CACHE_DIR`, else `$XDG_CACHE_HOME/isochor`, else
//! `$HOME/.cache/isochor` (`tables/<fingerprint>-<molar mass bits>-<builder
//! version>.iztb`); a kept blob is used only when it decodes and names the
//! same mixture. Nothing is kept when no directory can be written.

use crate::Error;
use isochor_core::model::device::TableBuf;
use isochor_eos::fluid::Fluid;
use isochor_eos::model::{self, BuildSpec};
use serde::Serialize;
use std::path::PathBuf;
use std::time::Instant;

/// Version of the builder's output: bumped when the builder changes what it
/// makes, so kept tables of an older builder are rebuilt.
pub const BUILDER_VERSION: u32 = 1;

/// Where a mixture's device table came from.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct TableNote {
    /// `built` (this run) or `cached` (kept from an earlier run).
    pub source: String,
    /// The kept blob, if any.
    pub path: Option<String>,
    /// Seconds the build took (0 when cached).
    pub build_seconds: f64,
    /// Size of the blob, bytes.
    pub bytes: usize,
    /// Knots along temperature and pressure.
    pub knots: [usize; 2],
    /// Largest relative density error of the fixed-point table against
    /// GERG-2008 on the check grid (`isochor model check`).
    pub max_rel_error: f64,
    /// Highest temperature at which the mixture can condense, K (the table's
    /// single-phase boundary), if it can in the table's range.
    pub condensation_below_k: Option<f64>,
}

impl TableNote {
    /// One line for people.
    pub fn describe(&self) -> String {
        let how = if self.source == "cached" {
            format!(
                "reused from {}",
                self.path.as_deref().unwrap_or("the cache")
            )
        } else {
            format!("built in {:.1} s", self.build_seconds)
        };
        let cond = match self.condensation_below_k {
            Some(t) => format!(
                "; may condense below {}",
                isochor_eos::units::fmt_celsius(t)
            ),
            None => "; no condensation in its range".to_string(),
        };
        format!(
            "device table for this mixture: {how}, {} × {} knots, {} bytes, max density error {:.1e} vs GERG-2008{cond}",
            self.knots[0], self.knots[1], self.bytes, self.max_rel_error
        )
    }
}

fn cache_dir() -> Option<PathBuf> {
    let base = std::env::var_os("ISOCHOR_CACHE_DIR")
        .map(PathBuf::from)
        .or_else(|| std::env::var_os("XDG_CACHE_HOME").map(|d| PathBuf::from(d).join("isochor")))
        .or_else(|| std::env::var_os("HOME").map(|d| PathBuf::from(d).join(".cache/isochor")))?;
    Some(base.join("tables"))
}

/// The device table of `fluid` (a mixture): kept, else built (and kept).
pub fn table_for(fluid: &Fluid) -> Result<(TableBuf, TableNote), Error> {
    let gas = fluid.gas();
    let Some(m) = gas.mixture() else {
        return Err(Error::Invalid(
            "pure gases use their built-in tables".into(),
        ));
    };
    let file = cache_dir().map(|d| {
        d.join(format!(
            "{:08x}-{:08x}-v{BUILDER_VERSION}.iztb",
            m.fingerprint,
            m.molar_mass_kg_mol.to_bits()
        ))
    });
    let note = |t: &TableBuf,
                source: &str,
                secs: f64,
                path: Option<&PathBuf>|
     -> Result<TableNote, Error> {
        let check = model::check_fluid(&t.table(), fluid)?;
        Ok(TableNote {
            source: source.to_string(),
            path: path.map(|p| p.display().to_string()),
            build_seconds: secs,
            bytes: model::blob_len(t)?,
            knots: [t.temperature_knots.len(), t.pressure_knots.len()],
            max_rel_error: check.max_rel_error,
            condensation_below_k: t
                .boundary
                .as_ref()
                .map(|b| b.critical_temperature as f64 / 65_536.0),
        })
    };
    if let Some(path) = &file
        && let Ok(bytes) = std::fs::read(path)
        && let Ok(t) = TableBuf::from_blob(&bytes)
        && t.gas == gas
    {
        let n = note(&t, "cached", 0.0, Some(path))?;
        return Ok((t, n));
    }
    let start = Instant::now();
    let built = model::build(&BuildSpec::for_fluid(fluid.clone()))?;
    let secs = start.elapsed().as_secs_f64();
    let kept = file.as_ref().and_then(|path| {
        let blob = model::blob(&built.table).ok()?;
        std::fs::create_dir_all(path.parent()?).ok()?;
        std::fs::write(path, blob).ok()?;
        Some(path.clone())
    });
    let n = note(&built.table, "built", secs, kept.as_ref())?;
    Ok((built.table, n))
}
