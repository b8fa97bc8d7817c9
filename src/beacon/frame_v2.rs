//! The version-2 frame codec: the version-1 fields plus two-way timing (the sender's send
//! stamp and one echo), with the tag and CRC-32C as in version 1.

#[cfg(feature = "mac")]
use super::NetworkKey;
use super::frame::{CHECK_LEN, assemble, checked_parts, write_into};
use super::{DecodeError, EncodeError, Frame, HEADER_LEN, TAG_LEN};
use crate::{Echo, NodeId, Timing};

/// The version byte of a version-2 frame.
pub const VERSION_2: u8 = 2;
/// Bytes 0..`HEADER_V2_LEN` of a version-2 frame are its header, the part the tag
/// authenticates.
pub const HEADER_V2_LEN: usize = 30;
/// Bytes in a version-2 frame.
pub const FRAME_V2_LEN: usize = HEADER_V2_LEN + TAG_LEN + CHECK_LEN;
/// The longest frame of any version this crate reads: the buffer a receiver needs.
pub const MAX_FRAME_LEN: usize = FRAME_V2_LEN;

/// The echo field of a version-2 frame: for one neighbour `to`, that neighbour's own send
/// stamp of the last beacon heard from it and the ticks held since (bytes 20..30 of the
/// layout in the [module docs](super)).
///
/// A `held_ticks` of 2^31 or more is not an echo (no node holds a beacon that long; the
/// node law refuses such a sample too): [`FrameEcho::NONE`], all ten bytes `0xFF`, is
/// what a sender writes when it echoes nobody. The fields are kept as they arrived, so
/// a decoded frame re-encodes to the same bytes.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FrameEcho {
    /// The neighbour the echo is for.
    pub to: NodeId,
    /// That neighbour's `tx_ticks` of the beacon echoed, its ticks.
    pub tx_ticks: u32,
    /// The sender's ticks from that beacon's reception to this frame's send instant.
    pub held_ticks: u32,
}

impl FrameEcho {
    /// No echo: every byte `0xFF`.
    pub const NONE: FrameEcho = FrameEcho {
        to: u16::MAX,
        tx_ticks: u32::MAX,
        held_ticks: u32::MAX,
    };

    /// The echo of `echo` for neighbour `to` (as [`Node::echo_for`](crate::Node::echo_for)
    /// gives it; an echo held 2^31 ticks or more reads as [`FrameEcho::NONE`] would).
    pub const fn new(to: NodeId, echo: Echo) -> FrameEcho {
        FrameEcho {
            to,
            tx_ticks: echo.tx_ticks,
            held_ticks: echo.held_ticks,
        }
    }

    /// Whether the field is an echo (its held ticks below 2^31).
    pub const fn is_echo(&self) -> bool {
        self.held_ticks <= i32::MAX as u32
    }

    /// The echo for node `id`: `Some` only when the field is an echo and `to` is `id`.
    pub const fn for_node(&self, id: NodeId) -> Option<Echo> {
        if self.is_echo() && self.to == id {
            Some(Echo {
                tx_ticks: self.tx_ticks,
                held_ticks: self.held_ticks,
            })
        } else {
            None
        }
    }
}

impl Default for FrameEcho {
    fn default() -> Self {
        FrameEcho::NONE
    }
}

/// One version-2 beacon: the version-1 fields, the sender's timer at the send instant,
/// and one echo.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FrameV2 {
    /// The fields version 1 carries (bytes 1..16, as in version 1).
    pub base: Frame,
    /// The sender's own timer when the frame leaves, its ticks (the instant `phase_counts`
    /// is for).
    pub tx_ticks: u32,
    /// The echo this frame carries, or [`FrameEcho::NONE`].
    pub echo: FrameEcho,
}

impl FrameV2 {
    /// The two-way timing this frame gives the node `receiver`: the send stamp, the
    /// sender's trim, and the echo if it is for `receiver`.
    pub const fn timing_for(&self, receiver: NodeId) -> Timing {
        Timing {
            tx_ticks: self.tx_ticks,
            trim_ppb: self.base.trim_ppb,
            echo: self.echo.for_node(receiver),
        }
    }

    /// The 30 header bytes (offsets 0..30 of the version-2 layout), version byte included.
    pub const fn header(&self) -> [u8; HEADER_V2_LEN] {
        let [
            _,
            b1,
            b2,
            b3,
            b4,
            b5,
            b6,
            b7,
            b8,
            b9,
            b10,
            b11,
            b12,
            b13,
            b14,
            b15,
        ] = self.base.header();
        let [x0, x1, x2, x3] = self.tx_ticks.to_le_bytes();
        let [o0, o1] = self.echo.to.to_le_bytes();
        let [e0, e1, e2, e3] = self.echo.tx_ticks.to_le_bytes();
        let [h0, h1, h2, h3] = self.echo.held_ticks.to_le_bytes();
        [
            VERSION_2, b1, b2, b3, b4, b5, b6, b7, b8, b9, b10, b11, b12, b13, b14, b15, x0, x1,
            x2, x3, o0, o1, e0, e1, e2, e3, h0, h1, h2, h3,
        ]
    }

