//! Arbitrary bytes into the beacon decoder, plain and verified.
//!
//! Besides "never panics", checks what must hold whenever a decode succeeds: the input is
//! exactly one frame, its header is what the decoded fields encode to, and a verified
//! decode succeeds only where the plain one does, with the same fields.
#![no_main]

use entrain::beacon::{FRAME_LEN, Frame, NetworkKey};
use libfuzzer_sys::fuzz_target;

const KEY: NetworkKey = NetworkKey::from_bytes([
    0x3d, 0x91, 0x0e, 0xc4, 0x57, 0xa8, 0x22, 0xf6, 0x8b, 0x10, 0x6f, 0xd3, 0x49, 0xe5, 0x7a, 0x0c,
]);

fuzz_target!(|bytes: &[u8]| {
    let plain = Frame::decode(bytes);
    let verified = Frame::decode_verified(bytes, &KEY);
    if let Ok(frame) = plain {
        assert_eq!(bytes.len(), FRAME_LEN);
        assert_eq!(&frame.header()[..], &bytes[..16]);
        if bytes[16..24].iter().all(|&b| b == 0) {
            assert_eq!(&frame.to_bytes()[..], bytes);
        }
    }
    if let Ok(frame) = verified {
        assert_eq!(plain, Ok(frame));
        assert_eq!(&frame.to_bytes_signed(&KEY)[..], bytes);
    }
});
