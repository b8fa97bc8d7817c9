//! Beacon frames out of a byte stream: a sliding window that resynchronises by itself.
//!
//! The UART carries bare back-to-back beacon frames ([`entrain::beacon::Frame`], fixed
//! [`FRAME_LEN`] bytes, version byte first, CRC-32C last). The receiver keeps the last
//! `FRAME_LEN` bytes with the time each arrived; whenever the oldest is the version byte
//! and the whole window decodes, that is a frame, stamped with the arrival of its first
//! byte, and the window empties. Otherwise the oldest byte is dropped, so a receiver
//! that starts mid-frame (or loses a byte) is back in step within one frame.

use entrain::beacon::{FRAME_LEN, Frame, VERSION};

/// The receive side of one link.
#[derive(Debug)]
pub struct FrameReceiver {
    bytes: [u8; FRAME_LEN],
    stamps: [u32; FRAME_LEN],
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
            bytes: [0; FRAME_LEN],
            stamps: [0; FRAME_LEN],
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
    pub fn push(&mut self, byte: u8, now_ticks: u32) -> Option<([u8; FRAME_LEN], u32)> {
        if self.len == FRAME_LEN {
            // Full but not a frame: drop the oldest byte.
            self.bytes.copy_within(1.., 0);
            self.stamps.copy_within(1.., 0);
            self.len = FRAME_LEN - 1;
            self.skipped = self.skipped.wrapping_add(1);
        }
        if let (Some(b), Some(t)) = (self.bytes.get_mut(self.len), self.stamps.get_mut(self.len)) {
            *b = byte;
            *t = now_ticks;
            self.len += 1;
        }
        if self.len == FRAME_LEN
            && self.bytes.first() == Some(&VERSION)
            && Frame::decode(&self.bytes).is_ok()
        {
            self.len = 0;
            return Some((
                self.bytes,
                self.stamps.first().copied().unwrap_or(now_ticks),
            ));
        }
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn frame(from: u16, seq: u32) -> [u8; FRAME_LEN] {
        Frame {
            from,
            seq,
            phase_counts: 0x4000_0000,
            ..Frame::default()
        }
        .to_bytes()
    }

    fn feed(rx: &mut FrameReceiver, bytes: &[u8], t0: u32) -> Option<([u8; FRAME_LEN], u32)> {
        let mut got = None;
        for (k, &b) in bytes.iter().enumerate() {
            if let Some(f) = rx.push(b, t0 + k as u32) {
                assert!(got.is_none(), "two frames from one feed");
                got = Some(f);
            }
        }
        got
    }

    #[test]
    fn back_to_back_frames_are_stamped_at_their_first_byte() {
        let mut rx = FrameReceiver::new();
        let a = frame(3, 1);
        let b = frame(3, 2);
        assert_eq!(feed(&mut rx, &a, 100), Some((a, 100)));
        assert_eq!(feed(&mut rx, &b, 500), Some((b, 500)));
        assert_eq!(rx.skipped(), 0);
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
        assert_eq!(feed(&mut rx, &good, 1_000), Some((good, 1_000)));
        // Everything before the good frame was dropped, byte by byte.
        assert_eq!(rx.skipped(), 5 + FRAME_LEN as u32);
    }
}
