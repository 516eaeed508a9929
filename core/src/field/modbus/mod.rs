//! A Modbus RTU server (slave), driven by bytes and times passed in.
//!
//! Standards: Modbus Application Protocol Specification V1.1b3 (function
//! codes, exception responses) and Modbus over Serial Line Specification
//! and Implementation Guide V1.02 (RTU framing, CRC-16, silent intervals,
//! broadcast).
//!
//! * **Framing.** A frame ends after a silence of 3.5 characters (t3.5);
//!   a silence of more than 1.5 characters (t1.5) inside a frame makes it
//!   incomplete, and it is dropped. Above 19 200 Bd the fixed values
//!   750 µs and 1 750 µs apply ([`SerialSettings::silent_intervals_us`]).
//!   The caller passes received bytes with the time they arrived and calls
//!   [`Server::step`] again as time passes; a frame is answered once its
//!   t3.5 silence has passed.
//! * **Checks.** A frame is answered only when its CRC-16/MODBUS checks
//!   (computed as the bytes arrive: only the first [`HEAD`] bytes are
//!   kept, so a frame of any length is checked without a 256-byte buffer)
//!   and it is addressed to this server. Address 0 is a broadcast: writes
//!   are carried out and nothing is answered. Bad frames get silence.
//! * **Functions.** 03 and 04 (read holding / input registers, 1 … 125),
//!   06 and 16 (write single / multiple holding registers, 1 … 123), 08
//!   sub-function 00 (return query data), 43/14 (read device
//!   identification: basic and regular objects, stream and individual
//!   access). Anything else: exception 01; bad quantities or lengths:
//!   exception 03; addresses outside the map or not writable: exception 02.
//! * **What a write can do.** Only acknowledge alarms
//!   ([`map::Registers`]): nothing a Modbus master writes changes an
//!   estimate, a configuration or an alarm; those stay behind the
//!   authenticated isochor link.
//!
//! Replies are written through a callback in pieces (at most
//! [`OUT_CHUNK`] bytes), with their CRC, so no 256-byte reply buffer is
//! kept either. Bounded time: a request reads at most 125 registers, each
//! found by a scan of the map.

pub mod map;

use super::SerialSettings;

/// Bytes of a frame kept for decoding (address, function and the fields of
/// every request this server acts on; a multiple-register write of more
/// than `(HEAD − 9)/2` registers is refused by address before its values
/// would be needed, since the map has a single writable register).
pub const HEAD: usize = 24;
/// Largest RTU frame (Modbus over Serial Line V1.02, §2.5.1: 256 bytes).
pub const MAX_ADU: usize = 256;
/// Largest piece of a reply handed to the output callback.
pub const OUT_CHUNK: usize = 32;

/// An exception code (Modbus Application Protocol V1.1b3, §7).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Exception {
    /// 01: the function code is not supported.
    IllegalFunction = 1,
    /// 02: the address (or address range) is not allowed.
    IllegalDataAddress = 2,
    /// 03: a value in the request is not allowed (quantity, length).
    IllegalDataValue = 3,
}

/// The registers a server reads and writes.
pub trait Space {
    /// Reads one holding (`holding`) or input register.
    fn read(&self, holding: bool, address: u16) -> Result<u16, Exception>;
    /// Checks that a holding register may take `value`, without writing.
    fn check_write(&self, address: u16, value: u16) -> Result<(), Exception>;
    /// Writes a holding register.
    fn write(&mut self, address: u16, value: u16) -> Result<(), Exception>;
}

/// The device identification objects (function 43/14): 0 vendor name, 1
/// product code, 2 major-minor revision (basic); 3 vendor URL, 4 product
/// name, 5 model name (regular). Our own strings.
pub const DEVICE_ID: [&[u8]; 6] = [
    b"isochor",
    b"ISOCHOR-GAUGE",
    env!("CARGO_PKG_VERSION").as_bytes(),
    b"https://isochor.invalid/",
    b"isochor gas content gauge",
    b"isochor reference firmware",
];

