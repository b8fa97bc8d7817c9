//! Cost of reading a beacon frame: CRC-checked decode against decode + SipHash-2-4 verify,
//! side by side in one run, with the ratio.
//!
//! Run with `cargo bench --bench beacon --features mac`. Each figure is the best of
//! several rounds (the least disturbed by other work on the machine), in nanoseconds per
//! frame on the host; on a microcontroller multiply by the clock ratio only as a first
//! guess and measure on target.

use std::hint::black_box;
use std::time::Instant;

use entrain::beacon::{FRAME_LEN, Flags, Frame, NetworkKey};

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
    let plain: [u8; FRAME_LEN] = frame.to_bytes();
    let signed: [u8; FRAME_LEN] = frame.to_bytes_signed(&key);
    let mut out = [0u8; FRAME_LEN];

    let decode_ns = best_ns_per_call(|_| match Frame::decode(black_box(&plain)) {
        Ok(f) => f.seq,
        Err(_) => 0,
    });
    let verify_ns =
        best_ns_per_call(
            |_| match Frame::decode_verified(black_box(&signed), black_box(&key)) {
                Ok(f) => f.seq,
                Err(_) => 0,
            },
        );
    let encode_ns = best_ns_per_call(|i| {
        let f = Frame { seq: i, ..frame };
        match f.encode(black_box(&mut out)) {
            Ok(n) => n as u32 ^ u32::from(out[24]),
            Err(_) => 0,
        }
    });
    let encode_signed_ns = best_ns_per_call(|i| {
        let f = Frame { seq: i, ..frame };
        match f.encode_signed(black_box(&key), black_box(&mut out)) {
            Ok(n) => n as u32 ^ u32::from(out[24]),
            Err(_) => 0,
        }
    });

    println!("beacon frame cost, {FRAME_LEN}-byte frame, best of {ROUNDS} x {PER_ROUND} calls");
    println!("  decode (CRC-32C)               {decode_ns:8.1} ns/frame");
    println!("  decode + SipHash-2-4 verify    {verify_ns:8.1} ns/frame");
    println!(
        "  ratio verify / decode          {:8.2}",
        verify_ns / decode_ns
    );
    println!("  encode (CRC-32C)               {encode_ns:8.1} ns/frame");
    println!("  encode + SipHash-2-4 tag       {encode_signed_ns:8.1} ns/frame");
    println!(
        "  ratio signed / plain encode    {:8.2}",
        encode_signed_ns / encode_ns
    );
}
