//! How `isochor listen` shows what arrives: a readable live view, JSON lines
//! or CSV.

use isochor_core::Status;
use isochor_core::alarm::AlarmKind;
use isochor_core::fx;
use isochor_core::link::{
    AlarmEvent, AlarmTransition, BootReport, FromDevice, Outcome, ResetReason, Telemetry, Wire,
};
use serde::Serialize;

/// Telemetry in SI units, as JSON and CSV carry it. Content values are
/// `None` when the status says they are not valid.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TelemetryRow {
    /// Always "telemetry".
    #[serde(rename = "type")]
    pub kind: &'static str,
    /// Estimate counter.
    pub seq: u32,
    /// Device uptime, ms.
    pub uptime_ms: u64,
    /// Absolute pressure, Pa.
    pub pressure_pa: f64,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Density, kg/m³.
    pub density_kg_m3: Option<f64>,
    /// Mass, kg.
    pub mass_kg: Option<f64>,
    /// Standard volume, m³.
    pub standard_volume_m3: Option<f64>,
    /// Settled pressure, Pa.
    pub settled_pressure_pa: Option<f64>,
    /// Fill fraction (1 = rated content).
    pub fill_fraction: Option<f64>,
    /// Rate of change of mass, kg/h (negative while emptying); `None` until
    /// the device knows it.
    pub rate_kg_h: Option<f64>,
    /// Expanded uncertainty of the rate (k = 2), kg/h.
    pub rate_uncertainty_kg_h: Option<f64>,
    /// Time to empty, s.
    pub time_to_empty_s: Option<u32>,
    /// Earliest time to empty (rate plus its uncertainty), s.
    pub time_to_empty_earliest_s: Option<u32>,
    /// Latest time to empty (rate minus its uncertainty), s.
    pub time_to_empty_latest_s: Option<u32>,
    /// Expanded uncertainty of the mass (k = 2), kg.
    pub mass_uncertainty_kg: Option<f64>,
    /// Expanded uncertainty of the fill fraction (k = 2).
    pub fill_fraction_uncertainty: Option<f64>,
    /// The leak detector's latest loss, fraction of the rated content per
    /// day (positive: content lost); `None` until it has a verdict.
    pub leak_loss_per_day: Option<f64>,
    /// Why no time to empty is given (`no_content`, `learning`,
    /// `not_emptying`, `at_reserve`, `draw_changing`, `draw_cooling`; see
    /// docs/tracking.md); `None` while one is given.
    pub time_to_empty_withheld: Option<&'static str>,
    /// Status flag names.
    pub status: Vec<String>,
}

impl TelemetryRow {
    /// Converts a telemetry frame (exactly: every format fits an f64 within
    /// its resolution).
    pub fn from_frame(t: &Telemetry) -> TelemetryRow {
        let status = t.status();
        let valid = t.content_valid();
        let content = |v: f64| valid.then_some(v);
        TelemetryRow {
            kind: "telemetry",
            seq: t.seq,
            uptime_ms: t.uptime_ms,
            pressure_pa: fx::to_f64(t.pressure()),
            temperature_k: fx::to_f64(t.temperature()),
            density_kg_m3: content(fx::to_f64(t.density())),
            mass_kg: content(fx::to_f64(t.mass())),
            standard_volume_m3: content(fx::to_f64(t.standard_volume())),
            settled_pressure_pa: (valid && !status.contains(Status::SETTLED_TWO_PHASE))
                .then(|| fx::to_f64(t.settled_pressure())),
            fill_fraction: content(fx::to_f64(t.fill_fraction())),
            rate_kg_h: t.rate().map(fx::to_f64),
            rate_uncertainty_kg_h: t.rate_uncertainty().map(fx::to_f64),
            time_to_empty_s: t.time_to_empty_s,
            time_to_empty_earliest_s: t.time_to_empty_earliest_s,
            time_to_empty_latest_s: t.time_to_empty_latest_s,
            mass_uncertainty_kg: t.mass_uncertainty().and_then(|u| content(fx::to_f64(u))),
            fill_fraction_uncertainty: t
                .fill_fraction_uncertainty()
                .and_then(|u| content(fx::to_f64(u))),
            leak_loss_per_day: t.leak_loss_per_day().map(fx::to_f64),
            time_to_empty_withheld: t.time_to_empty_withheld().map(|r| r.name()),
            status: status_names(status),
        }
    }
}

