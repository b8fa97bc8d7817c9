//! A node with its beacon state: the send and receive paths between frame bytes and the
//! node law.

#[cfg(feature = "mac")]
use super::NetworkKey;
use super::peers::PeerWindows;
use super::{
    Accepted, Beacon, EncodeError, Flags, Frame, FrameEcho, FrameV2, FrameVersion, RejectCounts,
    RejectKind, SeqWindow,
};
use crate::{Node, NodeId, Observation, ObserveError, Timing};

/// A frame the receive path accepted and handed to the node.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Received {
    /// The fields of the frame as decoded (and, with a key, verified) that both versions
    /// carry.
    pub frame: Frame,
    /// The observation given to [`Node::observe_timed`].
    pub observation: Observation,
    /// The two-way timing given with it: `Some` for a version-2 frame (its echo only if
    /// the echo was for this port's id), `None` for version 1.
    pub timing: Option<Timing>,
    /// How its sequence number stood to the sender's window: the first from that sender,
    /// or newer with the count of numbers skipped (frames lost, for link telemetry).
    pub accepted: Accepted,
}

/// What a receiver keeps of one sender's replay window in non-volatile memory, so that
/// after its own reboot it refuses recordings of frames it accepted before: the sender's
/// id and the newest sequence number accepted from it. Six bytes on flash
/// ([`SavedWindow::to_bytes`]); see [`BeaconPort::restore_window`].
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SavedWindow {
    /// The sender.
    pub from: NodeId,
    /// The newest sequence number accepted from it when saved.
    pub newest: u32,
}

impl SavedWindow {
    /// Bytes of [`SavedWindow::to_bytes`].
    pub const LEN: usize = 6;

    /// `from` (`u16` LE) then `newest` (`u32` LE).
    pub const fn to_bytes(&self) -> [u8; SavedWindow::LEN] {
        let [f0, f1] = self.from.to_le_bytes();
        let [n0, n1, n2, n3] = self.newest.to_le_bytes();
        [f0, f1, n0, n1, n2, n3]
    }

    /// The inverse of [`SavedWindow::to_bytes`].
    pub const fn from_bytes(bytes: [u8; SavedWindow::LEN]) -> SavedWindow {
        let [f0, f1, n0, n1, n2, n3] = bytes;
        SavedWindow {
            from: u16::from_le_bytes([f0, f1]),
            newest: u32::from_le_bytes([n0, n1, n2, n3]),
        }
    }
}

