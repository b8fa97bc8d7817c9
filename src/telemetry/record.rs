//! The record and its binary form.

use crate::{MAX_NEIGHBOURS, Node, NodeId, UpdateReport};
use core::fmt;

/// First byte of every binary record.
pub const TAG: u8 = 0xE7;
/// Version of the record layout this crate writes and reads.
pub const VERSION: u8 = 1;
/// Bytes before the neighbour list.
const HEAD_LEN: usize = 18;
/// Bytes per neighbour.
const NEIGHBOUR_LEN: usize = 10;
/// Bytes of the check value.
const CHECK_LEN: usize = 4;
/// Flag bit: the step was slew-limited.
const FLAG_SLEW_LIMITED: u8 = 1;

/// Length of a binary record with `n` neighbours: `22 + 10·n` bytes.
#[must_use]
pub const fn record_len(n: usize) -> usize {
    HEAD_LEN + NEIGHBOUR_LEN * n + CHECK_LEN
}

/// Longest binary record: 255 neighbours, 2,572 bytes.
pub const MAX_RECORD_LEN: usize = record_len(MAX_NEIGHBOURS);

static CRC32C: crc::Crc<u32> = crc::Crc::<u32>::new(&crc::CRC_32_ISCSI);

/// What one node did at one update, without its neighbour list.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Head {
    /// The node's id.
    pub node: NodeId,
    /// The node's update count since power-up (wraps at 2³²; the firmware keeps it).
    pub update: u32,
    /// The phase step applied, counts of 2⁻³² turn ([`UpdateReport::correction`]).
    pub correction: i32,
    /// The rate trim after the update, ppb ([`Node::trim_ppb`]).
    pub trim_ppb: i32,
    /// The slew limit cut the step.
    pub slew_limited: bool,
}

impl Head {
    /// The head of the record of `node`'s update `update` that returned `report`; call
    /// right after [`Node::update`].
    #[must_use]
    pub fn after_update<const N: usize>(
        id: NodeId,
        update: u32,
        report: &UpdateReport,
        node: &Node<N>,
    ) -> Head {
        Head {
            node: id,
            update,
            correction: report.correction,
            trim_ppb: node.trim_ppb(),
            slew_limited: report.slew_limited,
        }
    }

    fn flags(&self) -> u8 {
        if self.slew_limited {
            FLAG_SLEW_LIMITED
        } else {
            0
        }
    }
}

/// One neighbour as a node saw it at an update.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Neighbour {
    /// The neighbour's id.
    pub id: NodeId,
    /// Its phase minus this node's at the update, before the step, counts of 2⁻³² turn
    /// (wrapped), as the law used it.
    pub diff: i32,
    /// Age of the observation behind it at the update, this node's timer ticks (negative
    /// for a reception stamp later than the node's clock).
    pub age_ticks: i32,
}

/// The neighbours of `node` as the record holds them, read right after an update that
/// applied `correction`: the table's difference after the step plus the step gives the
/// difference the law used.
pub(super) fn neighbours_of<const N: usize>(
    node: &Node<N>,
    correction: i32,
) -> impl Iterator<Item = Neighbour> + Clone + '_ {
    let now = node.now_ticks();
    node.links().map(move |link| Neighbour {
        id: link.id,
        diff: link.diff.wrapping_add(correction),
        age_ticks: now.wrapping_sub(link.heard_ticks) as i32,
    })
}

/// A whole record: the head and up to [`MAX_NEIGHBOURS`] neighbours, held without a heap
/// (about 3 KB; a node encodes from its own state instead, with [`encode`]).
#[derive(Clone, PartialEq, Eq, Debug, Default)]
pub struct Record {
    /// The node's figures.
    pub head: Head,
    /// Its neighbour table, in table order.
    pub neighbours: heapless::Vec<Neighbour, MAX_NEIGHBOURS>,
}

/// Why a record could not be encoded.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EncodeError {
    /// The buffer holds fewer bytes than the record needs.
    BufferTooSmall {
        /// Bytes the record needs.
        needed: usize,
    },
    /// More than [`MAX_NEIGHBOURS`] neighbours were handed over.
    TooManyNeighbours,
}

impl fmt::Display for EncodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            EncodeError::BufferTooSmall { needed } => {
                write!(
                    f,
                    "telemetry buffer too small: the record needs {needed} bytes"
                )
            }
            EncodeError::TooManyNeighbours => {
                write!(
                    f,
                    "a telemetry record holds at most {MAX_NEIGHBOURS} neighbours"
                )
            }
        }
    }
}

impl core::error::Error for EncodeError {}

