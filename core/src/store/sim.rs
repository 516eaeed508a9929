//! A NOR-flash test double that enforces the rules of real NOR flash and can
//! cut the power at any byte.
//!
//! Rules enforced (each broken rule is an error and is counted in
//! [`SimFlash::violations`], so a test can assert that the code under test
//! never breaks one):
//!
//! * writes and erases are aligned to `WRITE` and `ERASE` bytes;
//! * a byte is written at most once between two erases of its sector (even
//!   with the value 0xFF: flash with ECC forbids programming a word twice);
//! * erased bytes read 0xFF; a write can only clear bits.
//!
//! Power: [`SimFlash::cut_power_after`] gives a budget of byte operations.
//! Each written byte costs one; an erase costs two (the first half of the
//! sector is erased by the first, the rest by the second). When the budget is
//! spent the operation in progress stops where it is and every later write or
//! erase fails with [`SimError::PowerCut`] until [`SimFlash::restore_power`]
//! (the reboot of a test).

use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};

/// Why the double refused an operation.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SimError {
    /// Offset or length not aligned.
    NotAligned,
    /// Range outside the flash.
    OutOfBounds,
    /// A byte written twice without an erase.
    WriteTwice,
    /// The power is off.
    PowerCut,
}

impl NorFlashError for SimError {
    fn kind(&self) -> NorFlashErrorKind {
        match self {
            SimError::NotAligned => NorFlashErrorKind::NotAligned,
            SimError::OutOfBounds => NorFlashErrorKind::OutOfBounds,
            SimError::WriteTwice | SimError::PowerCut => NorFlashErrorKind::Other,
        }
    }
}

/// A RAM-backed NOR flash of `SIZE` bytes, `ERASE`-byte sectors and
/// `WRITE`-byte write units.
#[derive(Clone, Debug)]
pub struct SimFlash<const SIZE: usize, const ERASE: usize, const WRITE: usize> {
    data: [u8; SIZE],
    programmed: [bool; SIZE],
    budget: Option<u64>,
    violations: u32,
    bytes_written: u64,
    erases: u64,
}

impl<const SIZE: usize, const ERASE: usize, const WRITE: usize> Default
    for SimFlash<SIZE, ERASE, WRITE>
{
    fn default() -> Self {
        Self::new()
    }
}

impl<const SIZE: usize, const ERASE: usize, const WRITE: usize> SimFlash<SIZE, ERASE, WRITE> {
    /// A fully erased flash with the power on.
    pub const fn new() -> Self {
        SimFlash {
            data: [0xFF; SIZE],
            programmed: [false; SIZE],
            budget: None,
            violations: 0,
            bytes_written: 0,
            erases: 0,
        }
    }

    /// A flash holding `image` (bytes past its end erased). Every byte that is
    /// not 0xFF counts as written.
    pub fn from_image(image: &[u8]) -> Self {
        let mut f = Self::new();
        for ((d, p), &b) in f.data.iter_mut().zip(f.programmed.iter_mut()).zip(image) {
            *d = b;
            *p = b != 0xFF;
        }
        f
    }

    /// The raw contents.
    pub fn image(&self) -> &[u8; SIZE] {
        &self.data
    }

    /// Flips one bit in place (a retention fault), without any rule check.
    pub fn flip_bit(&mut self, bit: usize) {
        if let Some(b) = self.data.get_mut(bit / 8) {
            *b ^= 1 << (bit % 8);
        }
    }

    /// Lets `ops` more byte operations happen, then cuts the power.
    pub fn cut_power_after(&mut self, ops: u64) {
        self.budget = Some(ops);
    }

    /// Powers up again with no limit.
    pub fn restore_power(&mut self) {
        self.budget = None;
    }

    /// True once the budget is spent.
    pub fn power_cut(&self) -> bool {
        self.budget == Some(0)
    }

    /// Rule violations so far (writes twice, misaligned or out of bounds).
    pub fn violations(&self) -> u32 {
        self.violations
    }

    /// Bytes written so far.
    pub fn bytes_written(&self) -> u64 {
        self.bytes_written
    }

    /// Sector erases started so far.
    pub fn erases(&self) -> u64 {
        self.erases
    }

    fn spend(&mut self) -> bool {
        match &mut self.budget {
            None => true,
            Some(0) => false,
            Some(n) => {
                *n -= 1;
                true
            }
        }
    }

    fn violation(&mut self, e: SimError) -> SimError {
        self.violations += 1;
        e
    }

    fn range(&mut self, offset: u32, len: usize, align: usize) -> Result<usize, SimError> {
        let start = offset as usize;
        if !start.is_multiple_of(align) || !len.is_multiple_of(align) {
            return Err(self.violation(SimError::NotAligned));
        }
        if start.checked_add(len).is_none_or(|end| end > SIZE) {
            return Err(self.violation(SimError::OutOfBounds));
        }
        Ok(start)
    }
}

impl<const SIZE: usize, const ERASE: usize, const WRITE: usize> ErrorType
    for SimFlash<SIZE, ERASE, WRITE>
{
    type Error = SimError;
}

impl<const SIZE: usize, const ERASE: usize, const WRITE: usize> ReadNorFlash
    for SimFlash<SIZE, ERASE, WRITE>
{
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), SimError> {
        let start = self.range(offset, bytes.len(), 1)?;
        let src = self
            .data
            .get(start..start + bytes.len())
            .ok_or(SimError::OutOfBounds)?;
        bytes.copy_from_slice(src);
        Ok(())
    }

    fn capacity(&self) -> usize {
        SIZE
    }
}

impl<const SIZE: usize, const ERASE: usize, const WRITE: usize> NorFlash
    for SimFlash<SIZE, ERASE, WRITE>
{
    const WRITE_SIZE: usize = WRITE;
    const ERASE_SIZE: usize = ERASE;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), SimError> {
        if to < from {
            return Err(self.violation(SimError::OutOfBounds));
        }
        let start = self.range(from, (to - from) as usize, ERASE)?;
        for sector in (start..to as usize).step_by(ERASE) {
            self.erases += 1;
            for half in [
                sector..sector + ERASE / 2,
                sector + ERASE / 2..sector + ERASE,
            ] {
                if !self.spend() {
                    return Err(SimError::PowerCut);
                }
                for i in half {
                    if let (Some(d), Some(p)) = (self.data.get_mut(i), self.programmed.get_mut(i)) {
                        *d = 0xFF;
                        *p = false;
                    }
                }
            }
        }
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), SimError> {
        let start = self.range(offset, bytes.len(), WRITE)?;
        if self
            .programmed
            .get(start..start + bytes.len())
            .is_some_and(|p| p.iter().any(|&p| p))
        {
            return Err(self.violation(SimError::WriteTwice));
        }
        for (i, &b) in bytes.iter().enumerate() {
            if !self.spend() {
                return Err(SimError::PowerCut);
            }
            if let (Some(d), Some(p)) = (
                self.data.get_mut(start + i),
                self.programmed.get_mut(start + i),
            ) {
                *d &= b;
                *p = true;
            }
            self.bytes_written += 1;
        }
        Ok(())
    }
}
