//! Instructions per [`Node::update`], counted under `-icount shift=0`.
//!
//! For each law and for 1, 2 and 4 neighbours, one loop runs twice, 1,000 iterations
//! each, on a fresh node: every iteration hands the node its neighbours' observations,
//! then calls a body through a function pointer, an empty function in the bare arm and
//! one that calls `update` in the measured arm. The difference, divided by the
//! iterations, is what one update costs beyond a call to an empty function (advance,
//! eviction check, the neighbour loop, the PI step, the trim update, and the call's own
//! entry and exit less the empty function's). Both arms run the same machine
//! code: the loop is one `#[inline(never)]` function and only the pointer it is given
//! differs, so code placement and register allocation cannot differ between them (they
//! did when each arm was its own loop: two textually identical loops differed by up to
//! 10 instructions per update on the M4F). Observations are stamped one update interval
//! after the node's own clock ([`Node::now_ticks`]), so `observe` takes the same
//! (accepting) path in both arms and cancels, though the bare node never advances.
//! The A/A line runs the bare arm against itself and prints the difference per update,
//! the harness's own bias; a second line runs the bare arm on a node the measured arm
//! has driven against a fresh node, whether `observe` costs the same on both arms'
//! nodes. Both are zero up to SysTick's resolution (one tick is 40 instructions on the
//! M4F, 62.5 on the M0, so each arm is read to within one tick, 0.04 or 0.06 per update
//! over 1,000 iterations), so nothing is subtracted from the figures.
//! Differences are spread over the whole circle (16 fixed values), so every branch of
//! every law is taken; the slew limit is set out of reach so the integral step always
//! runs (the dearer path).

use crate::icount::InstructionCounter;
use core::hint::black_box;
use cortex_m_semihosting::hprintln;
use entrain::{Config, Gain, Law, Node, Observation, Phase};

/// Iterations per measurement loop.
pub const ITERATIONS: u32 = 1_000;
/// Neighbour counts measured.
pub const NEIGHBOURS: [usize; 3] = [1, 2, 4];

/// The laws this build can measure, with their table names and `cost:` line keys.
pub fn laws() -> &'static [(Law, &'static str, &'static str)] {
    &[
        (Law::Sine, "sine (integer)", "sine"),
        (Law::Linear, "linear", "linear"),
        #[cfg(feature = "f32-laws")]
        (Law::SineLibm, "sine f32 libm", "libm"),
        #[cfg(feature = "f32-laws")]
        (Law::SineMicromath, "sine f32 micromath", "micromath"),
    ]
}

fn config(law: Law) -> Option<Config> {
    Config::builder(1_000_000, 100_000)
        .law(law)
        .kp(Gain::from_q16(16_384))
        .ki(Gain::from_q16(2_048))
        .slew_limit(i32::MAX as u32)
        .build()
        .ok()
}

/// Difference number `m` of 16, spread over the whole circle (golden-ratio stride).
fn offset(m: u32) -> i32 {
    (m & 15).wrapping_add(1).wrapping_mul(0x9E37_79B9) as i32
}

#[inline(always)]
fn hand_over(node: &mut Node<4>, k: usize, i: u32, rx_ticks: u32) {
    let here = node.phase();
    for j in 0..k {
        let m = i.wrapping_mul(k as u32).wrapping_add(j as u32);
        let obs = Observation {
            from: j as u16,
            phase: here.wrapping_add(offset(m)),
            rx_ticks,
            delay_ticks: 0,
        };
        let _ = black_box(node.observe(black_box(obs)));
    }
}

/// What an iteration does after the hand-over, given the node and the stamp.
type Body = fn(&mut Node<4>, u32);

/// The bare arm's body: nothing.
fn idle(_node: &mut Node<4>, _now_ticks: u32) {}

/// The measured arm's body: one update at the stamp.
fn update(node: &mut Node<4>, now_ticks: u32) {
    black_box(node.update(now_ticks));
}

/// Ticks of `iterations` iterations of the one measurement loop on `node`: hand over
/// `k` observations stamped one update interval after the node's clock, then call
/// `body` with that stamp. Never inlined, and `body` is hidden from the optimiser, so
/// every arm runs this same machine code.
#[inline(never)]
fn run(
    counter: &InstructionCounter,
    node: &mut Node<4>,
    k: usize,
    iterations: u32,
    body: Body,
) -> u32 {
    let step = node.config().update_ticks();
    let start = counter.now();
    for i in 0..iterations {
        let now = node.now_ticks().wrapping_add(step);
        hand_over(node, k, i, now);
        body(node, now);
    }
    let end = counter.now();
    InstructionCounter::ticks(start, end)
}

