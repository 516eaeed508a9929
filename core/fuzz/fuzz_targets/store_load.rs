//! Loading the configuration reference from arbitrary flash images: never
//! panics, always gives a valid value, and a store afterwards either fails
//! cleanly or is read back exactly, without breaking a flash rule; the
//! blob it points at is checked, never trusted.
#![no_main]

use isochor_core::store::sim::SimFlash;
use isochor_core::store::{ConfigRef, Layout, Loaded, Origin, Record};
use libfuzzer_sys::fuzz_target;

type Flash = SimFlash<8192, 1024, 4>;

fuzz_target!(|image: &[u8]| {
    let mut flash = Flash::from_image(image);
    let layout = Layout::contiguous(&flash, 0, 1024, 3072).expect("layout");
    let l: Loaded<ConfigRef> = layout.config.load(&mut flash);
    assert!(l.value.validate().is_ok());
    let _ = layout.blobs.check(&mut flash, &l.value.blob);
    let mut buf = [0u8; 64];
    let _ = layout.blobs.read(&mut flash, &l.value.blob, 0, &mut buf);

    let v = ConfigRef {
        zero_pressure: -1234,
        ..ConfigRef::safe_default()
    };
    if layout.config.store(&mut flash, &v).is_ok() {
        let l: Loaded<ConfigRef> = layout.config.load(&mut flash);
        assert_eq!(l.value, v);
        assert_eq!(l.origin, Origin::Stored);
    }
    assert_eq!(flash.violations(), 0);
});
