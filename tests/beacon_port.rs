//! The node's beacon port: send and receive between nodes, refusals that change nothing,
//! replay windows across sequence wrap, and the fault bound of a lying key holder.
#![cfg(feature = "beacon")]

use entrain::beacon::{
    Accepted, Beacon, BeaconPort, FRAME_LEN, FRAME_V2_LEN, Flags, Frame, RejectKind,
};
use entrain::{Config, Law, Node, NodeId, Observation, Phase};
use proptest::prelude::*;

/// A 1 MHz timer with a one-second period, ten updates per period; default timeout of
/// five update intervals (500 000 ticks).
fn config() -> Config {
    Config::builder(1_000_000, 100_000).build().unwrap()
}

fn port<const N: usize>(id: NodeId, turns: f32) -> BeaconPort<N> {
    BeaconPort::new(Node::new(config(), Phase::from_turns(turns), 0), id, 0)
}

/// Bytes of an unauthenticated frame from `from` with sequence `seq`.
fn frame_bytes(from: NodeId, seq: u32, phase_counts: u32) -> [u8; FRAME_LEN] {
    Frame {
        from,
        seq,
        phase_counts,
        trim_ppb: 0,
        flags: Flags::NONE,
    }
    .to_bytes()
}

/// Everything a refused frame must leave alone: the node's whole state (its `Debug` shows
/// every private field), every window, the accepted count.
fn snapshot<const N: usize>(p: &BeaconPort<N>) -> (String, Vec<String>, u32, usize) {
    let windows = (0..16u16).map(|id| format!("{:?}", p.window(id))).collect();
    (
        format!("{:?}", p.node()),
        windows,
        p.accepted_count(),
        p.window_count(),
    )
}

/// Receives `bytes` expecting refusal `kind`, and checks that only its counter moved.
fn expect_refused<const N: usize>(p: &mut BeaconPort<N>, bytes: &[u8], rx: u32, kind: RejectKind) {
    let before = snapshot(p);
    let count = p.rejects().count(kind);
    let total = p.rejects().total();
    assert_eq!(p.receive(bytes, rx, 100), Err(kind));
    assert_eq!(snapshot(p), before, "{kind:?} changed state");
    assert_eq!(p.rejects().count(kind), count + 1);
    assert_eq!(p.rejects().total(), total + 1);
}

#[test]
fn a_beacon_pulls_the_receiver_toward_the_sender() {
    let mut a: BeaconPort<2> = port(1, 0.0);
    let mut b: BeaconPort<2> = port(2, 0.05);
    let mut wire = [0u8; FRAME_V2_LEN];
    let sent = *b.send(50_000, &mut wire).unwrap().frame();
    assert_eq!(sent.phase_counts, b.node().phase_at(50_000).counts());
    assert_eq!(sent.seq, 0);
    assert_eq!(b.next_seq(), 1);

    let got = a.receive(&wire, 50_300, 300).unwrap();
    assert_eq!(got.frame, sent);
    assert_eq!(got.accepted, Accepted::First);
    assert_eq!(
        got.observation,
        Observation {
            from: 2,
            phase: Phase::from_counts(sent.phase_counts),
            rx_ticks: 50_300,
            delay_ticks: 300,
        }
    );
    assert_eq!(a.accepted_count(), 1);
    assert_eq!(a.node().neighbour_count(), 1);

    let report = a.node_mut().update(100_000);
    assert_eq!(report.used, 1);
    assert!(report.correction > 0, "{report:?}");
}

