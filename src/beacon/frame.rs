//! The version-1 frame codec: fields to bytes and back, with the CRC-32C check; the
//! checked split of a frame of either version into header and tag.

use core::fmt;

use super::Flags;
#[cfg(feature = "mac")]
use super::NetworkKey;
use super::frame_v2::{FRAME_V2_LEN, VERSION_2};
use crate::{NodeId, Phase};

/// The version byte of a version-1 frame, the only version [`Frame::decode`] reads
/// ([`Beacon::decode`](super::Beacon::decode) reads version 1 and
/// [`VERSION_2`](super::VERSION_2)).
pub const VERSION: u8 = 1;
/// Bytes in a version-1 frame.
pub const FRAME_LEN: usize = 28;
/// Bytes 0..`HEADER_LEN` are the header (version to trim), the part the tag authenticates.
pub const HEADER_LEN: usize = 16;
/// Bytes in the authentication tag (bytes 16..24; all zero when unauthenticated).
pub const TAG_LEN: usize = 8;
/// Bytes of the CRC-32C check field, last in a frame of either version.
pub(crate) const CHECK_LEN: usize = 4;

/// CRC-32C (`CRC-32/ISCSI` in the published CRC catalogue): poly 0x1EDC6F41, reflected,
/// init and xorout 0xFFFFFFFF. Byte-wise table of 256 words (1 KiB of flash).
static CRC32C: crc::Crc<u32> = crc::Crc::<u32>::new(&crc::CRC_32_ISCSI);

/// The CRC-32C of `bytes`, as the frame's check field uses it.
pub(crate) fn crc32c(bytes: &[u8]) -> u32 {
    CRC32C.checksum(bytes)
}

/// One beacon: what a node says about itself at the instant the frame leaves.
///
/// The fields are the wire fields of the layout table in the [module docs](super); the
/// version, tag and check are added by [`Frame::encode`] and removed by [`Frame::decode`].
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Frame {
    /// The sender's node id.
    pub from: NodeId,
    /// The sender's sequence number; increases by one per frame sent and wraps.
    pub seq: u32,
    /// The sender's phase at the send instant, binary angle (2^32 counts = one turn).
    pub phase_counts: u32,
    /// The sender's current rate trim, parts per billion (positive: running faster).
    pub trim_ppb: i32,
    /// Advisory flags about the sender.
    pub flags: Flags,
}

/// Why bytes are not a valid frame (of version 1, or with [`Beacon`](super::Beacon) of
/// either version).
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DecodeError {
    /// Fewer bytes than a frame of the version byte's version ([`FRAME_LEN`],
    /// [`FRAME_V2_LEN`](super::FRAME_V2_LEN)), or none at all (a cut-off frame; `len`
    /// is what arrived).
    TooShort {
        /// Bytes received.
        len: usize,
    },
    /// More bytes than a frame of the version byte's version.
    TooLong {
        /// Bytes received.
        len: usize,
    },
    /// Byte 0 names a version this decoder does not read ([`Frame::decode`] reads only
    /// [`VERSION`]; [`Beacon::decode`](super::Beacon::decode) reads it and
    /// [`VERSION_2`](super::VERSION_2)).
    UnsupportedVersion {
        /// The version byte found.
        found: u8,
    },
    /// The CRC-32C over all bytes but the last four does not match them: the frame was
    /// damaged.
    BadCheck,
    /// The check matched but the authentication tag did not: the frame was not made with
    /// this network key (produced only by the `mac` feature's verified decode).
    BadTag,
}

impl fmt::Display for DecodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            DecodeError::TooShort { len } => write!(
                f,
                "beacon frame too short: {len} bytes, a version-{VERSION} frame is exactly {FRAME_LEN} and a version-{VERSION_2} frame {FRAME_V2_LEN}"
            ),
            DecodeError::TooLong { len } => write!(
                f,
                "beacon frame too long: {len} bytes, a version-{VERSION} frame is exactly {FRAME_LEN} and a version-{VERSION_2} frame {FRAME_V2_LEN}"
            ),
            DecodeError::UnsupportedVersion { found } => write!(
                f,
                "beacon frame version {found} is not supported: frames of version {VERSION} and {VERSION_2} are read (the version-1 decoder `Frame::decode` reads version {VERSION} only)"
            ),
            DecodeError::BadCheck => {
                f.write_str("beacon frame CRC-32C check failed: the frame was damaged")
            }
            DecodeError::BadTag => f.write_str(
                "beacon frame authentication tag does not match the network key: forged or from another network",
            ),
        }
    }
}

impl core::error::Error for DecodeError {}

/// Why a frame could not be written.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EncodeError {
    /// The output buffer holds fewer bytes than the frame ([`FRAME_LEN`] for version 1,
    /// [`FRAME_V2_LEN`](super::FRAME_V2_LEN) for version 2).
    BufferTooSmall {
        /// Bytes the buffer holds.
        len: usize,
    },
}

