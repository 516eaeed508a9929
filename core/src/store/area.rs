//! One record kind's flash area: two banks of whole erase sectors.

use embedded_storage::nor_flash::{NorFlash, ReadNorFlash};

use super::Origin;
use super::{MAX_RECORD_LEN, Record, RecordKind};
use crate::Error;
use crate::checksum::crc32c;

const MAGIC: u16 = 0x5AC3;
/// Header bytes before padding: magic, kind, version, len, seq, hcrc.
const HEADER_LEN: usize = 16;
/// Largest write unit supported (bytes).
const MAX_UNIT: usize = 32;
/// Room for a header and data, padded to the largest unit.
const IMAGE_LEN: usize = MAX_UNIT + MAX_RECORD_LEN + MAX_UNIT;

/// A loaded record value and where it came from.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Loaded<R> {
    /// The value (always valid: it passed [`Record::validate`]).
    pub value: R,
    /// Newest stored copy, an older one, or the safe defaults.
    pub origin: Origin,
    /// Unreadable bytes were found in the area.
    pub damaged: bool,
    /// Sequence number of the copy used (`None` for the safe defaults).
    pub seq: Option<u32>,
}

/// The flash area of one record kind: `2 × bank_len` bytes from `start`,
/// each bank a whole number of erase sectors.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RecordArea {
    kind: RecordKind,
    start: u32,
    bank_len: u32,
}

/// What a scan of one bank found.
#[derive(Clone, Copy, Debug, Default)]
struct BankScan {
    /// Highest seq of a copy that passed both CRCs.
    newest_valid: Option<u32>,
    /// Highest seq of any copy with a good header.
    newest_header: Option<u32>,
    /// Where the next copy may go (everything from here on is erased and
    /// nothing but valid copies lies before).
    append_at: Option<u32>,
    /// Unreadable bytes were found.
    damaged: bool,
    /// Unreadable bytes lie after the last valid copy (or the bank has no
    /// valid copy but unreadable bytes): they may be a newer copy.
    trailing_damage: bool,
    /// A copy of the largest size would still fit after the last valid copy.
    room_for_max: bool,
}

const fn round_up(n: usize, unit: usize) -> usize {
    n.div_ceil(unit) * unit
}

fn max_opt(a: Option<u32>, b: Option<u32>) -> Option<u32> {
    match (a, b) {
        (Some(x), Some(y)) => Some(x.max(y)),
        (x, None) => x,
        (None, y) => y,
    }
}

impl RecordArea {
    /// The area of records of `kind` at `start` with banks of `bank_len`
    /// bytes. Checks that both banks are whole erase sectors inside `flash`,
    /// that each holds at least two copies of the largest record, and that the
    /// write unit is supported (at most 32 bytes).
    pub fn new<F: NorFlash>(
        flash: &F,
        kind: RecordKind,
        start: u32,
        bank_len: u32,
    ) -> Result<RecordArea, Error> {
        let erase = F::ERASE_SIZE as u64;
        let end = u64::from(start) + 2 * u64::from(bank_len);
        let unit = Self::unit::<F>();
        if erase == 0
            || unit > MAX_UNIT
            || !u64::from(start).is_multiple_of(erase)
            || !u64::from(bank_len).is_multiple_of(erase)
            || (u64::from(bank_len) as usize) < 2 * Self::span(MAX_RECORD_LEN, unit)
            || end > flash.capacity() as u64
        {
            return Err(Error::StoreLayout);
        }
        Ok(RecordArea {
            kind,
            start,
            bank_len,
        })
    }

    /// The record kind.
    pub fn kind(&self) -> RecordKind {
        self.kind
    }

    /// First byte after the area.
    pub fn end(&self) -> u32 {
        self.start + 2 * self.bank_len
    }

    fn unit<F: NorFlash>() -> usize {
        F::WRITE_SIZE.max(4)
    }

    /// Bytes a copy of `len` data bytes takes.
    const fn span(len: usize, unit: usize) -> usize {
        round_up(HEADER_LEN, unit) + round_up(len, unit) + round_up(4, unit)
    }

    fn bank_start(&self, bank: u32) -> u32 {
        self.start + bank * self.bank_len
    }

