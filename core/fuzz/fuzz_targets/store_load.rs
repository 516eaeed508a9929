//! Loading configuration from arbitrary flash images: never panics, always
//! gives a valid value, and a store afterwards either fails cleanly or is
//! read back exactly, without breaking a flash rule.
#![no_main]

use isochor_core::SetupFx;
use isochor_core::link::Origin;
use isochor_core::store::sim::SimFlash;
use isochor_core::store::{BlobSlots, GasModelRef, Loaded, Record, RecordArea, RecordKind};
use libfuzzer_sys::fuzz_target;

type Flash = SimFlash<8192, 1024, 4>;

fuzz_target!(|image: &[u8]| {
    let mut flash = Flash::from_image(image);
    let setup = RecordArea::new(&flash, RecordKind::SETUP, 0, 2048).expect("layout");
    let gas = RecordArea::new(&flash, RecordKind::GAS_MODEL_REF, 4096, 1024).expect("layout");
    let blobs = BlobSlots::new(&flash, 6144, 1024).expect("layout");

    let l: Loaded<SetupFx> = setup.load(&mut flash);
    assert!(l.value.validate().is_ok());
    let g: Loaded<GasModelRef> = gas.load(&mut flash);
    assert!(g.value.validate().is_ok());
    let _ = blobs.check(&mut flash, &g.value);

    let v = SetupFx::safe_default();
    if setup.store(&mut flash, &v).is_ok() {
        let l: Loaded<SetupFx> = setup.load(&mut flash);
        assert_eq!(l.value, v);
        assert_eq!(l.origin, Origin::Stored);
    }
    assert_eq!(flash.violations(), 0);
});
