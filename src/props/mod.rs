//! Property tests of a firmware's flashed constants over whole families of deployments
//! (feature `proptest`, host only).
//!
//! A firmware repository states what must hold for every deployment it may meet — "every
//! chain of 2 to 64 nodes, every crystal pattern within ±50 ppm, every loss up to 10 %:
//! the constants we flash lock within 60 s" — and the kit checks it on the real
//! [`crate::Node`] code:
//!
//! - [`Firmware`] holds the constants as flashed (the `CONFIG` of the file
//!   `entrain tune --out` writes, `include!`d) with the timer rate and the neighbour-table
//!   capacity `N`; [`Firmware::fix`] writes them into a scenario exactly.
//! - [`Deployments`] (built on [`crate::scenario::Scenario`]) varies the layout
//!   ([`topology`] families, [`connected_edges`] with a degree cap), the crystals
//!   ([`crystal_patterns`], including the planner's worst-case split and a gradient),
//!   loss, latency, start spread and [`reboots`], with the constants held fixed.
//! - [`Property`] names what must hold; [`check`] checks one deployment; [`Firmware::verify`]
//!   runs a proptest search and, on failure, panics with the minimal failing deployment
//!   (proptest shrinks it) as a scenario file, ready for `entrain check`.
//!
//! # Effort per case
//!
//! A property run checks hundreds of deployments, so each check is cut to what the
//! properties ask ([`Effort`]): a few Monte-Carlo runs (default 4), a short forecast
//! (default 20 samples, the fewest it takes; only for [`Property::SettlesWithinBudget`],
//! the one property that reads it, and only where the planner's worst-case bound misses
//! the budget, see below), and a simulation horizon chosen from the budget and
//! the prediction: [`Effort::horizon_factor`] (default 1.25) × the budget — × the larger of
//! the budget and the planner's worst-case settling bound when [`Property::BoundHolds`]
//! is asked — plus the last reboot's return, never longer than the full assessment's
//! horizon. A run counts as settled only if its last exit from the tolerance band lies
//! before the final fifth of its horizon, so with the factor 1.25 any settling up to the
//! budget (or bound) is seen as such and a later one counts as never settled — a failure
//! either way; what the short horizon gives up is a late
//! swing out of the band long after the budget, and slow drifts (of the trims, say) that
//! build up later, which `entrain check` on the written scenario (full horizon, more
//! runs) still sees.
//!
//! The forecast's runs also stop early ([`Effort::forecast_early_stop`], on by default):
//! a run that has stayed within half the tolerance for the final fifth of the horizon
//! (and half the slowest oscillation period) is settled where it last left the
//! tolerance, and stops; noisy runs never stay that
//! deep and run the whole horizon. On every scenario of the fidelity suite the settling
//! quantiles equal the full forecast's (`tests/fidelity.rs`).
//!
//! The simulated runs of the real node code stop by the same rule
//! ([`Effort::simulation_early_stop`], on by default): a run that has stayed within half
//! the tolerance for as long as a forecast run must ([`crate::forecast::stay_before_early_stop`])
//! is settled where it last left the tolerance, which is what the whole run reports
//! unless it leaves the band again after that stay. `tests/props.rs` holds every run's
//! settling instant (or never) equal to the whole run's over P and PI designs, chains and
//! a ring of 2 to 48 nodes with loss and timestamp jitter, and fails when the stay is
//! cut to 20 samples. Not when [`Property::TrimBelowLimit`] is asked (the trims are
//! watched to the horizon) or nodes reboot; `entrain check` on a written scenario always
//! runs the whole horizon.
//!
//! Where the planner's worst-case settling bound already meets the budget, the forecast is
//! not run at all ([`Effort::forecast_only_over_budget`], on by default): the budget rule
//! compares the bound when there is no forecast, so the prediction's side of the rule
//! passes either way. What this gives up is a forecast settling later than the bound —
//! the bound failing, which [`Property::BoundHolds`] checks against the simulation. In the
//! search below that skips the forecast for chains up to about 38 nodes.
//!
//! So the length of each case's simulation follows from its budget alone (and from the
//! bound when [`Property::BoundHolds`] is asked), not from the network's size: in the
//! search of `examples/props_speed.rs` (budget 60 s, 100 updates a second, chains of 2 to
//! 64 nodes) every deployment gets 4 runs of the real node code of at most 7,500 updates
//! each and (where the bound misses the budget) 20 forecast runs of at most 7,500
//! updates, each of which ends once it has stayed 1,500 updates (the final fifth; more
//! when half the slowest oscillation period is longer) within half the tolerance. A
//! larger network costs more per update, not more updates.
//!
//! # Example
//!
//! ```
//! use entrain::props::{Deployments, Effort, Family, Firmware, Property};
//! use entrain::scenario::Scenario;
//! use entrain::{Config, Gain, Law};
//!
//! // The constants as flashed (in a firmware repository: `include!` of the generated
//! // file, then `sync_consts::CONFIG`): 1 MHz timer, 5 ms turn, 50 updates a second.
//! const CONFIG: Config = match Config::builder(5_000, 20_000)
//!     .kp(Gain::from_q16(26_214))
//!     .law(Law::Sine)
//!     .timeout_ticks(100_000)
//!     .build()
//! {
//!     Ok(c) => c,
//!     Err(_) => panic!("bad constants"),
//! };
//! let firmware = Firmware::<4>::new(CONFIG, 1_000_000);
//! let base = Scenario::from_toml(std::path::Path::new("orchard.toml"), r#"
//! version = 1
//! name = "Orchard frost sensors"
//! [network]
//! topology = "chain"
//! nodes = 2
//! [timing]
//! update_rate_hz = 50
//! phase_period_s = 0.005
//! [law]
//! coupling = "sine"
//! kp = 0.4
//! [lock]
//! initial_spread_s = 0.002
//! tolerance_s = 0.0001
//! budget_s = 10
//! "#)?;
//! let deployments = Deployments::new(firmware.fix(&base)?)
//!     .family(Family::Chain, 2..=8)
//!     .crystals_within(20.0)
//!     .loss(0.0..=0.05);
//! let effort = Effort { cases: 16, runs: 4, ..Effort::default() };
//! firmware.verify(&deployments, &[Property::Stable, Property::SettlesWithinBudget], &effort);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod firmware;
mod strategy;