#[test]
fn send_fills_phase_trim_flags_and_sequence() {
    let mut a: BeaconPort<2> = port(9, 0.25);
    a.node_mut().set_trim_ppb(-12_000);
    a.set_flags(Flags::PINNED);
    let mut wire = [0u8; FRAME_V2_LEN + 4];
    let sent = a.send(123_456, &mut wire).unwrap();
    assert_eq!(Beacon::decode(&wire[..FRAME_V2_LEN]), Ok(sent));
    let f = *sent.frame();
    assert_eq!(f.from, 9);
    assert_eq!(f.trim_ppb, a.node().trim_ppb());
    // The node stores trim in Q32.32 counts per tick and reads it back rounded toward
    // zero, so the set value may come back one ppb smaller in magnitude.
    assert!((f.trim_ppb + 12_000).abs() <= 1, "{}", f.trim_ppb);
    assert_eq!(f.phase_counts, a.node().phase_at(123_456).counts());
    // No neighbour yet: ISOLATED is added to the port's own flags.
    assert_eq!(f.flags, Flags::PINNED | Flags::ISOLATED);
    a.receive(&frame_bytes(3, 0, 0), 123_500, 0).unwrap();
    let f = *a.send(130_000, &mut wire).unwrap().frame();
    assert_eq!(f.flags, Flags::PINNED);
    assert_eq!(f.seq, 1);

    let mut short = [0u8; FRAME_V2_LEN - 1];
    assert!(a.send(140_000, &mut short).is_err());
    assert_eq!(a.next_seq(), 2, "a failed send keeps its sequence number");
}

#[test]
fn each_refusal_changes_only_its_counter() {
    let mut a: BeaconPort<2> = port(1, 0.0);
    a.receive(&frame_bytes(2, 10, 7), 1_000, 0).unwrap();
    a.receive(&frame_bytes(2, 12, 7), 2_000, 0).unwrap();

    let good = frame_bytes(2, 13, 9);
    expect_refused(&mut a, &good[..FRAME_LEN - 1], 3_000, RejectKind::TooShort);
    expect_refused(&mut a, &[], 3_000, RejectKind::TooShort);
    let mut long = good.to_vec();
    long.push(0);
    expect_refused(&mut a, &long, 3_000, RejectKind::TooLong);
    let mut v3 = good;
    v3[0] = 3;
    expect_refused(&mut a, &v3, 3_000, RejectKind::UnsupportedVersion);
    // A version-1 frame's bytes under a version-2 byte are too short for version 2.
    let mut v2 = good;
    v2[0] = 2;
    expect_refused(&mut a, &v2, 3_000, RejectKind::TooShort);
    let mut flipped = good;
    flipped[10] ^= 0x04;
    expect_refused(&mut a, &flipped, 3_000, RejectKind::BadCheck);
    expect_refused(&mut a, &frame_bytes(1, 99, 0), 3_000, RejectKind::OwnId);
    expect_refused(&mut a, &frame_bytes(2, 12, 7), 3_000, RejectKind::Duplicate);
    expect_refused(&mut a, &frame_bytes(2, 11, 7), 3_000, RejectKind::Late);
    expect_refused(
        &mut a,
        &frame_bytes(2, 12u32.wrapping_sub(64), 7),
        3_000,
        RejectKind::TooOld,
    );
    // Fill the second window; a third sender finds no stale slot.
    a.receive(&frame_bytes(3, 0, 0), 4_000, 0).unwrap();
    expect_refused(&mut a, &frame_bytes(4, 0, 0), 5_000, RejectKind::PeersFull);

    // The good frame is still taken afterwards: nothing above consumed its number.
    assert!(a.receive(&good, 6_000, 0).is_ok());
    assert_eq!(a.accepted_count(), 4);
    assert_eq!(a.rejects().total(), 11);
}

#[test]
fn a_full_node_table_refuses_and_leaves_no_window() {
    let mut a: BeaconPort<2> = port(1, 0.0);
    // The application fed the node directly; its table is full.
    for from in [20, 21] {
        let obs = Observation {
            from,
            phase: Phase::ZERO,
            rx_ticks: 0,
            delay_ticks: 0,
        };
        a.node_mut().observe(obs).unwrap();
    }
    expect_refused(&mut a, &frame_bytes(5, 0, 0), 1_000, RejectKind::NodeFull);
    assert!(a.window(5).is_none());
    // Once the node has room, the same frame is accepted as the first from 5.
    assert!(a.node_mut().forget(20));
    assert_eq!(
        a.receive(&frame_bytes(5, 0, 0), 1_000, 0)
            .map(|r| r.accepted),
        Ok(Accepted::First)
    );
}

