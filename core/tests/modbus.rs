//! The Modbus RTU server against its standards: the CRC catalogue's check
//! value, the request/response examples of the Modbus Application Protocol
//! Specification V1.1b3, the silent-interval rule of Modbus over Serial
//! Line V1.02, the exception responses; the register map's encodings
//! against `f64`; the 4–20 mA output against NAMUR NE 43 and its `f64`
//! reference.
#![cfg(feature = "modbus")]

use isochor_core::field::current_loop::{self, FAILURE_HIGH, FAILURE_LOW};
use isochor_core::field::modbus::map::{
    self, Encoding, HOLDING, INPUT, Quantity, f32_bits, scaled_i32,
};
use isochor_core::field::modbus::{Exception, Server, Space, crc16};
use isochor_core::field::{
    Failure, LoopOutputConfig, LoopQuantity, LoopScalars, Parity, Protocol, SerialSettings,
};
use isochor_core::{Status, fx};
use proptest::prelude::*;

/// Registers of the specification's examples: holding and input registers
/// 0 … 199, holding registers writable.
struct Example {
    holding: [u16; 200],
    input: [u16; 200],
}

impl Example {
    fn new() -> Example {
        let mut e = Example {
            holding: [0; 200],
            input: [0; 200],
        };
        // V1.1b3 §6.3 (Read Holding Registers): registers 108 … 110 hold
        // 555 (0x022B), 0, 100 (0x0064).
        e.holding[107] = 0x022B;
        e.holding[108] = 0x0000;
        e.holding[109] = 0x0064;
        // §6.4 (Read Input Registers): register 9 holds 10 (0x000A).
        e.input[8] = 0x000A;
        e
    }
}

impl Space for Example {
    fn read(&self, holding: bool, address: u16) -> Result<u16, Exception> {
        let t = if holding { &self.holding } else { &self.input };
        t.get(usize::from(address))
            .copied()
            .ok_or(Exception::IllegalDataAddress)
    }
    fn check_write(&self, address: u16, _value: u16) -> Result<(), Exception> {
        if usize::from(address) < self.holding.len() {
            Ok(())
        } else {
            Err(Exception::IllegalDataAddress)
        }
    }
    fn write(&mut self, address: u16, value: u16) -> Result<(), Exception> {
        self.check_write(address, value)?;
        self.holding[usize::from(address)] = value;
        Ok(())
    }
}

const SETTINGS: SerialSettings = SerialSettings {
    protocol: Protocol::Modbus,
    address: 17,
    baud: 19_200,
    parity: Parity::Even,
};

/// An RTU frame: address, PDU, CRC (low byte first).
fn frame(address: u8, pdu: &[u8]) -> Vec<u8> {
    let mut f = vec![address];
    f.extend_from_slice(pdu);
    let crc = crc16(0xFFFF, &f);
    f.extend_from_slice(&crc.to_le_bytes());
    f
}

/// Sends `request` in one piece at t = 0 and lets the silence pass: the
/// reply's PDU (CRC checked and removed), or `None` for silence.
fn exchange(server: &mut Server, space: &mut dyn Space, request: &[u8]) -> Option<Vec<u8>> {
    let mut out = Vec::new();
    server.step(1_000, request, space, &mut |b| out.extend_from_slice(b));
    server.step(1_000 + 10_000, &[], space, &mut |b| {
        out.extend_from_slice(b)
    });
    if out.is_empty() {
        return None;
    }
    assert_eq!(crc16(0xFFFF, &out), 0, "reply CRC");
    assert_eq!(out[0], request[0], "reply address");
    Some(out[1..out.len() - 2].to_vec())
}

fn pdu(server: &mut Server, space: &mut dyn Space, request_pdu: &[u8]) -> Option<Vec<u8>> {
    exchange(server, space, &frame(17, request_pdu))
}

