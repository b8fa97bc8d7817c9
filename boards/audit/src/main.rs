//! Link-time panic audit of the node law and the beacon (run by `boards/panic-check.sh`).
//!
//! This firmware is never run. It calls every public entry point of the node law and of
//! the beacon (feature `mac` included) on inputs the optimiser cannot see through
//! (`black_box`), and links them with a panic handler that calls a function no object
//! defines. After LTO, the handler survives only if some panic is reachable from these
//! calls, and then the link fails naming the missing symbol: a green build is a proof,
//! for this target and these optimisation settings, that none of these calls can panic.
//! (Referencing an undefined symbol from the panic handler is common practice for this
//! check in embedded Rust.)
//!
//! Built with feature `loop-on-panic`, the same firmware links whatever is reachable; that
//! build carries the tag comparison that `boards/ct-check.sh` disassembles.
#![no_std]
#![no_main]

use core::hint::black_box;

use entrain::beacon::{
    Beacon, BeaconPort, FRAME_LEN, Flags, Frame, FrameEcho, FrameV2, FrameVersion, MAX_FRAME_LEN,
    NetworkKey, RejectCounts, RejectKind, SeqWindow,
};
use entrain::law::{Coupling, Linear, Sine, SineLibm, SineMicromath, sine_pull};
use entrain::{Config, Gain, Law, Node, Observation, Phase};

