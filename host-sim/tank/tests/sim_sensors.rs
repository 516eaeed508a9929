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