/// CRC-16/MODBUS of `data` continued from `crc` (start: 0xFFFF): reflected
/// polynomial 0xA001, bit by bit (no table: 512 bytes of flash saved).
pub fn crc16(mut crc: u16, data: &[u8]) -> u16 {
    for &b in data {
        crc ^= u16::from(b);
        for _ in 0..8 {
            let lsb = crc & 1;
            crc >>= 1;
            if lsb != 0 {
                crc ^= 0xA001;
            }
        }
    }
    crc
}

/// Counters of what the server saw.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Counters {
    /// Frames whose CRC checked, for any address.
    pub checked: u32,
    /// Frames checked and addressed to this server (or broadcast).
    pub frames: u32,
    /// Frames dropped: bad CRC, too short or too long, broken by a pause.
    pub bad_frames: u32,
    /// Exception replies sent.
    pub exceptions: u32,
}

/// The server's state: the frame being received and the counters. About
/// 60 bytes.
#[derive(Clone, Debug)]
pub struct Server {
    address: u8,
    t15_us: u32,
    t35_us: u32,
    head: [u8; HEAD],
    len: u16,
    crc: u16,
    last_us: u64,
    broken: bool,
    counters: Counters,
}

/// A reply being written: bytes go out in pieces with the CRC computed on
/// the way.
struct Reply<'o> {
    buf: [u8; OUT_CHUNK],
    n: usize,
    crc: u16,
    out: &'o mut dyn FnMut(&[u8]),
}

impl Reply<'_> {
    fn put(&mut self, bytes: &[u8]) {
        self.crc = crc16(self.crc, bytes);
        for &b in bytes {
            if self.n == OUT_CHUNK {
                (self.out)(&self.buf);
                self.n = 0;
            }
            if let Some(slot) = self.buf.get_mut(self.n) {
                *slot = b;
                self.n += 1;
            }
        }
    }
    fn finish(mut self) {
        let crc = self.crc.to_le_bytes();
        self.put(&crc);
        if let Some(rest) = self.buf.get(..self.n) {
            (self.out)(rest);
        }
    }
}

fn be16(b: &[u8], i: usize) -> Option<u16> {
    Some(u16::from_be_bytes([*b.get(i)?, *b.get(i + 1)?]))
}

impl Server {
    /// A server with `settings` (address, baud rate for the silent
    /// intervals).
    pub const fn new(settings: &SerialSettings) -> Server {
        let (t15_us, t35_us) = settings.silent_intervals_us();
        Server {
            address: settings.address,
            t15_us,
            t35_us,
            head: [0; HEAD],
            len: 0,
            crc: 0xFFFF,
            last_us: 0,
            broken: false,
            counters: Counters {
                checked: 0,
                frames: 0,
                bad_frames: 0,
                exceptions: 0,
            },
        }
    }

    /// Takes new settings (a new configuration); a frame in progress is
    /// dropped.
    pub fn configure(&mut self, settings: &SerialSettings) {
        let counters = self.counters;
        *self = Server::new(settings);
        self.counters = counters;
    }

    /// The address served.
    pub fn address(&self) -> u8 {
        self.address
    }

    /// The counters.
    pub fn counters(&self) -> Counters {
        self.counters
    }

    /// True while a frame is being received (the caller keeps calling
    /// [`Server::step`] until its silence has passed).
    pub fn busy(&self) -> bool {
        self.len > 0
    }

    /// At `now_us` (µs on a monotonic clock), `bytes` were received (empty:
    /// only time passed). A frame whose t3.5 silence has passed before
    /// these bytes is answered first, through `out`, from `space`. Returns
    /// true when a reply was sent.
    pub fn step(
        &mut self,
        now_us: u64,
        bytes: &[u8],
        space: &mut dyn Space,
        out: &mut dyn FnMut(&[u8]),
    ) -> bool {
        self.step_span(now_us, now_us, bytes, space, out)
    }

