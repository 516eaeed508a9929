//! The core's Modbus RTU server in a configured gauge, on the host: read
//! by an independent client library (`tokio-modbus`, RTU framing over a
//! loopback TCP socket), and 10,000 random frames that never disturb the
//! gauge (its telemetry stays byte for byte that of a twin that got none).

use std::io::{Read, Write};
use std::net::{TcpListener, TcpStream};
use std::time::{Duration, Instant as StdInstant};

use isochor_core::app::{Gauge, GaugeIo};
use isochor_core::field::modbus::{Server, crc16};
use isochor_core::link::NONCE_LEN;
use isochor_core::prepared::GaugeConfig;
use isochor_core::time::Instant;
use isochor_core::{Gas, Setup, SetupFx, Tank, fx};
use isochor_sim::bench::Bench;
use isochor_sim::link::emulated::{CopyMapper, EmulatedFlash, configured_gauge};
use tokio_modbus::prelude::*;

const ADDRESS: u8 = 9;

/// Frames the gauge sends, kept.
#[derive(Default)]
struct Frames(Vec<Vec<u8>>);

impl GaugeIo for Frames {
    fn send(&mut self, frame: &[u8]) {
        self.0.push(frame.to_vec());
    }
    fn fill_nonce(&mut self, out: &mut [u8; NONCE_LEN]) {
        out.fill(7);
    }
}

fn config() -> GaugeConfig {
    let setup = SetupFx::from_f64(&Setup::new(Gas::Nitrogen, Tank::new(0.050, 200e5))).unwrap();
    let mut c = GaugeConfig::nominal(setup);
    c.field.serial.address = ADDRESS;
    c
}

/// A gauge whose flash holds `cfg`.
fn gauge(cfg: &GaugeConfig) -> Box<Option<Gauge<EmulatedFlash, CopyMapper>>> {
    configured_gauge(cfg).unwrap()
}

fn frame(address: u8, pdu: &[u8]) -> Vec<u8> {
    let mut f = vec![address];
    f.extend_from_slice(pdu);
    let crc = crc16(0xFFFF, &f);
    f.extend_from_slice(&crc.to_le_bytes());
    f
}

/// Reads every register of the map from `g` through `server` (one request
/// per block), as words.
fn all_words(
    g: &mut Gauge<EmulatedFlash, CopyMapper>,
    server: &mut Server,
    t_us: &mut u64,
) -> Vec<u8> {
    let mut out = Vec::new();
    for (f, start, n) in [
        (4u8, 0u16, 36u16),
        (4, 100, 36),
        (4, 200, 8),
        (4, 300, 9),
        (3, 0, 6),
    ] {
        let mut pdu = vec![f];
        pdu.extend_from_slice(&start.to_be_bytes());
        pdu.extend_from_slice(&n.to_be_bytes());
        let req = frame(ADDRESS, &pdu);
        let now = Instant(*t_us / 1000);
        g.modbus(server, now, *t_us, &req, &mut |b| out.extend_from_slice(b));
        *t_us += 5000;
        let now = Instant(*t_us / 1000);
        assert!(g.modbus(server, now, *t_us, &[], &mut |b| out.extend_from_slice(b)));
        *t_us += 5000;
    }
    out
}

#[test]
fn ten_thousand_random_frames_never_disturb_the_gauge() {
    let cfg = config();
    let mut a = gauge(&cfg);
    let mut b = gauge(&cfg);
    let (ga, gb) = (a.as_mut().as_mut().unwrap(), b.as_mut().as_mut().unwrap());
    let mut server = Server::new(&ga.field().serial);
    let mut twin = Server::new(&gb.field().serial);
    let bench = Bench::new(cfg.pressure, cfg.temperature, 101_325.0);
    let mut x = 0x2545_F491_4F6C_DD1Du64;
    let mut next = || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        x
    };
    let (mut fa, mut fb) = (Frames::default(), Frames::default());
    let mut t_us = 0u64;
    let (mut replies, mut frames) = (0u32, 0u32);
    for i in 0..100u64 {
        // 100 random frames between two samples: a third raw noise, a third
        // checked frames of random functions, a third checked requests of
        // the served functions with random fields; random pauses, some
        // inside frames.
        for k in 0..100 {
            let len = 1 + (next() % 30) as usize;
            let mut body: Vec<u8> = (0..len).map(|_| next() as u8).collect();
            let bytes = match k % 3 {
                0 => body,
                1 => frame(if next() % 4 == 0 { 0 } else { ADDRESS }, &body),
                _ => {
                    body[0] = [3, 4, 6, 16, 8, 43][(next() % 6) as usize];
                    frame(ADDRESS, &body)
                }
            };
            let split = (next() % bytes.len() as u64) as usize;
            let (p1, p2) = bytes.split_at(split);
            for part in [p1, p2] {
                t_us += next() % 3000;
                let now = Instant(t_us / 1000);
                if ga.modbus(&mut server, now, t_us, part, &mut |_| replies += 1) {
                    frames += 1;
                }
            }
            t_us += 2000 + next() % 2000;
            let now = Instant(t_us / 1000);
            if ga.modbus(&mut server, now, t_us, &[], &mut |_| replies += 1) {
                frames += 1;
            }
        }
        // The same sample to both gauges: a draw from 150 bar.
        let raw = bench.sample(150e5 - i as f64 * 5e4, 293.15).unwrap();
        let at = Instant(t_us / 1000);
        ga.sample(at, &raw, &mut fa);
        gb.sample(at, &raw, &mut fb);
    }
    let c = server.counters();
    println!(
        "10,000 random frames: {} checked, {} for this gauge, {frames} answered ({} exceptions), {} dropped",
        c.checked, c.frames, c.exceptions, c.bad_frames
    );
    // The noise reached every path: answers, exceptions, dropped frames.
    assert!(
        frames > 500 && c.exceptions > 500 && c.bad_frames > 1000,
        "{c:?}"
    );
    // Telemetry and alarm frames: byte for byte those of the twin.
    assert_eq!(fa.0.len(), 100);
    assert_eq!(fa.0, fb.0, "the gauge's frames after the noise");
    // The registers: those of the twin (alarm acknowledgements aside: a
    // random write may acknowledge an active alarm, which changes no value).
    // Both read at the same times (the sample's age is a register).
    let mut t2 = t_us;
    let wa = all_words(ga, &mut server, &mut t_us);
    let wb = all_words(gb, &mut twin, &mut t2);
    assert_eq!(wa.len(), wb.len());
    let mass_a = f32::from_bits(u32::from_be_bytes([wa[3], wa[4], wa[5], wa[6]]));
    assert!(mass_a > 1.0, "a mass is read: {mass_a}");
    // The last reply is holding 0 … 5 (address, function, count, 12 bytes,
    // CRC); holding register 0 is the acknowledgement.
    let ack = wa.len() - 2 - 12;
    assert_eq!(wa[..ack], wb[..ack]);
    assert_eq!(wa[ack + 2..wa.len() - 2], wb[ack + 2..wb.len() - 2]);
}

