//! The beacon frame against its documented layout: hand-written golden vectors, an
//! independent CRC-32C, and properties over all field values.
#![cfg(feature = "beacon")]

use entrain::beacon::{DecodeError, FRAME_LEN, Flags, Frame};
use proptest::prelude::*;

/// Bitwise CRC-32C written for this test from the published parameters (poly 0x1EDC6F41,
/// reflected as 0x82F63B78, init and xorout 0xFFFFFFFF), independent of the `crc` crate.
fn crc32c_bitwise(bytes: &[u8]) -> u32 {
    let mut crc = 0xFFFF_FFFFu32;
    for &b in bytes {
        crc ^= u32::from(b);
        for _ in 0..8 {
            crc = if crc & 1 != 0 {
                (crc >> 1) ^ 0x82F6_3B78
            } else {
                crc >> 1
            };
        }
    }
    crc ^ 0xFFFF_FFFF
}

#[test]
fn bitwise_reference_has_the_catalogue_check_value() {
    // CRC-32/ISCSI check value on "123456789": 0xE3069283 (published CRC catalogue; value
    // from memory).
    assert_eq!(crc32c_bitwise(b"123456789"), 0xE306_9283);
}

/// The frame of the golden vectors: every field has distinct bytes so a swapped or
/// misplaced field shows.
const GOLDEN_FRAME: Frame = Frame {
    from: 0x0203,
    seq: 0x1122_3344,
    phase_counts: 0x8000_0000, // half a turn
    trim_ppb: -1_500,          // 0xFFFFFA24
    flags: Flags::PINNED,
};

/// Written by hand from the layout table in `entrain::beacon`; the check bytes were
/// computed with an independent bitwise CRC-32C (the one above, and a separate script).
const GOLDEN_PLAIN: [u8; FRAME_LEN] = [
    0x01, // version 1
    0x01, // flags: PINNED
    0x03, 0x02, // from 0x0203, LE
    0x44, 0x33, 0x22, 0x11, // seq 0x11223344, LE
    0x00, 0x00, 0x00, 0x80, // phase 0x80000000, LE
    0x24, 0xFA, 0xFF, 0xFF, // trim -1500 ppb, two's complement LE
    0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, 0x00, // tag: none
    0x65, 0xFA, 0x7B, 0xB8, // CRC-32C of bytes 0..24 = 0xB87BFA65, LE
];

#[test]
fn golden_vector_encodes_byte_for_byte() {
    assert_eq!(GOLDEN_FRAME.to_bytes(), GOLDEN_PLAIN);
    let mut out = [0u8; FRAME_LEN];
    assert_eq!(GOLDEN_FRAME.encode(&mut out), Ok(FRAME_LEN));
    assert_eq!(out, GOLDEN_PLAIN);
}

#[test]
fn golden_vector_decodes_field_for_field() {
    assert_eq!(Frame::decode(&GOLDEN_PLAIN), Ok(GOLDEN_FRAME));
}

#[test]
fn golden_check_bytes_match_the_independent_crc() {
    let (body, check) = GOLDEN_PLAIN.split_at(24);
    assert_eq!(crc32c_bitwise(body).to_le_bytes(), check);
}

#[test]
fn newer_version_is_refused_as_such() {
    // A version-2 frame, whatever its size, is refused on its version byte.
    let mut v2 = [0u8; 40];
    v2[0] = 2;
    assert_eq!(
        Frame::decode(&v2),
        Err(DecodeError::UnsupportedVersion { found: 2 })
    );
    let mut v2_same_size = GOLDEN_PLAIN;
    v2_same_size[0] = 2;
    assert_eq!(
        Frame::decode(&v2_same_size),
        Err(DecodeError::UnsupportedVersion { found: 2 })
    );
}

#[test]
fn reserved_flag_bits_pass_through() {
    let frame = Frame {
        flags: Flags::from_bits(0b1000_0010),
        ..GOLDEN_FRAME
    };
    let decoded = Frame::decode(&frame.to_bytes()).unwrap();
    assert_eq!(decoded.flags.bits(), 0b1000_0010);
    assert!(decoded.flags.contains(Flags::ISOLATED));
    assert!(!decoded.flags.contains(Flags::PINNED));
}

fn any_frame() -> impl Strategy<Value = Frame> {
    (
        any::<u16>(),
        any::<u32>(),
        any::<u32>(),
        any::<i32>(),
        any::<u8>(),
    )
        .prop_map(|(from, seq, phase_counts, trim_ppb, flags)| Frame {
            from,
            seq,
            phase_counts,
            trim_ppb,
            flags: Flags::from_bits(flags),
        })
}

