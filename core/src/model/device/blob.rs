//! Loadable device tables: an owned [`TableBuf`] and its blob form.
//!
//! Blob layout (little-endian):
//!
//! | bytes | content |
//! |---|---|
//! | 4 | magic `IZTB` |
//! | 1 | format version ([`BLOB_VERSION`]) |
//! | n | postcard encoding of [`TableBuf`] |
//! | 4 | CRC-32C ([`crate::checksum::crc32c`]) of everything before it |
//!
//! A blob is refused (never panics) when it is short, has another magic or
//! version, fails its checksum, does not decode, or decodes to a table that
//! does not validate.

use super::{Boundary, MAX_COEFS, MAX_CURVE, MAX_KNOTS, Table};
use crate::checksum::crc32c;
use crate::error::ModelDefect;
use crate::{Error, Gas};
use heapless::Vec;

/// First bytes of a table blob.
pub const BLOB_MAGIC: [u8; 4] = *b"IZTB";
/// Version of the blob format this crate reads and writes.
pub const BLOB_VERSION: u8 = 1;

/// The boundary curves of a liquefiable gas, owned.
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct BoundaryBuf {
    /// See [`Boundary::critical_temperature`].
    pub critical_temperature: u32,
    /// See [`Boundary::saturation_pressure`].
    pub saturation_pressure: Vec<u32, MAX_CURVE>,
    /// See [`Boundary::limit_pressure`].
    pub limit_pressure: Vec<u32, MAX_CURVE>,
}

/// A device table that owns its arrays (decoded from a blob, or built on the
/// host). [`TableBuf::table`] borrows it as a [`Table`].
#[derive(Clone, Debug, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct TableBuf {
    /// The gas.
    pub gas: Gas,
    /// See [`Table::temperature_knots`].
    pub temperature_knots: Vec<u32, MAX_KNOTS>,
    /// See [`Table::pressure_knots`].
    pub pressure_knots: Vec<u32, MAX_KNOTS>,
    /// See [`Table::z_offset`].
    pub z_offset: u32,
    /// See [`Table::z_step_exp`].
    pub z_step_exp: u8,
    /// See [`Table::z_floor`].
    pub z_floor: u32,
    /// See [`Table::coefs`].
    pub coefs: Vec<u16, MAX_COEFS>,
    /// See [`Table::boundary`].
    pub boundary: Option<BoundaryBuf>,
}

impl TableBuf {
    /// The table view.
    pub fn table(&self) -> Table<'_> {
        Table {
            gas: self.gas,
            temperature_knots: &self.temperature_knots,
            pressure_knots: &self.pressure_knots,
            z_offset: self.z_offset,
            z_step_exp: self.z_step_exp,
            z_floor: self.z_floor,
            coefs: &self.coefs,
            boundary: self.boundary.as_ref().map(|b| Boundary {
                critical_temperature: b.critical_temperature,
                saturation_pressure: &b.saturation_pressure,
                limit_pressure: &b.limit_pressure,
            }),
        }
    }

    /// Copies a table (fails when an array exceeds its capacity).
    pub fn from_table(t: &Table<'_>) -> Result<TableBuf, Error> {
        let cap = |_| Error::ModelData(ModelDefect::TableTooLarge);
        Ok(TableBuf {
            gas: t.gas,
            temperature_knots: Vec::from_slice(t.temperature_knots).map_err(cap)?,
            pressure_knots: Vec::from_slice(t.pressure_knots).map_err(cap)?,
            z_offset: t.z_offset,
            z_step_exp: t.z_step_exp,
            z_floor: t.z_floor,
            coefs: Vec::from_slice(t.coefs).map_err(cap)?,
            boundary: match &t.boundary {
                None => None,
                Some(b) => Some(BoundaryBuf {
                    critical_temperature: b.critical_temperature,
                    saturation_pressure: Vec::from_slice(b.saturation_pressure).map_err(cap)?,
                    limit_pressure: Vec::from_slice(b.limit_pressure).map_err(cap)?,
                }),
            },
        })
    }

    /// Writes the blob into `out`; returns its length.
    pub fn to_blob(&self, out: &mut [u8]) -> Result<usize, Error> {
        let small = Error::ModelData(ModelDefect::BlobBufferTooSmall);
        let (head, rest) = out.split_at_mut_checked(5).ok_or(small)?;
        head.copy_from_slice(&[
            BLOB_MAGIC[0],
            BLOB_MAGIC[1],
            BLOB_MAGIC[2],
            BLOB_MAGIC[3],
            BLOB_VERSION,
        ]);
        let n = postcard::to_slice(self, rest).map_err(|_| small)?.len();
        let len = 5 + n;
        let crc = crc32c(out.get(..len).ok_or(small)?);
        out.get_mut(len..len + 4)
            .ok_or(small)?
            .copy_from_slice(&crc.to_le_bytes());
        Ok(len + 4)
    }

    /// Reads and validates a blob.
    pub fn from_blob(bytes: &[u8]) -> Result<TableBuf, Error> {
        let corrupt = Error::ModelData;
        if bytes.len() < 9 {
            return Err(corrupt(ModelDefect::BlobTooShort));
        }
        let (body, crc) = bytes.split_at(bytes.len() - 4);
        if body.get(..4) != Some(&BLOB_MAGIC[..]) {
            return Err(corrupt(ModelDefect::NotATableBlob));
        }
        if body.get(4) != Some(&BLOB_VERSION) {
            return Err(corrupt(ModelDefect::BlobVersion));
        }
        let stored = u32::from_le_bytes([
            crc.first().copied().unwrap_or(0),
            crc.get(1).copied().unwrap_or(0),
            crc.get(2).copied().unwrap_or(0),
            crc.get(3).copied().unwrap_or(0),
        ]);
        if crc32c(body) != stored {
            return Err(corrupt(ModelDefect::Checksum));
        }
        let payload = body.get(5..).unwrap_or(&[]);
        let (buf, rest): (TableBuf, _) = postcard::take_from_bytes(payload)
            .map_err(|_| corrupt(ModelDefect::UndecodableBlob))?;
        if !rest.is_empty() {
            return Err(corrupt(ModelDefect::TrailingBytes));
        }
        buf.table().validate()?;
        Ok(buf)
    }
}

#[cfg(test)]
mod tests {
    use super::super::builtin;
    use super::*;

    #[test]
    fn round_trip_and_every_corruption_is_refused() {
        for g in Gas::ALL {
            let t = builtin::table(g).unwrap();
            let buf = TableBuf::from_table(&t).unwrap();
            let mut out = [0u8; 4096];
            let n = buf.to_blob(&mut out).unwrap();
            let back = TableBuf::from_blob(&out[..n]).unwrap();
            assert_eq!(back, buf);
            assert_eq!(back.table(), t);
            // Every single-bit flip is caught (CRC-32C detects all of them).
            for i in (0..n).step_by(7) {
                let mut bad = out;
                bad[i] ^= 0x10;
                assert!(TableBuf::from_blob(&bad[..n]).is_err(), "{g}: byte {i}");
            }
            assert!(TableBuf::from_blob(&out[..n - 1]).is_err());
            assert!(TableBuf::from_blob(&[]).is_err());
        }
    }
}
