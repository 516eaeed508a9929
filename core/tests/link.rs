//! The serial link: known vectors, round trips of every message, frame bounds,
//! the accumulator fed in random pieces, and single-bit-flip detection.

use heapless::Vec as HVec;
use isochor_core::link::{
    self, Accumulator, AlarmEvent, AlarmTransition, Boot, BootReport, Command, ConfigPart,
    Diagnostics, Feed, FromDevice, GetChallenge, GetDiagnostics, GetIdentity, Identity,
    InjectSample, Kind, MAX_FRAME_LEN, Outcome, Ping, ReadConfig, Refusal, Reply, ResetReason,
    SensorChannel, Signed, Telemetry, ToDevice, Wire,
};
use isochor_core::{Error, checksum};
use proptest::collection::vec;
use proptest::prelude::*;
use proptest::strategy::ValueTree;

// ---- known vectors ----

#[test]
fn crc_check_values() {
    // CRC catalogue (Greg Cook, "Catalogue of parametrised CRC algorithms",
    // reveng.sourceforge.io): check value = CRC of the ASCII string "123456789".
    let iso_hdlc = crc::Crc::<u32>::new(&crc::CRC_32_ISO_HDLC);
    assert_eq!(iso_hdlc.checksum(b"123456789"), 0xCBF4_3926); // CRC-32/ISO-HDLC
    assert_eq!(checksum::crc32c(b"123456789"), 0xE306_9283); // CRC-32/ISCSI (CRC-32C), used here
    let xmodem = crc::Crc::<u16>::new(&crc::CRC_16_XMODEM);
    assert_eq!(xmodem.checksum(b"123456789"), 0x31C3); // CRC-16/XMODEM
}

#[test]
fn cobs_examples() {
    // Cheshire & Baker, "Consistent Overhead Byte Stuffing", IEEE/ACM
    // Transactions on Networking 7(2), 1999 (examples as tabulated in the
    // COBS literature).
    let cases: [(&[u8], &[u8]); 2] = [
        (&[0x0A, 0x0B, 0x00, 0x0C], &[0x03, 0x0A, 0x0B, 0x02, 0x0C]),
        (&[0x00, 0x00, 0x01, 0x00], &[0x01, 0x01, 0x02, 0x01, 0x01]),
    ];
    for (raw, encoded) in cases {
        let mut out = [0u8; 16];
        let n = cobs::encode(raw, &mut out);
        assert_eq!(&out[..n], encoded);
        let mut back = [0u8; 16];
        let m = cobs::decode(encoded, &mut back).unwrap().frame_size();
        assert_eq!(&back[..m], raw);
    }
}

#[test]
fn frame_layout_is_as_documented() {
    let msg = ToDevice::Ping(Ping { tag: 1, token: 2 });
    let mut payload = [0u8; link::MAX_PAYLOAD_LEN];
    let n = link::encode_payload(&msg, &mut payload).unwrap();
    // version, kind, postcard body (varint tag 1, varint token 2), CRC-32C LE.
    assert_eq!(&payload[..4], &[link::PROTOCOL_VERSION, 0x10, 0x01, 0x02]);
    assert_eq!(n, 8);
    let crc = checksum::crc32c(&payload[..4]);
    assert_eq!(&payload[4..8], &crc.to_le_bytes());
    let mut frame = [0u8; MAX_FRAME_LEN];
    let f = link::encode(&msg, &mut frame).unwrap();
    let mut cobs_part = [0u8; 32];
    let c = cobs::encode(&payload[..n], &mut cobs_part);
    assert_eq!(&frame[..f - 1], &cobs_part[..c]);
    assert_eq!(frame[f - 1], 0);
}

