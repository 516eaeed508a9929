//! Simulated sensors through the core's front-ends: codes that convert back
//! to the truth within the converter's resolution, and faults that the core
//! reports as the faults they are (NAMUR NE 43 failure currents, open and
//! short circuits, frozen codes).

use isochor_core::Status;
use isochor_core::time::Instant;
use isochor_tank::gauge::{Backend, FixedGauge, FloatGauge};
use isochor_tank::physics::Truth;
use isochor_tank::scenario::Scenario;
use isochor_tank::sensors::{Channel, Fault, FaultKind, SensorPair};

/// A scenario's sensors without errors or noise, and its gauge.
fn quiet(name: &str, faults: Vec<Fault>) -> (SensorPair, Scenario) {
    let text = isochor_tank::scenario::BUILTIN
        .iter()
        .find(|b| b.0 == name)
        .unwrap()
        .1
        // The truth below moves 0.01 K/s, a code step every 2 s or so: one
        // minute tells a frozen temperature here (the default, 6 h, is for
        // quiet channels, see sim_tracking.rs).
        .replace(
            "[gauge]",
            "[gauge]\ninstrument = \"nominal\"\ntemperature_stuck_after = \"60s\"",
        );
    let sc = Scenario::from_toml(&text).unwrap();
    let mut p = sc.pressure;
    p.noise_pa = 0.0;
    let mut t = sc.temperature;
    t.noise_k = 0.0;
    t.time_constant_s = 0.0;
    let pair = SensorPair::new(p, t, faults, 101_325.0, 1).unwrap();
    (pair, sc)
}

fn truth(t_s: f64, p: f64, k: f64) -> Truth {
    Truth {
        t_s,
        mass_kg: 1.0,
        gas_k: k,
        wall_k: k,
        pressure_pa: p,
        ambient_k: k,
        outflow_kg_s: 0.0,
    }
}

/// Bridge (24 bits over 300 bar) and Pt1000 (16 bits): the codes the
/// simulator makes convert back, in the fixed-point core, to the true
/// pressure within 0.001 bar and temperature within 0.02 K (one converter
/// step of the Pt1000 divider is about 0.016 K); the 4–20 mA loop (16 bits
/// over 1000 bar) within 0.02 bar.
#[test]
fn codes_convert_back_to_the_truth() {
    for (name, p_tol) in [("workshop-leak", 100.0), ("hydrogen-fast-fill", 2000.0)] {
        let (mut pair, sc) = quiet(name, vec![]);
        let mut g = FixedGauge::new(&sc.gauge).unwrap();
        let mut f = FloatGauge::new(&sc.gauge).unwrap();
        for (i, (p, k)) in [
            (150e5, 288.15),
            (20e5, 250.0),
            (190e5, 320.0),
            (1e5, 233.15),
        ]
        .into_iter()
        .enumerate()
        {
            // The gauges report smoothed readings (seconds of time
            // constant): each truth is held for two minutes, the last
            // reading compared.
            let (mut a, mut b) = (None, None);
            for s in 0..120u64 {
                let at = (i as u64 * 120 + s) as f64;
                let codes = pair.sample(&truth(at, p, k)).unwrap();
                a = Some(g.sample(Instant(at as u64 * 1000), &codes).unwrap());
                b = Some(f.sample(Instant(at as u64 * 1000), &codes).unwrap());
            }
            for r in [a.unwrap(), b.unwrap()] {
                let (pr, kr) = (r.pressure_pa.unwrap(), r.temperature_k.unwrap());
                assert!((pr - p).abs() < p_tol, "{name}: {pr} vs {p}");
                assert!((kr - k).abs() < 0.02, "{name}: {kr} vs {k}");
            }
        }
    }
}

fn flags_during(name: &str, channel: Channel, kind: FaultKind) -> Status {
    let fault = Fault {
        channel,
        kind,
        start_s: 10.0,
        duration_s: 120.0,
        spikes_per_hour: 0.0,
        ramp_to: 0.0,
        ramp_over_s: 0.0,
    };
    let (mut pair, sc) = quiet(name, vec![fault]);
    let mut g = FixedGauge::new(&sc.gauge).unwrap();
    let mut seen = Status::OK;
    for i in 0..=160u64 {
        // A slowly moving truth, so a frozen code is the only stuck one.
        let tr = truth(i as f64, 150e5 + 100.0 * i as f64, 290.0 + 0.01 * i as f64);
        let codes = pair.sample(&tr).unwrap();
        let r = g.sample(Instant(i * 1000), &codes).unwrap();
        if (10..130).contains(&i) {
            seen |= r.status;
        } else if i > 140 {
            assert!(
                !r.status.intersects(Status::SENSOR_RANGE),
                "{kind:?}: {}",
                r.status
            );
        }
    }
    seen
}

