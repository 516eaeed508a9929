//! The host end of Modbus RTU: a small client (read registers, write one,
//! read the device identification) over any [`Transport`], and the
//! decoder of the register map (`core/modbus-registers.csv`, the same
//! file the firmware's table is generated from).
//!
//! This client is `isochor modbus`'s; the end-to-end tests check the
//! emulated gauge with an independent client library as well.

use std::time::{Duration, Instant};

use isochor_core::field::modbus::crc16;
use isochor_core::field::modbus::map::MAP_CSV;
use serde::Serialize;

use crate::Error;
use crate::link::Transport;

/// A register space.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Space {
    /// Input registers (function 04).
    Input,
    /// Holding registers (functions 03, 06, 16).
    Holding,
}

/// How a value is encoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Kind {
    /// IEEE-754 binary32, high word first.
    F32,
    /// Signed 32-bit, high word first, scaled by 10^scale.
    I32,
    /// One word.
    U16,
    /// Two words, high first.
    U32,
    /// Four words, high first.
    U64,
}

impl Kind {
    /// Words taken.
    pub fn words(self) -> u16 {
        match self {
            Kind::U16 => 1,
            Kind::U64 => 4,
            _ => 2,
        }
    }
}

/// One row of the register map.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Row {
    /// Register space.
    pub space: Space,
    /// Protocol address (0-based).
    pub address: u16,
    /// The quantity's name.
    pub quantity: String,
    /// Encoding.
    #[serde(rename = "type")]
    pub kind: Kind,
    /// Decimal scale of an `i32` (value × 10^scale).
    pub scale: Option<u8>,
    /// Unit of the register's value.
    pub unit: String,
    /// Writable.
    pub writable: bool,
    /// What it is.
    pub description: String,
}

/// The register map, parsed from the committed CSV.
pub fn register_map() -> Result<Vec<Row>, Error> {
    let bad = |n: usize, what: &str| Error::Invalid(format!("register map line {n}: {what}"));
    let mut rows = Vec::new();
    let mut header = true;
    for (i, line) in MAP_CSV.lines().enumerate() {
        let n = i + 1;
        let line = line.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        if header {
            header = false;
            continue;
        }
        let f: Vec<&str> = line.split(',').collect();
        if f.len() != 8 {
            return Err(bad(n, "8 fields"));
        }
        let space = match f[0] {
            "input" => Space::Input,
            "holding" => Space::Holding,
            _ => return Err(bad(n, "space")),
        };
        let kind = match f[3] {
            "f32" => Kind::F32,
            "i32" => Kind::I32,
            "u16" => Kind::U16,
            "u32" => Kind::U32,
            "u64" => Kind::U64,
            _ => return Err(bad(n, "type")),
        };
        rows.push(Row {
            space,
            address: f[1].parse().map_err(|_| bad(n, "address"))?,
            quantity: f[2].to_string(),
            kind,
            scale: if f[4].is_empty() {
                None
            } else {
                Some(f[4].parse().map_err(|_| bad(n, "scale"))?)
            },
            unit: f[5].to_string(),
            writable: f[6] == "rw",
            description: f[7].to_string(),
        });
    }
    Ok(rows)
}

/// A decoded register.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Value {
    /// The map's row.
    #[serde(flatten)]
    pub row: Row,
    /// The words read.
    pub words: Vec<u16>,
    /// The value in the row's unit; `None` when the device says it is not
    /// known (NaN, `i32::MIN`, all ones).
    pub value: Option<f64>,
}

/// Decodes the words of one row.
pub fn decode(row: &Row, words: &[u16]) -> Option<f64> {
    let bits = words
        .iter()
        .fold(0u64, |acc, w| (acc << 16) | u64::from(*w));
    match row.kind {
        Kind::F32 => {
            let v = f32::from_bits(bits as u32);
            (!v.is_nan()).then_some(f64::from(v))
        }
        Kind::I32 => {
            let v = bits as u32 as i32;
            (v != i32::MIN).then(|| f64::from(v) / 10f64.powi(i32::from(row.scale.unwrap_or(0))))
        }
        Kind::U16 => (bits != 0xFFFF).then_some(bits as f64),
        Kind::U32 => (bits != 0xFFFF_FFFF).then_some(bits as f64),
        Kind::U64 => (bits != u64::MAX).then_some(bits as f64),
    }
}

/// A Modbus exception or a failed exchange.
fn exception_text(code: u8) -> String {
    let what = match code {
        1 => "illegal function",
        2 => "illegal data address",
        3 => "illegal data value",
        4 => "server device failure",
        _ => "exception",
    };
    format!("Modbus exception {code:02}: {what}")
}

/// A Modbus RTU client over a transport.
pub struct RtuClient<T> {
    transport: T,
    address: u8,
    timeout: Duration,
}

impl<T: Transport> RtuClient<T> {
    /// A client of the server at `address`.
    pub fn new(transport: T, address: u8, timeout: Duration) -> RtuClient<T> {
        RtuClient {
            transport,
            address,
            timeout,
        }
    }

    /// Sends a request PDU and returns the reply PDU; `expected` tells the
    /// reply's length from what has arrived (`None`: not known yet). A
    /// request nothing at all answers is sent once more (masters retry;
    /// an emulator's socket may also drop the first bytes after a
    /// connection).
    fn exchange(
        &mut self,
        pdu: &[u8],
        expected: impl Fn(&[u8]) -> Option<usize>,
    ) -> Result<Vec<u8>, Error> {
        match self.exchange_once(pdu, &expected) {
            Err(Error::Link(m)) if m.contains("(0 bytes)") => self.exchange_once(pdu, &expected),
            r => r,
        }
    }

