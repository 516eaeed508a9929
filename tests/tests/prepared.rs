//! Prepared configurations: built on the host, validated as a device
//! validates them, and their estimator (the device's: the table read in
//! place, the settled-pressure curve) against the plain fixed-point and the
//! `f64` estimators over the envelope.

use isochor_core::content::{fixed, float};
use isochor_core::model::DeviceModel;
use isochor_core::prepared::{GaugeConfig, Prepared, PreparedBuf, PreparedModel};
use isochor_core::{Gas, Setup, SetupFx, Tank, fx};

fn setup(gas: Gas, capacity_m3: f64, rated_pa: f64) -> SetupFx {
    SetupFx::from_f64(&Setup::new(gas, Tank::new(capacity_m3, rated_pa))).unwrap()
}

#[test]
fn nominal_configurations_prepare_and_validate() {
    for gas in Gas::ALL {
        let rated = match gas {
            // Liquefiable gases are rated in their gas region here (a
            // cylinder holding liquid is weighed, not gauged).
            Gas::CarbonDioxide | Gas::Ethane | Gas::Xenon => 20e5,
            Gas::Propane => 5e5,
            _ => 200e5,
        };
        let cfg = GaugeConfig::nominal(setup(gas, 0.05, rated));
        let (buf, report) = PreparedBuf::build(&cfg).unwrap_or_else(|e| panic!("{gas}: {e}"));
        let p = buf.prepared().unwrap();
        println!(
            "{gas}: {} bytes, {} pieces; fit T {:.1e} K, p {:.1e}, settle {:.1e} Pa",
            buf.bytes().len(),
            report.pieces,
            report.temperature_k,
            report.pressure,
            report.settle_pa
        );
        // The source configuration reads back.
        let back = p.source_config().unwrap();
        assert_eq!(back, cfg);
        // Every single-bit flip is refused.
        let bytes = buf.bytes();
        for i in (0..bytes.len()).step_by(bytes.len() / 97 + 1) {
            let mut b = bytes.to_vec();
            b[i] ^= 0x10;
            let w = PreparedBuf::from_bytes(&b).unwrap();
            assert!(w.prepared().is_err(), "{gas}: flip at {i} accepted");
        }
    }
}

#[test]
fn prepared_estimator_matches_the_plain_one() {
    for (gas, rated) in [
        (Gas::Nitrogen, 200e5),
        (Gas::Methane, 200e5),
        (Gas::Hydrogen, 700e5),
        (Gas::CarbonDioxide, 20e5),
    ] {
        let s = setup(gas, 0.05, rated);
        let cfg = GaugeConfig::nominal(s);
        let (buf, _) = PreparedBuf::build(&cfg).unwrap();
        let p: Prepared<&[u8]> = buf.prepared().unwrap();
        let model = PreparedModel::new(&p).unwrap();
        let est_p = fixed::Estimator::from_parts(p.scalars().estimator, model).unwrap();
        let dm = DeviceModel::builtin(gas).unwrap();
        let est_x = fixed::Estimator::new(s, &dm).unwrap();
        let est_f = float::Estimator::<f64, _>::new(s.to_real(), &dm).unwrap();
        let (mut worst_mass, mut worst_settle) = (0.0f64, 0.0f64);
        for i in 0..=100 {
            let pa = 1e5 + (rated * 1.3) * i as f64 / 100.0;
            for tc in [-40.0, 0.0, 15.0, 40.0, 85.0] {
                let t = 273.15 + tc;
                let a = est_p.estimate(fx::Pressure::from_num(pa), fx::Temperature::from_num(t));
                let b = est_x.estimate(fx::Pressure::from_num(pa), fx::Temperature::from_num(t));
                let Ok(c) = est_f.estimate(pa, t) else {
                    continue;
                };
                assert_eq!(
                    a.mass_kg, b.mass_kg,
                    "{gas} {pa} {t}: the same Z and constants"
                );
                if !c.status.is_ok() {
                    continue;
                }
                worst_mass = worst_mass.max((fx::to_f64(a.mass_kg) / c.mass_kg - 1.0).abs());
                worst_settle = worst_settle
                    .max((fx::to_f64(a.settled_pressure_pa) / c.settled_pressure_pa - 1.0).abs());
            }
        }
        println!(
            "{gas}: mass {worst_mass:.1e}, settled pressure {worst_settle:.1e} (fixed prepared vs f64)"
        );
        // Bounds as for the plain fixed path (content_fixed_vs_float: 5e-5).
        assert!(worst_mass < 5e-5 && worst_settle < 5e-5, "{gas}");
    }
}