pub use firmware::Firmware;
pub use strategy::{
    CrystalPattern, Deployments, Family, connected_edges, crystal_patterns, reboots, topology,
};

use crate::assess::{
    self, AssessError, NetworkModel, PredictEffort, Prediction, Reason, Simulation,
};
use crate::scenario::{Scenario, ScenarioError};
use crate::sim::{self, Network, RunOutcome, Summary};
use proptest::prelude::*;
use proptest::test_runner::{Config as RunnerConfig, RngAlgorithm, TestError, TestRng, TestRunner};
use rayon::prelude::*;
use std::fmt;
use std::path::PathBuf;

/// Something the kit could not do (not a property failing).
#[derive(Clone, Debug, PartialEq)]
pub enum PropsError {
    /// Firmware constants that are malformed or cannot be stated in a scenario.
    Constants(String),
    /// A scenario the file reader refuses.
    Scenario(ScenarioError),
}

impl fmt::Display for PropsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PropsError::Constants(m) => write!(f, "firmware constants: {m}"),
            PropsError::Scenario(e) => write!(f, "scenario: {e}"),
        }
    }
}

impl std::error::Error for PropsError {}

/// What must hold for every deployment.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Property {
    /// The planner finds every mode decaying at the flashed gains.
    Stable,
    /// Settling at the scenario's `[lock] quantile` comes within the budget, on the
    /// planner's forecast and on the simulated runs of the real node code (runs that
    /// never settle count as too slow), exactly as the verdict of `entrain check` judges
    /// it.
    SettlesWithinBudget,
    /// Every simulated run settles no later than the planner's worst-case bound (plus
    /// one update interval of sampling, plus the last reboot's return).
    BoundHolds,
    /// No node's rate trim ever reaches its limit in any simulated run (checked at every
    /// sample; an unstable design is not simulated, it fails [`Property::Stable`] and
    /// [`Property::SettlesWithinBudget`]).
    TrimBelowLimit,
    /// No node has more neighbours than the firmware's table holds (`N` of
    /// [`Firmware`]), and no simulated run refuses an observation for a full table.
    TableFits,
}

