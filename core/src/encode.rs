//! Encoding of messages and records in postcard's wire format, without a
//! panic path.
//!
//! Everything the device writes (frames, store records) is postcard
//! (<https://postcard.jamesmunns.com/wire-format>): unsigned integers as
//! LEB128 varints, signed ones zig-zagged first, `u8`/`i8`/`bool` as one
//! byte, lengths and enum variant indices as varints, structs and tuples as
//! their fields in order, `Option` as a 0/1 byte and the value. Hosts and
//! the device decode it with postcard itself.
//!
//! Why not `postcard::to_slice` on the device: its varint writers index a
//! scratch array, and the bounds checks and their panic handler stay in the
//! image. This writer checks every byte against the output's end instead
//! and refuses with [`Error::BufferTooSmall`]; it writes 32-bit values with
//! 32-bit arithmetic (a Cortex-M0 has no 64-bit shifts). The tests compare it
//! with postcard byte for byte.

use crate::error::Defect;
use serde::Serialize;
use serde::ser;

use crate::Error;

/// Encodes `value` into the start of `out` in postcard's format; returns the
/// number of bytes written.
///
/// # Errors
/// [`Error::BufferTooSmall`] when `out` is too short, [`Error::Malformed`]
/// for values postcard's format cannot carry here (maps without a length,
/// sequences without a length).
pub fn to_slice<T: Serialize + ?Sized>(value: &T, out: &mut [u8]) -> Result<usize, Error> {
    let mut w = Writer { out, at: 0 };
    match value.serialize(&mut w) {
        Ok(()) => Ok(w.at),
        Err(Fault::Full) => Err(Error::BufferTooSmall),
        Err(Fault::Unsupported) => Err(Error::Malformed(Defect::NoPostcardEncoding)),
    }
}

/// Copies `src` into `dst` as far as both reach. `copy_from_slice` panics on
/// a length mismatch and keeps its panic path in the image even where the
/// lengths are equal by construction; this does not.
pub fn copy(dst: &mut [u8], src: &[u8]) {
    for (d, s) in dst.iter_mut().zip(src) {
        *d = *s;
    }
}

/// Why an encoding stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Fault {
    /// The output is full.
    Full,
    /// The value has no encoding here (a sequence or map of unknown length).
    Unsupported,
}

impl core::fmt::Display for Fault {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            Fault::Full => "output full",
            Fault::Unsupported => "unsupported value",
        })
    }
}

impl core::error::Error for Fault {}

impl ser::Error for Fault {
    fn custom<T: core::fmt::Display>(_msg: T) -> Self {
        Fault::Unsupported
    }
}

/// The output and how much of it is written.
struct Writer<'a> {
    out: &'a mut [u8],
    at: usize,
}

impl Writer<'_> {
    #[inline(never)]
    fn byte(&mut self, b: u8) -> Result<(), Fault> {
        let slot = self.out.get_mut(self.at).ok_or(Fault::Full)?;
        *slot = b;
        self.at += 1;
        Ok(())
    }

    #[inline(never)]
    fn bytes(&mut self, b: &[u8]) -> Result<(), Fault> {
        let end = self.at.checked_add(b.len()).ok_or(Fault::Full)?;
        copy(self.out.get_mut(self.at..end).ok_or(Fault::Full)?, b);
        self.at = end;
        Ok(())
    }

    #[inline(never)]
    fn varint32(&mut self, mut v: u32) -> Result<(), Fault> {
        while v >= 0x80 {
            self.byte((v as u8) | 0x80)?;
            v >>= 7;
        }
        self.byte(v as u8)
    }

    #[inline(never)]
    fn varint64(&mut self, v: u64) -> Result<(), Fault> {
        if let Ok(small) = u32::try_from(v) {
            return self.varint32(small);
        }
        // Four groups of seven bits from the low word, then the rest.
        let mut low = v as u32;
        for _ in 0..4 {
            self.byte((low as u8) | 0x80)?;
            low >>= 7;
        }
        let mut high = v >> 28;
        while high >= 0x80 {
            self.byte((high as u8) | 0x80)?;
            high >>= 7;
        }
        self.byte(high as u8)
    }

    fn varint128(&mut self, mut v: u128) -> Result<(), Fault> {
        while v >= 0x80 {
            self.byte((v as u8) | 0x80)?;
            v >>= 7;
        }
        self.byte(v as u8)
    }

    fn len(&mut self, len: Option<usize>) -> Result<(), Fault> {
        let n = len.ok_or(Fault::Unsupported)?;
        self.varint32(u32::try_from(n).map_err(|_| Fault::Unsupported)?)
    }
}

fn zigzag32(v: i32) -> u32 {
    ((v << 1) ^ (v >> 31)) as u32
}

fn zigzag64(v: i64) -> u64 {
    ((v << 1) ^ (v >> 63)) as u64
}

fn zigzag128(v: i128) -> u128 {
    ((v << 1) ^ (v >> 127)) as u128
}

