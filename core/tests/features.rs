//! The core with its optional parts left out (Cargo features): what a team
//! that does not link a part still gets is the same content as with it,
//! within the f64 mirror's bounds, and the outputs of the part left out
//! are withheld (`None`), never made up.
//!
//! Run with each feature off, e.g.
//! `cargo test -p isochor-core --no-default-features --test features`
//! (every optional part off), with `--features uncertainty,modbus` (tracking off,
//! the content's uncertainty and Modbus on) and with the defaults (every part on); CI
//! runs all three (`.ci/run`).

use isochor_core::app::{Zero, fixed, float};
use isochor_core::model::DeviceModel;
use isochor_core::prepared::{GaugeConfig, PreparedBuf};
use isochor_core::sensor::channel::RawSample;
use isochor_core::time::Instant;
use isochor_core::track::fixed::TrackFx;
use isochor_core::{Gas, Setup, SetupFx, Tank, fx};

/// The draw-down of the firmware's budget program and the committed
/// configuration's test (`tests/tests/prepared.rs`): the nominal 24-bit
/// bridge from 150 bar down, a Pt1000 near 20 °C (invented bench codes).
fn raw(i: u32) -> RawSample {
    RawSample {
        pressure: (2_097_152 - i * 270) & 0x00FF_FFFF,
        temperature: 4_498_717 + (i % 97) * 17,
    }
}

#[test]
fn content_matches_the_f64_mirror_and_left_out_parts_are_withheld() {
    let setup = SetupFx::from_f64(&Setup::new(Gas::Nitrogen, Tank::new(0.05, 200e5))).unwrap();
    let config = GaugeConfig::nominal(setup);
    let (buf, _) = PreparedBuf::build(&config).unwrap();
    let mut device = fixed::Pipeline::new(buf.prepared().unwrap(), Zero::default()).unwrap();
    // Before any sample the outputs kept in place are the empty record
    // (without tracking no time to empty is ever withheld: there is none).
    let empty = if cfg!(feature = "tracking") {
        TrackFx::EMPTY
    } else {
        TrackFx {
            time_to_empty_withheld: None,
            ..TrackFx::EMPTY
        }
    };
    assert_eq!(*device.output(), empty);
    assert!(device.output().content.is_none() && device.output().status.is_ok());
    let model = DeviceModel::new(config.table().unwrap()).unwrap();
    let mut reference = float::Pipeline::<f64, _>::new(&config, &model, Zero::default()).unwrap();
    let (mut worst_f, mut worst_m) = (0.0f64, 0.0f64);
    // U(F) of both paths, absolute (a fraction of the rated content).
    let mut worst_u = 0.0f64;
    let (mut with_u, mut events) = (0u32, (Vec::new(), Vec::new()));
    // Two hours at 1 Hz: 120 block closes, a rate from the fifth on.
    for i in 0..7200u32 {
        let at = Instant(u64::from(i) * 1000);
        let (x, y) = (
            *device.sample(at, &raw(i)),
            reference.sample(at, &raw(i)).unwrap(),
        );
        // The record the sample returned is the one kept in place (what the
        // gauge sends from).
        assert_eq!(device.output(), &x, "{i}");
        let (cx, cy) = (x.content.unwrap(), y.content.unwrap());
        worst_f = worst_f.max((fx::to_f64(cx.fill_fraction) - cy.fill_fraction).abs());
        worst_m = worst_m.max((fx::to_f64(cx.mass_kg) - cy.mass_kg).abs() / cy.mass_kg);
        // Both paths withhold the same outputs.
        assert_eq!(x.uncertainty.is_some(), y.uncertainty.is_some(), "{i}");
        if cfg!(feature = "uncertainty") {
            // The tracker refreshes U at each block close (from the first
            // on), at the eighth of the close's nine steps, which run one a
            // sample over the samples after it; without it U is that of
            // every sample's content.
            let from = if cfg!(feature = "tracking") {
                60 + 8
            } else {
                0
            };
            assert_eq!(x.uncertainty.is_some(), i >= from, "{i}");
        } else {
            assert!(x.uncertainty.is_none() && y.uncertainty.is_none(), "{i}");
        }
        assert_eq!(x.rate.is_some(), y.rate.is_some(), "{i}");
        assert_eq!(x.time_to_empty.is_some(), y.time_to_empty.is_some(), "{i}");
        assert_eq!(x.time_to_empty_withheld, y.time_to_empty_withheld, "{i}");
        assert_eq!(x.leak.is_some(), y.leak.is_some(), "{i}");
        assert_eq!(x.settling.not_settled, y.settling.not_settled, "{i}");
        if cfg!(feature = "tracking") {
            // A rate from the fifth block close on (its fifth step) …
            assert_eq!(x.rate.is_some(), i >= 300 + 5, "{i}");
            // … and the over-pressure reference from the first (its last).
            assert_eq!(x.rated_pressure_now_pa.is_some(), i >= 60 + 9, "{i}");
        } else {
            // Nothing the tracker gives is made up in either path.
            for (rate, tte, why, leak, settled, reference, not_settled) in [
                (
                    x.rate.is_some(),
                    x.time_to_empty.is_some(),
                    x.time_to_empty_withheld.is_some(),
                    x.leak.is_some(),
                    x.settling.predicted.is_some(),
                    x.rated_pressure_now_pa.is_some(),
                    x.settling.not_settled,
                ),
                (
                    y.rate.is_some(),
                    y.time_to_empty.is_some(),
                    y.time_to_empty_withheld.is_some(),
                    y.leak.is_some(),
                    y.settling.predicted.is_some(),
                    y.rated_pressure_now_pa.is_some(),
                    y.settling.not_settled,
                ),
            ] {
                assert!(
                    !(rate || tte || why || leak || settled || reference || not_settled),
                    "{i}: a tracking output without the tracker"
                );
            }
            // The content is the sample's own (no smoothing): the same as
            // the estimate of this sample's readings.
            let r = reference.last_valid().unwrap();
            let direct = reference
                .tracker()
                .estimator()
                .estimate(r.pressure.pressure_pa, r.temperature.temperature_k)
                .unwrap();
            assert_eq!(cy.fill_fraction, direct.fill_fraction, "{i}");
        }
        // `leak` and `not_settled` need the tracker: never raised without it.
        if !cfg!(feature = "tracking") {
            use isochor_core::alarm::AlarmKind;
            assert!(
                x.events
                    .iter()
                    .chain(y.events.iter())
                    .all(|e| !matches!(e.kind, AlarmKind::Leak | AlarmKind::NotSettled)),
                "{i}"
            );
        }
        with_u += u32::from(x.uncertainty.is_some());
        if let (Some(ux), Some(uy)) = (x.uncertainty, y.uncertainty) {
            worst_u = worst_u.max((fx::to_f64(ux.fill_fraction) - uy.fill_fraction).abs());
        }
        #[cfg(feature = "modbus")]
        if i % 600 == 599 {
            tracking_registers(&device, &x);
        }
        events
            .0
            .extend(x.events.iter().map(|e| (e.kind, e.raised, e.at)));
        events
            .1
            .extend(y.events.iter().map(|e| (e.kind, e.raised, e.at)));
    }
    println!(
        "features {}: worst |ΔF| {worst_f:.2e}, worst mass {worst_m:.2e}, worst |ΔU(F)| {worst_u:.2e}, {with_u} samples with U, events {:?}",
        features(),
        events.0
    );
    // The bound of the full chain's end-to-end test against the f64
    // reference (tests/tests/firmware_qemu.rs: 1e-5), with or without the
    // optional parts: none of them changes the content.
    assert!(worst_f < 1e-5, "{worst_f}");
    assert!(worst_m < 1e-5, "{worst_m}");
    // Without the tracker U(F) is the content's own budget: within the
    // fixed-vs-f64 bound of that budget (1e-6, `uncertainty::fixed`
    // tests). With it the gas–sensor term comes from each path's rate
    // window and differs more (4.7e-5 here, in the draw's first blocks).
    if !cfg!(feature = "tracking") {
        assert!(worst_u < 1e-6, "{worst_u}");
    }
    // The alarm events of the device path are the reference's.
    assert_eq!(events.0, events.1);
}