/// Why bytes were refused as a record.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DecodeError {
    /// Fewer bytes than the record needs.
    Truncated {
        /// Bytes needed (as far as the bytes seen tell).
        needed: usize,
    },
    /// The first byte is not [`TAG`].
    NotARecord,
    /// A version this reader does not know.
    Version(u8),
    /// Flag bits this version does not define.
    Flags(u8),
    /// The check value does not match.
    Check,
}

impl fmt::Display for DecodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DecodeError::Truncated { needed } => {
                write!(f, "telemetry record truncated: {needed} bytes needed")
            }
            DecodeError::NotARecord => write!(f, "not a telemetry record (tag byte)"),
            DecodeError::Version(v) => write!(
                f,
                "telemetry record version {v}, this reader knows version {VERSION}"
            ),
            DecodeError::Flags(b) => write!(f, "telemetry record flags {b:#04x} undefined"),
            DecodeError::Check => write!(f, "telemetry record check value (CRC-32C) wrong"),
        }
    }
}

impl core::error::Error for DecodeError {}

/// Copy `bytes` into `buf` at `at`; false if they do not fit (no panic path).
fn put(buf: &mut [u8], at: usize, bytes: &[u8]) -> bool {
    match buf.get_mut(at..at.saturating_add(bytes.len())) {
        Some(dst) => {
            for (d, s) in dst.iter_mut().zip(bytes) {
                *d = *s;
            }
            true
        }
        None => false,
    }
}

/// The head's bytes (offsets 0 to 17) for `n` neighbours.
fn head_bytes(head: &Head, n: u8) -> [u8; HEAD_LEN] {
    let mut b = [0u8; HEAD_LEN];
    let parts: [&[u8]; 7] = [
        &[TAG, VERSION],
        &head.node.to_le_bytes(),
        &head.update.to_le_bytes(),
        &head.correction.to_le_bytes(),
        &head.trim_ppb.to_le_bytes(),
        &[head.flags()],
        &[n],
    ];
    let mut at = 0;
    for p in parts {
        put(&mut b, at, p);
        at += p.len();
    }
    b
}

fn neighbour_bytes(nb: &Neighbour) -> [u8; NEIGHBOUR_LEN] {
    let mut b = [0u8; NEIGHBOUR_LEN];
    put(&mut b, 0, &nb.id.to_le_bytes());
    put(&mut b, 2, &nb.diff.to_le_bytes());
    put(&mut b, 6, &nb.age_ticks.to_le_bytes());
    b
}

/// The CRC-32C of the record's bytes before the check value, computed without a buffer.
pub(super) fn check_value<I: Iterator<Item = Neighbour>>(head: &Head, n: u8, neighbours: I) -> u32 {
    let mut digest = CRC32C.digest();
    digest.update(&head_bytes(head, n));
    for nb in neighbours {
        digest.update(&neighbour_bytes(&nb));
    }
    digest.finalize()
}

/// Encode `head` and `neighbours` into the start of `buf`; returns the record's length.
///
/// # Errors
/// [`EncodeError::TooManyNeighbours`] for more than [`MAX_NEIGHBOURS`];
/// [`EncodeError::BufferTooSmall`] when `buf` is shorter than the record. Either way
/// the bytes of `buf` are unspecified.
pub fn encode_parts<I>(buf: &mut [u8], head: &Head, neighbours: I) -> Result<usize, EncodeError>
where
    I: IntoIterator<Item = Neighbour>,
{
    let mut n = 0usize;
    let mut fits = true;
    for nb in neighbours {
        if n >= MAX_NEIGHBOURS {
            return Err(EncodeError::TooManyNeighbours);
        }
        fits &= put(buf, HEAD_LEN + NEIGHBOUR_LEN * n, &neighbour_bytes(&nb));
        n += 1;
    }
    let len = record_len(n);
    if !fits || buf.len() < len {
        return Err(EncodeError::BufferTooSmall { needed: len });
    }
    // n ≤ MAX_NEIGHBOURS = 255.
    put(buf, 0, &head_bytes(head, n as u8));
    let body = HEAD_LEN + NEIGHBOUR_LEN * n;
    let crc = CRC32C.checksum(buf.get(..body).unwrap_or(&[]));
    put(buf, body, &crc.to_le_bytes());
    Ok(len)
}

/// Encode the record of `node`'s update number `update` (the firmware's own count),
/// which returned `report`, into the start of `buf`; call right after
/// [`Node::update`]. Returns the record's length, [`record_len`] of the table's size.
///
/// # Errors
/// [`EncodeError::BufferTooSmall`] when `buf` is shorter than the record.
pub fn encode<const N: usize>(
    buf: &mut [u8],
    id: NodeId,
    update: u32,
    report: &UpdateReport,
    node: &Node<N>,
) -> Result<usize, EncodeError> {
    let head = Head::after_update(id, update, report, node);
    encode_parts(buf, &head, neighbours_of(node, report.correction))
}