#[test]
fn crc16_check_value_of_the_catalogue() {
    // CRC RevEng catalogue, CRC-16/MODBUS: check = 0x4B37 for "123456789".
    assert_eq!(crc16(0xFFFF, b"123456789"), 0x4B37);
    // The `crc` crate's catalogue entry agrees on that and on random data.
    let reference = crc::Crc::<u16>::new(&crc::CRC_16_MODBUS);
    assert_eq!(reference.checksum(b"123456789"), 0x4B37);
    let mut x = 0x1234_5678u32;
    for n in 0..300 {
        let data: Vec<u8> = (0..n)
            .map(|_| {
                x ^= x << 13;
                x ^= x >> 17;
                x ^= x << 5;
                x as u8
            })
            .collect();
        assert_eq!(crc16(0xFFFF, &data), reference.checksum(&data));
    }
    // Modbus over Serial Line V1.02 §6.2.2 (from memory): the CRC is sent
    // low byte first, so a frame's CRC over all its bytes is 0; a read of
    // one holding register at 0 from server 1 is 01 03 00 00 00 01 84 0A
    // (common practice: the frame every Modbus tool shows).
    assert_eq!(frame(1, &[3, 0, 0, 0, 1]), [1, 3, 0, 0, 0, 1, 0x84, 0x0A]);
}

#[test]
fn application_protocol_examples() {
    // Modbus Application Protocol Specification V1.1b3, the request and
    // response examples of §6.3, §6.4, §6.6, §6.12 and §6.8 (PDUs).
    let mut s = Server::new(&SETTINGS);
    let mut e = Example::new();
    // §6.3 Read Holding Registers 108 … 110.
    assert_eq!(
        pdu(&mut s, &mut e, &[0x03, 0x00, 0x6B, 0x00, 0x03]).unwrap(),
        [0x03, 0x06, 0x02, 0x2B, 0x00, 0x00, 0x00, 0x64]
    );
    // §6.4 Read Input Register 9.
    assert_eq!(
        pdu(&mut s, &mut e, &[0x04, 0x00, 0x08, 0x00, 0x01]).unwrap(),
        [0x04, 0x02, 0x00, 0x0A]
    );
    // §6.6 Write Single Register 2 = 3: the echo.
    assert_eq!(
        pdu(&mut s, &mut e, &[0x06, 0x00, 0x01, 0x00, 0x03]).unwrap(),
        [0x06, 0x00, 0x01, 0x00, 0x03]
    );
    assert_eq!(e.holding[1], 3);
    // §6.12 Write Multiple Registers 2 … 3 = 0x000A, 0x0102.
    assert_eq!(
        pdu(
            &mut s,
            &mut e,
            &[0x10, 0x00, 0x01, 0x00, 0x02, 0x04, 0x00, 0x0A, 0x01, 0x02]
        )
        .unwrap(),
        [0x10, 0x00, 0x01, 0x00, 0x02]
    );
    assert_eq!((e.holding[1], e.holding[2]), (0x000A, 0x0102));
    // §6.8 Diagnostics, sub-function 00 Return Query Data: 0xA537 echoed.
    assert_eq!(
        pdu(&mut s, &mut e, &[0x08, 0x00, 0x00, 0xA5, 0x37]).unwrap(),
        [0x08, 0x00, 0x00, 0xA5, 0x37]
    );
}

#[test]
fn read_device_identification() {
    // V1.1b3 §6.21 (43/14): the basic objects by stream, regular objects,
    // one object by individual access; an unknown object in stream access
    // restarts at 0; an unknown one in individual access is exception 02.
    let mut s = Server::new(&SETTINGS);
    let mut e = Example::new();
    let r = pdu(&mut s, &mut e, &[0x2B, 0x0E, 0x01, 0x00]).unwrap();
    assert_eq!(&r[..7], &[0x2B, 0x0E, 0x01, 0x82, 0x00, 0x00, 3]);
    let mut objects = Vec::new();
    let mut i = 7;
    while i < r.len() {
        let (id, n) = (r[i], usize::from(r[i + 1]));
        objects.push((id, String::from_utf8(r[i + 2..i + 2 + n].to_vec()).unwrap()));
        i += 2 + n;
    }
    assert_eq!(objects[0], (0, "isochor".to_string()));
    assert_eq!(objects[1], (1, "ISOCHOR-GAUGE".to_string()));
    assert_eq!(objects[2], (2, env!("CARGO_PKG_VERSION").to_string()));
    let r = pdu(&mut s, &mut e, &[0x2B, 0x0E, 0x02, 0x00]).unwrap();
    assert_eq!(r[6], 6);
    let r = pdu(&mut s, &mut e, &[0x2B, 0x0E, 0x04, 0x04]).unwrap();
    assert_eq!(&r[..9], &[0x2B, 0x0E, 0x04, 0x82, 0, 0, 1, 4, 25]);
    let r = pdu(&mut s, &mut e, &[0x2B, 0x0E, 0x01, 0x50]).unwrap();
    assert_eq!(r[6], 3, "restarts at object 0");
    assert_eq!(
        pdu(&mut s, &mut e, &[0x2B, 0x0E, 0x04, 0x50]).unwrap(),
        [0xAB, 0x02]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x2B, 0x0E, 0x07, 0x00]).unwrap(),
        [0xAB, 0x03]
    );
}

