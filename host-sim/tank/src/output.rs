//! What a run writes: the summary (a table for people, JSON for programs)
//! and the time series (CSV and JSON lines, one row per trace point).

use super::run::{RunResult, Summary, TracePoint};
use crate::Error;
use isochor_core::Status;
use isochor_core::constants::{BAR_PA, ZERO_CELSIUS_K};
use isochor_eos::safety;
use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};

/// The CSV header (SI units in the column names).
pub const CSV_HEADER: &str = "t_s,pressure_true_pa,pressure_read_pa,gas_temperature_k,\
wall_temperature_k,ambient_temperature_k,temperature_read_k,mass_true_kg,mass_gauge_kg,\
u_mass_kg,fill_fraction,rate_kg_h,true_outflow_kg_h,time_to_empty_s,loss_per_day,status";
// `status`: the flag names joined by `|` (empty: ok).

fn opt(v: Option<f64>) -> String {
    v.map(|x| format!("{x}")).unwrap_or_default()
}

/// One CSV row (empty fields where the gauge has no value).
pub fn csv_row(p: &TracePoint) -> String {
    format!(
        "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
        p.t_s,
        p.pressure_true_pa,
        opt(p.pressure_read_pa),
        p.gas_temperature_k,
        p.wall_temperature_k,
        p.ambient_temperature_k,
        opt(p.temperature_read_k),
        p.mass_true_kg,
        opt(p.mass_gauge_kg),
        opt(p.u_mass_kg),
        opt(p.fill_fraction),
        opt(p.rate_kg_h),
        p.true_outflow_kg_h,
        opt(p.time_to_empty_s),
        opt(p.loss_per_day),
        Status::from_bits(p.status)
            .names()
            .collect::<Vec<_>>()
            .join("|")
    )
}

fn file_err(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::File {
        path: path.display().to_string(),
        reason: e.to_string(),
    }
}

/// Writes the trace as CSV.
pub fn write_csv(path: &Path, trace: &[TracePoint]) -> Result<(), Error> {
    let f = std::fs::File::create(path).map_err(|e| file_err(path, e))?;
    let mut w = std::io::BufWriter::new(f);
    writeln!(w, "{CSV_HEADER}").map_err(|e| file_err(path, e))?;
    for p in trace {
        writeln!(w, "{}", csv_row(p)).map_err(|e| file_err(path, e))?;
    }
    w.flush().map_err(|e| file_err(path, e))
}

/// Writes the trace as JSON lines (one object per point, the CSV's fields,
/// `null` where the gauge has no value; `status` as flag names).
pub fn write_jsonl(path: &Path, trace: &[TracePoint]) -> Result<(), Error> {
    let f = std::fs::File::create(path).map_err(|e| file_err(path, e))?;
    let mut w = std::io::BufWriter::new(f);
    for p in trace {
        let mut v = serde_json::to_value(p).map_err(|e| Error::Output(e.to_string()))?;
        v["status"] = serde_json::json!(Status::from_bits(p.status).names().collect::<Vec<_>>());
        writeln!(w, "{v}").map_err(|e| file_err(path, e))?;
    }
    w.flush().map_err(|e| file_err(path, e))
}

/// The files a run wrote.
#[derive(Clone, Debug, Default, serde::Serialize)]
pub struct Written {
    /// Summary as JSON.
    pub summary_json: Option<PathBuf>,
    /// Time series as CSV.
    pub csv: Option<PathBuf>,
    /// Time series as JSON lines.
    pub jsonl: Option<PathBuf>,
    /// Plots (PNG and SVG).
    pub plots: Vec<PathBuf>,
}

/// Writes the summary JSON, the series and the plots of a run into `dir`
/// (created if needed), named after the scenario.
pub fn write_all(dir: &Path, r: &RunResult, plots: bool) -> Result<Written, Error> {
    std::fs::create_dir_all(dir).map_err(|e| file_err(dir, e))?;
    let base = &r.summary.scenario;
    let mut w = Written::default();
    let sj = dir.join(format!("{base}.summary.json"));
    let text =
        serde_json::to_string_pretty(&r.summary).map_err(|e| Error::Output(e.to_string()))?;
    std::fs::write(&sj, text + "\n").map_err(|e| file_err(&sj, e))?;
    w.summary_json = Some(sj);
    let csv = dir.join(format!("{base}.csv"));
    write_csv(&csv, &r.trace)?;
    w.csv = Some(csv);
    let jl = dir.join(format!("{base}.jsonl"));
    write_jsonl(&jl, &r.trace)?;
    w.jsonl = Some(jl);
    if plots {
        w.plots = plot_files(dir, r)?;
    }
    Ok(w)
}

/// The plots of a run (the `plots` feature).
#[cfg(feature = "plots")]
fn plot_files(dir: &Path, r: &RunResult) -> Result<Vec<PathBuf>, Error> {
    super::plot::write_plots(dir, r)
}

/// Without the `plots` feature a request for plots is refused.
#[cfg(not(feature = "plots"))]
fn plot_files(_dir: &Path, _r: &RunResult) -> Result<Vec<PathBuf>, Error> {
    Err(Error::Invalid(
        "plots need the `plots` feature of isochor-tank".into(),
    ))
}

