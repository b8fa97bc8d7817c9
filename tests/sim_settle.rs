//! The simulator's settling definition: the instant after which the error stays within
//! the tolerance band for good (common practice in control engineering, no source), the
//! first entry beside it, and the noise floor measured over the steady window.
//!
//! The expected values here come from the definition applied by hand to synthetic
//! sequences, or from separate loops over raw traces, never from the tracker itself.
#![cfg(feature = "sim")]

mod common;

use common::sim::{config, pool};

use entrain::sim::{
    Beacons, Crystals, Links, Schedule, SettleCriterion, SettleTracker, Setup, StartPhases,
    monte_carlo, run_once, trace_run,
};
use entrain::{Law, Phase};

/// Counts per turn of the node's binary angle.
const TURN: f64 = 4_294_967_296.0;

/// Feed a tracker of two nodes a sequence of errors in turns (`None`: node 1 down).
fn feed(horizon: u64, tol: f64, errors: &[Option<f64>]) -> SettleTracker {
    let mut t = SettleTracker::new(
        &SettleCriterion {
            tolerance_turns: tol,
        },
        2,
        horizon,
    );
    for (k, e) in errors.iter().enumerate() {
        let (counts, phases) = match e {
            Some(turns) => {
                let c = (turns * TURN) as u32;
                (
                    c,
                    [Some(Phase::from_counts(0)), Some(Phase::from_counts(c))],
                )
            }
            None => (0, [Some(Phase::from_counts(0)), None]),
        };
        t.sample(k as u64, counts, counts, &phases);
    }
    t
}

/// Enter, leave, re-enter: settling is the last re-entry, first entry the first; a last
/// exit in the final fifth, or outside at the end, is not settled.
#[test]
fn tracker_settles_at_the_last_reentry() {
    let (tol, out, inn) = (0.01, Some(0.02), Some(0.001));
    // Horizon 100: final fifth = samples 80..100, steady window from max(settle, 50).
    let seq = |exits: &[usize]| -> Vec<Option<f64>> {
        (0..100)
            .map(|k| {
                if k < 10 || (20..25).contains(&k) || exits.contains(&k) {
                    out
                } else {
                    inn
                }
            })
            .collect()
    };
    // In at 10, out 20..25, in at 25, out at 30, in for good from 31.
    let t = feed(100, tol, &seq(&[30]));
    let s = t.settle().unwrap();
    assert_eq!((s.at_updates, s.first_entry_updates), (31, 10));
    assert_eq!(t.first_entry(), Some(10));
    assert_eq!(t.last_exit(), Some(30));
    // The steady window is the second half: 50 samples, all at 0.001 turn.
    assert_eq!(s.steady_from_updates, 50);
    assert_eq!(t.steady_counts().len(), 50);
    assert!((s.residual_turns - 0.001).abs() < 1e-9);
    // A late settle moves the window start past the middle.
    let t = feed(100, tol, &seq(&[30, 61]));
    assert_eq!(t.settle().unwrap().steady_from_updates, 62);
    assert_eq!(t.steady_counts().len(), 38);
    // The last exit at 79, just before the final fifth: settled at 80.
    let t = feed(100, tol, &seq(&[79]));
    assert_eq!(t.settle().unwrap().at_updates, 80);
    // The last exit at 80 or 95, in the final fifth: not settled, first entry kept, and
    // the steady window is the final fifth.
    for late in [80, 95] {
        let t = feed(100, tol, &seq(&[late]));
        assert_eq!(t.settle(), None, "exit at {late}");
        assert_eq!(t.first_entry(), Some(10));
        assert_eq!(t.steady_counts().len(), 20);
    }
    // Outside at the end.
    let t = feed(100, tol, &seq(&[99]));
    assert_eq!(t.settle(), None);
    // Never outside: settled at 0; never inside: no first entry.
    let t = feed(100, tol, &[inn; 100]);
    assert_eq!(
        t.settle().map(|s| (s.at_updates, s.first_entry_updates)),
        Some((0, 0))
    );
    let t = feed(100, tol, &[out; 100]);
    assert_eq!((t.settle(), t.first_entry()), (None, None));
    // A horizon not yet covered has no verdict.
    let t = feed(100, tol, &[inn; 60]);
    assert_eq!(t.settle(), None);
}

/// A node down counts as outside even when the live nodes agree; a restart (a rejoin)
/// counts every sample before it as outside.
#[test]
fn tracker_counts_down_nodes_and_restarts_as_outside() {
    let (tol, inn) = (0.01, Some(0.001));
    let mut seq = vec![inn; 100];
    for e in seq.iter_mut().take(40).skip(30) {
        *e = None;
    }
    let t = feed(100, tol, &seq);
    assert_eq!(t.settle().unwrap().at_updates, 40);
    assert_eq!(t.first_entry(), Some(0));

    let mut t = SettleTracker::new(
        &SettleCriterion {
            tolerance_turns: tol,
        },
        2,
        100,
    );
    let ph = [Some(Phase::from_counts(0)), Some(Phase::from_counts(1_000))];
    for k in 0..100 {
        if k == 45 {
            t.restart();
        }
        t.sample(k, 1_000, 1_000, &ph);
    }
    assert_eq!(t.settle().unwrap().at_updates, 45);
    assert_eq!(t.first_entry(), Some(0));
}

