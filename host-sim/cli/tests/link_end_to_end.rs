//! Host and device over an in-memory link and over TCP on the loopback
//! interface: requests, signed commands, refusals, and the `isochor listen`
//! and `isochor send` commands.

use std::io::Write;
use std::net::TcpListener;
use std::process::{Command as Process, Output, Stdio};
use std::thread;
use std::time::Duration;

use isochor_core::app::Zero;
use isochor_core::auth::{self, Secret};
use isochor_core::link::{
    self, Command, FromDevice, Outcome, Refusal, ResetReason, SensorChannel, Signed, Telemetry,
    ToDevice, capability,
};
use isochor_core::model::device::{TableBuf, builtin};
use isochor_core::prepared::{GaugeConfig, PreparedBuf};
use isochor_core::store::Origin;
use isochor_core::{Gas, Setup, SetupFx, Status, Tank, fx};
use isochor_sim::Error;
use isochor_sim::bench::Bench;
use isochor_sim::link::emulated::{EmulatedDevice, SLOT_LEN};
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

fn setup(gas: Gas) -> SetupFx {
    SetupFx::from_f64(&Setup::new(gas, Tank::new(0.050, 200e5))).unwrap()
}

/// The reference board's nominal configuration for a 50 L, 200 bar
/// cylinder of `gas`.
fn config(gas: Gas) -> GaugeConfig {
    GaugeConfig::nominal(setup(gas))
}

/// The nominal sensors of the reference board, on a bench.
fn bench() -> Bench {
    let c = config(Gas::Nitrogen);
    Bench::new(c.pressure, c.temperature, 101_325.0)
}

fn telemetry(msgs: &[FromDevice]) -> Vec<Telemetry> {
    msgs.iter()
        .filter_map(|m| match m {
            FromDevice::Telemetry(t) => Some(*t),
            _ => None,
        })
        .collect()
}

/// Injects a sample of `p_pa` at 20 °C and returns its telemetry.
fn sample_at(client: &mut Client<MemoryEnd>, at_ms: u64, p_pa: f64) -> Telemetry {
    let s = bench().sample(p_pa, 293.15).unwrap();
    client.take_unsolicited();
    client.inject(at_ms, s.pressure, s.temperature).unwrap();
    client.collect(Duration::from_millis(200)).unwrap();
    let t = telemetry(&client.take_unsolicited());
    assert_eq!(t.len(), 1, "one telemetry frame per sample");
    t[0]
}