/// The loop's bare arm (empty body), `iterations` long, on `node`.
fn bare(counter: &InstructionCounter, node: &mut Node<4>, k: usize, iterations: u32) -> u32 {
    run(counter, node, k, iterations, black_box(idle as Body))
}

/// The loop's measured arm (one update per iteration), `iterations` long, on `node`.
fn measured(counter: &InstructionCounter, node: &mut Node<4>, k: usize, iterations: u32) -> u32 {
    run(counter, node, k, iterations, black_box(update as Body))
}

/// A node for `law` at phase zero and tick 0.
fn fresh(law: Law) -> Option<Node<4>> {
    Some(Node::new(config(law)?, Phase::ZERO, 0))
}

/// Ticks of `iterations` updates with `k` neighbours (the loop calling `update` minus
/// the same loop calling an empty function, each on a fresh node).
pub fn update_ticks(
    counter: &InstructionCounter,
    law: Law,
    k: usize,
    iterations: u32,
) -> Option<u32> {
    let without = bare(counter, &mut fresh(law)?, k, iterations);
    let with = measured(counter, &mut fresh(law)?, k, iterations);
    Some(with.saturating_sub(without))
}

/// Ticks of the bare arm minus the bare arm again, each on a fresh node, `iterations`
/// each, with `k` neighbours: the harness's A/A difference (may be negative).
pub fn aa_ticks(counter: &InstructionCounter, k: usize, iterations: u32) -> Option<i64> {
    let first = bare(counter, &mut fresh(Law::Sine)?, k, iterations);
    let second = bare(counter, &mut fresh(Law::Sine)?, k, iterations);
    Some(i64::from(second) - i64::from(first))
}

/// Ticks of the bare arm on a node that the measured arm has driven for `iterations`
/// updates (advanced clock, phase, trim) minus the bare arm on a fresh node: whether
/// `observe` costs the same on the measured arm's node as on the bare arm's, the one
/// thing besides the body that differs between the arms (may be negative).
pub fn driven_ticks(counter: &InstructionCounter, k: usize, iterations: u32) -> Option<i64> {
    let mut driven = fresh(Law::Sine)?;
    measured(counter, &mut driven, k, iterations);
    let on_fresh = bare(counter, &mut fresh(Law::Sine)?, k, iterations);
    let on_driven = bare(counter, &mut driven, k, iterations);
    Some(i64::from(on_driven) - i64::from(on_fresh))
}

/// `x / 2^16` with one decimal, as text parts.
struct Tenths(i64);

impl core::fmt::Display for Tenths {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        let tenths = (self.0.saturating_mul(10) + (1 << 15)).div_euclid(1 << 16);
        let sign = if tenths < 0 { "-" } else { "" };
        let t = tenths.unsigned_abs();
        let mut text = Text::default();
        core::fmt::write(&mut text, format_args!("{sign}{}.{}", t / 10, t % 10))?;
        // Pad as the caller asked (write! alone ignores width).
        f.pad(text.as_str())
    }
}

/// A 24-byte text buffer for one number.
#[derive(Default)]
struct Text {
    buf: [u8; 24],
    len: usize,
}

impl Text {
    fn as_str(&self) -> &str {
        self.buf
            .get(..self.len)
            .and_then(|b| core::str::from_utf8(b).ok())
            .unwrap_or("?")
    }
}

impl core::fmt::Write for Text {
    fn write_str(&mut self, s: &str) -> core::fmt::Result {
        let end = self.len.checked_add(s.len()).ok_or(core::fmt::Error)?;
        let dst = self.buf.get_mut(self.len..end).ok_or(core::fmt::Error)?;
        dst.copy_from_slice(s.as_bytes());
        self.len = end;
        Ok(())
    }
}

/// Goals for the integer sine law on one core, instructions per update.
pub struct Goals {
    /// Short core name for the `cost:` lines (`M0`, `M4F`).
    pub core: &'static str,
    /// Fixed part.
    pub fixed: u32,
    /// Per neighbour.
    pub per_neighbour: u32,
}