#[test]
fn a_silent_sender_gives_its_window_up_after_the_node_timeout() {
    let mut a: BeaconPort<1> = port(1, 0.0);
    a.receive(&frame_bytes(2, 500, 0), 0, 0).unwrap();
    let timeout = config().timeout_ticks();
    expect_refused(
        &mut a,
        &frame_bytes(3, 0, 0),
        timeout - 1,
        RejectKind::PeersFull,
    );
    a.node_mut().update(timeout + 1); // the node evicts sender 2
    assert_eq!(a.node().neighbour_count(), 0);
    assert!(a.receive(&frame_bytes(3, 0, 0), timeout, 0).is_ok());
    assert!(a.window(2).is_none());
}

#[test]
fn sequence_wrap_is_just_the_next_frame() {
    let mut a: BeaconPort<2> = port(1, 0.0);
    let mut b: BeaconPort<2> =
        BeaconPort::new(Node::new(config(), Phase::ZERO, 0), 2, u32::MAX - 2);
    let mut wire = [0u8; FRAME_V2_LEN];
    let mut seqs = Vec::new();
    for k in 0..6u32 {
        let f = *b.send(k * 1_000, &mut wire).unwrap().frame();
        seqs.push(f.seq);
        let r = a.receive(&wire, k * 1_000 + 10, 10).unwrap();
        let want = if k == 0 {
            Accepted::First
        } else {
            Accepted::Newer { skipped: 0 }
        };
        assert_eq!(r.accepted, want, "seq {}", f.seq);
    }
    assert_eq!(seqs, [u32::MAX - 2, u32::MAX - 1, u32::MAX, 0, 1, 2]);
    // A frame from before the wrap, replayed, is refused.
    let old = frame_bytes(2, u32::MAX, 0);
    expect_refused(&mut a, &old, 9_000, RejectKind::Duplicate);
}

#[test]
fn forget_lets_a_restarted_sender_back_in() {
    let mut a: BeaconPort<2> = port(1, 0.0);
    a.receive(&frame_bytes(2, 1_000, 0), 0, 0).unwrap();
    expect_refused(&mut a, &frame_bytes(2, 0, 0), 10, RejectKind::TooOld);
    assert!(a.forget(2));
    assert_eq!(a.node().neighbour_count(), 0);
    assert!(a.receive(&frame_bytes(2, 0, 0), 20, 0).is_ok());
    assert!(!a.forget(7));
}

#[test]
fn counters_clear() {
    let mut a: BeaconPort<2> = port(1, 0.0);
    a.receive(&frame_bytes(2, 0, 0), 0, 0).unwrap();
    let _ = a.receive(&[1, 2, 3], 0, 0);
    assert_eq!((a.accepted_count(), a.rejects().total()), (1, 1));
    a.clear_counters();
    assert_eq!((a.accepted_count(), a.rejects().total()), (0, 0));
    assert!(a.window(2).is_some(), "clearing counters keeps the windows");
}

/// One thing that can happen to a receiving port.
#[derive(Clone, Debug)]
enum Event {
    /// A good frame from sender `from` (1..6) with the given sequence and phase.
    Frame { from: u16, seq: u32, phase: u32 },
    /// The same, with one bit flipped.
    Flipped { from: u16, seq: u32, bit: usize },
    /// The last good frame delivered again.
    Replay,
    /// Arbitrary bytes.
    Noise(Vec<u8>),
    /// An update of the node.
    Update,
}

