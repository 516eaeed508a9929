//! Host and device over an in-memory link and over TCP on the loopback
//! interface: requests, signed commands, refusals, and the `isochor listen`
//! and `isochor send` commands.

use std::io::Write;
use std::net::TcpListener;
use std::process::{Command as Process, Output, Stdio};
use std::thread;
use std::time::Duration;

use isochor_core::auth::{self, Secret};
use isochor_core::fixed::types::U28F4;
use isochor_core::link::{
    self, Command, Message, Origin, Outcome, Refusal, ResetReason, SensorChannel, Signed,
    Telemetry, capability,
};
use isochor_core::model::device::{TableBuf, builtin};
use isochor_core::store::{GasModelRef, PressureCalibration, Record, TemperatureCalibration};
use isochor_core::{Gas, Setup, SetupFx, Status, Tank, fx};
use isochor_sim::Error;
use isochor_sim::bench::Bench;
use isochor_sim::link::emulated::EmulatedDevice;
use isochor_sim::link::transport::{MemoryEnd, Tcp};
use isochor_sim::link::{Client, memory_pair};

const SERIAL: u64 = 20_260_001;
const SECRET_HEX: &str = "8f1d2c3b4a5968778695a4b3c2d1e0f00112233445566778899aabbccddeeff0";

fn secret() -> Secret {
    Secret::from_hex(SECRET_HEX).unwrap()
}

/// A device thread on one end of an in-memory pipe; returns the client end
/// and a handle giving the device back when the client hangs up.
fn start() -> (Client<MemoryEnd>, thread::JoinHandle<EmulatedDevice>) {
    let (host, mut dev) = memory_pair();
    let handle = thread::spawn(move || {
        let mut device = EmulatedDevice::new(SERIAL, secret()).unwrap();
        device.serve(&mut dev).unwrap();
        device
    });
    (Client::new(host, Duration::from_secs(5)), handle)
}

fn n2_setup() -> SetupFx {
    SetupFx::from_f64(&Setup::new(Gas::Nitrogen, Tank::new(0.050, 200e5))).unwrap()
}

/// The nominal sensors of the reference board, on a bench.
fn bench() -> Bench {
    Bench::new(
        PressureCalibration::nominal().0,
        TemperatureCalibration::nominal().0,
        101_325.0,
    )
}

fn telemetry(msgs: &[Message]) -> Vec<Telemetry> {
    msgs.iter()
        .filter_map(|m| match m {
            Message::Telemetry(t) => Some(*t),
            _ => None,
        })
        .collect()
}

