//! Simulator figures, printed (run with `cargo bench --features assess --bench sim`).
//!
//! Every figure is neighbour-updates per CPU-second of one thread (the thread's own
//! on-CPU time from `/proc/thread-self/schedstat` where Linux offers it, else the wall
//! clock; the line says which), best of three, so the load of other work on the machine
//! moves it little.
//!
//! 1. Headline: the path `entrain check` takes, the Monte Carlo of
//!    `examples/footbridge.toml` (24-node chain, asynchronous updates from random start
//!    instants, ±20 ppm crystals, timestamp jitter, 2 % beacon loss, the PI law), built by
//!    the library's own assessment from the scenario file. The same setup on chains of
//!    2,400 and 10,000 nodes gives the cost per neighbour-update against size (goal:
//!    within 1.2× of the 24-node cost). Goal: ≥ 2.3·10⁸ on the 24-node chain.
//! 2. Secondary: the lock-step shortcut on the same chain (ideal crystals, common start
//!    instants, no timestamp jitter; loss and the PI law kept). Goal: ≥ 4.5·10⁸.
//! 3. Baselines, measured in the same run on the same 24-node chain and rounds: a bare
//!    lock-step loop of a plain `f32` law with `libm::sinf`, the way a firmware author
//!    would write it first (outside the simulator, outside this crate's law), and a bare
//!    lock-step loop of the real integer node (the law's own cost, without the simulator
//!    around it). Each line above is also given as a ratio to the `f32` loop.
//! 4. Wall time of the footbridge Monte Carlo as the command runs it (all threads).

use std::path::Path;
use std::time::Instant;

use entrain::assess::{self, Options};
use entrain::scenario::Scenario;
use entrain::sim::{Crystals, Links, Network, Schedule, Setup, Stamping, monte_carlo};
use entrain::{Node, Observation, Phase};

/// Neighbour-updates per measurement (about a second at the goal rate).
const WORK: u64 = 30_000_000;

/// Quit the bench with a message.
fn fail(what: &str, e: impl std::fmt::Display) -> ! {
    eprintln!("sim bench: {what}: {e}");
    std::process::exit(1);
}

/// This thread's on-CPU time, seconds, if the system tells it.
fn thread_cpu_s() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: f64 = text.split_whitespace().next()?.parse().ok()?;
    Some(ns * 1e-9)
}

/// Whether the figures are CPU time (else wall time).
fn cpu_clock() -> bool {
    thread_cpu_s().is_some()
}

/// Seconds taken by `f` on this thread (CPU time where available), and its result.
fn timed<T>(f: impl FnOnce() -> T) -> (T, f64) {
    let wall = Instant::now();
    let cpu = thread_cpu_s();
    let out = f();
    let s = match (cpu, thread_cpu_s()) {
        (Some(a), Some(b)) => b - a,
        _ => wall.elapsed().as_secs_f64(),
    };
    (out, s.max(1e-9))
}

/// Best of three (after a warm-up) of `f`, which returns `(work, seconds)`: work/s.
fn best(mut f: impl FnMut() -> (u64, f64)) -> f64 {
    let _ = f();
    (0..3)
        .map(|_| {
            let (work, s) = f();
            work as f64 / s
        })
        .fold(0.0, f64::max)
}

/// The simulator's setup for `examples/footbridge.toml`, as `entrain check` builds it.
fn footbridge() -> Setup {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/footbridge.toml");
    let scenario = Scenario::load(&path).unwrap_or_else(|e| fail("footbridge.toml", e));
    let a = assess::assess(scenario.clone(), &Options::predict_only(&scenario), &|_| {})
        .unwrap_or_else(|e| fail("assessment", e));
    assess::setup(
        &scenario,
        &a.network,
        &a.prediction.constants,
        a.prediction.horizon_updates,
    )
    .unwrap_or_else(|e| fail("setup", e))
}

/// Runs of `s` one after another on this thread until about `WORK` neighbour-updates:
/// (neighbour-updates, seconds).
fn sequential_runs(s: &Setup, lock_step: bool) -> (u64, f64) {
    let per_run = s.neighbour_updates_per_run().max(1.0);
    let runs = ((WORK as f64 / per_run).ceil() as u64).max(1);
    timed(|| {
        (0..runs)
            .map(|r| match Network::<2>::new(s, 7, r) {
                Ok(net) => {
                    let mut net = if lock_step { net } else { net.event_driven() };
                    if lock_step && !net.is_lock_step() {
                        fail("lock-step setup", "the network takes the event queue");
                    }
                    net.run(None).stats.neighbour_updates
                }
                Err(e) => fail("network", e),
            })
            .sum()
    })
}