#[test]
fn max_frame_is_small_and_reached_by_no_message() {
    // A compile-time figure: print it for docs/measured.md.
    println!(
        "MAX_BODY_LEN = {}, MAX_FRAME_LEN = {MAX_FRAME_LEN}",
        link::MAX_BODY_LEN
    );
    const { assert!(MAX_FRAME_LEN <= 256) };
    // The largest messages with every field at its longest.
    let chunk = Command::ConfigChunk {
        offset: u32::MAX,
        total_len: u32::MAX,
        blob_crc: u32::MAX,
        bytes: HVec::from_slice(&[0xFF; link::CHUNK_MAX_LEN]).unwrap(),
    };
    let signed = ToDevice::Signed(Signed {
        tag: u16::MAX,
        counter: u32::MAX,
        mac: [0xFF; 32],
        command: Signed::encode_command(&chunk).unwrap(),
    });
    let mut out = [0u8; MAX_FRAME_LEN];
    let n = link::encode(&signed, &mut out).unwrap();
    assert_eq!(link::decode::<ToDevice>(&out[..n]).unwrap(), signed);
    let big = [
        FromDevice::Reply(Reply {
            tag: u16::MAX,
            outcome: Outcome::ConfigPart(ConfigPart {
                total_len: u32::MAX,
                crc: u32::MAX,
                origin: u8::MAX,
                zero_pressure: i32::MIN,
                zero_temperature: i32::MIN,
                offset: u32::MAX,
                bytes: HVec::from_slice(&[0xFF; link::CHUNK_MAX_LEN]).unwrap(),
            }),
        }),
        FromDevice::Telemetry(Telemetry {
            seq: u32::MAX,
            uptime_ms: u64::MAX,
            pressure_pa: u32::MAX,
            temperature_k: u32::MAX,
            density_kg_m3: u64::MAX,
            mass_kg: u64::MAX,
            standard_volume_m3: u64::MAX,
            settled_pressure_pa: u32::MAX,
            fill_fraction: u64::MAX,
            rate_kg_h: Some(i64::MIN),
            rate_uncertainty_kg_h: Some(i64::MIN),
            time_to_empty_s: Some(u32::MAX),
            time_to_empty_earliest_s: Some(u32::MAX),
            time_to_empty_latest_s: Some(u32::MAX),
            mass_uncertainty_kg: Some(u64::MAX),
            fill_fraction_uncertainty: Some(u64::MAX),
            leak_loss_per_day: Some(i64::MIN),
            time_to_empty_withheld: Some(u8::MAX),
            status: u32::MAX,
        }),
        FromDevice::Boot(Boot {
            serial: u64::MAX,
            firmware_version: [u8::MAX; 3],
            report: BootReport::new(ResetReason::Panic, u32::MAX)
                .with_location(&"é".repeat(60), u32::MAX),
        }),
        FromDevice::Reply(Reply {
            tag: u16::MAX,
            outcome: Outcome::Diagnostics(Diagnostics {
                uptime_ms: u64::MAX,
                boot: BootReport::new(ResetReason::Watchdog, u32::MAX)
                    .with_location(&"x".repeat(60), u32::MAX),
                stack_peak_bytes: u32::MAX,
                stack_size_bytes: u32::MAX,
                frames: u32::MAX,
                bad_frames: u32::MAX,
                samples: u32::MAX,
            }),
        }),
    ];
    for m in big {
        let mut out = [0u8; MAX_FRAME_LEN];
        let n = link::encode(&m, &mut out).unwrap();
        assert!(n <= MAX_FRAME_LEN);
        assert_eq!(link::decode::<FromDevice>(&out[..n]).unwrap(), m);
    }
}

