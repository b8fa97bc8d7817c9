//! Hand a checked [`Scenario`] to the library — planner, graph spectra, tuner, simulator —
//! and collect what it answers. Every figure here comes from the library; this module
//! only maps units and picks which library answer goes where.

use super::CliError;
use super::firmware::NodeConstants;
use super::scenario::{Coupling, Gains, Network, Scenario};
use crate::graph::Graph;
use crate::plan::{
    self, Budget, Locking, Model, Noise, Settling, Spectrum, Spread, Stability, Topology, Tuning,
};
use crate::sim;

/// Where the spectrum came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SpectrumSource {
    /// The topology's closed form.
    ClosedForm,
    /// The numeric graph path (edge list).
    Numeric,
}

impl SpectrumSource {
    /// Keyword used in reports and JSON.
    #[must_use]
    pub fn keyword(self) -> &'static str {
        match self {
            SpectrumSource::ClosedForm => "closed_form",
            SpectrumSource::Numeric => "numeric",
        }
    }
}

/// The coupling graph as the library sees it.
#[derive(Clone, Debug)]
pub struct Shape {
    /// Closed-form topology, when the network has one.
    pub topology: Option<Topology>,
    /// Numeric graph, for edge lists.
    pub graph: Option<Graph>,
    /// Spectrum summary.
    pub spectrum: Spectrum,
    /// Where the spectrum came from.
    pub source: SpectrumSource,
    /// Worst edge load per unit detuning (`None`: no closed form for it).
    pub flow_factor: Option<f64>,
}

/// Build the library's view of the scenario's network.
///
/// # Errors
/// [`CliError::Input`] for a graph the library refuses (disconnected, too small).
pub fn shape(scenario: &Scenario) -> Result<Shape, CliError> {
    let topology = match &scenario.network {
        Network::Topology(t) => Some(*t),
        Network::EdgeList { .. } => None,
    };
    let input = |message: String| CliError::input(&scenario.path, message);
    if let Some(t) = topology {
        let spectrum = t.spectrum().map_err(|e| input(format!("network: {e}")))?;
        let flow_factor = match t.worst_flow_factor() {
            Ok(f) => Some(f),
            // Grid and torus have no closed form: the numeric path gives it where the
            // graph is small enough for the dense method.
            Err(_) => Graph::from_topology(&t)
                .ok()
                .and_then(|g| g.worst_flow_factor().ok()),
        };
        return Ok(Shape {
            topology: Some(t),
            graph: None,
            spectrum,
            source: SpectrumSource::ClosedForm,
            flow_factor,
        });
    }
    let Network::EdgeList { nodes, edges, path } = &scenario.network else {
        return Err(input("network: no topology".to_owned()));
    };
    let graph = Graph::from_edges(*nodes, edges)
        .map_err(|e| CliError::input(path, format!("edge list: {e}")))?;
    if !graph.is_connected() {
        return Err(CliError::input(
            path,
            format!(
                "edge list: the graph falls apart into {} pieces that can never lock to each other: every node must be reachable from every other",
                graph.component_count()
            ),
        ));
    }
    let spectrum = graph
        .spectrum()
        .map_err(|e| CliError::input(path, format!("edge list: {e}")))?;
    let flow_factor = graph.worst_flow_factor().ok();
    Ok(Shape {
        topology: None,
        graph: Some(graph),
        spectrum,
        source: SpectrumSource::Numeric,
        flow_factor,
    })
}

/// Eigenvalues (ascending) and the slowest mode's shape (largest magnitude 1), node by node.
#[derive(Clone, Debug, PartialEq)]
pub struct Modes {
    /// All Laplacian eigenvalues, ascending (grounded Laplacian for a pinned chain).
    pub eigenvalues: Vec<f64>,
    /// The slowest mode's value at each node.
    pub slow_mode: Vec<f64>,
}

/// The full eigenvalue list and the slowest mode of `shape`.
///
/// # Errors
/// [`CliError::Input`] when the library cannot compute them (for example an edge list too
/// large for the dense method).
pub fn modes(scenario: &Scenario, shape: &Shape) -> Result<Modes, CliError> {
    let n = shape.spectrum.node_count;
    let input = |message: String| CliError::input(&scenario.path, message);
    if let Some(t) = shape.topology {
        let mut eigenvalues = vec![0.0; n];
        t.eigenvalues(&mut eigenvalues)
            .map_err(|e| input(format!("spectrum: {e}")))?;
        let mut slow_mode = vec![0.0; n];
        t.slow_mode_shape(&mut slow_mode)
            .map_err(|e| input(format!("spectrum: {e}")))?;
        return Ok(Modes {
            eigenvalues,
            slow_mode,
        });
    }
    let graph = shape
        .graph
        .as_ref()
        .ok_or_else(|| input("spectrum: no graph".to_owned()))?;
    let dense = graph
        .dense_spectrum()
        .map_err(|e| input(format!("spectrum: {e}")))?;
    let raw = dense.slow_mode();
    let peak = raw.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    // Scale for display only, as the closed-form path does.
    let slow_mode = raw
        .iter()
        .map(|v| if peak > 0.0 { v / peak } else { *v })
        .collect();
    Ok(Modes {
        eigenvalues: dense.eigenvalues().to_vec(),
        slow_mode,
    })
}