    /// The fields of a header; the version byte is not looked at.
    const fn from_header(header: &[u8; HEADER_V2_LEN]) -> FrameV2 {
        let [
            b0,
            b1,
            b2,
            b3,
            b4,
            b5,
            b6,
            b7,
            b8,
            b9,
            b10,
            b11,
            b12,
            b13,
            b14,
            b15,
            x0,
            x1,
            x2,
            x3,
            o0,
            o1,
            e0,
            e1,
            e2,
            e3,
            h0,
            h1,
            h2,
            h3,
        ] = *header;
        let base: [u8; HEADER_LEN] = [
            b0, b1, b2, b3, b4, b5, b6, b7, b8, b9, b10, b11, b12, b13, b14, b15,
        ];
        FrameV2 {
            base: Frame::from_header(&base),
            tx_ticks: u32::from_le_bytes([x0, x1, x2, x3]),
            echo: FrameEcho {
                to: u16::from_le_bytes([o0, o1]),
                tx_ticks: u32::from_le_bytes([e0, e1, e2, e3]),
                held_ticks: u32::from_le_bytes([h0, h1, h2, h3]),
            },
        }
    }

    /// The unauthenticated frame (tag all zero) as bytes.
    pub fn to_bytes(&self) -> [u8; FRAME_V2_LEN] {
        assemble(&self.header(), [0; TAG_LEN])
    }

    /// Writes the unauthenticated frame into the first [`FRAME_V2_LEN`] bytes of `out`
    /// and returns [`FRAME_V2_LEN`]; bytes after that are left alone.
    pub fn encode(&self, out: &mut [u8]) -> Result<usize, EncodeError> {
        write_into(out, &self.to_bytes())
    }

    /// Reads a version-2 frame, checking version, length and CRC, in that order; the tag
    /// is not verified. `bytes` must be exactly one frame.
    pub fn decode(bytes: &[u8]) -> Result<FrameV2, DecodeError> {
        let (header, _tag) = checked_parts::<FRAME_V2_LEN, HEADER_V2_LEN>(bytes, VERSION_2)?;
        Ok(FrameV2::from_header(header))
    }

    /// The frame authenticated under `key` (the tag over the 30 header bytes) as bytes.
    #[cfg(feature = "mac")]
    pub fn to_bytes_signed(&self, key: &NetworkKey) -> [u8; FRAME_V2_LEN] {
        let header = self.header();
        assemble(&header, key.tag(&header))
    }

    /// Writes the frame authenticated under `key` into the first [`FRAME_V2_LEN`] bytes
    /// of `out` and returns [`FRAME_V2_LEN`].
    #[cfg(feature = "mac")]
    pub fn encode_signed(&self, key: &NetworkKey, out: &mut [u8]) -> Result<usize, EncodeError> {
        write_into(out, &self.to_bytes_signed(key))
    }

    /// Reads a frame as [`FrameV2::decode`] does, then verifies its tag under `key`
    /// (in time independent of where the tags differ); a mismatch is
    /// [`DecodeError::BadTag`].
    #[cfg(feature = "mac")]
    pub fn decode_verified(bytes: &[u8], key: &NetworkKey) -> Result<FrameV2, DecodeError> {
        let (header, tag) = checked_parts::<FRAME_V2_LEN, HEADER_V2_LEN>(bytes, VERSION_2)?;
        if key.verify(header, tag) {
            Ok(FrameV2::from_header(header))
        } else {
            Err(DecodeError::BadTag)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::beacon::{FRAME_LEN, Flags};

    #[test]
    fn layout_constants_agree_with_the_table() {
        assert_eq!(HEADER_V2_LEN, HEADER_LEN + 4 + 2 + 4 + 4);
        assert_eq!(FRAME_V2_LEN, 42);
        const { assert!(MAX_FRAME_LEN >= FRAME_LEN) };
    }

    #[test]
    fn no_echo_is_all_ones_and_reads_as_none_for_everyone() {
        let f = FrameV2::default();
        assert_eq!(&f.to_bytes()[20..30], &[0xFF; 10]);
        assert_eq!(f.echo.for_node(u16::MAX), None);
        assert_eq!(f.echo.for_node(0), None);
        // Held ticks of 2^31 or more are never an echo, whatever the target.
        let odd = FrameEcho {
            to: 3,
            tx_ticks: 5,
            held_ticks: 1 << 31,
        };
        assert_eq!(odd.for_node(3), None);
        let echo = Echo {
            tx_ticks: 5,
            held_ticks: i32::MAX as u32,
        };
        assert_eq!(FrameEcho::new(3, echo).for_node(3), Some(echo));
        assert_eq!(FrameEcho::new(3, echo).for_node(4), None);
    }

    #[test]
    fn version_is_judged_first_and_a_version_1_frame_is_not_read_here() {
        let v1 = Frame {
            from: 1,
            flags: Flags::PINNED,
            ..Frame::default()
        }
        .to_bytes();
        assert_eq!(
            FrameV2::decode(&v1),
            Err(DecodeError::UnsupportedVersion { found: 1 })
        );
        assert_eq!(
            FrameV2::decode(&[VERSION_2; 28]),
            Err(DecodeError::TooShort { len: 28 })
        );
        let mut long = [0u8; FRAME_V2_LEN + 1];
        FrameV2::default().encode(&mut long).unwrap();
        assert_eq!(
            FrameV2::decode(&long),
            Err(DecodeError::TooLong {
                len: FRAME_V2_LEN + 1
            })
        );
        assert_eq!(
            FrameV2::decode(&long[..FRAME_V2_LEN]),
            Ok(FrameV2::default())
        );
    }

    #[test]
    fn encode_into_a_version_1_buffer_fails_and_writes_nothing() {
        let mut small = [0xAAu8; FRAME_LEN];
        assert_eq!(
            FrameV2::default().encode(&mut small),
            Err(EncodeError::BufferTooSmall { len: FRAME_LEN })
        );
        assert!(small.iter().all(|&b| b == 0xAA));
    }
}