/// Flag names of a status (unnamed bits as `bit_N`).
pub fn status_names(s: Status) -> Vec<String> {
    let mut v: Vec<String> = s.names().map(str::to_string).collect();
    let rest = s.unnamed_bits();
    for bit in 0..32 {
        if rest & (1 << bit) != 0 {
            v.push(format!("bit_{bit}"));
        }
    }
    v
}

/// An alarm event in JSON.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct AlarmRow {
    /// Always "alarm".
    #[serde(rename = "type")]
    pub kind: &'static str,
    /// Event counter.
    pub seq: u32,
    /// Device uptime, ms.
    pub uptime_ms: u64,
    /// Alarm code.
    pub alarm: u16,
    /// Alarm name (its status flag's name; `unknown` for codes this version
    /// does not know).
    pub name: &'static str,
    /// "raised" or "cleared".
    pub transition: &'static str,
    /// Mass at the event, kg.
    pub mass_kg: f64,
    /// Status flag names.
    pub status: Vec<String>,
}

impl AlarmRow {
    /// Converts an alarm event.
    pub fn from_event(a: &AlarmEvent) -> AlarmRow {
        AlarmRow {
            kind: "alarm",
            seq: a.seq,
            uptime_ms: a.uptime_ms,
            alarm: a.alarm,
            name: AlarmKind::from_code(a.alarm).map_or("unknown", AlarmKind::name),
            transition: match a.transition {
                AlarmTransition::Raised => "raised",
                AlarmTransition::Cleared => "cleared",
            },
            mass_kg: fx::to_f64(a.mass()),
            status: status_names(a.status()),
        }
    }
}

/// The CSV header of telemetry rows.
pub const CSV_HEADER: &str = "seq,uptime_ms,pressure_pa,temperature_k,density_kg_m3,mass_kg,\
standard_volume_m3,settled_pressure_pa,fill_fraction,rate_kg_h,time_to_empty_s,\
mass_uncertainty_kg,status,rate_uncertainty_kg_h,time_to_empty_earliest_s,\
time_to_empty_latest_s,fill_fraction_uncertainty,leak_loss_per_day,time_to_empty_withheld";

fn opt<T: ToString>(v: Option<T>) -> String {
    v.map(|x| x.to_string()).unwrap_or_default()
}

/// One CSV line (no newline); flags joined with `|`.
pub fn csv_line(r: &TelemetryRow) -> String {
    format!(
        "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
        r.seq,
        r.uptime_ms,
        r.pressure_pa,
        r.temperature_k,
        opt(r.density_kg_m3),
        opt(r.mass_kg),
        opt(r.standard_volume_m3),
        opt(r.settled_pressure_pa),
        opt(r.fill_fraction),
        opt(r.rate_kg_h),
        opt(r.time_to_empty_s),
        opt(r.mass_uncertainty_kg),
        r.status.join("|"),
        opt(r.rate_uncertainty_kg_h),
        opt(r.time_to_empty_earliest_s),
        opt(r.time_to_empty_latest_s),
        opt(r.fill_fraction_uncertainty),
        opt(r.leak_loss_per_day),
        r.time_to_empty_withheld.unwrap_or_default(),
    )
}

fn fmt_opt(v: Option<f64>, scale: f64, prec: usize, unit: &str) -> String {
    match v {
        Some(x) => format!("{:.*} {unit}", prec, x * scale),
        None => "n/a".to_string(),
    }
}

/// Time as h:mm:ss.
fn hms(s: u32) -> String {
    format!("{}:{:02}:{:02}", s / 3600, s / 60 % 60, s % 60)
}