/// The planner's model of the node law for `scenario` at gains `kp`, `ki` (as the node
/// runs them) and slew limit as the node runs it.
#[must_use]
pub fn model(scenario: &Scenario, kp: f64, ki: f64, slew_limit_turns: f64) -> Model {
    Model {
        law: match scenario.coupling {
            Coupling::Sine => plan::Law::Sine,
            Coupling::Linear => plan::Law::Linear,
        },
        kp,
        ki,
        update_period_s: scenario.update_period_s(),
        phase_period_s: scenario.phase_period_s,
        delay_updates: scenario.delay_updates(),
        success_prob: 1.0 - scenario.loss_fraction,
        slew_limit_turns,
        trim_limit_ppm: scenario.trim_limit_ppm,
    }
}

/// The planner's budget for `scenario`.
#[must_use]
pub fn budget(scenario: &Scenario) -> Budget {
    Budget {
        lock_time_budget_s: scenario.lock_budget_s,
        spread: Spread {
            initial_spread_s: scenario.initial_spread_s,
            tolerance_s: scenario.lock_tolerance_s,
        },
        crystal_tolerance_ppm: scenario.crystal_tolerance_ppm,
    }
}

/// What the closed forms predict at one pair of gains.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Prediction {
    /// The node-law constants the gains round to.
    pub constants: NodeConstants,
    /// Proportional gain as the node runs it.
    pub kp: f64,
    /// Integral gain as the node runs it.
    pub ki: f64,
    /// Stability and margins.
    pub stability: Stability,
    /// Settling (only when stable).
    pub settling: Option<Settling>,
    /// Worst-case lock against the crystal tolerance (`None`: no flow factor known).
    pub locking: Option<Locking>,
    /// Steady phase jitter from timestamp jitter (only when stable and modes are known).
    pub noise: Option<Noise>,
    /// Predicted lock time the verdict compares with the budget: the larger of the
    /// worst-case bound (dominant-mode estimate where there is no bound) and the
    /// estimate with message loss, seconds. `None` when unstable.
    pub lock_s: Option<f64>,
}

/// Predict the behaviour of `scenario` on `shape` at gains `kp`, `ki`.
///
/// # Errors
/// [`CliError::Input`] for gains the node law refuses or values the planner refuses.
pub fn predict(
    scenario: &Scenario,
    shape: &Shape,
    kp: f64,
    ki: f64,
) -> Result<Prediction, CliError> {
    let input = |message: String| CliError::input(&scenario.path, message);
    let constants = NodeConstants::new(scenario, kp, ki).map_err(|e| input(format!("law: {e}")))?;
    constants
        .config()
        .map_err(|e| input(format!("law: the node law refuses these values: {e}")))?;
    let (kp, ki) = constants.gains();
    let m = model(scenario, kp, ki, constants.slew_limit_turns());
    let stability =
        plan::stability(&m, &shape.spectrum).map_err(|e| input(format!("prediction: {e}")))?;
    let settling = if stability.stable {
        Some(
            plan::settle(&m, &shape.spectrum, &budget(scenario).spread)
                .map_err(|e| input(format!("prediction: {e}")))?,
        )
    } else {
        None
    };
    let locking = match shape.flow_factor {
        Some(f) => Some(
            plan::lock_worst_case(&m, &shape.spectrum, f, scenario.crystal_tolerance_ppm)
                .map_err(|e| input(format!("prediction: {e}")))?,
        ),
        None => None,
    };
    // The scenario gives the timestamp error as a uniform ±a; the planner wants its
    // standard deviation a/√3.
    let jitter_sd_s = scenario.timestamp_jitter_s / 3.0_f64.sqrt();
    let noise = if stability.stable {
        match (&shape.topology, &shape.graph) {
            (Some(t), _) => {
                plan::phase_jitter(&m, &shape.spectrum, t.nonzero_modes(), jitter_sd_s).ok()
            }
            (None, Some(g)) => g.dense_spectrum().ok().and_then(|d| {
                let modes: Vec<f64> = d.eigenvalues().iter().skip(1).copied().collect();
                plan::phase_jitter(&m, &shape.spectrum, modes, jitter_sd_s).ok()
            }),
            (None, None) => None,
        }
    } else {
        None
    };
    let lock_s = settling.map(|s| s.bound_s.unwrap_or(s.asymptotic_s).max(s.with_loss_s));
    Ok(Prediction {
        constants,
        kp,
        ki,
        stability,
        settling,
        locking,
        noise,
        lock_s,
    })
}