impl fmt::Display for EncodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            EncodeError::BufferTooSmall { len } => write!(
                f,
                "beacon output buffer too small: {len} bytes, a version-{VERSION} frame needs {FRAME_LEN} and a version-{VERSION_2} frame {FRAME_V2_LEN}"
            ),
        }
    }
}

impl core::error::Error for EncodeError {}

impl Frame {
    /// The sender's phase at the send instant, as a [`Phase`].
    pub const fn phase(&self) -> Phase {
        Phase::from_counts(self.phase_counts)
    }

    /// The 16 header bytes (offsets 0..16 of the layout), version byte included.
    pub const fn header(&self) -> [u8; HEADER_LEN] {
        let [f0, f1] = self.from.to_le_bytes();
        let [s0, s1, s2, s3] = self.seq.to_le_bytes();
        let [p0, p1, p2, p3] = self.phase_counts.to_le_bytes();
        let [t0, t1, t2, t3] = self.trim_ppb.to_le_bytes();
        [
            VERSION,
            self.flags.bits(),
            f0,
            f1,
            s0,
            s1,
            s2,
            s3,
            p0,
            p1,
            p2,
            p3,
            t0,
            t1,
            t2,
            t3,
        ]
    }

    /// The fields of a header; the version byte is not looked at.
    pub(crate) const fn from_header(header: &[u8; HEADER_LEN]) -> Frame {
        let [
            _,
            flags,
            f0,
            f1,
            s0,
            s1,
            s2,
            s3,
            p0,
            p1,
            p2,
            p3,
            t0,
            t1,
            t2,
            t3,
        ] = *header;
        Frame {
            from: u16::from_le_bytes([f0, f1]),
            seq: u32::from_le_bytes([s0, s1, s2, s3]),
            phase_counts: u32::from_le_bytes([p0, p1, p2, p3]),
            trim_ppb: i32::from_le_bytes([t0, t1, t2, t3]),
            flags: Flags::from_bits(flags),
        }
    }

    /// The whole frame with the given tag bytes and a fresh check.
    fn assemble(&self, tag: [u8; TAG_LEN]) -> [u8; FRAME_LEN] {
        assemble(&self.header(), tag)
    }

    /// The unauthenticated frame (tag all zero) as bytes.
    pub fn to_bytes(&self) -> [u8; FRAME_LEN] {
        self.assemble([0; TAG_LEN])
    }

    /// Writes the unauthenticated frame (tag all zero) into the first [`FRAME_LEN`] bytes
    /// of `out` and returns [`FRAME_LEN`]; bytes after that are left alone.
    pub fn encode(&self, out: &mut [u8]) -> Result<usize, EncodeError> {
        write_into(out, &self.to_bytes())
    }

    /// Reads a frame, checking version, length and CRC, in that order.
    ///
    /// `bytes` must be exactly one frame. The tag field is not verified (use
    /// `decode_verified` with feature `mac`), so this is what a receiver without the key,
    /// or a bus monitor, uses.
    pub fn decode(bytes: &[u8]) -> Result<Frame, DecodeError> {
        let (header, _tag) = checked_parts::<FRAME_LEN, HEADER_LEN>(bytes, VERSION)?;
        Ok(Frame::from_header(header))
    }

    /// The frame authenticated under `key` as bytes.
    #[cfg(feature = "mac")]
    pub fn to_bytes_signed(&self, key: &NetworkKey) -> [u8; FRAME_LEN] {
        self.assemble(key.tag(&self.header()))
    }

    /// Writes the frame authenticated under `key` into the first [`FRAME_LEN`] bytes of
    /// `out` and returns [`FRAME_LEN`]; bytes after that are left alone.
    #[cfg(feature = "mac")]
    pub fn encode_signed(&self, key: &NetworkKey, out: &mut [u8]) -> Result<usize, EncodeError> {
        write_into(out, &self.to_bytes_signed(key))
    }

    /// Reads a frame as [`Frame::decode`] does, then verifies its tag under `key`
    /// (in time independent of where the tags differ); a mismatch is
    /// [`DecodeError::BadTag`].
    #[cfg(feature = "mac")]
    pub fn decode_verified(bytes: &[u8], key: &NetworkKey) -> Result<Frame, DecodeError> {
        let (header, tag) = checked_parts::<FRAME_LEN, HEADER_LEN>(bytes, VERSION)?;
        if key.verify(header, tag) {
            Ok(Frame::from_header(header))
        } else {
            Err(DecodeError::BadTag)
        }
    }
}

/// A frame of `LEN` bytes: `header`, `tag` and the CRC-32C of both.
pub(crate) fn assemble<const HDR: usize, const LEN: usize>(
    header: &[u8; HDR],
    tag: [u8; TAG_LEN],
) -> [u8; LEN] {
    let mut out = [0u8; LEN];
    // The splits below cannot fail for the layouts of this module (LEN = HDR + TAG_LEN
    // + CHECK_LEN, checked by tests); they leave the frame unwritten rather than panic.
    if let Some((checked, check)) = out.split_last_chunk_mut::<CHECK_LEN>() {
        if let Some((head, tag_field)) = checked.split_first_chunk_mut::<HDR>() {
            head.copy_from_slice(header);
            if let Some(t) = tag_field.get_mut(..TAG_LEN) {
                t.copy_from_slice(&tag);
            }
        }
        *check = crc32c(checked).to_le_bytes();
    }
    out
}