#[test]
fn unknown_kind_and_other_version_are_typed_errors() {
    let frame_of = |payload_head: &[u8]| {
        let mut payload = payload_head.to_vec();
        payload.extend_from_slice(&checksum::crc32c(payload_head).to_le_bytes());
        let mut out = [0u8; 64];
        let n = cobs::encode(&payload, &mut out);
        out[..n].to_vec()
    };
    assert_eq!(
        link::decode::<ToDevice>(&frame_of(&[link::PROTOCOL_VERSION, 0x7F, 1, 2, 3])),
        Err(Error::UnknownKind(0x7F))
    );
    // A kind of the other family is unknown to a receiver.
    assert_eq!(
        link::decode::<ToDevice>(&frame_of(&[link::PROTOCOL_VERSION, 0x02, 1, 2, 3])),
        Err(Error::UnknownKind(0x02))
    );
    assert_eq!(
        link::decode::<FromDevice>(&frame_of(&[link::PROTOCOL_VERSION, 0x10, 1, 2])),
        Err(Error::UnknownKind(0x10))
    );
    assert_eq!(
        link::decode::<ToDevice>(&frame_of(&[1, 0x10, 1, 2])),
        Err(Error::ProtocolVersion(1))
    );
    // A known kind with a body that does not decode, or has bytes left over.
    assert_eq!(
        link::decode::<ToDevice>(&frame_of(&[link::PROTOCOL_VERSION, 0x10, 0x80])),
        Err(Error::MessageBody)
    );
    assert_eq!(
        link::decode::<ToDevice>(&frame_of(&[link::PROTOCOL_VERSION, 0x10, 1, 2, 3])),
        Err(Error::MessageBody)
    );
    assert_eq!(
        link::decode::<ToDevice>(&frame_of(&[1])),
        Err(Error::FrameLength)
    );
    for k in Kind::ALL {
        assert_eq!(Kind::from_code(k.code()), Some(*k));
    }
}

#[test]
fn accumulator_outcomes() {
    let mut acc = Accumulator::<ToDevice>::new();
    // Too long: dropped up to its delimiter, then in step again.
    let mut stream = vec![0x55u8; MAX_FRAME_LEN + 10];
    stream.push(0);
    let mut frame = [0u8; MAX_FRAME_LEN];
    let msg = ToDevice::GetIdentity(GetIdentity { tag: 9 });
    let n = link::encode(&msg, &mut frame).unwrap();
    stream.extend_from_slice(&[0, 0]); // empty frames are skipped
    stream.extend_from_slice(&frame[..n]);
    stream.extend_from_slice(&[9, 1, 2, 3, 4, 5, 6, 7, 8, 0]); // garbage frame
    let rest = match acc.feed(&stream) {
        Feed::Overfull { rest } => rest,
        other => panic!("{other:?}"),
    };
    let rest = match acc.feed(rest) {
        Feed::Frame { message, rest } => {
            assert_eq!(message, msg);
            rest
        }
        other => panic!("{other:?}"),
    };
    match acc.feed(rest) {
        Feed::BadFrame { error, rest } => {
            assert_eq!(error, Error::FrameCrc);
            assert!(rest.is_empty());
        }
        other => panic!("{other:?}"),
    }
    assert_eq!(acc.feed(&[]), Feed::NeedMore);
    assert_eq!(acc.pending(), 0);
}

// ---- strategies for every message ----

fn channel() -> impl Strategy<Value = SensorChannel> {
    prop_oneof![
        Just(SensorChannel::Pressure),
        Just(SensorChannel::Temperature)
    ]
}

fn bytes<const N: usize>() -> impl Strategy<Value = HVec<u8, N>> {
    vec(any::<u8>(), 0..=N).prop_map(|v| HVec::from_slice(&v).unwrap())
}

fn command() -> impl Strategy<Value = Command> {
    prop_oneof![
        (
            any::<u32>(),
            any::<u32>(),
            any::<u32>(),
            bytes::<{ link::CHUNK_MAX_LEN }>()
        )
            .prop_map(
                |(offset, total_len, blob_crc, bytes)| Command::ConfigChunk {
                    offset,
                    total_len,
                    blob_crc,
                    bytes
                }
            ),
        channel().prop_map(|channel| Command::ZeroCalibration { channel }),
        Just(Command::ClearZero),
        Just(Command::ClearAlarms),
        Just(Command::Reboot),
    ]
}