#[test]
fn requests_and_signed_commands_over_memory() {
    let (client, handle) = start();
    let mut client = client.with_secret(secret());
    client.ping(7).unwrap();
    let id = client.identity().unwrap();
    assert_eq!(id.serial, SERIAL);
    assert_eq!(id.protocol, link::PROTOCOL_VERSION);
    assert_eq!(usize::from(id.max_frame_len), link::MAX_FRAME_LEN);
    assert_ne!(id.capabilities & capability::SAMPLE_INJECTION, 0);

    // Nothing stored yet: safe defaults, said so.
    let r = client.read_record::<SetupFx>().unwrap();
    assert_eq!(
        (r.value, r.origin),
        (SetupFx::safe_default(), Origin::Default)
    );

    // A signed write, read back.
    client.write_record(&n2_setup()).unwrap();
    let r = client.read_record::<SetupFx>().unwrap();
    assert_eq!((r.value, r.origin), (n2_setup(), Origin::Stored));

    // Zeroing needs a present reading: refused before any sample.
    assert!(matches!(
        client.signed(Command::ZeroCalibration {
            channel: SensorChannel::Pressure,
        }),
        Err(Error::Invalid(_))
    ));
    // Under pressure (250 bar, a connected 200 bar vessel over-filled by
    // about a quarter): the telemetry says `over_fill`; the pressure zero is
    // refused with the reading and what to do, nothing is stored; at room
    // temperature the temperature zero is refused likewise.
    let before = client.read_record::<PressureCalibration>().unwrap();
    let loaded = bench().sample(250e5, 293.15).unwrap();
    client.take_unsolicited();
    client.inject(500, &Bench::raw_codes(&loaded)).unwrap();
    client.collect(Duration::from_millis(200)).unwrap();
    let t = telemetry(&client.take_unsolicited());
    let st = Status::from_bits(t.last().unwrap().status);
    assert!(st.contains(Status::OVER_FILL), "{st}");
    match client.signed(Command::ZeroCalibration {
        channel: SensorChannel::Pressure,
    }) {
        Err(Error::Refused(m)) => {
            assert!(m.contains("pressure zero refused"), "{m}");
            assert!(m.contains("reads 250.0"), "{m}");
            assert!(m.contains("vent the transducer to atmosphere"), "{m}");
        }
        other => panic!("{other:?}"),
    }
    match client.signed(Command::ZeroCalibration {
        channel: SensorChannel::Temperature,
    }) {
        Err(Error::Refused(m)) => {
            assert!(m.contains("temperature zero refused"), "{m}");
            assert!(m.contains("ice bath"), "{m}");
        }
        other => panic!("{other:?}"),
    }
    assert_eq!(client.read_record::<PressureCalibration>().unwrap(), before);
    // A vented vessel reading 0.2 bar too high: the zero takes it out.
    let vented = bench().sample(101_325.0 + 20_000.0, 293.15).unwrap();
    client.inject(1_000, &Bench::raw_codes(&vented)).unwrap();
    client
        .signed(Command::ZeroCalibration {
            channel: SensorChannel::Pressure,
        })
        .unwrap();
    let cal = client.read_record::<PressureCalibration>().unwrap();
    assert_eq!(cal.origin, Origin::Stored);
    assert_eq!(cal.value.0.sequence, 1);
    // The same code now reads the barometric pressure (within 0.01 Pa).
    client.take_unsolicited();
    client.inject(2_000, &Bench::raw_codes(&vented)).unwrap();
    client.collect(Duration::from_millis(200)).unwrap();
    let t = telemetry(&client.take_unsolicited());
    let p = fx::to_f64(fx::Pressure::from_bits(t.last().unwrap().pressure_pa));
    assert!((p - 101_325.0).abs() < 0.01, "{p}");

    // Several commands in one session, then a reboot (new session after it).
    client.signed(Command::ClearAlarms).unwrap();
    client.signed(Command::Reboot).unwrap();
    client.signed(Command::ClearAlarms).unwrap();
    // The setup and the calibration survived the restart (they are in flash).
    let r = client.read_record::<SetupFx>().unwrap();
    assert_eq!((r.value, r.origin), (n2_setup(), Origin::Stored));
    assert_eq!(client.read_record::<PressureCalibration>().unwrap(), cal);
    let boots: Vec<_> = client
        .take_unsolicited()
        .into_iter()
        .filter_map(|m| match m {
            Message::Boot(b) => Some(b.report.reason),
            _ => None,
        })
        .collect();
    assert_eq!(boots, vec![ResetReason::Requested]);

    // A gas-model blob that is not a table: refused, nothing committed.
    let junk: Vec<u8> = (0..5000u32).map(|i| (i % 251) as u8).collect();
    match client.load_gas_model(&junk, &mut |_| {}) {
        Err(Error::Refused(m)) => assert!(m.contains("gas-model table"), "{m}"),
        other => panic!("{other:?}"),
    }
    assert_eq!(
        client.read_record::<GasModelRef>().unwrap().value,
        GasModelRef::NONE
    );
    // A real table in chunks: committed, and used after the restart it
    // causes.
    let table = TableBuf::from_table(&builtin::table(Gas::Nitrogen).unwrap()).unwrap();
    let mut blob = vec![0u8; 4096];
    let n = table.to_blob(&mut blob).unwrap();
    blob.truncate(n);
    let mut sent = 0;
    client.load_gas_model(&blob, &mut |n| sent = n).unwrap();
    assert_eq!(sent, blob.len());
    let g = client.read_record::<GasModelRef>().unwrap();
    assert_eq!(g.value.len as usize, blob.len());
    assert_eq!(g.value.crc, isochor_core::checksum::crc32c(&blob));

    // Sample injection (no signature: the emulated device takes samples
    // this way) gives telemetry from the whole chain.
    let s = bench().sample(150e5, 293.15).unwrap();
    client.take_unsolicited();
    client.inject(10_000, &Bench::raw_codes(&s)).unwrap();
    client.collect(Duration::from_millis(200)).unwrap();
    let t = telemetry(&client.take_unsolicited());
    assert_eq!(t.len(), 1);
    assert!(fx::to_f64(t[0].mass()) > 8.0);
    let d = client.diagnostics().unwrap();
    assert_eq!(d.boot.reason, ResetReason::Requested);
    // Starts: power-on, the setup's new gas, the reboot, the new gas model.
    assert_eq!(d.boot.boots, 4);

    drop(client);
    let device = handle.join().unwrap();
    assert_eq!(device.boots(), 4);
}

