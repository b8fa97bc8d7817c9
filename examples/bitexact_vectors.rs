//! Writes the bit-exactness vectors the board firmware replays (see `boards/README.md`).
//!
//! The integer laws (linear and sine, P and PI) run here, on the host, over scripted
//! neighbour observations: drifting neighbour clocks, jittered and lost messages, late
//! and stale observations, receptions stamped far in the future, a full table, forgotten neighbours, timer wrap, slew and trim
//! limits. Every input and every output of the real [`entrain::Node`] goes into one
//! binary file (layout documented in `boards/kit/src/vectors.rs`); the firmware feeds
//! the same inputs to the same code on the target and compares every output.
//!
//! Run with `cargo run --example bitexact_vectors -- OUT_FILE`. The output depends on
//! nothing but this file and the crate, so regenerating it must give the committed file
//! byte for byte (`boards/check-vectors.sh` checks that).

use entrain::{Config, Gain, Law, Node, Observation, ObserveError, Phase};
use std::fmt;
use std::process::ExitCode;

const MAGIC: &[u8; 8] = b"ENTRVEC1";
const TAG_OBSERVE: u8 = 1;
const TAG_ADVANCE: u8 = 2;
const TAG_UPDATE: u8 = 3;
const TAG_FORGET: u8 = 4;

/// xorshift64* (Vigna 2016), seeded per scenario: a reproducible script, not randomness.
struct Script(u64);

impl Script {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    /// Uniform-ish in `0..n` (n > 0).
    fn below(&mut self, n: u32) -> u32 {
        (((self.next() >> 32) * u64::from(n)) >> 32) as u32
    }
    /// True with probability `percent / 100`.
    fn chance(&mut self, percent: u32) -> bool {
        self.below(100) < percent
    }
}

/// One simulated neighbour: a free-running clock with its own crystal error.
#[derive(Clone, Copy)]
struct Neighbour {
    id: u16,
    /// Phase at the scenario's start, counts.
    phase0: u32,
    /// Crystal error relative to the node under test, parts per million.
    ppm: i64,
    /// Percent of beacons lost.
    loss_percent: u32,
    /// Local-time window (relative to the scenario start) in which it stays silent.
    silent: Option<(u64, u64)>,
}

impl Neighbour {
    /// Its phase at `elapsed` node ticks after the start: phase0 + elapsed·(1+ppm)/T turns.
    fn phase_at(&self, elapsed: u64, ticks_per_period: u32) -> u32 {
        let num = i128::from(elapsed) * i128::from(1_000_000 + self.ppm) * (1i128 << 32);
        let den = i128::from(ticks_per_period) * 1_000_000;
        (i128::from(self.phase0) + num / den) as u32
    }
}

struct Scenario {
    name: &'static str,
    capacity: u8,
    law: Law,
    ticks_per_period: u32,
    update_ticks: u32,
    kp_q16: u32,
    ki_q16: u32,
    slew_limit: u32,
    trim_limit_ppb: u32,
    timeout_ticks: u32,
    phase0: u32,
    now0: u32,
    trim0_ppb: i32,
    updates: u32,
    neighbours: Vec<Neighbour>,
    /// Largest link delay, ticks (each beacon draws 0..=this).
    max_delay_ticks: u32,
    /// Error of the delay the receiver is told, ± ticks.
    delay_error_ticks: u32,
    /// Percent of updates taken up to ±10 % off the nominal interval.
    jitter_percent: u32,
    /// Percent of observations preceded by an explicit `advance_to` their arrival time.
    advance_percent: u32,
    /// Percent of updates followed by a `forget` of a random neighbour id.
    forget_percent: u32,
    /// Percent of beacons delivered a second time, one interval late (stale copies).
    replay_percent: u32,
    seed: u64,
}

#[derive(Debug)]
enum GenError {
    Usage,
    Config(&'static str, entrain::ConfigError),
    Unsupported(&'static str),
    Write(String, std::io::Error),
}

impl fmt::Display for GenError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GenError::Usage => f.write_str("usage: bitexact_vectors OUT_FILE"),
            GenError::Config(name, e) => write!(f, "scenario {name}: {e}"),
            GenError::Unsupported(name) => {
                write!(
                    f,
                    "scenario {name}: capacity must be 1, 2 or 4 and the law integer"
                )
            }
            GenError::Write(path, e) => write!(f, "cannot write {path}: {e}"),
        }
    }
}

