//! The boot record kept across a reset: why the board restarted, how many
//! times since power-on, and where a panic happened.
//!
//! The board keeps [`WORDS`] words in memory that neither a reset nor the
//! start-up code clears (`.uninit`). A record is valid when its magic and
//! its CRC-32C match; after power-on the memory holds anything, so the CRC
//! tells a record from noise. At every start [`on_boot`] turns what it finds
//! into the boot report and arms a fresh record saying "unknown" (a reset
//! nobody announced: reset pin, debugger, or a watchdog the board cannot
//! tell); the panic handler, the fault handlers and a requested restart
//! overwrite it with their reason just before resetting.

use isochor_core::checksum::crc32c;
use isochor_core::link::{BootReport, FAULT_FILE_MAX_LEN, ResetReason};

/// Words of the record.
pub const WORDS: usize = 5 + FAULT_FILE_MAX_LEN / 4 + 1;
const MAGIC: u32 = 0x4953_4252; // "ISBR"
const FILE_WORDS: usize = FAULT_FILE_MAX_LEN / 4;

/// What a reset keeps.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Retained {
    /// The reason the next start will report.
    pub reason: ResetReason,
    /// Starts since power-on, including the one that wrote the record.
    pub boots: u32,
    /// Panic location: line (0 when none).
    pub line: u32,
    /// Panic location: the end of the file name.
    pub file: [u8; FAULT_FILE_MAX_LEN],
    /// Bytes of `file` used.
    pub file_len: u8,
}

fn reason_code(r: ResetReason) -> u32 {
    match r {
        ResetReason::PowerOn => 0,
        ResetReason::Requested => 1,
        ResetReason::Panic => 2,
        ResetReason::Watchdog => 3,
        ResetReason::HardFault => 4,
        ResetReason::Unknown => 5,
    }
}

fn reason_of(code: u32) -> Option<ResetReason> {
    Some(match code {
        0 => ResetReason::PowerOn,
        1 => ResetReason::Requested,
        2 => ResetReason::Panic,
        3 => ResetReason::Watchdog,
        4 => ResetReason::HardFault,
        5 => ResetReason::Unknown,
        _ => return None,
    })
}

impl Retained {
    /// A record of `reason` with no location.
    pub fn new(reason: ResetReason, boots: u32) -> Retained {
        Retained {
            reason,
            boots,
            line: 0,
            file: [0; FAULT_FILE_MAX_LEN],
            file_len: 0,
        }
    }

    /// The same record with a panic location (the end of a long file name).
    pub fn at(mut self, file: &str, line: u32) -> Retained {
        let b = file.as_bytes();
        let tail = b
            .get(b.len().saturating_sub(FAULT_FILE_MAX_LEN)..)
            .unwrap_or(&[]);
        for (d, s) in self.file.iter_mut().zip(tail) {
            *d = *s;
        }
        self.file_len = tail.len() as u8;
        self.line = line;
        self
    }

    /// The record's words.
    pub fn encode(&self) -> [u32; WORDS] {
        let mut w = [0u32; WORDS];
        let head = [
            MAGIC,
            reason_code(self.reason),
            self.boots,
            self.line,
            u32::from(self.file_len),
        ];
        for (d, s) in w.iter_mut().zip(head) {
            *d = s;
        }
        for (i, chunk) in self.file.chunks_exact(4).enumerate() {
            if let Some(d) = w.get_mut(5 + i) {
                *d = u32::from_le_bytes([chunk[0], chunk[1], chunk[2], chunk[3]]);
            }
        }
        let crc = crc32c(&bytes(&w[..WORDS - 1]));
        w[WORDS - 1] = crc;
        w
    }

    /// Reads a record; `None` for anything but a valid one.
    pub fn decode(w: &[u32; WORDS]) -> Option<Retained> {
        if w[0] != MAGIC || crc32c(&bytes(&w[..WORDS - 1])) != w[WORDS - 1] {
            return None;
        }
        let mut file = [0u8; FAULT_FILE_MAX_LEN];
        put_words(&mut file, &w[5..5 + FILE_WORDS]);
        Some(Retained {
            reason: reason_of(w[1])?,
            boots: w[2],
            line: w[3],
            file,
            file_len: (w[4] as usize).min(FAULT_FILE_MAX_LEN) as u8,
        })
    }

    /// The boot report of this record.
    pub fn report(&self) -> BootReport {
        let r = BootReport::new(self.reason, self.boots);
        if self.line == 0 && self.file_len == 0 {
            return r;
        }
        let name = core::str::from_utf8(&self.file[..usize::from(self.file_len)]).unwrap_or("?");
        r.with_location(name, self.line)
    }
}

fn bytes(w: &[u32]) -> [u8; 4 * (WORDS - 1)] {
    let mut out = [0u8; 4 * (WORDS - 1)];
    put_words(&mut out, w);
    out
}

/// Writes `w` little-endian into `out` as far as it reaches (checked
/// look-ups: no panic path).
fn put_words(out: &mut [u8], w: &[u32]) {
    for (i, s) in w.iter().enumerate() {
        for (k, x) in s.to_le_bytes().into_iter().enumerate() {
            if let Some(b) = out.get_mut(4 * i + k) {
                *b = x;
            }
        }
    }
}

/// At a start: the report of what the memory kept (`hardware` is the
/// board's own reset cause, used when nobody recorded one), and the record
/// to arm for the next start.
pub fn on_boot(kept: Option<Retained>, hardware: Option<ResetReason>) -> (BootReport, Retained) {
    let mut now = match kept {
        Some(r) => Retained {
            boots: r.boots.wrapping_add(1),
            ..r
        },
        None => Retained::new(ResetReason::PowerOn, 1),
    };
    if now.reason == ResetReason::Unknown
        && let Some(h) = hardware
    {
        now.reason = h;
    }
    (now.report(), Retained::new(ResetReason::Unknown, now.boots))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn records_round_trip_and_noise_is_power_on() {
        let r = Retained::new(ResetReason::Panic, 7)
            .at("src/some/very/long/path/to/a/module/file_name.rs", 42);
        let w = r.encode();
        assert_eq!(Retained::decode(&w), Some(r));
        let b = r.report();
        assert_eq!(b.fault_line, 42);
        assert!(b.fault_file.ends_with("file_name.rs"));
        for i in 0..WORDS {
            let mut bad = w;
            bad[i] ^= 0x100;
            assert_eq!(Retained::decode(&bad), None, "word {i}");
        }
        // Power-on: noise.
        let (report, armed) = on_boot(Retained::decode(&[0x5555_5555; WORDS]), None);
        assert_eq!((report.reason, report.boots), (ResetReason::PowerOn, 1));
        assert_eq!(armed.reason, ResetReason::Unknown);
        // A panic, then an unannounced reset the hardware calls a watchdog.
        let (report, armed) = on_boot(Some(r), None);
        assert_eq!(
            (report.reason, report.boots, report.fault_line),
            (ResetReason::Panic, 8, 42)
        );
        let (report, _) = on_boot(Some(armed), Some(ResetReason::Watchdog));
        assert_eq!((report.reason, report.boots), (ResetReason::Watchdog, 9));
    }
}