fn refused(r: Result<(), Error>) -> String {
    match r {
        Err(Error::Refused(m)) => m,
        other => panic!("expected a refusal, got {other:?}"),
    }
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
    assert_eq!(id.config_capacity, SLOT_LEN);
    assert_ne!(id.capabilities & capability::SAMPLE_INJECTION, 0);

    // Nothing stored yet: no configuration, said so; samples give status
    // only.
    let d = client.read_config().unwrap();
    assert_eq!((d.blob.len(), d.origin), (0, Origin::Default));
    assert_eq!(d.config().unwrap(), None);
    let t = sample_at(&mut client, 500, 150e5);
    assert!(t.status().contains(Status::CONFIG_UNUSABLE));
    assert!(!t.content_valid() || t.mass_kg == 0);

    // Zeroing needs a present reading: refused before any configuration.
    let m = refused(client.signed(Command::ZeroCalibration {
        channel: SensorChannel::Pressure,
    }));
    assert!(m.contains("no valid pressure reading"), "{m}");

    // A configuration, prepared here, loaded in pieces and read back whole.
    let (blob, _) = PreparedBuf::build(&config(Gas::Nitrogen)).unwrap();
    let mut sent = 0;
    client
        .load_config(blob.bytes(), &mut |n, _| sent = n)
        .unwrap();
    assert_eq!(sent, blob.bytes().len());
    let d = client.read_config().unwrap();
    assert_eq!(d.blob, blob.bytes());
    assert_eq!(d.origin, Origin::Stored);
    assert_eq!(d.config().unwrap(), Some(config(Gas::Nitrogen)));

    // Under pressure (250 bar, a connected 200 bar vessel over-filled by
    // about a quarter): the telemetry says `over_fill`; the pressure zero is
    // refused with the reading and what to do, nothing is stored; at room
    // temperature the temperature zero is refused likewise.
    let t = sample_at(&mut client, 1_000, 250e5);
    assert!(t.status().contains(Status::OVER_FILL), "{}", t.status());
    let m = refused(client.signed(Command::ZeroCalibration {
        channel: SensorChannel::Pressure,
    }));
    assert!(m.contains("pressure zero refused"), "{m}");
    assert!(m.contains("reads +248.987 bar"), "{m}");
    assert!(m.contains("vent the transducer to atmosphere"), "{m}");
    let m = refused(client.signed(Command::ZeroCalibration {
        channel: SensorChannel::Temperature,
    }));
    assert!(
        m.contains("temperature zero refused") && m.contains("+20.00 K"),
        "{m}"
    );
    assert!(m.contains("crushed ice"), "{m}");
    assert_eq!(client.read_config().unwrap().zero, Zero::default());
    // Just above the bound (6 bar for this 0–300 bar transducer: 2 % of
    // its span): refused; just below: it would be taken (not sent here).
    sample_at(&mut client, 2_000, 101_325.0 + 6.2e5);
    let m = refused(client.signed(Command::ZeroCalibration {
        channel: SensorChannel::Pressure,
    }));
    assert!(m.contains("within 6.000 bar"), "{m}");
    // A vented transducer reading 0.2 bar too high: the zero takes it out
    // (samples after a gap longer than the tracker's restart it, so the
    // smoothing does not carry the old reading over).
    sample_at(&mut client, 400_000, 101_325.0 + 20_000.0);
    client
        .signed(Command::ZeroCalibration {
            channel: SensorChannel::Pressure,
        })
        .unwrap();
    let zero = client.read_config().unwrap().zero;
    // Within one converter step (2^22 codes per 150 bar: 3.6 Pa).
    assert!((zero.to_f64().0 + 20_000.0).abs() < 3.6, "{zero:?}");
    let t = sample_at(&mut client, 800_000, 101_325.0 + 20_000.0);
    let p = fx::to_f64(t.pressure());
    assert!((p - 101_325.0).abs() < 0.01, "{p}");

    // Several commands in one session, then a reboot (new session after it).
    client.signed(Command::ClearAlarms).unwrap();
    client.signed(Command::Reboot).unwrap();
    client.signed(Command::ClearAlarms).unwrap();
    // The configuration and the zero survived the restart (they are in
    // flash).
    let d = client.read_config().unwrap();
    assert_eq!((d.blob.as_slice(), d.zero), (blob.bytes(), zero));
    let boots: Vec<_> = client
        .take_unsolicited()
        .into_iter()
        .filter_map(|m| match m {
            FromDevice::Boot(b) => Some(b.report.reason),
            _ => None,
        })
        .collect();
    assert_eq!(boots, vec![ResetReason::Requested]);

    // Bytes that are not a prepared configuration: refused whole, nothing
    // committed.
    let junk: Vec<u8> = (0..5000u32).map(|i| (i % 251) as u8).collect();
    let m = refused(client.load_config(&junk, &mut |_, _| {}));
    assert!(m.contains("does not validate"), "{m}");
    // The device's typed reason, in the core's words.
    assert!(m.contains("(prepared configuration header)"), "{m}");
    // A configuration damaged after it was prepared (its own CRC-32C no
    // longer matches): refused too.
    let mut damaged = blob.bytes().to_vec();
    let mid = damaged.len() / 2;
    damaged[mid] ^= 0x10;
    let m = refused(client.load_config(&damaged, &mut |_, _| {}));
    assert!(m.contains("does not validate"), "{m}");
    assert!(m.contains("(configuration checksum)"), "{m}");
    // Pieces whose CRC-32C over the whole is not the one announced.
    let m = refused(client.signed(Command::ConfigChunk {
        offset: 0,
        total_len: 4,
        blob_crc: 0xDEAD_BEEF,
        bytes: heapless::Vec::from_slice(&[1, 2, 3, 4]).unwrap(),
    }));
    assert!(m.contains("CRC-32C"), "{m}");
    // A piece out of order.
    let m = refused(client.signed(Command::ConfigChunk {
        offset: 128,
        total_len: 400,
        blob_crc: 0,
        bytes: heapless::Vec::from_slice(&[0; 128]).unwrap(),
    }));
    assert!(m.contains("out of order"), "{m}");
    assert_eq!(client.read_config().unwrap().blob, blob.bytes());

    // Another gas: taken at once (no restart), the zero kept.
    client
        .configure(&config(Gas::Methane), &mut |_, _| {})
        .unwrap();
    let d = client.read_config().unwrap();
    assert_eq!(d.config().unwrap().unwrap().setup.gas, Gas::Methane);
    assert_eq!(d.zero, zero);
    // Sample injection (no signature: the emulated device takes samples
    // this way) gives telemetry from the whole chain: 150 bar of methane
    // at 20 °C in 50 L is about 6 kg (Z ≈ 0.83, from memory; the content
    // tests check the figure itself, here only its order).
    let t = sample_at(&mut client, 2_000_000, 150e5 + 20_000.0);
    assert!(t.content_valid());
    let mass = fx::to_f64(t.mass());
    assert!((4.5..7.0).contains(&mass), "{mass}");
    let d = client.diagnostics().unwrap();
    assert_eq!(d.boot.reason, ResetReason::Requested);
    // Starts: power-on and the reboot.
    assert_eq!(d.boot.boots, 2);

    drop(client);
    let device = handle.join().unwrap();
    assert_eq!(device.boots(), 2);
}

