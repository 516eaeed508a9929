//! Receiving frames from a byte stream delivered in pieces of any size.

use core::marker::PhantomData;

use super::{MAX_FRAME_LEN, Wire, decode_in_place};
use crate::Error;

/// Collects bytes until a 0x00 delimiter and decodes the frame it ends.
///
/// Feed it whatever the UART delivers; each call returns one [`Feed`] outcome
/// and the bytes it has not looked at yet, to be fed again:
///
/// ```
/// use isochor_core::link::{self, Accumulator, Feed, Ping, ToDevice};
///
/// let mut frame = [0u8; link::MAX_FRAME_LEN];
/// let n = link::encode(&ToDevice::Ping(Ping { tag: 7, token: 42 }), &mut frame).unwrap();
///
/// let mut acc = Accumulator::<ToDevice>::new();
/// let (first, second) = frame[..n].split_at(3);
/// assert!(matches!(acc.feed(first), Feed::NeedMore));
/// match acc.feed(second) {
///     Feed::Frame { message, rest } => {
///         assert_eq!(message, ToDevice::Ping(Ping { tag: 7, token: 42 }));
///         assert!(rest.is_empty());
///     }
///     other => panic!("{other:?}"),
/// }
/// ```
///
/// A frame longer than [`MAX_FRAME_LEN`] cannot be valid: its bytes are
/// dropped up to its delimiter and reported once as [`Feed::Overfull`]. Empty
/// frames (0x00 0x00, used to resynchronise a line) are skipped silently.
/// `M` is the family of messages this end receives ([`super::ToDevice`] on
/// a device, [`super::FromDevice`] on a host).
#[derive(Clone, Debug)]
pub struct Accumulator<M> {
    buf: [u8; MAX_FRAME_LEN],
    len: usize,
    overfull: bool,
    family: PhantomData<fn() -> M>,
}

/// The outcome of one [`Accumulator::feed`].
#[derive(Debug, PartialEq, Eq)]
#[allow(clippy::large_enum_variant)] // returned by value once per frame, never stored
pub enum Feed<'a, M> {
    /// All input was taken; no frame is complete yet.
    NeedMore,
    /// A frame arrived and decoded.
    Frame {
        /// The message.
        message: M,
        /// Input after the frame's delimiter, not yet looked at.
        rest: &'a [u8],
    },
    /// A frame longer than [`MAX_FRAME_LEN`] ended here and was dropped.
    Overfull {
        /// Input after the frame's delimiter, not yet looked at.
        rest: &'a [u8],
    },
    /// A frame arrived but does not decode (broken COBS, wrong length, CRC
    /// mismatch, other protocol version, unknown kind or bad body).
    BadFrame {
        /// Why.
        error: Error,
        /// Input after the frame's delimiter, not yet looked at.
        rest: &'a [u8],
    },
}

impl<M: Wire> Default for Accumulator<M> {
    fn default() -> Self {
        Accumulator::new()
    }
}

impl<M: Wire> Accumulator<M> {
    /// An empty accumulator.
    pub const fn new() -> Accumulator<M> {
        Accumulator {
            buf: [0; MAX_FRAME_LEN],
            len: 0,
            overfull: false,
            family: PhantomData,
        }
    }

    /// Forgets a partly received frame.
    pub fn reset(&mut self) {
        self.len = 0;
        self.overfull = false;
    }

    /// Bytes of the frame received so far.
    pub fn pending(&self) -> usize {
        self.len
    }

    /// Takes bytes until a frame ends or the input is used up.
    // Not inlined: the decoder's temporaries stay out of the caller's frame
    // while the decoded message is handled.
    #[inline(never)]
    pub fn feed<'a>(&mut self, input: &'a [u8]) -> Feed<'a, M> {
        let mut rest = input;
        loop {
            let Some(end) = rest.iter().position(|&b| b == 0) else {
                self.take(rest);
                return Feed::NeedMore;
            };
            let part = rest.get(..end).unwrap_or(&[]);
            let after = rest.get(end + 1..).unwrap_or(&[]);
            self.take(part);
            rest = after;
            if self.overfull {
                self.reset();
                return Feed::Overfull { rest };
            }
            if self.len == 0 {
                continue; // empty frame: a resynchronising delimiter
            }
            let n = self.len;
            self.len = 0;
            let result = match self.buf.get_mut(..n) {
                Some(frame) => decode_in_place(frame),
                None => Err(Error::FrameLength),
            };
            return match result {
                Ok(message) => Feed::Frame { message, rest },
                Err(error) => Feed::BadFrame { error, rest },
            };
        }
    }

    /// Appends frame bytes (no delimiter among them), noting overflow.
    fn take(&mut self, bytes: &[u8]) {
        if self.overfull {
            return;
        }
        // One byte is kept free: a frame body is at most MAX_FRAME_LEN - 1.
        let room = MAX_FRAME_LEN - 1 - self.len;
        if bytes.len() > room {
            self.overfull = true;
            self.len = 0;
            return;
        }
        if let Some(dst) = self.buf.get_mut(self.len..self.len + bytes.len()) {
            crate::encode::copy(dst, bytes);
            self.len += bytes.len();
        }
    }
}
