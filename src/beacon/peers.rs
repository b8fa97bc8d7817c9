//! A fixed-capacity table of replay windows, one per sender, with stale-slot reuse.

use heapless::Vec;

use super::{Accepted, RejectKind, SeqWindow};
use crate::NodeId;

/// The replay state kept for one sender.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
pub(crate) struct Peer {
    id: NodeId,
    window: SeqWindow,
    /// Local receive time of the last frame accepted from it.
    last_rx_ticks: u32,
}

/// Where an admitted frame's window goes.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
enum Slot {
    /// Replaces the entry at this index (the sender's own, or a stale one).
    At(usize),
    /// Appended (there was room).
    Push,
}

/// A frame that passed the replay check, not yet recorded.
#[must_use]
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
pub(crate) struct Admission {
    slot: Slot,
    peer: Peer,
    accepted: Accepted,
}

impl Admission {
    /// How the sequence number stood to the sender's window.
    pub(crate) fn accepted(&self) -> Accepted {
        self.accepted
    }
}

/// Replay windows for up to `N` senders.
///
/// A sender not heard before takes a free slot; when none is free it takes the slot of
/// the sender heard least recently, provided that one has been silent for at least
/// `stale_ticks` (so it has dropped out of the node's neighbour table too). Its window is
/// then lost: that sender starts over as [`Accepted::First`] if it returns.
#[derive(Clone, Debug)]
pub(crate) struct PeerWindows<const N: usize> {
    peers: Vec<Peer, N>,
}

impl<const N: usize> PeerWindows<N> {
    /// No sender known.
    pub(crate) const fn new() -> Self {
        PeerWindows { peers: Vec::new() }
    }

    /// Senders with a window.
    pub(crate) fn len(&self) -> usize {
        self.peers.len()
    }

    /// The window kept for `id`, if any.
    pub(crate) fn window(&self, id: NodeId) -> Option<&SeqWindow> {
        self.peers.iter().find(|p| p.id == id).map(|p| &p.window)
    }

    /// Checks `seq` from `id` received at `rx_ticks`, changing nothing.
    ///
    /// Refusals: [`RejectKind::Duplicate`], [`RejectKind::TooOld`], [`RejectKind::Late`]
    /// (older than the newest accepted, so superseded) and [`RejectKind::PeersFull`].
    pub(crate) fn admit(
        &self,
        id: NodeId,
        seq: u32,
        rx_ticks: u32,
        stale_ticks: u32,
    ) -> Result<Admission, RejectKind> {
        let (slot, mut window) = match self.peers.iter().position(|p| p.id == id) {
            Some(i) => (
                Slot::At(i),
                self.peers.get(i).map(|p| p.window).unwrap_or_default(),
            ),
            None if !self.peers.is_full() => (Slot::Push, SeqWindow::new()),
            None => (
                Slot::At(self.stale_slot(rx_ticks, stale_ticks)?),
                SeqWindow::new(),
            ),
        };
        let accepted = window.accept(seq)?;
        if let Accepted::Late { .. } = accepted {
            return Err(RejectKind::Late);
        }
        Ok(Admission {
            slot,
            peer: Peer {
                id,
                window,
                last_rx_ticks: rx_ticks,
            },
            accepted,
        })
    }

    /// The index of the least recently heard sender silent for at least `stale_ticks`.
    fn stale_slot(&self, rx_ticks: u32, stale_ticks: u32) -> Result<usize, RejectKind> {
        self.peers
            .iter()
            .enumerate()
            .map(|(i, p)| (i, rx_ticks.wrapping_sub(p.last_rx_ticks)))
            .filter(|&(_, silent)| silent >= stale_ticks)
            .max_by_key(|&(_, silent)| silent)
            .map(|(i, _)| i)
            .ok_or(RejectKind::PeersFull)
    }

    /// Records an admission made by [`PeerWindows::admit`] on the current state.
    pub(crate) fn commit(&mut self, admission: Admission) {
        match admission.slot {
            Slot::At(i) => {
                if let Some(p) = self.peers.get_mut(i) {
                    *p = admission.peer;
                }
            }
            Slot::Push => {
                // `admit` saw room; a full table here would mean a stale admission, which
                // is refused rather than recorded.
                let _ = self.peers.push(admission.peer);
            }
        }
    }

