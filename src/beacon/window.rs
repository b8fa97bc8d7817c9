//! A per-sender sliding window over sequence numbers: duplicates, replays and frames far
//! out of order are refused, and the sender's counter may wrap.

use core::fmt;

/// How many sequence numbers before the newest one a [`SeqWindow`] remembers.
pub const WINDOW_LEN: u32 = 64;

/// The replay window for one sender: the newest sequence number accepted and which of
/// the [`WINDOW_LEN`] numbers before it were accepted too.
///
/// Sequence numbers are compared with serial-number arithmetic: `seq` is newer than the
/// newest accepted `n` when `seq.wrapping_sub(n)`, read as `i32`, is positive. So the step
/// from `u32::MAX` to `0` is one frame forward, and a sender may skip up to 2^31 − 1
/// numbers (lost frames) and still be heard. Numbers 1..64 behind the newest are accepted
/// once each (frames reordered on the way); anything further behind, and the one number
/// exactly 2^31 away (neither newer nor older), is refused as too old. After the newest
/// has moved on by more than 2^31 in all, an old number reads as newer again: a window
/// protects against replays within 2^31 frames of the original, not forever.
///
/// ```
/// use entrain::beacon::{Accepted, SeqWindow, WindowReject};
///
/// let mut w = SeqWindow::new();
/// assert_eq!(w.accept(u32::MAX), Ok(Accepted::First));
/// assert_eq!(w.accept(1), Ok(Accepted::Newer { skipped: 1 })); // 0 was lost
/// assert_eq!(w.accept(0), Ok(Accepted::Late { behind: 1 })); // ... or only late
/// assert_eq!(w.accept(0), Err(WindowReject::Duplicate));
/// assert_eq!(w.accept(1u32.wrapping_sub(64)), Err(WindowReject::TooOld { behind: 64 }));
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
pub struct SeqWindow {
    /// Newest sequence number accepted (meaningless while `seen == 0`).
    newest: u32,
    /// Bit `i` set: `newest - i` was accepted. Bit 0 is set whenever anything was.
    seen: u64,
}

/// How an accepted sequence number stands to those accepted before.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Accepted {
    /// Nothing was accepted from this sender before.
    First,
    /// Newer than every number accepted so far.
    Newer {
        /// Numbers between the previous newest and this one that never arrived (yet).
        skipped: u32,
    },
    /// Older than the newest but within the window and not seen before.
    Late {
        /// How far behind the newest it is, 1..[`WINDOW_LEN`].
        behind: u32,
    },
}

/// Why a sequence number is refused.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WindowReject {
    /// This number was accepted before: a duplicate or a replay.
    Duplicate,
    /// Further behind the newest accepted number than the window remembers.
    TooOld {
        /// How far behind the newest it is, at least [`WINDOW_LEN`].
        behind: u32,
    },
}

impl fmt::Display for WindowReject {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            WindowReject::Duplicate => {
                f.write_str("sequence number already accepted: duplicate or replayed frame")
            }
            WindowReject::TooOld { behind } => write!(
                f,
                "sequence number {behind} behind the newest accepted, the window holds {WINDOW_LEN}"
            ),
        }
    }
}

impl core::error::Error for WindowReject {}

impl SeqWindow {
    /// An empty window: the next number offered is accepted as [`Accepted::First`].
    pub const fn new() -> SeqWindow {
        SeqWindow { newest: 0, seen: 0 }
    }

    /// A window that refuses `last` and every number up to 2^31 before it, as if all of
    /// them had been accepted, and takes any number after it as [`Accepted::Newer`]: the
    /// window a receiver restores for a sender after its own reboot (see
    /// [`BeaconPort::restore_window`](super::BeaconPort::restore_window)).
    ///
    /// ```
    /// use entrain::beacon::{Accepted, SeqWindow, WindowReject};
    ///
    /// let mut w = SeqWindow::resume_after(500);
    /// assert_eq!(w.accept(500), Err(WindowReject::Duplicate));
    /// assert_eq!(w.accept(499), Err(WindowReject::Duplicate));
    /// assert_eq!(w.accept(3), Err(WindowReject::TooOld { behind: 497 }));
    /// assert_eq!(w.accept(502), Ok(Accepted::Newer { skipped: 1 }));
    /// assert_eq!(w.accept(501), Ok(Accepted::Late { behind: 1 }));
    /// ```
    pub const fn resume_after(last: u32) -> SeqWindow {
        SeqWindow {
            newest: last,
            seen: u64::MAX,
        }
    }

    /// Whether nothing was accepted yet.
    pub const fn is_empty(&self) -> bool {
        self.seen == 0
    }

    /// The newest number accepted, if any.
    pub const fn newest(&self) -> Option<u32> {
        if self.is_empty() {
            None
        } else {
            Some(self.newest)
        }
    }

    /// What [`SeqWindow::accept`] would answer for `seq`, without recording it.
    pub const fn check(&self, seq: u32) -> Result<Accepted, WindowReject> {
        if self.is_empty() {
            return Ok(Accepted::First);
        }
        let ahead = seq.wrapping_sub(self.newest);
        if ahead == 0 {
            return Err(WindowReject::Duplicate);
        }
        if ahead < 1 << 31 {
            return Ok(Accepted::Newer {
                skipped: ahead.wrapping_sub(1),
            });
        }
        let behind = self.newest.wrapping_sub(seq);
        if behind >= WINDOW_LEN {
            return Err(WindowReject::TooOld { behind });
        }
        if self.seen & (1u64 << behind) != 0 {
            Err(WindowReject::Duplicate)
        } else {
            Ok(Accepted::Late { behind })
        }
    }

