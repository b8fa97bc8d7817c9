//! Cost of reading and writing a beacon frame, version 1 against version 2: CRC-checked
//! decode against decode + SipHash-2-4 verify, encode against signed encode, side by side
//! in one run, with the ratios. Baseline: the version-1 frame (CRC only), measured in the
//! same run.
//!
//! Run with `cargo bench --bench beacon --features mac`. Each figure is the best of
//! several rounds (the least disturbed by other work on the machine), in nanoseconds per
//! frame on the host; on a microcontroller multiply by the clock ratio only as a first
//! guess and measure on target.

use std::hint::black_box;
use std::time::Instant;

use entrain::beacon::{
    Beacon, FRAME_LEN, FRAME_V2_LEN, Flags, Frame, FrameEcho, FrameV2, HEADER_LEN, HEADER_V2_LEN,
    MAX_FRAME_LEN, NetworkKey,
};

const ROUNDS: usize = 7;
const PER_ROUND: u32 = 400_000;

/// Best nanoseconds per call of `f` over `ROUNDS` rounds of `PER_ROUND` calls.
fn best_ns_per_call(mut f: impl FnMut(u32) -> u32) -> f64 {
    let mut best = f64::INFINITY;
    let mut sink = 0u32;
    for _ in 0..ROUNDS {
        let start = Instant::now();
        for i in 0..PER_ROUND {
            sink = sink.wrapping_add(f(black_box(i)));
        }
        let ns = start.elapsed().as_nanos() as f64 / f64::from(PER_ROUND);
        best = best.min(ns);
    }
    black_box(sink);
    best
}

/// The figures of one frame version.
struct Costs {
    decode_ns: f64,
    verify_ns: f64,
    encode_ns: f64,
    encode_signed_ns: f64,
}

fn costs(
    plain: &[u8],
    signed: &[u8],
    key: &NetworkKey,
    mut encode: impl FnMut(u32, &mut [u8]) -> usize,
    mut encode_signed: impl FnMut(u32, &mut [u8]) -> usize,
) -> Costs {
    let mut out = [0u8; MAX_FRAME_LEN];
    let decode_ns = best_ns_per_call(|_| match Beacon::decode(black_box(plain)) {
        Ok(f) => f.frame().seq,
        Err(_) => 0,
    });
    let verify_ns =
        best_ns_per_call(
            |_| match Beacon::decode_verified(black_box(signed), black_box(key)) {
                Ok(f) => f.frame().seq,
                Err(_) => 0,
            },
        );
    let encode_ns = best_ns_per_call(|i| {
        let n = encode(i, black_box(&mut out));
        n as u32 ^ u32::from(out[n - 1])
    });
    let encode_signed_ns = best_ns_per_call(|i| {
        let n = encode_signed(i, black_box(&mut out));
        n as u32 ^ u32::from(out[n - 1])
    });
    Costs {
        decode_ns,
        verify_ns,
        encode_ns,
        encode_signed_ns,
    }
}

fn main() {
    let key = NetworkKey::from_bytes([
        0x3d, 0x91, 0x0e, 0xc4, 0x57, 0xa8, 0x22, 0xf6, 0x8b, 0x10, 0x6f, 0xd3, 0x49, 0xe5, 0x7a,
        0x0c,
    ]);
    let frame = Frame {
        from: 12,
        seq: 90_210,
        phase_counts: 0x1234_5678,
        trim_ppb: -7_300,
        flags: Flags::PINNED,
    };
    let v2 = FrameV2 {
        base: frame,
        tx_ticks: 4_000_123,
        echo: FrameEcho {
            to: 11,
            tx_ticks: 3_950_004,
            held_ticks: 41_877,
        },
    };
    let v1 = costs(
        &frame.to_bytes(),
        &frame.to_bytes_signed(&key),
        &key,
        |i, out| Frame { seq: i, ..frame }.encode(out).unwrap_or(1),
        |i, out| {
            Frame { seq: i, ..frame }
                .encode_signed(&key, out)
                .unwrap_or(1)
        },
    );
    let v2c = costs(
        &v2.to_bytes(),
        &v2.to_bytes_signed(&key),
        &key,
        |i, out| FrameV2 { tx_ticks: i, ..v2 }.encode(out).unwrap_or(1),
        |i, out| {
            FrameV2 { tx_ticks: i, ..v2 }
                .encode_signed(&key, out)
                .unwrap_or(1)
        },
    );

    println!(
        "beacon frame cost (Beacon::decode / decode_verified / encode), best of {ROUNDS} x {PER_ROUND} calls, ns/frame"
    );
    println!(
        "  {:<34} {:>10} {:>10} {:>8}",
        "", "version 1", "version 2", "v2 / v1"
    );
    println!(
        "  {:<34} {:>10} {:>10}",
        "frame bytes (header bytes tagged)",
        format!("{FRAME_LEN} ({HEADER_LEN})"),
        format!("{FRAME_V2_LEN} ({HEADER_V2_LEN})")
    );
    let rows = [
        ("decode (CRC-32C)", v1.decode_ns, v2c.decode_ns),
        ("decode + SipHash-2-4 verify", v1.verify_ns, v2c.verify_ns),
        ("encode (CRC-32C)", v1.encode_ns, v2c.encode_ns),
        (
            "encode + SipHash-2-4 tag",
            v1.encode_signed_ns,
            v2c.encode_signed_ns,
        ),
    ];
    for (name, a, b) in rows {
        println!("  {name:<34} {a:>10.1} {b:>10.1} {:>8.2}", b / a);
    }
    println!(
        "  ratio verify / decode              {:>10.2} {:>10.2}",
        v1.verify_ns / v1.decode_ns,
        v2c.verify_ns / v2c.decode_ns
    );
    println!(
        "  ratio signed / plain encode        {:>10.2} {:>10.2}",
        v1.encode_signed_ns / v1.encode_ns,
        v2c.encode_signed_ns / v2c.encode_ns
    );
}