/// One readable line for a telemetry frame.
pub fn text_telemetry(r: &TelemetryRow) -> String {
    let status = if r.status.is_empty() {
        "ok".to_string()
    } else {
        r.status.join(",")
    };
    format!(
        "#{:<6} {:>10.3} s  p {:>9} bar abs  T {:>7} °C  mass {:>12}  Vstd {:>12}  fill {:>8}  \
         settled {:>15}  rate {:>13}  empty in {:>9}  ±{:>10}  [{status}]",
        r.seq,
        r.uptime_ms as f64 / 1000.0,
        isochor_eos::units::fmt_decimal(r.pressure_pa / 1e5, 3),
        isochor_eos::units::fmt_decimal(
            r.temperature_k - isochor_core::constants::ZERO_CELSIUS_K,
            2
        ),
        fmt_opt(r.mass_kg, 1.0, 4, "kg"),
        fmt_opt(r.standard_volume_m3, 1.0, 3, "m³"),
        fmt_opt(r.fill_fraction, 100.0, 1, "%"),
        fmt_opt(r.settled_pressure_pa, 1e-5, 2, "bar abs"),
        r.rate_kg_h
            .map_or_else(|| "n/a".to_string(), |x| format!("{x:+.4} kg/h")),
        r.time_to_empty_s
            .map(hms)
            .unwrap_or_else(|| match r.time_to_empty_withheld {
                Some(why) => format!("n/a ({why})"),
                None => "n/a".into(),
            }),
        fmt_opt(r.mass_uncertainty_kg, 1.0, 4, "kg"),
    )
}

/// One readable line for any other message.
pub fn text_other(m: &FromDevice) -> String {
    match m {
        FromDevice::Alarm(a) => {
            let r = AlarmRow::from_event(a);
            format!(
                "ALARM {} {} {} (code {}) at {:.3} s, mass {:.4} kg [{}]",
                r.seq,
                r.transition.to_uppercase(),
                r.name,
                r.alarm,
                r.uptime_ms as f64 / 1000.0,
                r.mass_kg,
                r.status.join(",")
            )
        }
        FromDevice::Boot(b) => format!(
            "device serial {} started (firmware {}.{}.{}): {}",
            b.serial,
            b.firmware_version[0],
            b.firmware_version[1],
            b.firmware_version[2],
            boot_text(&b.report)
        ),
        FromDevice::Reply(r) => match &r.outcome {
            Outcome::Refused(x) => format!(
                "reply {}: refused: {}",
                r.tag,
                super::client::refusal_text(x)
            ),
            other => format!("reply {}: {other:?}", r.tag),
        },
        other => format!("{} message", other.kind().name()),
    }
}

/// A sentence for a start report.
pub fn boot_text(b: &BootReport) -> String {
    let reason = reset_reason_name(b.reason);
    let mut t = format!("{reason}, start {} since power-on", b.boots);
    if b.fault_line != 0 || !b.fault_file.is_empty() {
        t.push_str(&format!(", fault at {}:{}", b.fault_file, b.fault_line));
    }
    t
}

/// Stable snake_case name of a reset reason.
pub fn reset_reason_name(r: ResetReason) -> &'static str {
    match r {
        ResetReason::PowerOn => "power_on",
        ResetReason::Requested => "requested",
        ResetReason::Panic => "panic",
        ResetReason::Watchdog => "watchdog",
        ResetReason::HardFault => "hard_fault",
        ResetReason::Unknown => "unknown",
    }
}

/// Output format of `isochor listen`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum ListenFormat {
    /// A readable live view with units and cautions.
    #[default]
    Text,
    /// One JSON object per line (telemetry, alarm, bad_frame, other).
    Jsonl,
    /// Telemetry as CSV with a header line.
    Csv,
}

