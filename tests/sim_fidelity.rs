//! Fidelity of the simulator (the real node code, stepped in real time) against the
//! checker's predictions, which stand on published closed forms. The predictions are
//! asked of [`entrain::plan`] here, from the same scenario the simulator runs.
#![cfg(feature = "sim")]

use entrain::forecast::planner_model;
use entrain::plan::{self, Locking, Settling, Spread, Topology};
use entrain::sim::{
    Beacons, Crystals, Links, SettleCriterion, Setup, StartPhases, monte_carlo, run_once, trace_run,
};
use entrain::{Config, Gain, Law};
use rayon::prelude::*;

/// The planner's settling of a chain scenario from a start spread of `e0` turns to the
/// scenario's tolerance.
fn settling(s: &Setup, e0: f64) -> Settling {
    let spectrum = s.links.topology().unwrap().spectrum().unwrap();
    let period = s.phase_period_s();
    let spread = Spread {
        initial_spread_s: e0 * period,
        tolerance_s: s.settle.tolerance_turns * period,
    };
    plan::settle(&planner_model(s), &spectrum, &spread).unwrap()
}

/// The planner's lock verdict and per-edge steady offsets (`θ_{k+1} − θ_k`, turns) for a
/// chain scenario with crystals given per node.
fn chain_offsets(s: &Setup) -> (Locking, Vec<f64>) {
    let Crystals::Fixed(ppm) = &s.crystals else {
        panic!("crystals must be given per node");
    };
    let mut offsets = vec![0.0; ppm.len() - 1];
    let locking = plan::chain_lock(&planner_model(s), ppm, &mut offsets).unwrap();
    (locking, offsets)
}

/// Update interval in timer ticks (an integral number, as lock-step fidelity needs).
const M: u32 = 1_000;

fn p_only(law: Law, kp: f64, ticks_per_period: u32, update_ticks: u32) -> Config {
    Config::builder(ticks_per_period, update_ticks)
        .law(law)
        .kp(Gain::from_f32(kp as f32).unwrap())
        .ki(Gain::ZERO)
        .slew_limit(i32::MAX as u32)
        .build()
        .unwrap()
}

/// Start phases: the chain's slowest mode from the checker (cos(π(j+½)/N), Fiedler 1973;
/// Brouwer & Haemers 2012 §1.4) plus a seeded 5 % perturbation that puts energy in every
/// other mode, scaled to a largest pairwise difference of `spread` turns.
fn slow_mode_start(n: usize, spread: f64) -> Vec<f64> {
    let mut shape = vec![0.0; n];
    Topology::Chain { nodes: n }
        .slow_mode_shape(&mut shape)
        .unwrap();
    let mut x = 0x9E37_79B9u32;
    let raw: Vec<f64> = shape
        .iter()
        .map(|v| {
            x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            let noise = f64::from(x) / 4_294_967_296.0 - 0.5;
            v + 0.05 * noise
        })
        .collect();
    let lo = raw.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = raw.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    raw.iter()
        .map(|v| (v - lo) / (hi - lo) * spread - spread / 2.0)
        .collect()
}

/// A lock-step, linear-law chain scenario from the slow-mode start.
fn linear_chain(n: usize, kp: f64, e0: f64, tol: f64, horizon: u64) -> Setup {
    let mut s = Setup::new(
        Links::chain(n).unwrap(),
        p_only(Law::Linear, kp, 100_000, M),
        1e6,
    );
    s.start = StartPhases::Fixed(slow_mode_start(n, e0));
    s.settle = SettleCriterion {
        tolerance_turns: tol,
    };
    s.horizon_updates = horizon;
    s
}