#[test]
fn out_of_range_and_unsigned_changes_are_refused() {
    let (client, handle) = start();
    let mut client = client.with_secret(secret());
    client.write_record(&n2_setup()).unwrap();

    // An out-of-range value that bypasses the host's own validation.
    let mut bad = n2_setup();
    bad.standard.pressure_pa = U28F4::from_num(10_000);
    let cmd = Command::WriteRecord {
        kind: SetupFx::KIND.0,
        version: SetupFx::VERSION,
        bytes: heapless::Vec::from_slice(postcard::to_slice(&bad, &mut [0u8; 128]).unwrap())
            .unwrap(),
    };
    match client.signed(cmd) {
        Err(Error::Invalid(m)) => assert!(m.contains("standard pressure"), "{m}"),
        other => panic!("{other:?}"),
    }
    assert_eq!(client.read_record::<SetupFx>().unwrap().value, n2_setup());

    // The host refuses to sign an invalid record at all.
    assert!(matches!(client.write_record(&bad), Err(Error::Core(_))));

    // Wrong secret: refused, nothing changed.
    let (other, handle2) = start();
    let mut other = other.with_secret(Secret::new([1; 32]));
    match other.signed(Command::ClearAlarms) {
        Err(Error::Refused(m)) => assert!(m.contains("wrong secret"), "{m}"),
        r => panic!("{r:?}"),
    }
    // No secret at all.
    let (plain, handle3) = start();
    let mut plain = plain;
    assert!(matches!(
        plain.signed(Command::Reboot),
        Err(Error::Invalid(_))
    ));

    // A replayed frame: same counter and signature again.
    let nonce = match client
        .request(|tag| Message::GetChallenge(link::GetChallenge { tag }))
        .unwrap()
    {
        Outcome::Challenge { nonce, .. } => nonce,
        o => panic!("{o:?}"),
    };
    let command = Command::ClearAlarms;
    let mac = auth::sign_command(&secret(), SERIAL, &nonce, 1, &command).unwrap();
    let frame = |tag| {
        Message::Signed(Signed {
            tag,
            counter: 1,
            mac,
            command: command.clone(),
        })
    };
    assert!(matches!(
        client.request(frame).unwrap(),
        Outcome::Done { .. }
    ));
    assert_eq!(
        client.request(frame).unwrap(),
        Outcome::Refused(Refusal::Replay)
    );

    drop((client, other, plain));
    // Writing a setup of another gas than the default restarts the gauge.
    assert_eq!(handle.join().unwrap().boots(), 2);
    assert_eq!(handle2.join().unwrap().boots(), 1);
    assert_eq!(handle3.join().unwrap().boots(), 1);
}

fn isochor(args: &[&str], env: &[(&str, &str)], stdin: Option<&[u8]>) -> Output {
    let mut cmd = Process::new(env!("CARGO_BIN_EXE_isochor"));
    cmd.args(args)
        .env_remove("ISOCHOR_SECRET")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    for (k, v) in env {
        cmd.env(k, v);
    }
    let mut child = cmd.spawn().unwrap();
    let mut input = child.stdin.take().unwrap();
    if let Some(bytes) = stdin {
        input.write_all(bytes).unwrap();
    }
    drop(input);
    child.wait_with_output().unwrap()
}

fn frame(m: &Message) -> Vec<u8> {
    let mut out = [0u8; link::MAX_FRAME_LEN];
    let n = link::encode(m, &mut out).unwrap();
    out[..n].to_vec()
}

/// A capture: two telemetry frames, line noise, and an alarm.
fn capture() -> Vec<u8> {
    let mut t = Telemetry {
        seq: 41,
        uptime_ms: 12_345,
        pressure_pa: 20_000_000 * 16,
        temperature_k: (308.15 * 65536.0) as u32,
        mass_kg: (10.9 * (1u64 << 40) as f64) as u64,
        fill_fraction: (0.95 * (1u64 << 32) as f64) as u64,
        rate_kg_h: Some(-(1i64 << 31)),
        time_to_empty_s: Some(3600 * 21),
        ..Telemetry::default()
    };
    let mut bytes = frame(&Message::Telemetry(t));
    bytes.extend_from_slice(&[0x31, 0x99, 0x42, 0x00]); // noise, ends as a bad frame
    t.seq = 42;
    t.status = Status::TWO_PHASE.bits();
    bytes.extend(frame(&Message::Telemetry(t)));
    bytes.extend(frame(&Message::Alarm(link::AlarmEvent {
        seq: 1,
        uptime_ms: 12_400,
        alarm: 3,
        transition: link::AlarmTransition::Raised,
        status: 0,
        mass_kg: 0,
    })));
    bytes
}

