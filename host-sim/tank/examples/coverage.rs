//! The content's k = 2 coverage and the time-to-empty bounds of every
//! built-in scenario: with a nominal instrument (only the scenario's stated
//! errors) and over a population of instruments drawn from the declaration.
//!
//! `cargo run --release -p isochor-tank --example coverage -- nominal`
//! `cargo run --release -p isochor-tank --example coverage -- population 100 [scenario …]`
//! (population runs sample every 10 s with instruments drawn from the
//! declaration; seeds 5000 … 5000 + n − 1.)

use isochor_tank::run::{BackendKind, RunOptions, Summary, run};
use isochor_tank::scenario::{BUILTIN, Scenario};
use rayon::prelude::*;

fn opts(backend: BackendKind) -> RunOptions {
    RunOptions {
        backend,
        trace_every_s: 0.0,
        progress: false,
    }
}

fn nominal(name: &str) -> Scenario {
    let mut file = if name.ends_with(".toml") {
        Scenario::from_toml(&std::fs::read_to_string(name).unwrap())
            .unwrap()
            .source
    } else {
        Scenario::builtin(name).unwrap().source
    };
    file.gauge.instrument = "nominal".into();
    file.build().unwrap()
}

fn line(s: &Summary) -> String {
    let cov = s.uncertainty_coverage.unwrap_or(f64::NAN) * 100.0;
    let rms = s.rms_error_fraction.unwrap_or(f64::NAN) * 100.0;
    let u = s.median_relative_uncertainty.unwrap_or(f64::NAN) * 100.0;
    format!(
        "coverage {cov:5.1} %  rms {rms:.3} %  median U/m {u:.3} % (U/rms {:.2})  max |e|/U {:.2}  time to empty {} min, bounds {}",
        u / rms,
        s.max_error_over_uncertainty.unwrap_or(f64::NAN),
        s.time_to_empty_minutes,
        s.time_to_empty_coverage
            .map(|c| format!("{:.1} %", c * 100.0))
            .unwrap_or("—".into())
    )
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let mode = args.first().map(String::as_str).unwrap_or("nominal");
    let backend = if args.iter().any(|a| a == "--float") {
        BackendKind::Float
    } else {
        BackendKind::Fixed
    };
    let args: Vec<&String> = args.iter().filter(|a| *a != "--float").collect();
    match mode {
        "nominal" => {
            let names: Vec<&str> = if args.len() > 1 {
                args[1..].iter().map(|s| s.as_str()).collect()
            } else {
                BUILTIN.iter().map(|b| b.0).collect()
            };
            let rows: Vec<(String, String)> = names
                .par_iter()
                .map(|n| {
                    let s = run(&nominal(n), &opts(backend)).unwrap().summary;
                    (n.to_string(), line(&s))
                })
                .collect();
            for (n, l) in rows {
                println!("{n:24} {l}");
            }
        }
        "population" => {
            let count: u64 = args.get(1).and_then(|a| a.parse().ok()).unwrap_or(100);
            let names: Vec<&str> = if args.len() > 2 {
                args[2..].iter().map(|s| s.as_str()).collect()
            } else {
                BUILTIN.iter().map(|b| b.0).collect()
            };
            for name in names {
                // Instruments drawn from the declaration, whatever the
                // scenario's own instrument is.
                let mut file = Scenario::builtin(name).unwrap().source;
                file.gauge.instrument = "drawn".into();
                let base = file.build().unwrap();
                let rs: Vec<Summary> = (0..count)
                    .into_par_iter()
                    .map(|i| {
                        let mut sc = base.clone().with(None, Some(5000 + i));
                        sc.interval_ms = sc.interval_ms.max(10_000);
                        run(&sc, &opts(backend)).unwrap().summary
                    })
                    .collect();
                let (mut n, mut c, mut e2, mut tn, mut tc) = (0.0, 0.0, 0.0, 0.0, 0.0);
                let mut us = Vec::new();
                for s in &rs {
                    let k = s.judged_samples as f64;
                    if let (Some(cov), Some(rms)) = (s.uncertainty_coverage, s.rms_error_fraction) {
                        n += k;
                        c += cov * k;
                        e2 += rms * rms * k;
                        us.push(s.median_relative_uncertainty.unwrap_or(f64::NAN));
                    }
                    if let Some(tcov) = s.time_to_empty_coverage {
                        let m = s.time_to_empty_minutes as f64;
                        tn += m;
                        tc += tcov * m;
                    }
                }
                us.sort_by(f64::total_cmp);
                let below = rs
                    .iter()
                    .filter(|s| s.uncertainty_coverage.unwrap_or(1.0) < 0.9)
                    .count();
                let false_alarms: u64 = rs.iter().map(|s| s.false_alarms).sum();
                let rms = (e2 / n).sqrt() * 100.0;
                let u = us.get(us.len() / 2).copied().unwrap_or(f64::NAN) * 100.0;
                println!(
                    "{name:24} {count} instruments: coverage {:5.1} % of {n} samples, {below} below 90 %; rms {rms:.3} %, median U/m {u:.3} % (U/rms {:.2}); time to empty bounds {} of {tn} min; false alarms {false_alarms}",
                    c / n * 100.0,
                    u / rms,
                    if tn > 0.0 {
                        format!("{:.1} %", tc / tn * 100.0)
                    } else {
                        "—".into()
                    }
                );
            }
        }
        "tau" => {
            // The simulated vessel's gas–wall time constant at the rated
            // content (quiet gas): n·c_v/(h_in·A_in).
            for (name, _) in BUILTIN {
                let sc = Scenario::builtin(name).unwrap();
                let v = &sc.plant.vessel;
                let fluid = isochor_eos::fluid::Fluid::for_gas(sc.gas).unwrap();
                let st = fluid
                    .state(sc.tank.rated_pressure_pa, sc.tank.rated_temperature_k)
                    .unwrap();
                let n = st.density_mol_m3 * v.water_capacity_m3;
                let cv = fluid
                    .caloric(st.density_mol_m3, st.temperature_k)
                    .cv_j_mol_k;
                let tau = n * cv / (v.inner_htc * v.inner_area_m2);
                println!(
                    "{name:24} tau_v {:.1} min (gas–wall at the rated content), declared {:.1} min",
                    tau / 60.0,
                    sc.gauge.track.settle_time_constant.0 as f64 / 60e3
                );
            }
        }
        "trace" => {
            // One nominal scenario minute by minute: rate and time to empty
            // against the truth.
            let name = args
                .get(1)
                .map(|s| s.as_str())
                .unwrap_or("methane-cold-night");
            let sc = nominal(name);
            let rated = sc.gauge.track.limits.over_fill_fraction;
            let _ = rated;
            let r = run(
                &sc,
                &RunOptions {
                    backend,
                    trace_every_s: 60.0,
                    progress: false,
                },
            )
            .unwrap();
            let rated = r.summary.rated_mass_true_kg;
            for p in r.trace.iter().step_by(5) {
                let left = p.mass_true_kg - 0.05 * rated;
                let tte_true = if p.true_outflow_kg_h > 0.0 {
                    left / p.true_outflow_kg_h
                } else {
                    f64::NAN
                };
                println!(
                    "{:6.2} h  gas−wall {:+.2} K  err {:+.3} %  U {:.3} %  rate {:.4} true {:.4}  tte {:.2} h true {:.2} h  status {:#x}",
                    p.t_s / 3600.0,
                    p.gas_temperature_k - p.wall_temperature_k,
                    p.mass_gauge_kg
                        .map(|m| (m / p.mass_true_kg - 1.0) * 100.0)
                        .unwrap_or(f64::NAN),
                    p.u_mass_kg
                        .map(|u| u / p.mass_true_kg * 100.0)
                        .unwrap_or(f64::NAN),
                    p.rate_kg_h.unwrap_or(f64::NAN),
                    p.true_outflow_kg_h,
                    p.time_to_empty_s.map(|t| t / 3600.0).unwrap_or(f64::NAN),
                    tte_true,
                    p.status
                );
            }
        }
        other => panic!("unknown mode {other}: nominal or population"),
    }
}