/// Linear law, identical ideal crystals, no loss, lock-step updates: the simulated
/// settling time equals the checker's asymptotic lock time ⌈ln(tol/e0)/ln ρ⌉ (ρ from the path
/// spectrum, Fiedler 1973, and the consensus factor of Xiao & Boyd 2004) within 5 %, and
/// never exceeds the checker's worst-case bound.
///
/// Why the comparison is meaningful: the start is the slowest mode (plus a 5 % generic
/// perturbation that the faster modes shed long before the lock), so the largest pairwise
/// difference decays as e0·ρ^t with ρ = 1 − kp·λ2 (the three gains are below
/// 2/(λ2+λmax), where the slow mode sets ρ, and ρ > 0: no overshoot); the settling
/// criterion is that difference, so the first update with e ≤ tol, after which it stays
/// below, is the asymptotic prediction. A simulator that used
/// stale or same-instant (Gauss–Seidel) neighbour values would miss it by far more than
/// 5 % at N = 4 and 16.
#[test]
fn chain_lock_time_matches_the_asymptotic_prediction() {
    let (e0, tol) = (0.2, 0.002);
    let cases: Vec<(usize, f64)> = [256usize, 64, 16, 4]
        .iter()
        .flat_map(|&n| [0.2, 0.3, 0.45].map(move |kp| (n, kp)))
        .collect();
    let results: Vec<_> = cases
        .par_iter()
        .map(|&(n, kp)| {
            let mut s = linear_chain(n, kp, e0, tol, 1);
            let p = settling(&s, e0);
            s.horizon_updates = 2 * p.asymptotic_updates + 100;
            let settle = run_once(&s, 1, 0).unwrap().settle;
            (n, kp, p, settle.map(|l| l.at_updates))
        })
        .collect();
    for (n, kp, p, sim) in results {
        let sim = sim.unwrap_or_else(|| panic!("N={n} kp={kp}: never settled"));
        let ratio = sim as f64 / p.asymptotic_updates as f64;
        let bound = p.bound_updates.unwrap();
        println!(
            "chain N={n:3} kp={kp:.2}: predicted {} (bound {bound}), simulated {sim}, ratio {ratio:.4}",
            p.asymptotic_updates
        );
        assert!(
            (ratio - 1.0).abs() <= 0.05,
            "N={n} kp={kp}: simulated {sim} vs predicted {}",
            p.asymptotic_updates
        );
        assert!(
            sim <= bound,
            "N={n} kp={kp}: simulated {sim} exceeds the bound {bound}"
        );
    }
}

/// At a fixed gain the settling time of a chain grows as N² (fact of the trade, no
/// source): the least-squares slope of ln(settling time) against ln N over N = 8..128 is
/// 2 ± 0.1. Each run's horizon is twice the planner's estimate (the fit does not use it).
#[test]
fn chain_lock_time_grows_as_n_squared() {
    let sizes = [8usize, 16, 32, 64, 128];
    let times: Vec<f64> = sizes
        .par_iter()
        .map(|&n| {
            let mut s = linear_chain(n, 0.45, 0.2, 0.002, 1);
            s.horizon_updates = 2 * settling(&s, 0.2).asymptotic_updates + 100;
            run_once(&s, 3, 0).unwrap().settle.unwrap().at_updates as f64
        })
        .collect();
    let xs: Vec<f64> = sizes.iter().map(|&n| (n as f64).ln()).collect();
    let ys: Vec<f64> = times.iter().map(|t| t.ln()).collect();
    let mx = xs.iter().sum::<f64>() / xs.len() as f64;
    let my = ys.iter().sum::<f64>() / ys.len() as f64;
    let slope = xs
        .iter()
        .zip(&ys)
        .map(|(x, y)| (x - mx) * (y - my))
        .sum::<f64>()
        / xs.iter().map(|x| (x - mx) * (x - mx)).sum::<f64>();
    println!("settling times {times:?}: fitted exponent {slope:.4}");
    assert!((slope - 2.0).abs() <= 0.1, "fitted exponent {slope}");
}