fn event() -> impl Strategy<Value = Event> {
    prop_oneof![
        4 => (1u16..6, 0u32..40, any::<u32>())
            .prop_map(|(from, seq, phase)| Event::Frame { from, seq, phase }),
        2 => (1u16..6, 0u32..40, 0..FRAME_LEN * 8)
            .prop_map(|(from, seq, bit)| Event::Flipped { from, seq, bit }),
        2 => Just(Event::Replay),
        1 => proptest::collection::vec(any::<u8>(), 0..40).prop_map(Event::Noise),
        1 => Just(Event::Update),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(128))]

    /// Over any mix of good, damaged, replayed and random frames: every refused frame
    /// leaves the node and the windows exactly as they were, every call is counted once,
    /// and no replay is ever accepted.
    #[test]
    fn refused_frames_never_change_the_node(events in proptest::collection::vec(event(), 1..60)) {
        let mut p: BeaconPort<3> = port(1, 0.1);
        let mut last_good: Option<[u8; FRAME_LEN]> = None;
        let mut now = 0u32;
        let mut calls = 0u32;
        for ev in events {
            now = now.wrapping_add(997);
            let bytes: Vec<u8> = match ev {
                Event::Update => {
                    p.node_mut().update(now);
                    continue;
                }
                Event::Frame { from, seq, phase } => frame_bytes(from, seq, phase).to_vec(),
                Event::Flipped { from, seq, bit } => {
                    let mut b = frame_bytes(from, seq, 0);
                    b[bit / 8] ^= 1 << (bit % 8);
                    b.to_vec()
                }
                Event::Replay => match last_good {
                    Some(b) => b.to_vec(),
                    None => continue,
                },
                Event::Noise(b) => b,
            };
            let before = snapshot(&p);
            let replay = last_good.is_some_and(|g| g[..] == bytes[..]);
            calls += 1;
            match p.receive(&bytes, now, 50) {
                Ok(r) => {
                    prop_assert!(!replay, "a replay was accepted");
                    prop_assert_eq!(r.frame, Frame::decode(&bytes).unwrap());
                    last_good = bytes.as_slice().try_into().ok();
                }
                Err(kind) => {
                    prop_assert_eq!(snapshot(&p), before, "{:?} changed state", kind);
                }
            }
            prop_assert_eq!(p.accepted_count() + p.rejects().total(), calls);
        }
    }
}

