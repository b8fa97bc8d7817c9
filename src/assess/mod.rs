//! The whole assessment of one deployment, from a [`Scenario`] to a typed verdict
//! (feature `assess`).
//!
//! [`assess`] is the one definition of what `entrain check`, `tune` and `simulate`
//! answer, so that a firmware repository's own test can run the same check without the
//! binary: the network's spectrum is computed once ([`NetworkModel`]); the gains are the
//! scenario's numbers or, for gains marked `"tune"`, the tuner's ([`ChosenGains`]); the
//! planner predicts at the gains as flashed ([`Prediction`], with the one definition of
//! the predicted lock time, [`crate::plan::predicted_lock_s`]); the margins are checked
//! against the scenario's `[margins]`; the Monte Carlo of the real node code verifies
//! when asked ([`Simulation`]); and [`decide`] turns it all into a [`Verdict`] with typed
//! [`Reason`]s, beside typed [`Warning`]s.
//!
//! # Example
//!
//! ```
//! use entrain::assess::{Options, assess};
//! use entrain::scenario::Scenario;
//!
//! let text = r#"
//! version = 1
//! name = "Courtyard lights"
//! [network]
//! topology = "ring"
//! nodes = 12
//! [timing]
//! update_rate_hz = 20
//! phase_period_s = 0.02
//! [law]
//! coupling = "sine"
//! kp = 0.3
//! ki = 0.03
//! [clock]
//! crystal_tolerance_ppm = 30
//! [lock]
//! initial_spread_s = 0.004
//! tolerance_s = 0.0002
//! budget_s = 60
//! "#;
//! let scenario = Scenario::from_toml(std::path::Path::new("courtyard.toml"), text)?;
//! let options = Options { runs: 8, ..Options::of(&scenario) };
//! let a = assess(scenario, &options, &|_| {})?;
//! assert!(a.prediction.stability.stable);
//! assert!(a.simulation.is_some());
//! for reason in &a.verdict.reasons {
//!     println!("{}: {reason}", reason.code());
//! }
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod constants;
mod error;
mod network;
mod prediction;
mod simulation;
mod timer;
mod tuning;
mod verdict;

pub use constants::NodeConstants;
pub use error::{AssessError, WorkEstimate, human_duration};
pub use network::{NetworkModel, SpectrumSource};
pub use prediction::{
    FORECAST_MAX_WORK, FORECAST_MIN_SAMPLES, FORECAST_SAMPLES, FORECAST_SEED, HORIZON_BOUND_FACTOR,
    HORIZON_SLOW_PERIODS, MarginCheck, NoiseFloorPrediction, PredictEffort, Prediction,
    SettlePrediction, budget, model, predict, predict_with,
};
pub use simulation::{Simulation, setup, simulate};
pub use timer::{MAX_TICK_FRACTION_OF_TOLERANCE, TimerCheck};
pub use tuning::{ChosenGains, GainsSource, choose, search, tune};
pub use verdict::{
    MarginKind, NOISE_WARNING_FRACTION, Reason, Verdict, Warning, decide, prediction_warnings,
    seconds, simulated_settle_s, simulation_warnings,
};

use crate::scenario::Scenario;
use crate::sim;

/// How much verification to run.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Options {
    /// Monte-Carlo runs; 0 skips the simulation (the verdict rests on the prediction).
    pub runs: u32,
    /// Master seed of the Monte Carlo.
    pub seed: u64,
    /// Refuse a Monte Carlo estimated to take longer than this, seconds (`None`: no
    /// limit). The estimate is the work (runs × horizon × Σ degree neighbour-updates) at
    /// a rate measured on the spot on this scenario ([`sim::measure_rate`]), spread over
    /// the Monte Carlo's threads; the refusal is [`AssessError::TooMuchWork`], before any
    /// run starts.
    pub time_limit_s: Option<f64>,
}

impl Options {
    /// The scenario's own `[monte_carlo] runs` and `seed`.
    #[must_use]
    pub fn of(scenario: &Scenario) -> Options {
        Options {
            runs: scenario.runs,
            seed: scenario.seed,
            time_limit_s: None,
        }
    }

    /// Prediction only.
    #[must_use]
    pub fn predict_only(scenario: &Scenario) -> Options {
        Options {
            runs: 0,
            ..Options::of(scenario)
        }
    }
}