#[test]
fn out_of_range_and_unsigned_changes_are_refused() {
    let (client, handle) = start();
    let mut client = client.with_secret(secret());
    client
        .configure(&config(Gas::Nitrogen), &mut |_, _| {})
        .unwrap();

    // The host refuses to prepare an invalid configuration at all.
    let mut bad = config(Gas::Nitrogen);
    bad.barometric_pa = fx::Pressure::from_num(10_000);
    assert!(matches!(
        client.configure(&bad, &mut |_, _| {}),
        Err(Error::Core(_))
    ));

    // Wrong secret: refused, nothing changed.
    let (other, handle2) = start();
    let mut other = other.with_secret(Secret::new([1; 32]));
    let m = refused(other.signed(Command::ClearAlarms));
    assert!(m.contains("wrong secret"), "{m}");
    // No secret at all.
    let (plain, handle3) = start();
    let mut plain = plain;
    assert!(matches!(
        plain.signed(Command::Reboot),
        Err(Error::NoSecret)
    ));
    // A change to a configuration the device does not hold: found before
    // anything is signed.
    assert!(matches!(
        isochor_sim::send::execute(
            &mut plain,
            &isochor_sim::send::Request::WriteField(Default::default())
        ),
        Err(Error::NoConfiguration)
    ));

    // A replayed frame: same counter and signature again.
    let nonce = match client
        .request(|tag| ToDevice::GetChallenge(link::GetChallenge { tag }))
        .unwrap()
    {
        Outcome::Challenge { nonce, .. } => nonce,
        o => panic!("{o:?}"),
    };
    let command = Signed::encode_command(&Command::ClearAlarms).unwrap();
    let mac = auth::sign_command(&secret(), SERIAL, &nonce, 1, &command);
    let frame = |tag| {
        ToDevice::Signed(Signed {
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
    // A signature over other bytes than those sent (in a new session):
    // refused.
    let nonce = match client
        .request(|tag| ToDevice::GetChallenge(link::GetChallenge { tag }))
        .unwrap()
    {
        Outcome::Challenge { nonce, .. } => nonce,
        o => panic!("{o:?}"),
    };
    let mac = auth::sign_command(&secret(), SERIAL, &nonce, 1, &command);
    let other_cmd = Signed::encode_command(&Command::Reboot).unwrap();
    let forged = |tag| {
        ToDevice::Signed(Signed {
            tag,
            counter: 1,
            mac,
            command: other_cmd.clone(),
        })
    };
    assert_eq!(
        client.request(forged).unwrap(),
        Outcome::Refused(Refusal::BadSignature)
    );

    drop((client, other, plain));
    // A new configuration needs no restart.
    assert_eq!(handle.join().unwrap().boots(), 1);
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

fn frame(m: &FromDevice) -> Vec<u8> {
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
    let mut bytes = frame(&FromDevice::Telemetry(t));
    bytes.extend_from_slice(&[0x31, 0x99, 0x42, 0x00]); // noise, ends as a bad frame
    t.seq = 42;
    t.status = Status::TWO_PHASE.bits();
    bytes.extend(frame(&FromDevice::Telemetry(t)));
    bytes.extend(frame(&FromDevice::Alarm(link::AlarmEvent {
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
    assert!(text.contains("200.000 bar"));
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
    let (addr, handle) = tcp_device(7);
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

    assert_eq!(v["gas_model"], "built-in");
    assert_eq!(v["zero_pressure_pa"], 0.0);

    // A gas-model table built on the host, used in the configuration.
    let table = TableBuf::from_table(&builtin::table(Gas::Nitrogen).unwrap()).unwrap();
    let mut bytes = vec![0u8; 8192];
    let n = table.to_blob(&mut bytes).unwrap();
    let file = std::env::temp_dir().join(format!("isochor-table-{}", std::process::id()));
    std::fs::write(&file, &bytes[..n]).unwrap();
    let out = isochor(
        &[
            "send",
            "--tcp",
            &addr,
            "load-gas-model",
            "--file",
            file.to_str().unwrap(),
        ],
        &[("ISOCHOR_SECRET", SECRET_HEX)],
        None,
    );
    let _ = std::fs::remove_file(&file);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = isochor(
        &["send", "--tcp", &addr, "--format", "json", "read-config"],
        &[],
        None,
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["gas_model"], "loaded");
    assert_eq!(v["gas"], "nitrogen");

    // A zero calibration without a present reading: refused by the
    // device, with what to do.
    let out = isochor(
        &[
            "send",
            "--tcp",
            &addr,
            "zero-calibration",
            "--channel",
            "temperature",
        ],
        &[("ISOCHOR_SECRET", SECRET_HEX)],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("no valid temperature reading"),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );

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
    assert_eq!(devices[0].boots(), 7);
}

#[test]
fn send_a_mixture_and_read_its_composition_back() {
    let (addr, handle) = tcp_device(3);
    let cache = std::env::temp_dir().join(format!("isochor-mix-send-{}", std::process::id()));
    let cache_dir = cache.to_str().unwrap();
    let out = isochor(
        &[
            "send",
            "--tcp",
            &addr,
            "write-config",
            "--gas",
            "argon=82%,carbon_dioxide=18%",
            "--capacity",
            "50L",
            "--rated-pressure",
            "200bar",
        ],
        &[
            ("ISOCHOR_SECRET", SECRET_HEX),
            ("ISOCHOR_CACHE_DIR", cache_dir),
        ],
        None,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
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
    // The composition as given (GERG-2008 order), and the table built for it.
    assert_eq!(v["gas"], "carbon_dioxide=18%,argon=82%");
    assert!((v["composition"]["argon"].as_f64().unwrap() - 0.82).abs() < 1e-9);
    assert!((v["composition"]["carbon_dioxide"].as_f64().unwrap() - 0.18).abs() < 1e-9);
    assert_eq!(v["gas_model"], "loaded");
    let out = isochor(&["send", "--tcp", &addr, "read-config"], &[], None);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("gas carbon_dioxide=18%,argon=82%"), "{text}");
    assert!(text.contains("Mixture: the figures hold"), "{text}");
    let _ = std::fs::remove_dir_all(&cache);
    handle.join().unwrap();
}

/// `send write-config` reads the tank's pressures as `content` does: barg
/// adds `--barometric` (the standard atmosphere, 101 325 Pa by definition,
/// when not given), and a given `--barometric` is stored in the device; a
/// later write without it keeps the stored one.
#[test]
fn write_config_reads_gauge_pressures_and_stores_the_barometric_pressure() {
    let (addr, handle) = tcp_device(4);
    let read = |addr: &str| -> serde_json::Value {
        let out = isochor(
            &["send", "--tcp", addr, "--format", "json", "read-config"],
            &[],
            None,
        );
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let write = |addr: &str, rest: &[&str]| -> serde_json::Value {
        let mut args = vec![
            "send",
            "--tcp",
            addr,
            "--format",
            "json",
            "write-config",
            "--gas",
            "nitrogen",
            "--capacity",
            "50L",
        ];
        args.extend_from_slice(rest);
        let out = isochor(&args, &[("ISOCHOR_SECRET", SECRET_HEX)], None);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).unwrap()
    };
    // The device holds pressures in sixteenths of a pascal: 1 Pa bounds the
    // rounding.
    let near = |v: &serde_json::Value, x: f64| (v.as_f64().unwrap() - x).abs() <= 1.0;

    let w = write(
        &addr,
        &[
            "--rated-pressure",
            "200bar",
            "--gauge",
            "--barometric",
            "95kPa",
        ],
    );
    assert!(
        near(&w["written"]["rated_pressure_pa"], 200e5 + 95e3),
        "{w}"
    );
    assert!(near(&w["written"]["barometric_pa"], 95e3), "{w}");
    let r = read(&addr);
    assert!(near(&r["rated_pressure_pa"], 200e5 + 95e3), "{r}");
    assert!(near(&r["barometric_pa"], 95e3), "{r}");

    let w = write(&addr, &["--rated-pressure", "200barg"]);
    assert!(
        near(&w["written"]["rated_pressure_pa"], 200e5 + 101_325.0),
        "{w}"
    );
    let r = read(&addr);
    assert!(near(&r["rated_pressure_pa"], 200e5 + 101_325.0), "{r}");
    assert!(near(&r["barometric_pa"], 95e3), "kept: {r}");
    handle.join().unwrap();
}