/// The PI chain of the trade example below: 16 nodes, kp 0.3, ki 0.03. Its slowest mode
/// (λ2 = 2(1 − cos(π/16)) ≈ 0.038, Fiedler 1973) has z² − (2 − (kp + ki)λ2)z + 1 − kp·λ2
/// with a negative discriminant, −4·ki·λ2 + ((kp + ki)λ2)² ≈ −0.0044: complex roots, an
/// underdamped mode (damping ratio about kp·√λ2/(2√ki) ≈ 0.17, from the continuous
/// approximation, from memory), so the error overshoots through the band.
fn pi_chain(horizon: u64) -> Setup {
    let mut s = Setup::new(Links::chain(16).unwrap(), config(Law::Sine, 0.3, 0.03), 1e6);
    s.start = StartPhases::Uniform { spread_turns: 0.2 };
    s.settle = SettleCriterion {
        tolerance_turns: 1e-3,
    };
    s.horizon_updates = horizon;
    s
}

/// Last sample, from a raw trace, whose network or link error exceeds `tol` turns.
fn last_exit(network: &[f64], link: &[f64], tol: f64) -> Option<usize> {
    let mut last = None;
    for (k, (n, l)) in network.iter().zip(link).enumerate() {
        if *n > tol || *l > tol {
            last = Some(k);
        }
    }
    last
}

/// Under the PI law the first entry comes clearly before settling, and a trace run four
/// times as long as the reported horizon never leaves the band after the reported
/// settling instant (checked by separate loops over the raw trace).
#[test]
fn pi_chain_settles_well_after_its_first_entry() {
    let horizon = 6_000;
    let s = pi_chain(horizon);
    let tol = s.settle.tolerance_turns;
    let sum = monte_carlo(&s, 16, 21, &|_| {}).unwrap();
    assert_eq!(sum.settled_runs, 16);
    let settle = sum.settle_updates.unwrap();
    let entry = sum.first_entry_updates.unwrap();
    println!(
        "16-node PI chain, 16 runs: first entry p50 {} / max {}, settling p50 {} / max {} updates ({:.2}×)",
        entry.p50,
        entry.max,
        settle.p50,
        settle.max,
        settle.p50 / entry.p50
    );
    assert!(
        settle.p50 >= 1.3 * entry.p50,
        "settling {settle:?} vs first entry {entry:?}"
    );
    let long = pi_chain(4 * horizon);
    for run in [0u64, 7, 15] {
        let o = &sum.outcomes[run as usize];
        let at = o.settle.unwrap().at_updates as usize;
        let (lo, trace) = trace_run(&long, 21, run, false).unwrap();
        assert_eq!(trace.len(), 4 * horizon as usize);
        // The long run is the same run: its first `horizon` samples agree.
        let (_, short) = trace_run(&s, 21, run, false).unwrap();
        assert_eq!(
            &trace.network_turns[..horizon as usize],
            &short.network_turns[..]
        );
        // Recomputed from the short trace: settling is the sample after the last exit.
        let exit = last_exit(&short.network_turns, &short.link_turns, tol).unwrap();
        assert_eq!(at, exit + 1, "run {run}");
        let first = short
            .network_turns
            .iter()
            .zip(&short.link_turns)
            .position(|(n, l)| *n <= tol && *l <= tol);
        assert_eq!(o.first_entry_updates, first.map(|k| k as u64));
        // Far past the reported instant the error never leaves the band again.
        let worst = trace.network_turns[at..]
            .iter()
            .chain(&trace.link_turns[at..])
            .fold(0.0f64, |m, &e| m.max(e));
        assert!(worst <= tol, "run {run}: {worst} turn after {at}");
        assert_eq!(lo.settle.unwrap().at_updates as usize, at);
        // And it did leave the band between first entry and settling.
        assert!(first.unwrap() + 1 < at);
    }
}

/// Same seed, same Summary (noise floor and every run's steady window included) on one
/// thread and on two.
#[test]
fn settling_summary_is_the_same_on_one_and_two_threads() {
    let mut s = pi_chain(3_000);
    s.crystals = Crystals::Uniform {
        tolerance_ppm: 20.0,
    };
    s.schedule = Schedule {
        random_start: true,
        jitter_ticks: 50,
    };
    s.beacons.timestamp_jitter_ticks = 3;
    let one = pool(1).install(|| monte_carlo(&s, 8, 5, &|_| {}).unwrap());
    let two = pool(2).install(|| monte_carlo(&s, 8, 5, &|_| {}).unwrap());
    assert_eq!(one, two);
    assert!(one.noise_floor_turns.is_some());
    assert_eq!(run_once(&s, 5, 3).unwrap(), one.outcomes[3]);
    assert_ne!(one.outcomes[0], one.outcomes[1]);
}

