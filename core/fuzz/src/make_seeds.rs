//! Writes the seed corpus: valid frames of every kind (and a stream of them)
//! for `frame_decode`, and flash images with stored records for `store_load`.
//! Run from `core/fuzz`: `cargo run --bin make_seeds`.

use std::fs;

use isochor_core::SetupFx;
use isochor_core::link::{self, Command, Message, Outcome, Ping, Reply, Signed, Telemetry};
use isochor_core::store::sim::SimFlash;
use isochor_core::store::{GasModelRef, Record, RecordArea, RecordKind};

fn main() {
    let frames = [
        Message::Ping(Ping { tag: 1, token: 42 }),
        Message::GetIdentity(link::GetIdentity { tag: 2 }),
        Message::GetChallenge(link::GetChallenge { tag: 3 }),
        Message::ReadRecord(link::ReadRecord { tag: 4, kind: 1 }),
        Message::Telemetry(Telemetry {
            seq: 7,
            uptime_ms: 1000,
            mass_kg: 1 << 40,
            ..Telemetry::default()
        }),
        Message::Signed(Signed {
            tag: 5,
            counter: 1,
            mac: [0xA5; 32],
            command: Command::write_record(&SetupFx::safe_default()).expect("valid"),
        }),
        Message::Reply(Reply {
            tag: 5,
            outcome: Outcome::Pong { token: 9 },
        }),
        Message::InjectSample(link::InjectSample {
            tag: 6,
            at_ms: 10_000,
            codes: heapless::Vec::from_slice(&[
                link::RawCode {
                    channel: link::SensorChannel::Pressure,
                    code: 0x0012_3456,
                },
                link::RawCode {
                    channel: link::SensorChannel::Temperature,
                    code: 0x0040_0000,
                },
            ])
            .expect("two codes"),
        }),
        Message::Alarm(link::AlarmEvent {
            seq: 3,
            uptime_ms: 2_010_000,
            alarm: 6,
            transition: link::AlarmTransition::Raised,
            status: 1 << 22,
            mass_kg: 1 << 40,
        }),
        Message::Boot(link::Boot {
            serial: 20_260_777,
            firmware_version: [0, 2, 0],
            report: link::BootReport {
                reason: link::ResetReason::Panic,
                boots: 2,
                fault_line: 120,
                fault_file: heapless::String::try_from("src/run.rs").expect("short"),
            },
        }),
        Message::GetDiagnostics(link::GetDiagnostics { tag: 7 }),
    ];
    fs::create_dir_all("seeds/frame_decode").expect("dir");
    let mut stream = vec![3u8, 17, 1, 64, 5, 9, 2, 33];
    for (i, m) in frames.iter().enumerate() {
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
    fs::write("seeds/frame_decode/stream", &stream).expect("write");

    fs::create_dir_all("seeds/store_load").expect("dir");
    let mut flash = SimFlash::<8192, 1024, 4>::new();
    let setup = RecordArea::new(&flash, RecordKind::SETUP, 0, 2048).expect("layout");
    let gas = RecordArea::new(&flash, RecordKind::GAS_MODEL_REF, 4096, 1024).expect("layout");
    let mut s = SetupFx::safe_default();
    for i in 0..40u64 {
        s.tank.water_capacity_m3 =
            isochor_core::fx::Volume::from_bits(1_099_511_628 + i * 1_000_000);
        setup.store(&mut flash, &s).expect("store");
        if i == 20 {
            fs::write("seeds/store_load/setup_20", flash.image()).expect("write");
        }
    }
    gas.store(
        &mut flash,
        &GasModelRef {
            slot: 1,
            len: 100,
            crc: 0x1234_5678,
        },
    )
    .expect("store");
    fs::write("seeds/store_load/setup_40_gas", flash.image()).expect("write");
    fs::write("seeds/store_load/empty", [0xFFu8; 64]).expect("write");
}
