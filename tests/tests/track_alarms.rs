//! Level alarms through the whole tracker, both paths: thresholds, hysteresis,
//! debounce and raise/clear events; the over-pressure rules (rated content at
//! the present temperature, 5/4 of service pressure); sensor faults. Short
//! hand-made series at 1 Hz.

use isochor_core::alarm::{AlarmEvent, AlarmKind};
use isochor_core::model::Ideal;
use isochor_core::time::Instant;
use isochor_core::track::fixed::{TrackConfigFx, Tracker as TrackerFx};
use isochor_core::track::float::{TrackConfig, Tracker};
use isochor_core::uncertainty::float::UncertaintyConfig;
use isochor_core::{Gas, Setup, SetupFx, Status, Tank, content, fx};

/// Runs both paths over `(seconds, pressure Pa, temperature K, sensor flags)`
/// samples; returns the fixed path's events (asserting the float path's are
/// the same), the last rated-pressure-now of each path and the fixed path's
/// status word per sample.
fn run(samples: &[(u64, f64, f64, Status)]) -> (Vec<AlarmEvent>, f64, f64, Vec<Status>) {
    let tank = Tank::new(0.05, 200e5);
    let setup = SetupFx::from_f64(&Setup::new(Gas::Nitrogen, tank)).unwrap();
    let cfg = TrackConfigFx::from_f64(&TrackConfig::for_tank(
        &tank,
        UncertaintyConfig::example(300e5),
    ))
    .unwrap();
    let mut a = TrackerFx::new(
        content::fixed::Estimator::new(setup, Ideal::new(Gas::Nitrogen)).unwrap(),
        cfg,
    )
    .unwrap();
    let mut b = Tracker::new(
        content::float::Estimator::new(setup.to_real(), Ideal::new(Gas::Nitrogen)).unwrap(),
        cfg.to_real(),
    )
    .unwrap();
    let (mut ea, mut eb) = (Vec::new(), Vec::new());
    let (mut pa, mut pb) = (0.0, 0.0);
    let mut statuses = Vec::new();
    for &(s, p, t, flags) in samples {
        let (pf, tf) = (fx::Pressure::from_num(p), fx::Temperature::from_num(t));
        let ra = a.update(Instant(s * 1000), pf, tf, flags);
        let rb = b
            .update(Instant(s * 1000), fx::to_f64(pf), fx::to_f64(tf), flags)
            .unwrap();
        ea.extend(ra.events.iter());
        eb.extend(rb.events.iter());
        statuses.push(ra.status);
        assert_eq!(
            ra.status & Status::TRACKING_RANGE,
            rb.status & Status::TRACKING_RANGE
        );
        if let (Some(x), Some(y)) = (ra.rated_pressure_now_pa, rb.rated_pressure_now_pa) {
            pa = fx::to_f64(x);
            pb = y;
        }
    }
    assert_eq!(ea, eb, "the two paths raise the same events");
    (ea, pa, pb, statuses)
}

fn ev(kind: AlarmKind, raised: bool, s: u64) -> AlarmEvent {
    AlarmEvent {
        kind,
        raised,
        at: Instant(s * 1000),
    }
}

#[test]
fn over_temperature_with_debounce_and_hysteresis() {
    // 180 bar; 20 °C, then 55 °C (above the 50 °C limit) from 100 s to 300 s,
    // then 49 °C (inside the 2 K band) to 400 s, then 45 °C.
    let mut s = Vec::new();
    for i in 0..600u64 {
        let c = match i {
            0..100 => 20.0,
            100..300 => 55.0,
            300..400 => 49.0,
            _ => 45.0,
        };
        // Pressure follows temperature at constant content.
        let t = 273.15 + c;
        s.push((i, 180e5 * t / 293.15, t, Status::OK));
    }
    let (events, _, _, _) = run(&s);
    // Median of three (one sample) and smoothing (τ 4 s, α = 0.2 at 1 Hz)
    // cross 50 °C about 10 s after the step; raised 10 s later; the clear
    // condition (< 48 °C) holds from about 403 s, for 30 s. Pressure and
    // temperature jump together at constant content: no fast fill or draw,
    // so no `not_settled` either.
    assert_eq!(events.len(), 2, "{events:?}");
    let up = events[0];
    assert!(up.kind == AlarmKind::OverTemperature && up.raised);
    assert!((118..=124).contains(&(up.at.0 / 1000)), "{up:?}");
    let down = events[1];
    assert!(down.kind == AlarmKind::OverTemperature && !down.raised);
    assert!((430..=436).contains(&(down.at.0 / 1000)), "{down:?}");
}

