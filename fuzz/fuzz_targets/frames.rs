//! The server's frame reader survives any byte stream: it never panics, always makes
//! progress, hands tower-lsp only bodies that pass the message check, and finds the
//! same frames whether the bytes arrive at once or in arbitrary pieces (a pipe may cut
//! a frame anywhere).
#![no_main]

use libfuzzer_sys::fuzz_target;
use sdeck_server::transport::{check_message, Frame, Reader};

fn frames(pieces: &[&[u8]]) -> Vec<Frame> {
    let mut reader = Reader::default();
    let mut out = Vec::new();
    for piece in pieces {
        reader.push(piece);
        loop {
            match reader.next_frame() {
                Frame::Incomplete => break,
                frame => out.push(frame),
            }
            // Every frame consumes at least one byte, so this ends.
            assert!(out.len() <= 1 + pieces.iter().map(|p| p.len()).sum::<usize>());
        }
    }
    out
}

fuzz_target!(|data: &[u8]| {
    let Some((&cut, stream)) = data.split_first() else {
        return;
    };
    let whole = frames(&[stream]);
    for frame in &whole {
        if let Frame::Message(body) = frame {
            assert!(check_message(body).is_ok(), "a bad body passed");
        }
    }
    // The same bytes in pieces of `cut` bytes (1 to 16).
    let size = usize::from(cut % 16) + 1;
    let pieces: Vec<&[u8]> = stream.chunks(size).collect();
    assert_eq!(frames(&pieces), whole, "pieces of {size} bytes");
});
