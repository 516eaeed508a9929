//! Frame decoding: COBS → CRC-32C → postcard, fed to the accumulator in
//! random chunk sizes. Every decoded message must re-encode to a frame that
//! decodes to the same message; nothing may panic.
#![no_main]

use isochor_core::link::{self, Accumulator, Feed, MAX_FRAME_LEN};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    // The first bytes choose the chunk sizes, the rest is the stream.
    let (sizes, stream) = data.split_at(data.len().min(8));
    let mut acc = Accumulator::new();
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
                    assert_eq!(link::decode(&out[..n]).expect("and decodes again"), message);
                    piece = rest;
                }
                Feed::BadFrame { rest, .. } | Feed::Overfull { rest } => piece = rest,
            }
        }
    }
    let _ = link::decode(stream);
});