fn identity() -> impl Strategy<Value = Identity> {
    (
        any::<u64>(),
        any::<u16>(),
        any::<[u8; 3]>(),
        any::<u8>(),
        any::<u16>(),
        any::<(u32, u32)>(),
    )
        .prop_map(
            |(
                serial,
                hardware_rev,
                firmware_version,
                protocol,
                max_frame_len,
                (capabilities, config_capacity),
            )| {
                Identity {
                    serial,
                    hardware_rev,
                    firmware_version,
                    protocol,
                    max_frame_len,
                    capabilities,
                    config_capacity,
                }
            },
        )
}

fn telemetry() -> impl Strategy<Value = Telemetry> {
    (
        (
            any::<u32>(),
            any::<u64>(),
            any::<u32>(),
            any::<u32>(),
            any::<u64>(),
            any::<u64>(),
        ),
        (
            any::<u64>(),
            any::<u32>(),
            any::<u64>(),
            any::<Option<i64>>(),
            any::<Option<u32>>(),
        ),
        (
            any::<Option<u64>>(),
            any::<u32>(),
            any::<Option<i64>>(),
            any::<(Option<u32>, Option<u32>)>(),
            any::<(Option<u64>, Option<i64>)>(),
            any::<Option<u8>>(),
        ),
    )
        .prop_map(
            |((a, b, c, d, e, f), (g, h, i, j, k), (l, m, n, (o, p), (q, r), w))| Telemetry {
                seq: a,
                uptime_ms: b,
                pressure_pa: c,
                temperature_k: d,
                density_kg_m3: e,
                mass_kg: f,
                standard_volume_m3: g,
                settled_pressure_pa: h,
                fill_fraction: i,
                rate_kg_h: j,
                rate_uncertainty_kg_h: n,
                time_to_empty_s: k,
                time_to_empty_earliest_s: o,
                time_to_empty_latest_s: p,
                mass_uncertainty_kg: l,
                fill_fraction_uncertainty: q,
                leak_loss_per_day: r,
                time_to_empty_withheld: w,
                status: m,
            },
        )
}

fn refusal() -> impl Strategy<Value = Refusal> {
    prop_oneof![
        Just(Refusal::NoSession),
        Just(Refusal::BadSignature),
        Just(Refusal::Replay),
        any::<u32>().prop_map(|retry_after_ms| Refusal::LockedOut { retry_after_ms }),
        "[a-z ]{0,40}".prop_map(|f| Refusal::out_of_range(&f)),
        "[a-z ]{0,40}".prop_map(|f| Refusal::bad_config(&f)),
        Just(Refusal::Unsupported),
        any::<u32>().prop_map(|expected| Refusal::ChunkOrder { expected }),
        Just(Refusal::BlobCrc),
        Just(Refusal::BlobTooLarge),
        Just(Refusal::Storage),
        (channel(), any::<i64>(), any::<u32>()).prop_map(|(channel, offset, limit)| {
            Refusal::NotAtZero {
                channel,
                offset,
                limit,
            }
        }),
    ]
}

fn reset_reason() -> impl Strategy<Value = ResetReason> {
    prop_oneof![
        Just(ResetReason::PowerOn),
        Just(ResetReason::Requested),
        Just(ResetReason::Panic),
        Just(ResetReason::Watchdog),
        Just(ResetReason::HardFault),
        Just(ResetReason::Unknown),
    ]
}

fn boot_report() -> impl Strategy<Value = BootReport> {
    (reset_reason(), any::<u32>(), any::<u32>(), "[a-z/._]{0,70}").prop_map(
        |(reason, boots, line, file)| BootReport::new(reason, boots).with_location(&file, line),
    )
}

