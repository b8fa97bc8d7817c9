//! Simulator figures, printed (run with `cargo bench --features sim --bench sim`).
//!
//! 1. Neighbour-updates per second across all cores: the real integer node law stepped
//!    by the simulator, and — side by side, on the same topology, schedule and rounds —
//!    a bare lock-step loop of the real node and a bare loop of a plain `f32` law with
//!    `libm::sinf`, the way a firmware author would write it first. Ratios in the same
//!    run. Goal: ≥ 3·10⁸ neighbour-updates/s for the integer law.
//! 2. Wall time of 1,000 Monte-Carlo runs of a 24-node chain, each to its 3,000-update
//!    horizon (runs no longer stop at the first entry into the band: settling is judged
//!    over the whole run). The goal of < 1 s was set for runs that stopped at lock.

use std::time::Instant;

use entrain::plan::Topology;
use entrain::sim::{
    Crystals, Links, Network, Schedule, SettleCriterion, Setup, StartPhases, monte_carlo,
};
use entrain::{Config, Gain, Law, Node, Observation, Phase};
use rayon::prelude::*;

/// Timer ticks per update and per phase turn.
const UPDATE_TICKS: u32 = 10_000;
const PERIOD_TICKS: u32 = 10_000;

fn config() -> Config {
    let built = Config::builder(PERIOD_TICKS, UPDATE_TICKS)
        .law(Law::Sine)
        .kp(Gain::from_q16(19_661)) // 0.3
        .ki(Gain::from_q16(1_311)) // 0.02
        .build();
    match built {
        Ok(c) => c,
        Err(e) => {
            eprintln!("bench configuration refused: {e}");
            std::process::exit(1);
        }
    }
}

fn links(t: Topology) -> Links {
    match Links::from_topology(&t) {
        Ok(l) => l,
        Err(e) => {
            eprintln!("bench topology refused: {e}");
            std::process::exit(1);
        }
    }
}

/// Neighbour lists of a topology.
fn adjacency(l: &Links) -> Vec<Vec<usize>> {
    let mut adj = vec![Vec::new(); l.nodes()];
    for &(a, b) in l.pairs() {
        adj[a].push(b);
        adj[b].push(a);
    }
    adj
}

/// Seeded start phases in turns within ±0.2 (a small multiplicative generator, so the
/// three loops start alike).
fn start_turns(n: usize, run: usize) -> Vec<f64> {
    let mut x = 0x9E37_79B9u32 ^ (run as u32).wrapping_mul(0x85EB_CA6B);
    (0..n)
        .map(|_| {
            x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            (f64::from(x) / 4_294_967_296.0 - 0.5) * 0.4
        })
        .collect()
}

/// The simulator: lock-step network of real nodes, `rounds` samples per run.
fn simulator<const N: usize>(l: &Links, runs: usize, rounds: u64) -> (u64, f64) {
    let mut s = Setup::new(l.clone(), config(), 1e6);
    s.start = StartPhases::Uniform { spread_turns: 0.4 };
    s.settle = SettleCriterion {
        tolerance_turns: 1e-9,
    };
    s.horizon_updates = rounds + 10;
    let t = Instant::now();
    let work: u64 = (0..runs)
        .into_par_iter()
        .map(|r| match Network::<N>::new(&s, 1, r as u64) {
            Ok(mut net) => {
                for _ in 0..rounds {
                    net.step();
                }
                net.stats().neighbour_updates
            }
            Err(_) => 0,
        })
        .sum();
    (work, t.elapsed().as_secs_f64())
}

/// A bare lock-step loop of the real node: every round, each node observes its
/// neighbours' phases of the previous round, then updates.
fn bare_integer<const N: usize>(adj: &[Vec<usize>], runs: usize, rounds: u64) -> (u64, f64) {
    let c = config();
    let t = Instant::now();
    let work: u64 = (0..runs)
        .into_par_iter()
        .map(|r| {
            let mut nodes: Vec<Node<N>> = start_turns(adj.len(), r)
                .iter()
                .map(|&p| Node::new(c, Phase::from_turns(p as f32), 0))
                .collect();
            let mut sent: Vec<Phase> = nodes.iter().map(|n| n.phase()).collect();
            let mut work = 0u64;
            for round in 1..=rounds {
                let now = (round * u64::from(UPDATE_TICKS)) as u32;
                for (node, neighbours) in nodes.iter_mut().zip(adj) {
                    node.advance_to(now);
                    for &j in neighbours {
                        let obs = Observation {
                            from: j as u16,
                            phase: sent[j],
                            rx_ticks: now.wrapping_sub(UPDATE_TICKS),
                            delay_ticks: 0,
                        };
                        let _ = node.observe(obs);
                    }
                    work += u64::from(node.update(now).used);
                }
                for (s, n) in sent.iter_mut().zip(&nodes) {
                    *s = n.phase();
                }
                // The spread, as the simulator samples it.
                let first = sent[0];
                let (lo, hi) = sent.iter().fold((0i32, 0i32), |(lo, hi), p| {
                    let d = p.diff(first);
                    (lo.min(d), hi.max(d))
                });
                std::hint::black_box(hi.wrapping_sub(lo));
            }
            work
        })
        .sum();
    (work, t.elapsed().as_secs_f64())
}