#[test]
fn exception_responses() {
    // V1.1b3 §7: function code + 0x80 and the exception code.
    let mut s = Server::new(&SETTINGS);
    let mut e = Example::new();
    // 01: functions not served (01 read coils, 05, 0x2B with another MEI
    // type, 08 with another sub-function).
    assert_eq!(
        pdu(&mut s, &mut e, &[0x01, 0, 0, 0, 1]).unwrap(),
        [0x81, 0x01]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x05, 0, 0, 0xFF, 0]).unwrap(),
        [0x85, 0x01]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x2B, 0x0D, 0, 0]).unwrap(),
        [0xAB, 0x01]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x08, 0, 1, 0, 0]).unwrap(),
        [0x88, 0x01]
    );
    // 02: past the map.
    assert_eq!(
        pdu(&mut s, &mut e, &[0x03, 0, 199, 0, 2]).unwrap(),
        [0x83, 0x02]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x04, 0xFF, 0xFF, 0, 2]).unwrap(),
        [0x84, 0x02]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x06, 1, 0, 0, 1]).unwrap(),
        [0x86, 0x02]
    );
    // 03: quantities 0 and 126, a byte count that does not match, a
    // request of the wrong length.
    assert_eq!(
        pdu(&mut s, &mut e, &[0x03, 0, 0, 0, 0]).unwrap(),
        [0x83, 0x03]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x04, 0, 0, 0, 126]).unwrap(),
        [0x84, 0x03]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x10, 0, 1, 0, 2, 3, 0, 0, 0]).unwrap(),
        [0x90, 0x03]
    );
    assert_eq!(
        pdu(&mut s, &mut e, &[0x03, 0, 0, 0, 1, 0]).unwrap(),
        [0x83, 0x03]
    );
    assert_eq!(s.counters().exceptions, 11);
}

#[test]
fn silence_for_what_is_not_a_frame_for_us() {
    let mut s = Server::new(&SETTINGS);
    let mut e = Example::new();
    let good = frame(17, &[0x04, 0x00, 0x08, 0x00, 0x01]);
    // A wrong CRC.
    let mut bad = good.clone();
    *bad.last_mut().unwrap() ^= 1;
    assert_eq!(exchange(&mut s, &mut e, &bad), None);
    // Another server's address.
    assert_eq!(
        exchange(&mut s, &mut e, &frame(18, &[0x04, 0, 8, 0, 1])),
        None
    );
    // Too short.
    assert_eq!(exchange(&mut s, &mut e, &good[..3]), None);
    // Broadcast (address 0): writes are carried out, nothing is answered;
    // reads are not answered either.
    assert_eq!(
        exchange(&mut s, &mut e, &frame(0, &[0x06, 0, 5, 0x12, 0x34])),
        None
    );
    assert_eq!(e.holding[5], 0x1234);
    assert_eq!(
        exchange(&mut s, &mut e, &frame(0, &[0x03, 0, 5, 0, 1])),
        None
    );
    // Still answering.
    assert_eq!(
        exchange(&mut s, &mut e, &good).unwrap(),
        [0x04, 0x02, 0x00, 0x0A]
    );
}

