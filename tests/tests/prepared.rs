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
    for (gas, rated) in [(Gas::Nitrogen, 200e5), (Gas::Methane, 200e5), (Gas::Hydrogen, 700e5), (Gas::CarbonDioxide, 20e5)] {
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
                let Ok(c) = est_f.estimate(pa, t) else { continue };
                assert_eq!(a.mass_kg, b.mass_kg, "{gas} {pa} {t}: the same Z and constants");
                if !c.status.is_ok() {
                    continue;
                }
                worst_mass = worst_mass.max((fx::to_f64(a.mass_kg) / c.mass_kg - 1.0).abs());
                worst_settle = worst_settle
                    .max((fx::to_f64(a.settled_pressure_pa) / c.settled_pressure_pa - 1.0).abs());
            }
        }
        println!("{gas}: mass {worst_mass:.1e}, settled pressure {worst_settle:.1e} (fixed prepared vs f64)");
        // Bounds as for the plain fixed path (content_fixed_vs_float: 5e-5).
        assert!(worst_mass < 5e-5 && worst_settle < 5e-5, "{gas}");
    }
}