/// The status quo: a plain `f32` law with `libm::sinf`, phases in turns, the same PI
/// structure (phase step kp·Σ sin(2πΔ)/2π, rate trim ki·Σ …), the same lock-step rounds.
fn bare_f32(adj: &[Vec<usize>], runs: usize, rounds: u64) -> (u64, f64) {
    let (kp, ki) = (0.3f32, 0.02f32);
    let advance = UPDATE_TICKS as f32 / PERIOD_TICKS as f32;
    let tau = core::f32::consts::TAU;
    let t = Instant::now();
    let work: u64 = (0..runs)
        .into_par_iter()
        .map(|r| {
            let mut phase: Vec<f32> = start_turns(adj.len(), r)
                .iter()
                .map(|&p| p as f32)
                .collect();
            let mut trim = vec![0f32; adj.len()];
            let mut sent = phase.clone();
            let mut work = 0u64;
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
                let first = sent[0];
                let (lo, hi) = sent.iter().fold((0f32, 0f32), |(lo, hi), p| {
                    let d = p - first;
                    let d = d - libm::floorf(d + 0.5);
                    (lo.min(d), hi.max(d))
                });
                std::hint::black_box(hi - lo);
            }
            work
        })
        .sum();
    (work, t.elapsed().as_secs_f64())
}

fn best<F: FnMut() -> (u64, f64)>(mut f: F) -> f64 {
    let _ = f(); // warm up
    (0..3)
        .map(|_| {
            let (work, s) = f();
            work as f64 / s
        })
        .fold(0.0, f64::max)
}

fn throughput<const N: usize>(name: &str, t: Topology, rounds: u64) {
    let l = links(t);
    let adj = adjacency(&l);
    let runs = 4 * rayon::current_num_threads();
    let sim = best(|| simulator::<N>(&l, runs, rounds));
    let int = best(|| bare_integer::<N>(&adj, runs, rounds));
    let flt = best(|| bare_f32(&adj, runs, rounds));
    println!(
        "{name:<18} simulator {:>6.1}e6/s | bare loop: integer law {:>6.1}e6/s, f32+sinf {:>6.1}e6/s | integer/f32 {:.2}, simulator/f32 {:.2}",
        sim / 1e6,
        int / 1e6,
        flt / 1e6,
        int / flt,
        sim / flt
    );
}

fn monte_carlo_chain() {
    // A footbridge handrail string of 24 sensors: ±20 ppm crystals, independent start
    // instants, update jitter, start phases within a fifth of a turn.
    let mut s = Setup::new(links(Topology::Chain { nodes: 24 }), config(), 1e6);
    s.crystals = Crystals::Uniform {
        tolerance_ppm: 20.0,
    };
    s.schedule = Schedule {
        random_start: true,
        jitter_ticks: 100,
    };
    s.start = StartPhases::Uniform { spread_turns: 0.2 };
    s.settle = SettleCriterion {
        tolerance_turns: 1e-3,
    };
    s.horizon_updates = 3_000;
    let _ = monte_carlo(&s, 50, 0, &|_| {}); // warm up
    let mut times = Vec::new();
    let mut last = None;
    for seed in 1..=3 {
        let t = Instant::now();
        let summary = monte_carlo(&s, 1_000, seed, &|_| {});
        times.push(t.elapsed().as_secs_f64());
        last = summary.ok();
    }
    let best = times.iter().copied().fold(f64::INFINITY, f64::min);
    match last {
        Some(sum) => {
            let settle = sum.settle_updates.map_or(f64::NAN, |p| p.p50);
            let entry = sum.first_entry_updates.map_or(f64::NAN, |p| p.p50);
            let floor = sum.noise_floor_turns.map_or(f64::NAN, |f| f.p99);
            println!(
                "1,000 runs of a 24-node chain to a 3,000-update horizon: {best:.3} s (best of 3); \
                 settling p50 {settle} updates, first entry p50 {entry}, never settled {:.3}, \
                 noise floor p99 {floor:.2e} turn, {:.1}e6 neighbour-updates",
                sum.never_settled_fraction,
                sum.neighbour_updates as f64 / 1e6
            );
        }
        None => println!("1,000-run Monte Carlo refused the scenario"),
    }
}

fn main() {
    println!(
        "entrain simulator bench, {} threads; neighbour-updates per second (best of 3):",
        rayon::current_num_threads()
    );
    throughput::<2>("chain 24", Topology::Chain { nodes: 24 }, 20_000);
    throughput::<4>("torus 16x16", Topology::Torus { rows: 16, cols: 16 }, 2_000);
    throughput::<32>("complete 32", Topology::Complete { nodes: 32 }, 2_000);
    monte_carlo_chain();
}