impl Property {
    /// Every property.
    pub const ALL: [Property; 5] = [
        Property::Stable,
        Property::SettlesWithinBudget,
        Property::BoundHolds,
        Property::TrimBelowLimit,
        Property::TableFits,
    ];

    fn simulates(self) -> bool {
        !matches!(self, Property::Stable)
    }
}

impl fmt::Display for Property {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Property::Stable => "stable",
            Property::SettlesWithinBudget => "settles within the budget",
            Property::BoundHolds => "the predicted bound holds in simulation",
            Property::TrimBelowLimit => "no trim at its limit",
            Property::TableFits => "no neighbour table overflow",
        })
    }
}

/// How much each case and the whole search spend.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Effort {
    /// Deployments tried (proptest cases).
    pub cases: u32,
    /// Simulated runs per deployment.
    pub runs: u32,
    /// Seed of the simulated runs (the same for every deployment).
    pub seed: u64,
    /// Forecast samples per prediction (at least 20, else the prediction is the bound).
    pub forecast_samples: usize,
    /// The simulation horizon is this × max(budget, worst-case bound), see the module
    /// documentation; `None` uses the full assessment's horizon.
    pub horizon_factor: Option<f64>,
    /// Stop each forecast run once it has stayed within half the tolerance for the final
    /// fifth of the horizon (see [`crate::forecast::forecast_early_stop`]). The
    /// simulated runs of the real node code have their own switch,
    /// [`Effort::simulation_early_stop`].
    pub forecast_early_stop: bool,
    /// Run the forecast only when the planner's worst-case bound exceeds the budget (see
    /// [`PredictEffort::forecast_only_over_budget`]): within it, the prediction's side of
    /// the budget rule passes on the bound alone.
    pub forecast_only_over_budget: bool,
    /// Stop each simulated run of the real node code once it has stayed within half the
    /// tolerance as long as a forecast run must before it stops
    /// ([`crate::forecast::stay_before_early_stop`]); the run is then settled where it
    /// last left the tolerance, as the whole run would be if it never left the band
    /// again. Not when [`Property::TrimBelowLimit`] is asked (the trims are watched to
    /// the horizon) or the deployment reboots nodes.
    pub simulation_early_stop: bool,
    /// Seed of the deployment search: the same seed tries the same deployments.
    pub search_seed: u64,
    /// Most shrinking steps after a failure.
    pub max_shrink_iters: u32,
}

impl Default for Effort {
    /// 256 cases, 4 runs stopped early, 20 forecast samples stopped early and run only
    /// when the bound is over the budget, horizon factor 1.25.
    fn default() -> Effort {
        Effort {
            cases: 256,
            runs: 4,
            seed: 1,
            forecast_samples: 20,
            horizon_factor: Some(1.25),
            forecast_early_stop: true,
            forecast_only_over_budget: true,
            simulation_early_stop: true,
            search_seed: 0x0E17_7A1D,
            max_shrink_iters: 1_000,
        }
    }
}

/// One property that did not hold for one deployment.
#[derive(Clone, Debug, PartialEq)]
pub struct Finding {
    /// The property.
    pub property: Property,
    /// What was seen.
    pub detail: String,
}

impl fmt::Display for Finding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.property, self.detail)
    }
}

/// What one deployment's check saw (when every property held).
#[derive(Clone, Debug)]
pub struct Evidence {
    /// The prediction (short effort).
    pub prediction: Prediction,
    /// The simulation, when a property needed it.
    pub simulation: Option<Simulation>,
    /// The largest |trim| any node reached, as a fraction of its limit (when simulated).
    pub largest_trim_fraction: Option<f64>,
}

