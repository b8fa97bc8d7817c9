//! Sequences of received frames (arbitrary bytes, and well-formed signed frames of
//! version 1 and 2 with arbitrary fields — version 2 with arbitrary send stamps and
//! echoes, for this port or another — under the right or a wrong key), updates, sends in
//! either version and forgets, against one keyed beacon port.
//!
//! Checks besides "never panics": a refused frame leaves the node and every replay
//! window as they were; every receive is counted exactly once; an accepted frame is never
//! a byte-for-byte repeat of one accepted while its sender kept its window and moved its
//! sequence on by at most 2^31; each update
//! steps the phase by at most the slew limit and keeps the trim within its limit; an
//! accepted frame hands the node the timing its version carries (version 2: the send
//! stamp, the sender's trim, and the echo only when it is for this port); a sent frame
//! is of the port's version and its echo is the node's own for that neighbour.
#![no_main]

use entrain::beacon::{
    Accepted, Beacon, BeaconPort, Flags, Frame, FrameEcho, FrameV2, FrameVersion, MAX_FRAME_LEN,
    NetworkKey,
};
use entrain::{Config, Law, Node, Phase};
use libfuzzer_sys::arbitrary::{self, Arbitrary};
use libfuzzer_sys::fuzz_target;

const KEY: NetworkKey = NetworkKey::from_bytes([
    0x3d, 0x91, 0x0e, 0xc4, 0x57, 0xa8, 0x22, 0xf6, 0x8b, 0x10, 0x6f, 0xd3, 0x49, 0xe5, 0x7a, 0x0c,
]);
const WRONG_KEY: NetworkKey = NetworkKey::from_bytes([0x11; 16]);

#[derive(Arbitrary, Debug)]
enum Op {
    Raw {
        bytes: Vec<u8>,
        rx_step: u16,
        delay: u16,
    },
    Signed {
        from: u8,
        seq: u32,
        phase: u32,
        trim_ppb: i32,
        flags: u8,
        right_key: bool,
        rx_step: u16,
        delay: u16,
    },
    SignedV2 {
        from: u8,
        seq: u32,
        phase: u32,
        trim_ppb: i32,
        flags: u8,
        tx_ticks: u32,
        echo_to: u8,
        echo_tx: u32,
        echo_held: u32,
        right_key: bool,
        rx_step: u16,
        delay: u16,
    },
    Version {
        v2: bool,
    },
    Update {
        step: u32,
    },
    Send {
        step: u16,
    },
    Forget {
        id: u8,
    },
}

#[derive(Arbitrary, Debug)]
struct Input {
    linear: bool,
    slew_shift: u8,
    ops: Vec<Op>,
}

fn snapshot(p: &BeaconPort<4>) -> (String, Vec<String>) {
    (
        format!("{:?}", p.node()),
        (0..8u16).map(|id| format!("{:?}", p.window(id))).collect(),
    )
}