/// A [`Node`] with what it needs to speak beacons: its own id, its send sequence
/// counter, a replay window per sender, the network key (feature `mac`) and counters of
/// refused frames by kind.
///
/// # Receive path
///
/// [`BeaconPort::receive`] checks, in order: the frame (version 1 or 2, length, CRC), the
/// tag when the port has a key, that the sender is not this node, and the sender's replay
/// window; then it hands the observation to [`Node::observe_timed`], with the frame's
/// two-way [`Timing`] for version 2 (the echo only when it is for this port's id) and
/// none for version 1. Only when all of that
/// succeeds is anything recorded (the window, the accepted count, the node's neighbour
/// entry). **A refused frame changes nothing but its reject counter**: not the node, not
/// any window.
///
/// # Send path
///
/// [`BeaconPort::send`] writes a frame with the node's [`Node::phase_at`] the send
/// instant, its [`Node::trim_ppb`], the port's flags (with [`Flags::ISOLATED`] added
/// while the node has no neighbour) and the next sequence number, signed when the port
/// has a key. The sequence number is used up only when the frame was written.
///
/// A port sends version 2 unless told otherwise ([`BeaconPort::set_send_version`]): the
/// send instant in the sender's ticks and one echo, for the neighbours in turn. The port
/// keeps the turn: each frame echoes the next neighbour in the node's table (after the
/// one echoed last) whose last beacon carried timing ([`Node::echo_for`]); neighbours
/// heard only in version 1 are passed over, so no frame is spent on them. With `k`
/// timed neighbours each hears its echo every `k` frames.
///
/// # Mixed networks
///
/// A version-1 node refuses version-2 frames ([`RejectKind::UnsupportedVersion`]), so
/// while any neighbour still runs version 1 its neighbours send version 1
/// (`set_send_version(FrameVersion::V1)`): they still read version 2 from others. A
/// link on which either end sends version 1 carries no timing, and the node falls back
/// to the delay it is told: `delay_ticks` of [`BeaconPort::receive`] (plus whatever it
/// measured on that link before, which it keeps). Once every node reads version 2, send
/// version 2 everywhere.
///
/// # Fault bound
///
/// A sender that holds the key passes every check, so it can report any phase it likes.
/// It still cannot move an honest node by more than the node law's slew limit per update:
/// each [`Node::update`] steps the phase by `clamp(kp · Σ pull(Δ_j), ±slew_limit)`, so
/// whatever one neighbour (or all of them) claim, one update moves the phase by at most
/// [`Config::slew_limit`](crate::Config::slew_limit) counts, and the rate trim a lie can
/// build up stays within ±[`Config::trim_limit_ppb`](crate::Config::trim_limit_ppb).
/// So over `k` updates spanning `t` ticks, whatever the liar sends, the node departs from
/// its own uncorrected, untrimmed run by at most `k · slew_limit` counts plus the
/// trim's share, `trim_limit_ppb · 10⁻⁹ · t` ticks' worth of phase. Replaying the
/// liar's old frames gains it nothing more: the window refuses them. (Tested in
/// `tests/beacon_port.rs`.) Version 2 gives a liar no more reach: its send stamp and
/// echo only make samples of the delay of its own link (the node keeps a delay per
/// neighbour, and a frame from one neighbour changes only that neighbour's), so a false
/// echo shifts where the node places the liar, which a false phase does already.
///
/// That bound is per update. Held up for good, the liar's pull settles against the honest
/// neighbours' at a steady displacement: with `h` honest neighbours that hold still and
/// a liar that always claims the law's strongest pull `P_max`, the node settles where
/// `h · pull(x*) = P_max`, that is `x* = pull⁻¹(P_max / h)`:
/// `asin(1/h) / 2π` turn under the sine laws (1/12, 0.040, 0.020 turn for h = 2, 4, 8)
/// and `(2^31 − 1)/h` counts, about `1/(2h)` turn, under the linear law. `x*` does not
/// depend on `kp`, `ki` or the slew limit; they decide only whether the node settles
/// there (it does when `kp · h · pull'(x*) < 2`: `kp·√(h² − 1) < 2` for the sine law,
/// `kp · h < 2` for the linear law) and how soon (at least `x* / slew_limit` updates).
/// With one honest neighbour the sine law balances only at a quarter turn, where the
/// node creeps and wanders. Derivation and assumptions in `docs/design.md`; checked on
/// the real node by `tests/hardening.rs`. Only more honest neighbours shrink it, or a
/// key per sender, which the frame does not carry.
///
/// # Replay windows
///
/// One window per sender, `N` of them, as many as the node's neighbour table. A sender
/// not heard before takes a free window, or the window of the sender heard least recently
/// if that one has been silent for at least the node's
/// [`Config::timeout_ticks`](crate::Config::timeout_ticks) (the node has dropped it too);
/// otherwise the frame is refused as [`RejectKind::PeersFull`]. A sender whose window was
/// given up starts over, so a replay of its frames from before its silence would be taken
/// once; size `N` for the senders a node can hear, not only its intended neighbours.
///
/// ```
/// use entrain::beacon::{BeaconPort, MAX_FRAME_LEN, RejectKind};
/// use entrain::{Config, Node, Phase};
///
/// let config = Config::builder(1_000_000, 100_000).build().unwrap();
/// let mut a: BeaconPort<4> = BeaconPort::new(Node::new(config, Phase::ZERO, 0), 1, 0);
/// let mut b: BeaconPort<4> =
///     BeaconPort::new(Node::new(config, Phase::from_turns(0.02), 0), 2, 0);
///
/// let mut wire = [0u8; MAX_FRAME_LEN];
/// let len = b.send(1_000, &mut wire).unwrap().wire_len();
/// let got = a.receive(&wire[..len], 1_200, 200).unwrap(); // a 200-tick link
/// assert_eq!(got.frame.from, 2);
/// assert_eq!(got.timing.unwrap().tx_ticks, 1_000); // version 2: the send stamp
/// assert_eq!(a.receive(&wire[..len], 1_300, 200), Err(RejectKind::Duplicate));
/// assert_eq!(a.rejects().count(RejectKind::Duplicate), 1);
///
/// let report = a.node_mut().update(100_000);
/// assert!(report.correction > 0); // pulled toward b
/// ```
#[derive(Clone, Debug)]
pub struct BeaconPort<const N: usize> {
    node: Node<N>,
    id: NodeId,
    next_seq: u32,
    flags: Flags,
    peers: PeerWindows<N>,
    rejects: RejectCounts,
    accepted: u32,
    send_version: FrameVersion,
    /// Table index of the neighbour the next version-2 frame tries to echo first.
    echo_next: usize,
    #[cfg(feature = "mac")]
    key: Option<NetworkKey>,
}