/// The node of the fault-bound tests: linear law (the pull grows with the lie, the worst
/// case for a clamp), slew limit 1/256 turn, trim limit ±50 ppm.
fn bound_config() -> Config {
    Config::builder(1_000_000, 100_000)
        .law(Law::Linear)
        .slew_limit(1 << 24)
        .trim_limit_ppb(50_000)
        .build()
        .unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]

    /// One neighbour holds the key and lies about its phase, differently each update,
    /// beside two honest ones. Each update moves the honest node by at most the slew
    /// limit; its trim stays in range; and after k updates over t ticks it is within
    /// k·slew_limit plus the trim's share of its own uncorrected, untrimmed run.
    #[test]
    fn a_lying_key_holder_moves_a_node_at_most_the_slew_limit_per_update(
        lies in proptest::collection::vec(any::<u32>(), 1..40),
        start in any::<u32>(),
        honest in proptest::array::uniform2(any::<u32>()),
    ) {
        let cfg = bound_config();
        let slew = i64::from(cfg.slew_limit());
        let update_ticks = cfg.update_ticks();
        let mut victim: BeaconPort<3> = BeaconPort::new(
            Node::new(cfg, Phase::from_counts(start), 0), 1, 0);
        let mut k = 0i64;
        for (i, &lie) in lies.iter().enumerate() {
            let seq = i as u32;
            let t = (i as u32 + 1) * update_ticks;
            let rx = t - 500;
            victim.receive(&frame_bytes(66, seq, lie), rx, 100).unwrap();
            for (j, &h) in honest.iter().enumerate() {
                // Honest neighbours drift a thousandth of a turn per update.
                let drift = seq.wrapping_mul(4_294_967);
                victim.receive(&frame_bytes(2 + j as u16, seq, h.wrapping_add(drift)), rx, 100).unwrap();
            }
            let free_run = victim.node().phase_at(t);
            let report = victim.node_mut().update(t);
            let moved = i64::from(victim.node().phase().diff(free_run));
            prop_assert!(moved.abs() <= slew, "moved {} > slew {}", moved, slew);
            prop_assert_eq!(moved, i64::from(report.correction));
            prop_assert!(victim.node().trim_ppb().unsigned_abs() <= cfg.trim_limit_ppb());
            k += 1;

            // Against the node's own uncorrected, untrimmed run (Q32.32 nominal rate).
            let untrimmed = ((u64::from(start) << 32)
                .wrapping_add(u64::from(t).wrapping_mul(cfg.rate_nominal())) >> 32) as u32;
            let departure = i64::from(victim.node().phase().diff(Phase::from_counts(untrimmed)));
            let rate_counts_per_tick = cfg.rate_nominal() as f64 / 4_294_967_296.0;
            let trim_share = f64::from(cfg.trim_limit_ppb()) * 1e-9 * f64::from(t) * rate_counts_per_tick;
            let bound = k * slew + trim_share.ceil() as i64 + 2; // +2: rounding of the two runs
            prop_assert!(departure.abs() <= bound, "departure {} > bound {}", departure, bound);
        }
    }

    /// Replaying a liar's earlier frames moves nothing: they are refused before the node.
    #[test]
    fn replayed_lies_are_refused(lie in any::<u32>(), seq in 100u32..1_000) {
        let mut victim: BeaconPort<2> = BeaconPort::new(
            Node::new(bound_config(), Phase::ZERO, 0), 1, 0);
        let old = frame_bytes(66, seq - 70, lie);
        victim.receive(&frame_bytes(66, seq, 0), 10, 0).unwrap();
        let before = snapshot(&victim);
        prop_assert_eq!(victim.receive(&old, 20, 0), Err(RejectKind::TooOld));
        prop_assert_eq!(victim.receive(&frame_bytes(66, seq, lie), 20, 0), Err(RejectKind::Duplicate));
        prop_assert_eq!(snapshot(&victim), before);
    }
}

#[cfg(feature = "mac")]
mod authenticated {
    use super::*;
    use entrain::beacon::{NetworkKey, SavedWindow};

    const KEY: NetworkKey = NetworkKey::from_bytes([
        0x3d, 0x91, 0x0e, 0xc4, 0x57, 0xa8, 0x22, 0xf6, 0x8b, 0x10, 0x6f, 0xd3, 0x49, 0xe5, 0x7a,
        0x0c,
    ]);
    const OTHER: NetworkKey = NetworkKey::from_bytes([7; 16]);

    fn keyed(id: NodeId, key: NetworkKey) -> BeaconPort<3> {
        BeaconPort::with_key(Node::new(config(), Phase::ZERO, 0), id, 0, key)
    }

    /// Ten frames from `tx` to `rx`, one per update; returns their bytes as recorded by an
    /// eavesdropper. `save` is called after each accepted frame with its index.
    fn ten_frames(
        tx: &mut BeaconPort<3>,
        rx: &mut BeaconPort<3>,
        mut save: impl FnMut(usize, &BeaconPort<3>),
    ) -> Vec<[u8; FRAME_V2_LEN]> {
        (0..10)
            .map(|k| {
                let t = 100_000 * k as u32;
                let mut wire = [0u8; FRAME_V2_LEN];
                tx.send(t, &mut wire).unwrap();
                rx.node_mut().update(t);
                rx.receive(&wire, t + 100, 100).unwrap();
                save(k, rx);
                wire
            })
            .collect()
    }