fn outcome() -> impl Strategy<Value = Outcome> {
    prop_oneof![
        any::<u32>().prop_map(|token| Outcome::Pong { token }),
        identity().prop_map(Outcome::Identity),
        (any::<[u8; 16]>(), any::<u32>())
            .prop_map(|(nonce, valid_ms)| Outcome::Challenge { nonce, valid_ms }),
        (
            any::<(u32, u32, u8, i32, i32, u32)>(),
            bytes::<{ link::CHUNK_MAX_LEN }>()
        )
            .prop_map(|((total_len, crc, origin, zp, zt, offset), bytes)| {
                Outcome::ConfigPart(ConfigPart {
                    total_len,
                    crc,
                    origin,
                    zero_pressure: zp,
                    zero_temperature: zt,
                    offset,
                    bytes,
                })
            }),
        (any::<u32>(), any::<[u8; 32]>()).prop_map(|(counter, mac)| Outcome::Done { counter, mac }),
        Just(Outcome::Taken),
        refusal().prop_map(Outcome::Refused),
        (
            any::<u64>(),
            boot_report(),
            any::<(u32, u32, u32, u32, u32)>()
        )
            .prop_map(|(uptime_ms, boot, (a, b, c, d, e))| {
                Outcome::Diagnostics(Diagnostics {
                    uptime_ms,
                    boot,
                    stack_peak_bytes: a,
                    stack_size_bytes: b,
                    frames: c,
                    bad_frames: d,
                    samples: e,
                })
            }),
    ]
}

fn from_device() -> impl Strategy<Value = FromDevice> {
    prop_oneof![
        telemetry().prop_map(FromDevice::Telemetry),
        (any::<u64>(), any::<[u8; 3]>(), boot_report()).prop_map(
            |(serial, firmware_version, report)| FromDevice::Boot(Boot {
                serial,
                firmware_version,
                report
            })
        ),
        (
            any::<u32>(),
            any::<u64>(),
            any::<u16>(),
            any::<bool>(),
            any::<u32>(),
            any::<u64>()
        )
            .prop_map(
                |(seq, uptime_ms, alarm, raised, status, mass_kg)| FromDevice::Alarm(AlarmEvent {
                    seq,
                    uptime_ms,
                    alarm,
                    transition: if raised {
                        AlarmTransition::Raised
                    } else {
                        AlarmTransition::Cleared
                    },
                    status,
                    mass_kg,
                })
            ),
        (any::<u16>(), outcome())
            .prop_map(|(tag, outcome)| FromDevice::Reply(Reply { tag, outcome })),
    ]
}

fn to_device() -> impl Strategy<Value = ToDevice> {
    prop_oneof![
        any::<u16>().prop_map(|tag| ToDevice::GetDiagnostics(GetDiagnostics { tag })),
        (any::<u16>(), any::<u32>()).prop_map(|(tag, token)| ToDevice::Ping(Ping { tag, token })),
        any::<u16>().prop_map(|tag| ToDevice::GetIdentity(GetIdentity { tag })),
        any::<u16>().prop_map(|tag| ToDevice::GetChallenge(GetChallenge { tag })),
        (any::<u16>(), any::<u32>())
            .prop_map(|(tag, offset)| ToDevice::ReadConfig(ReadConfig { tag, offset })),
        (any::<u16>(), any::<u32>(), any::<[u8; 32]>(), command()).prop_map(
            |(tag, counter, mac, command)| ToDevice::Signed(Signed {
                tag,
                counter,
                mac,
                command: Signed::encode_command(&command).unwrap()
            })
        ),
        (any::<u16>(), any::<u64>(), any::<u32>(), any::<u32>()).prop_map(
            |(tag, at_ms, pressure, temperature)| ToDevice::InjectSample(InjectSample {
                tag,
                at_ms,
                pressure,
                temperature
            })
        ),
    ]
}