/// A footbridge handrail string in a temperature gradient: 8 sensors whose crystals run
/// `g·(i − 3.5)` ppm, P-only sine law. Inside the chain lock condition the string settles
/// at the predicted per-edge offsets within 1 %; beyond it, it never locks (Strogatz &
/// Mirollo, Physica D 31 (1988); Ermentrout & Kopell 1984).
///
/// Set-up notes: the node extrapolates a neighbour's beacon over one update interval at
/// its own rate, so it misjudges each neighbour by their drift difference per update
/// (g_ω, the gradient in turns per update). When every node uses beacons of the previous
/// round from both sides, that shifts every edge offset by the same g_ω (checked against
/// the ideal map), and sampling half an interval after the updates takes back g_ω/2:
/// 0.3 % of the smallest offset here. Beacons take 2 % of an update interval, more than
/// the neighbours' update instants drift apart over the run, so both sides do use the
/// previous round. (With instant beacons the slower node of each pair uses the faster
/// one's fresh beacon and the offsets come out about 1.5 % off.)
#[test]
fn p_only_chain_locks_at_the_predicted_offsets_or_never() {
    let n = 8;
    let kp = 0.02;
    // 1 MHz timers, a 100 ms phase period, an update every 10 s (a slow radio beacon):
    // the crystal drift per update is then large enough to load the chain with a few
    // ppm, and one timer tick is only 10⁻⁵ turn, so timestamp rounding stays small.
    let (period, update) = (100_000u32, 10_000_000u32);
    let config = p_only(Law::Sine, kp, period, update);
    let gradient = |g: f64| -> Vec<f64> { (0..n).map(|i| g * (i as f64 - 3.5)).collect() };
    let scenario = |g: f64| {
        let mut s = Setup::new(Links::chain(n).unwrap(), config, 1e6);
        s.crystals = Crystals::Fixed(gradient(g));
        s.start = StartPhases::Fixed(vec![0.0; n]);
        s.beacons = Beacons {
            latency_ticks: update / 50,
            ..Beacons::IDEAL
        };
        s.settle = SettleCriterion {
            tolerance_turns: 0.35,
        };
        // Every run lasts its whole horizon. At a third of the critical gradient
        // (about 1.3 ppm per node) neighbours' update instants drift apart about 0.13 s
        // over 10⁵ s, still within the 0.2 s beacon latency; at twice that they would
        // not, and the offsets would drift off as with instant beacons.
        s.horizon_updates = 10_000;
        s
    };

    // The edge flow grows with the gradient, so the checker's lock margin at 1 ppm per
    // node is the critical gradient in ppm per node.
    let g_crit = chain_offsets(&scenario(1.0)).0.lock_margin;
    // Inside: a third of the critical load.
    let g_in = g_crit / 3.0;
    println!("critical gradient {g_crit:.3} ppm per node");
    let (verdict, predicted) = chain_offsets(&scenario(g_in));
    assert!(verdict.locks);
    let (outcome, trace) = trace_run(&scenario(g_in), 5, 0, true).unwrap();
    assert!(
        outcome.settle.is_some(),
        "inside the lock condition: {outcome:?}"
    );
    // Mean per-edge offset over the last 500 samples.
    let rows = trace.len();
    let mut measured = vec![0.0; n - 1];
    for k in rows - 500..rows {
        let row = &trace.phases_turns[k * n..(k + 1) * n];
        for (e, m) in measured.iter_mut().enumerate() {
            let d = (row[e + 1] - row[e] + 0.5).rem_euclid(1.0) - 0.5;
            *m += d / 500.0;
        }
    }
    for (e, (sim, want)) in measured.iter().zip(&predicted).enumerate() {
        println!("edge {e}: predicted {want:.6} turn, simulated {sim:.6} turn");
    }
    for (e, (sim, want)) in measured.iter().zip(&predicted).enumerate() {
        assert!(
            (sim - want).abs() <= 0.01 * want.abs(),
            "edge {e}: simulated {sim} vs predicted {want}"
        );
    }

    // Beyond: 1.25 times the critical load.
    let (beyond, _) = chain_offsets(&scenario(1.25 * g_crit));
    assert!(!beyond.locks);
    let outcome = run_once(&scenario(1.25 * g_crit), 5, 0).unwrap();
    assert!(
        outcome.settle.is_none(),
        "beyond the lock condition: {outcome:?}"
    );
}

/// Loss with success probability p slows the linear-regime settling by the predicted factor
/// (mean dynamics x⁺ = (I − kp·p·L)x; Kar & Moura, IEEE TSP 56 (2008)) within 10 %.
///
/// The node keeps a neighbour's last observation until its timeout; with the timeout at
/// one update interval a lost beacon drops that neighbour's term for the update, which
/// is the model of Kar & Moura. (With the default timeout of five intervals the node uses
/// the older observation instead, and the slow mode hardly slows at all.)
#[test]
fn loss_slows_the_lock_by_the_predicted_factor() {
    let (n, kp, p, e0, tol) = (16usize, 0.3, 0.6, 0.2, 0.002);
    let config = Config::builder(100_000, M)
        .law(Law::Linear)
        .kp(Gain::from_f32(kp as f32).unwrap())
        .ki(Gain::ZERO)
        .slew_limit(i32::MAX as u32)
        .timeout_ticks(M)
        .build()
        .unwrap();
    let mut s = Setup::new(Links::chain(n).unwrap(), config, 1e6);
    s.start = StartPhases::Fixed(slow_mode_start(n, e0));
    s.settle = SettleCriterion {
        tolerance_turns: tol,
    };
    // The lossless estimate is about 400 updates: room for the lossy runs' slow-down.
    s.horizon_updates = 4_000;
    let lossless = run_once(&s, 11, 0).unwrap().settle.unwrap().at_updates as f64;
    s.beacons.success_prob = p;
    let lossy = monte_carlo(&s, 24, 11, &|_| {}).unwrap();
    assert_eq!(lossy.never_settled_fraction, 0.0);
    let simulated = lossy.settle_updates.unwrap().p50 / lossless;
    let prediction = settling(&s, e0);
    let predicted = prediction.with_loss_updates as f64 / prediction.asymptotic_updates as f64;
    println!("loss p={p}: slow-down predicted {predicted:.4}, simulated {simulated:.4}");
    assert!(
        (simulated / predicted - 1.0).abs() <= 0.10,
        "simulated {simulated} vs predicted {predicted}"
    );
}
