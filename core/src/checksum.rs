//! Checksums used wherever the crate protects bytes (frames, stored records,
//! gas-model blobs): CRC-32C (Castagnoli), as specified in RFC 3720 §B.4 and
//! catalogued as CRC-32/ISCSI (poly 0x1EDC6F41, reflected, init and xorout
//! 0xFFFFFFFF, check value 0xE3069283 for "123456789").

use crc::{CRC_32_ISCSI, Crc, Digest, NoTable};

/// The CRC-32C engine. Bitwise (no lookup table): slower but costs no flash.
const CRC32C: Crc<u32, NoTable> = Crc::<u32, NoTable>::new(&CRC_32_ISCSI);

/// CRC-32C of `bytes`.
pub fn crc32c(bytes: &[u8]) -> u32 {
    CRC32C.checksum(bytes)
}

/// An incremental CRC-32C over several pieces.
#[derive(Clone)]
pub struct Crc32c(Digest<'static, u32, NoTable>);

impl Crc32c {
    /// Starts a checksum.
    pub fn new() -> Crc32c {
        Crc32c(CRC32C.digest())
    }
    /// Adds bytes.
    pub fn update(&mut self, bytes: &[u8]) {
        self.0.update(bytes);
    }
    /// The checksum of everything added.
    pub fn finish(self) -> u32 {
        self.0.finalize()
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
}
