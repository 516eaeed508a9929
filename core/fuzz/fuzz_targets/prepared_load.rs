//! Validating a prepared configuration from arbitrary bytes, as a device
//! does before it commits one: never panics; bytes that validate give a
//! pipeline that takes samples of any codes without panicking.
#![no_main]

use isochor_core::app::{Zero, fixed::Pipeline};
use isochor_core::prepared::Prepared;
use isochor_core::sensor::channel::RawSample;
use isochor_core::time::Instant;
use libfuzzer_sys::fuzz_target;

/// The bytes, 4-aligned as a device's flash slot is.
#[repr(C, align(4))]
struct Aligned([u8; isochor_core::prepared::MAX_LEN]);

fuzz_target!(|data: &[u8]| {
    let n = data.len().min(isochor_core::prepared::MAX_LEN);
    let mut buf = Box::new(Aligned([0; isochor_core::prepared::MAX_LEN]));
    buf.0[..n].copy_from_slice(&data[..n]);
    let bytes = &buf.0[..n];
    let Ok(p) = Prepared::new(bytes) else {
        return;
    };
    let _ = p.source_config();
    let Ok(mut pipe) = Pipeline::new(p, Zero::default()) else {
        return;
    };
    for (i, w) in data.chunks(8).take(64).enumerate() {
        let mut c = [0u8; 8];
        c[..w.len()].copy_from_slice(w);
        let raw = RawSample {
            pressure: u32::from_le_bytes([c[0], c[1], c[2], c[3]]),
            temperature: u32::from_le_bytes([c[4], c[5], c[6], c[7]]),
        };
        let _ = pipe.sample(Instant(i as u64 * 1000), &raw);
    }
});
