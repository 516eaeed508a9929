//! NOR flash emulated in RAM, for boards without flash of their own (the
//! QEMU `mps2-an386` machine has none).
//!
//! It keeps the rules of NOR flash so the store is used as on real parts:
//! erased bytes read 0xFF, erases are whole sectors, writes are whole
//! aligned units and can only clear bits (a write ANDs into what is there).
//! It keeps its content across a system reset only because the board places
//! it in memory that neither a reset nor the start-up code clears; a power
//! cycle (a new QEMU process) loses it. This is an emulation aid, not a
//! product storage.

use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash, check_erase, check_read,
    check_write,
};

/// Sector size, bytes.
pub const SECTOR: usize = 1024;
/// Write unit, bytes.
pub const UNIT: usize = 4;

/// An error of the emulated flash (out of bounds or misaligned).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RamNorError(NorFlashErrorKind);

impl NorFlashError for RamNorError {
    fn kind(&self) -> NorFlashErrorKind {
        self.0
    }
}

/// NOR flash over a byte region (through its address, so that the board
/// may also read the region through its memory map: see
/// [`RamNor::from_raw`]).
pub struct RamNor<'a> {
    base: *mut u8,
    len: usize,
    region: core::marker::PhantomData<&'a mut [u8]>,
}

impl<'a> RamNor<'a> {
    /// Emulated flash over `mem` (its length a whole number of sectors).
    pub fn new(mem: &'a mut [u8]) -> RamNor<'a> {
        RamNor {
            base: mem.as_mut_ptr(),
            len: mem.len(),
            region: core::marker::PhantomData,
        }
    }

    /// Emulated flash over the `len` bytes at `base`, a region of RAM that
    /// nothing else writes.
    ///
    /// # Safety
    ///
    /// The region must be valid, writable memory for the program's whole
    /// life, written by nothing but this driver; it may be read through
    /// other pointers (the board's memory map of the store) as long as the
    /// bytes read are not being written at the same time.
    pub unsafe fn from_raw(base: *mut u8, len: usize) -> RamNor<'static> {
        RamNor {
            base,
            len,
            region: core::marker::PhantomData,
        }
    }

    fn bytes(&self, offset: u32, n: usize) -> Option<*mut u8> {
        let end = (offset as usize).checked_add(n)?;
        if end > self.len {
            return None;
        }
        // In bounds: `offset + n ≤ len`.
        Some(self.base.wrapping_add(offset as usize))
    }
}

impl ErrorType for RamNor<'_> {
    type Error = RamNorError;
}

impl ReadNorFlash for RamNor<'_> {
    const READ_SIZE: usize = 1;
    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), RamNorError> {
        check_read(self, offset, bytes.len()).map_err(RamNorError)?;
        let src = self
            .bytes(offset, bytes.len())
            .ok_or(RamNorError(NorFlashErrorKind::OutOfBounds))?;
        // SAFETY: in bounds of the region (checked), which this driver owns.
        unsafe { core::ptr::copy_nonoverlapping(src, bytes.as_mut_ptr(), bytes.len()) };
        Ok(())
    }
    fn capacity(&self) -> usize {
        self.len
    }
}

impl NorFlash for RamNor<'_> {
    const WRITE_SIZE: usize = UNIT;
    const ERASE_SIZE: usize = SECTOR;
    fn erase(&mut self, from: u32, to: u32) -> Result<(), RamNorError> {
        check_erase(self, from, to).map_err(RamNorError)?;
        let n = (to - from) as usize;
        let dst = self
            .bytes(from, n)
            .ok_or(RamNorError(NorFlashErrorKind::OutOfBounds))?;
        // SAFETY: in bounds of the region (checked), which this driver owns.
        unsafe { core::ptr::write_bytes(dst, 0xFF, n) };
        Ok(())
    }
    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), RamNorError> {
        check_write(self, offset, bytes.len()).map_err(RamNorError)?;
        let dst = self
            .bytes(offset, bytes.len())
            .ok_or(RamNorError(NorFlashErrorKind::OutOfBounds))?;
        for (i, s) in bytes.iter().enumerate() {
            // SAFETY: in bounds of the region (checked), which this driver owns.
            unsafe {
                let d = dst.add(i);
                *d &= *s;
            }
        }
        Ok(())
    }
}

/// Erases the whole of `flash` when every byte of it reads 0x00: the state
/// QEMU gives memory outside a loaded image (its emulated nRF51 flash too),
/// which no write of the store can leave (the store writes headers with a
/// magic number and checksums, never whole sectors of zeros). On a real part
/// this never happens; if it did, nothing readable would be lost.
pub fn format_if_blank<F: NorFlash>(flash: &mut F) -> Result<bool, F::Error> {
    let mut buf = [0u8; 64];
    let len = flash.capacity() as u32;
    let mut at = 0u32;
    while at < len {
        let n = (len - at).min(buf.len() as u32) as usize;
        let b = buf.get_mut(..n).unwrap_or(&mut []);
        flash.read(at, b)?;
        if b.iter().any(|&x| x != 0) {
            return Ok(false);
        }
        at += n as u32;
    }
    flash.erase(0, len)?;
    Ok(true)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nor_rules_hold() {
        let mut mem = vec![0u8; 4 * SECTOR];
        let mut f = RamNor::new(&mut mem);
        assert!(format_if_blank(&mut f).unwrap());
        let mut b = [0u8; 8];
        f.read(0, &mut b).unwrap();
        assert_eq!(b, [0xFF; 8]);
        f.write(4, &[0x0F, 0xF0, 0xAA, 0x55]).unwrap();
        f.write(4, &[0xFF, 0x0F, 0xFF, 0xFF]).unwrap();
        f.read(4, &mut b[..4]).unwrap();
        assert_eq!(&b[..4], &[0x0F, 0x00, 0xAA, 0x55]);
        assert!(f.write(2, &[0; 4]).is_err()); // misaligned
        assert!(f.erase(0, 100).is_err()); // not a sector
        assert!(f.read(4 * SECTOR as u32, &mut b).is_err());
        // Not blank any more: left alone.
        assert!(!format_if_blank(&mut f).unwrap());
        f.erase(0, SECTOR as u32).unwrap();
        f.read(4, &mut b[..4]).unwrap();
        assert_eq!(&b[..4], &[0xFF; 4]);
    }
}
