//! The beacon frame: what one node tells its neighbours about its phase.
//!
//! A beacon is a fixed-size, little-endian, CRC-checked binary frame that carries the
//! sender's id, a sequence number, its phase at the instant the frame leaves, its current
//! rate trim and a few flags; version 2 adds the sender's timer at that instant and one
//! echo, so that receivers measure each link's delay by two-way exchange. With feature `mac` the frame also carries a SipHash-2-4 tag
//! under a pre-shared network key, so a transmitter without the key cannot move anyone's
//! phase. [`BeaconPort`] joins the frame to a [`Node`](crate::Node): its receive path
//! turns checked frame bytes into observations, its send path fills frames from the
//! node's phase, and it counts what it refuses, by [`RejectKind`].
//!
//! # Layout (version 1, [`FRAME_LEN`] = 28 bytes)
//!
//! | offset | size | field        | encoding                                                        |
//! |-------:|-----:|--------------|-----------------------------------------------------------------|
//! | 0      | 1    | `version`    | `u8`, [`VERSION`] = 1                                           |
//! | 1      | 1    | `flags`      | `u8` bit set, see [`Flags`]; bits not defined in v1 are carried |
//! | 2      | 2    | `from`       | `u16` LE, sender's node id                                      |
//! | 4      | 4    | `seq`        | `u32` LE, sender's sequence number, wraps                       |
//! | 8      | 4    | `phase`      | `u32` LE, binary angle at the send instant, 2^32 counts = 1 turn |
//! | 12     | 4    | `trim_ppb`   | `i32` LE two's complement, sender's rate trim in parts per billion |
//! | 16     | 8    | `tag`        | SipHash-2-4 of bytes 0..16 under the network key, `u64` LE; all zero when unauthenticated |
//! | 24     | 4    | `check`      | CRC-32C (Castagnoli, `CRC-32/ISCSI`) of bytes 0..24, `u32` LE   |
//!
//! Bytes 0..16 are the *header*; the tag authenticates exactly the header, and the CRC
//! covers the header and the tag. The tag field is always present, so an authenticated and
//! an unauthenticated network speak the same frame size.
//!
//! # Layout (version 2, [`FRAME_V2_LEN`] = 42 bytes)
//!
//! Bytes 1..16 are those of version 1; the two-way timing follows, then tag and check.
//!
//! | offset | size | field        | encoding                                                        |
//! |-------:|-----:|--------------|-----------------------------------------------------------------|
//! | 0      | 1    | `version`    | `u8`, [`VERSION_2`] = 2                                         |
//! | 1      | 15   | `flags` … `trim_ppb` | as version 1, bytes 1..16                               |
//! | 16     | 4    | `tx_ticks`   | `u32` LE, sender's own timer at the send instant (the instant `phase` is for) |
//! | 20     | 2    | `echo_to`    | `u16` LE, the neighbour this frame echoes                       |
//! | 22     | 4    | `echo_tx`    | `u32` LE, that neighbour's `tx_ticks` of the last beacon heard from it |
//! | 26     | 4    | `echo_held`  | `u32` LE, sender's ticks from that beacon's reception to this send; 2^31 or more: no echo |
//! | 30     | 8    | `tag`        | SipHash-2-4 of bytes 0..30 under the network key, `u64` LE; all zero when unauthenticated |
//! | 38     | 4    | `check`      | CRC-32C (as version 1) of bytes 0..38, `u32` LE                 |
//!
//! Bytes 0..30 are the version-2 header ([`HEADER_V2_LEN`]). A frame that echoes nobody
//! carries [`FrameEcho::NONE`]: all ten echo bytes `0xFF` (a held time of 2^31 ticks or
//! more is never an echo, whatever the other bytes say). One echo per frame keeps the
//! frame a fixed size whatever the node's degree: a sender echoes its neighbours in turn
//! (see [`BeaconPort`], "Send path"), so with `k` neighbours each link is measured every
//! `k` beacons, and the node smooths the samples
//! ([`Config::delay_smoothing`](crate::Config::delay_smoothing)).
//!
//! The receiver `X` of an echo for itself knows the round trip: its own timer at the
//! reception less its `tx_ticks` echoed, less the ticks the echoing neighbour held the
//! beacon (converted to `X`'s ticks through both trims), and takes half of it as the
//! one-way delay — two-way time transfer as the open network-time standards measure
//! path delay (Mills, RFC 5905 §8; see [`Timing`](crate::Timing) and
//! [`Node::observe_timed`](crate::Node::observe_timed)). When the two directions of a
//! link differ in delay by `a`, the node sees its neighbour off by `a/2`: the method's
//! own residual, which no exchange of timestamps can remove.
//!
//! # Integrity check
//!
//! CRC-32C: polynomial 0x1EDC6F41 (reflected 0x82F63B78), initial value and final XOR
//! 0xFFFFFFFF, input and output reflected; catalogue check value on ASCII `"123456789"` is
//! 0xE3069283 (published CRC catalogue, `CRC-32/ISCSI`; tested beside the codec and in
//! `tests/beacon_frame.rs`). Over a 24-byte payload it detects every error of up to 5
//! flipped bits and every burst up to 32 bits (Koopman's tables of CRC Hamming distance,
//! value from memory). The CRC is for noise, not for attackers: anyone can compute it.
//!
//! # Versions
//!
//! A decoder reads byte 0 first, and the version byte selects the length: 28 bytes for
//! version 1, 42 for version 2 ([`FrameVersion::len_of`]). [`Beacon::decode`] (what
//! [`BeaconPort`] uses) reads both; a version-1 frame reads exactly as [`Frame::decode`],
//! the version-1 decoder, reads it. A frame of any other version is rejected with
//! [`DecodeError::UnsupportedVersion`] (carrying the version it found) before its length
//! or check are judged, because a newer version may have a different size and layout. An
//! older decoder therefore never misreads a newer frame; it counts and drops it — which is
//! why a version-1 node cannot hear a version-2 sender, and a network that still has
//! version-1 nodes keeps their neighbours sending version 1
//! ([`BeaconPort::set_send_version`]).
//!
//! A version-2 node next to a version-1 neighbour falls back on that link: a version-1
//! frame carries no timing, the node gives it to [`Node::observe_timed`](crate::Node::observe_timed)
//! without any, and the link's delay is the `delay_ticks` the receive path is told (the
//! configured latency; plus what the node measured on that link earlier, if it ever ran
//! version 2), exactly as with version 1 everywhere. The node's echo turn passes over a
//! neighbour heard only in version 1.
//!
//! Flag bits that version 1 does not define are carried through unchanged and have no
//! effect, so advisory flags can be added without a version change; anything that
//! changes the meaning or position of a field takes a new version number.
//!
//! # Replay protection
//!
//! Each receiver keeps one [`SeqWindow`] per sender: the newest sequence number accepted
//! and a bitmap of the [`WINDOW_LEN`] numbers before it. Sequence numbers are compared with
//! serial-number (wrapping) arithmetic, so a sender's counter passing `u32::MAX` is just
//! the next frame. The price of a 32-bit sequence is a replay horizon: once a sender has
//! sent 2^31 further frames, a recording of one of its old frames reads as new again
//! (at one beacon per 100 ms that takes 6.8 years, at 1 kHz 24.8 days). Change the
//! network key well within that time.
//!
//! A window cannot tell a rebooted sender from a replay, so a sender that uses
//! authentication must not restart its sequence at the same value after a reset: start
//! it from a boot counter kept in non-volatile memory (for example `boot_count << 16`), or
//! have receivers call [`BeaconPort::forget`] for it.
//!
//! The windows live in RAM, so a *receiver* that reboots starts with empty ones and would
//! take a recording of every frame it accepted before (each reads as the first from its
//! sender). A receiver that must refuse those keeps its windows in non-volatile memory:
//! it saves [`BeaconPort::saved_windows`] every so often (six bytes per sender,
//! [`SavedWindow`]) and after a reboot gives them back to
//! [`BeaconPort::restore_window`] with a margin that covers the frames accepted since the
//! last save. The frame format is untouched (version-1 senders need no change); the
//! cost is one flash write per save interval and, after a short reboot, up to one save
//! interval of refused genuine frames per sender. (Tested in `tests/beacon_port.rs`.)
//!
//! # Authentication (feature `mac`)
//!
//! The tag is SipHash-2-4 with a 128-bit key over the header bytes (16 in version 1, 30
//! in version 2, the timing and echo included), sent in full
//! (64 bits). A transmitter without the key succeeds with one forged frame with
//! probability 2^-64; at 10 000 forged frames per second it expects to need about 58
//! million years for one success. Replayed genuine frames carry a valid tag and are caught
//! by the sequence window instead. The key is shared by the whole network, so it stops
//! outsiders, not a node that holds it: see the fault bound on [`BeaconPort`].
//!
//! # Example
//!
//! ```
//! use entrain::beacon::{Flags, Frame, FRAME_LEN};
//!
//! let frame = Frame {
//!     from: 7,
//!     seq: 41,
//!     phase_counts: 0x4000_0000, // a quarter turn
//!     trim_ppb: -2_500,
//!     flags: Flags::PINNED,
//! };
//! let mut wire = [0u8; FRAME_LEN];
//! frame.encode(&mut wire).unwrap();
//! assert_eq!(Frame::decode(&wire), Ok(frame));
//!
//! wire[9] ^= 0x10; // one bit flipped on the way
//! assert!(Frame::decode(&wire).is_err());
//! ```

mod flags;
mod frame;
mod frame_v2;
#[cfg(feature = "mac")]
mod mac;
mod peers;
mod port;
mod reject;
mod window;
mod wire;

pub use flags::Flags;
pub use frame::{DecodeError, EncodeError, FRAME_LEN, Frame, HEADER_LEN, TAG_LEN, VERSION};
pub use frame_v2::{FRAME_V2_LEN, FrameEcho, FrameV2, HEADER_V2_LEN, MAX_FRAME_LEN, VERSION_2};
#[cfg(feature = "mac")]
pub use mac::NetworkKey;
pub use port::{BeaconPort, Received, SavedWindow};
pub use reject::{RejectCounts, RejectKind};
pub use window::{Accepted, SeqWindow, WINDOW_LEN, WindowReject};
pub use wire::{Beacon, FrameVersion};