#[test]
fn listen_jsonl_csv_and_text_from_stdin() {
    let out = isochor(
        &["listen", "--stdin", "--format", "jsonl"],
        &[],
        Some(&capture()),
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let lines: Vec<serde_json::Value> = String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(lines.len(), 4);
    assert_eq!(lines[0]["type"], "telemetry");
    assert_eq!(lines[0]["seq"], 41);
    assert_eq!(lines[0]["pressure_pa"], 2.0e7);
    assert!((lines[0]["mass_kg"].as_f64().unwrap() - 10.9).abs() < 1e-9);
    assert_eq!(lines[0]["rate_kg_h"], -0.5);
    assert_eq!(lines[0]["time_to_empty_s"], 75_600);
    assert_eq!(lines[1]["type"], "bad_frame");
    assert_eq!(lines[2]["mass_kg"], serde_json::Value::Null); // two-phase: not valid
    assert_eq!(lines[2]["status"][0], "two_phase");
    assert_eq!(lines[3]["type"], "alarm");
    assert_eq!(lines[3]["transition"], "raised");

    let out = isochor(
        &["listen", "--stdin", "--format", "csv"],
        &[],
        Some(&capture()),
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let rows: Vec<&str> = text.lines().collect();
    assert_eq!(rows.len(), 3);
    assert!(rows[0].starts_with("seq,uptime_ms,pressure_pa"));
    assert!(rows[1].starts_with("41,12345,20000000,"));

    let out = isochor(&["listen", "--stdin"], &[], Some(&capture()));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("CAUTION"));
    assert!(text.contains("200.000 bar abs"), "{text}");
    assert!(text.contains("ALARM 1 RAISED"));
    assert!(text.contains("! bad frame"));
    assert!(text.contains("3 frames, 1 bad frames"), "{text}");

    // A source is required, and only one.
    let out = isochor(&["listen"], &[], None);
    assert_eq!(out.status.code(), Some(2));
}

/// An emulated device on a loopback TCP port, serving one connection per
/// expected command.
fn tcp_device(connections: usize) -> (String, thread::JoinHandle<Vec<EmulatedDevice>>) {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = listener.local_addr().unwrap().to_string();
    let handle = thread::spawn(move || {
        let mut devices = Vec::new();
        let mut device = EmulatedDevice::new(SERIAL, secret()).unwrap();
        for _ in 0..connections {
            let (stream, _) = listener.accept().unwrap();
            let mut tcp = Tcp::from_stream(stream);
            device.serve(&mut tcp).unwrap();
        }
        devices.push(device);
        devices
    });
    (addr, handle)
}

#[test]
fn send_over_tcp() {
    let (addr, handle) = tcp_device(4);
    let out = isochor(&["send", "--tcp", &addr, "ping"], &[], None);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(String::from_utf8_lossy(&out.stdout).starts_with("pong in"));

    let write = [
        "send",
        "--tcp",
        &addr,
        "write-config",
        "--gas",
        "nitrogen",
        "--capacity",
        "50L",
        "--rated-pressure",
        "200bar",
    ];
    // Without a secret: refused before anything is sent.
    let out = isochor(&write, &[], None);
    assert_eq!(
        out.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = isochor(&write, &[("ISOCHOR_SECRET", SECRET_HEX)], None);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(String::from_utf8_lossy(&out.stdout).contains("CAUTION"));

    let out = isochor(
        &["send", "--tcp", &addr, "--format", "json", "read-config"],
        &[],
        None,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["gas"], "nitrogen");
    assert_eq!(v["origin"], "stored");
    assert!((v["water_capacity_m3"].as_f64().unwrap() - 0.05).abs() < 1e-9);

    // Bad input: exit 2 without connecting.
    let out = isochor(
        &[
            "send",
            "--tcp",
            &addr,
            "write-config",
            "--gas",
            "nitrogen",
            "--capacity",
            "-5L",
            "--rated-pressure",
            "200bar",
        ],
        &[("ISOCHOR_SECRET", SECRET_HEX)],
        None,
    );
    assert_eq!(out.status.code(), Some(2));

    // A secret file with the wrong secret: refused by the device.
    let dir = std::env::temp_dir().join(format!("isochor-secret-{}", std::process::id()));
    std::fs::write(&dir, "00".repeat(32)).unwrap();
    let out = isochor(
        &[
            "send",
            "--tcp",
            &addr,
            "--secret-file",
            dir.to_str().unwrap(),
            "clear-alarms",
        ],
        &[],
        None,
    );
    let _ = std::fs::remove_file(&dir);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("wrong secret"));

    // Each connection started the device afresh from its flash.
    let devices = handle.join().unwrap();
    assert_eq!(devices[0].boots(), 5);
}