/// A courtyard ring of 10 lamp controllers with ±20 ppm crystals, random start instants
/// and a timestamp jitter of ±`jitter` ticks (one tick is 10⁻⁴ turn).
fn noisy_ring(jitter: u32, tol: f64, horizon: u64) -> Setup {
    let mut s = Setup::new(Links::ring(10).unwrap(), config(Law::Sine, 0.3, 0.02), 1e6);
    s.crystals = Crystals::Uniform {
        tolerance_ppm: 20.0,
    };
    s.schedule = Schedule {
        random_start: true,
        jitter_ticks: 0,
    };
    s.beacons = Beacons {
        timestamp_jitter_ticks: jitter,
        ..Beacons::IDEAL
    };
    s.start = StartPhases::Uniform { spread_turns: 0.2 };
    s.settle = SettleCriterion {
        tolerance_turns: tol,
    };
    s.horizon_updates = horizon;
    s
}

/// The pooled steady-window samples, recomputed from raw traces by a separate loop:
/// settling from the last exit, the window from max(settling, H/2) or the final fifth,
/// every stride-th sample with stride ⌈⌊H/2⌋/1024⌉.
fn pooled_from_traces(s: &Setup, runs: u64, seed: u64) -> (Vec<f64>, usize) {
    let h = s.horizon_updates as usize;
    let tol = s.settle.tolerance_turns;
    let stride = (h / 2).div_ceil(1024).max(1);
    let final_fifth = h - h.div_ceil(5);
    let mut pooled = Vec::new();
    let mut never = 0;
    for run in 0..runs {
        let (_, tr) = trace_run(s, seed, run, false).unwrap();
        let settle = match last_exit(&tr.network_turns, &tr.link_turns, tol) {
            None => Some(0),
            Some(e) if e < final_fifth => Some(e + 1),
            Some(_) => None,
        };
        let from = match settle {
            Some(at) => at.max(h / 2),
            None => {
                never += 1;
                final_fifth
            }
        };
        for k in from..h {
            if k % stride == 0 {
                pooled.push(tr.network_turns[k]);
            }
        }
    }
    pooled.sort_by(f64::total_cmp);
    (pooled, never)
}

/// Nearest rank (common practice, no source).
fn rank(sorted: &[f64], q: f64) -> f64 {
    let r = (q * sorted.len() as f64).ceil() as usize;
    sorted[r.clamp(1, sorted.len()) - 1]
}

/// The noise floor under timestamp jitter: measured p50 ≤ p99 ≤ tolerance when every run
/// settles (the steady window lies after settling), equal to the same percentiles
/// recomputed from raw traces; with a tolerance inside the noise, runs that never settle
/// are counted and their final fifths enter the pool.
#[test]
fn noise_floor_is_measured_over_the_steady_window() {
    // Horizon 6,000: stride 3, so the decimation is exercised.
    let (runs, seed) = (6u64, 13u64);
    let s = noisy_ring(20, 0.02, 6_000);
    let sum = monte_carlo(&s, runs as usize, seed, &|_| {}).unwrap();
    assert_eq!(sum.settled_runs, runs as usize);
    let floor = sum.noise_floor_turns.unwrap();
    println!(
        "10-node ring, ±20 ticks timestamp jitter: noise floor p50 {:.3e}, p99 {:.3e} turn over {} samples; jitter {:.3e} turn rms",
        floor.p50,
        floor.p99,
        floor.samples,
        sum.jitter_turns.unwrap()
    );
    assert!(floor.p50 > 0.0 && floor.p50 <= floor.p99 && floor.p99 <= 0.02);
    let (pooled, never) = pooled_from_traces(&s, runs, seed);
    assert_eq!(never, 0);
    assert_eq!(floor.samples, pooled.len());
    let close = |a: f64, b: f64| (a - b).abs() <= 1.0 / TURN;
    assert!(close(floor.p50, rank(&pooled, 0.50)) && close(floor.p99, rank(&pooled, 0.99)));

    // A tolerance at the measured median: the noise keeps crossing it, so some runs
    // never settle; their final fifths are in the pool, which now reaches past the
    // tolerance.
    let tight = noisy_ring(20, floor.p50, 6_000);
    let sum = monte_carlo(&tight, runs as usize, seed, &|_| {}).unwrap();
    let (pooled, never) = pooled_from_traces(&tight, runs, seed);
    let counted = sum.outcomes.iter().filter(|o| o.settle.is_none()).count();
    assert!(
        never > 0,
        "no run failed to settle at the tolerance {}",
        floor.p50
    );
    assert_eq!(counted, never);
    assert!((sum.never_settled_fraction - never as f64 / runs as f64).abs() < 1e-12);
    let tight_floor = sum.noise_floor_turns.unwrap();
    assert_eq!(tight_floor.samples, pooled.len());
    assert!(close(tight_floor.p99, rank(&pooled, 0.99)));
    assert!(tight_floor.p99 > floor.p50);
}