/// The footbridge setup on a chain of `nodes`, with a horizon giving about `WORK`
/// neighbour-updates per run (at least 200 updates).
fn footbridge_chain(base: &Setup, nodes: usize) -> Setup {
    let mut s = base.clone();
    s.links = Links::chain(nodes).unwrap_or_else(|e| fail("chain", e));
    let per_round = 2.0 * (nodes as f64 - 1.0);
    s.horizon_updates = base
        .horizon_updates
        .min((WORK as f64 / per_round) as u64)
        .max(200);
    s
}

/// Chain neighbour lists.
fn chain_adjacency(n: usize) -> Vec<Vec<usize>> {
    (0..n)
        .map(|i| {
            let mut v = Vec::new();
            if i > 0 {
                v.push(i - 1);
            }
            if i + 1 < n {
                v.push(i + 1);
            }
            v
        })
        .collect()
}

/// Seeded start phases in turns within ±0.2 (a small multiplicative generator, so the
/// two bare loops start alike).
fn start_turns(n: usize, run: u64) -> Vec<f64> {
    let mut x = 0x9E37_79B9u32 ^ (run as u32).wrapping_mul(0x85EB_CA6B);
    (0..n)
        .map(|_| {
            x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            (f64::from(x) / 4_294_967_296.0 - 0.5) * 0.4
        })
        .collect()
}

/// Bare lock-step loop of the real node on `adj` with `s`'s configuration, `rounds`
/// rounds per run, runs until about `WORK`.
fn bare_integer(s: &Setup, adj: &[Vec<usize>], rounds: u64) -> (u64, f64) {
    let c = s.config;
    let m = c.update_ticks();
    let per_run = rounds * adj.iter().map(|a| a.len() as u64).sum::<u64>();
    let runs = WORK.div_ceil(per_run.max(1));
    timed(|| {
        let mut work = 0u64;
        for r in 0..runs {
            let mut nodes: Vec<Node<2>> = start_turns(adj.len(), r)
                .iter()
                .map(|&p| Node::new(c, Phase::from_turns(p as f32), 0))
                .collect();
            let mut sent: Vec<Phase> = nodes.iter().map(|n| n.phase()).collect();
            for round in 1..=rounds {
                let now = (round * u64::from(m)) as u32;
                for (node, neighbours) in nodes.iter_mut().zip(adj) {
                    node.advance_to(now);
                    for &j in neighbours {
                        let obs = Observation {
                            from: j as u16,
                            phase: sent[j],
                            rx_ticks: now.wrapping_sub(m),
                            delay_ticks: 0,
                        };
                        let _ = node.observe(obs);
                    }
                    work += u64::from(node.update(now).used);
                }
                for (p, n) in sent.iter_mut().zip(&nodes) {
                    *p = n.phase();
                }
                std::hint::black_box(spread(&sent, |p| f64::from(p.counts()) / 4_294_967_296.0));
            }
        }
        work
    })
}

/// Largest minus smallest wrapped difference to the first element, turns (the
/// simulator's sample, in its cheap form).
fn spread<T: Copy>(v: &[T], turns: impl Fn(T) -> f64) -> f64 {
    let Some(&first) = v.first() else {
        return 0.0;
    };
    let f = turns(first);
    let (lo, hi) = v.iter().fold((0f64, 0f64), |(lo, hi), &p| {
        let d = turns(p) - f;
        let d = d - (d + 0.5).floor();
        (lo.min(d), hi.max(d))
    });
    hi - lo
}