#[test]
fn silent_intervals_of_the_serial_line() {
    // Modbus over Serial Line V1.02 §2.5.1.1: t1.5 and t3.5 are 1.5 and 3.5
    // character times (11 bits a character); above 19 200 Bd fixed at
    // 750 µs and 1.750 ms.
    let at = |baud: u32| SerialSettings { baud, ..SETTINGS }.silent_intervals_us();
    assert_eq!(at(9600), (1719, 4011));
    assert_eq!(at(19_200), (860, 2006));
    assert_eq!(at(38_400), (750, 1750));
    assert_eq!(at(115_200), (750, 1750));

    let good = frame(17, &[0x04, 0x00, 0x08, 0x00, 0x01]);
    let mut e = Example::new();
    let run = |pieces: &[(u64, &[u8])], e: &mut Example| -> Vec<u8> {
        let mut s = Server::new(&SETTINGS);
        let mut out = Vec::new();
        for (t, b) in pieces {
            s.step(*t, b, e, &mut |x| out.extend_from_slice(x));
        }
        s.step(1_000_000, &[], e, &mut |x| out.extend_from_slice(x));
        out
    };
    // In one piece, or with gaps up to t1.5: answered.
    assert!(!run(&[(0, &good)], &mut e).is_empty());
    assert!(!run(&[(0, &good[..3]), (860, &good[3..])], &mut e).is_empty());
    // Not answered before its t3.5 silence has passed.
    let mut s = Server::new(&SETTINGS);
    let mut out = Vec::new();
    s.step(0, &good, &mut e, &mut |x| out.extend_from_slice(x));
    s.step(2005, &[], &mut e, &mut |x| out.extend_from_slice(x));
    assert!(out.is_empty() && s.busy());
    s.step(2006, &[], &mut e, &mut |x| out.extend_from_slice(x));
    assert!(!out.is_empty());
    // A pause longer than t1.5 inside the frame: incomplete, dropped.
    assert!(run(&[(0, &good[..3]), (861, &good[3..])], &mut e).is_empty());
    assert!(run(&[(0, &good[..3]), (2005, &good[3..])], &mut e).is_empty());
    // A pause of t3.5 or more: two frames, both with bad CRCs: silence.
    assert!(run(&[(0, &good[..3]), (2006, &good[3..])], &mut e).is_empty());
    assert!(run(&[(0, &good[..3]), (50_000, &good[3..])], &mut e).is_empty());
    // Two frames back to back with t3.5 between: both answered.
    let two = run(&[(0, &good), (2006, &good)], &mut e);
    assert_eq!(two.len(), 2 * 7);
}

#[test]
fn register_map_is_consistent() {
    // Sorted, no overlaps, within one read (125 registers) of each block.
    for table in [INPUT, HOLDING] {
        for w in table.windows(2) {
            assert!(
                w[0].address + w[0].encoding.words() <= w[1].address,
                "{w:?}"
            );
        }
    }
    // Only acknowledging alarms is writable.
    let writable: Vec<_> = HOLDING.iter().filter(|r| r.writable).collect();
    assert_eq!(writable.len(), 1);
    assert_eq!(writable[0].quantity, Quantity::AlarmsAcknowledged);
    assert!(INPUT.iter().all(|r| !r.writable));
    // The text has one row per register.
    let rows = map::MAP_CSV
        .lines()
        .filter(|l| !l.starts_with('#') && !l.is_empty())
        .count();
    assert_eq!(rows - 1, INPUT.len() + HOLDING.len());
    // Every measured quantity is there as f32 and as a scaled integer.
    for q in [
        Quantity::MassKg,
        Quantity::MassUKg,
        Quantity::StandardVolumeM3,
        Quantity::FillFraction,
        Quantity::SettledPressurePa,
        Quantity::PressurePa,
        Quantity::RateKgH,
        Quantity::TimeToEmptyS,
        Quantity::TimeToEmptyEarliestS,
        Quantity::TimeToEmptyLatestS,
        Quantity::SampleAgeS,
    ] {
        assert!(
            INPUT
                .iter()
                .any(|r| r.quantity == q && r.encoding == Encoding::F32)
        );
        assert!(
            INPUT
                .iter()
                .any(|r| r.quantity == q && matches!(r.encoding, Encoding::I32(_)))
        );
    }
}