#[test]
fn over_pressure_by_content_and_by_five_quarters_of_service_pressure() {
    let t15 = 288.15;
    let mut s = Vec::new();
    // Full at 15 °C, then warmed to 140 °C at constant content: the pressure
    // (≈ 287 bar) passes 5/4 of the service pressure (≈ 250 bar) although the
    // content is the rated content.
    for i in 0..100u64 {
        s.push((i, 200e5, t15, Status::OK));
    }
    for i in 100..200u64 {
        let t = 413.15;
        s.push((i, 200e5 * t / t15, t, Status::OK));
    }
    // Back to 15 °C, then over-filled by 5 % (content above the rated content
    // at the present temperature; the pressure itself stays below 5/4).
    for i in 200..300u64 {
        s.push((i, 200e5, t15, Status::OK));
    }
    for i in 300..1000u64 {
        s.push((i, 210e5, t15, Status::OK));
    }
    let (events, pa, pb, statuses) = run(&s);
    let op: Vec<_> = events
        .iter()
        .filter(|e| e.kind == AlarmKind::OverPressure)
        .map(|e| (e.raised, e.at.0 / 1000))
        .collect();
    assert_eq!(op.len(), 3, "{events:?}");
    assert!(op[0].0 && (100..=115).contains(&op[0].1), "{op:?}");
    assert!(!op[1].0 && (200..=240).contains(&op[1].1), "{op:?}");
    // The over-temperature alarm went with the 140 °C phase. The jump of
    // content at 300 s is a fast fill: `not_settled` from its first sample
    // (the smoothed reading passes the settle step one sample later), and
    // the over-fill alarm waits for the settled prediction (a fresh fill
    // reads high while the gas is warm): eight blocks after the last block
    // with the jump (360 s), 840 s, raised 10 s later. The per-estimate
    // `over_fill` flag says it from the first samples on.
    assert!(
        events
            .iter()
            .any(|e| e.kind == AlarmKind::OverTemperature && e.raised)
    );
    let settle: Vec<_> = events
        .iter()
        .filter(|e| e.kind == AlarmKind::NotSettled && e.raised)
        .map(|e| e.at.0 / 1000)
        .collect();
    assert!(settle.iter().any(|t| (300..=303).contains(t)), "{events:?}");
    assert!(op[2].0 && (840..=870).contains(&op[2].1), "{op:?}");
    let first_over_fill = statuses
        .iter()
        .zip(&s)
        .find(|(st, _)| st.contains(Status::OVER_FILL))
        .map(|(_, x)| x.0);
    assert!(
        first_over_fill.is_some_and(|t| (300..=305).contains(&t)),
        "{first_over_fill:?}"
    );
    // The rated pressure corrected to 15 °C is the rated pressure itself
    // (ideal gas, rigid tank): checked on both paths.
    assert!((pa / 200e5 - 1.0).abs() < 1e-5, "{pa}");
    assert!((pb / 200e5 - 1.0).abs() < 1e-9, "{pb}");
}

#[test]
fn sensor_fault_raises_after_three_seconds_and_clears_after_ten() {
    let mut s = Vec::new();
    for i in 0..200u64 {
        let flags = if (50..60).contains(&i) {
            // Any bit of the sensor range is a fault.
            Status::from_bits(1 << 9)
        } else {
            Status::OK
        };
        s.push((i, 150e5, 293.15, flags));
    }
    let (events, _, _, _) = run(&s);
    assert_eq!(
        events,
        vec![
            ev(AlarmKind::SensorFault, true, 53),
            ev(AlarmKind::SensorFault, false, 70),
        ]
    );
}

#[test]
fn low_content_by_fraction_with_hysteresis() {
    let mut s = Vec::new();
    // 20 % → 8 % (below 10 %) → 10.5 % (inside the 1 % band) → 12 %.
    for i in 0..400u64 {
        let f = match i {
            0..100 => 0.20,
            100..200 => 0.08,
            200..300 => 0.105,
            _ => 0.12,
        };
        s.push((i, 200e5 * f, 288.15, Status::OK));
    }
    let (events, _, _, _) = run(&s);
    let low: Vec<_> = events
        .iter()
        .filter(|e| e.kind == AlarmKind::LowContent)
        .map(|e| (e.raised, e.at.0 / 1000))
        .collect();
    assert_eq!(low.len(), 2, "{events:?}");
    assert!(low[0].0 && (115..=122).contains(&low[0].1), "{low:?}");
    assert!(!low[1].0 && (330..=336).contains(&low[1].1), "{low:?}");
}
