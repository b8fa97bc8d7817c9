//! The fidelity scenarios shared by `tests/fidelity.rs` and `benches/fidelity.rs`:
//! invented deployments, each simulated (the real node code, run to its horizon) and
//! forecast, side by side.
#![allow(dead_code)]

use entrain::forecast::{Forecast, forecast, planner_model, start_spread_turns, tolerance_turns};
use entrain::plan::{self, Spread, Topology};
use entrain::sim::{Beacons, Crystals, Links, Schedule, Setup, Stamping, StartPhases, monte_carlo};
use entrain::{Config, Gain, Law};

/// Simulated runs per scenario.
pub const RUNS: u64 = 200;
/// Forecast samples per scenario.
pub const SAMPLES: usize = 400;

/// One scenario of the suite.
pub struct Case {
    /// Short name for the table.
    pub name: &'static str,
    /// The scenario (horizon filled in by [`horizon`]).
    pub scenario: Setup,
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

/// One invented deployment, in the few numbers that differ between scenarios.
struct Spec {
    name: &'static str,
    links: Links,
    law: Law,
    kp: f64,
    ki: f64,
    /// Slew limit, turns (`None`: unlimited).
    slew: Option<f64>,
    spread: f64,
    tol: f64,
    ppm: f64,
    random_start: bool,
    /// Latency, updates.
    latency: f64,
    /// Timestamp jitter, ± ticks.
    jitter: u32,
    p: f64,
    /// Real links (version-2 beacons, measured delays): `None` keeps the idealised
    /// version-1 links with a known, uniform latency and nearest-tick stamps.
    real: Option<RealLinks>,
}

/// Links as hardware has them: each link's latency drawn per run from
/// `[latency, latency + spread]` updates and unknown to the nodes, the two directions
/// differing by up to `asymmetry` updates, completed-tick stamps, version-2 beacons
/// (two-way delay measurement) and a trim leak of `ki/64`.
#[derive(Clone, Copy)]
struct RealLinks {
    spread: f64,
    asymmetry: f64,
}

/// Update interval and phase period, ticks (100 updates/s and a 10 ms period at 1 MHz).
const M: u32 = 10_000;
const T: u32 = 10_000;

impl Spec {
    fn build(self) -> Case {
        let config = Config::builder(T, M)
            .law(self.law)
            .kp(Gain::from_f32(self.kp as f32).unwrap())
            .ki(Gain::from_f32(self.ki as f32).unwrap())
            .slew_limit(
                self.slew
                    .map_or(i32::MAX as u32, |t| (t * 4_294_967_296.0) as u32),
            )
            .trim_limit_ppb(500_000)
            .timeout_ticks(M * 20)
            .leak(Gain::from_f32(self.real.map_or(0.0, |_| (self.ki / 64.0) as f32)).unwrap())
            .build()
            .unwrap();
        let mut s = Setup::new(self.links, config, 1e6);
        s.start = StartPhases::Uniform {
            spread_turns: self.spread,
        };
        s.crystals = Crystals::Uniform {
            tolerance_ppm: self.ppm,
        };
        s.schedule = Schedule {
            random_start: self.random_start,
            jitter_ticks: 0,
        };
        s.beacons = Beacons {
            latency_ticks: (self.latency * f64::from(M)) as u32,
            timestamp_jitter_ticks: self.jitter,
            success_prob: self.p,
            ..Beacons::IDEAL
        };
        if let Some(real) = self.real {
            s.beacons.latency_spread_ticks = (real.spread * f64::from(M)) as u32;
            s.beacons.asymmetry_ticks = (real.asymmetry * f64::from(M)) as u32;
            s.beacons.latency_known = false;
            s.beacons.two_way = true;
            s.beacons.stamping = Stamping::CompletedTicks;
        }
        s.settle.tolerance_turns = self.tol;
        Case {
            name: self.name,
            scenario: s,
        }
    }
}

fn topo(t: Topology) -> Links {
    Links::from_topology(&t).unwrap()
}

/// The suite (demo deployments invented for these tests).
pub fn cases() -> Vec<Case> {
    let base = |name, links, law, kp, ki| Spec {
        name,
        links,
        law,
        kp,
        ki,
        slew: None,
        spread: 0.1,
        tol: 0.003,
        ppm: 0.0,
        random_start: true,
        latency: 0.0,
        jitter: 0,
        p: 1.0,
        real: None,
    };
    use Law::{Linear, Sine};
    use Topology as Tp;
    // An invented conveyor line: stations with two cross-links.
    let conveyor = [
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
    // Irrigation valves hung off a pump controller.
    let irrigation = [
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
    let specs = [
        // Vibration sensors on a footbridge: lock-step chain, P law, ideal clocks.
        Spec {
            spread: 0.2,
            tol: 0.004,
            random_start: false,
            ..base(
                "footbridge chain12 P lin",
                topo(Tp::Chain { nodes: 12 }),
                Linear,
                0.4,
                0.0,
            )
        },
        // Light fixtures around a courtyard: PI, ±20 ppm, half an update of latency.
        Spec {
            tol: 0.002,
            ppm: 20.0,
            latency: 0.5,
            ..base(
                "courtyard ring16 PI lat.5",
                topo(Tp::Ring { nodes: 16 }),
                Linear,
                0.35,
                0.02,
            )
        },
        // A weather-station hub and 8 masts: sine P law, nearly half-turn start spread.
        Spec {
            spread: 0.45,
            ppm: 5.0,
            ..base(
                "mast star9 P sine wide",
                topo(Tp::Star { nodes: 9 }),
                Sine,
                0.1,
                0.0,
            )
        },
        // Greenhouse sensor grid: sine PI, 1.5 updates of latency, 20 % loss.
        Spec {
            spread: 0.3,
            ppm: 30.0,
            latency: 1.5,
            p: 0.8,
            ..base(
                "greenhouse grid4x4 PI sine",
                topo(Tp::Grid { rows: 4, cols: 4 }),
                Sine,
                0.2,
                0.01,
            )
        },
        // Tunnel lamps pinned to a portal clock (8 + reference), PI, ±50 ppm.
        Spec {
            ppm: 50.0,
            ..base(
                "tunnel pinned8 PI",
                topo(Tp::PinnedChain { nodes: 8 }),
                Linear,
                0.4,
                0.02,
            )
        },
        // Conveyor stations (edge list), P law, 50 % loss, 2.5 updates of latency.
        Spec {
            latency: 2.5,
            p: 0.5,
            ..base(
                "conveyor edges14 P loss50",
                Links::from_pairs(14, &conveyor).unwrap(),
                Linear,
                0.15,
                0.0,
            )
        },
        // Stage lights on a truss: slew-limited chain, wide start.
        Spec {
            slew: Some(0.004),
            spread: 0.4,
            tol: 0.004,
            ..base(
                "truss chain10 slew",
                topo(Tp::Chain { nodes: 10 }),
                Linear,
                0.4,
                0.0,
            )
        },
        // Loudspeaker ring with noisy timestamps: noise near the tolerance.
        Spec {
            spread: 0.05,
            tol: 0.0025,
            ppm: 10.0,
            latency: 0.25,
            jitter: 6,
            ..base(
                "speaker ring12 noise near",
                topo(Tp::Ring { nodes: 12 }),
                Linear,
                0.3,
                0.01,
            )
        },
        // Solar-field trackers, P law with ±100 ppm crystals (steady offsets).
        Spec {
            tol: 0.004,
            ppm: 100.0,
            ..base(
                "solar grid3x4 P 100ppm",
                topo(Tp::Grid { rows: 3, cols: 4 }),
                Linear,
                0.25,
                0.0,
            )
        },
        // Fountain nozzles: sine PI, nearly half-turn spread, one schedule for all
        // (±5 ppm crystals let it drift apart slowly), ±2-tick timestamps.
        Spec {
            spread: 0.45,
            ppm: 5.0,
            random_start: false,
            jitter: 2,
            ..base(
                "fountain ring8 PI sine",
                topo(Tp::Ring { nodes: 8 }),
                Sine,
                0.3,
                0.02,
            )
        },
        // Pipeline valves: PI with two updates of latency, 10 % loss, ±10 ppm.
        Spec {
            spread: 0.05,
            ppm: 10.0,
            latency: 2.0,
            p: 0.9,
            ..base(
                "pipeline chain12 PI lat2",
                topo(Tp::Chain { nodes: 12 }),
                Linear,
                0.3,
                0.01,
            )
        },
        // Parking-lot lamp grid, P law, lock-step, small spread.
        Spec {
            spread: 0.05,
            tol: 0.004,
            random_start: false,
            ..base(
                "parking grid6x6 P lockstep",
                topo(Tp::Grid { rows: 6, cols: 6 }),
                Linear,
                0.2,
                0.0,
            )
        },
        // Irrigation valves (edge list), PI, timestamp noise near the tolerance, ±40 ppm.
        Spec {
            spread: 0.08,
            tol: 0.002,
            ppm: 40.0,
            latency: 1.0 / 3.0,
            jitter: 4,
            p: 0.9,
            ..base(
                "irrigation edges10 noise",
                Links::from_pairs(10, &irrigation).unwrap(),
                Linear,
                0.3,
                0.015,
            )
        },
        // Real links (version-2 beacons, unknown latencies measured two-way, completed
        // ticks, a trim leak). A string of avalanche-barrier sensors: latency 0.3–1.7
        // updates per link, ±50 ppm crystals, 0.2 % of an update of direction asymmetry.
        Spec {
            spread: 0.1,
            tol: 0.01,
            ppm: 50.0,
            latency: 0.3,
            jitter: 2,
            real: Some(RealLinks {
                spread: 1.4,
                asymmetry: 0.002,
            }),
            ..base(
                "barrier chain10 PI v2 real",
                topo(Tp::Chain { nodes: 10 }),
                Sine,
                0.3,
                0.01,
            )
        },
        // Vineyard trellis radios on a 4×4 grid, 20 % loss, wider asymmetry.
        Spec {
            spread: 0.2,
            tol: 0.006,
            ppm: 40.0,
            latency: 0.5,
            p: 0.8,
            jitter: 3,
            real: Some(RealLinks {
                spread: 1.0,
                asymmetry: 0.003,
            }),
            ..base(
                "vineyard grid4x4 PI v2 real",
                topo(Tp::Grid { rows: 4, cols: 4 }),
                Sine,
                0.25,
                0.012,
            )
        },
    ];
    specs.into_iter().map(Spec::build).collect()
}

/// The planner's worst-case settling bound for `s`, updates: the simulator's model of
/// the law and the network's spectrum handed to `plan::settle`, as `sim::predict` does.
pub fn planner_bound(s: &Setup) -> Option<u64> {
    let spectrum = match s.links.topology() {
        Some(t) => t.spectrum().ok()?,
        None => s.links.graph().spectrum().ok()?,
    };
    let period = s.phase_period_s();
    let spread = Spread {
        initial_spread_s: start_spread_turns(s) * period,
        tolerance_s: tolerance_turns(s) * period,
    };
    plan::settle(&planner_model(s), &spectrum, &spread)
        .ok()?
        .bound_updates
}

/// Pick the horizon: at least 3× the planner's worst-case bound, 10 slowest oscillation
/// periods and 300 updates.
pub fn horizon(s: &mut Setup) -> Option<u64> {
    s.horizon_updates = 300;
    let bound = planner_bound(s);
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

/// Simulate (the simulator's own Monte Carlo and measurement) and forecast one case.
pub fn evaluate(case: &mut Case) -> Row {
    let bound = horizon(&mut case.scenario);
    let s = &case.scenario;
    let t0 = std::time::Instant::now();
    let f = forecast(s, SAMPLES, 0xF0_4E).unwrap();
    let forecast_s = t0.elapsed().as_secs_f64();
    let t1 = std::time::Instant::now();
    let sim = monte_carlo(s, RUNS as usize, 0x51_4D, &|_| {}).unwrap();
    let sim_s = t1.elapsed().as_secs_f64();
    // No settled run (or no steady window) leaves NaN, which every check refuses.
    let (sim_p50, sim_p90, sim_max) = sim
        .settle_updates
        .map_or((f64::NAN, f64::NAN, f64::NAN), |q| (q.p50, q.p90, q.max));
    let (sim_noise_p50, sim_noise_p99) = sim
        .noise_floor_turns
        .map_or((f64::NAN, f64::NAN), |q| (q.p50, q.p99));
    Row {
        name: case.name,
        nodes: s.nodes(),
        horizon: s.horizon_updates,
        tol: tolerance_turns(s),
        forecast: f,
        bound,
        sim_p50,
        sim_p90,
        sim_max,
        sim_never: sim.never_settled_fraction,
        sim_noise_p50,
        sim_noise_p99,
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