/// Check `properties` on one deployment with the real `Node<N>` code.
///
/// # Errors
/// Every property that did not hold, or a single finding naming the property checked
/// first when the library refuses the scenario.
pub fn check<const N: usize>(
    scenario: &Scenario,
    properties: &[Property],
    effort: &Effort,
) -> Result<Evidence, Vec<Finding>> {
    let first = properties.first().copied().unwrap_or(Property::Stable);
    let refused = |e: AssessError| {
        vec![Finding {
            property: first,
            detail: format!("the library refuses this deployment: {e}"),
        }]
    };
    let network = NetworkModel::of(scenario).map_err(refused)?;
    let gains = assess::choose(scenario, &network).map_err(refused)?;
    let prediction = assess::predict_with(
        scenario,
        &network,
        gains.kp,
        gains.ki,
        PredictEffort {
            // Only the budget property reads the forecast.
            forecast_samples: if properties.contains(&Property::SettlesWithinBudget) {
                effort.forecast_samples
            } else {
                0
            },
            horizon_factor: effort.horizon_factor,
            horizon_covers_bound: properties.contains(&Property::BoundHolds),
            forecast_early_stop: effort.forecast_early_stop,
            forecast_only_over_budget: effort.forecast_only_over_budget,
        },
    )
    .map_err(refused)?;
    let wants = |p: Property| properties.contains(&p);
    let mut findings = Vec::new();
    let stable = prediction.stability.stable;
    if !stable {
        for p in properties.iter().filter(|p| {
            matches!(
                p,
                Property::Stable | Property::SettlesWithinBudget | Property::BoundHolds
            )
        }) {
            findings.push(Finding {
                property: *p,
                detail: format!(
                    "the planner finds a growing mode at kp {:.6}, ki {:.6} (gain margin {:.3})",
                    prediction.kp(),
                    prediction.ki(),
                    prediction.stability.gain_margin
                ),
            });
        }
    }
    let setup = assess::setup(
        scenario,
        &network,
        &prediction.constants,
        prediction.horizon_updates,
    )
    .map_err(refused)?;
    let degree_over = (0..setup.links.nodes())
        .map(|i| (i, setup.links.graph().neighbours(i).len()))
        .find(|&(_, d)| d > N);
    if wants(Property::TableFits) {
        if let Some((node, degree)) = degree_over {
            findings.push(Finding {
                property: Property::TableFits,
                detail: format!(
                    "node {node} has {degree} neighbours, the firmware's table holds {N}"
                ),
            });
        }
    }
    let simulate = stable && properties.iter().any(|p| p.simulates());
    let mut simulation = None;
    let mut largest_trim_fraction = None;
    if simulate {
        let runs = effort.runs.max(1);
        let limit = f64::from(prediction.constants.trim_limit_ppb);
        let stop = (effort.simulation_early_stop
            && !wants(Property::TrimBelowLimit)
            && setup.reboots.is_empty())
        .then(|| crate::forecast::stay_before_early_stop(&setup));
        let outcomes: Vec<(RunOutcome, TrimPeak)> = (0..u64::from(runs))
            .into_par_iter()
            .map(|r| match degree_over {
                None => run_tracking::<N>(&setup, effort.seed, r, stop),
                // Too many neighbours for the firmware's table (reported above, or not
                // asked about): simulate the other properties with a table that fits.
                Some(_) => run_tracking::<{ sim::MAX_DEGREE }>(&setup, effort.seed, r, stop),
            })
            .collect();
        let peak = outcomes
            .iter()
            .map(|(_, p)| *p)
            .max_by(|a, b| a.ppb.total_cmp(&b.ppb))
            .unwrap_or_default();
        largest_trim_fraction = Some(peak.ppb / limit);
        let outcomes: Vec<RunOutcome> = outcomes.into_iter().map(|(o, _)| o).collect();
        let period = setup.update_period_s();
        let summary = Summary::from_outcomes(outcomes, period);
        let v = Simulation::of(summary, effort.seed, setup);
        if wants(Property::SettlesWithinBudget) {
            let verdict = assess::decide(scenario, &prediction, Some(&v));
            for reason in verdict.reasons.iter().filter(|r| {
                matches!(
                    r,
                    Reason::PredictedOverBudget { .. }
                        | Reason::RunsNeverSettled { .. }
                        | Reason::SimulatedOverBudget { .. }
                )
            }) {
                findings.push(Finding {
                    property: Property::SettlesWithinBudget,
                    detail: reason.to_string(),
                });
            }
        }
        if wants(Property::BoundHolds) {
            if let Some(d) = bound_broken(scenario, &prediction, &v) {
                findings.push(Finding {
                    property: Property::BoundHolds,
                    detail: d,
                });
            }
        }
        if wants(Property::TrimBelowLimit) && peak.ppb + 1.0 >= limit {
            findings.push(Finding {
                property: Property::TrimBelowLimit,
                detail: format!(
                    "node {} reached a trim of {:+.3} ppm in run {} at {:.3} s, its limit is ±{:.3} ppm",
                    peak.node,
                    peak.signed_ppb / 1_000.0,
                    peak.run,
                    peak.at_updates as f64 * period,
                    limit / 1_000.0
                ),
            });
        }
        if wants(Property::TableFits) && degree_over.is_none() {
            let refused: u64 = v.summary.outcomes.iter().map(|o| o.stats.table_full).sum();
            if refused > 0 {
                findings.push(Finding {
                    property: Property::TableFits,
                    detail: format!("{refused} observations refused by a full table"),
                });
            }
        }
        simulation = Some(v);
    }
    if findings.is_empty() {
        Ok(Evidence {
            prediction,
            simulation,
            largest_trim_fraction,
        })
    } else {
        Err(findings)
    }
}