fn le_u16(b: &[u8], at: usize) -> u16 {
    let mut x = [0u8; 2];
    put(&mut x, 0, b.get(at..at + 2).unwrap_or(&[]));
    u16::from_le_bytes(x)
}

fn le_u32(b: &[u8], at: usize) -> u32 {
    let mut x = [0u8; 4];
    put(&mut x, 0, b.get(at..at + 4).unwrap_or(&[]));
    u32::from_le_bytes(x)
}

/// Decode the record at the start of `bytes`; returns it and its length (the bytes after
/// it may hold the next record).
///
/// # Errors
/// A [`DecodeError`]: too few bytes, a wrong tag, an unknown version or flag bit, or a
/// wrong check value.
pub fn decode(bytes: &[u8]) -> Result<(Record, usize), DecodeError> {
    let byte = |at: usize| bytes.get(at).copied();
    match byte(0) {
        None => return Err(DecodeError::Truncated { needed: HEAD_LEN }),
        Some(TAG) => {}
        Some(_) => return Err(DecodeError::NotARecord),
    }
    match byte(1) {
        None => return Err(DecodeError::Truncated { needed: HEAD_LEN }),
        Some(VERSION) => {}
        Some(v) => return Err(DecodeError::Version(v)),
    }
    let (Some(flags), Some(n)) = (byte(16), byte(17)) else {
        return Err(DecodeError::Truncated { needed: HEAD_LEN });
    };
    if flags & !FLAG_SLEW_LIMITED != 0 {
        return Err(DecodeError::Flags(flags));
    }
    let n = usize::from(n);
    let len = record_len(n);
    let Some(record) = bytes.get(..len) else {
        return Err(DecodeError::Truncated { needed: len });
    };
    let body = len - CHECK_LEN;
    if CRC32C.checksum(record.get(..body).unwrap_or(&[])) != le_u32(record, body) {
        return Err(DecodeError::Check);
    }
    let head = Head {
        node: le_u16(record, 2),
        update: le_u32(record, 4),
        correction: le_u32(record, 8) as i32,
        trim_ppb: le_u32(record, 12) as i32,
        slew_limited: flags & FLAG_SLEW_LIMITED != 0,
    };
    let mut neighbours = heapless::Vec::new();
    for k in 0..n {
        let at = HEAD_LEN + NEIGHBOUR_LEN * k;
        // n ≤ 255 = the capacity, so the push always succeeds.
        let _ = neighbours.push(Neighbour {
            id: le_u16(record, at),
            diff: le_u32(record, at + 2) as i32,
            age_ticks: le_u32(record, at + 6) as i32,
        });
    }
    Ok((Record { head, neighbours }, len))
}

impl Record {
    /// Encode this record into the start of `buf`; returns its length.
    ///
    /// # Errors
    /// [`EncodeError::BufferTooSmall`] when `buf` is shorter than the record.
    pub fn encode(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        encode_parts(buf, &self.head, self.neighbours.iter().copied())
    }

    /// Length of this record's binary form.
    #[must_use]
    pub fn len(&self) -> usize {
        record_len(self.neighbours.len())
    }

    /// Always false: a record has at least its head.
    #[must_use]
    pub fn is_empty(&self) -> bool {
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crc32c_catalogue_check_value() {
        // The CRC catalogue's check value of CRC-32/ISCSI (Castagnoli) for "123456789".
        assert_eq!(CRC32C.checksum(b"123456789"), 0xE306_9283);
    }

    #[test]
    fn layout_is_as_documented() {
        let head = Head {
            node: 0x0102,
            update: 0x0304_0506,
            correction: -2,
            trim_ppb: 7,
            slew_limited: true,
        };
        let nb = Neighbour {
            id: 0x0a0b,
            diff: -1,
            age_ticks: 0x1122_3344,
        };
        let mut buf = [0u8; 32];
        assert_eq!(encode_parts(&mut buf, &head, [nb]), Ok(32));
        let want_body: [u8; 28] = [
            0xE7, 1, 0x02, 0x01, 0x06, 0x05, 0x04, 0x03, 0xfe, 0xff, 0xff, 0xff, 7, 0, 0, 0, 1, 1,
            0x0b, 0x0a, 0xff, 0xff, 0xff, 0xff, 0x44, 0x33, 0x22, 0x11,
        ];
        assert_eq!(&buf[..28], &want_body);
        assert_eq!(&buf[28..], &CRC32C.checksum(&want_body).to_le_bytes());
    }
}