impl<const N: usize> BeaconPort<N> {
    /// An unauthenticated port: frames are sent untagged and tags are not checked.
    ///
    /// `first_seq` is the sequence number of the first frame sent; see the module docs on
    /// restarting after a reset.
    pub const fn new(node: Node<N>, id: NodeId, first_seq: u32) -> Self {
        BeaconPort {
            node,
            id,
            next_seq: first_seq,
            flags: Flags::NONE,
            peers: PeerWindows::new(),
            rejects: RejectCounts::new(),
            accepted: 0,
            send_version: FrameVersion::V2,
            echo_next: 0,
            #[cfg(feature = "mac")]
            key: None,
        }
    }

    /// An authenticated port: every frame sent is tagged under `key`, and a received frame
    /// without a good tag is refused as [`RejectKind::BadTag`].
    #[cfg(feature = "mac")]
    pub const fn with_key(node: Node<N>, id: NodeId, first_seq: u32, key: NetworkKey) -> Self {
        let mut port = Self::new(node, id, first_seq);
        port.key = Some(key);
        port
    }

    /// Whether frames are tagged and tags are checked.
    pub const fn is_authenticated(&self) -> bool {
        #[cfg(feature = "mac")]
        {
            self.key.is_some()
        }
        #[cfg(not(feature = "mac"))]
        {
            false
        }
    }

    /// The node.
    pub const fn node(&self) -> &Node<N> {
        &self.node
    }

    /// The node, to run its clock and updates.
    pub const fn node_mut(&mut self) -> &mut Node<N> {
        &mut self.node
    }

    /// The node, giving up the beacon state.
    pub fn into_node(self) -> Node<N> {
        self.node
    }

    /// This node's id, as sent in its frames.
    pub const fn id(&self) -> NodeId {
        self.id
    }

    /// The sequence number the next frame sent will carry.
    pub const fn next_seq(&self) -> u32 {
        self.next_seq
    }

    /// The flags sent with every frame (besides [`Flags::ISOLATED`], added while the node
    /// has no neighbour).
    pub const fn flags(&self) -> Flags {
        self.flags
    }

    /// Sets the flags sent with every frame, for example [`Flags::PINNED`] on a node that
    /// follows a reference.
    pub const fn set_flags(&mut self, flags: Flags) {
        self.flags = flags;
    }

    /// The frame version [`BeaconPort::send`] writes.
    pub const fn send_version(&self) -> FrameVersion {
        self.send_version
    }

    /// Sets the frame version [`BeaconPort::send`] writes: version 2 (the default) or,
    /// while neighbours still run version 1, version 1 (see "Mixed networks" above).
    /// Receiving reads both either way.
    pub const fn set_send_version(&mut self, version: FrameVersion) {
        self.send_version = version;
    }

    /// Refused frames so far, by kind.
    pub const fn rejects(&self) -> &RejectCounts {
        &self.rejects
    }

    /// Frames accepted and handed to the node so far (saturating).
    pub const fn accepted_count(&self) -> u32 {
        self.accepted
    }

    /// Sets the reject and accepted counters back to zero.
    pub fn clear_counters(&mut self) {
        self.rejects.clear();
        self.accepted = 0;
    }

    /// The replay window kept for sender `id`, if any.
    pub fn window(&self, id: NodeId) -> Option<&SeqWindow> {
        self.peers.window(id)
    }

    /// Senders with a replay window.
    pub fn window_count(&self) -> usize {
        self.peers.len()
    }