/// The output file and the digest of every output, in the replay's encoding.
struct Out {
    bytes: Vec<u8>,
    digest: u32,
}

impl Out {
    fn input(&mut self, b: &[u8]) {
        self.bytes.extend_from_slice(b);
    }
    fn output(&mut self, b: &[u8]) {
        self.bytes.extend_from_slice(b);
        for &x in b {
            self.digest = (self.digest ^ u32::from(x)).wrapping_mul(0x0100_0193);
        }
    }
}

/// One scripted event, before it is run.
enum Event {
    Observe(Observation),
    Advance(u32),
    Update(u32),
    Forget(u16),
}

fn scenarios() -> Vec<Scenario> {
    let base = |name, seed| Scenario {
        name,
        capacity: 2,
        law: Law::Sine,
        ticks_per_period: 1_000_000,
        update_ticks: 100_000,
        kp_q16: 16_384,
        ki_q16: 2_048,
        slew_limit: 1 << 28,
        trim_limit_ppb: 200_000,
        timeout_ticks: 500_000,
        phase0: 0,
        now0: 0,
        trim0_ppb: 0,
        updates: 400,
        neighbours: Vec::new(),
        max_delay_ticks: 300,
        delay_error_ticks: 0,
        jitter_percent: 0,
        advance_percent: 50,
        forget_percent: 0,
        replay_percent: 0,
        seed,
    };
    let n = |id, turns: f64, ppm| Neighbour {
        id,
        phase0: (turns * 4_294_967_296.0) as i64 as u32,
        ppm,
        loss_percent: 0,
        silent: None,
    };
    vec![
        // A sensor in the middle of a footbridge handrail string: sine PI, two
        // neighbours with opposite crystal errors, its timer wrapping mid-run.
        Scenario {
            capacity: 2,
            phase0: 0x1234_5678,
            now0: u32::MAX - 7_000_000,
            updates: 500,
            neighbours: vec![n(11, 0.31, 38), n(13, -0.22, -41)],
            delay_error_ticks: 20,
            jitter_percent: 30,
            ..base("sine-pi-wrap", 0x5EED_0001)
        },
        // Sine P-only with four neighbours spread to near half a turn, slew limited.
        Scenario {
            capacity: 4,
            ki_q16: 0,
            slew_limit: 1 << 26,
            updates: 400,
            neighbours: vec![
                n(2, 0.49, 5),
                n(3, -0.46, -12),
                n(4, 0.12, 20),
                n(5, 0.27, -3),
            ],
            ..base("sine-p-wide", 0x5EED_0002)
        },
        // Linear PI on a 32.768 kHz watch-crystal timer, lossy links, stale copies.
        Scenario {
            capacity: 2,
            law: Law::Linear,
            ticks_per_period: 32_768,
            update_ticks: 3_277,
            kp_q16: 32_768,
            ki_q16: 3_277,
            timeout_ticks: 16_385,
            phase0: 0x8000_0000,
            updates: 500,
            max_delay_ticks: 12,
            neighbours: vec![
                Neighbour {
                    loss_percent: 20,
                    ..n(7, 0.1, 150)
                },
                Neighbour {
                    loss_percent: 20,
                    ..n(8, -0.05, 90)
                },
            ],
            replay_percent: 10,
            ..base("linear-pi-lossy", 0x5EED_0003)
        },
        // Linear P with a one-entry table: a second neighbour is refused, neighbours are
        // forgotten and evicted during silences.
        Scenario {
            capacity: 1,
            law: Law::Linear,
            ki_q16: 0,
            kp_q16: 19_661,
            updates: 300,
            neighbours: vec![
                Neighbour {
                    silent: Some((8_000_000, 12_000_000)),
                    ..n(21, 0.4, -60)
                },
                n(22, -0.3, 60),
            ],
            forget_percent: 5,
            advance_percent: 80,
            ..base("linear-p-full", 0x5EED_0004)
        },
        // Sine PI with a narrow trim range it must hit, a preset trim, a neighbour that
        // goes silent long enough to be evicted, and jittered update times.
        Scenario {
            capacity: 4,
            trim_limit_ppb: 20_000,
            trim0_ppb: -7_500,
            kp_q16: 26_214,
            ki_q16: 4_000,
            updates: 400,
            neighbours: vec![
                n(31, 0.05, 110),
                Neighbour {
                    silent: Some((10_000_000, 20_000_000)),
                    ..n(32, -0.15, 95)
                },
                n(33, 0.2, 130),
            ],
            delay_error_ticks: 50,
            jitter_percent: 60,
            forget_percent: 2,
            ..base("sine-pi-trim-rail", 0x5EED_0005)
        },
    ]
}