fn pct(v: Option<f64>, digits: usize) -> String {
    v.map(|x| format!("{:.digits$} %", x * 100.0))
        .unwrap_or_else(|| "—".into())
}

fn fmt_duration(s: f64) -> String {
    if s >= 86_400.0 {
        format!("{:.2} d", s / 86_400.0)
    } else if s >= 3600.0 {
        format!("{:.2} h", s / 3600.0)
    } else if s >= 60.0 {
        format!("{:.1} min", s / 60.0)
    } else {
        format!("{s:.0} s")
    }
}

/// The human-readable summary, with the cautions.
pub fn render_text(s: &Summary, written: Option<&Written>) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "isochor simulation: {} — {}", s.scenario, s.title);
    let _ = writeln!(
        o,
        "gauge: {}, {} gas model; {} simulated, {} samples in {:.2} s ({:.0} samples/s); physics {} steps\n",
        match s.backend.strip_prefix("firmware-") {
            Some(board) => format!("reference firmware on {board} (QEMU)"),
            None => format!("{} core", s.backend),
        },
        s.model,
        fmt_duration(s.duration_s),
        s.samples,
        s.wall_time_s,
        s.samples_per_second,
        s.physics_steps
    );
    let row = |o: &mut String, k: &str, v: String| {
        let _ = writeln!(o, "  {k:<44} {v}");
    };
    row(
        &mut o,
        "true content, start → end",
        format!(
            "{:.4} kg → {:.4} kg (rated {:.4} kg)",
            s.mass_start_kg, s.mass_end_kg, s.rated_mass_true_kg
        ),
    );
    row(
        &mut o,
        "true gas temperature, min … max",
        format!(
            "{:.2} … {:.2} °C",
            s.gas_temperature_min_k - ZERO_CELSIUS_K,
            s.gas_temperature_max_k - ZERO_CELSIUS_K
        ),
    );
    row(
        &mut o,
        "true pressure, max",
        format!("{:.2} bar abs", s.pressure_max_pa / BAR_PA),
    );
    row(
        &mut o,
        "samples judged (settled, no fault, > reserve)",
        format!("{} of {}", s.judged_samples, s.samples),
    );
    row(
        &mut o,
        "content error, max |e| (judged)",
        pct(s.max_abs_error_fraction, 3),
    );
    row(
        &mut o,
        "content error, mean (bias)",
        pct(s.mean_error_fraction, 3),
    );
    row(&mut o, "content error, rms", pct(s.rms_error_fraction, 3));
    row(
        &mut o,
        "content error, max |e| (every sample)",
        pct(s.max_abs_error_fraction_all, 3),
    );
    row(
        &mut o,
        "uncertainty (k = 2) holds the truth",
        pct(s.uncertainty_coverage, 1),
    );
    row(
        &mut o,
        "uncertainty (k = 2), median U(m)/m",
        pct(s.median_relative_uncertainty, 2),
    );
    row(
        &mut o,
        "leak",
        match (s.leak_started_s, s.leak_detected_after_s) {
            (None, _) => "none simulated".into(),
            (Some(st), Some(d)) => format!(
                "began at {}, detected after {}",
                fmt_duration(st),
                fmt_duration(d)
            ),
            (Some(st), None) => format!("began at {}, NOT detected", fmt_duration(st)),
        },
    );
    row(&mut o, "false alarms", format!("{}", s.false_alarms));
    row(
        &mut o,
        "time to empty, median / max error",
        if s.time_to_empty_minutes > 0 {
            format!(
                "{} / {} over {} min; bounds hold the truth {}",
                pct(s.time_to_empty_median_error, 1),
                pct(s.time_to_empty_max_error, 1),
                s.time_to_empty_minutes,
                pct(s.time_to_empty_coverage, 1)
            )
        } else {
            "not judged (no steady draw in the run)".into()
        },
    );
    let _ = writeln!(o, "\n  alarm timeline:");
    if s.alarms.is_empty() {
        let _ = writeln!(o, "    (no alarm)");
    }
    let shown = 40;
    for e in s.alarms.iter().take(shown) {
        let mark = match e.justified {
            Some(true) => "",
            Some(false) => "  FALSE ALARM",
            None => "",
        };
        let _ = writeln!(
            o,
            "    {:>10}  {:<18} {}{}",
            fmt_duration(e.t_s),
            e.alarm,
            e.change,
            mark
        );
    }
    if s.alarms.len() > shown {
        let _ = writeln!(
            o,
            "    … {} more in the summary JSON",
            s.alarms.len() - shown
        );
    }
    if let Some(w) = written {
        let _ = writeln!(o, "\n  files:");
        for p in w
            .summary_json
            .iter()
            .chain(w.csv.iter())
            .chain(w.jsonl.iter())
            .chain(w.plots.iter())
        {
            let _ = writeln!(o, "    {}", p.display());
        }
    }
    let _ = writeln!(o);
    if let Ok(g) = isochor_eos::composition::GasSpec::parse(&s.gas) {
        for line in safety::lines_for(&g) {
            let _ = writeln!(o, "{line}");
        }
    }
    o
}