/// Run the gain tuner for `scenario`.
///
/// # Errors
/// [`CliError::Input`] for values the tuner refuses.
pub fn tune(scenario: &Scenario, shape: &Shape, pi: bool) -> Result<Tuning, CliError> {
    let slew = NodeConstants::new(scenario, 0.5, 0.0)
        .map(|c| c.slew_limit_turns())
        .unwrap_or(scenario.slew_limit_turns);
    let template = model(scenario, 1.0, if pi { 0.1 } else { 0.0 }, slew);
    let b = budget(scenario);
    let result = match shape.topology {
        Some(t) => plan::tune_topology(&template, &t, &b),
        None => plan::tune(&template, &shape.spectrum, shape.flow_factor, &b),
    };
    result.map_err(|e| CliError::input(&scenario.path, format!("tuning: {e}")))
}

/// The gains a scenario runs at: its own, or the tuner's recommendation.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Chosen {
    /// Proportional gain (before rounding to Q16.16).
    pub kp: f64,
    /// Integral gain (before rounding).
    pub ki: f64,
    /// The tuner's answer, when the scenario asked for tuning.
    pub tuning: Option<Tuning>,
}

/// Settle the gains: the scenario's fixed gains, or the tuner's recommendation (its fastest
/// stable gains when nothing meets the budget, so the report still shows what is possible).
///
/// # Errors
/// As [`tune`]; and [`CliError::Input`] when the tuner finds no stable gains at all.
pub fn choose(scenario: &Scenario, shape: &Shape) -> Result<Chosen, CliError> {
    match scenario.gains {
        Gains::Fixed { kp, ki } => Ok(Chosen {
            kp,
            ki,
            tuning: None,
        }),
        Gains::Tune { pi } => {
            let tuning = tune(scenario, shape, pi)?;
            let pick = tuning.recommended.or(tuning.fastest).ok_or_else(|| {
                CliError::input(
                    &scenario.path,
                    "tuning: no stable gains lock this network against the crystal tolerance; raise law.slew_limit_turns or law.trim_limit_ppm, tighten clock.crystal_tolerance_ppm, or update faster".to_owned(),
                )
            })?;
            Ok(Chosen {
                kp: pick.kp,
                ki: pick.ki,
                tuning: Some(tuning),
            })
        }
    }
}

/// The simulator's scenario for `scenario` at node constants `constants`.
///
/// # Errors
/// [`CliError::Input`] for values the simulator refuses.
pub fn sim_scenario(
    scenario: &Scenario,
    shape: &Shape,
    constants: &NodeConstants,
) -> Result<sim::Scenario, CliError> {
    let input = |message: String| CliError::input(&scenario.path, message);
    let links = match (&shape.topology, &shape.graph) {
        (Some(t), _) => sim::Links::from_topology(t),
        (None, Some(g)) => sim::Links::from_graph(g),
        (None, None) => {
            return Err(CliError::Unavailable(
                "simulation needs a topology or a graph".to_owned(),
            ));
        }
    }
    .map_err(|e| input(format!("simulation: {e}")))?;
    let config = constants
        .config()
        .map_err(|e| input(format!("law: the node law refuses these values: {e}")))?;
    let timer_hz = f64::from(scenario.timer_hz);
    let mut s = sim::Scenario::new(links, config, timer_hz);
    s.crystals = sim::Crystals::Uniform {
        tolerance_ppm: scenario.crystal_tolerance_ppm,
    };
    s.schedule = sim::Schedule {
        random_start: true,
        jitter_ticks: 0,
    };
    s.beacons = sim::Beacons {
        latency_ticks: (scenario.latency_s * timer_hz).round() as u32,
        timestamp_jitter_ticks: (scenario.timestamp_jitter_s * timer_hz).round() as u32,
        success_prob: 1.0 - scenario.loss_fraction,
    };
    s.start = sim::StartPhases::Uniform {
        spread_turns: scenario.initial_spread_s / scenario.phase_period_s,
    };
    s.settle = sim::SettleCriterion {
        tolerance_turns: scenario.lock_tolerance_s / scenario.phase_period_s,
    };
    s.horizon_updates = (scenario.duration_s * scenario.update_rate_hz).ceil() as u64;
    s.validate()
        .map_err(|e| input(format!("simulation: {e}")))?;
    Ok(s)
}

/// What the Monte Carlo shows.
#[derive(Clone, Debug)]
pub struct Verification {
    /// The simulator's summary.
    pub summary: sim::Summary,
    /// Settling time of each run that settled, seconds, in run order.
    pub lock_times_s: Vec<f64>,
    /// Master seed.
    pub seed: u64,
}

/// Run the Monte Carlo for `sim_scenario`, reporting progress to `progress`.
///
/// # Errors
/// [`CliError::Input`] for a request the simulator refuses.
pub fn verify(
    scenario: &Scenario,
    sim_scenario: &sim::Scenario,
    runs: u32,
    seed: u64,
    progress: &(dyn Fn(sim::Progress) + Sync),
) -> Result<Verification, CliError> {
    let summary = sim::monte_carlo(sim_scenario, runs as usize, seed, progress)
        .map_err(|e| CliError::input(&scenario.path, format!("simulation: {e}")))?;
    let period = sim_scenario.update_period_s();
    let lock_times_s = summary
        .outcomes
        .iter()
        .filter_map(|o| o.settle.map(|l| l.at_updates as f64 * period))
        .collect();
    Ok(Verification {
        summary,
        lock_times_s,
        seed,
    })
}