/// The configuration the firmware's budget program and minimal example run
/// (`firmware/data/nominal.izpc`): the reference board's nominal sensors on
/// a 50 L nitrogen cylinder rated 200 bar. The committed bytes must be a
/// valid preparation of exactly that configuration, and read the same as
/// what the host prepares today (the fit's last bits may differ between
/// machines' maths libraries, so the comparison is on the readings: the
/// fixed pipelines of both over a draw-down agree to the last bit of mass,
/// or within 1e-9 of it). `ISOCHOR_BLESS=1` writes the file afresh.
#[test]
fn committed_firmware_configuration_is_current() {
    use isochor_core::app::{Zero, fixed::Pipeline};
    use isochor_core::sensor::channel::RawSample;
    use isochor_core::time::Instant;

    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../firmware/data/nominal.izpc");
    let cfg = GaugeConfig::nominal(setup(Gas::Nitrogen, 0.05, 200e5));
    let (fresh, _) = PreparedBuf::build(&cfg).unwrap();
    if std::env::var_os("ISOCHOR_BLESS").is_some() {
        std::fs::write(&path, fresh.bytes()).unwrap();
    }
    let committed = std::fs::read(&path).unwrap_or_else(|e| {
        panic!(
            "{}: {e} (write it with ISOCHOR_BLESS=1 cargo test -p isochor-tests --test prepared)",
            path.display()
        )
    });
    let committed = PreparedBuf::from_bytes(&committed).unwrap();
    let p = committed
        .prepared()
        .expect("the committed configuration validates");
    assert_eq!(
        p.source_config().unwrap(),
        cfg,
        "the committed configuration is not the nominal one: bless it again"
    );
    let mut a = Pipeline::new(committed.prepared().unwrap(), Zero::default()).unwrap();
    let mut b = Pipeline::new(fresh.prepared().unwrap(), Zero::default()).unwrap();
    for i in 0..3000u32 {
        // The budget program's draw-down: the 24-bit bridge from 150 bar
        // down, a Pt1000 near 20 °C.
        let raw = RawSample {
            pressure: (2_097_152 - i * 270) & 0x00FF_FFFF,
            temperature: 4_498_717 + (i % 97) * 17,
        };
        let at = Instant(u64::from(i) * 1000);
        let (x, y) = (a.sample(at, &raw), b.sample(at, &raw));
        let (mx, my) = (
            x.content.unwrap().mass_kg.to_num::<f64>(),
            y.content.unwrap().mass_kg.to_num::<f64>(),
        );
        assert!(
            (mx - my).abs() <= 1e-9 * my.max(1.0),
            "sample {i}: {mx} vs {my}"
        );
        assert_eq!(x.status, y.status, "sample {i}");
    }
}

#[test]
fn a_mixture_prepares_with_its_table_and_composition() {
    use isochor_eos::composition::GasSpec;
    use isochor_eos::fluid::Fluid;
    use isochor_eos::model::{BuildSpec, build};

    let spec = GasSpec::parse("argon=82%,carbon_dioxide=18%").unwrap();
    let GasSpec::Mixture(comp) = &spec else {
        panic!("a mixture")
    };
    let gas = spec.gas();
    let table = build(&BuildSpec::for_fluid(Fluid::of(&spec)))
        .unwrap()
        .table;
    let mut cfg = GaugeConfig::nominal(setup(gas, 0.05, 200e5));
    // No built-in table names a mixture, and a mixture names its composition.
    assert!(PreparedBuf::build(&cfg).is_err());
    cfg.model = Some(table);
    assert!(cfg.validate().is_err(), "composition missing");
    cfg.composition = spec.core_composition();
    let (buf, _) = PreparedBuf::build(&cfg).unwrap();
    let p = buf.prepared().unwrap();
    assert_eq!(p.scalars().model.gas, gas);
    // The device's pipeline starts on it.
    isochor_core::app::fixed::Pipeline::new(
        buf.prepared().unwrap(),
        isochor_core::app::Zero::default(),
    )
    .unwrap();
    // Read back, the composition is the one given (same fingerprint).
    let back = p.source_config().unwrap();
    assert_eq!(back, cfg);
    let read =
        isochor_eos::composition::Composition::from_core(&back.composition.unwrap()).unwrap();
    assert_eq!(read.fingerprint(), comp.fingerprint());
    assert_eq!(read.to_string(), comp.to_string());
    // Another composition, or one on a pure gas, is refused.
    let mut other = cfg.clone();
    other.composition = GasSpec::parse("argon=80%,carbon_dioxide=20%")
        .unwrap()
        .core_composition();
    assert!(PreparedBuf::build(&other).is_err());
    let mut pure = GaugeConfig::nominal(setup(Gas::Argon, 0.05, 200e5));
    pure.composition = spec.core_composition();
    assert!(PreparedBuf::build(&pure).is_err());
}