/// Shows what arrives on `link` until the stream ends, `limit` telemetry and
/// alarm messages were shown, or `idle` passes without any byte.
pub fn listen<T: super::Transport, W: std::io::Write>(
    link: &mut super::Link<T>,
    format: ListenFormat,
    limit: Option<u64>,
    idle: Option<std::time::Duration>,
    out: &mut W,
) -> Result<super::transport::LinkStats, crate::Error> {
    use super::LinkEvent;
    let io = |e: std::io::Error| crate::Error::Output(e.to_string());
    let json = |v: &dyn erased::Json| v.line();
    match format {
        ListenFormat::Text => {
            writeln!(out, "{}", isochor_eos::safety::GENERAL).map_err(io)?;
            writeln!(out, "listening (Ctrl-C to stop)").map_err(io)?;
        }
        ListenFormat::Csv => writeln!(out, "{CSV_HEADER}").map_err(io)?,
        ListenFormat::Jsonl => {}
    }
    let mut shown = 0u64;
    let step = std::time::Duration::from_millis(200);
    let mut quiet = std::time::Duration::ZERO;
    while limit.is_none_or(|l| shown < l) {
        let event = link.next_event(step)?;
        let Some(event) = event else {
            if link.closed() {
                break;
            }
            quiet += step;
            if idle.is_some_and(|i| quiet >= i) {
                break;
            }
            continue;
        };
        quiet = std::time::Duration::ZERO;
        let line = match (&event, format) {
            (LinkEvent::Message(FromDevice::Telemetry(t)), f) => {
                shown += 1;
                let row = TelemetryRow::from_frame(t);
                match f {
                    ListenFormat::Text => Some(text_telemetry(&row)),
                    ListenFormat::Jsonl => Some(json(&row)?),
                    ListenFormat::Csv => Some(csv_line(&row)),
                }
            }
            (LinkEvent::Message(FromDevice::Alarm(a)), ListenFormat::Jsonl) => {
                shown += 1;
                Some(json(&AlarmRow::from_event(a))?)
            }
            (LinkEvent::Message(m), ListenFormat::Text) => {
                if matches!(m, FromDevice::Alarm(_)) {
                    shown += 1;
                }
                Some(text_other(m))
            }
            (LinkEvent::Message(FromDevice::Boot(b)), ListenFormat::Jsonl) => {
                Some(json(&serde_json::json!({
                    "type": "boot",
                    "serial": b.serial,
                    "firmware_version": format!("{}.{}.{}", b.firmware_version[0], b.firmware_version[1], b.firmware_version[2]),
                    "reason": reset_reason_name(b.report.reason),
                    "boots": b.report.boots,
                    "fault_file": b.report.fault_file.as_str(),
                    "fault_line": b.report.fault_line,
                }))?)
            }
            (LinkEvent::Message(m), ListenFormat::Jsonl) => Some(json(&serde_json::json!({
                "type": m.kind().name(),
            }))?),
            (LinkEvent::BadFrame(e), ListenFormat::Text) => Some(format!("! bad frame: {e}")),
            (LinkEvent::Overfull, ListenFormat::Text) => Some("! frame too long, dropped".into()),
            (LinkEvent::BadFrame(e), ListenFormat::Jsonl) => Some(json(&serde_json::json!({
                "type": "bad_frame", "error": e.to_string(),
            }))?),
            (LinkEvent::Overfull, ListenFormat::Jsonl) => Some(json(&serde_json::json!({
                "type": "bad_frame", "error": "frame too long",
            }))?),
            (_, ListenFormat::Csv) => None,
        };
        if let Some(line) = line {
            writeln!(out, "{line}").map_err(io)?;
            out.flush().map_err(io)?;
        }
    }
    let stats = link.stats();
    if format == ListenFormat::Text {
        writeln!(
            out,
            "{} frames, {} bad frames, {} too long",
            stats.frames, stats.bad_frames, stats.overfull
        )
        .map_err(io)?;
    }
    Ok(stats)
}

mod erased {
    /// Serialises any row as one JSON line.
    pub trait Json {
        fn line(&self) -> Result<String, crate::Error>;
    }
    impl<T: serde::Serialize> Json for T {
        fn line(&self) -> Result<String, crate::Error> {
            serde_json::to_string(self).map_err(|e| crate::Error::Output(e.to_string()))
        }
    }
}
