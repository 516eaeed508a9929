//! Writes the seed corpus: valid frames of every kind (and a stream of them)
//! for `frame_decode`, flash images with stored references for
//! `store_load`, and a prepared configuration (whole, and damaged) for
//! `prepared_load`. Run from `core/fuzz`: `cargo run --bin make_seeds`.

use std::fs;

use isochor_core::link::{
    self, Command, FromDevice, Outcome, Ping, Reply, SensorChannel, Signed, Telemetry, ToDevice,
    Wire,
};
use isochor_core::prepared::{GaugeConfig, PreparedBuf};
use isochor_core::store::sim::SimFlash;
use isochor_core::store::{BlobRef, ConfigRef, Layout};
use isochor_core::{Gas, Setup, SetupFx, Tank};

fn seed<M: Wire>(m: &M, stream: &mut Vec<u8>, i: usize) {
    let mut out = [0u8; link::MAX_FRAME_LEN];
    let n = link::encode(m, &mut out).expect("encode");
    let mut seed = vec![0u8; 8]; // chunk sizes: one byte at a time
    seed.extend_from_slice(&out[..n]);
    fs::write(format!("seeds/frame_decode/{}", m.kind().name()), &seed).expect("write");
    stream.extend_from_slice(&out[..n]);
    if i % 2 == 0 {
        stream.extend_from_slice(&[0x11, 0x22, 0x00]);
    }
}

fn main() {
    let to_device = [
        ToDevice::Ping(Ping { tag: 1, token: 42 }),
        ToDevice::GetIdentity(link::GetIdentity { tag: 2 }),
        ToDevice::GetChallenge(link::GetChallenge { tag: 3 }),
        ToDevice::ReadConfig(link::ReadConfig {
            tag: 4,
            offset: 128,
        }),
        ToDevice::Signed(Signed {
            tag: 5,
            counter: 1,
            mac: [0xA5; 32],
            command: Signed::encode_command(&Command::ZeroCalibration {
                channel: SensorChannel::Pressure,
            })
            .expect("encode"),
        }),
        ToDevice::InjectSample(link::InjectSample {
            tag: 6,
            at_ms: 10_000,
            pressure: 0x0012_3456,
            temperature: 0x0040_0000,
        }),
        ToDevice::GetDiagnostics(link::GetDiagnostics { tag: 7 }),
    ];
    let from_device = [
        FromDevice::Telemetry(Telemetry {
            seq: 7,
            uptime_ms: 1000,
            mass_kg: 1 << 40,
            rate_kg_h: Some(-(1 << 31)),
            ..Telemetry::default()
        }),
        FromDevice::Reply(Reply {
            tag: 5,
            outcome: Outcome::Pong { token: 9 },
        }),
        FromDevice::Alarm(link::AlarmEvent {
            seq: 3,
            uptime_ms: 2_010_000,
            alarm: 6,
            transition: link::AlarmTransition::Raised,
            status: 1 << 22,
            mass_kg: 1 << 40,
        }),
        FromDevice::Boot(link::Boot {
            serial: 20_260_777,
            firmware_version: [0, 2, 0],
            report: link::BootReport {
                reason: link::ResetReason::Panic,
                boots: 2,
                fault_line: 120,
                fault_file: heapless::String::try_from("src/run.rs").expect("short"),
            },
        }),
    ];
    fs::create_dir_all("seeds/frame_decode").expect("dir");
    let mut stream = vec![3u8, 17, 1, 64, 5, 9, 2, 33];
    for (i, m) in to_device.iter().enumerate() {
        seed(m, &mut stream, i);
    }
    for (i, m) in from_device.iter().enumerate() {
        seed(m, &mut stream, i);
    }
    fs::write("seeds/frame_decode/stream", &stream).expect("write");

    fs::create_dir_all("seeds/store_load").expect("dir");
    let mut flash = SimFlash::<8192, 1024, 4>::new();
    let layout = Layout::contiguous(&flash, 0, 1024, 3072).expect("layout");
    for i in 0..40u32 {
        let r = ConfigRef {
            blob: BlobRef {
                slot: (i % 2) as u8,
                len: 100 + i,
                crc: 0x1234_5678 ^ i,
            },
            zero_pressure: i as i32 * 16,
            zero_temperature: -(i as i32),
        };
        layout.config.store(&mut flash, &r).expect("store");
        if i == 20 {
            fs::write("seeds/store_load/config_20", flash.image()).expect("write");
        }
    }
    fs::write("seeds/store_load/config_40", flash.image()).expect("write");
    fs::write("seeds/store_load/empty", [0xFFu8; 64]).expect("write");

    fs::create_dir_all("seeds/prepared_load").expect("dir");
    let setup =
        SetupFx::from_f64(&Setup::new(Gas::Nitrogen, Tank::new(0.05, 200e5))).expect("setup");
    let (blob, _) = PreparedBuf::build(&GaugeConfig::nominal(setup)).expect("prepare");
    fs::write("seeds/prepared_load/nominal", blob.bytes()).expect("write");
    let mut damaged = blob.bytes().to_vec();
    let mid = damaged.len() / 3;
    damaged[mid] ^= 0x40;
    fs::write("seeds/prepared_load/damaged", &damaged).expect("write");
}