/// The event script of one scenario.
fn script(s: &Scenario) -> Vec<Event> {
    let mut rng = Script(s.seed);
    let mut events = Vec::new();
    let mut elapsed: u64 = 0; // node ticks since start
    // Beacons sent in the previous interval and kept for a late duplicate.
    let mut replays: Vec<Observation> = Vec::new();
    for _ in 0..s.updates {
        let mut interval = u64::from(s.update_ticks);
        if rng.chance(s.jitter_percent) {
            let spread = u64::from(s.update_ticks / 5).max(1);
            interval =
                interval - u64::from(s.update_ticks / 10) + u64::from(rng.below(spread as u32));
        }
        let start = elapsed;
        let end = elapsed + interval;
        // Every neighbour beacons once per interval at a random instant.
        let mut arrivals: Vec<(u64, Observation)> = Vec::new();
        for nb in &s.neighbours {
            if rng.chance(nb.loss_percent) {
                continue;
            }
            let sent = start + u64::from(rng.below(interval as u32 / 2));
            if nb.silent.is_some_and(|(a, b)| sent >= a && sent < b) {
                continue;
            }
            let delay = rng.below(s.max_delay_ticks + 1);
            let told = if s.delay_error_ticks > 0 {
                let e = rng.below(2 * s.delay_error_ticks + 1);
                (i64::from(delay) + i64::from(e) - i64::from(s.delay_error_ticks)).max(0) as u32
            } else {
                delay
            };
            let rx = sent + u64::from(delay);
            let obs = Observation {
                from: nb.id,
                phase: Phase::from_counts(nb.phase_at(sent, s.ticks_per_period)),
                rx_ticks: s.now0.wrapping_add(rx as u32),
                delay_ticks: told,
            };
            arrivals.push((rx, obs));
        }
        for obs in replays.drain(..) {
            // A stale copy arriving now: older than what the node holds.
            arrivals.push((start + 1, obs));
            if obs.rx_ticks % 2 == 1 {
                // And, for every other one, a copy stamped a quarter of the timer's range
                // ahead (a broken receive clock): refused as from the future.
                let ahead = Observation {
                    rx_ticks: obs.rx_ticks.wrapping_add(1 << 30),
                    ..obs
                };
                arrivals.push((start + 1, ahead));
            }
        }
        arrivals.sort_by_key(|&(rx, obs)| (rx, obs.from));
        for &(rx, obs) in &arrivals {
            if rng.chance(s.advance_percent) {
                events.push(Event::Advance(s.now0.wrapping_add(rx as u32)));
            }
            events.push(Event::Observe(obs));
            if rng.chance(s.replay_percent) {
                replays.push(obs);
            }
        }
        events.push(Event::Update(s.now0.wrapping_add(end as u32)));
        if rng.chance(s.forget_percent) {
            let pick = rng.below(s.neighbours.len() as u32 + 1) as usize;
            // One past the end: an id that was never there.
            let id = s.neighbours.get(pick).map_or(999, |nb| nb.id);
            events.push(Event::Forget(id));
        }
        elapsed = end;
    }
    events
}

fn config(s: &Scenario) -> Result<Config, GenError> {
    Config::builder(s.ticks_per_period, s.update_ticks)
        .law(s.law)
        .kp(Gain::from_q16(s.kp_q16))
        .ki(Gain::from_q16(s.ki_q16))
        .slew_limit(s.slew_limit)
        .trim_limit_ppb(s.trim_limit_ppb)
        .timeout_ticks(s.timeout_ticks)
        .build()
        .map_err(|e| GenError::Config(s.name, e))
}

fn write_scenario(s: &Scenario, out: &mut Out) -> Result<u32, GenError> {
    let law = match s.law {
        Law::Linear => 0u8,
        Law::Sine => 1u8,
        _ => return Err(GenError::Unsupported(s.name)),
    };
    let config = config(s)?;
    let events = script(s);
    out.input(&[s.capacity, law]);
    for v in [
        s.ticks_per_period,
        s.update_ticks,
        s.kp_q16,
        s.ki_q16,
        s.slew_limit,
        s.trim_limit_ppb,
        s.timeout_ticks,
        s.phase0,
        s.now0,
    ] {
        out.input(&v.to_le_bytes());
    }
    out.input(&s.trim0_ppb.to_le_bytes());
    out.input(&(events.len() as u32).to_le_bytes());
    match s.capacity {
        1 => run::<1>(s, config, &events, out),
        2 => run::<2>(s, config, &events, out),
        4 => run::<4>(s, config, &events, out),
        _ => Err(GenError::Unsupported(s.name)),
    }
}

