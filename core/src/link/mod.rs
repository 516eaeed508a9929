//! The serial link: messages, frames and the receive accumulator.
//!
//! # Frame format
//!
//! ```text
//! frame   = COBS(payload) 0x00
//! payload = version:u8  kind:u8  body  crc:u32-le
//! body    = postcard encoding of the kind's message
//! crc     = CRC-32C (CRC-32/ISCSI, check value 0xE3069283) of version, kind and body
//! ```
//!
//! * COBS (consistent overhead byte stuffing, Cheshire & Baker, IEEE/ACM
//!   Transactions on Networking 7(2), 1999) removes every 0x00 from the
//!   payload, so 0x00 only ever ends a frame: a receiver that joins a stream
//!   mid-frame, or loses bytes to noise, is back in step at the next 0x00.
//! * The protocol version travels in every frame ([`PROTOCOL_VERSION`]).
//! * The message kind is one byte ([`Kind`]); a frame of a kind this version
//!   does not know decodes to [`Error::UnknownKind`] with the raw code kept.
//!   Messages are of two families, one per direction ([`ToDevice`],
//!   [`FromDevice`]): a receiver decodes only its own family (a device's
//!   image holds no decoder of what it sends).
//! * postcard bounds every body at compile time (`MaxSize`), which bounds every
//!   frame: [`MAX_FRAME_LEN`] bytes including the delimiter. Receive buffers of
//!   that size never overflow on valid traffic.
//!
//! Encoding needs no allocation ([`encode`] writes into a caller's buffer);
//! receiving is done by an [`Accumulator`] fed with whatever the UART
//! delivers, in pieces of any size.

mod accumulator;
mod message;

pub use accumulator::{Accumulator, Feed};
pub use message::*;

use postcard::experimental::max_size::MaxSize;

use crate::Error;
use crate::checksum::crc32c;

/// The protocol version this crate speaks; every frame carries it. Version 2:
/// prepared configurations, message families per direction; version 3: the
/// telemetry says why no time to empty is given.
pub const PROTOCOL_VERSION: u8 = 3;

/// Bytes before the body: version and kind.
pub const HEADER_LEN: usize = 2;
/// Bytes of the CRC-32C after the body.
pub const CRC_LEN: usize = 4;

/// A family of messages: what [`encode`] writes and [`decode`] reads.
pub trait Wire: Sized {
    /// The largest body of the family, bytes (postcard `MaxSize`).
    const MAX_BODY_LEN: usize;
    /// The kind of this message.
    fn kind(&self) -> Kind;
    /// Writes the body; returns its length.
    fn encode_body(&self, out: &mut [u8]) -> Result<usize, Error>;
    /// Reads a body of `kind` (kinds of the other family are unknown here).
    fn decode_body(kind: Kind, body: &[u8]) -> Result<Self, Error>;
}