/// Where a run's trim came nearest its limit.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
struct TrimPeak {
    ppb: f64,
    signed_ppb: f64,
    node: usize,
    run: u64,
    at_updates: u64,
}

/// One run of `setup` on `Node<M>`, watching every node's trim at every sample; with
/// `stop`, the run ends once that many samples in a row were within half the tolerance
/// (and settles where it last left the tolerance, see [`Network::finish_settled`]).
fn run_tracking<const M: usize>(
    setup: &sim::Setup,
    seed: u64,
    run: u64,
    stop: Option<u64>,
) -> (RunOutcome, TrimPeak) {
    let mut net = Network::<M>::new(setup, seed, run)
        .unwrap_or_else(|e| panic!("the simulator refused a setup it validated: {e}"));
    let inner = net.tracker().tolerance_counts() / 2;
    let mut deep = 0u64;
    let mut peak = TrimPeak {
        run,
        ..TrimPeak::default()
    };
    // Every node has the run's configuration, and `trim_ppb` is odd and non-decreasing in
    // the raw trim: a raw magnitude no larger than one already converted cannot beat the
    // peak, so only a new largest magnitude takes the division, and a sample is looked
    // at only when some node has held a trim larger than that.
    let mut converted = 0u64;
    for k in 0..setup.horizon_updates {
        let sample = net.step();
        let scan = if net.largest_trim_raw() > converted {
            net.nodes()
        } else {
            0
        };
        for i in 0..scan {
            if let Some(node) = net.node(i) {
                let raw = node.trim_raw().unsigned_abs();
                if raw <= converted {
                    continue;
                }
                converted = raw;
                let t = f64::from(node.trim_ppb());
                if t.abs() > peak.ppb {
                    peak = TrimPeak {
                        ppb: t.abs(),
                        signed_ppb: t,
                        node: i,
                        run,
                        at_updates: k,
                    };
                }
            }
        }
        deep = if sample.inside && sample.network_counts <= inner && sample.link_counts <= inner {
            deep + 1
        } else {
            0
        };
        if stop.is_some_and(|stay| deep >= stay) {
            return (net.finish_settled(), peak);
        }
    }
    (net.run(None), peak)
}