/// Bare lock-step loop of a plain `f32` law with `libm::sinf`: phases in turns, the
/// same PI structure (phase step kp·Σ sin(2πΔ)/2π, rate trim ki·Σ …).
fn bare_f32(s: &Setup, adj: &[Vec<usize>], rounds: u64) -> (u64, f64) {
    let (kp, ki) = (s.config.kp().to_f32(), s.config.ki().to_f32());
    let advance = s.config.update_ticks() as f32 / s.config.ticks_per_period() as f32;
    let tau = core::f32::consts::TAU;
    let per_run = rounds * adj.iter().map(|a| a.len() as u64).sum::<u64>();
    let runs = WORK.div_ceil(per_run.max(1));
    timed(|| {
        let mut work = 0u64;
        for r in 0..runs {
            let mut phase: Vec<f32> = start_turns(adj.len(), r)
                .iter()
                .map(|&p| p as f32)
                .collect();
            let mut trim = vec![0f32; adj.len()];
            let mut sent = phase.clone();
            for _ in 0..rounds {
                for (i, neighbours) in adj.iter().enumerate() {
                    let own = phase[i] + advance + trim[i];
                    let mut sum = 0f32;
                    for &j in neighbours {
                        let diff = sent[j] + advance + trim[i] - own;
                        sum += libm::sinf(tau * diff) / tau;
                        work += 1;
                    }
                    let p = own + kp * sum;
                    phase[i] = p - libm::floorf(p);
                    trim[i] += ki * sum;
                }
                sent.copy_from_slice(&phase);
                std::hint::black_box(spread(&sent, f64::from));
            }
        }
        work
    })
}

fn main() {
    let clock = if cpu_clock() {
        "CPU-second of one thread"
    } else {
        "wall-second of one thread (no per-thread CPU clock here)"
    };
    println!("entrain simulator bench: neighbour-updates per {clock}, best of 3");
    let base = footbridge();
    let rounds = base.horizon_updates;
    let adj = chain_adjacency(base.links.nodes());
    let f32_rate = best(|| bare_f32(&base, &adj, rounds));
    let int_rate = best(|| bare_integer(&base, &adj, rounds));
    let line = |name: &str, rate: f64, goal: &str| {
        println!(
            "{name:<46} {:>7.1}e6/s  {:>5.2}× the f32 loop  {goal}",
            rate / 1e6,
            rate / f32_rate
        );
    };
    let mut per_size = Vec::new();
    for nodes in [24usize, 2_400, 10_000] {
        let s = if nodes == base.links.nodes() {
            base.clone()
        } else {
            footbridge_chain(&base, nodes)
        };
        let rate = best(|| sequential_runs(&s, false));
        let name = format!(
            "command path, chain {nodes} ({} updates/run)",
            s.horizon_updates
        );
        let goal = if nodes == 24 { "goal ≥ 230e6/s" } else { "" };
        line(&name, rate, goal);
        per_size.push((nodes, rate));
    }
    if let Some(&(_, small)) = per_size.first() {
        for &(nodes, rate) in &per_size[1..] {
            println!(
                "  cost per neighbour-update, chain {nodes} against chain 24: {:.2}× (goal ≤ 1.20×)",
                small / rate
            );
        }
    }
    let mut lock = base.clone();
    lock.crystals = Crystals::Identical { ppm: 0.0 };
    lock.schedule = Schedule {
        random_start: false,
        jitter_ticks: 0,
    };
    lock.beacons.timestamp_jitter_ticks = 0;
    lock.beacons.two_way = false;
    lock.beacons.stamping = Stamping::Nearest;
    let rate = best(|| sequential_runs(&lock, true));
    line(
        "lock-step shortcut, chain 24 (loss, PI kept)",
        rate,
        "goal ≥ 450e6/s",
    );
    line("baseline: bare loop, real integer node", int_rate, "");
    line("baseline: bare loop, f32 law + libm::sinf", f32_rate, "");

    // As the command runs it: every thread, the scenario's own runs scaled up.
    let mc = &base;
    let runs = 240;
    let _ = monte_carlo(mc, 24, 0, &|_| {});
    let t = Instant::now();
    match monte_carlo(mc, runs, 2024, &|_| {}) {
        Ok(sum) => {
            let s = t.elapsed().as_secs_f64();
            println!(
                "footbridge Monte Carlo, {runs} runs on {} threads: {s:.2} s wall, {:.1}e6 neighbour-updates, {:.1}e6/s per thread (wall)",
                rayon::current_num_threads(),
                sum.neighbour_updates as f64 / 1e6,
                sum.neighbour_updates as f64 / s / rayon::current_num_threads() as f64 / 1e6
            );
        }
        Err(e) => fail("Monte Carlo", e),
    }
}
