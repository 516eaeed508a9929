//! The core with its optional parts left out (Cargo features): what a team
//! that does not link a part still gets is the same content as with it,
//! within the f64 mirror's bounds, and the outputs of the part left out
//! are withheld (`None`), never made up.
//!
//! Run with each feature off, e.g.
//! `cargo test -p isochor-core --no-default-features --test features`
//! (every optional part off) and with the defaults (every part on); CI
//! runs both (`.ci/run`).

use isochor_core::app::{Zero, fixed, float};
use isochor_core::model::DeviceModel;
use isochor_core::prepared::{GaugeConfig, PreparedBuf};
use isochor_core::sensor::channel::RawSample;
use isochor_core::time::Instant;
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
    let model = DeviceModel::new(config.table().unwrap()).unwrap();
    let mut reference = float::Pipeline::<f64, _>::new(&config, &model, Zero::default()).unwrap();
    let (mut worst_f, mut worst_m) = (0.0f64, 0.0f64);
    let (mut with_u, mut events) = (0u32, (Vec::new(), Vec::new()));
    // Two hours at 1 Hz: 120 block closes, a rate from the fifth on.
    for i in 0..7200u32 {
        let at = Instant(u64::from(i) * 1000);
        let (x, y) = (
            device.sample(at, &raw(i)),
            reference.sample(at, &raw(i)).unwrap(),
        );
        let (cx, cy) = (x.content.unwrap(), y.content.unwrap());
        worst_f = worst_f.max((fx::to_f64(cx.fill_fraction) - cy.fill_fraction).abs());
        worst_m = worst_m.max((fx::to_f64(cx.mass_kg) - cy.mass_kg).abs() / cy.mass_kg);
        // Both paths withhold the same outputs.
        assert_eq!(x.uncertainty.is_some(), y.uncertainty.is_some(), "{i}");
        if cfg!(feature = "uncertainty") {
            // From the first block close on.
            assert_eq!(x.uncertainty.is_some(), i >= 60, "{i}");
        } else {
            assert!(x.uncertainty.is_none() && y.uncertainty.is_none(), "{i}");
        }
        with_u += u32::from(x.uncertainty.is_some());
        events
            .0
            .extend(x.events.iter().map(|e| (e.kind, e.raised, e.at)));
        events
            .1
            .extend(y.events.iter().map(|e| (e.kind, e.raised, e.at)));
    }
    println!(
        "features {}: worst |ΔF| {worst_f:.2e}, worst mass {worst_m:.2e}, {with_u} samples with U, events {:?}",
        features(),
        events.0
    );
    // The bound of the full chain's end-to-end test against the f64
    // reference (tests/tests/firmware_qemu.rs: 1e-5), with or without the
    // optional parts: none of them changes the content.
    assert!(worst_f < 1e-5, "{worst_f}");
    assert!(worst_m < 1e-5, "{worst_m}");
    // The alarm events of the device path are the reference's.
    assert_eq!(events.0, events.1);
}

fn features() -> &'static str {
    if cfg!(feature = "uncertainty") {
        "uncertainty on"
    } else {
        "uncertainty off"
    }
}