proptest! {
    #[test]
    fn round_trip_for_all_field_values(frame in any_frame()) {
        let bytes = frame.to_bytes();
        prop_assert_eq!(Frame::decode(&bytes), Ok(frame));
        prop_assert_eq!(bytes[0], 1);
        prop_assert_eq!(&bytes[2..4], &frame.from.to_le_bytes()[..]);
        prop_assert_eq!(&bytes[4..8], &frame.seq.to_le_bytes()[..]);
        prop_assert_eq!(&bytes[8..12], &frame.phase_counts.to_le_bytes()[..]);
        prop_assert_eq!(&bytes[12..16], &frame.trim_ppb.to_le_bytes()[..]);
        prop_assert_eq!(crc32c_bitwise(&bytes[..24]).to_le_bytes(), &bytes[24..28]);
    }

    #[test]
    fn every_single_bit_flip_is_rejected(frame in any_frame(), bit in 0..FRAME_LEN * 8) {
        let mut bytes = frame.to_bytes();
        bytes[bit / 8] ^= 1 << (bit % 8);
        let got = Frame::decode(&bytes);
        if bit < 8 {
            // The version byte is read first.
            prop_assert_eq!(got, Err(DecodeError::UnsupportedVersion { found: bytes[0] }));
        } else {
            prop_assert_eq!(got, Err(DecodeError::BadCheck));
        }
    }

    #[test]
    fn every_truncation_is_rejected(frame in any_frame(), len in 0..FRAME_LEN) {
        let bytes = frame.to_bytes();
        prop_assert_eq!(Frame::decode(&bytes[..len]), Err(DecodeError::TooShort { len }));
    }

    #[test]
    fn any_extension_is_rejected(frame in any_frame(), extra in proptest::collection::vec(any::<u8>(), 1..16)) {
        let mut bytes = frame.to_bytes().to_vec();
        bytes.extend_from_slice(&extra);
        prop_assert_eq!(Frame::decode(&bytes), Err(DecodeError::TooLong { len: bytes.len() }));
    }

    #[test]
    fn decode_never_panics_and_accepts_only_consistent_bytes(
        bytes in proptest::collection::vec(any::<u8>(), 0..64)
    ) {
        if let Ok(frame) = Frame::decode(&bytes) {
            // Whatever decodes must be a frame whose own encoding is these header bytes
            // with a good check.
            prop_assert_eq!(bytes.len(), FRAME_LEN);
            prop_assert_eq!(&frame.header()[..], &bytes[..16]);
            prop_assert_eq!(crc32c_bitwise(&bytes[..24]).to_le_bytes(), &bytes[24..28]);
        }
    }

    #[test]
    fn random_frames_with_a_good_version_byte_are_rejected(
        mut bytes in proptest::array::uniform28(any::<u8>())
    ) {
        bytes[0] = 1;
        let check_ok = crc32c_bitwise(&bytes[..24]).to_le_bytes() == bytes[24..28];
        prop_assert_eq!(Frame::decode(&bytes).is_ok(), check_ok);
    }
}

#[cfg(feature = "mac")]
mod authenticated {
    use super::*;
    use entrain::beacon::NetworkKey;

    /// Key 00 01 .. 0f.
    const KEY: NetworkKey =
        NetworkKey::from_bytes([0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15]);

    /// `GOLDEN_FRAME` signed under `KEY`, by hand from the layout; the tag is SipHash-2-4
    /// of bytes 0..16 computed with an independent implementation (checked against the
    /// SipHash paper's vector), the check with the independent CRC-32C.
    const GOLDEN_SIGNED: [u8; FRAME_LEN] = [
        0x01, 0x01, 0x03, 0x02, // version, flags, from
        0x44, 0x33, 0x22, 0x11, // seq
        0x00, 0x00, 0x00, 0x80, // phase
        0x24, 0xFA, 0xFF, 0xFF, // trim
        0x3C, 0xE2, 0xCC, 0x20, 0x52, 0xC1, 0x39, 0x38, // tag 0x3839C15220CCE23C, LE
        0xD3, 0x45, 0x9C, 0x8B, // CRC-32C 0x8B9C45D3, LE
    ];

    #[test]
    fn golden_signed_vector() {
        assert_eq!(GOLDEN_FRAME.to_bytes_signed(&KEY), GOLDEN_SIGNED);
        assert_eq!(
            Frame::decode_verified(&GOLDEN_SIGNED, &KEY),
            Ok(GOLDEN_FRAME)
        );
        // A receiver without the key still reads it.
        assert_eq!(Frame::decode(&GOLDEN_SIGNED), Ok(GOLDEN_FRAME));
        assert_eq!(
            crc32c_bitwise(&GOLDEN_SIGNED[..24]).to_le_bytes(),
            &GOLDEN_SIGNED[24..]
        );
    }

    #[test]
    fn unsigned_frame_fails_verification() {
        assert_eq!(
            Frame::decode_verified(&GOLDEN_PLAIN, &KEY),
            Err(DecodeError::BadTag)
        );
    }

    fn any_key() -> impl Strategy<Value = [u8; 16]> {
        proptest::array::uniform16(any::<u8>())
    }

    proptest! {
        #[test]
        fn signed_round_trip(frame in any_frame(), key in any_key()) {
            let key = NetworkKey::from_bytes(key);
            let bytes = frame.to_bytes_signed(&key);
            prop_assert_eq!(Frame::decode_verified(&bytes, &key), Ok(frame));
        }

        #[test]
        fn another_key_is_refused(frame in any_frame(), a in any_key(), b in any_key()) {
            prop_assume!(a != b);
            let bytes = frame.to_bytes_signed(&NetworkKey::from_bytes(a));
            prop_assert_eq!(
                Frame::decode_verified(&bytes, &NetworkKey::from_bytes(b)),
                Err(DecodeError::BadTag)
            );
        }

        #[test]
        fn a_forger_who_fixes_the_crc_is_still_refused(
            frame in any_frame(),
            key in any_key(),
            bit in 0..16 * 8usize,
        ) {
            // Change one header bit (not the version) and recompute the public CRC, as an
            // attacker without the key can: the tag no longer matches.
            let key = NetworkKey::from_bytes(key);
            let mut bytes = frame.to_bytes_signed(&key);
            let bit = bit.max(8);
            bytes[bit / 8] ^= 1 << (bit % 8);
            let crc = crc32c_bitwise(&bytes[..24]).to_le_bytes();
            bytes[24..].copy_from_slice(&crc);
            prop_assert_eq!(Frame::decode(&bytes).is_ok(), true);
            prop_assert_eq!(Frame::decode_verified(&bytes, &key), Err(DecodeError::BadTag));
        }
    }
}
