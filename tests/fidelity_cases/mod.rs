//! The fidelity scenarios shared by `tests/fidelity.rs` and `benches/fidelity.rs`:
//! invented deployments, each simulated (the real node code, run to its horizon) and
//! forecast, side by side.
#![allow(dead_code)]

use entrain::forecast::{Forecast, forecast, last_exit, nearest_rank, tolerance_turns};
use entrain::plan::Topology;
use entrain::sim::{Beacons, Crystals, Links, Network, Scenario, Schedule, StartPhases, predict};
use entrain::{Config, Gain, Law};
use rayon::prelude::*;

/// Simulated runs per scenario.
pub const RUNS: u64 = 200;
/// Forecast samples per scenario.
pub const SAMPLES: usize = 400;

/// One scenario of the suite.
pub struct Case {
    /// Short name for the table.
    pub name: &'static str,
    /// The scenario (horizon filled in by [`horizon`]).
    pub scenario: Scenario,
}

/// One line of the table.
#[derive(Clone, Debug)]
pub struct Row {
    pub name: &'static str,
    pub nodes: usize,
    pub horizon: u64,
    pub tol: f64,
    pub forecast: Forecast,
    pub bound: Option<u64>,
    pub sim_p50: f64,
    pub sim_p90: f64,
    pub sim_max: f64,
    pub sim_never: f64,
    pub sim_noise_p50: f64,
    pub sim_noise_p99: f64,
    pub forecast_s: f64,
    pub sim_s: f64,
}

fn config(law: Law, kp: f64, ki: f64, ticks_per_period: u32, update_ticks: u32) -> Config {
    Config::builder(ticks_per_period, update_ticks)
        .law(law)
        .kp(Gain::from_f32(kp as f32).unwrap())
        .ki(Gain::from_f32(ki as f32).unwrap())
        .slew_limit(i32::MAX as u32)
        .trim_limit_ppb(500_000)
        .timeout_ticks(update_ticks.saturating_mul(20))
        .build()
        .unwrap()
}

fn grid(rows: usize, cols: usize) -> Links {
    let mut pairs = Vec::new();
    for r in 0..rows {
        for c in 0..cols {
            let i = r * cols + c;
            if c + 1 < cols {
                pairs.push((i, i + 1));
            }
            if r + 1 < rows {
                pairs.push((i, i + cols));
            }
        }
    }
    Links::from_pairs(rows * cols, &pairs).unwrap()
}

fn star(leaves: usize) -> Links {
    let pairs: Vec<(usize, usize)> = (1..=leaves).map(|l| (0, l)).collect();
    Links::from_pairs(leaves + 1, &pairs).unwrap()
}

fn scenario(
    links: Links,
    config: Config,
    spread: f64,
    tol: f64,
    ppm: f64,
    random_start: bool,
) -> Scenario {
    let mut s = Scenario::new(links, config, 1e6);
    s.start = StartPhases::Uniform {
        spread_turns: spread,
    };
    s.crystals = Crystals::Uniform { tolerance_ppm: ppm };
    s.schedule = Schedule {
        random_start,
        jitter_ticks: 0,
    };
    s.lock.tolerance_turns = tol;
    s
}

fn beacons(latency_ticks: u32, jitter: u32, p: f64) -> Beacons {
    Beacons {
        latency_ticks,
        timestamp_jitter_ticks: jitter,
        success_prob: p,
    }
}