    /// Scans one bank; `found` sees every copy that passed both CRCs
    /// (seq, version, data).
    fn scan_bank<F: ReadNorFlash>(
        &self,
        flash: &mut F,
        bank: u32,
        unit: usize,
        found: &mut dyn FnMut(u32, u16, &[u8]),
    ) -> BankScan {
        let base = self.bank_start(bank);
        let bank_len = self.bank_len as usize;
        let header_span = round_up(HEADER_LEN, unit);
        let mut scan = BankScan::default();
        let mut valid_end = 0usize; // end of the last valid copy
        let mut used_end = 0usize; // end of the last non-erased bytes
        let mut off = 0usize;
        let mut probe = [0u8; MAX_UNIT];
        while off < bank_len {
            let n = unit.min(bank_len - off);
            let Some(p) = probe.get_mut(..n) else { break };
            if flash.read(base + off as u32, p).is_err() {
                scan.damaged = true;
                used_end = off + n;
                off += n;
                continue;
            }
            if p.iter().all(|&b| b == 0xFF) {
                off += n;
                continue;
            }
            match self.read_copy(flash, base, off, unit, header_span) {
                Some(copy) => {
                    scan.newest_header = max_opt(scan.newest_header, Some(copy.seq));
                    used_end = off + copy.span;
                    if copy.data_ok {
                        scan.newest_valid = max_opt(scan.newest_valid, Some(copy.seq));
                        valid_end = used_end;
                        found(copy.seq, copy.version, copy.data());
                    } else {
                        scan.damaged = true;
                    }
                    off += copy.span;
                }
                None => {
                    scan.damaged = true;
                    used_end = off + n;
                    off += n;
                }
            }
        }
        if used_end == valid_end {
            scan.append_at = Some(valid_end as u32);
            scan.room_for_max = valid_end + Self::span(MAX_RECORD_LEN, unit) <= bank_len;
        } else {
            scan.trailing_damage = true;
        }
        scan
    }

    /// Reads the copy whose header starts at `off`, if the header is good.
    fn read_copy<F: ReadNorFlash>(
        &self,
        flash: &mut F,
        base: u32,
        off: usize,
        unit: usize,
        header_span: usize,
    ) -> Option<Copy> {
        let mut h = [0u8; HEADER_LEN];
        if off + header_span > self.bank_len as usize {
            return None;
        }
        flash.read(base + off as u32, &mut h).ok()?;
        let (fields, hcrc) = h.split_last_chunk::<4>()?;
        if crc32c(fields) != u32::from_le_bytes(*hcrc) {
            return None;
        }
        let word = |i: usize| -> Option<u16> {
            Some(u16::from_le_bytes([*fields.get(i)?, *fields.get(i + 1)?]))
        };
        let (magic, kind, version, len) = (word(0)?, word(2)?, word(4)?, word(6)?);
        let seq = u32::from_le_bytes(fields.get(8..12)?.try_into().ok()?);
        let len = usize::from(len);
        let span = Self::span(len, unit);
        if magic != MAGIC || len > MAX_RECORD_LEN || off + span > self.bank_len as usize {
            return None;
        }
        let mut copy = Copy {
            seq,
            version,
            span,
            len,
            data: [0; MAX_RECORD_LEN],
            data_ok: false,
        };
        let data_at = base + (off + header_span) as u32;
        let mut dcrc = [0u8; 4];
        let crc_at = data_at + round_up(len, unit) as u32;
        let read_ok = flash.read(data_at, copy.data.get_mut(..len)?).is_ok()
            && flash.read(crc_at, &mut dcrc).is_ok();
        copy.data_ok = read_ok
            && kind == self.kind.0
            && crc32c(copy.data.get(..len)?) == u32::from_le_bytes(dcrc);
        Some(copy)
    }

    /// Loads the newest readable value (never fails: see the module docs).
    pub fn load<R: Record, F: ReadNorFlash + NorFlash>(&self, flash: &mut F) -> Loaded<R> {
        let unit = Self::unit::<F>();
        let mut best: Option<(u32, u32, R)> = None;
        let mut scans = [BankScan::default(); 2];
        for (bank, scan) in (0u32..).zip(scans.iter_mut()) {
            *scan = self.scan_bank(flash, bank, unit, &mut |seq, version, data| {
                if version != R::VERSION || best.as_ref().is_some_and(|(s, _, _)| *s >= seq) {
                    return;
                }
                if let Ok((value, [])) = postcard::take_from_bytes::<R>(data)
                    && value.validate().is_ok()
                {
                    best = Some((seq, bank, value));
                }
            });
        }
        let [s0, s1] = scans;
        let newest_header = max_opt(s0.newest_header, s1.newest_header);
        let damaged = s0.damaged || s1.damaged;
        match best {
            Some((seq, bank, value)) => {
                let (own, other) = if bank == 0 { (s0, s1) } else { (s1, s0) };
                // Could unreadable bytes be a copy newer than this one? Only
                // if they follow it in its bank, or lie at the end of the other
                // bank while this bank had no room left (so writes went there).
                let maybe_newer = Some(seq) != newest_header
                    || own.trailing_damage
                    || (other.trailing_damage && !own.room_for_max);
                Loaded {
                    value,
                    origin: if maybe_newer {
                        Origin::Fallback
                    } else {
                        Origin::Stored
                    },
                    damaged,
                    seq: Some(seq),
                }
            }
            None => Loaded {
                value: R::safe_default(),
                origin: Origin::Default,
                damaged,
                seq: None,
            },
        }
    }