#[test]
fn f32_encoding_edges() {
    let f = |v: f64| f32_bits((v * 16_777_216.0) as i64);
    assert_eq!(f(1.0), 1.0f32.to_bits());
    assert_eq!(f(-2.5), (-2.5f32).to_bits());
    assert_eq!(f(0.0), 0);
    assert_eq!(f32_bits(1), (1.0f32 / 16_777_216.0).to_bits());
    assert_eq!(
        f32_bits(i64::MAX),
        ((i64::MAX as f64 / 16_777_216.0) as f32).to_bits()
    );
    assert_eq!(
        f32_bits(i64::MIN + 1),
        (((i64::MIN + 1) as f64 / 16_777_216.0) as f32).to_bits()
    );
    // Ties to even: 2^24 + 1 and 2^24 + 3 (units of 2^-24 above 1.0 at
    // 25 significant bits).
    assert_eq!(
        f32_bits((1 << 48) + (1 << 24)),
        ((1u64 << 24) as f32).to_bits()
    );
    assert_eq!(
        f32_bits((1 << 48) + (3 << 24)),
        ((1u64 << 24) as f32 + 4.0).to_bits()
    );
}

proptest! {
    #[test]
    fn f32_encoding_is_ieee_rounding(v in -(1i64 << 53)..(1i64 << 53)) {
        // Exact in f64 (|v| < 2^53), so one rounding to f32: the reference.
        let reference = (v as f64 / 16_777_216.0) as f32;
        prop_assert_eq!(f32_bits(v), reference.to_bits());
    }

    #[test]
    fn scaled_integers_round_to_nearest(v in -(1i64 << 50)..(1i64 << 50), scale in 0u8..=4) {
        let x = v as f64 / 16_777_216.0 * 10f64.powi(i32::from(scale));
        let r = scaled_i32(v, scale);
        if x.abs() < f64::from(i32::MAX) - 0.5 {
            prop_assert!((f64::from(r) - x).abs() <= 0.5 + 1e-9, "{r} vs {x}");
        } else {
            prop_assert!(r.unsigned_abs() >= i32::MAX as u32 - 1);
        }
    }
}

proptest! {
    #[test]
    fn derived_uncertainties_fixed_vs_f64(
        mass_kg in 0.01f64..50_000.0,
        rel_m in 0.0f64..0.2,
        u_fill in 0.0f64..0.5,
        cp in 0.3f64..3.0,
        ps in 1e4f64..1e8,
        p in 1e4f64..1e8,
        rated_m3 in 0.1f64..200_000.0,
        fs in 1e5f64..1e8,
        u_fs in 0.0f64..0.05,
        u_rd in 0.0f64..0.05,
        u_t in 0.0f64..5.0,
    ) {
        let i = map::DerivedInputs {
            mass: (mass_kg * 2f64.powi(40)) as u64,
            settled_pressure: (ps * 16.0) as u32,
            pressure: (p * 16.0) as u32,
            uncertainty: Some((
                (mass_kg * rel_m * 2f64.powi(40)) as u64,
                (u_fill * 2f64.powi(32)) as u64,
                (cp * 2f64.powi(24)) as i32,
            )),
            rated_volume: Some((rated_m3 * 2f64.powi(40)) as u64),
            declared: Some((
                (fs * 16.0) as u32,
                (u_fs * 2f64.powi(32)) as u32,
                (u_rd * 2f64.powi(32)) as u32,
                (u_t * 65536.0) as u32,
            )),
        };
        let fixed = map::derive(&i);
        let reference = map::derive_f64(&i);
        let got = [
            fixed.standard_volume_u_m3,
            fixed.settled_pressure_u_pa,
            fixed.pressure_u_pa,
            fixed.temperature_u_k,
        ];
        // Our bounds: 1e-6 relative, or 1e-6 of the unit (Q24 steps and the
        // 4-bit pressure format: 1/16 Pa).
        let floor = [1e-6, 0.1, 0.2, 1e-6];
        for k in 0..4 {
            let g = got[k].unwrap() as f64 / 16_777_216.0;
            let r = reference[k].unwrap();
            prop_assert!((g - r).abs() <= 1e-6 * r.abs() + floor[k], "{k}: {g} vs {r}");
        }
    }
}

#[test]
fn isqrt_is_floor_of_the_root() {
    for x in (0u64..5000).chain([u64::MAX, (1 << 62) - 1, 1 << 62, 999_999_999_999]) {
        let r = map::isqrt(x);
        assert!(
            r * r <= x && (r + 1).checked_mul(r + 1).is_none_or(|s| s > x),
            "{x}"
        );
    }
}

// ---- the 4–20 mA output ----