/// Everything one assessment found.
#[derive(Clone, Debug)]
pub struct Assessment {
    /// The scenario.
    pub scenario: Scenario,
    /// The coupling graph and its spectrum.
    pub network: NetworkModel,
    /// The gains, and the tuner's answer when a gain was tuned.
    pub gains: ChosenGains,
    /// The planner's prediction at the gains as flashed.
    pub prediction: Prediction,
    /// The Monte Carlo, when run.
    pub simulation: Option<Simulation>,
    /// The verdict.
    pub verdict: Verdict,
    /// Warnings.
    pub warnings: Vec<Warning>,
}

/// Assess `scenario`: choose the gains, predict, verify by Monte Carlo when
/// `options.runs > 0` (calling `progress` after each run), and decide the verdict.
///
/// # Errors
/// [`AssessError`] for a scenario the library refuses (a disconnected graph, values the
/// node law, planner or simulator refuses, no stable gains to tune to).
pub fn assess(
    scenario: Scenario,
    options: &Options,
    progress: &(dyn Fn(sim::Progress) + Sync),
) -> Result<Assessment, AssessError> {
    let network = NetworkModel::of(&scenario)?;
    assess_with_network(scenario, network, options, progress)
}

/// As [`assess`], with the network model already built (by
/// [`NetworkModel::of_observed`], say, to show the eigensolver's progress). `network`
/// must be the model of `scenario`.
///
/// # Errors
/// As [`assess`].
pub fn assess_with_network(
    scenario: Scenario,
    network: NetworkModel,
    options: &Options,
    progress: &(dyn Fn(sim::Progress) + Sync),
) -> Result<Assessment, AssessError> {
    let gains = choose(&scenario, &network)?;
    let prediction = predict(&scenario, &network, gains.kp, gains.ki)?;
    let mut warnings = prediction_warnings(&scenario, &prediction);
    if gains.tuning.is_some_and(|t| !t.feasible) {
        warnings.push(Warning::ClosestGainsShown);
    }
    let simulation = if options.runs > 0 {
        let nodes = network.spectrum.node_count;
        if nodes > crate::scenario::MAX_SIMULATED_NODES {
            return Err(AssessError::input(
                &scenario.path,
                format!(
                    "network: {nodes} nodes is more than the Monte Carlo simulates (at most {}); the prediction alone plans up to {} nodes: use `check --no-simulate`, `tune` or `spectrum`",
                    crate::scenario::MAX_SIMULATED_NODES,
                    crate::scenario::MAX_SCENARIO_NODES
                ),
            ));
        }
        let s = setup(
            &scenario,
            &network,
            &prediction.constants,
            prediction.horizon_updates,
        )?;
        if let Some(limit_s) = options.time_limit_s {
            check_work(&scenario, &s, options, limit_s)?;
        }
        let v = simulate(&scenario, s, options.runs, options.seed, progress)?;
        warnings.extend(simulation_warnings(&v));
        Some(v)
    } else {
        None
    };
    let verdict = decide(&scenario, &prediction, simulation.as_ref());
    Ok(Assessment {
        scenario,
        network,
        gains,
        prediction,
        simulation,
        verdict,
        warnings,
    })
}

/// Work below which no rate is measured (well under a second on any desk machine).
const WORK_NOT_WORTH_MEASURING: f64 = 2e7;

/// Updates of the timed sample run behind the rate estimate.
const RATE_SAMPLE_UPDATES: u64 = 2_000;

/// Refuse a Monte Carlo of `options.runs` runs of `setup` estimated to take longer than
/// `limit_s` seconds.
fn check_work(
    scenario: &Scenario,
    setup: &sim::Setup,
    options: &Options,
    limit_s: f64,
) -> Result<(), AssessError> {
    let work = setup.neighbour_updates_per_run() * f64::from(options.runs);
    if work < WORK_NOT_WORTH_MEASURING {
        return Ok(());
    }
    // Enough updates that the timed run does at least ~10⁶ neighbour-updates.
    let per_update =
        (setup.neighbour_updates_per_run() / setup.horizon_updates.max(1) as f64).max(1.0);
    let sample = RATE_SAMPLE_UPDATES.max((1e6 / per_update) as u64);
    let rate = sim::measure_rate(setup, options.seed, sample)
        .map_err(|e| AssessError::input(&scenario.path, format!("simulation: {e}")))?;
    let threads = rayon::current_num_threads().max(1);
    // Runs are spread over the threads whole: the slowest thread does ⌈runs/threads⌉.
    let runs_per_thread = (f64::from(options.runs) / threads as f64).ceil();
    let estimated_s = setup.neighbour_updates_per_run() * runs_per_thread / rate;
    if estimated_s > limit_s {
        return Err(AssessError::TooMuchWork(WorkEstimate {
            neighbour_updates: work,
            rate_per_thread: rate,
            threads,
            estimated_s,
            limit_s,
        }));
    }
    Ok(())
}