impl<'w, 'a> ser::Serializer for &'w mut Writer<'a> {
    type Ok = ();
    type Error = Fault;
    type SerializeSeq = Self;
    type SerializeTuple = Self;
    type SerializeTupleStruct = Self;
    type SerializeTupleVariant = Self;
    type SerializeMap = Self;
    type SerializeStruct = Self;
    type SerializeStructVariant = Self;

    fn serialize_bool(self, v: bool) -> Result<(), Fault> {
        self.byte(u8::from(v))
    }
    fn serialize_i8(self, v: i8) -> Result<(), Fault> {
        self.byte(v as u8)
    }
    fn serialize_i16(self, v: i16) -> Result<(), Fault> {
        self.varint32(zigzag32(i32::from(v)))
    }
    fn serialize_i32(self, v: i32) -> Result<(), Fault> {
        self.varint32(zigzag32(v))
    }
    fn serialize_i64(self, v: i64) -> Result<(), Fault> {
        self.varint64(zigzag64(v))
    }
    fn serialize_i128(self, v: i128) -> Result<(), Fault> {
        self.varint128(zigzag128(v))
    }
    fn serialize_u8(self, v: u8) -> Result<(), Fault> {
        self.byte(v)
    }
    fn serialize_u16(self, v: u16) -> Result<(), Fault> {
        self.varint32(u32::from(v))
    }
    fn serialize_u32(self, v: u32) -> Result<(), Fault> {
        self.varint32(v)
    }
    fn serialize_u64(self, v: u64) -> Result<(), Fault> {
        self.varint64(v)
    }
    fn serialize_u128(self, v: u128) -> Result<(), Fault> {
        self.varint128(v)
    }
    fn serialize_f32(self, v: f32) -> Result<(), Fault> {
        self.bytes(&v.to_le_bytes())
    }
    fn serialize_f64(self, v: f64) -> Result<(), Fault> {
        self.bytes(&v.to_le_bytes())
    }
    fn serialize_char(self, v: char) -> Result<(), Fault> {
        let mut buf = [0u8; 4];
        self.serialize_str(v.encode_utf8(&mut buf))
    }
    fn serialize_str(self, v: &str) -> Result<(), Fault> {
        self.serialize_bytes(v.as_bytes())
    }
    fn serialize_bytes(self, v: &[u8]) -> Result<(), Fault> {
        self.len(Some(v.len()))?;
        self.bytes(v)
    }
    fn serialize_none(self) -> Result<(), Fault> {
        self.byte(0)
    }
    fn serialize_some<T: Serialize + ?Sized>(self, value: &T) -> Result<(), Fault> {
        self.byte(1)?;
        value.serialize(self)
    }
    fn serialize_unit(self) -> Result<(), Fault> {
        Ok(())
    }
    fn serialize_unit_struct(self, _name: &'static str) -> Result<(), Fault> {
        Ok(())
    }
    fn serialize_unit_variant(
        self,
        _name: &'static str,
        index: u32,
        _variant: &'static str,
    ) -> Result<(), Fault> {
        self.varint32(index)
    }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(
        self,
        _name: &'static str,
        value: &T,
    ) -> Result<(), Fault> {
        value.serialize(self)
    }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        _name: &'static str,
        index: u32,
        _variant: &'static str,
        value: &T,
    ) -> Result<(), Fault> {
        self.varint32(index)?;
        value.serialize(self)
    }
    fn serialize_seq(self, len: Option<usize>) -> Result<Self, Fault> {
        self.len(len)?;
        Ok(self)
    }
    fn serialize_tuple(self, _len: usize) -> Result<Self, Fault> {
        Ok(self)
    }
    fn serialize_tuple_struct(self, _name: &'static str, _len: usize) -> Result<Self, Fault> {
        Ok(self)
    }
    fn serialize_tuple_variant(
        self,
        _name: &'static str,
        index: u32,
        _variant: &'static str,
        _len: usize,
    ) -> Result<Self, Fault> {
        self.varint32(index)?;
        Ok(self)
    }
    fn serialize_map(self, len: Option<usize>) -> Result<Self, Fault> {
        self.len(len)?;
        Ok(self)
    }
    fn serialize_struct(self, _name: &'static str, _len: usize) -> Result<Self, Fault> {
        Ok(self)
    }
    fn serialize_struct_variant(
        self,
        _name: &'static str,
        index: u32,
        _variant: &'static str,
        _len: usize,
    ) -> Result<Self, Fault> {
        self.varint32(index)?;
        Ok(self)
    }
    fn collect_str<T: core::fmt::Display + ?Sized>(self, _value: &T) -> Result<(), Fault> {
        // Formatting has no place on the device; no message uses it.
        Err(Fault::Unsupported)
    }
    fn is_human_readable(&self) -> bool {
        false
    }
}

macro_rules! compound {
    ($trait:ident, $method:ident) => {
        impl<'w, 'a> ser::$trait for &'w mut Writer<'a> {
            type Ok = ();
            type Error = Fault;
            fn $method<T: Serialize + ?Sized>(&mut self, value: &T) -> Result<(), Fault> {
                value.serialize(&mut **self)
            }
            fn end(self) -> Result<(), Fault> {
                Ok(())
            }
        }
    };
}

