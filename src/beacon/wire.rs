//! A frame of either version: the decoder that reads the version byte first and the
//! length it selects.

#[cfg(feature = "mac")]
use super::NetworkKey;
use super::frame_v2::{FRAME_V2_LEN, FrameV2, VERSION_2};
use super::{DecodeError, EncodeError, FRAME_LEN, Frame, VERSION};
use crate::{NodeId, Timing};

/// The frame versions a [`BeaconPort`](super::BeaconPort) can send.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FrameVersion {
    /// Version 1: phase only; every receiver reads it (for networks that still hold
    /// version-1 nodes, which refuse version 2).
    V1,
    /// Version 2: phase and two-way timing (the default).
    #[default]
    V2,
}

impl FrameVersion {
    /// The version byte.
    pub const fn byte(self) -> u8 {
        match self {
            FrameVersion::V1 => VERSION,
            FrameVersion::V2 => VERSION_2,
        }
    }

    /// The frame length of the version whose byte is `version`, if this crate reads it:
    /// what a receiver hunting for frames in a byte stream needs.
    pub const fn len_of(version: u8) -> Option<usize> {
        match version {
            VERSION => Some(FRAME_LEN),
            VERSION_2 => Some(FRAME_V2_LEN),
            _ => None,
        }
    }
}

/// A beacon of either version, as [`Beacon::decode`] reads it.
///
/// ```
/// use entrain::beacon::{Beacon, Frame, FrameEcho, FrameV2, MAX_FRAME_LEN};
/// use entrain::Echo;
///
/// let v2 = FrameV2 {
///     base: Frame { from: 7, seq: 41, ..Frame::default() },
///     tx_ticks: 90_000,
///     echo: FrameEcho::new(3, Echo { tx_ticks: 61_000, held_ticks: 20_500 }),
/// };
/// let mut wire = [0u8; MAX_FRAME_LEN];
/// let len = Beacon::V2(v2).encode(&mut wire).unwrap();
/// let got = Beacon::decode(&wire[..len]).unwrap();
/// assert_eq!(got, Beacon::V2(v2));
/// assert_eq!(got.frame().from, 7);
/// // Node 3 gets the echo of its own beacon; node 5 gets the send stamp only.
/// assert!(got.timing_for(3).unwrap().echo.is_some());
/// assert!(got.timing_for(5).unwrap().echo.is_none());
///
/// let v1 = Frame { from: 7, seq: 42, ..Frame::default() };
/// let len = Beacon::V1(v1).encode(&mut wire).unwrap();
/// assert_eq!(Beacon::decode(&wire[..len]), Ok(Beacon::V1(v1)));
/// assert_eq!(Beacon::V1(v1).timing_for(3), None);
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Beacon {
    /// A version-1 frame.
    V1(Frame),
    /// A version-2 frame.
    V2(FrameV2),
}

impl Beacon {
    /// The fields both versions carry.
    pub const fn frame(&self) -> &Frame {
        match self {
            Beacon::V1(f) => f,
            Beacon::V2(f) => &f.base,
        }
    }

    /// Its version.
    pub const fn version(&self) -> FrameVersion {
        match self {
            Beacon::V1(_) => FrameVersion::V1,
            Beacon::V2(_) => FrameVersion::V2,
        }
    }

    /// Its length on the wire, bytes.
    pub const fn wire_len(&self) -> usize {
        match self {
            Beacon::V1(_) => FRAME_LEN,
            Beacon::V2(_) => FRAME_V2_LEN,
        }
    }

    /// The two-way timing it gives node `receiver`: `None` for version 1.
    pub const fn timing_for(&self, receiver: NodeId) -> Option<Timing> {
        match self {
            Beacon::V1(_) => None,
            Beacon::V2(f) => Some(f.timing_for(receiver)),
        }
    }

    /// Reads a frame of either version: byte 0 selects the version and with it the
    /// length; then length and CRC are checked as [`Frame::decode`] and
    /// [`FrameV2::decode`] do. A version-1 frame reads exactly as [`Frame::decode`]
    /// reads it. The tag is not verified.
    pub fn decode(bytes: &[u8]) -> Result<Beacon, DecodeError> {
        match bytes.first() {
            Some(&VERSION_2) => FrameV2::decode(bytes).map(Beacon::V2),
            _ => Frame::decode(bytes).map(Beacon::V1),
        }
    }

    /// Reads a frame of either version and verifies its tag under `key`.
    #[cfg(feature = "mac")]
    pub fn decode_verified(bytes: &[u8], key: &NetworkKey) -> Result<Beacon, DecodeError> {
        match bytes.first() {
            Some(&VERSION_2) => FrameV2::decode_verified(bytes, key).map(Beacon::V2),
            _ => Frame::decode_verified(bytes, key).map(Beacon::V1),
        }
    }

    /// Writes the unauthenticated frame into the start of `out`; returns its length.
    pub fn encode(&self, out: &mut [u8]) -> Result<usize, EncodeError> {
        match self {
            Beacon::V1(f) => f.encode(out),
            Beacon::V2(f) => f.encode(out),
        }
    }

    /// Writes the frame authenticated under `key` into the start of `out`; returns its
    /// length.
    #[cfg(feature = "mac")]
    pub fn encode_signed(&self, key: &NetworkKey, out: &mut [u8]) -> Result<usize, EncodeError> {
        match self {
            Beacon::V1(f) => f.encode_signed(key, out),
            Beacon::V2(f) => f.encode_signed(key, out),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_version_byte_selects_the_length() {
        assert_eq!(FrameVersion::len_of(1), Some(28));
        assert_eq!(FrameVersion::len_of(2), Some(42));
        assert_eq!(FrameVersion::len_of(0), None);
        assert_eq!(FrameVersion::len_of(3), None);
        // A version-1 frame is read only at 28 bytes, a version-2 frame only at 42.
        let v1 = Frame::default().to_bytes();
        let v2 = FrameV2::default().to_bytes();
        assert!(Beacon::decode(&v1).is_ok());
        assert!(Beacon::decode(&v2).is_ok());
        let mut v1_long = [0u8; 42];
        v1_long[..28].copy_from_slice(&v1);
        assert_eq!(
            Beacon::decode(&v1_long),
            Err(DecodeError::TooLong { len: 42 })
        );
        assert_eq!(
            Beacon::decode(&v2[..28]),
            Err(DecodeError::TooShort { len: 28 })
        );
        assert_eq!(
            Beacon::decode(&[3; 42]),
            Err(DecodeError::UnsupportedVersion { found: 3 })
        );
        assert_eq!(Beacon::decode(&[]), Err(DecodeError::TooShort { len: 0 }));
    }
}