    /// The reproduction: a receiver that reboots starts with empty windows and takes
    /// every recorded frame again (10 of 10), each as the first from its sender.
    #[test]
    fn a_rebooted_receiver_without_saved_windows_takes_recordings() {
        let mut tx = keyed(2, KEY);
        let mut rx = keyed(1, KEY);
        let recorded = ten_frames(&mut tx, &mut rx, |_, _| {});
        let mut rebooted = keyed(1, KEY);
        let taken = recorded
            .iter()
            .filter(|w| rebooted.receive(&w[..], 0, 100).is_ok())
            .count();
        // One is taken as the first; each later one reads as newer still.
        assert_eq!(taken, 10);
    }

    /// With its windows saved every fourth frame and restored after the reboot with a
    /// margin of four frames, the receiver refuses every recording, and takes the
    /// sender's frames again once they pass the restored window.
    #[test]
    fn restored_windows_refuse_every_recording_across_a_reboot() {
        let mut tx = keyed(2, KEY);
        let mut rx = keyed(1, KEY);
        let mut flash = [0u8; SavedWindow::LEN];
        let recorded = ten_frames(&mut tx, &mut rx, |k, rx| {
            if k % 4 == 3 {
                let saved: Vec<SavedWindow> = rx.saved_windows().collect();
                assert_eq!(saved.len(), 1);
                flash = saved[0].to_bytes();
            }
        });
        // Saved at frame 7; frames 8 and 9 were accepted after the last save.
        assert_eq!(
            SavedWindow::from_bytes(flash),
            SavedWindow { from: 2, newest: 7 }
        );
        let mut rebooted = keyed(1, KEY);
        rebooted
            .restore_window(SavedWindow::from_bytes(flash), 4, 0)
            .unwrap();
        for (k, w) in recorded.iter().enumerate() {
            assert!(
                rebooted.receive(&w[..], 0, 100).is_err(),
                "frame {k} replayed"
            );
        }
        assert_eq!(rebooted.accepted_count(), 0);
        // The sender goes on: 10 and 11 fall in the margin (7 + 4), 12 is taken.
        for (seq, t, ok) in [
            (10u32, 1_000_000u32, false),
            (11, 1_100_000, false),
            (12, 1_200_000, true),
        ] {
            let mut wire = [0u8; FRAME_V2_LEN];
            let sent = *tx.send(t, &mut wire).unwrap().frame();
            assert_eq!(sent.seq, seq);
            rebooted.node_mut().update(t);
            assert_eq!(
                rebooted.receive(&wire, t + 100, 100).is_ok(),
                ok,
                "seq {seq}"
            );
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]

        /// After a restore, a recorded frame is taken exactly when its sequence number is
        /// past the saved one plus the margin: a margin that covers the frames accepted
        /// since the last save refuses them all.
        #[test]
        fn a_restored_window_takes_only_numbers_past_the_margin(
            saved in any::<u32>(),
            margin in 0u32..1_000,
            offset in 0u32..2_000,
        ) {
            let mut rebooted = keyed(1, KEY);
            rebooted.restore_window(SavedWindow { from: 2, newest: saved }, margin, 0).unwrap();
            let seq = saved.wrapping_sub(500).wrapping_add(offset);
            let frame = Frame { from: 2, seq, phase_counts: 0, trim_ppb: 0, flags: Flags::NONE };
            let taken = rebooted.receive(&frame.to_bytes_signed(&KEY), 0, 0).is_ok();
            prop_assert_eq!(taken, offset > 500 + margin);
        }
    }

