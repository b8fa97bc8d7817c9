//! Beacon frames out of a byte stream: a sliding window that resynchronises by itself.
//!
//! The UART carries bare back-to-back beacon frames of either version
//! ([`entrain::beacon::Beacon`]: version byte first, CRC-32C last, 28 bytes for version 1
//! and 42 for version 2). The receiver keeps the last [`MAX_FRAME_LEN`] bytes with the
//! time each arrived. After each byte it looks at the two places a frame could start so
//! that it ends with that byte (28 and 42 bytes back): where the byte there is the
//! version byte of that length and the bytes from there decode, that is a frame, stamped
//! with the arrival of its first byte, and the window empties. Bytes older than the
//! longest frame fall out one at a time, so a receiver that starts mid-frame (or loses a
//! byte) is back in step within one frame.

use entrain::beacon::{Beacon, FrameVersion, MAX_FRAME_LEN, VERSION, VERSION_2};

/// A frame found in the stream: its bytes (the first `len` of `bytes`) and the arrival
/// of its first byte.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Found {
    /// The frame's bytes, in the first `len`.
    pub bytes: [u8; MAX_FRAME_LEN],
    /// Its length: 28 (version 1) or 42 (version 2).
    pub len: usize,
    /// Arrival of its first byte, the receiver's ticks.
    pub rx_ticks: u32,
}

impl Found {
    /// The frame's bytes.
    pub fn frame(&self) -> &[u8] {
        self.bytes.get(..self.len).unwrap_or(&[])
    }
}

/// The receive side of one link.
#[derive(Debug)]
pub struct FrameReceiver {
    bytes: [u8; MAX_FRAME_LEN],
    stamps: [u32; MAX_FRAME_LEN],
    len: usize,
    /// Bytes dropped while hunting for a frame boundary.
    skipped: u32,
}

impl Default for FrameReceiver {
    fn default() -> Self {
        Self::new()
    }
}

impl FrameReceiver {
    /// Empty.
    pub const fn new() -> Self {
        FrameReceiver {
            bytes: [0; MAX_FRAME_LEN],
            stamps: [0; MAX_FRAME_LEN],
            len: 0,
            skipped: 0,
        }
    }

    /// Bytes dropped so far while hunting for a frame boundary.
    pub const fn skipped(&self) -> u32 {
        self.skipped
    }

    /// Take one byte that arrived at `now_ticks`; a whole frame comes back with the
    /// arrival time of its first byte.
    pub fn push(&mut self, byte: u8, now_ticks: u32) -> Option<Found> {
        if self.len == MAX_FRAME_LEN {
            // Full but not a frame: drop the oldest byte.
            self.bytes.copy_within(1.., 0);
            self.stamps.copy_within(1.., 0);
            self.len = MAX_FRAME_LEN - 1;
            self.skipped = self.skipped.wrapping_add(1);
        }
        if let (Some(b), Some(t)) = (self.bytes.get_mut(self.len), self.stamps.get_mut(self.len)) {
            *b = byte;
            *t = now_ticks;
            self.len += 1;
        }
        for version in [VERSION, VERSION_2] {
            let Some(n) = FrameVersion::len_of(version) else {
                continue;
            };
            let Some(start) = self.len.checked_sub(n) else {
                continue;
            };
            let (Some(window), Some(&rx_ticks)) =
                (self.bytes.get(start..self.len), self.stamps.get(start))
            else {
                continue;
            };
            if window.first() == Some(&version) && Beacon::decode(window).is_ok() {
                let mut found = Found {
                    bytes: [0; MAX_FRAME_LEN],
                    len: n,
                    rx_ticks,
                };
                if let Some(dst) = found.bytes.get_mut(..n) {
                    dst.copy_from_slice(window);
                }
                // Bytes before the frame were not part of any frame.
                self.skipped = self.skipped.wrapping_add(start as u32);
                self.len = 0;
                return Some(found);
            }
        }
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    extern crate std;
    use entrain::beacon::{FRAME_LEN, Frame, FrameV2};
    use std::vec::Vec;

    fn frame(from: u16, seq: u32) -> [u8; FRAME_LEN] {
        Frame {
            from,
            seq,
            phase_counts: 0x4000_0000,
            ..Frame::default()
        }
        .to_bytes()
    }

    fn frame_v2(from: u16, seq: u32) -> [u8; entrain::beacon::FRAME_V2_LEN] {
        FrameV2 {
            base: Frame {
                from,
                seq,
                phase_counts: 0x4000_0000,
                ..Frame::default()
            },
            tx_ticks: 1_234,
            ..FrameV2::default()
        }
        .to_bytes()
    }

    /// The frame and its stamp, if one came out of the feed (only one may).
    fn feed(rx: &mut FrameReceiver, bytes: &[u8], t0: u32) -> Option<(Vec<u8>, u32)> {
        let mut got = None;
        for (k, &b) in bytes.iter().enumerate() {
            if let Some(f) = rx.push(b, t0 + k as u32) {
                assert!(got.is_none(), "two frames from one feed");
                got = Some((f.frame().to_vec(), f.rx_ticks));
            }
        }
        got
    }

    #[test]
    fn back_to_back_frames_are_stamped_at_their_first_byte() {
        let mut rx = FrameReceiver::new();
        let a = frame(3, 1);
        let b = frame(3, 2);
        assert_eq!(feed(&mut rx, &a, 100), Some((a.to_vec(), 100)));
        assert_eq!(feed(&mut rx, &b, 500), Some((b.to_vec(), 500)));
        assert_eq!(rx.skipped(), 0);
    }

    #[test]
    fn versions_mix_on_one_link() {
        let mut rx = FrameReceiver::new();
        let a = frame_v2(3, 1);
        let b = frame(3, 2);
        let c = frame_v2(3, 3);
        assert_eq!(feed(&mut rx, &a, 100), Some((a.to_vec(), 100)));
        assert_eq!(feed(&mut rx, &b, 500), Some((b.to_vec(), 500)));
        assert_eq!(feed(&mut rx, &c, 900), Some((c.to_vec(), 900)));
        assert_eq!(rx.skipped(), 0);
        // Joined mid-frame: the rest of a version-2 frame, then a whole one.
        let mut late = FrameReceiver::new();
        assert_eq!(feed(&mut late, &a[13..], 0), None);
        assert_eq!(feed(&mut late, &c, 2_000), Some((c.to_vec(), 2_000)));
        assert_eq!(late.skipped(), (a.len() - 13) as u32);
    }

    #[test]
    fn resynchronises_after_garbage_and_a_damaged_frame() {
        let mut rx = FrameReceiver::new();
        // A cut-off tail of some frame, including a stray version byte.
        assert_eq!(feed(&mut rx, &[9, VERSION, 0xAA, 0x55, 7], 0), None);
        let mut bad = frame(4, 1);
        bad[10] ^= 0x01;
        assert_eq!(feed(&mut rx, &bad, 10), None);
        let good = frame(4, 2);
        assert_eq!(feed(&mut rx, &good, 1_000), Some((good.to_vec(), 1_000)));
        // Everything before the good frame was dropped, byte by byte.
        assert_eq!(rx.skipped(), 5 + FRAME_LEN as u32);
    }
}