    /// As [`Server::step`] for bytes that arrived from `first_us` (the
    /// first) to `last_us` (the last), taken together from a receive ring.
    pub fn step_span(
        &mut self,
        first_us: u64,
        last_us: u64,
        bytes: &[u8],
        space: &mut dyn Space,
        out: &mut dyn FnMut(&[u8]),
    ) -> bool {
        let now_us = first_us;
        let mut replied = false;
        if self.len > 0 {
            let gap = now_us.saturating_sub(self.last_us);
            if gap >= u64::from(self.t35_us) {
                replied = self.end_frame(space, out);
            } else if !bytes.is_empty() && gap > u64::from(self.t15_us) {
                // A pause inside a frame: incomplete (Serial Line V1.02,
                // §2.5.1.1); it is dropped when its silence ends.
                self.broken = true;
            }
        }
        for &b in bytes {
            if let Some(slot) = self.head.get_mut(usize::from(self.len)) {
                *slot = b;
            }
            self.len = self.len.saturating_add(1);
            self.crc = crc16(self.crc, &[b]);
        }
        if !bytes.is_empty() {
            self.last_us = last_us.max(first_us);
        }
        replied
    }

    fn end_frame(&mut self, space: &mut dyn Space, out: &mut dyn FnMut(&[u8])) -> bool {
        let len = usize::from(self.len);
        // A frame checks when the CRC over it, CRC bytes included, is 0.
        let ok = !self.broken && (4..=MAX_ADU).contains(&len) && self.crc == 0;
        self.len = 0;
        self.crc = 0xFFFF;
        self.broken = false;
        if !ok {
            self.counters.bad_frames = self.counters.bad_frames.wrapping_add(1);
            return false;
        }
        self.counters.checked = self.counters.checked.wrapping_add(1);
        let addr = self.head.first().copied().unwrap_or(0);
        if addr != 0 && addr != self.address {
            return false;
        }
        self.counters.frames = self.counters.frames.wrapping_add(1);
        let head = self.head;
        let pdu_len = len - 3;
        let pdu = head.get(1..(1 + pdu_len).min(HEAD)).unwrap_or(&[]);
        let mut reply = Reply {
            buf: [0; OUT_CHUNK],
            n: 0,
            crc: 0xFFFF,
            out,
        };
        reply.put(&[addr]);
        match self.answer(pdu, pdu_len, addr == 0, space, &mut reply) {
            Answer::Sent => {}
            Answer::Silent => return false,
            Answer::Exception(e) => {
                self.counters.exceptions = self.counters.exceptions.wrapping_add(1);
                if addr == 0 {
                    return false;
                }
                let f = pdu.first().copied().unwrap_or(0);
                reply.put(&[f | 0x80, e as u8]);
            }
        }
        if addr == 0 {
            return false;
        }
        reply.finish();
        true
    }

