//! What GERG-2008 costs on this host: density solves (p, T) → ρ per second
//! for a 5-component natural gas, and the time of a mixture's dew line.
//!
//! `cargo run --release -p isochor-eos --example gerg_cost` (one thread).

use isochor_eos::composition::Composition;
use isochor_eos::fluid::MixtureEos;
use isochor_eos::gerg::{Branch, Gerg};
use std::time::Instant;

fn main() {
    let gas = Composition::parse("methane=90%,ethane=5%,propane=2%,nitrogen=2%,carbon_dioxide=1%")
        .expect("composition");
    let g = Gerg::new(&gas);
    // States of a vehicle tank: −40…+85 °C, 1…300 bar, each solved from
    // nothing (τ factors and the virial start included).
    let mut states = Vec::new();
    for i in 0..50 {
        for j in 0..40 {
            states.push((
                1e5 + 299e5 * j as f64 / 39.0,
                233.15 + 125.0 * i as f64 / 49.0,
            ));
        }
    }
    let mut sum = 0.0;
    let start = Instant::now();
    let mut n = 0usize;
    while start.elapsed().as_secs_f64() < 2.0 {
        for &(p, t) in &states {
            let tc = g.tau_cache(t);
            sum += g
                .solve(&tc, p, Branch::Gas, 0.0)
                .map_or(0.0, |s| s.density_mol_m3);
            n += 1;
        }
    }
    let secs = start.elapsed().as_secs_f64();
    println!(
        "(p, T) -> rho, 5-component natural gas: {:.0} solves/s ({:.2} us each; checksum {sum:.3e})",
        n as f64 / secs,
        1e6 * secs / n as f64
    );
    // Same temperature reused (the simulator's pattern): τ factors kept.
    let tc = g.tau_cache(288.15);
    let start = Instant::now();
    let mut m = 0usize;
    while start.elapsed().as_secs_f64() < 1.0 {
        for j in 0..40 {
            sum += g
                .solve(&tc, 1e5 + 299e5 * j as f64 / 39.0, Branch::Gas, 0.0)
                .map_or(0.0, |s| s.z);
            m += 1;
        }
    }
    let secs = start.elapsed().as_secs_f64();
    println!(
        "  at one temperature (tau factors kept): {:.0} solves/s (checksum {sum:.3e})",
        m as f64 / secs
    );
    if std::env::args().any(|a| a == "--solves-only") {
        return;
    }
    for text in [
        "argon=82%,carbon_dioxide=18%",
        "methane=90%,ethane=5%,propane=2%,nitrogen=2%,carbon_dioxide=1%",
    ] {
        let c = Composition::parse(text).expect("composition");
        let start = Instant::now();
        let m = MixtureEos::of(&c);
        let d = m.dew_line();
        println!(
            "dew line of {text}: {:.2} s, cricondentherm estimate {:?} K",
            start.elapsed().as_secs_f64(),
            d.cricondentherm_k()
        );
        for t in [213.15, 233.15, 243.15, 253.15, 263.15] {
            println!(
                "  {t} K: dew {:?} bar",
                d.dew_pressure_pa(t).map(|p| p / 1e5)
            );
        }
    }
}