/// What the node law and the beacon need to reach a panic: nothing, if this links.
fn exercise() -> u32 {
    let mut acc = 0u32;
    let mut mix = |x: u32| acc = acc.rotate_left(5) ^ x;

    // Configuration and gains.
    let law = match black_box(3u8) {
        0 => Law::Linear,
        1 => Law::SineLibm,
        2 => Law::SineMicromath,
        _ => Law::Sine,
    };
    let kp = Gain::from_f32(black_box(0.3)).unwrap_or(Gain::ZERO);
    let ki = Gain::from_q16(black_box(300));
    mix(kp.apply(black_box(-12_345)) as u32 ^ ki.q16() ^ (ki.to_f32() as u32));
    let config = match Config::builder(black_box(1_000_000), black_box(100_000))
        .law(law)
        .kp(kp)
        .ki(ki)
        .slew_limit(black_box(50_000))
        .trim_limit_ppb(black_box(100_000))
        .timeout_ticks(black_box(300_000))
        .build()
    {
        Ok(c) => c,
        Err(_) => return 0,
    };
    mix(config.rate_nominal() as u32 ^ config.ticks_per_period() ^ config.update_ticks());

    // Laws, each on its own.
    let d = black_box(0x1234_5678i32);
    mix(Linear::pull(d) as u32 ^ Sine::pull(d) as u32 ^ sine_pull(black_box(-d)) as u32);
    mix(SineLibm::pull(d) as u32 ^ SineMicromath::pull(d) as u32 ^ law.pull(d) as u32);

    // Phase arithmetic.
    let p = Phase::from_counts(black_box(0xdead_beef));
    mix(p.diff(Phase::from_turns(black_box(0.3))) as u32);
    mix(p.wrapping_add(black_box(-7)).counts() ^ p.to_micros(black_box(0)));
    mix(Phase::from_micros(black_box(5), black_box(0)).counts());
    mix(Phase::diff_to_micros(black_box(i32::MIN), black_box(u32::MAX)) as u32);
    mix(Phase::from_seconds(black_box(1.5), black_box(0.0)).counts());
    mix((p.to_turns() + p.to_radians() + p.to_seconds(2.0)) as u32);
    mix(Phase::from_radians(black_box(f32::NAN)).counts());
    mix(Phase::diff_to_turns(black_box(-5)) as u32);

    // The node law.
    let mut node: Node<4> = Node::new(config, p, black_box(17));
    let obs = Observation {
        from: black_box(9),
        phase: Phase::from_counts(black_box(77)),
        rx_ticks: black_box(u32::MAX - 3),
        delay_ticks: black_box(400),
    };
    if let Err(e) = node.observe(obs) {
        mix(u32::from(e.observation().from));
    }
    node.set_trim_ppb(black_box(i32::MIN));
    mix(node.trim_ppb() as u32 ^ node.trim_raw() as u32);
    mix(node.advance_to(black_box(250_017)));
    let report = node.update(black_box(400_000));
    mix(report.correction as u32 ^ report.largest_diff ^ u32::from(report.used));
    mix(node.phase_at(black_box(7)).counts() ^ node.cycles() ^ node.now_ticks());
    mix(node
        .neighbours()
        .fold(node.neighbour_count() as u32, |a, id| a ^ u32::from(id)));
    mix(u32::from(node.forget(black_box(9))));

    // Frames, windows, counters.
    let key = NetworkKey::from_bytes(black_box([0x5a; 16]));
    let frame = Frame {
        from: black_box(3),
        seq: black_box(11),
        phase_counts: black_box(5),
        trim_ppb: black_box(-40),
        flags: Flags::from_bits(black_box(0x81)),
    };
    let mut wire = [0u8; FRAME_LEN + 3];
    let len = black_box(FRAME_LEN + 1);
    let out = wire.get_mut(..len).unwrap_or(&mut []);
    mix(frame.encode(out).unwrap_or(0) as u32 ^ frame.encode_signed(&key, out).unwrap_or(0) as u32);
    mix(frame.to_bytes()[black_box(3) % FRAME_LEN] as u32);
    let signed = frame.to_bytes_signed(&key);
    let bytes: &[u8] = black_box(&signed);
    mix(Frame::decode(bytes).map(|f| f.seq).unwrap_or(1));
    mix(Frame::decode_verified(bytes, &key)
        .map(|f| f.phase().counts())
        .unwrap_or(2));
    mix(u32::from(
        frame
            .flags
            .union(Flags::PINNED)
            .without(Flags::ISOLATED)
            .reserved()
            .bits(),
    ));
    mix(u32::from(frame.flags.contains(Flags::ISOLATED)));
    mix(u32::from(frame.header()[black_box(5) % 16]));

    // Version 2 and the decoder of both versions.
    let v2 = FrameV2 {
        base: frame,
        tx_ticks: black_box(77),
        echo: FrameEcho {
            to: black_box(2),
            tx_ticks: black_box(12),
            held_ticks: black_box(30),
        },
    };
    let mut wire2 = [0u8; MAX_FRAME_LEN + 3];
    let len2 = black_box(MAX_FRAME_LEN + 1);
    let out2 = wire2.get_mut(..len2).unwrap_or(&mut []);
    mix(v2.encode(out2).unwrap_or(0) as u32 ^ v2.encode_signed(&key, out2).unwrap_or(0) as u32);
    let signed2 = v2.to_bytes_signed(&key);
    let bytes2: &[u8] = black_box(&signed2);
    for b in [bytes, bytes2] {
        mix(Beacon::decode(b).map(|f| f.frame().seq).unwrap_or(3));
        match Beacon::decode_verified(b, &key) {
            Ok(f) => mix(f.wire_len() as u32
                ^ u32::from(f.version().byte())
                ^ f.timing_for(black_box(2)).map_or(4, |t| t.tx_ticks)),
            Err(_) => mix(5),
        }
    }
    mix(FrameV2::decode(bytes2).map(|f| f.tx_ticks).unwrap_or(6));
    mix(FrameVersion::len_of(black_box(2)).unwrap_or(0) as u32);

    let mut window = SeqWindow::new();
    mix(window.accept(black_box(3)).is_ok() as u32 ^ window.check(black_box(1)).is_ok() as u32);
    mix(window.newest().unwrap_or(0) ^ u32::from(window.is_empty()));
    window.reset();

    // The port: send, receive (with the key), and the rest of its surface.
    let mut a: BeaconPort<4> = BeaconPort::with_key(node.clone(), black_box(1), black_box(0), key);
    let mut b: BeaconPort<4> = BeaconPort::new(node, black_box(2), black_box(u32::MAX));
    b.set_flags(Flags::PINNED);
    let mut buf = [0u8; MAX_FRAME_LEN];
    if black_box(false) {
        b.set_send_version(FrameVersion::V1);
    }
    for (tx, rx, port) in [(1_000u32, 1_200u32, &mut a), (1_500, 1_700, &mut b)] {
        let sent = port
            .send(black_box(tx), black_box(&mut buf))
            .map(|f| f.frame().seq ^ f.wire_len() as u32)
            .unwrap_or(0);
        mix(sent ^ port.frame_at(black_box(2_000)).phase_counts ^ port.next_seq());
        mix(port.beacon_at(black_box(2_100)).wire_len() as u32);
        mix(u32::from(port.send_version().byte()));
        let len = black_box(rx as usize % MAX_FRAME_LEN);
        let frame = buf.get(..len).unwrap_or(&[]);
        match port.receive(black_box(frame), black_box(rx), black_box(200)) {
            Ok(r) => mix(r.frame.seq ^ r.observation.rx_ticks ^ r.timing.map_or(0, |t| t.tx_ticks)),
            Err(kind) => mix(kind.name().len() as u32),
        }
    }
    match b.receive(black_box(&buf), black_box(1_300), black_box(200)) {
        Ok(r) => mix(r.frame.seq),
        Err(kind) => mix(kind.name().len() as u32 + 1),
    }
    mix(a.rejects().count(RejectKind::BadTag) ^ a.rejects().total() ^ a.accepted_count());
    mix(a.rejects().iter().fold(0, |s, (_, n)| s ^ n));
    mix(a
        .window(black_box(2))
        .and_then(SeqWindow::newest)
        .unwrap_or(0));
    mix(a.window_count() as u32 ^ u32::from(a.is_authenticated()) ^ u32::from(a.id()));
    mix(u32::from(a.flags().bits()) ^ a.node().cycles());
    mix(a.node_mut().update(black_box(90_000)).correction as u32);
    mix(u32::from(a.forget(black_box(2))));
    a.clear_counters();
    let mut counts = RejectCounts::new();
    counts.record(RejectKind::ALL[black_box(4) % RejectKind::ALL.len()]);
    mix(counts.total());
    mix(a.into_node().phase().counts() ^ b.into_node().phase().counts());
    acc
}

#[unsafe(no_mangle)]
extern "C" fn _start() -> ! {
    loop {
        black_box(exercise());
    }
}

#[cfg(not(feature = "loop-on-panic"))]
#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    unsafe extern "C" {
        /// Defined nowhere: reaching this handler is a link error.
        fn entrain_audit_a_panic_is_reachable() -> !;
    }
    unsafe { entrain_audit_a_panic_is_reachable() }
}

/// A handler that links whatever is reachable, for `boards/ct-check.sh`, which needs the
/// firmware linked to disassemble it even while a panic is reachable.
#[cfg(feature = "loop-on-panic")]
#[panic_handler]
fn panic(_: &core::panic::PanicInfo<'_>) -> ! {
    loop {
        core::hint::spin_loop();
    }
}