/// Why the worst-case bound does not hold in `v`, if it does not.
fn bound_broken(scenario: &Scenario, p: &Prediction, v: &Simulation) -> Option<String> {
    let bound_s = p.settle.map(|s| s.bound_s)?;
    let back_s = scenario
        .reboots
        .iter()
        .map(crate::scenario::Reboot::back_s)
        .fold(0.0, f64::max);
    let period = scenario.update_period_s();
    let never = v.summary.runs - v.summary.settled_runs;
    if never > 0 {
        return Some(format!(
            "{never} of {} runs never settled, the bound is {}",
            v.summary.runs,
            assess::seconds(bound_s)
        ));
    }
    let slowest = v.settle_times_s.iter().copied().fold(0.0, f64::max);
    (slowest - back_s > bound_s + period).then(|| {
        format!(
            "the slowest run settled at {}{}, after the bound {}",
            assess::seconds(slowest),
            if back_s > 0.0 {
                format!(
                    " ({} after the last reboot's return)",
                    assess::seconds(slowest - back_s)
                )
            } else {
                String::new()
            },
            assess::seconds(bound_s)
        )
    })
}

/// The minimal failing deployment a search found.
#[derive(Clone, Debug)]
pub struct Counterexample {
    /// The deployment, shrunk.
    pub scenario: Scenario,
    /// What failed on it.
    pub findings: Vec<Finding>,
    /// Checks that passed during the search, counting those proptest made while
    /// shrinking.
    pub passed: u32,
    /// The deployment as a scenario file (its `[monte_carlo]` runs and seed are the
    /// search's, so `entrain check` replays the same runs, over a longer horizon).
    pub toml: String,
}

impl Counterexample {
    /// Write the scenario file to `path`.
    ///
    /// # Errors
    /// The file system's error.
    pub fn write(&self, path: &std::path::Path) -> std::io::Result<()> {
        std::fs::write(path, &self.toml)
    }
}

impl fmt::Display for Counterexample {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "entrain property failed ({} passing checks, shrinking included); minimal failing deployment ({}):",
            self.passed,
            self.scenario.layout.describe()
        )?;
        for finding in &self.findings {
            writeln!(f, "  - {finding}")?;
        }
        writeln!(f, "---- scenario file ----")?;
        write!(f, "{}", self.toml)?;
        writeln!(f, "---- end of scenario file ----")
    }
}

/// The scenario file of a counterexample: runs and seed of the search, read back to make
/// sure it is ready to run.
fn counterexample_toml(scenario: &Scenario, effort: &Effort) -> (Scenario, String) {
    let mut s = scenario.clone();
    s.runs = effort.runs.max(1);
    s.seed = effort.seed;
    s.name = format!("{} (minimal failing deployment)", scenario.name);
    let toml = s.to_toml();
    let back = Scenario::from_toml(&s.path, &toml)
        .unwrap_or_else(|e| panic!("a written scenario must read back: {e}\n{toml}"));
    assert_eq!(
        back, s,
        "a written scenario must read back to the same value"
    );
    (s, toml)
}

/// Search `deployments` for one where a property fails, shrinking the first found.
///
/// # Errors
/// The minimal failing deployment.
pub fn search<const N: usize>(
    deployments: &Deployments,
    properties: &[Property],
    effort: &Effort,
) -> Result<u32, Box<Counterexample>> {
    let config = RunnerConfig {
        cases: effort.cases,
        max_shrink_iters: effort.max_shrink_iters,
        failure_persistence: None,
        ..RunnerConfig::default()
    };
    let mut seed = [0u8; 32];
    seed[..8].copy_from_slice(&effort.search_seed.to_le_bytes());
    let rng = TestRng::from_seed(RngAlgorithm::ChaCha, &seed);
    let mut runner = TestRunner::new_with_rng(config, rng);
    let passed = std::sync::atomic::AtomicU32::new(0);
    let strategy = deployments.strategy();
    let result = runner.run(&strategy, |s| match check::<N>(&s, properties, effort) {
        Ok(_) => {
            passed.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
            Ok(())
        }
        Err(findings) => Err(TestCaseError::fail(
            findings
                .iter()
                .map(ToString::to_string)
                .collect::<Vec<_>>()
                .join("; "),
        )),
    });
    match result {
        Ok(()) => Ok(effort.cases),
        Err(TestError::Fail(_, minimal)) => {
            let findings = check::<N>(&minimal, properties, effort)
                .expect_err("the minimal failing deployment fails again when checked again");
            let (scenario, toml) = counterexample_toml(&minimal, effort);
            Err(Box::new(Counterexample {
                scenario,
                findings,
                passed: passed.load(std::sync::atomic::Ordering::Relaxed),
                toml,
            }))
        }
        Err(TestError::Abort(why)) => panic!("the deployment search stopped: {why}"),
    }
}