fn run<const N: usize>(
    s: &Scenario,
    config: Config,
    events: &[Event],
    out: &mut Out,
) -> Result<u32, GenError> {
    let mut node: Node<N> = Node::new(config, Phase::from_counts(s.phase0), s.now0);
    node.set_trim_ppb(s.trim0_ppb);
    let mut updates = 0;
    // What the script exercised, printed so a reader can see the edge cases are there.
    let (mut full, mut limited, mut evicted, mut forgotten, mut railed) = (0, 0, 0, 0, 0);
    let mut ahead = 0;
    for event in events {
        match *event {
            Event::Observe(obs) => {
                out.input(&[TAG_OBSERVE]);
                out.input(&obs.from.to_le_bytes());
                out.input(&obs.phase.counts().to_le_bytes());
                out.input(&obs.rx_ticks.to_le_bytes());
                out.input(&obs.delay_ticks.to_le_bytes());
                let code: u8 = match node.observe(obs) {
                    Ok(()) => 0,
                    Err(ObserveError::TableFull(_)) => 1,
                    Err(ObserveError::FromTheFuture(_)) => 2,
                    Err(e) => panic!("an observe error the vector format has no code for: {e}"),
                };
                full += u32::from(code == 1);
                ahead += u32::from(code == 2);
                out.output(&[code]);
            }
            Event::Advance(now) => {
                out.input(&[TAG_ADVANCE]);
                out.input(&now.to_le_bytes());
                let wraps = node.advance_to(now);
                out.output(&wraps.to_le_bytes());
                out.output(&node.phase().counts().to_le_bytes());
                out.output(&node.cycles().to_le_bytes());
            }
            Event::Update(now) => {
                out.input(&[TAG_UPDATE]);
                out.input(&now.to_le_bytes());
                let r = node.update(now);
                updates += 1;
                limited += u32::from(r.slew_limited);
                evicted += u32::from(r.evicted);
                railed += u32::from(node.trim_ppb().unsigned_abs() + 1 >= s.trim_limit_ppb);
                out.output(&r.correction.to_le_bytes());
                out.output(&[u8::from(r.slew_limited), r.used, r.evicted]);
                out.output(&r.largest_diff.to_le_bytes());
                out.output(&node.phase().counts().to_le_bytes());
                out.output(&node.trim_raw().to_le_bytes());
                out.output(&node.cycles().to_le_bytes());
            }
            Event::Forget(id) => {
                out.input(&[TAG_FORGET]);
                out.input(&id.to_le_bytes());
                let was = node.forget(id);
                forgotten += u32::from(was);
                out.output(&[u8::from(was)]);
            }
        }
    }
    println!(
        "{:<20} capacity {} {updates:>4} updates: {limited} slew-limited, {railed} at the trim \
         limit, {evicted} evictions, {full} refused (table full), {ahead} refused (from the future), \
         {forgotten} forgotten",
        s.name, s.capacity
    );
    Ok(updates)
}

fn generate() -> Result<(String, Out, u32), GenError> {
    let mut args = std::env::args().skip(1);
    let (Some(path), None) = (args.next(), args.next()) else {
        return Err(GenError::Usage);
    };
    let all = scenarios();
    let mut out = Out {
        bytes: Vec::new(),
        digest: 0x811C_9DC5,
    };
    out.input(MAGIC);
    out.input(&(all.len() as u16).to_le_bytes());
    let mut updates = 0;
    for s in &all {
        updates += write_scenario(s, &mut out)?;
    }
    Ok((path, out, updates))
}

fn main() -> ExitCode {
    let result = generate().and_then(|(path, out, updates)| {
        std::fs::write(&path, &out.bytes).map_err(|e| GenError::Write(path.clone(), e))?;
        println!(
            "wrote {path}: {} bytes, {updates} updates, output digest {:08x}",
            out.bytes.len(),
            out.digest
        );
        Ok(())
    });
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("bitexact_vectors: {e}");
            ExitCode::FAILURE
        }
    }
}