fn features() -> &'static str {
    match (cfg!(feature = "uncertainty"), cfg!(feature = "tracking")) {
        (true, true) => "uncertainty on, tracking on",
        (true, false) => "uncertainty on, tracking off",
        (false, true) => "uncertainty off, tracking on",
        (false, false) => "uncertainty off, tracking off",
    }
}

/// The Modbus input registers of the tracker's outputs (rate, its U, time
/// to empty, its bounds and why there is none): "not available" (the map's
/// NaN, `0x8000_0000` or all ones) without the tracker; with it the rate
/// and the reason are there once the tracker has a rate.
#[cfg(feature = "modbus")]
fn tracking_registers(device: &fixed::Pipeline<&[u8]>, x: &isochor_core::track::fixed::TrackFx) {
    use isochor_core::Status;
    use isochor_core::field::FieldScalars;
    use isochor_core::field::modbus::Space;
    use isochor_core::field::modbus::map::{Encoding, INPUT, Quantity, Registers, Snapshot};
    use isochor_core::link::Identity;

    let mut snapshot = Snapshot::new();
    snapshot.update(
        1,
        Some(x),
        x.at.as_millis(),
        Status::OK,
        Some(device.tracker().config()),
        Some(device.tracker().rated_standard_volume()),
        fx::Milliamps::from_num(12),
    );
    let identity = Identity {
        serial: 1,
        hardware_rev: 1,
        firmware_version: [0, 0, 0],
        protocol: 1,
        max_frame_len: 256,
        capabilities: 0,
        config_capacity: 0,
    };
    let field = FieldScalars::default();
    let regs = Registers {
        snapshot: &mut snapshot,
        identity: &identity,
        field: &field,
        now_ms: x.at.as_millis(),
    };
    let tracking = [
        Quantity::RateKgH,
        Quantity::RateUKgH,
        Quantity::TimeToEmptyS,
        Quantity::TimeToEmptyEarliestS,
        Quantity::TimeToEmptyLatestS,
        Quantity::TimeToEmptyWithheld,
    ];
    let mut seen = 0;
    for r in INPUT.iter().filter(|r| tracking.contains(&r.quantity)) {
        seen += 1;
        let words: Vec<u16> = (0..r.encoding.words())
            .map(|i| regs.read(false, r.address + i).unwrap())
            .collect();
        let not_available = match r.encoding {
            Encoding::F32 => words == [0x7FC0, 0x0000],
            Encoding::I32(_) => words == [0x8000, 0x0000],
            _ => words.iter().all(|&w| w == 0xFFFF),
        };
        if cfg!(feature = "tracking") {
            if matches!(
                r.quantity,
                Quantity::RateKgH | Quantity::TimeToEmptyWithheld
            ) && x.rate.is_some()
            {
                assert!(!not_available, "{:?} at {:?}: {words:x?}", r.quantity, x.at);
            }
        } else {
            assert!(not_available, "{:?} at {:?}: {words:x?}", r.quantity, x.at);
        }
    }
    assert!(
        seen >= tracking.len(),
        "{seen} tracking registers in the map"
    );
}
