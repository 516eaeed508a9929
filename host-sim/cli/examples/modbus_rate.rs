//! How many Modbus RTU frames per second the core's server handles on this
//! host, in a configured gauge: full reads of the measurement block
//! (function 04, 36 registers: 77-byte replies) and random frames (a third
//! noise, two thirds checked frames with random fields).
//!
//! ```sh
//! cargo run --release -p isochor-sim --example modbus_rate
//! ```

use std::time::Instant as StdInstant;

use isochor_core::app::GaugeIo;
use isochor_core::field::modbus::{Server, crc16};
use isochor_core::link::NONCE_LEN;
use isochor_core::prepared::GaugeConfig;
use isochor_core::time::Instant;
use isochor_core::{Gas, Setup, SetupFx, Tank};
use isochor_sim::bench::Bench;
use isochor_sim::link::emulated::configured_gauge;

struct Sink;

impl GaugeIo for Sink {
    fn send(&mut self, _frame: &[u8]) {}
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        out.fill(0);
    }
}

fn frame(address: u8, pdu: &[u8]) -> Vec<u8> {
    let mut f = vec![address];
    f.extend_from_slice(pdu);
    let crc = crc16(0xFFFF, &f);
    f.extend_from_slice(&crc.to_le_bytes());
    f
}

fn main() {
    let setup = SetupFx::from_f64(&Setup::new(Gas::Nitrogen, Tank::new(0.050, 200e5))).unwrap();
    let cfg = GaugeConfig::nominal(setup);
    let mut slot = configured_gauge(&cfg).unwrap();
    let g = slot.as_mut().as_mut().unwrap();
    let bench = Bench::new(cfg.pressure, cfg.temperature, 101_325.0);
    for i in 0..60 {
        let raw = bench.sample(150e5, 293.15).unwrap();
        g.sample(Instant(i * 1000), &raw, &mut Sink);
    }
    let mut server = Server::new(&g.field().serial);
    let read = frame(1, &[4, 0, 0, 0, 36]);
    let mut t_us = 0u64;
    let mut bytes = 0usize;
    let n = 200_000;
    let start = StdInstant::now();
    for _ in 0..n {
        g.modbus(&mut server, Instant(60_000), t_us, &read, &mut |b| {
            bytes += b.len()
        });
        t_us += 3_000;
        g.modbus(&mut server, Instant(60_000), t_us, &[], &mut |b| {
            bytes += b.len()
        });
    }
    let s = start.elapsed().as_secs_f64();
    assert_eq!(bytes, n * 77, "every read answered");
    println!(
        "reads of 36 registers: {:.0} frames/s ({:.2} µs each)",
        n as f64 / s,
        s / n as f64 * 1e6
    );

    let mut x = 0x9E37_79B9_7F4A_7C15u64;
    let mut next = || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        x
    };
    let frames: Vec<Vec<u8>> = (0..4096)
        .map(|k| {
            let len = 1 + (next() % 30) as usize;
            let mut body: Vec<u8> = (0..len).map(|_| next() as u8).collect();
            match k % 3 {
                0 => body,
                1 => frame(1, &body),
                _ => {
                    body[0] = [3, 4, 6, 16, 8, 43][(next() % 6) as usize];
                    frame(1, &body)
                }
            }
        })
        .collect();
    let start = StdInstant::now();
    for k in 0..n {
        let f = &frames[k % frames.len()];
        g.modbus(&mut server, Instant(60_000), t_us, f, &mut |b| {
            bytes += b.len()
        });
        t_us += 3_000;
        g.modbus(&mut server, Instant(60_000), t_us, &[], &mut |b| {
            bytes += b.len()
        });
    }
    let s = start.elapsed().as_secs_f64();
    println!(
        "random frames: {:.0} frames/s ({:.2} µs each)",
        n as f64 / s,
        s / n as f64 * 1e6
    );
}