    fn exchange_once(
        &mut self,
        pdu: &[u8],
        expected: &impl Fn(&[u8]) -> Option<usize>,
    ) -> Result<Vec<u8>, Error> {
        let mut frame = vec![self.address];
        frame.extend_from_slice(pdu);
        let crc = crc16(0xFFFF, &frame);
        frame.extend_from_slice(&crc.to_le_bytes());
        // A silence before the request (t3.5 at any rate: 5 ms).
        std::thread::sleep(Duration::from_millis(5));
        self.transport
            .send(&frame)
            .map_err(|e| Error::Link(format!("modbus send: {e}")))?;
        let start = Instant::now();
        let mut got: Vec<u8> = Vec::new();
        let mut buf = [0u8; 300];
        loop {
            // An exception reply is 5 bytes; a normal one as `expected`
            // says from the PDU so far.
            let pdu = got.get(1..).unwrap_or(&[]);
            let want = match pdu.first() {
                Some(f) if f & 0x80 != 0 => Some(3),
                Some(_) => expected(pdu),
                None => None,
            };
            if let Some(n) = want
                && got.len() >= n + 3
            {
                break;
            }
            let left = self.timeout.saturating_sub(start.elapsed());
            if left.is_zero() {
                return Err(Error::Link(format!(
                    "no (complete) Modbus reply from address {} within {:?} ({} bytes)",
                    self.address,
                    self.timeout,
                    got.len()
                )));
            }
            let n = self
                .transport
                .receive(&mut buf, left.min(Duration::from_millis(50)))
                .map_err(|e| Error::Link(format!("modbus receive: {e}")))?;
            got.extend_from_slice(&buf[..n]);
        }
        if crc16(0xFFFF, &got) != 0 {
            return Err(Error::Link("Modbus reply with a bad CRC".into()));
        }
        if got.first() != Some(&self.address) {
            return Err(Error::Link("Modbus reply from another address".into()));
        }
        let pdu = got[1..got.len() - 2].to_vec();
        if pdu.first().is_some_and(|f| f & 0x80 != 0) {
            return Err(Error::Refused(exception_text(
                pdu.get(1).copied().unwrap_or(0),
            )));
        }
        Ok(pdu)
    }

    /// Reads `count` registers from `start`.
    pub fn read(&mut self, space: Space, start: u16, count: u16) -> Result<Vec<u16>, Error> {
        let f = match space {
            Space::Holding => 3,
            Space::Input => 4,
        };
        let mut pdu = vec![f];
        pdu.extend_from_slice(&start.to_be_bytes());
        pdu.extend_from_slice(&count.to_be_bytes());
        let r = self.exchange(&pdu, |p| p.get(1).map(|n| 2 + usize::from(*n)))?;
        if r.len() != 2 + 2 * usize::from(count) {
            return Err(Error::Link("Modbus reply of the wrong length".into()));
        }
        Ok(r[2..]
            .chunks(2)
            .map(|c| u16::from_be_bytes([c[0], c[1]]))
            .collect())
    }

    /// Writes one holding register (function 06).
    pub fn write(&mut self, address: u16, value: u16) -> Result<(), Error> {
        let mut pdu = vec![6];
        pdu.extend_from_slice(&address.to_be_bytes());
        pdu.extend_from_slice(&value.to_be_bytes());
        let r = self.exchange(&pdu, |_| Some(5))?;
        if r != pdu {
            return Err(Error::Link("Modbus write not echoed".into()));
        }
        Ok(())
    }

    /// Reads the regular device identification (function 43/14, code 02).
    pub fn identify(&mut self) -> Result<Vec<(u8, String)>, Error> {
        let r = self.exchange(&[0x2B, 0x0E, 0x02, 0x00], |p| {
            let n = usize::from(*p.get(6)?);
            let mut i = 7;
            for _ in 0..n {
                i += 2 + usize::from(*p.get(i + 1)?);
            }
            Some(i)
        })?;
        let n = usize::from(r.get(6).copied().unwrap_or(0));
        let mut out = Vec::new();
        let mut i = 7;
        for _ in 0..n {
            let (Some(&id), Some(&len)) = (r.get(i), r.get(i + 1)) else {
                break;
            };
            let s = r.get(i + 2..i + 2 + usize::from(len)).unwrap_or(&[]);
            out.push((id, String::from_utf8_lossy(s).into_owned()));
            i += 2 + usize::from(len);
        }
        Ok(out)
    }

    /// Reads the whole register map, in as few requests as its blocks
    /// allow, and decodes it.
    pub fn read_map(&mut self) -> Result<Vec<Value>, Error> {
        let rows = register_map()?;
        let mut values = Vec::new();
        // Contiguous runs of rows in one space, each one request.
        let mut i = 0;
        while i < rows.len() {
            let mut j = i + 1;
            while j < rows.len()
                && rows[j].space == rows[i].space
                && rows[j].address == rows[j - 1].address + rows[j - 1].kind.words()
            {
                j += 1;
            }
            let start = rows[i].address;
            let end = rows[j - 1].address + rows[j - 1].kind.words();
            let words = self.read(rows[i].space, start, end - start)?;
            for row in &rows[i..j] {
                let at = usize::from(row.address - start);
                let w = words[at..at + usize::from(row.kind.words())].to_vec();
                values.push(Value {
                    row: row.clone(),
                    value: decode(row, &w),
                    words: w,
                });
            }
            i = j;
        }
        Ok(values)
    }
}

/// The holding register of a name or an address on the command line.
pub fn holding_address(name: &str) -> Result<u16, Error> {
    if let Ok(a) = name.parse::<u16>() {
        return Ok(a);
    }
    register_map()?
        .into_iter()
        .find(|r| r.space == Space::Holding && r.quantity == name)
        .map(|r| r.address)
        .ok_or_else(|| Error::Invalid(format!("no holding register {name:?}")))
}