    #[test]
    fn keyed_ports_talk_and_refuse_outsiders() {
        let mut a = keyed(1, KEY);
        let mut b = keyed(2, KEY);
        let mut outsider = keyed(3, OTHER);
        let mut plain: BeaconPort<3> = port(4, 0.3);
        assert!(a.is_authenticated() && !plain.is_authenticated());

        let mut wire = [0u8; FRAME_V2_LEN];
        let Beacon::V2(sent) = b.send(1_000, &mut wire).unwrap() else {
            panic!("a port sends version 2 by default");
        };
        assert_eq!(wire, sent.to_bytes_signed(&KEY));
        assert!(a.receive(&wire, 1_100, 100).is_ok());

        outsider.send(2_000, &mut wire).unwrap();
        expect_refused(&mut a, &wire, 2_100, RejectKind::BadTag);
        plain.send(2_000, &mut wire).unwrap();
        expect_refused(&mut a, &wire, 2_100, RejectKind::BadTag);
        assert_eq!(a.rejects().count(RejectKind::BadTag), 2);

        // A signed frame replayed is refused by the window, not the tag.
        let again = sent.to_bytes_signed(&KEY);
        expect_refused(&mut a, &again, 3_000, RejectKind::Duplicate);
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(128))]

        /// A forger without the key, changing any header bit of a genuine frame and fixing
        /// the public CRC, moves nothing.
        #[test]
        fn forged_frames_move_nothing(phase in any::<u32>(), seq in any::<u32>(), bit in 8..128usize) {
            let mut a = keyed(1, KEY);
            a.receive(&Frame { from: 2, seq: seq.wrapping_sub(1), phase_counts: 0, trim_ppb: 0, flags: Flags::NONE }
                .to_bytes_signed(&KEY), 0, 0).unwrap();
            let mut bytes = Frame { from: 2, seq, phase_counts: phase, trim_ppb: 0, flags: Flags::NONE }
                .to_bytes_signed(&KEY);
            bytes[bit / 8] ^= 1 << (bit % 8);
            let body = Frame::decode(&bytes);
            prop_assert!(body.is_err()); // the CRC catches the change ...
            // ... so the forger recomputes it (CRC-32C of bytes 0..24), as anyone can.
            let crc = crc32c(&bytes[..24]);
            bytes[24..].copy_from_slice(&crc.to_le_bytes());
            prop_assert!(Frame::decode(&bytes).is_ok());
            let before = snapshot(&a);
            prop_assert_eq!(a.receive(&bytes, 10, 0), Err(RejectKind::BadTag));
            prop_assert_eq!(snapshot(&a), before);
        }
    }

    /// Bitwise CRC-32C (reflected poly 0x82F63B78), as a forger would compute it.
    fn crc32c(bytes: &[u8]) -> u32 {
        let mut crc = 0xFFFF_FFFFu32;
        for &b in bytes {
            crc ^= u32::from(b);
            for _ in 0..8 {
                crc = if crc & 1 != 0 {
                    (crc >> 1) ^ 0x82F6_3B78
                } else {
                    crc >> 1
                };
            }
        }
        !crc
    }

    #[test]
    fn forger_crc_is_the_catalogue_crc() {
        // CRC-32/ISCSI check value 0xE3069283 (published CRC catalogue; from memory).
        assert_eq!(crc32c(b"123456789"), 0xE306_9283);
    }
}

/// A frame whose receive time is later than the node's clock by more than the timeout is
/// refused as from the future, like any other refusal: counted, nothing else changed.
#[test]
fn a_frame_stamped_from_the_future_is_refused_and_changes_nothing() {
    let mut a: BeaconPort<2> = port(1, 0.0);
    let timeout = config().timeout_ticks();
    expect_refused(
        &mut a,
        &frame_bytes(2, 5, 0),
        timeout + 1,
        RejectKind::FromTheFuture,
    );
    assert!(a.window(2).is_none());
    // Once the node's clock has moved on, the same frame is the first from 2.
    a.node_mut().advance_to(timeout);
    assert_eq!(
        a.receive(&frame_bytes(2, 5, 0), timeout + 1, 0)
            .map(|r| r.accepted),
        Ok(Accepted::First)
    );
}
