//! The invented bench sweep of raw codes the measuring and demonstration
//! programs take on the emulated boards, which have no converters.

use isochor_core::sensor::channel::RawSample;

/// The codes of sample `i`: the nominal 300 bar bridge (24-bit bipolar,
/// span half the converter range: 2^22 codes per 150 bar gauge) drawn down
/// from 150 bar by 27 codes (about 1 mbar) a sample with ±8 codes of noise;
/// the nominal Pt1000 (4.02 kΩ reference, 24-bit) around 20 °C (1077.9 Ω:
/// code 4 498 717), wandering by ±0.1 K. `tests/tests/firmware_qemu.rs`
/// repeats this formula.
pub fn codes(i: u32) -> RawSample {
    let noise = (i.wrapping_mul(2_654_435_761) >> 28) as i32 - 8;
    let p = 2_097_152 - (i * 27) as i32 + noise;
    let t = 4_498_717 + ((i * 37) % 97) as i32 * 17 - 800;
    RawSample {
        pressure: (p as u32) & 0x00FF_FFFF,
        temperature: t as u32,
    }
}
