//! Which remedy holds the PI law on links whose latency the firmware does not know?
//! Measures, side by side in one run, version-1 beacons (no two-way timing) and version-2
//! beacons, each without and with the trim leak (γ = ki/64), on a 24-node chain and a
//! 6×6 grid: crystals ±50 ppm, latency drawn per link in 0.3–1.7 update intervals and not
//! told to the nodes, completed-tick stamps, 10^5 updates per run. Prints, per case, the
//! runs that settled, the median and largest trim error at the end (|trim − the trim that
//! brings the crystal to the network's mean rate|, ppm, over every node of every run), and
//! the runs with a trim at its limit.
//!
//! Baseline, measured in the same run: the first case of each graph, version-1 beacons
//! without the leak (what a firmware without either remedy does); each remedy is read
//! against it.
//!
//! `cargo bench --features sim --bench links` (add a number of runs per case as the
//! first argument; default 4).

use entrain::plan::Topology;
use entrain::sim::{
    Beacons, Crystals, Links, Schedule, SettleCriterion, Setup, Stamping, StartPhases, monte_carlo,
};
use entrain::{Config, Gain, Law};

fn setup(topology: Topology, two_way: bool, leak: bool) -> Setup {
    let (kp, ki) = (0.12_f32, 0.004_f32);
    let config = Config::builder(1_000, 100_000)
        .law(Law::Sine)
        .kp(Gain::from_f32(kp).unwrap())
        .ki(Gain::from_f32(ki).unwrap())
        .leak(Gain::from_f32(if leak { ki / 64.0 } else { 0.0 }).unwrap())
        .trim_limit_ppb(200_000)
        .build()
        .unwrap();
    let mut s = Setup::new(Links::from_topology(&topology).unwrap(), config, 1e6);
    s.crystals = Crystals::Uniform {
        tolerance_ppm: 50.0,
    };
    s.schedule = Schedule {
        random_start: true,
        jitter_ticks: 0,
    };
    s.beacons = Beacons {
        latency_ticks: 30_000,
        latency_spread_ticks: 140_000,
        latency_known: false,
        two_way,
        stamping: Stamping::CompletedTicks,
        ..Beacons::IDEAL
    };
    s.start = StartPhases::Uniform { spread_turns: 0.4 };
    s.settle = SettleCriterion {
        tolerance_turns: 0.02,
    };
    s.horizon_updates = 100_000;
    s
}

fn main() {
    let runs: u64 = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(4);
    println!(
        "{:<10} {:<9} {:<6} {:>8} {:>14} {:>14} {:>9} {:>8}",
        "network", "beacons", "leak", "settled", "trim err p50", "trim err max", "at limit", "time"
    );
    for (name, topology) in [
        ("chain 24", Topology::Chain { nodes: 24 }),
        ("grid 6x6", Topology::Grid { rows: 6, cols: 6 }),
    ] {
        for two_way in [false, true] {
            for leak in [false, true] {
                let s = setup(topology, two_way, leak);
                let t = std::time::Instant::now();
                let summary = monte_carlo(&s, runs as usize, 17, &|_| {}).unwrap();
                let (p50, max) = summary
                    .trim_error_ppm
                    .map_or((f64::NAN, f64::NAN), |p| (p.p50, p.max));
                let at_limit = summary
                    .outcomes
                    .iter()
                    .filter(|o| o.trims_at_limit > 0)
                    .count();
                println!(
                    "{:<10} {:<9} {:<6} {:>5}/{:<2} {:>11.2} ppm {:>10.2} ppm {:>6}/{:<2} {:>6.1} s",
                    name,
                    if two_way { "v2 2-way" } else { "v1" },
                    if leak { "ki/64" } else { "0" },
                    summary.settled_runs,
                    runs,
                    p50,
                    max,
                    at_limit,
                    runs,
                    t.elapsed().as_secs_f64()
                );
            }
        }
    }
}