    /// Validates and stores `value` as the newest copy; returns its sequence
    /// number. On any error the previous value is kept.
    pub fn store<R: Record, F: NorFlash>(&self, flash: &mut F, value: &R) -> Result<u32, Error> {
        const { assert!(R::POSTCARD_MAX_SIZE <= MAX_RECORD_LEN) };
        if R::KIND != self.kind {
            return Err(Error::StoreLayout);
        }
        value.validate()?;
        let unit = Self::unit::<F>();
        let header_span = round_up(HEADER_LEN, unit);
        let mut image = [0xFFu8; IMAGE_LEN];
        let data = image
            .get_mut(header_span..header_span + MAX_RECORD_LEN)
            .ok_or(Error::RecordTooLarge)?;
        let len = crate::encode::to_slice(value, data).map_err(|_| Error::RecordTooLarge)?;
        let dcrc = crc32c(data.get(..len).ok_or(Error::RecordTooLarge)?);

        let [s0, s1] = [0, 1].map(|bank| self.scan_bank(flash, bank, unit, &mut |_, _, _| {}));
        let seq = match max_opt(s0.newest_header, s1.newest_header) {
            None => 1,
            Some(s) => s.checked_add(1).ok_or(Error::SequenceExhausted)?,
        };
        let span = Self::span(len, unit) as u32;
        // The bank holding the newest valid copy is never erased.
        let current = match (s0.newest_valid, s1.newest_valid) {
            (Some(a), Some(b)) if b > a => 1,
            (None, Some(_)) => 1,
            _ => 0,
        };
        let other = 1 - current;
        let (cur_scan, other_scan) = if current == 0 { (s0, s1) } else { (s1, s0) };
        let erase = |flash: &mut F, bank: u32| {
            let from = self.bank_start(bank);
            flash
                .erase(from, from + self.bank_len)
                .map_err(|_| Error::Flash)
        };
        // Unreadable bytes at the end of the other bank could pass for an
        // interrupted newer copy: clear them, so that after this write the
        // area is unambiguous again.
        if other_scan.trailing_damage {
            erase(flash, other)?;
        }
        // Append to the current bank when it has room after its last valid
        // copy; otherwise start the other bank afresh.
        let (bank, at) = match cur_scan.append_at.filter(|a| a + span <= self.bank_len) {
            Some(at) => (current, at),
            None => {
                if !other_scan.trailing_damage {
                    erase(flash, other)?;
                }
                (other, 0)
            }
        };

        let [m0, m1] = MAGIC.to_le_bytes();
        let [k0, k1] = self.kind.0.to_le_bytes();
        let [v0, v1] = R::VERSION.to_le_bytes();
        let [l0, l1] = u16::try_from(len)
            .map_err(|_| Error::RecordTooLarge)?
            .to_le_bytes();
        let [q0, q1, q2, q3] = seq.to_le_bytes();
        let fields = [m0, m1, k0, k1, v0, v1, l0, l1, q0, q1, q2, q3];
        let [c0, c1, c2, c3] = crc32c(&fields).to_le_bytes();
        let header = [
            m0, m1, k0, k1, v0, v1, l0, l1, q0, q1, q2, q3, c0, c1, c2, c3,
        ];
        image
            .get_mut(..HEADER_LEN)
            .ok_or(Error::RecordTooLarge)?
            .copy_from_slice(&header);

        let addr = self.bank_start(bank) + at;
        let body_len = header_span + round_up(len, unit);
        let body = image.get(..body_len).ok_or(Error::RecordTooLarge)?;
        flash.write(addr, body).map_err(|_| Error::Flash)?;
        let mut trailer = [0xFFu8; MAX_UNIT];
        let (crc_bytes, _) = trailer.split_first_chunk_mut::<4>().ok_or(Error::Flash)?;
        *crc_bytes = dcrc.to_le_bytes();
        let trailer = trailer.get(..round_up(4, unit)).ok_or(Error::Flash)?;
        flash
            .write(addr + body_len as u32, trailer)
            .map_err(|_| Error::Flash)?;

        // Read back and check.
        let written = image.get(header_span..header_span + len);
        match self.read_copy(flash, self.bank_start(bank), at as usize, unit, header_span) {
            Some(c) if c.data_ok && c.seq == seq && Some(c.data()) == written => Ok(seq),
            _ => Err(Error::Flash),
        }
    }
}

/// A copy read from flash.
struct Copy {
    seq: u32,
    version: u16,
    span: usize,
    len: usize,
    data: [u8; MAX_RECORD_LEN],
    data_ok: bool,
}

impl Copy {
    fn data(&self) -> &[u8] {
        self.data.get(..self.len).unwrap_or(&[])
    }
}