/// The suite (demo deployments invented for these tests).
pub fn cases() -> Vec<Case> {
    const M: u32 = 10_000; // update interval, ticks (100 updates/s at 1 MHz)
    const T: u32 = 10_000; // phase period, ticks
    let mut v = Vec::new();

    // Vibration sensors on a footbridge: a lock-step chain of 12, P law, ideal clocks.
    let s = scenario(
        Links::chain(12).unwrap(),
        config(Law::Linear, 0.4, 0.0, T, M),
        0.2,
        0.004,
        0.0,
        false,
    );
    v.push(Case {
        name: "footbridge chain12 P lin",
        scenario: s,
    });

    // Light fixtures around a courtyard: ring of 16, PI, staggered, ±20 ppm, half an
    // update of latency.
    let mut s = scenario(
        Links::ring(16).unwrap(),
        config(Law::Linear, 0.35, 0.02, T, M),
        0.1,
        0.002,
        20.0,
        true,
    );
    s.beacons = beacons(M / 2, 0, 1.0);
    v.push(Case {
        name: "courtyard ring16 PI lat.5",
        scenario: s,
    });

    // A weather-station hub and 8 masts: star, sine P, wide start spread.
    let s = scenario(
        star(8),
        config(Law::Sine, 0.1, 0.0, T, M),
        0.45,
        0.003,
        5.0,
        true,
    );
    v.push(Case {
        name: "mast star9 P sine wide",
        scenario: s,
    });

    // Greenhouse sensor grid 4×4: sine PI, 1.5 updates of latency, 20 % loss.
    let mut s = scenario(
        grid(4, 4),
        config(Law::Sine, 0.2, 0.01, T, M),
        0.3,
        0.003,
        30.0,
        true,
    );
    s.beacons = beacons(3 * M / 2, 0, 0.8);
    v.push(Case {
        name: "greenhouse grid4x4 PI sine",
        scenario: s,
    });

    // Tunnel lamps pinned to a portal clock: pinned chain of 8 + reference, PI, ±50 ppm.
    let s = scenario(
        Links::from_topology(&Topology::PinnedChain { nodes: 8 }).unwrap(),
        config(Law::Linear, 0.4, 0.02, T, M),
        0.1,
        0.003,
        50.0,
        true,
    );
    v.push(Case {
        name: "tunnel pinned8 PI",
        scenario: s,
    });

    // Conveyor stations (an invented edge list of 14), P law, 50 % loss, 2.5 updates
    // of latency.
    let pairs = [
        (0, 1),
        (1, 2),
        (2, 3),
        (3, 4),
        (4, 5),
        (5, 6),
        (2, 7),
        (7, 8),
        (8, 9),
        (9, 10),
        (5, 10),
        (10, 11),
        (11, 12),
        (12, 13),
        (6, 13),
        (1, 8),
    ];
    let mut s = scenario(
        Links::from_pairs(14, &pairs).unwrap(),
        config(Law::Linear, 0.15, 0.0, T, M),
        0.1,
        0.003,
        0.0,
        true,
    );
    s.beacons = beacons(5 * M / 2, 0, 0.5);
    v.push(Case {
        name: "conveyor edges14 P loss50",
        scenario: s,
    });

    // Stage lights on a truss: chain of 10, slew-limited, wide start.
    let mut s = scenario(
        Links::chain(10).unwrap(),
        Config::builder(T, M)
            .law(Law::Linear)
            .kp(Gain::from_f32(0.4).unwrap())
            .ki(Gain::ZERO)
            .slew_limit((0.004 * 4_294_967_296.0) as u32)
            .build()
            .unwrap(),
        0.4,
        0.004,
        0.0,
        true,
    );
    s.beacons = beacons(0, 0, 1.0);
    v.push(Case {
        name: "truss chain10 slew",
        scenario: s,
    });

    // Loudspeaker ring of 12 with noisy timestamps: noise near the tolerance.
    let mut s = scenario(
        Links::ring(12).unwrap(),
        config(Law::Linear, 0.3, 0.01, T, M),
        0.05,
        0.004,
        10.0,
        true,
    );
    s.beacons = beacons(M / 4, 6, 1.0);
    v.push(Case {
        name: "speaker ring12 noise near",
        scenario: s,
    });

    // Solar-field trackers, 3×4 grid, P law with ±100 ppm crystals (steady offsets).
    let s = scenario(
        grid(3, 4),
        config(Law::Linear, 0.25, 0.0, T, M),
        0.1,
        0.004,
        100.0,
        true,
    );
    v.push(Case {
        name: "solar grid3x4 P 100ppm",
        scenario: s,
    });

    // Fountain nozzles on a ring of 8: sine PI, nearly half-turn spread, one schedule
    // for all (±5 ppm crystals let it drift apart slowly), ±2-tick timestamps.
    let mut s = scenario(
        Links::ring(8).unwrap(),
        config(Law::Sine, 0.3, 0.02, T, M),
        0.45,
        0.003,
        5.0,
        false,
    );
    s.beacons = beacons(0, 2, 1.0);
    v.push(Case {
        name: "fountain ring8 PI sine",
        scenario: s,
    });

    // Pipeline valves, chain of 12, PI with two updates of latency, ±10 ppm.
    let mut s = scenario(
        Links::chain(12).unwrap(),
        config(Law::Linear, 0.3, 0.01, T, M),
        0.05,
        0.003,
        10.0,
        true,
    );
    s.beacons = beacons(2 * M, 0, 0.9);
    v.push(Case {
        name: "pipeline chain12 PI lat2",
        scenario: s,
    });

    // Parking-lot lamp grid 6×6, P law, lock-step, small spread.
    let s = scenario(
        grid(6, 6),
        config(Law::Linear, 0.2, 0.0, T, M),
        0.05,
        0.004,
        0.0,
        false,
    );
    v.push(Case {
        name: "parking grid6x6 P lockstep",
        scenario: s,
    });

    // Irrigation valves hung off a pump controller (edge list), PI, timestamp noise
    // near the tolerance and ±40 ppm crystals.
    let pairs = [
        (0, 1),
        (0, 2),
        (0, 3),
        (1, 4),
        (4, 5),
        (2, 6),
        (6, 7),
        (3, 8),
        (8, 9),
        (5, 9),
    ];
    let mut s = scenario(
        Links::from_pairs(10, &pairs).unwrap(),
        config(Law::Linear, 0.3, 0.015, T, M),
        0.08,
        0.003,
        40.0,
        true,
    );
    s.beacons = beacons(M / 3, 4, 0.9);
    v.push(Case {
        name: "irrigation edges10 noise",
        scenario: s,
    });
    v
}