compound!(SerializeSeq, serialize_element);
compound!(SerializeTuple, serialize_element);
compound!(SerializeTupleStruct, serialize_field);
compound!(SerializeTupleVariant, serialize_field);

impl<'w, 'a> ser::SerializeMap for &'w mut Writer<'a> {
    type Ok = ();
    type Error = Fault;
    fn serialize_key<T: Serialize + ?Sized>(&mut self, key: &T) -> Result<(), Fault> {
        key.serialize(&mut **self)
    }
    fn serialize_value<T: Serialize + ?Sized>(&mut self, value: &T) -> Result<(), Fault> {
        value.serialize(&mut **self)
    }
    fn end(self) -> Result<(), Fault> {
        Ok(())
    }
}

/// Structs and struct variants: the fields in order, names left out.
macro_rules! named_fields {
    ($trait:ident) => {
        impl<'w, 'a> ser::$trait for &'w mut Writer<'a> {
            type Ok = ();
            type Error = Fault;
            fn serialize_field<T: Serialize + ?Sized>(
                &mut self,
                _key: &'static str,
                value: &T,
            ) -> Result<(), Fault> {
                value.serialize(&mut **self)
            }
            fn end(self) -> Result<(), Fault> {
                Ok(())
            }
        }
    };
}

named_fields!(SerializeStruct);
named_fields!(SerializeStructVariant);

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use serde::Deserialize;

    /// Every shape the wire messages use.
    #[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
    enum Shape {
        Unit,
        New(i64),
        Tuple(u8, i16),
        Struct { a: u32, b: Option<u64> },
    }

    #[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
    struct Everything {
        b: bool,
        i8: i8,
        i16: i16,
        i32: i32,
        i64: i64,
        i128: i128,
        u8: u8,
        u16: u16,
        u32: u32,
        u64: u64,
        u128: u128,
        f32: f32,
        f64: f64,
        c: char,
        s: heapless::String<16>,
        v: heapless::Vec<u16, 8>,
        arr: [u8; 3],
        o: Option<i32>,
        shape: Shape,
        tuple: (u8, u64),
    }

    fn same_as_postcard<T: Serialize>(v: &T) {
        let mut ours = [0u8; 256];
        let mut theirs = [0u8; 256];
        let n = to_slice(v, &mut ours).unwrap();
        let t = postcard::to_slice(v, &mut theirs).unwrap();
        assert_eq!(&ours[..n], &*t);
        // Every shorter output is refused, never overrun.
        for short in 0..n {
            assert_eq!(
                to_slice(v, &mut ours[..short]),
                Err(Error::BufferTooSmall),
                "{short}"
            );
        }
    }

    fn shape() -> impl Strategy<Value = Shape> {
        prop_oneof![
            Just(Shape::Unit),
            any::<i64>().prop_map(Shape::New),
            (any::<u8>(), any::<i16>()).prop_map(|(a, b)| Shape::Tuple(a, b)),
            (any::<u32>(), any::<Option<u64>>()).prop_map(|(a, b)| Shape::Struct { a, b }),
        ]
    }

    proptest! {
        // postcard 1.x is the reference: the device's frames must decode
        // with it on every host.
        #[test]
        fn matches_postcard(
            b in any::<bool>(), i8v in any::<i8>(), i16v in any::<i16>(), i32v in any::<i32>(),
            i64v in any::<i64>(), i128v in any::<i128>(), u8v in any::<u8>(), u16v in any::<u16>(),
            u32v in any::<u32>(), u64v in any::<u64>(), u128v in any::<u128>(),
            f32v in any::<f32>(), f64v in any::<f64>(), c in any::<char>(),
            s in "[a-z°]{0,7}", v in proptest::collection::vec(any::<u16>(), 0..8),
            arr in any::<[u8; 3]>(), o in any::<Option<i32>>(), sh in shape(),
            tuple in any::<(u8, u64)>(),
        ) {
            let e = Everything {
                b, i8: i8v, i16: i16v, i32: i32v, i64: i64v, i128: i128v, u8: u8v, u16: u16v,
                u32: u32v, u64: u64v, u128: u128v, f32: f32v, f64: f64v, c,
                s: heapless::String::try_from(s.as_str()).unwrap(),
                v: heapless::Vec::from_slice(&v).unwrap(),
                arr, o, shape: sh, tuple,
            };
            same_as_postcard(&e);
        }

        #[test]
        fn varint_edges(shift in 0u32..64, delta in -2i64..=2) {
            let v = (1u64 << shift).wrapping_add(delta as u64);
            same_as_postcard(&v);
            same_as_postcard(&(v as i64));
            same_as_postcard(&(v as u32));
            same_as_postcard(&(v as i32));
        }
    }

    #[test]
    fn extremes() {
        for v in [
            0u64,
            127,
            128,
            16_383,
            16_384,
            u32::MAX as u64,
            u32::MAX as u64 + 1,
            u64::MAX,
        ] {
            same_as_postcard(&v);
        }
        for v in [i64::MIN, -1, 0, 1, i64::MAX] {
            same_as_postcard(&v);
        }
        same_as_postcard(&(u128::MAX, i128::MIN));
    }
}