fuzz_target!(|input: Input| {
    let slew = 1u32 << (input.slew_shift % 31);
    let law = if input.linear { Law::Linear } else { Law::Sine };
    let Ok(config) = Config::builder(1_000_000, 100_000)
        .law(law)
        .slew_limit(slew)
        .build()
    else {
        return;
    };
    let mut port: BeaconPort<4> =
        BeaconPort::with_key(Node::new(config, Phase::ZERO, 0), 0, 0, KEY);
    let mut now = 0u32;
    let mut calls = 0u32;
    // Frames accepted so far, with how far their sender's newest sequence number had
    // advanced (in total, per sender) when each was accepted.
    let mut accepted: Vec<(Vec<u8>, u64)> = Vec::new();
    let mut advance = [0u64; 8];
    let mut out = [0u8; MAX_FRAME_LEN];
    for op in input.ops.iter().take(256) {
        let (bytes, rx_step, delay) = match op {
            Op::Raw {
                bytes,
                rx_step,
                delay,
            } => (bytes.clone(), *rx_step, *delay),
            Op::Signed {
                from,
                seq,
                phase,
                trim_ppb,
                flags,
                right_key,
                rx_step,
                delay,
            } => {
                let frame = Frame {
                    from: u16::from(*from % 8),
                    seq: *seq,
                    phase_counts: *phase,
                    trim_ppb: *trim_ppb,
                    flags: Flags::from_bits(*flags),
                };
                let key = if *right_key { &KEY } else { &WRONG_KEY };
                (frame.to_bytes_signed(key).to_vec(), *rx_step, *delay)
            }
            Op::SignedV2 {
                from,
                seq,
                phase,
                trim_ppb,
                flags,
                tx_ticks,
                echo_to,
                echo_tx,
                echo_held,
                right_key,
                rx_step,
                delay,
            } => {
                let frame = FrameV2 {
                    base: Frame {
                        from: u16::from(*from % 8),
                        seq: *seq,
                        phase_counts: *phase,
                        trim_ppb: *trim_ppb,
                        flags: Flags::from_bits(*flags),
                    },
                    tx_ticks: *tx_ticks,
                    // Targets 0..4: this port (id 0) or another.
                    echo: FrameEcho {
                        to: u16::from(*echo_to % 4),
                        tx_ticks: *echo_tx,
                        held_ticks: *echo_held,
                    },
                };
                let key = if *right_key { &KEY } else { &WRONG_KEY };
                (frame.to_bytes_signed(key).to_vec(), *rx_step, *delay)
            }
            Op::Version { v2 } => {
                port.set_send_version(if *v2 {
                    FrameVersion::V2
                } else {
                    FrameVersion::V1
                });
                continue;
            }
            Op::Update { step } => {
                now = now.wrapping_add(step % 1_000_000);
                let report = port.node_mut().update(now);
                assert!(report.correction.unsigned_abs() <= slew);
                assert!(port.node().trim_ppb().unsigned_abs() <= config.trim_limit_ppb());
                continue;
            }
            Op::Send { step } => {
                let tx = now.wrapping_add(u32::from(*step));
                let before = port.next_seq();
                let beacon = port
                    .send(tx, &mut out)
                    .expect("a full-size buffer always takes a frame");
                assert_eq!(beacon.frame().seq, before);
                assert_eq!(beacon.version(), port.send_version());
                assert_eq!(port.next_seq(), before.wrapping_add(1));
                let len = beacon.wire_len();
                assert_eq!(Beacon::decode_verified(&out[..len], &KEY), Ok(beacon));
                if let Beacon::V2(f) = beacon {
                    assert_eq!(f.tx_ticks, tx);
                    if f.echo.is_echo() {
                        assert_eq!(
                            port.node().echo_for(f.echo.to, tx),
                            f.echo.for_node(f.echo.to)
                        );
                    } else {
                        assert_eq!(f.echo, FrameEcho::NONE);
                    }
                }
                continue;
            }
            Op::Forget { id } => {
                port.forget(u16::from(*id % 8));
                accepted.retain(|(b, _)| u16::from_le_bytes([b[2], b[3]]) != u16::from(*id % 8));
                continue;
            }
        };
        let rx = now.wrapping_add(u32::from(rx_step));
        let before = snapshot(&port);
        calls += 1;
        match port.receive(&bytes, rx, u32::from(delay)) {
            Ok(r) => {
                let beacon = Beacon::decode_verified(&bytes, &KEY)
                    .expect("an accepted frame verifies under the key");
                assert_eq!(*beacon.frame(), r.frame);
                assert_eq!(r.timing, beacon.timing_for(0));
                assert_eq!(bytes.len(), beacon.wire_len());
                let arr = bytes.clone();
                let from = r.frame.from;
                let Some(adv) = advance.get_mut(usize::from(from)) else {
                    // Only ids 0..8 are ever signed with the key here.
                    panic!("accepted a frame from id {from} nobody signed");
                };
                match r.accepted {
                    Accepted::First => {
                        // The sender had no window (never heard, forgotten, or its window
                        // was given up after the stale time): it starts over by design.
                        accepted.retain(|(b, _)| u16::from_le_bytes([b[2], b[3]]) != from);
                    }
                    Accepted::Newer { skipped } => *adv += u64::from(skipped) + 1,
                    other => panic!("the port accepted a frame as {other:?}"),
                }
                // A repeat of an accepted frame is refused until its sender's sequence has
                // moved on by more than 2^31 (then serial arithmetic reads it as new: the
                // documented replay horizon of a 32-bit sequence).
                for (old, at) in &accepted {
                    if *old == arr {
                        assert!(*adv - at > 1 << 31, "a repeated frame was accepted");
                    }
                }
                accepted.push((arr, *adv));
            }
            Err(_) => assert_eq!(snapshot(&port), before),
        }
        assert_eq!(port.accepted_count() + port.rejects().total(), calls);
    }
});