    /// Accepts `seq` and records it, or says why not (and records nothing).
    pub fn accept(&mut self, seq: u32) -> Result<Accepted, WindowReject> {
        let verdict = self.check(seq)?;
        match verdict {
            Accepted::First => {
                self.newest = seq;
                self.seen = 1;
            }
            Accepted::Newer { skipped } => {
                let shift = skipped.saturating_add(1);
                self.seen = self.seen.checked_shl(shift).unwrap_or(0) | 1;
                self.newest = seq;
            }
            Accepted::Late { behind } => {
                self.seen |= 1u64.checked_shl(behind).unwrap_or(0);
            }
        }
        Ok(verdict)
    }

    /// Forgets everything; the next number is accepted as [`Accepted::First`].
    pub fn reset(&mut self) {
        *self = SeqWindow::new();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn in_order_then_duplicates() {
        let mut w = SeqWindow::new();
        assert!(w.is_empty());
        assert_eq!(w.accept(10), Ok(Accepted::First));
        assert_eq!(w.accept(11), Ok(Accepted::Newer { skipped: 0 }));
        assert_eq!(w.accept(11), Err(WindowReject::Duplicate));
        assert_eq!(w.accept(10), Err(WindowReject::Duplicate));
        assert_eq!(w.newest(), Some(11));
    }

    #[test]
    fn late_frames_inside_the_window_once_each() {
        let mut w = SeqWindow::new();
        w.accept(100).unwrap();
        assert_eq!(w.accept(200), Ok(Accepted::Newer { skipped: 99 }));
        assert_eq!(w.accept(137), Ok(Accepted::Late { behind: 63 }));
        assert_eq!(w.accept(137), Err(WindowReject::Duplicate));
        assert_eq!(w.accept(136), Err(WindowReject::TooOld { behind: 64 }));
        // 100 fell out of the window when 200 arrived.
        assert_eq!(w.accept(100), Err(WindowReject::TooOld { behind: 100 }));
        assert_eq!(w.newest(), Some(200));
    }

    #[test]
    fn a_refused_number_changes_nothing() {
        let mut w = SeqWindow::new();
        w.accept(5).unwrap();
        w.accept(7).unwrap();
        let before = w;
        assert!(w.accept(7).is_err());
        assert!(w.accept(5).is_err());
        assert!(w.accept(7u32.wrapping_sub(WINDOW_LEN)).is_err());
        assert_eq!(w, before);
    }

    #[test]
    fn survives_wrap_of_the_sequence_counter() {
        let mut w = SeqWindow::new();
        let start = u32::MAX - 2;
        assert_eq!(w.accept(start), Ok(Accepted::First));
        for k in 1..=6u32 {
            let seq = start.wrapping_add(k);
            assert_eq!(
                w.accept(seq),
                Ok(Accepted::Newer { skipped: 0 }),
                "seq {seq}"
            );
        }
        assert_eq!(w.newest(), Some(3));
        // Numbers from before the wrap are still remembered as seen.
        assert_eq!(w.accept(u32::MAX), Err(WindowReject::Duplicate));
        assert_eq!(w.accept(start), Err(WindowReject::Duplicate));
        // A gap that spans the wrap.
        let mut g = SeqWindow::new();
        g.accept(u32::MAX - 1).unwrap();
        assert_eq!(g.accept(2), Ok(Accepted::Newer { skipped: 3 }));
        assert_eq!(g.accept(0), Ok(Accepted::Late { behind: 2 }));
        assert_eq!(g.accept(u32::MAX), Ok(Accepted::Late { behind: 3 }));
        assert_eq!(g.accept(u32::MAX - 1), Err(WindowReject::Duplicate));
    }

    #[test]
    fn half_way_round_is_neither_newer_nor_older() {
        let mut w = SeqWindow::new();
        w.accept(0).unwrap();
        assert_eq!(
            w.accept(1 << 31),
            Err(WindowReject::TooOld { behind: 1 << 31 })
        );
        assert_eq!(
            w.accept((1 << 31) - 1),
            Ok(Accepted::Newer {
                skipped: (1 << 31) - 2
            })
        );
    }

    #[test]
    fn a_jump_wider_than_the_window_clears_the_bitmap() {
        let mut w = SeqWindow::new();
        for seq in 0..10 {
            w.accept(seq).unwrap();
        }
        assert_eq!(w.accept(1_000), Ok(Accepted::Newer { skipped: 990 }));
        // 999 is within the window and was never seen, even though bits were set before.
        assert_eq!(w.accept(999), Ok(Accepted::Late { behind: 1 }));
        assert_eq!(w.accept(937), Ok(Accepted::Late { behind: 63 }));
    }

    #[test]
    fn reset_forgets() {
        let mut w = SeqWindow::new();
        w.accept(42).unwrap();
        w.reset();
        assert_eq!(w.accept(42), Ok(Accepted::First));
    }
}
