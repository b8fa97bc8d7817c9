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
