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
u_mass_kg,fill_fraction,rate_kg_h,true_outflow_kg_h,time_to_empty_s,loss_fraction_per_day,status,time_to_empty_withheld";
// `status`: the flag names joined by `|` (empty: ok).

fn opt(v: Option<f64>) -> String {
    v.map(|x| format!("{x}")).unwrap_or_default()
}

/// One CSV row (empty fields where the gauge has no value).
pub fn csv_row(p: &TracePoint) -> String {
    format!(
        "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
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
        opt(p.loss_fraction_per_day),
        Status::from_bits(p.status)
            .names()
            .collect::<Vec<_>>()
            .join("|"),
        p.time_to_empty_withheld.unwrap_or_default()
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

/// A signed percentage (`+0.123 %`).
fn spct(x: f64, digits: usize) -> String {
    format!("{:+.digits$} %", x * 100.0)
}

/// The instrument under test, as lines for people.
pub fn instrument_lines(s: &Summary) -> Vec<String> {
    let i = &s.instrument;
    let mut v = vec![if i.drawn {
        format!(
            "the instrument: drawn from the gauge's declared uncertainties (seed {}; another \
             seed, another instrument), plus the scenario's stated errors",
            i.seed
        )
    } else {
        "the instrument: nominal (only the scenario's stated errors)".to_string()
    }];
    let p_drift =
        if i.pressure_offset_drift_pa_per_year != 0.0 || i.pressure_span_drift_per_year != 0.0 {
            format!(
                ", drift {:+.3} bar/yr and {}/yr",
                i.pressure_offset_drift_pa_per_year / BAR_PA,
                spct(i.pressure_span_drift_per_year, 3)
            )
        } else {
            String::new()
        };
    v.push(format!(
        "  pressure sensor: offset {:+.3} bar, span error {}{p_drift}, noise {:.3} bar",
        i.pressure_offset_pa / BAR_PA,
        spct(i.pressure_span_error, 3),
        i.pressure_noise_pa / BAR_PA
    ));
    let t_drift = if i.temperature_drift_k_per_year != 0.0 {
        format!(", drift {:+.3} K/yr", i.temperature_drift_k_per_year)
    } else {
        String::new()
    };
    v.push(format!(
        "  temperature sensor: offset {:+.3} K, gain error {}{t_drift}, noise {:.3} K; on the {}, \
         own time constant {:.0} s (the gauge declares a lag of {:.0} min)",
        i.temperature_offset_k,
        spct(i.temperature_gain_error, 3),
        i.temperature_noise_k,
        i.temperature_mount,
        i.temperature_time_constant_s,
        i.temperature_lag_declared_s / 60.0
    ));
    v.push(format!(
        "  water capacity told to the gauge: {:.3} L for a true {:.3} L ({})",
        i.capacity_told_m3 * 1e3,
        i.capacity_true_m3 * 1e3,
        spct(i.capacity_error_fraction, 3)
    ));
    v
}

/// One line per headline score saying how to read it: what is good, what
/// is expected of this instrument and scenario. Keys are the score rows of
/// [`render_text`].
pub fn readings(s: &Summary) -> Vec<(&'static str, String)> {
    let mut v = Vec::new();
    let u = s.median_relative_uncertainty;
    if let (Some(max), Some(u)) = (s.max_abs_error_fraction, u) {
        v.push((
            "max",
            format!(
                "the largest error of a sample the gauge vouched for; {} its median k = 2 band \
                 U(m)/m of {}",
                if max <= u { "inside" } else { "beyond" },
                pct(Some(u), 2)
            ),
        ));
    }
    if let (Some(mean), Some(b)) = (s.mean_error_fraction, s.expected_bias) {
        v.push((
            "mean",
            format!(
                "this instrument's errors explain {} (capacity {}, pressure {}, temperature {}); \
                 the gauge's own part is {} (sensor lag, gas model, arithmetic)",
                spct(b.total_fraction, 2),
                spct(b.capacity_fraction, 2),
                spct(b.pressure_fraction, 2),
                spct(b.temperature_fraction, 2),
                spct(mean - b.total_fraction, 3)
            ),
        ));
    }
    if let (Some(rms), Some(mean)) = (s.rms_error_fraction, s.mean_error_fraction) {
        let scatter = (rms * rms - mean * mean).max(0.0).sqrt();
        v.push((
            "rms",
            format!(
                "the scatter around the bias is {}: {}",
                pct(Some(scatter), 3),
                if scatter < mean.abs() {
                    "the bias dominates, a constant offset of this instrument"
                } else {
                    "noise, lag and the day/night swing dominate"
                }
            ),
        ));
    }
    if s.max_abs_error_fraction_all.is_some() {
        v.push((
            "all",
            "over every sample with an estimate, also those the gauge flags and is not judged on \
             (settling after a fast fill or draw, sensor faults, below the reserve): never below \
             the judged maximum, far above it during a fast fill"
                .into(),
        ));
    }
    if let Some(c) = s.uncertainty_coverage {
        v.push((
            "coverage",
            format!(
                "k = 2 promises 95 % over many instruments; {}",
                if c >= 0.95 {
                    "this one's errors sit inside its band"
                } else {
                    "this one's errors add up beyond its band for part of the run (one draw \
                     from the declaration; a population of them is what the 95 % is about)"
                }
            ),
        ));
    }
    if let (Some(u), Some(mean)) = (u, s.mean_error_fraction) {
        v.push((
            "u",
            format!(
                "the gauge's own claim from its declared uncertainties; the bias is {:.0} % of it",
                100.0 * mean.abs() / u.max(1e-12)
            ),
        ));
    }
    if let Some(start) = s.leak_started_s {
        let rate = s
            .leak_loss_per_day
            .map(|r| format!("a leak of {} of the content per day", pct(Some(r), 2)))
            .unwrap_or_else(|| "a leak".into());
        v.push((
            "leak",
            format!(
                "{rate} from {}: the detector compares the last two days' means of the \
                 temperature-compensated content, hourly; stated: 1 %/day within 24 h, \
                 0.2 %/day within 48 h, below 0.1 %/day not flagged",
                fmt_duration(start)
            ),
        ));
    }
    v.push((
        "false",
        if s.false_alarms == 0 {
            "every raise was checked against the truth; 0 is the goal".into()
        } else {
            "raises the truth does not justify, marked FALSE ALARM in the timeline below".into()
        },
    ));
    if let (Some(q), Some(t), Some(ru)) = (
        s.time_to_empty_outflow_kg_h,
        s.time_to_empty_true_median_s,
        s.time_to_empty_rate_uncertainty,
    ) {
        v.push((
            "tte",
            format!(
                "judged where the true outflow was steady: median {q:.4} kg/h, {} to the \
                 reserve{}; the gauge stated its rate to ±{} (k = 2) there, and a time to \
                 empty is no better than its rate",
                fmt_duration(t),
                if s.leak_started_s.is_some() && s.time_to_empty_minutes > 0 && s.draws == 0 {
                    " (the leak alone: no draw in this scenario)"
                } else {
                    ""
                },
                pct(Some(ru), 0)
            ),
        ));
    }
    v
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
    let reads = readings(s);
    let note = |o: &mut String, key: &str| {
        for (_, r) in reads.iter().filter(|(k, _)| *k == key) {
            let _ = writeln!(o, "      reading: {r}");
        }
    };
    for line in instrument_lines(s) {
        let _ = writeln!(o, "  {line}");
    }
    let _ = writeln!(o);
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
    note(&mut o, "max");
    row(
        &mut o,
        "content error, mean (bias)",
        pct(s.mean_error_fraction, 3),
    );
    note(&mut o, "mean");
    row(&mut o, "content error, rms", pct(s.rms_error_fraction, 3));
    note(&mut o, "rms");
    row(
        &mut o,
        "content error, max |e| (every sample)",
        pct(s.max_abs_error_fraction_all, 3),
    );
    note(&mut o, "all");
    row(
        &mut o,
        "uncertainty (k = 2) holds the truth",
        pct(s.uncertainty_coverage, 1),
    );
    note(&mut o, "coverage");
    row(
        &mut o,
        "uncertainty (k = 2), median U(m)/m",
        pct(s.median_relative_uncertainty, 2),
    );
    note(&mut o, "u");
    row(
        &mut o,
        "largest |error| / U(m) (judged)",
        s.max_error_over_uncertainty
            .map_or_else(|| "—".to_string(), |v| format!("{v:.2}")),
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
            (Some(st), None) if s.duration_s - st < 48.0 * 3600.0 => format!(
                "began at {}, not detected in the {} the run went on (the stated \
                 detection time is up to 48 h)",
                fmt_duration(st),
                fmt_duration(s.duration_s - st)
            ),
            (Some(st), None) => format!("began at {}, NOT detected", fmt_duration(st)),
        },
    );
    note(&mut o, "leak");
    row(&mut o, "false alarms", format!("{}", s.false_alarms));
    note(&mut o, "false");
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
    note(&mut o, "tte");
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