fn encode<M: Wire>(m: &M) -> Vec<u8> {
    let mut out = [0u8; MAX_FRAME_LEN];
    let n = link::encode(m, &mut out).unwrap();
    out[..n].to_vec()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 4000, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn every_message_round_trips(m in from_device(), n in to_device()) {
        let frame = encode(&m);
        prop_assert!(frame.len() <= MAX_FRAME_LEN);
        prop_assert_eq!(frame.last(), Some(&0));
        prop_assert!(!frame[..frame.len() - 1].contains(&0));
        prop_assert_eq!(link::decode::<FromDevice>(&frame), Ok(m));
        let frame = encode(&n);
        prop_assert!(frame.len() <= MAX_FRAME_LEN);
        prop_assert!(!frame[..frame.len() - 1].contains(&0));
        prop_assert_eq!(link::decode::<ToDevice>(&frame), Ok(n));
    }

    /// A stream of frames with noise between them, cut into random pieces:
    /// every frame comes out once, in order, and nothing else decodes.
    #[test]
    fn accumulator_takes_random_pieces(msgs in vec(to_device(), 1..12),
                                       noise in vec(vec(1u8..=255, 0..20), 12),
                                       cuts in vec(1usize..70, 1..200)) {
        let mut stream = Vec::new();
        for (m, junk) in msgs.iter().zip(&noise) {
            stream.extend_from_slice(junk);
            stream.push(0); // the noise ends as a (bad or empty) frame
            stream.extend_from_slice(&encode(m));
        }
        let mut acc = Accumulator::<ToDevice>::new();
        let mut got = Vec::new();
        let mut at = 0;
        let mut i = 0;
        while at < stream.len() {
            let n = cuts[i % cuts.len()].min(stream.len() - at);
            i += 1;
            let mut piece = &stream[at..at + n];
            at += n;
            loop {
                match acc.feed(piece) {
                    Feed::NeedMore => break,
                    Feed::Frame { message, rest } => { got.push(message); piece = rest; }
                    Feed::BadFrame { rest, .. } | Feed::Overfull { rest } => piece = rest,
                }
            }
        }
        prop_assert_eq!(got, msgs);
    }

    /// Random bytes never panic the decoder and never yield a frame unless
    /// they happen to contain one.
    #[test]
    fn random_bytes_do_not_panic(data in vec(any::<u8>(), 0..600)) {
        let mut acc = Accumulator::<ToDevice>::new();
        let mut piece = &data[..];
        loop {
            match acc.feed(piece) {
                Feed::NeedMore => break,
                Feed::Frame { rest, .. } | Feed::BadFrame { rest, .. } | Feed::Overfull { rest } => piece = rest,
            }
        }
        let _ = link::decode::<ToDevice>(&data);
        let _ = link::decode::<FromDevice>(&data);
    }
}

/// Every single-bit flip of `frame` is refused by a receiver of `M`.
fn flips_detected<M: Wire + std::fmt::Debug>(frame: &[u8]) -> u64 {
    let mut flips = 0;
    for bit in 0..frame.len() * 8 {
        let mut bad = frame.to_vec();
        bad[bit / 8] ^= 1 << (bit % 8);
        bad.push(0); // a delimiter in case the flip removed the frame's own
        flips += 1;
        let mut acc = Accumulator::<M>::new();
        let mut piece = &bad[..];
        loop {
            match acc.feed(piece) {
                Feed::NeedMore => break,
                Feed::Frame { message, .. } => panic!("flip of bit {bit} accepted: {message:?}"),
                Feed::BadFrame { rest, .. } | Feed::Overfull { rest } => piece = rest,
            }
        }
    }
    flips
}

#[test]
fn every_single_bit_flip_in_1000_frames_is_detected() {
    let mut runner = proptest::test_runner::TestRunner::deterministic();
    let (from, to) = (from_device(), to_device());
    let (mut frames, mut flips) = (0u64, 0u64);
    for _ in 0..600 {
        let m = from.new_tree(&mut runner).unwrap().current();
        flips += flips_detected::<FromDevice>(&encode(&m));
        let n = to.new_tree(&mut runner).unwrap().current();
        flips += flips_detected::<ToDevice>(&encode(&n));
        frames += 2;
    }
    println!("bit flips: {frames} frames, {flips} single-bit flips, {flips} detected");
    assert!(frames >= 1000);
}