/// Pick the horizon: at least 3× the planner's worst-case bound, 10 slowest oscillation
/// periods and 300 updates.
pub fn horizon(s: &mut Scenario) -> Option<u64> {
    s.horizon_updates = 300;
    let bound = predict(s).ok().and_then(|p| p.settling.bound_updates);
    let period = forecast(s, 1, 0)
        .ok()
        .and_then(|f| f.slowest_oscillation_period_updates)
        .unwrap_or(0.0);
    let h = (3 * bound.unwrap_or(100))
        .max((10.0 * period).ceil() as u64)
        .max(300);
    s.horizon_updates = h.min(5_000);
    bound
}

/// One simulated run, stepped to the horizon: the largest pairwise error per sample.
fn simulate(s: &Scenario, seed: u64, run: u64) -> Vec<f64> {
    let mut net = Network::<32>::new(s, seed, run).unwrap();
    (0..s.horizon_updates)
        .map(|_| f64::from(net.step().network_counts) / 4_294_967_296.0)
        .collect()
}

/// Simulate and forecast one case.
pub fn evaluate(case: &mut Case) -> Row {
    let bound = horizon(&mut case.scenario);
    let s = &case.scenario;
    let tol = tolerance_turns(s);
    let t0 = std::time::Instant::now();
    let f = forecast(s, SAMPLES, 0xF0_4E).unwrap();
    let forecast_s = t0.elapsed().as_secs_f64();
    let t1 = std::time::Instant::now();
    let runs: Vec<(usize, bool, Vec<f64>)> = (0..RUNS)
        .into_par_iter()
        .map(|r| {
            let e = simulate(s, 0x51_4D, r);
            let (settle, never) = last_exit(&e, tol);
            (settle, never, e.get(e.len() / 2..).unwrap_or(&[]).to_vec())
        })
        .collect();
    let sim_s = t1.elapsed().as_secs_f64();
    let mut settle: Vec<f64> = runs.iter().map(|r| r.0 as f64).collect();
    settle.sort_by(f64::total_cmp);
    let never = runs.iter().filter(|r| r.1).count() as f64 / RUNS as f64;
    let mut tail: Vec<f64> = runs.into_iter().flat_map(|r| r.2).collect();
    tail.sort_by(f64::total_cmp);
    Row {
        name: case.name,
        nodes: s.nodes(),
        horizon: s.horizon_updates,
        tol,
        forecast: f,
        bound,
        sim_p50: nearest_rank(&settle, 0.5),
        sim_p90: nearest_rank(&settle, 0.9),
        sim_max: nearest_rank(&settle, 1.0),
        sim_never: never,
        sim_noise_p50: nearest_rank(&tail, 0.5),
        sim_noise_p99: nearest_rank(&tail, 0.99),
        forecast_s,
        sim_s,
    }
}

/// The table header and one line per row.
pub fn table(rows: &[Row]) -> String {
    let mut out = format!(
        "{:<28} {:>3} {:>5} | {:>6} {:>6} {:>6} {:>9} | {:>6} {:>6} {:>6} {:>9} | {:>5} {:>5} {:>5} {:>5} | {:>5} {:>5}\n",
        "scenario",
        "N",
        "H",
        "f.p50",
        "f.p90",
        "bound",
        "f.noise99",
        "s.p50",
        "s.p90",
        "s.max",
        "s.noise99",
        "r50",
        "r90",
        "bd/mx",
        "rN99",
        "f.s",
        "sim.s"
    );
    for r in rows {
        let f = &r.forecast;
        let bound = r.bound.map_or(f64::NAN, |b| b as f64);
        out += &format!(
            "{:<28} {:>3} {:>5} | {:>6.0} {:>6.0} {:>6.0} {:>9.2e} | {:>6.0} {:>6.0} {:>6.0} {:>9.2e} | {:>5.2} {:>5.2} {:>5.2} {:>5.2} | {:>5.2} {:>5.2}\n",
            r.name,
            r.nodes,
            r.horizon,
            f.settle_updates.p50,
            f.settle_updates.p90,
            bound,
            f.noise_floor_turns.p99,
            r.sim_p50,
            r.sim_p90,
            r.sim_max,
            r.sim_noise_p99,
            f.settle_updates.p50 / r.sim_p50,
            f.settle_updates.p90 / r.sim_p90,
            bound / r.sim_max,
            f.noise_floor_turns.p99 / r.sim_noise_p99,
            r.forecast_s,
            r.sim_s,
        );
    }
    out
}
