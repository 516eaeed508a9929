//! The wire messages of a sample: telemetry and alarm events built from
//! the pipeline's outputs (the link itself knows nothing of the tracker).

use crate::alarm::AlarmEvent as Event;
use crate::content::fixed::Content;
use crate::link::{AlarmEvent, AlarmTransition, Telemetry};
use crate::time::Millis;
use crate::track::fixed::TrackFx;
use crate::{Status, fx};

/// Whole seconds of a span, saturating at `u32::MAX`.
fn seconds(ms: Millis) -> u32 {
    u32::try_from(ms.0 / 1000).unwrap_or(u32::MAX)
}

/// A telemetry frame carrying a content estimate alone: rate, time to empty
/// and uncertainties unknown.
pub fn from_content(seq: u32, uptime_ms: u64, c: &Content) -> Telemetry {
    Telemetry {
        seq,
        uptime_ms,
        pressure_pa: c.pressure_pa.to_bits(),
        temperature_k: c.temperature_k.to_bits(),
        density_kg_m3: c.density_kg_m3.to_bits(),
        mass_kg: c.mass_kg.to_bits(),
        standard_volume_m3: c.standard_volume_m3.to_bits(),
        settled_pressure_pa: c.settled_pressure_pa.to_bits(),
        fill_fraction: c.fill_fraction.to_bits(),
        status: c.status.bits(),
        ..Telemetry::default()
    }
}

/// The telemetry of one tracker output: content, rate (as a change of the
/// mass: negative while emptying), time to empty with its bounds,
/// uncertainties, the leak detector's loss per day and the status, with
/// `device` (configuration, storage, link flags) added. Before the first
/// usable sample the content fields are zero and only the status speaks.
pub fn from_track(seq: u32, t: &TrackFx, device: Status) -> Telemetry {
    let mut out = match &t.content {
        Some(c) => from_content(seq, t.at.as_millis(), c),
        None => Telemetry {
            seq,
            uptime_ms: t.at.as_millis(),
            ..Telemetry::default()
        },
    };
    if let Some(r) = &t.rate {
        out.rate_kg_h = Some(r.kg_h.to_bits().saturating_neg());
        out.rate_uncertainty_kg_h = Some(r.u_kg_h.to_bits());
    }
    out.time_to_empty_withheld = t.time_to_empty_withheld.map(|r| r.code());
    if let Some(tte) = &t.time_to_empty {
        out.time_to_empty_s = Some(seconds(tte.expected));
        out.time_to_empty_earliest_s = Some(seconds(tte.earliest));
        out.time_to_empty_latest_s = tte.latest.map(seconds);
    }
    if let Some(u) = &t.uncertainty {
        out.mass_uncertainty_kg = Some(u.mass_kg.to_bits());
        out.fill_fraction_uncertainty = Some(u.fill_fraction.to_bits());
    }
    if let Some(l) = &t.leak {
        out.leak_loss_per_day = Some(l.loss_per_day.to_bits());
    }
    out.status = (t.status | device).bits();
    out
}

/// The telemetry of a sample the gauge could not estimate (no usable
/// configuration): the time and the status alone.
pub fn status_only(seq: u32, uptime_ms: u64, status: Status) -> Telemetry {
    Telemetry {
        seq,
        uptime_ms,
        status: status.bits(),
        ..Telemetry::default()
    }
}

/// The wire form of an alarm event.
pub fn alarm_event(seq: u32, e: &Event, status: Status, mass: fx::Mass) -> AlarmEvent {
    AlarmEvent {
        seq,
        uptime_ms: e.at.as_millis(),
        alarm: e.kind as u16,
        transition: if e.raised {
            AlarmTransition::Raised
        } else {
            AlarmTransition::Cleared
        },
        status: status.bits(),
        mass_kg: mass.to_bits(),
    }
}