    /// `(id, window)` of every sender with a window.
    pub(crate) fn iter(&self) -> impl Iterator<Item = (NodeId, &SeqWindow)> + '_ {
        self.peers.iter().map(|p| (p.id, &p.window))
    }

    /// Installs `window` for `id` as heard at `rx_ticks`: in place of its own window, or
    /// in a free slot. A live sender's slot is never taken (a stale one is: its sender is
    /// out of the node's table too).
    pub(crate) fn install(
        &mut self,
        id: NodeId,
        window: SeqWindow,
        rx_ticks: u32,
        stale_ticks: u32,
    ) -> Result<(), RejectKind> {
        let peer = Peer {
            id,
            window,
            last_rx_ticks: rx_ticks,
        };
        let slot = match self.peers.iter().position(|p| p.id == id) {
            Some(i) => Slot::At(i),
            None if !self.peers.is_full() => Slot::Push,
            None => Slot::At(self.stale_slot(rx_ticks, stale_ticks)?),
        };
        match slot {
            Slot::At(i) => {
                if let Some(p) = self.peers.get_mut(i) {
                    *p = peer;
                }
                Ok(())
            }
            Slot::Push => self.peers.push(peer).map_err(|_| RejectKind::PeersFull),
        }
    }

    /// Drops the window of `id`; returns whether there was one.
    pub(crate) fn forget(&mut self, id: NodeId) -> bool {
        match self.peers.iter().position(|p| p.id == id) {
            Some(i) => {
                self.peers.swap_remove(i);
                true
            }
            None => false,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const STALE: u32 = 1_000;

    fn take<const N: usize>(t: &mut PeerWindows<N>, id: NodeId, seq: u32, rx: u32) -> Accepted {
        let a = t.admit(id, seq, rx, STALE).unwrap();
        let got = a.accepted();
        t.commit(a);
        got
    }

    #[test]
    fn one_window_per_sender() {
        let mut t = PeerWindows::<3>::new();
        assert_eq!(take(&mut t, 1, 50, 0), Accepted::First);
        assert_eq!(take(&mut t, 2, 50, 0), Accepted::First);
        assert_eq!(take(&mut t, 1, 51, 10), Accepted::Newer { skipped: 0 });
        assert_eq!(t.admit(2, 50, 20, STALE), Err(RejectKind::Duplicate));
        assert_eq!(t.len(), 2);
        assert_eq!(t.window(1).and_then(SeqWindow::newest), Some(51));
    }

    #[test]
    fn admit_alone_records_nothing() {
        let mut t = PeerWindows::<2>::new();
        take(&mut t, 7, 1, 0);
        let _ = t.admit(7, 2, 5, STALE).unwrap();
        let _ = t.admit(8, 2, 5, STALE).unwrap();
        assert_eq!(t.len(), 1);
        assert_eq!(t.window(7).and_then(SeqWindow::newest), Some(1));
    }

    #[test]
    fn late_and_too_old_are_refused() {
        let mut t = PeerWindows::<2>::new();
        take(&mut t, 4, 100, 0);
        take(&mut t, 4, 103, 1);
        assert_eq!(t.admit(4, 102, 2, STALE), Err(RejectKind::Late));
        assert_eq!(t.admit(4, 103, 2, STALE), Err(RejectKind::Duplicate));
        assert_eq!(t.admit(4, 30, 2, STALE), Err(RejectKind::TooOld));
    }

    #[test]
    fn full_table_reuses_only_a_stale_slot_the_stalest_first() {
        let mut t = PeerWindows::<2>::new();
        take(&mut t, 1, 0, 100);
        take(&mut t, 2, 0, 300);
        // Sender 3 at 1_050: 1 silent 950, 2 silent 750 ticks, neither stale.
        assert_eq!(t.admit(3, 0, 1_050, STALE), Err(RejectKind::PeersFull));
        // At 1_400 both are stale; 1 has been silent longer and gives way.
        assert_eq!(take(&mut t, 3, 9, 1_400), Accepted::First);
        assert!(t.window(1).is_none());
        assert!(t.window(2).is_some());
        // Sender 1 comes back later and starts over.
        assert_eq!(take(&mut t, 1, 0, 2_500), Accepted::First);
        assert!(t.window(2).is_none());
    }

    #[test]
    fn silence_is_measured_across_tick_wrap() {
        let mut t = PeerWindows::<1>::new();
        take(&mut t, 1, 0, u32::MAX - 100);
        assert_eq!(t.admit(2, 0, 500, STALE), Err(RejectKind::PeersFull));
        assert_eq!(take(&mut t, 2, 0, 900), Accepted::First);
    }

    #[test]
    fn forget_frees_the_slot() {
        let mut t = PeerWindows::<1>::new();
        take(&mut t, 1, 5, 0);
        assert!(t.forget(1));
        assert!(!t.forget(1));
        assert_eq!(take(&mut t, 2, 0, 1), Accepted::First);
        assert_eq!(take(&mut t, 2, 1, 2), Accepted::Newer { skipped: 0 });
    }
}