#[test]
fn faults_are_reported_as_what_they_are() {
    let cases = [
        (
            "workshop-leak",
            Channel::Temperature,
            FaultKind::Open,
            Status::SENSOR_OPEN_CIRCUIT,
        ),
        (
            "workshop-leak",
            Channel::Temperature,
            FaultKind::Short,
            Status::SENSOR_SHORT_CIRCUIT,
        ),
        (
            "workshop-leak",
            Channel::Pressure,
            FaultKind::Open,
            Status::SENSOR_SATURATED,
        ),
        (
            "workshop-leak",
            Channel::Pressure,
            FaultKind::Stuck,
            Status::SENSOR_STUCK,
        ),
        (
            "workshop-leak",
            Channel::Temperature,
            FaultKind::Stuck,
            Status::SENSOR_STUCK,
        ),
        // NAMUR NE 43: ≤ 3.6 mA and ≥ 21.0 mA are failure signals, declared
        // after the persistence time (5 s here).
        (
            "oxygen-clinic",
            Channel::Pressure,
            FaultKind::FailureLow,
            Status::SENSOR_LOOP_FAILURE,
        ),
        (
            "oxygen-clinic",
            Channel::Pressure,
            FaultKind::FailureHigh,
            Status::SENSOR_LOOP_FAILURE,
        ),
        (
            "oxygen-clinic",
            Channel::Pressure,
            FaultKind::Open,
            Status::SENSOR_LOOP_FAILURE,
        ),
    ];
    for (name, channel, kind, want) in cases {
        let seen = flags_during(name, channel, kind);
        assert!(seen.contains(want), "{name} {kind:?}: {seen}");
        assert!(
            seen.contains(Status::SENSOR_FAULT),
            "{name} {kind:?}: {seen}"
        );
    }
}

/// A drift that begins at a chosen time (`drift_start`): the workshop's
/// pressure sensor drifts 36.525 bar a year (0.1 bar a day) from day one
/// and its temperature sensor 36.525 K a year from day two. The readings
/// equal those of the same run without drift (same seed: same weather,
/// noise and instrument) before each start, and differ by exactly the
/// drift since its start after it; the instrument in the summary names
/// the starts.
#[test]
fn drifts_begin_when_the_scenario_says() {
    use isochor_tank::run::{BackendKind, RunOptions, run};
    let base = isochor_tank::scenario::BUILTIN
        .iter()
        .find(|(n, _)| *n == "workshop-leak")
        .unwrap()
        .1;
    let drifting = base
        .replacen(
            "[sensors.pressure]\n",
            "[sensors.pressure]\noffset_drift_per_year = \"36.525bar\"\ndrift_start = \"1d\"\n",
            1,
        )
        .replacen(
            "[sensors.temperature]\n",
            "[sensors.temperature]\ndrift_per_year = \"36.525K\"\ndrift_start = \"2d\"\n",
            1,
        );
    assert_ne!(drifting, base);
    let opts = RunOptions {
        backend: BackendKind::Fixed,
        trace_every_s: 3600.0,
        progress: false,
    };
    let cut = Some(3.0 * 86_400.0);
    let a = run(&Scenario::from_toml(base).unwrap().with(cut, None), &opts).unwrap();
    let b = run(
        &Scenario::from_toml(&drifting).unwrap().with(cut, None),
        &opts,
    )
    .unwrap();
    assert_eq!(b.summary.instrument.pressure_drift_start_s, 86_400.0);
    assert_eq!(
        b.summary.instrument.temperature_drift_start_s,
        2.0 * 86_400.0
    );
    let mut after = 0;
    for (x, y) in a.trace.iter().zip(&b.trace) {
        assert_eq!(x.t_s, y.t_s);
        // Before the first start the gauge reads alike; after the second,
        // its (smoothed) readings differ by the drift since each start,
        // within a fixed-point step and the smoothing's lag.
        if x.t_s <= 86_400.0 {
            assert_eq!(x.mass_gauge_kg, y.mass_gauge_kg, "at {} s", x.t_s);
        } else if x.t_s > 2.5 * 86_400.0 {
            let (tx, ty) = (x.temperature_read_k.unwrap(), y.temperature_read_k.unwrap());
            let want = 0.1 * (x.t_s - 2.0 * 86_400.0) / 86_400.0;
            assert!(
                (ty - tx - want).abs() < 0.02,
                "at {} s: {} vs {want}",
                x.t_s,
                ty - tx
            );
            let (px, py) = (x.pressure_read_pa.unwrap(), y.pressure_read_pa.unwrap());
            let want = 1e4 * (x.t_s - 86_400.0) / 86_400.0;
            assert!(
                (py - px - want).abs() < 500.0,
                "at {} s: {} vs {want}",
                x.t_s,
                py - px
            );
            after += 1;
        }
    }
    assert!(after > 10, "{after}");
}

