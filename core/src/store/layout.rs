//! Where a device keeps its record and its configuration blobs.

use embedded_storage::nor_flash::NorFlash;

use super::{BlobSlots, RecordArea, RecordKind};
use crate::Error;

/// The flash layout of a device: the configuration record's area and the
/// two blob slots.
#[derive(Clone)]
pub struct Layout {
    /// The configuration reference (kind 8).
    pub config: RecordArea,
    /// The blob slots.
    pub blobs: BlobSlots,
}

impl Layout {
    /// The record area from `start` (two banks of `bank_len` bytes), then
    /// two blob slots of `slot_len` bytes. Every length must be a whole
    /// number of erase sectors (see [`RecordArea::new`], [`BlobSlots::new`]).
    pub fn contiguous<F: NorFlash>(
        flash: &F,
        start: u32,
        bank_len: u32,
        slot_len: u32,
    ) -> Result<Layout, Error> {
        let area_len = bank_len.checked_mul(2).ok_or(Error::StoreLayout)?;
        let blobs = start.checked_add(area_len).ok_or(Error::StoreLayout)?;
        Ok(Layout {
            config: RecordArea::new(flash, RecordKind::CONFIG, start, bank_len)?,
            blobs: BlobSlots::new(flash, blobs, slot_len)?,
        })
    }

    /// Bytes [`Layout::contiguous`] takes for these lengths.
    pub const fn size(bank_len: u32, slot_len: u32) -> u32 {
        2 * bank_len + 2 * slot_len
    }

    /// Checks that the area holds its own kind.
    pub fn check(&self) -> Result<(), Error> {
        if self.config.kind() == RecordKind::CONFIG {
            Ok(())
        } else {
            Err(Error::StoreLayout)
        }
    }
}