/// The scenario file of a failing deployment for a `proptest!` block of one's own:
/// `Err` carries every finding and the scenario file in its message.
///
/// # Errors
/// A [`TestCaseError`] when a property fails.
pub fn holds<const N: usize>(
    scenario: &Scenario,
    properties: &[Property],
    effort: &Effort,
) -> Result<(), TestCaseError> {
    match check::<N>(scenario, properties, effort) {
        Ok(_) => Ok(()),
        Err(findings) => {
            let (scenario, toml) = counterexample_toml(scenario, effort);
            let c = Counterexample {
                scenario,
                findings,
                passed: 0,
                toml,
            };
            Err(TestCaseError::fail(c.to_string()))
        }
    }
}

impl<const N: usize> Firmware<N> {
    /// Check `properties` on every deployment tried from `deployments` (see [`search`]);
    /// on failure, write the minimal failing deployment to
    /// `<temp dir>/entrain-props/<name>.toml` and panic with it and the command to
    /// investigate it.
    ///
    /// # Panics
    /// When a property fails (that is the test failing).
    pub fn verify(&self, deployments: &Deployments, properties: &[Property], effort: &Effort) {
        if let Err(c) = search::<N>(deployments, properties, effort) {
            let dir = std::env::temp_dir().join("entrain-props");
            let file: String = deployments
                .base()
                .name
                .chars()
                .map(|c| {
                    if c.is_ascii_alphanumeric() {
                        c.to_ascii_lowercase()
                    } else {
                        '-'
                    }
                })
                .collect();
            let path: PathBuf = dir.join(format!("{file}-minimal.toml"));
            let written = std::fs::create_dir_all(&dir).and_then(|()| c.write(&path));
            match written {
                Ok(()) => panic!(
                    "{c}written to {}\ninvestigate with: entrain check {}",
                    path.display(),
                    path.display()
                ),
                Err(e) => panic!("{c}(could not write it to {}: {e})", path.display()),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::Options;

    #[test]
    fn tracked_trim_peak_is_the_first_largest_of_every_node_and_sample() {
        // The bundled footbridge: a 24-node chain, ±20 ppm crystals, the PI law.
        let path =
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/footbridge.toml");
        let scenario = Scenario::load(&path).unwrap();
        let a =
            assess::assess(scenario.clone(), &Options::predict_only(&scenario), &|_| {}).unwrap();
        let setup = assess::setup(&scenario, &a.network, &a.prediction.constants, 1_500).unwrap();
        for run in 0..2 {
            // Independently: every node's trim_ppb at every sample, the first largest kept.
            let mut net = Network::<2>::new(&setup, 11, run).unwrap();
            let mut want = TrimPeak {
                run,
                ..TrimPeak::default()
            };
            for k in 0..setup.horizon_updates {
                net.step();
                for i in 0..net.nodes() {
                    let Some(t) = net.node(i).map(|n| f64::from(n.trim_ppb())) else {
                        continue;
                    };
                    if t.abs() > want.ppb {
                        want = TrimPeak {
                            ppb: t.abs(),
                            signed_ppb: t,
                            node: i,
                            run,
                            at_updates: k,
                        };
                    }
                }
            }
            // The crystals move the trims well away from zero.
            assert!(want.ppb > 1_000.0, "{want:?}");
            assert_eq!(
                run_tracking::<2>(&setup, 11, run, None).1,
                want,
                "run {run}"
            );
        }
    }
}
