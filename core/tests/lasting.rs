//! A prepared configuration read from bytes that last ([`Lasting`]: a
//! device's flash) keeps the views of its stages and gas table, derived once
//! per configuration; from other bytes (`&[u8]`, a host's buffer) they are
//! derived on every use. Both must give the same readings bit for bit: the
//! kept views are the same views, only derived at another time.

use isochor_core::app::{Zero, fixed};
use isochor_core::model::CompressibilityFx;
use isochor_core::prepared::{GaugeConfig, Lasting, Prepared, PreparedBuf, PreparedModel};
use isochor_core::sensor::channel::RawSample;
use isochor_core::time::Instant;
use isochor_core::{Gas, Setup, SetupFx, Tank, fx};
use zerocopy::IntoBytes;

/// A copy of `bytes` that lasts as long as the test program, at a multiple
/// of 4 as a prepared configuration must start.
fn leak(bytes: &[u8]) -> &'static [u8] {
    let words: &'static mut [u32] =
        Box::leak(vec![0u32; bytes.len().div_ceil(4)].into_boxed_slice());
    let out = &mut words.as_mut_bytes()[..bytes.len()];
    out.copy_from_slice(bytes);
    out
}

/// Codes over the whole converter ranges, the rails and a few faults
/// (invented bench codes): a draw-down of the nominal 24-bit bridge with the
/// Pt1000 sweeping, every 13th sample an extreme code on one channel.
fn raw(i: u32) -> RawSample {
    let pressure = match i % 13 {
        0 => 0x00FF_FFFF,
        6 => 0,
        _ => (2_097_152u32.wrapping_sub(i * 270)) & 0x00FF_FFFF,
    };
    let temperature = match i % 17 {
        0 => 0,
        8 => 0x00FF_FFFF,
        _ => 4_200_000 + (i % 211) * 2_900,
    };
    RawSample {
        pressure,
        temperature,
    }
}

fn check(gas: Gas, volume_m3: f64, rated_pa: f64) {
    let setup = SetupFx::from_f64(&Setup::new(gas, Tank::new(volume_m3, rated_pa))).unwrap();
    let config = GaugeConfig::nominal(setup);
    let (buf, _) = PreparedBuf::build(&config).unwrap();
    let kept = Prepared::new(Lasting(leak(buf.bytes()))).unwrap();
    let fresh = buf.prepared().unwrap();

    // The kept views are the views.
    let (t, p) = kept.lasting_stages().unwrap();
    assert_eq!((t, p), (fresh.temperature(), fresh.pressure()), "{gas:?}");
    assert!(fresh.lasting_stages().is_none());
    let (mk, mf) = (
        PreparedModel::new(&kept).unwrap(),
        PreparedModel::new(&fresh).unwrap(),
    );
    assert_eq!(mk.table(), mf.table(), "{gas:?}");
    // The views cover what the gas has: a boundary for a gas liquid in
    // range, a settled-pressure curve for every setup here.
    assert_eq!(
        mk.table().boundary.is_some(),
        gas == Gas::CarbonDioxide,
        "{gas:?}"
    );
    assert!(mk.settle_curve().is_some(), "{gas:?}");
    assert_eq!(mk.settle_curve(), mf.settle_curve(), "{gas:?}");
    assert_eq!(mk.pressure_knots_fx(), mf.pressure_knots_fx(), "{gas:?}");
    for k in 0..200u32 {
        let (pp, tt) = (
            fx::Pressure::from_bits(k * 1_000_000),
            fx::Temperature::from_bits(180 * (1 << 23) + k * (1 << 20)),
        );
        assert_eq!(mk.z_fx(pp, tt), mf.z_fx(pp, tt), "{gas:?} {k}");
        assert_eq!(mk.z_value_fx(pp, tt), mf.z_value_fx(pp, tt), "{gas:?} {k}");
        assert_eq!(mk.settle_fx(k << 20), mf.settle_fx(k << 20), "{gas:?} {k}");
    }

    // The whole chain, sample for sample (two hours at 1 Hz: block closes,
    // the hourly leak step, sensor faults and their recovery).
    let mut a = fixed::Pipeline::new(kept, Zero::default()).unwrap();
    let mut b = fixed::Pipeline::new(fresh, Zero::default()).unwrap();
    for i in 0..7200u32 {
        let at = Instant(u64::from(i) * 1000);
        assert_eq!(a.sample(at, &raw(i)), b.sample(at, &raw(i)), "{gas:?} {i}");
    }
}

#[test]
fn kept_views_read_the_same_as_views_derived_per_sample() {
    // A permanent gas, one with a settled-pressure curve far from ideal,
    // and one liquid somewhere in range (its table has a boundary).
    check(Gas::Nitrogen, 0.050, 200e5);
    check(Gas::Methane, 0.080, 250e5);
    check(Gas::CarbonDioxide, 0.040, 30e5);
}