fn loop_config(
    quantity: LoopQuantity,
    lower: f64,
    upper: f64,
    failure: Failure,
) -> LoopOutputConfig {
    LoopOutputConfig {
        quantity,
        lower: fx::Anchor::from_num(lower),
        upper: fx::Anchor::from_num(upper),
        failure,
    }
}

#[test]
fn loop_output_follows_ne43() {
    // NAMUR NE 43: measurement 3.8 … 20.5 mA; failure ≤ 3.6 mA or ≥ 21 mA.
    let c = loop_config(LoopQuantity::FillFraction, 0.0, 1.0, Failure::Low);
    let s = LoopScalars::prepare(&c).unwrap();
    let ma = |v: f64, st: Status| fx::to_f64(s.current(Some((v * 16_777_216.0) as i64), st));
    assert!((ma(0.0, Status::OK) - 4.0).abs() < 1e-6);
    assert!((ma(1.0, Status::OK) - 20.0).abs() < 1e-6);
    assert!((ma(0.5, Status::OK) - 12.0).abs() < 1e-6);
    // Below and above the range: the ends of the measurement band.
    assert!((ma(-0.5, Status::OK) - 3.8).abs() < 1e-6);
    assert!((ma(1.2, Status::OK) - 20.5).abs() < 1e-6);
    assert!((ma(100.0, Status::OK) - 20.5).abs() < 1e-6);
    // An estimate that is not a value: failure, in the configured direction.
    for bad in [
        Status::SENSOR_FAULT,
        Status::CONFIG_UNUSABLE,
        Status::SENSOR_OPEN_CIRCUIT,
        Status::TWO_PHASE,
        Status::PRESSURE_OUTSIDE_ENVELOPE,
    ] {
        assert!(ma(0.5, bad) <= 3.6, "{bad:?}");
    }
    // Alarms that leave the estimate a value do not fail the loop.
    assert!((ma(0.5, Status::LOW_CONTENT | Status::LEAK) - 12.0).abs() < 1e-6);
    assert_eq!(s.current(None, Status::OK), FAILURE_LOW);
    let high =
        LoopScalars::prepare(&loop_config(LoopQuantity::Mass, 0.0, 12.0, Failure::High)).unwrap();
    assert!(fx::to_f64(high.current(None, Status::OK)) >= 21.0);
    assert_eq!(high.current(Some(0), Status::CONTENT_INVALID), FAILURE_HIGH);
    assert!(fx::to_f64(LoopScalars::UNCONFIGURED.current(Some(1 << 24), Status::OK)) <= 3.6);
}

proptest! {
    #[test]
    fn loop_output_fixed_vs_f64(
        lower in -1000.0f64..1000.0,
        span in 0.001f64..50_000.0,
        x in -0.3f64..1.3,
        mass in any::<bool>(),
    ) {
        let q = if mass { LoopQuantity::Mass } else { LoopQuantity::FillFraction };
        let c = loop_config(q, lower, lower + span, Failure::Low);
        let s = LoopScalars::prepare(&c).unwrap();
        let v = fx::Anchor::from_num(lower + x * span);
        let fixed = fx::to_f64(s.current(Some(v.to_bits()), Status::OK));
        let reference = current_loop::current_f64(&c, Some(fx::to_f64(v)), true);
        // Our bound: 1e-5 mA (a 16-bit DAC's step on 20 mA is 3e-4 mA).
        prop_assert!((fixed - reference).abs() < 1e-5, "{fixed} vs {reference}");
    }
}

#[test]
fn field_settings_are_validated() {
    let ok = SerialSettings::default();
    assert!(ok.validate().is_ok());
    assert!(SerialSettings { address: 0, ..ok }.validate().is_err());
    assert!(SerialSettings { address: 248, ..ok }.validate().is_err());
    assert!(SerialSettings { baud: 14_400, ..ok }.validate().is_err());
    assert!(
        loop_config(LoopQuantity::Mass, 5.0, 5.0, Failure::Low)
            .validate()
            .is_err()
    );
    assert!(
        loop_config(LoopQuantity::Mass, 5.0, 2.0, Failure::Low)
            .validate()
            .is_err()
    );
    assert!(
        loop_config(LoopQuantity::Mass, 0.0, 2e6, Failure::Low)
            .validate()
            .is_err()
    );
}