macro_rules! family {
    ($(#[doc = $fdoc:literal])* $family:ident {
        $( $(#[doc = $doc:literal])* $variant:ident($ty:ty) = $code:literal, $name:literal; )*
    }) => {
        $(#[doc = $fdoc])*
        #[derive(Clone, Debug, PartialEq, Eq)]
        #[allow(clippy::large_enum_variant)]
        pub enum $family {
            $( $(#[doc = $doc])* $variant($ty), )*
        }

        impl Wire for $family {
            const MAX_BODY_LEN: usize = {
                let mut max = 0;
                $( if <$ty as MaxSize>::POSTCARD_MAX_SIZE > max { max = <$ty as MaxSize>::POSTCARD_MAX_SIZE; } )*
                max
            };

            fn kind(&self) -> Kind {
                match self {
                    $( $family::$variant(_) => Kind::$variant, )*
                }
            }

            fn encode_body(&self, out: &mut [u8]) -> Result<usize, Error> {
                let used = match self {
                    $( $family::$variant(m) => crate::encode::to_slice(m, out), )*
                };
                used.map_err(|_| Error::BufferTooSmall)
            }

            fn decode_body(kind: Kind, body: &[u8]) -> Result<Self, Error> {
                match kind {
                    $( Kind::$variant => whole::<$ty>(body).map($family::$variant), )*
                    #[allow(unreachable_patterns)]
                    other => Err(Error::UnknownKind(other.code())),
                }
            }
        }
    };
}

macro_rules! kinds {
    ($( $(#[doc = $doc:literal])* $variant:ident = $code:literal, $name:literal; )*) => {
        /// The kind of a message: its one-byte code on the wire.
        #[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
        #[cfg_attr(feature = "defmt", derive(defmt::Format))]
        #[repr(u8)]
        pub enum Kind {
            $( $(#[doc = $doc])* $variant = $code, )*
        }

        impl Kind {
            /// Every kind, in code order.
            pub const ALL: &'static [Kind] = &[ $( Kind::$variant, )* ];

            /// The code on the wire.
            pub const fn code(self) -> u8 {
                self as u8
            }

            /// The kind of a wire code, `None` for codes this version does not know.
            pub const fn from_code(code: u8) -> Option<Kind> {
                match code {
                    $( $code => Some(Kind::$variant), )*
                    _ => None,
                }
            }

            /// Stable snake_case name (used in host output).
            pub const fn name(self) -> &'static str {
                match self {
                    $( Kind::$variant => $name, )*
                }
            }
        }
    };
}

kinds! {
    /// Device → host: one estimate.
    Telemetry = 0x02, "telemetry";
    /// Device → host: an alarm was raised or cleared.
    Alarm = 0x03, "alarm";
    /// Device → host: the answer to a request.
    Reply = 0x04, "reply";
    /// Device → host: the device started (once after every start).
    Boot = 0x05, "boot";
    /// Host → device: are you there?
    Ping = 0x10, "ping";
    /// Host → device: send your identity.
    GetIdentity = 0x11, "get_identity";
    /// Host → device: open a signing session.
    GetChallenge = 0x12, "get_challenge";
    /// Host → device: send a piece of the configuration in force.
    ReadConfig = 0x13, "read_config";
    /// Host → device: a signed command.
    Signed = 0x14, "signed";
    /// Host → device: raw sensor codes to take as a sample.
    InjectSample = 0x15, "inject_sample";
    /// Host → device: send your diagnostics.
    GetDiagnostics = 0x16, "get_diagnostics";
}

family! {
    /// Every message a device sends.
    FromDevice {
        /// One estimate.
        Telemetry(Telemetry) = 0x02, "telemetry";
        /// An alarm was raised or cleared.
        Alarm(AlarmEvent) = 0x03, "alarm";
        /// The answer to a request.
        Reply(Reply) = 0x04, "reply";
        /// The device started.
        Boot(Boot) = 0x05, "boot";
    }
}

family! {
    /// Every message a host sends.
    ToDevice {
        /// Are you there?
        Ping(Ping) = 0x10, "ping";
        /// Send your identity.
        GetIdentity(GetIdentity) = 0x11, "get_identity";
        /// Open a signing session.
        GetChallenge(GetChallenge) = 0x12, "get_challenge";
        /// Send a piece of the configuration in force.
        ReadConfig(ReadConfig) = 0x13, "read_config";
        /// A signed command.
        Signed(Signed) = 0x14, "signed";
        /// Raw sensor codes to take as a sample.
        InjectSample(InjectSample) = 0x15, "inject_sample";
        /// Send your diagnostics.
        GetDiagnostics(GetDiagnostics) = 0x16, "get_diagnostics";
    }
}

/// Decodes a whole body: bytes left over are an error.
fn whole<T: serde::de::DeserializeOwned>(body: &[u8]) -> Result<T, Error> {
    match postcard::take_from_bytes::<T>(body) {
        Ok((value, [])) => Ok(value),
        _ => Err(Error::MessageBody),
    }
}

/// The largest body of either family, bytes.
pub const MAX_BODY_LEN: usize = if FromDevice::MAX_BODY_LEN > ToDevice::MAX_BODY_LEN {
    FromDevice::MAX_BODY_LEN
} else {
    ToDevice::MAX_BODY_LEN
};

/// The largest payload (header, body, CRC), bytes.
pub const MAX_PAYLOAD_LEN: usize = HEADER_LEN + MAX_BODY_LEN + CRC_LEN;

/// The largest frame on the wire, bytes: COBS-encoded payload plus the 0x00
/// delimiter. Known at compile time.
pub const MAX_FRAME_LEN: usize = cobs_max_len(MAX_PAYLOAD_LEN) + 1;

/// The longest COBS encoding of `n` bytes: one code byte per started run of
/// 254 bytes, at least one.
pub const fn cobs_max_len(n: usize) -> usize {
    n + if n == 0 { 1 } else { n.div_ceil(254) }
}

/// Writes the payload of `msg` (header, body, CRC) into `out`; returns its
/// length.
pub fn encode_payload<M: Wire>(msg: &M, out: &mut [u8]) -> Result<usize, Error> {
    let (header, rest) = out
        .split_first_chunk_mut::<HEADER_LEN>()
        .ok_or(Error::BufferTooSmall)?;
    *header = [PROTOCOL_VERSION, msg.kind().code()];
    let body_len = msg.encode_body(rest)?;
    let crc_at = HEADER_LEN + body_len;
    let crc = crc32c(out.get(..crc_at).ok_or(Error::BufferTooSmall)?);
    crate::encode::copy(
        out.get_mut(crc_at..crc_at + CRC_LEN)
            .ok_or(Error::BufferTooSmall)?,
        &crc.to_le_bytes(),
    );
    Ok(crc_at + CRC_LEN)
}

/// Encodes `msg` as a complete frame (COBS payload and the 0x00 delimiter)
/// into `out`; returns the frame length (at most [`MAX_FRAME_LEN`]).
pub fn encode<M: Wire>(msg: &M, out: &mut [u8]) -> Result<usize, Error> {
    // The payload is written one byte in, where COBS then encodes it in
    // place: no second buffer, no copy.
    let n = encode_payload(msg, out.get_mut(1..).ok_or(Error::BufferTooSmall)?)?;
    let used = cobs_encode_in_place(out, n).ok_or(Error::BufferTooSmall)?;
    *out.get_mut(used).ok_or(Error::BufferTooSmall)? = 0;
    Ok(used + 1)
}

/// COBS-encodes (Consistent Overhead Byte Stuffing, Cheshire & Baker,
/// IEEE/ACM Trans. Networking 7(2), 1999) the `n` bytes at `buf[1..=n]` in
/// place; returns the encoding's length (it starts at `buf[0]`), or `None`
/// when `buf` is too short for it ([`cobs_max_len`]`(n)` bytes are always
/// enough). Each zero becomes the distance to the next one, and the byte
/// before the data the distance to the first: nothing moves, but for the
/// code byte inserted after each run of 254 non-zero bytes that more data
/// follows. The same bytes
/// as the `cobs` crate's encoder (tested); no panic path.
pub fn cobs_encode_in_place(buf: &mut [u8], n: usize) -> Option<usize> {
    let mut end = n.checked_add(1)?;
    if end > buf.len() {
        return None;
    }
    let mut code_at = 0;
    let mut code = 1u8;
    let mut i = 1;
    while i < end {
        if *buf.get(i)? == 0 {
            *buf.get_mut(code_at)? = code;
            code_at = i;
            code = 1;
        } else {
            code += 1;
            if code == 0xFF {
                // A full run: its code, then room for the next run's code
                // right after it (the rest moves up one byte) — unless the
                // data ends here, where the encoding ends too.
                *buf.get_mut(code_at)? = 0xFF;
                if i + 1 == end {
                    return Some(end);
                }
                if end >= buf.len() {
                    return None;
                }
                let mut k = end;
                while k > i + 1 {
                    *buf.get_mut(k)? = *buf.get(k - 1)?;
                    k -= 1;
                }
                end += 1;
                i += 1;
                code_at = i;
                code = 1;
            }
        }
        i += 1;
    }
    *buf.get_mut(code_at)? = code;
    Some(end)
}

/// Decodes a payload (COBS already removed): checks length, CRC, version and
/// kind, then the body.
pub fn decode_payload<M: Wire>(payload: &[u8]) -> Result<M, Error> {
    if payload.len() < HEADER_LEN + CRC_LEN || payload.len() > MAX_PAYLOAD_LEN {
        return Err(Error::FrameLength);
    }
    let at = payload.len() - CRC_LEN;
    let (Some(covered), Some(&[c0, c1, c2, c3])) = (payload.get(..at), payload.get(at..)) else {
        return Err(Error::FrameLength);
    };
    if crc32c(covered) != u32::from_le_bytes([c0, c1, c2, c3]) {
        return Err(Error::FrameCrc);
    }
    let ([version, code], body) = covered
        .split_first_chunk::<HEADER_LEN>()
        .ok_or(Error::FrameLength)?;
    if *version != PROTOCOL_VERSION {
        return Err(Error::ProtocolVersion(*version));
    }
    let kind = Kind::from_code(*code).ok_or(Error::UnknownKind(*code))?;
    M::decode_body(kind, body)
}

/// Decodes one frame held whole in `frame`, with or without its trailing
/// 0x00 delimiter. `frame` must not contain any other 0x00. The bytes are
/// decoded in place (COBS decoding shortens them), so they are left changed.
pub fn decode_in_place<M: Wire>(frame: &mut [u8]) -> Result<M, Error> {
    let body = match frame.split_last_mut() {
        Some((0, body)) => body,
        _ => frame,
    };
    if body.len() > MAX_FRAME_LEN - 1 {
        return Err(Error::FrameLength);
    }
    if body.contains(&0) {
        return Err(Error::FrameEncoding);
    }
    let n = cobs_decode_in_place(body).ok_or(Error::FrameEncoding)?;
    decode_payload(body.get(..n).ok_or(Error::FrameEncoding)?)
}

/// Removes COBS (Consistent Overhead Byte Stuffing, Cheshire & Baker,
/// IEEE/ACM Trans. Networking 7(2), 1999) from `buf` in place, up to its
/// first 0x00 if any; returns the decoded length, or `None` for a frame that
/// is not valid COBS. Every byte is reached by a checked look-up: no panic
/// path (the `cobs` crate's decoder indexes directly). Tested against the
/// `cobs` crate.
pub fn cobs_decode_in_place(buf: &mut [u8]) -> Option<usize> {
    if buf.is_empty() {
        return None;
    }
    let end = buf.iter().position(|&b| b == 0).unwrap_or(buf.len());
    let (mut src, mut dst) = (0usize, 0usize);
    while src < end {
        let code = usize::from(*buf.get(src)?);
        if src + code > end && code != 1 {
            return None;
        }
        src += 1;
        for _ in 1..code {
            let b = *buf.get(src)?;
            *buf.get_mut(dst)? = b;
            src += 1;
            dst += 1;
        }
        if code != 0xFF && src < end {
            *buf.get_mut(dst)? = 0;
            dst += 1;
        }
    }
    Some(dst)
}

/// Decodes one frame (copied first; see [`decode_in_place`]).
pub fn decode<M: Wire>(frame: &[u8]) -> Result<M, Error> {
    let mut buf = [0u8; MAX_FRAME_LEN];
    let dst = buf.get_mut(..frame.len()).ok_or(Error::FrameLength)?;
    dst.copy_from_slice(frame);
    decode_in_place(dst)
}