    /// Answers one PDU (`len` its full length; `pdu` its first bytes).
    fn answer(
        &mut self,
        pdu: &[u8],
        len: usize,
        broadcast: bool,
        space: &mut dyn Space,
        reply: &mut Reply<'_>,
    ) -> Answer {
        use Answer::{Exception as Ex, Sent, Silent};
        let f = pdu.first().copied().unwrap_or(0);
        let w = |i: usize| be16(pdu, i).unwrap_or(0);
        match f {
            3 | 4 => {
                if broadcast {
                    return Silent;
                }
                let (start, qty) = (w(1), w(3));
                if len != 5 || !(1..=125).contains(&qty) {
                    return Ex(Exception::IllegalDataValue);
                }
                let holding = f == 3;
                let Some(end) = start.checked_add(qty - 1) else {
                    return Ex(Exception::IllegalDataAddress);
                };
                for a in start..=end {
                    if let Err(e) = space.read(holding, a) {
                        return Ex(e);
                    }
                }
                reply.put(&[f, (qty * 2) as u8]);
                for a in start..=end {
                    let v = space.read(holding, a).unwrap_or(0);
                    reply.put(&v.to_be_bytes());
                }
                Sent
            }
            6 => {
                if len != 5 {
                    return Ex(Exception::IllegalDataValue);
                }
                if let Err(e) = space.write(w(1), w(3)) {
                    return Ex(e);
                }
                if let Some(echo) = pdu.get(..5) {
                    reply.put(echo);
                }
                Sent
            }
            16 => {
                let (start, qty) = (w(1), w(3));
                let count = usize::from(pdu.get(5).copied().unwrap_or(0));
                if !(1..=123).contains(&qty) || count != 2 * usize::from(qty) || len != 6 + count {
                    return Ex(Exception::IllegalDataValue);
                }
                let Some(end) = start.checked_add(qty - 1) else {
                    return Ex(Exception::IllegalDataAddress);
                };
                // Every register is checked before any is written.
                for (i, a) in (start..=end).enumerate() {
                    let v = be16(pdu, 6 + 2 * i);
                    let r = match v {
                        Some(v) => space.check_write(a, v),
                        // Values past the kept head: only reachable for
                        // ranges wider than the writable registers.
                        None => space
                            .check_write(a, 0)
                            .and(Err(Exception::IllegalDataAddress)),
                    };
                    if let Err(e) = r {
                        return Ex(e);
                    }
                }
                for (i, a) in (start..=end).enumerate() {
                    let _ = space.write(a, be16(pdu, 6 + 2 * i).unwrap_or(0));
                }
                reply.put(&[16]);
                reply.put(&start.to_be_bytes());
                reply.put(&qty.to_be_bytes());
                Sent
            }
            8 => {
                if broadcast {
                    return Silent;
                }
                if w(1) != 0 {
                    return Ex(Exception::IllegalFunction);
                }
                // Return query data: the request echoed, whole. Only the
                // kept head can be echoed; a longer echo is refused.
                if !(3..HEAD).contains(&len) {
                    return Ex(Exception::IllegalDataValue);
                }
                if let Some(echo) = pdu.get(..len) {
                    reply.put(echo);
                }
                Sent
            }
            43 => {
                if broadcast {
                    return Silent;
                }
                if pdu.get(1) != Some(&14) {
                    return Ex(Exception::IllegalFunction);
                }
                if len != 4 {
                    return Ex(Exception::IllegalDataValue);
                }
                let code = pdu.get(2).copied().unwrap_or(0);
                let object = pdu.get(3).copied().unwrap_or(0);
                let (first, last) = match code {
                    1 => (0u8, 2u8),
                    2 | 3 => (0, 5),
                    4 => (object, object),
                    _ => return Ex(Exception::IllegalDataValue),
                };
                if code == 4 && usize::from(object) >= DEVICE_ID.len() {
                    return Ex(Exception::IllegalDataAddress);
                }
                // Stream access from an unknown object starts at 0 (V1.1b3,
                // §6.21).
                let first = if code != 4 && (object < first || object > last) {
                    first
                } else if code != 4 {
                    object
                } else {
                    first
                };
                // Conformity level 0x82: regular identification, stream and
                // individual access.
                reply.put(&[43, 14, code, 0x82, 0, 0, last - first + 1]);
                for id in first..=last {
                    let s = DEVICE_ID.get(usize::from(id)).copied().unwrap_or(b"");
                    reply.put(&[id, s.len() as u8]);
                    reply.put(s);
                }
                Sent
            }
            _ => Ex(Exception::IllegalFunction),
        }
    }
}

/// What a request gets.
enum Answer {
    /// A normal reply was written.
    Sent,
    /// No reply (a read sent as broadcast).
    Silent,
    /// An exception reply.
    Exception(Exception),
}
