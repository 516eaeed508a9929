//! Blobs (prepared configurations): two flash slots, loaded in chunks,
//! committed by a record.
//!
//! A load writes into the slot the blob in force does not use, so that blob
//! stays intact until the new one is complete. When the last chunk arrives
//! the whole blob is read back and its CRC-32C compared with the one
//! announced; only then may the caller store the record that points at it
//! ([`ConfigRef`](super::ConfigRef): a record write, power-safe like every
//! record). A power cut at any point leaves the previous reference, and the
//! previous blob, in force.

use embedded_storage::nor_flash::NorFlash;
use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

use crate::Error;
use crate::checksum::Crc32c;

/// A blob in a slot.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BlobRef {
    /// Slot index, 0 or 1.
    pub slot: u8,
    /// Blob length, bytes; 0 = no blob.
    pub len: u32,
    /// CRC-32C of the blob.
    pub crc: u32,
}

impl BlobRef {
    /// No blob.
    pub const NONE: BlobRef = BlobRef {
        slot: 0,
        len: 0,
        crc: 0,
    };
}

/// Largest write unit the loader buffers (bytes).
const MAX_UNIT: usize = 32;

#[derive(Clone)]
struct Load {
    slot: u8,
    total_len: u32,
    blob_crc: u32,
    next: u32,
    written: u32,
    pending: [u8; MAX_UNIT],
    pending_len: usize,
    crc: Crc32c,
}

/// What a chunk did.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ChunkOutcome {
    /// Taken; the next chunk starts at this offset.
    Next(u32),
    /// The blob is complete and checked: commit this reference to use it.
    Complete(BlobRef),
}

/// Two slots of `slot_len` bytes each from `start`.
#[derive(Clone)]
pub struct BlobSlots {
    start: u32,
    slot_len: u32,
    load: Option<Load>,
}

impl BlobSlots {
    /// Two slots at `start`, each `slot_len` bytes (whole erase sectors).
    pub fn new<F: NorFlash>(flash: &F, start: u32, slot_len: u32) -> Result<BlobSlots, Error> {
        let erase = F::ERASE_SIZE as u64;
        if erase == 0
            || F::WRITE_SIZE > MAX_UNIT
            || !u64::from(start).is_multiple_of(erase)
            || !u64::from(slot_len).is_multiple_of(erase)
            || u64::from(start) + 2 * u64::from(slot_len) > flash.capacity() as u64
        {
            return Err(Error::StoreLayout);
        }
        Ok(BlobSlots {
            start,
            slot_len,
            load: None,
        })
    }

    /// Largest blob, bytes.
    pub fn capacity(&self) -> u32 {
        self.slot_len
    }

    /// Where slot `slot` starts in the flash, bytes (for boards that read a
    /// blob in place through their memory map).
    pub fn slot_offset(&self, slot: u8) -> u32 {
        self.slot_start(slot)
    }

    fn slot_start(&self, slot: u8) -> u32 {
        self.start + u32::from(slot) * self.slot_len
    }

    /// Takes one chunk of a load. `current` is the reference in force (its
    /// slot is never written). A chunk at offset 0 starts a new load; any
    /// other chunk must continue the load in progress exactly.
    pub fn chunk<F: NorFlash>(
        &mut self,
        flash: &mut F,
        current: &BlobRef,
        offset: u32,
        total_len: u32,
        blob_crc: u32,
        bytes: &[u8],
    ) -> Result<ChunkOutcome, Error> {
        if offset == 0 {
            if total_len == 0 || total_len > self.slot_len {
                return Err(Error::RecordTooLarge);
            }
            let slot = if current.len > 0 {
                1 - current.slot.min(1)
            } else {
                0
            };
            self.load = None;
            let from = self.slot_start(slot);
            let to = from + total_len.div_ceil(F::ERASE_SIZE as u32) * F::ERASE_SIZE as u32;
            flash.erase(from, to).map_err(|_| Error::Flash)?;
            self.load = Some(Load {
                slot,
                total_len,
                blob_crc,
                next: 0,
                written: 0,
                pending: [0xFF; MAX_UNIT],
                pending_len: 0,
                crc: Crc32c::new(),
            });
        }
        let expected = self.load.as_ref().map_or(0, |l| l.next);
        let Some(load) = self.load.as_mut().filter(|l| {
            l.next == offset
                && l.total_len == total_len
                && l.blob_crc == blob_crc
                && !bytes.is_empty()
                && bytes.len() as u64 + u64::from(offset) <= u64::from(total_len)
        }) else {
            return Err(Error::ChunkOrder(expected));
        };
        let base = self.start + u32::from(load.slot) * self.slot_len;
        let unit = F::WRITE_SIZE.max(1);
        load.crc.update(bytes);
        load.next += bytes.len() as u32;
        let last = load.next == load.total_len;
        for &b in bytes {
            if let Some(p) = load.pending.get_mut(load.pending_len) {
                *p = b;
            }
            load.pending_len += 1;
            if load.pending_len == unit {
                let out = load.pending.get(..unit).ok_or(Error::Flash)?;
                let r = flash.write(base + load.written, out);
                if r.is_err() {
                    self.load = None;
                    return Err(Error::Flash);
                }
                load.written += unit as u32;
                load.pending_len = 0;
                load.pending = [0xFF; MAX_UNIT];
            }
        }
        if !last {
            return Ok(ChunkOutcome::Next(load.next));
        }
        if load.pending_len > 0 {
            let out = load.pending.get(..unit).ok_or(Error::Flash)?;
            if flash.write(base + load.written, out).is_err() {
                self.load = None;
                return Err(Error::Flash);
            }
        }
        let done = BlobRef {
            slot: load.slot,
            len: load.total_len,
            crc: load.blob_crc,
        };
        let streamed = load.crc.clone().finish();
        self.load = None;
        if streamed != blob_crc || !self.check(flash, &done) {
            return Err(Error::BlobCrc);
        }
        Ok(ChunkOutcome::Complete(done))
    }

    /// True when the blob `r` points at is intact (read back, CRC-32C).
    pub fn check<F: NorFlash>(&self, flash: &mut F, r: &BlobRef) -> bool {
        if r.len == 0 || r.slot > 1 || r.len > self.slot_len {
            return false;
        }
        let mut crc = Crc32c::new();
        let mut buf = [0u8; 64];
        let mut at = 0u32;
        while at < r.len {
            let n = (r.len - at).min(buf.len() as u32) as usize;
            let Some(b) = buf.get_mut(..n) else {
                return false;
            };
            if flash.read(self.slot_start(r.slot) + at, b).is_err() {
                return false;
            }
            crc.update(b);
            at += n as u32;
        }
        crc.finish() == r.crc
    }

    /// Reads blob bytes at `offset`.
    pub fn read<F: NorFlash>(
        &self,
        flash: &mut F,
        r: &BlobRef,
        offset: u32,
        out: &mut [u8],
    ) -> Result<(), Error> {
        let end = u64::from(offset) + out.len() as u64;
        if r.slot > 1 || end > u64::from(r.len) {
            return Err(Error::RecordTooLarge);
        }
        flash
            .read(self.slot_start(r.slot) + offset, out)
            .map_err(|_| Error::Flash)
    }
}