#[test]
fn an_independent_client_reads_the_core_server() {
    let cfg = config();
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = listener.local_addr().unwrap();
    let bench = Bench::new(cfg.pressure, cfg.temperature, 101_325.0);
    let (tx, rx) = std::sync::mpsc::channel();
    let server = std::thread::spawn(move || {
        let mut slot = gauge(&cfg);
        let g = slot.as_mut().as_mut().unwrap();
        let mut io = Frames::default();
        for i in 0..30 {
            let raw = bench.sample(120e5, 288.15 + 0.01 * i as f64).unwrap();
            g.sample(Instant(i * 1000), &raw, &mut io);
        }
        let c = g.pipeline().unwrap().tracker().latest_content().unwrap();
        tx.send((fx::to_f64(c.mass_kg), fx::to_f64(c.fill_fraction)))
            .unwrap();
        let mut server = Server::new(&g.field().serial);
        let (mut s, _) = listener.accept().unwrap();
        s.set_read_timeout(Some(Duration::from_millis(1))).unwrap();
        let start = StdInstant::now();
        let mut buf = [0u8; 256];
        loop {
            let n = match s.read(&mut buf) {
                Ok(0) => return,
                Ok(n) => n,
                Err(_) => 0,
            };
            let t_us = start.elapsed().as_micros() as u64;
            let mut out = Vec::new();
            g.modbus(&mut server, Instant(30_000), t_us, &buf[..n], &mut |b| {
                out.extend_from_slice(b)
            });
            if !out.is_empty() {
                s.write_all(&out).unwrap();
            }
        }
    });
    let (mass, fill) = rx.recv().unwrap();
    let rt = tokio::runtime::Builder::new_current_thread()
        .enable_all()
        .build()
        .unwrap();
    rt.block_on(async {
        let stream = tokio::net::TcpStream::connect(addr).await.unwrap();
        let mut ctx = rtu::attach_slave(stream, Slave(ADDRESS));
        let w = ctx.read_input_registers(0, 36).await.unwrap().unwrap();
        let f = |i: usize| {
            f64::from(f32::from_bits(
                (u32::from(w[i]) << 16) | u32::from(w[i + 1]),
            ))
        };
        // binary32 of the fixed value: 2^-24 relative.
        assert!((f(0) - mass).abs() <= 1e-7 * mass, "{} vs {mass}", f(0));
        assert!((f(8) - fill).abs() <= 1e-7, "{} vs {fill}", f(8));
        let w = ctx.read_input_registers(100, 2).await.unwrap().unwrap();
        let grams = ((u32::from(w[0]) << 16) | u32::from(w[1])) as i32;
        assert!((f64::from(grams) - mass * 1e3).abs() <= 0.5 + 1e-9);
        assert_eq!(
            ctx.read_input_registers(36, 1).await.unwrap(),
            Err(ExceptionCode::IllegalDataAddress)
        );
        assert_eq!(
            ctx.read_coils(0, 1).await.unwrap(),
            Err(ExceptionCode::IllegalFunction)
        );
        assert_eq!(
            ctx.write_multiple_registers(0, &[1, 2]).await.unwrap(),
            Err(ExceptionCode::IllegalDataAddress)
        );
        assert_eq!(ctx.write_multiple_registers(0, &[0]).await.unwrap(), Ok(()));
        let id = ctx.read_holding_registers(1, 5).await.unwrap().unwrap();
        assert_eq!(id, [u16::from(ADDRESS), 0, 19_200, 1, 0]);
    });
    drop(rt);
    let _ = TcpStream::connect(addr);
    let _ = server.join();
}