pub(crate) fn write_into<const LEN: usize>(
    out: &mut [u8],
    frame: &[u8; LEN],
) -> Result<usize, EncodeError> {
    let len = out.len();
    let dst = out
        .get_mut(..LEN)
        .ok_or(EncodeError::BufferTooSmall { len })?;
    dst.copy_from_slice(frame);
    Ok(LEN)
}

/// Header and tag of a frame of `LEN` bytes with an `HDR`-byte header whose version byte
/// is `version` and whose length and check are good; the version is judged first.
pub(crate) fn checked_parts<const LEN: usize, const HDR: usize>(
    bytes: &[u8],
    version: u8,
) -> Result<(&[u8; HDR], &[u8; TAG_LEN]), DecodeError> {
    let len = bytes.len();
    let Some(&found) = bytes.first() else {
        return Err(DecodeError::TooShort { len });
    };
    if found != version {
        return Err(DecodeError::UnsupportedVersion { found });
    }
    let frame: &[u8; LEN] = match bytes.try_into() {
        Ok(frame) => frame,
        Err(_) if len < LEN => return Err(DecodeError::TooShort { len }),
        Err(_) => return Err(DecodeError::TooLong { len }),
    };
    // The chunk splits below cannot fail on a LEN array; they return errors rather than
    // panic so that no path in the decoder can panic.
    let (checked, check) = frame
        .split_last_chunk::<CHECK_LEN>()
        .ok_or(DecodeError::TooShort { len })?;
    if crc32c(checked) != u32::from_le_bytes(*check) {
        return Err(DecodeError::BadCheck);
    }
    let (header, tag) = checked
        .split_first_chunk::<HDR>()
        .ok_or(DecodeError::TooShort { len })?;
    let tag: &[u8; TAG_LEN] = tag.try_into().map_err(|_| DecodeError::TooShort { len })?;
    Ok((header, tag))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crc32c_catalogue_check_value() {
        // CRC-32/ISCSI check value on ASCII "123456789": 0xE3069283 (published CRC
        // catalogue; value from memory, confirmed by an independent bitwise reference in
        // tests/beacon_frame.rs).
        assert_eq!(crc32c(b"123456789"), 0xE306_9283);
    }

    #[test]
    fn layout_constants_agree_with_the_table() {
        assert_eq!(HEADER_LEN + TAG_LEN + CHECK_LEN, FRAME_LEN);
        assert_eq!(FRAME_LEN, 28);
    }

    #[test]
    fn version_is_judged_before_length() {
        assert_eq!(
            Frame::decode(&[2, 0, 0]),
            Err(DecodeError::UnsupportedVersion { found: 2 })
        );
        assert_eq!(
            Frame::decode(&[0u8; 40]),
            Err(DecodeError::UnsupportedVersion { found: 0 })
        );
        assert_eq!(Frame::decode(&[]), Err(DecodeError::TooShort { len: 0 }));
        assert_eq!(
            Frame::decode(&[1; 5]),
            Err(DecodeError::TooShort { len: 5 })
        );
    }

    #[test]
    fn longer_input_is_rejected_not_truncated() {
        let mut long = [0u8; FRAME_LEN + 1];
        let frame = Frame {
            from: 3,
            ..Frame::default()
        };
        frame.encode(&mut long).unwrap();
        assert_eq!(
            Frame::decode(&long),
            Err(DecodeError::TooLong { len: FRAME_LEN + 1 })
        );
        assert_eq!(Frame::decode(&long[..FRAME_LEN]), Ok(frame));
    }

    #[test]
    fn encode_into_a_small_buffer_fails_and_writes_nothing() {
        let mut small = [0xAAu8; FRAME_LEN - 1];
        assert_eq!(
            Frame::default().encode(&mut small),
            Err(EncodeError::BufferTooSmall { len: FRAME_LEN - 1 })
        );
        assert!(small.iter().all(|&b| b == 0xAA));
    }

    #[test]
    fn errors_name_what_is_wrong_and_the_valid_size() {
        extern crate std;
        use std::string::ToString;
        let msg = DecodeError::TooShort { len: 9 }.to_string();
        assert!(msg.contains("9 bytes") && msg.contains("28"), "{msg}");
        let msg = DecodeError::UnsupportedVersion { found: 4 }.to_string();
        assert!(
            msg.contains("version 4") && msg.contains("version 1 and 2"),
            "{msg}"
        );
        let msg = DecodeError::TooLong { len: 50 }.to_string();
        assert!(msg.contains("50 bytes") && msg.contains("42"), "{msg}");
        let msg = EncodeError::BufferTooSmall { len: 3 }.to_string();
        assert!(msg.contains("3 bytes") && msg.contains("28"), "{msg}");
    }
}
