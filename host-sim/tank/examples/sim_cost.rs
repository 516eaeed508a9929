//! Where the time of a simulated run goes: the physics and the sensors
//! (truth and raw codes) against the gauge under test (the in-process core),
//! for the demo scenario over 30 days at 1 Hz.
//!
//! `cargo run --release -p isochor-sim --example sim_cost`

use isochor_core::time::Instant;
use isochor_tank::gauge::{Backend, FixedGauge, FloatGauge, ModelKind};
use isochor_tank::physics::Simulator;
use isochor_tank::scenario::Scenario;
use isochor_tank::sensors::SensorPair;

fn main() -> Result<(), isochor_tank::Error> {
    let days = 30.0;
    let sc = Scenario::builtin("workshop-leak")?.with(Some(days * 86_400.0), None);
    let n = (sc.duration_s as u64) + 1;

    let t0 = std::time::Instant::now();
    let mut sim = Simulator::new(sc.plant.clone())?;
    let mut pair = SensorPair::new(
        sc.pressure,
        sc.temperature,
        sc.faults.clone(),
        sc.plant.weather.pressure_pa,
        1,
    )?;
    let mut codes = Vec::with_capacity(n as usize);
    for i in 0..n {
        let truth = sim.truth(i as f64)?;
        codes.push(pair.sample(&truth)?);
    }
    let physics = t0.elapsed().as_secs_f64();
    println!(
        "physics and sensors: {:.0} samples/s ({} steps, {} equation-of-state evaluations)",
        n as f64 / physics,
        sim.steps,
        sim.evaluations
    );

    for (label, model) in [("device", ModelKind::Device), ("ideal", ModelKind::Ideal)] {
        let mut cfg = sc.gauge.clone();
        cfg.model = model;
        let gauges: [(&str, Box<dyn Backend>); 2] = [
            ("fixed", Box::new(FixedGauge::new(&cfg)?)),
            ("f64", Box::new(FloatGauge::new(&cfg)?)),
        ];
        for (path, mut g) in gauges {
            let t = std::time::Instant::now();
            let mut alarms = 0u32;
            for (i, c) in codes.iter().enumerate() {
                let r = g.sample(Instant(i as u64 * 1000), c)?;
                alarms += r.events.raised.0.count_ones();
            }
            let s = t.elapsed().as_secs_f64();
            println!(
                "gauge, {path} core, {label} model: {:.0} samples/s ({:.0} ns per sample, {alarms} alarms raised)",
                n as f64 / s,
                s / n as f64 * 1e9
            );
        }
    }
    Ok(())
}
