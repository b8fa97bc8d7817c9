//! Version-2 beacons through `BeaconPort`: two-way link-delay measurement between ports,
//! the echo turn over the neighbours, and the fallback next to version-1 neighbours.
#![cfg(feature = "beacon")]

use entrain::beacon::{
    Beacon, BeaconPort, FRAME_LEN, FRAME_V2_LEN, Frame, FrameEcho, FrameVersion, MAX_FRAME_LEN,
    RejectKind,
};
use entrain::{Config, Echo, Law, Node, NodeId, Phase};

const RATE_TICKS: u32 = 1_000_000;

fn config() -> Config {
    Config::builder(RATE_TICKS, 100_000)
        .law(Law::Linear)
        .build()
        .unwrap()
}

fn port(id: NodeId) -> BeaconPort<4> {
    BeaconPort::new(Node::new(config(), Phase::ZERO, 0), id, 0)
}

/// `from` sends at `tx` (its ticks); `to` hears the frame `late` ticks later (every node
/// here runs on one ideal timebase, so its ticks are everyone's), told a delay of
/// `told` ticks. Returns what `to` accepted.
fn hop(
    from: &mut BeaconPort<4>,
    to: &mut BeaconPort<4>,
    tx: u32,
    late: u32,
    told: u32,
) -> entrain::beacon::Received {
    let mut wire = [0u8; MAX_FRAME_LEN];
    from.node_mut().advance_to(tx);
    let len = from.send(tx, &mut wire).unwrap().wire_len();
    to.node_mut().advance_to(tx + late);
    to.receive(&wire[..len], tx + late, told).unwrap()
}

fn link(p: &BeaconPort<4>, id: NodeId) -> entrain::LinkView {
    p.node().links().find(|l| l.id == id).unwrap()
}

/// Counts per tick of a 10^6-tick period, as the node converts a delay into phase.
fn counts(ticks: i64) -> i64 {
    ticks * (1i64 << 32) / i64::from(RATE_TICKS)
}

/// Two ports in exact step over a link 700 ticks late from A to B and 300 from B to A,
/// told nothing: after one echo each way each measures the mean one-way delay,
/// (700 + 300)/2 = 500 ticks, and sees the other off by half the asymmetry,
/// (700 − 300)/2 = 200 ticks of phase. Two-way time transfer: the delay is half the round
/// trip less the time the far end held the message, and an asymmetry a leaves an offset
/// a/2 (Mills, RFC 5905 §8, "Computing the offset and delay"; the closed form is
/// worked here by hand).
#[test]
fn two_ports_measure_the_mean_delay_of_their_link() {
    let (ab, ba) = (700u32, 300u32);
    let mut a = port(1);
    let mut b = port(2);
    let r = hop(&mut a, &mut b, 10_000, ab, 0);
    assert_eq!(r.timing.unwrap().tx_ticks, 10_000);
    assert_eq!(r.timing.unwrap().echo, None, "a had heard nothing to echo");
    assert_eq!(link(&b, 1).measured_delay_ticks, None);

    let r = hop(&mut b, &mut a, 20_000, ba, 0);
    // b echoes a's stamp and holds it from 10_700 to 20_000.
    assert_eq!(
        r.timing.unwrap().echo,
        Some(Echo {
            tx_ticks: 10_000,
            held_ticks: 20_000 - 10_000 - ab
        })
    );
    let seen = link(&a, 2);
    assert_eq!(
        seen.measured_delay_ticks,
        Some(i32::try_from((ab + ba) / 2).unwrap())
    );
    let want = counts(i64::from(ab) - i64::from(ab + ba) / 2);
    assert!(
        (i64::from(seen.diff) - want).abs() <= 1,
        "{seen:?} vs {want}"
    );

    hop(&mut a, &mut b, 30_000, ab, 0);
    let seen = link(&b, 1);
    assert_eq!(seen.measured_delay_ticks, Some(500));
    assert!(
        (i64::from(seen.diff) + want).abs() <= 1,
        "{seen:?} vs {}",
        -want
    );
}

/// A link whose delay is known in part: the node measures only the rest.
#[test]
fn a_told_delay_is_not_counted_twice() {
    let mut a = port(1);
    let mut b = port(2);
    hop(&mut a, &mut b, 10_000, 400, 250);
    hop(&mut b, &mut a, 20_000, 400, 250);
    // Round trip 800, one way 400, of which 250 were told: 150 measured beyond it.
    assert_eq!(link(&a, 2).measured_delay_ticks, Some(150));
    // Symmetric and fully accounted for: in step.
    assert!(link(&a, 2).diff.abs() <= 1, "{:?}", link(&a, 2));
}