#[test]
fn cobs_max_len_is_the_cobs_crates() {
    for n in 0..2000 {
        assert_eq!(link::cobs_max_len(n), cobs::max_encoding_length(n), "{n}");
    }
}

/// The in-place encoder's result for `data` (in a buffer of exactly the
/// longest encoding, so a write past it would be caught).
fn cobs_in_place(data: &[u8]) -> Option<Vec<u8>> {
    let mut buf = vec![0u8; link::cobs_max_len(data.len())];
    buf[1..=data.len()].copy_from_slice(data);
    let n = link::cobs_encode_in_place(&mut buf, data.len())?;
    buf.truncate(n);
    Some(buf)
}

#[test]
fn cobs_encoder_handles_full_runs() {
    // Runs of 253, 254 and 255 non-zero bytes, alone, before a zero and
    // back to back: the cases where a code byte is inserted.
    for len in [1usize, 253, 254, 255, 508, 509, 600] {
        for tail in [&[][..], &[0][..], &[0, 7][..]] {
            let mut data: Vec<u8> = (0..len).map(|i| (i % 255 + 1) as u8).collect();
            data.extend_from_slice(tail);
            let mut want = vec![0u8; cobs::max_encoding_length(data.len())];
            let m = cobs::encode(&data, &mut want);
            want.truncate(m);
            assert_eq!(cobs_in_place(&data), Some(want), "len {len}, tail {tail:?}");
        }
    }
    // A buffer one byte short of the encoding is refused, not overrun.
    let data = vec![9u8; 300];
    assert_eq!(cobs::max_encoding_length(300), 302);
    let mut buf = vec![0u8; 301];
    buf[1..=300].copy_from_slice(&data);
    assert_eq!(link::cobs_encode_in_place(&mut buf, 300), None);
    assert_eq!(link::cobs_encode_in_place(&mut buf, 301), None);
}

proptest! {
    // The link's COBS encoder against the `cobs` crate's, on noise, on data
    // without zeros (long runs) and with few zeros.
    #[test]
    fn cobs_encoder_agrees_with_the_cobs_crate(
        data in prop_oneof![
            vec(any::<u8>(), 0..600),
            vec(1u8..=255, 0..600),
            vec(prop_oneof![9 => 1u8..=255, 1 => Just(0u8)], 0..600),
        ],
    ) {
        let mut want = vec![0u8; cobs::max_encoding_length(data.len())];
        let n = cobs::encode(&data, &mut want);
        want.truncate(n);
        prop_assert_eq!(cobs_in_place(&data), Some(want));
    }

    // The link's COBS decoder against the `cobs` crate's: the same verdict
    // and the same bytes for any input, valid frames and noise alike.
    #[test]
    fn cobs_decoder_agrees_with_the_cobs_crate(
        data in vec(any::<u8>(), 0..300),
        noise in vec(any::<u8>(), 0..300),
    ) {
        let mut frame = vec![0u8; cobs::max_encoding_length(data.len())];
        let n = cobs::encode(&data, &mut frame);
        frame.truncate(n);
        let mut ours = frame.clone();
        prop_assert_eq!(link::cobs_decode_in_place(&mut ours), Some(data.len()));
        prop_assert_eq!(&ours[..data.len()], &data[..]);
        for input in [frame, noise] {
            let mut ours = input.clone();
            let mut theirs = input.clone();
            let a = link::cobs_decode_in_place(&mut ours);
            let b = cobs::decode_in_place(&mut theirs).ok();
            prop_assert_eq!(a, b);
            if let Some(n) = a {
                prop_assert_eq!(&ours[..n], &theirs[..n]);
            }
        }
    }
}