fn ramp(channel: Channel, start_s: f64, to: f64, over_s: f64, duration_s: f64) -> Fault {
    Fault {
        channel,
        kind: FaultKind::Ramp,
        start_s,
        duration_s,
        spikes_per_hour: 0.0,
        ramp_to: to,
        ramp_over_s: over_s,
    }
}

/// The shape of a ramp: nothing before its start, linear to `to` over
/// `over`, held, and gone at its end; through the sensors, the codes of a
/// ramped channel are exactly those of a sound channel shown the truth
/// plus the ramp's offset (errors and noise off), for pressure (+30 bar
/// over 100 s) and temperature (−8 K over 100 s).
#[test]
fn ramps_walk_the_reading_away_linearly() {
    let f = ramp(Channel::Pressure, 10.0, 30e5, 100.0, 200.0);
    for (t, want) in [
        (0.0, 0.0),
        (9.999, 0.0),
        (10.0, 0.0),
        (35.0, 7.5e5),
        (60.0, 15e5),
        (110.0, 30e5),
        (209.9, 30e5),
        (210.0, 0.0),
        (1e6, 0.0),
    ] {
        assert!(
            (f.ramp_offset(t) - want).abs() < 1e-6,
            "{t}: {}",
            f.ramp_offset(t)
        );
    }
    let mut stuck = f;
    stuck.kind = FaultKind::Stuck;
    assert_eq!(stuck.ramp_offset(60.0), 0.0);
    let permanent = ramp(Channel::Pressure, 10.0, -6e5, 100.0, f64::INFINITY);
    assert_eq!(permanent.ramp_offset(1e9), -6e5);

    for (channel, to) in [(Channel::Pressure, 30e5), (Channel::Temperature, -8.0)] {
        let f = ramp(channel, 10.0, to, 100.0, 200.0);
        let (mut ramped, _) = quiet("workshop-leak", vec![f]);
        let (mut sound, _) = quiet("workshop-leak", vec![]);
        let mut moved = 0;
        for i in 0..=260u64 {
            let t = i as f64;
            let (p, k) = (150e5 + 100.0 * t, 290.0 + 0.001 * t);
            let a = ramped.sample(&truth(t, p, k)).unwrap();
            let off = f.ramp_offset(t);
            // No lag and no noise in `quiet`: the element reads the wall.
            match channel {
                Channel::Pressure => {
                    let b = sound.sample(&truth(t, p + off, k)).unwrap();
                    assert_eq!(a.pressure, b.pressure, "at {t} s");
                }
                Channel::Temperature => {
                    let b = sound.sample(&truth(t, p, k + off)).unwrap();
                    assert_eq!(a.temperature, b.temperature, "at {t} s");
                }
            }
            if off != 0.0 {
                moved += 1;
            }
        }
        assert_eq!(moved, 199, "{channel:?}");
    }
}

/// A fast ramp (+400 bar in 20 s on a 300 bar channel: 20 bar/s against the
/// plausible 15 bar/s plus 3 bar between samples) is flagged by the
/// device's rate check and, once beyond 150 % of the range, by its range
/// check, and raises `sensor_fault`; a slow one (+30 bar over 10 min) is
/// never flagged: to the device it is a real change.
#[test]
fn a_fast_ramp_is_flagged_a_slow_one_is_not() {
    for (f, flagged) in [
        (
            ramp(Channel::Pressure, 10.0, 400e5, 20.0, f64::INFINITY),
            true,
        ),
        (
            ramp(Channel::Pressure, 10.0, 30e5, 600.0, f64::INFINITY),
            false,
        ),
        (
            ramp(Channel::Temperature, 10.0, 40.0, 4.0, f64::INFINITY),
            true,
        ),
        (
            ramp(Channel::Temperature, 10.0, -8.0, 600.0, f64::INFINITY),
            false,
        ),
    ] {
        let (mut pair, sc) = quiet("workshop-leak", vec![f]);
        let mut g = FixedGauge::new(&sc.gauge).unwrap();
        let mut seen = Status::OK;
        let mut last = Status::OK;
        for i in 0..=700u64 {
            let tr = truth(i as f64, 150e5 + 100.0 * i as f64, 290.0 + 0.01 * i as f64);
            let codes = pair.sample(&tr).unwrap();
            last = g.sample(Instant(i * 1000), &codes).unwrap().status;
            seen |= last;
        }
        if flagged {
            assert!(
                seen.contains(Status::SENSOR_RATE_IMPLAUSIBLE),
                "{f:?}: {seen}"
            );
            assert!(seen.contains(Status::SENSOR_FAULT), "{f:?}: {seen}");
        } else {
            assert!(!seen.intersects(Status::SENSOR_RANGE), "{f:?}: {seen}");
            assert!(!seen.contains(Status::SENSOR_FAULT), "{f:?}: {seen}");
        }
        if f.channel == Channel::Pressure && flagged {
            // 590 bar against a plausible 450 bar: flagged for good.
            assert!(last.contains(Status::SENSOR_OVER_RANGE), "{last}");
        }
    }
}
