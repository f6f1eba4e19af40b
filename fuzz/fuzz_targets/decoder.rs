//! The wire decoder on arbitrary bytes in arbitrary chunks: it must never
//! panic, every delimiter must be accounted for, chunking must not change
//! the outcome, and every frame it accepts must be a valid frame that
//! re-encodes and decodes to itself.
#![no_main]

use heatbound::wire::{self, Decoder, Frame, FrameError};
use libfuzzer_sys::fuzz_target;

const CAP: usize = wire::MAX_FRAME_LEN;

fuzz_target!(|data: &[u8]| {
    // The first byte seeds the chunk sizes; the rest is the stream.
    let Some((&seed, stream)) = data.split_first() else {
        return;
    };

    let mut whole = Decoder::<CAP>::new();
    let mut reference: Vec<Result<Frame, FrameError>> = Vec::new();
    whole.feed(stream, |r| reference.push(r));

    let mut chunked = Decoder::<CAP>::new();
    let mut got = Vec::new();
    let mut rest = stream;
    let mut step = usize::from(seed % 17) + 1;
    while !rest.is_empty() {
        let (chunk, tail) = rest.split_at(step.min(rest.len()));
        chunked.feed(chunk, |r| got.push(r));
        rest = tail;
        step = (step * 5 + 3) % 31 + 1;
    }
    assert_eq!(got, reference);
    assert_eq!(chunked.stats(), whole.stats());

    let s = whole.stats();
    let delimiters = stream.iter().filter(|&&b| b == 0).count() as u64;
    assert_eq!(s.frames + s.losses() + s.empty_frames, delimiters);

    // An accepted frame is a valid frame: it encodes, and decodes to itself.
    let mut buf = [0u8; wire::MAX_FRAME_LEN];
    for frame in reference.iter().flatten() {
        let n = wire::encode(frame, &mut buf).expect("accepted frame re-encodes");
        assert_eq!(wire::decode(&buf[..n]).as_ref(), Ok(frame));
    }
});
