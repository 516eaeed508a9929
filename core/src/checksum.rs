//! Checksums used wherever the crate protects bytes (frames, stored records,
//! gas-model blobs): CRC-32C (Castagnoli), as specified in RFC 3720 §B.4 and
//! catalogued as CRC-32/ISCSI (poly 0x1EDC6F41, reflected, init and xorout
//! 0xFFFFFFFF, check value 0xE3069283 for "123456789").

/// CRC-32C of every 4-bit value (reflected polynomial 0x82F63B78): 64 bytes
/// of flash, two look-ups per byte (a bitwise loop costs eight steps per
/// byte; a 256-entry table 1 KiB of flash).
const NIBBLE: [u32; 16] = nibble_table();

#[allow(clippy::indexing_slicing)] // const evaluation: i < 16, checked by the compiler
const fn nibble_table() -> [u32; 16] {
    let mut t = [0u32; 16];
    let mut i = 0;
    while i < 16 {
        let mut c = i as u32;
        let mut k = 0;
        while k < 4 {
            c = if c & 1 != 0 {
                (c >> 1) ^ 0x82F6_3B78
            } else {
                c >> 1
            };
            k += 1;
        }
        t[i] = c;
        i += 1;
    }
    t
}

/// The table's entry for the low four bits of `c` (the look-up cannot miss).
#[inline(always)]
fn nibble(c: u32) -> u32 {
    NIBBLE.get((c & 15) as usize).copied().unwrap_or(0)
}

/// Advances the raw (not inverted) register over `bytes`.
#[inline]
fn advance(mut c: u32, bytes: &[u8]) -> u32 {
    for &b in bytes {
        c ^= u32::from(b);
        c = (c >> 4) ^ nibble(c);
        c = (c >> 4) ^ nibble(c);
    }
    c
}

/// CRC-32C of `bytes`.
pub fn crc32c(bytes: &[u8]) -> u32 {
    !advance(!0, bytes)
}

/// An incremental CRC-32C over several pieces.
#[derive(Clone)]
pub struct Crc32c(u32);

impl Crc32c {
    /// Starts a checksum.
    pub fn new() -> Crc32c {
        Crc32c(!0)
    }
    /// Adds bytes.
    pub fn update(&mut self, bytes: &[u8]) {
        self.0 = advance(self.0, bytes);
    }
    /// The checksum of everything added.
    pub fn finish(self) -> u32 {
        !self.0
    }
}

impl Default for Crc32c {
    fn default() -> Self {
        Crc32c::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn check_value() {
        // CRC catalogue (reveng.sourceforge.io), CRC-32/ISCSI: check = 0xE3069283.
        assert_eq!(crc32c(b"123456789"), 0xE306_9283);
        let mut c = Crc32c::new();
        c.update(b"1234");
        c.update(b"56789");
        assert_eq!(c.finish(), 0xE306_9283);
    }

    proptest::proptest! {
        // The `crc` crate's CRC-32/ISCSI engine is the reference.
        #[test]
        fn matches_the_crc_crate(bytes in proptest::collection::vec(proptest::prelude::any::<u8>(), 0..300), cut in 0usize..300) {
            let reference = crc::Crc::<u32>::new(&crc::CRC_32_ISCSI).checksum(&bytes);
            proptest::prop_assert_eq!(crc32c(&bytes), reference);
            let cut = cut.min(bytes.len());
            let mut c = Crc32c::new();
            c.update(&bytes[..cut]);
            c.update(&bytes[cut..]);
            proptest::prop_assert_eq!(c.finish(), reference);
        }
    }
}