    /// What to keep in non-volatile memory so that replays stay refused across this
    /// node's own reboot: one [`SavedWindow`] per sender with a window. Save them every
    /// `S` ticks (for example at each update whose count is a multiple of some k) and
    /// give them back to [`BeaconPort::restore_window`] after a reboot.
    pub fn saved_windows(&self) -> impl Iterator<Item = SavedWindow> + '_ {
        self.peers
            .iter()
            .filter_map(|(from, w)| w.newest().map(|newest| SavedWindow { from, newest }))
    }

    /// After a reboot of this node, installs the window of a sender from a
    /// [`SavedWindow`] kept in non-volatile memory, moved on by `margin`: every sequence
    /// number up to `saved.newest + margin` (and up to 2^31 before it) is then refused,
    /// later ones are taken. Call it once per saved sender before the first frame is
    /// received; `now_ticks` is this node's timer (the window counts as heard then).
    ///
    /// Choose `margin` at least the number of frames a sender can send between two saves
    /// (the save interval divided by the sender's beacon interval, rounded up, plus one):
    /// frames accepted after the last save, which a recording may replay, are then
    /// refused too. The price: after a reboot shorter than the save interval, up to
    /// `margin` genuine frames from each sender are refused (as
    /// [`RejectKind::Duplicate`] or [`RejectKind::TooOld`]) until its sequence passes
    /// the restored one, a silence of at most one save interval per sender. Keep
    /// `margin` below 2^30.
    ///
    /// Why not carry a boot epoch in the frame: it would change the version-1 wire format
    /// and every sender, where this needs only a few bytes of flash per sender on the
    /// receiver and one write per save interval; and a challenge to a sender needs a reply
    /// path that beacons do not have.
    ///
    /// # Errors
    /// [`RejectKind::PeersFull`] when the sender has no window, none is free and no
    /// sender has been silent for the timeout: nothing changed.
    ///
    /// ```
    /// use entrain::beacon::{BeaconPort, FRAME_V2_LEN, RejectKind, SavedWindow};
    /// use entrain::{Config, Node, Phase};
    ///
    /// let config = Config::builder(1_000_000, 100_000).build().unwrap();
    /// let mut rx: BeaconPort<4> = BeaconPort::new(Node::new(config, Phase::ZERO, 0), 1, 0);
    /// let mut tx: BeaconPort<4> = BeaconPort::new(Node::new(config, Phase::ZERO, 0), 2, 0);
    /// let mut recorded = [[0u8; FRAME_V2_LEN]; 6];
    /// let mut flash = [0u8; SavedWindow::LEN];
    /// for (k, wire) in recorded.iter_mut().enumerate() {
    ///     let t = 100_000 * k as u32;
    ///     tx.send(t, wire).unwrap();
    ///     rx.node_mut().update(t);
    ///     rx.receive(wire, t + 100, 100).unwrap();
    ///     if k == 2 {
    ///         // The save every third frame: one sender, one record.
    ///         let saved = rx.saved_windows().next().unwrap();
    ///         flash = saved.to_bytes();
    ///     }
    /// }
    /// // Reboot: a fresh port, its window restored with a margin of three frames.
    /// let mut rx: BeaconPort<4> = BeaconPort::new(Node::new(config, Phase::ZERO, 0), 1, 0);
    /// rx.restore_window(SavedWindow::from_bytes(flash), 3, 0).unwrap();
    /// for wire in &recorded {
    ///     assert_eq!(rx.receive(wire, 700_000, 100), Err(RejectKind::Duplicate));
    /// }
    /// rx.node_mut().update(700_000);
    /// let mut wire = [0u8; FRAME_V2_LEN];
    /// tx.send(700_000, &mut wire).unwrap(); // sequence 6: after 2 + 3
    /// assert!(rx.receive(&wire, 700_100, 100).is_ok());
    /// ```
    pub fn restore_window(
        &mut self,
        saved: SavedWindow,
        margin: u32,
        now_ticks: u32,
    ) -> Result<(), RejectKind> {
        let window = SeqWindow::resume_after(saved.newest.wrapping_add(margin));
        let stale_ticks = self.node.config().timeout_ticks();
        self.peers
            .install(saved.from, window, now_ticks, stale_ticks)
    }

    /// Forgets sender `id`: its replay window and its node neighbour entry. Call it for a
    /// sender known to have restarted its sequence. Returns whether either was held.
    pub fn forget(&mut self, id: NodeId) -> bool {
        let window = self.peers.forget(id);
        let neighbour = self.node.forget(id);
        window || neighbour
    }

    /// Takes the bytes of one received frame (version 1 or 2, exactly one frame), heard
    /// when this node's timer read `rx_ticks`, over a link whose known delay from the
    /// sender's send instant is `delay_ticks` (in this node's ticks; 0 when unknown). A
    /// version-2 frame's two-way timing lets the node measure the rest of the delay
    /// itself ([`Node::observe_timed`]).
    ///
    /// # Errors
    /// The [`RejectKind`] of the first check that failed (see the type docs for the
    /// order); it has been counted, and nothing else changed.
    pub fn receive(
        &mut self,
        bytes: &[u8],
        rx_ticks: u32,
        delay_ticks: u32,
    ) -> Result<Received, RejectKind> {
        let result = self.try_receive(bytes, rx_ticks, delay_ticks);
        match result {
            Ok(_) => self.accepted = self.accepted.saturating_add(1),
            Err(kind) => self.rejects.record(kind),
        }
        result
    }

    fn try_receive(
        &mut self,
        bytes: &[u8],
        rx_ticks: u32,
        delay_ticks: u32,
    ) -> Result<Received, RejectKind> {
        let beacon = self.decode(bytes)?;
        let frame = *beacon.frame();
        if frame.from == self.id {
            return Err(RejectKind::OwnId);
        }
        let stale_ticks = self.node.config().timeout_ticks();
        let admission = self
            .peers
            .admit(frame.from, frame.seq, rx_ticks, stale_ticks)?;
        let observation = Observation {
            from: frame.from,
            phase: frame.phase(),
            rx_ticks,
            delay_ticks,
        };
        let timing = beacon.timing_for(self.id);
        self.node
            .observe_timed(observation, timing)
            .map_err(|e| match e {
                ObserveError::FromTheFuture(_) => RejectKind::FromTheFuture,
                ObserveError::TableFull(_) => RejectKind::NodeFull,
            })?;
        let accepted = admission.accepted();
        self.peers.commit(admission);
        Ok(Received {
            frame,
            observation,
            timing,
            accepted,
        })
    }

    fn decode(&self, bytes: &[u8]) -> Result<Beacon, RejectKind> {
        #[cfg(feature = "mac")]
        if let Some(key) = &self.key {
            return Beacon::decode_verified(bytes, key).map_err(RejectKind::from);
        }
        Beacon::decode(bytes).map_err(RejectKind::from)
    }

    /// The fields both frame versions carry, as [`BeaconPort::send`] would write them for
    /// the send instant `tx_ticks`, without using up its sequence number.
    pub fn frame_at(&self, tx_ticks: u32) -> Frame {
        let mut flags = self.flags;
        if self.node.neighbour_count() == 0 {
            flags = flags.union(Flags::ISOLATED);
        }
        Frame {
            from: self.id,
            seq: self.next_seq,
            phase_counts: self.node.phase_at(tx_ticks).counts(),
            trim_ppb: self.node.trim_ppb(),
            flags,
        }
    }

    /// The beacon [`BeaconPort::send`] would write for the send instant `tx_ticks`, in
    /// the port's send version, without using up its sequence number or its echo turn.
    pub fn beacon_at(&self, tx_ticks: u32) -> Beacon {
        self.beacon_and_turn(tx_ticks).0
    }

    /// The beacon for `tx_ticks` and the echo turn after it.
    fn beacon_and_turn(&self, tx_ticks: u32) -> (Beacon, usize) {
        let base = self.frame_at(tx_ticks);
        match self.send_version {
            FrameVersion::V1 => (Beacon::V1(base), self.echo_next),
            FrameVersion::V2 => {
                let (echo, next) = self
                    .next_echo(tx_ticks)
                    .unwrap_or((FrameEcho::NONE, self.echo_next));
                let frame = FrameV2 {
                    base,
                    tx_ticks,
                    echo,
                };
                (Beacon::V2(frame), next)
            }
        }
    }

    /// The echo of the first neighbour from the turn on (wrapping round the table) whose
    /// last beacon carried timing, and the turn after it.
    fn next_echo(&self, tx_ticks: u32) -> Option<(FrameEcho, usize)> {
        let start = self.echo_next;
        self.node
            .links()
            .enumerate()
            .skip(start)
            .chain(self.node.links().enumerate().take(start))
            .find_map(|(i, link)| {
                let echo = self.node.echo_for(link.id, tx_ticks)?;
                Some((FrameEcho::new(link.id, echo), i.wrapping_add(1)))
            })
    }

    /// Writes the frame for the send instant `tx_ticks` (this node's timer when the
    /// frame's first bit leaves; add the transmitter's known latency to the time of the
    /// call) into the start of `out`, in the port's send version (a buffer of
    /// [`MAX_FRAME_LEN`](super::MAX_FRAME_LEN) bytes holds either), signed when the port
    /// has a key, and uses up its sequence number and, for version 2, the echo turn.
    /// Returns the beacon written; send [`Beacon::wire_len`] bytes.
    ///
    /// # Errors
    /// [`EncodeError::BufferTooSmall`] when `out` is shorter than the frame; nothing is
    /// written and the sequence number and echo turn are kept.
    pub fn send(&mut self, tx_ticks: u32, out: &mut [u8]) -> Result<Beacon, EncodeError> {
        let (beacon, next) = self.beacon_and_turn(tx_ticks);
        self.encode(&beacon, out)?;
        self.next_seq = self.next_seq.wrapping_add(1);
        self.echo_next = next;
        Ok(beacon)
    }

    fn encode(&self, beacon: &Beacon, out: &mut [u8]) -> Result<usize, EncodeError> {
        #[cfg(feature = "mac")]
        if let Some(key) = &self.key {
            return beacon.encode_signed(key, out);
        }
        beacon.encode(out)
    }
}
