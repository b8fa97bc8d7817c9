//! Arbitrary bytes into the beacon decoders (version 1, version 2, and the decoder of
//! both), plain and verified.
//!
//! Besides "never panics", checks what must hold whenever a decode succeeds: the input is
//! exactly one frame of the version its first byte names, its header is what the decoded
//! fields encode to, the version-1 decoder and the decoder of both agree on version-1
//! frames (and only the latter reads version 2), and a verified decode succeeds only
//! where the plain one does, with the same fields.
#![no_main]

use entrain::beacon::{Beacon, FRAME_LEN, FRAME_V2_LEN, Frame, FrameV2, NetworkKey};
use libfuzzer_sys::fuzz_target;

const KEY: NetworkKey = NetworkKey::from_bytes([
    0x3d, 0x91, 0x0e, 0xc4, 0x57, 0xa8, 0x22, 0xf6, 0x8b, 0x10, 0x6f, 0xd3, 0x49, 0xe5, 0x7a, 0x0c,
]);

fuzz_target!(|bytes: &[u8]| {
    let plain = Beacon::decode(bytes);
    let verified = Beacon::decode_verified(bytes, &KEY);
    // The version-specific decoders agree with the decoder of both.
    match Frame::decode(bytes) {
        Ok(f) => assert_eq!(plain, Ok(Beacon::V1(f))),
        Err(e) => assert!(bytes.first() == Some(&2) || plain == Err(e)),
    }
    match FrameV2::decode(bytes) {
        Ok(f) => assert_eq!(plain, Ok(Beacon::V2(f))),
        Err(e) => assert!(bytes.first() != Some(&2) || plain == Err(e)),
    }
    if let Ok(beacon) = plain {
        assert_eq!(bytes.len(), beacon.wire_len());
        let tag = match beacon {
            Beacon::V1(f) => {
                assert_eq!(bytes.len(), FRAME_LEN);
                assert_eq!(&f.header()[..], &bytes[..16]);
                &bytes[16..24]
            }
            Beacon::V2(f) => {
                assert_eq!(bytes.len(), FRAME_V2_LEN);
                assert_eq!(&f.header()[..], &bytes[..30]);
                // An echo is an echo exactly when its held ticks are below 2^31.
                let held = u32::from_le_bytes([bytes[26], bytes[27], bytes[28], bytes[29]]);
                assert_eq!(f.echo.for_node(f.echo.to).is_some(), held < 1 << 31);
                &bytes[30..38]
            }
        };
        assert_eq!(
            beacon.frame().from,
            u16::from_le_bytes([bytes[2], bytes[3]])
        );
        if tag.iter().all(|&b| b == 0) {
            let mut out = [0u8; FRAME_V2_LEN];
            let n = beacon.encode(&mut out).unwrap();
            assert_eq!(&out[..n], bytes);
        }
    }
    if let Ok(beacon) = verified {
        assert_eq!(plain, Ok(beacon));
        let mut out = [0u8; FRAME_V2_LEN];
        let n = beacon.encode_signed(&KEY, &mut out).unwrap();
        assert_eq!(&out[..n], bytes);
    }
});
