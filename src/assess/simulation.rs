//! The Monte-Carlo verification: the scenario handed to the simulator at the node
//! constants as flashed, and what the runs show.

use super::AssessError;
use super::constants::NodeConstants;
use super::network::NetworkModel;
use crate::scenario::Scenario;
use crate::sim;

/// The simulator's setup for `scenario` on `network` at node constants `constants`, each
/// run `horizon_updates` update intervals long.
///
/// # Errors
/// [`AssessError::Input`] for values the simulator refuses.
pub fn setup(
    scenario: &Scenario,
    network: &NetworkModel,
    constants: &NodeConstants,
    horizon_updates: u64,
) -> Result<sim::Setup, AssessError> {
    let input = |message: String| AssessError::input(&scenario.path, message);
    let links = match (&network.topology, &network.graph) {
        (Some(t), _) => sim::Links::from_topology(t),
        (None, Some(g)) => sim::Links::from_graph(g),
        (None, None) => {
            // `NetworkModel::of` always sets one of the two.
            panic!(
                "network model without topology or graph: a broken invariant of NetworkModel::of"
            )
        }
    }
    .map_err(|e| input(format!("simulation: {e}")))?;
    let config = constants
        .config()
        .map_err(|e| input(format!("law: the node law refuses these values: {e}")))?;
    let timer_hz = f64::from(scenario.timer_hz);
    let mut s = sim::Setup::new(links, config, timer_hz);
    s.crystals = match &scenario.crystal_ppm {
        // The pattern as given; a pinned chain's reference (the last simulated node)
        // runs at the nominal rate.
        Some(pattern) => {
            let mut ppm = pattern.clone();
            ppm.resize(s.links.nodes(), 0.0);
            sim::Crystals::Fixed(ppm)
        }
        None => sim::Crystals::Uniform {
            tolerance_ppm: scenario.crystal_tolerance_ppm,
        },
    };
    let rate = scenario.update_rate_hz;
    s.reboots = scenario
        .reboots
        .iter()
        .map(|r| sim::Reboot {
            node: r.node,
            at_updates: r.at_updates(rate),
            down_updates: r.down_updates(rate),
        })
        .collect();
    s.schedule = sim::Schedule {
        random_start: true,
        jitter_ticks: 0,
    };
    let lo = (scenario.latency_s * timer_hz).round();
    s.beacons = sim::Beacons {
        latency_ticks: lo as u32,
        latency_spread_ticks: ((scenario.latency_max_s * timer_hz).round() - lo).max(0.0) as u32,
        asymmetry_ticks: (scenario.asymmetry_s * timer_hz).round() as u32,
        latency_known: scenario.latency_known,
        two_way: scenario.beacon_version >= 2,
        stamping: scenario.stamping,
        timestamp_jitter_ticks: (scenario.timestamp_jitter_s * timer_hz).round() as u32,
        late_stamp_fraction: scenario.late_stamp_fraction,
        late_stamp_max_ticks: (scenario.late_stamp_max_s * timer_hz).round() as u32,
        success_prob: 1.0 - scenario.loss_fraction,
    };
    s.start = sim::StartPhases::Uniform {
        spread_turns: scenario.initial_spread_s / scenario.phase_period_s,
    };
    s.settle = sim::SettleCriterion {
        tolerance_turns: scenario.lock_tolerance_s / scenario.phase_period_s,
    };
    s.horizon_updates = horizon_updates;
    s.validate()
        .map_err(|e| input(format!("simulation: {e}")))?;
    Ok(s)
}

/// What the Monte Carlo shows.
#[derive(Clone, Debug)]
pub struct Simulation {
    /// The simulator's summary.
    pub summary: sim::Summary,
    /// Settling time of each run that settled, seconds, in run order.
    pub settle_times_s: Vec<f64>,
    /// Master seed.
    pub seed: u64,
    /// The setup that was simulated (for tracing sample runs).
    pub setup: sim::Setup,
}

/// Run `runs` runs of `setup` with master `seed`, reporting progress to `progress`.
///
/// # Errors
/// [`AssessError::Input`] for a request the simulator refuses.
pub fn simulate(
    scenario: &Scenario,
    setup: sim::Setup,
    runs: u32,
    seed: u64,
    progress: &(dyn Fn(sim::Progress) + Sync),
) -> Result<Simulation, AssessError> {
    let summary = sim::monte_carlo(&setup, runs as usize, seed, progress)
        .map_err(|e| AssessError::input(&scenario.path, format!("simulation: {e}")))?;
    Ok(Simulation::of(summary, seed, setup))
}

impl Simulation {
    /// What the runs in `summary` show, the runs of `setup` with master `seed`.
    #[must_use]
    pub fn of(summary: sim::Summary, seed: u64, setup: sim::Setup) -> Simulation {
        let period = setup.update_period_s();
        let settle_times_s = summary
            .outcomes
            .iter()
            .filter_map(|o| o.settle.map(|l| l.at_updates as f64 * period))
            .collect();
        Simulation {
            summary,
            settle_times_s,
            seed,
            setup,
        }
    }
}