/// Measure every law and print the table, then one `cost:` line per law; `core` names
/// the core and `goals` are the goals for the integer sine law.
pub fn print_table(counter: &mut InstructionCounter, core: &str, goals: &Goals) {
    let cal = counter.calibrate();
    hprintln!(
        "calibration: 200000 instructions = {} SysTick ticks -> {} instructions per tick",
        cal,
        Tenths(i64::from(counter.per_tick_q16()))
    );
    hprintln!(
        "size_of::<Node<1>>() = {} bytes",
        core::mem::size_of::<Node<1>>()
    );
    hprintln!(
        "size_of::<Node<2>>() = {} bytes",
        core::mem::size_of::<Node<2>>()
    );
    hprintln!(
        "size_of::<Node<4>>() = {} bytes",
        core::mem::size_of::<Node<4>>()
    );
    hprintln!(
        "instructions per Node::update, {} ({} updates per figure)",
        core,
        ITERATIONS
    );
    hprintln!(
        "{:<20} {:>9} {:>9} {:>9} | {:>13} {:>9}",
        "law",
        "1 nbr",
        "2 nbrs",
        "4 nbrs",
        "per neighbour",
        "fixed"
    );
    let mut lines = [(0i64, 0i64); 4];
    for (&(law, name, _), line) in laws().iter().zip(lines.iter_mut()) {
        let mut q16 = [0i64; 3];
        for (slot, &k) in q16.iter_mut().zip(NEIGHBOURS.iter()) {
            let ticks = update_ticks(counter, law, k, ITERATIONS).unwrap_or(0);
            *slot = (counter.instructions_q16(u64::from(ticks)) / u64::from(ITERATIONS)) as i64;
        }
        // Least squares through (1, c1), (2, c2), (4, c4): k̄ = 7/3, Σ(k − k̄)² = 14/3.
        // slope = Σ(k − k̄)·c / (14/3) = (−4·c1 − c2 + 5·c4) / 14.
        let [c1, c2, c4] = q16;
        let slope = (-4 * c1 - c2 + 5 * c4) / 14;
        let fixed = (c1 + c2 + c4) / 3 - slope * 7 / 3;
        *line = (fixed, slope);
        let verdict = if law == Law::Sine {
            if slope <= i64::from(goals.per_neighbour) << 16
                && fixed <= i64::from(goals.fixed) << 16
            {
                " (goal met)"
            } else {
                " (GOAL MISSED)"
            }
        } else {
            ""
        };
        hprintln!(
            "{:<20} {:>9} {:>9} {:>9} | {:>13} {:>9}{}",
            name,
            Tenths(c1),
            Tenths(c2),
            Tenths(c4),
            Tenths(slope),
            Tenths(fixed),
            verdict
        );
    }
    hprintln!(
        "goal for the integer sine law on {}: <= {} fixed, <= {} per neighbour",
        core,
        goals.fixed,
        goals.per_neighbour
    );
    let per_update = |ticks: i64| {
        let q16 = counter.instructions_q16(ticks.unsigned_abs()) as i64;
        (if ticks < 0 { -q16 } else { q16 }) / i64::from(ITERATIONS)
    };
    let aa = NEIGHBOURS.map(|k| per_update(aa_ticks(counter, k, ITERATIONS).unwrap_or(0)));
    hprintln!(
        "A/A (bare arm against itself, same loop code, per update): {} {} {}",
        Tenths(aa[0]),
        Tenths(aa[1]),
        Tenths(aa[2])
    );
    let driven = NEIGHBOURS.map(|k| per_update(driven_ticks(counter, k, ITERATIONS).unwrap_or(0)));
    hprintln!(
        "bare arm on a node driven by {} updates against a fresh node (per update): {} {} {}",
        ITERATIONS,
        Tenths(driven[0]),
        Tenths(driven[1]),
        Tenths(driven[2])
    );
    for (&(_, _, key), &(fixed, slope)) in laws().iter().zip(lines.iter()) {
        hprintln!(
            "cost: core={} law={} fixed={} per_neighbour={} goal_fixed={} goal_per_neighbour={}",
            goals.core,
            key,
            Tenths(fixed),
            Tenths(slope),
            goals.fixed,
            goals.per_neighbour
        );
    }
}
