//! Frame decoding: COBS → CRC-32C → postcard, fed to an accumulator in
//! random chunk sizes, as a device reads what a host sends ([`ToDevice`]),
//! and the whole stream as a host reads a device ([`FromDevice`]). Every
//! decoded message must re-encode to a frame that decodes to the same
//! message; a signed command's bytes decode or are refused; nothing may
//! panic.
#![no_main]

use isochor_core::link::{self, Accumulator, Feed, FromDevice, MAX_FRAME_LEN, ToDevice};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    // The first bytes choose the chunk sizes, the rest is the stream.
    let (sizes, stream) = data.split_at(data.len().min(8));
    let mut acc = Accumulator::<ToDevice>::new();
    let mut at = 0;
    let mut i = 0;
    while at < stream.len() {
        let size = sizes
            .get(i % sizes.len().max(1))
            .map_or(stream.len(), |&s| usize::from(s) + 1);
        i += 1;
        let end = (at + size).min(stream.len());
        let mut piece = &stream[at..end];
        at = end;
        loop {
            match acc.feed(piece) {
                Feed::NeedMore => break,
                Feed::Frame { message, rest } => {
                    let mut out = [0u8; MAX_FRAME_LEN];
                    let n = link::encode(&message, &mut out).expect("a decoded message encodes");
                    assert_eq!(
                        link::decode::<ToDevice>(&out[..n]).expect("and decodes again"),
                        message
                    );
                    if let ToDevice::Signed(s) = &message {
                        let _ = s.decode_command();
                    }
                    piece = rest;
                }
                Feed::BadFrame { rest, .. } | Feed::Overfull { rest } => piece = rest,
            }
        }
    }
    for frame in stream.split_inclusive(|&b| b == 0) {
        if let Ok(m) = link::decode::<FromDevice>(frame) {
            let mut out = [0u8; MAX_FRAME_LEN];
            let n = link::encode(&m, &mut out).expect("a decoded message encodes");
            assert_eq!(
                link::decode::<FromDevice>(&out[..n]).expect("and decodes again"),
                m
            );
        }
    }
});