/// One echo per frame, for the neighbours in turn; a neighbour heard only in version 1
/// is passed over.
#[test]
fn echoes_go_round_the_timed_neighbours() {
    let mut hub = port(10);
    let mut others = [port(11), port(12), port(13), port(14)];
    others[2].set_send_version(FrameVersion::V1); // node 13 still speaks version 1
    for (k, o) in others.iter_mut().enumerate() {
        let r = hop(o, &mut hub, 1_000 + 100 * k as u32, 50, 0);
        assert_eq!(r.timing.is_some(), k != 2);
    }
    let mut wire = [0u8; MAX_FRAME_LEN];
    let mut targets = Vec::new();
    for k in 0..6u32 {
        let t = 10_000 + 1_000 * k;
        hub.node_mut().advance_to(t);
        let Beacon::V2(f) = hub.send(t, &mut wire).unwrap() else {
            panic!("version 2 by default");
        };
        // The echo is the node's own echo for that neighbour.
        let echo = f.echo.for_node(f.echo.to).unwrap();
        assert_eq!(hub.node().echo_for(f.echo.to, t), Some(echo));
        targets.push(f.echo.to);
    }
    assert_eq!(targets, [11, 12, 14, 11, 12, 14]);
}

/// A frame is sent without an echo while no neighbour has sent timing; the turn is not
/// used up by such a frame, nor by `beacon_at`.
#[test]
fn no_timed_neighbour_no_echo() {
    let mut a = port(1);
    let mut old = port(2);
    old.set_send_version(FrameVersion::V1);
    hop(&mut old, &mut a, 1_000, 10, 0);
    let mut wire = [0u8; MAX_FRAME_LEN];
    let Beacon::V2(f) = a.send(5_000, &mut wire).unwrap() else {
        panic!("version 2 by default");
    };
    assert_eq!(f.echo, FrameEcho::NONE);
    assert_eq!(&wire[20..30], &[0xFF; 10]);
    assert_eq!(a.beacon_at(6_000), a.beacon_at(6_000));
}

/// The echo in a frame is for one receiver only; every receiver gets the send stamp.
#[test]
fn an_echo_for_someone_else_is_not_taken() {
    let mut a = port(1);
    let mut b = port(2);
    let mut c = port(3);
    hop(&mut a, &mut b, 1_000, 100, 0); // b now holds a's stamp
    let mut wire = [0u8; MAX_FRAME_LEN];
    b.node_mut().advance_to(2_000);
    let sent = b.send(2_000, &mut wire).unwrap();
    let Beacon::V2(f) = sent else {
        panic!("version 2 by default");
    };
    assert_eq!(f.echo.to, 1);
    c.node_mut().advance_to(2_100);
    let r = c.receive(&wire[..FRAME_V2_LEN], 2_100, 0).unwrap();
    assert_eq!(r.timing.unwrap().tx_ticks, 2_000);
    assert_eq!(r.timing.unwrap().echo, None);
    assert_eq!(link(&c, 2).measured_delay_ticks, None);
    a.node_mut().advance_to(2_100);
    let r = a.receive(&wire[..FRAME_V2_LEN], 2_100, 0).unwrap();
    assert!(r.timing.unwrap().echo.is_some());
    // Round trip: 2_100 − 1_000 − (2_000 − 1_100) = 200; one way 100.
    assert_eq!(link(&a, 2).measured_delay_ticks, Some(100));
}

/// Next to a version-1 neighbour a version-2 node falls back to the delay it is told, as
/// with version 1 everywhere: the same observation, no measurement.
#[test]
fn a_version_1_neighbour_gets_the_told_delay() {
    let mut v2 = port(1);
    let mut v1 = port(2);
    v1.set_send_version(FrameVersion::V1);
    assert_eq!(v1.send_version(), FrameVersion::V1);
    // The same exchange on a twin node that only ever calls `observe` (version-1 law).
    let mut twin: Node<4> = Node::new(config(), Phase::ZERO, 0);
    for k in 0..4u32 {
        let t = 10_000 + 100_000 * k;
        let r = hop(&mut v1, &mut v2, t, 300, 120);
        assert_eq!(r.timing, None);
        twin.advance_to(t + 300);
        twin.observe(r.observation).unwrap();
        // v2 sends back; v1 reads version 2 (its decoder reads both) but gets no echo
        // of a version-1 frame of its own.
        let back = hop(&mut v2, &mut v1, t + 50_000, 300, 120);
        assert_eq!(back.timing.unwrap().echo, None);
        assert_eq!(link(&v2, 2).measured_delay_ticks, None);
        assert_eq!(link(&v2, 2).diff, twin.links().next().unwrap().diff);
    }
    // A version-1 frame is 28 bytes, exactly what the version-1 decoder reads.
    let mut wire = [0u8; MAX_FRAME_LEN];
    let sent = v1.send(900_000, &mut wire).unwrap();
    assert_eq!(sent.wire_len(), FRAME_LEN);
    assert_eq!(Frame::decode(&wire[..FRAME_LEN]), Ok(*sent.frame()));
}

/// A node that reads only version 1 refuses version 2 on its version byte; that is why
/// mixed networks keep sending version 1 (module docs, "Versions").
#[test]
fn a_version_1_reader_refuses_version_2() {
    let mut a = port(1);
    let mut wire = [0u8; MAX_FRAME_LEN];
    let len = a.send(0, &mut wire).unwrap().wire_len();
    assert_eq!(len, FRAME_V2_LEN);
    assert_eq!(
        Frame::decode(&wire[..len]),
        Err(entrain::beacon::DecodeError::UnsupportedVersion { found: 2 })
    );
    assert_eq!(
        RejectKind::from(Frame::decode(&wire[..len]).unwrap_err()),
        RejectKind::UnsupportedVersion
    );
}
