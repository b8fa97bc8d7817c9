//! The `entrain` command-line checker, as a library: scenario files, the human report,
//! JSON, SVG plots and firmware constants (feature `cli`).
//!
//! The binary `src/bin/entrain.rs` only parses arguments and calls [`run`]. This module
//! reads and checks the scenario ([`scenario`]), hands it to the library's planner and
//! simulator ([`assess`]), decides the verdict from their answers, and renders them
//! ([`report`], [`json`], [`plot`], [`firmware`]). No mathematics lives here.
//!
//! Exit status: 0 pass, 1 verdict fail (unstable, cannot lock, or misses the budget),
//! 2 bad input or usage.

pub mod assess;
pub mod firmware;
pub mod json;
pub mod plot;
pub mod report;
pub mod scenario;

use assess::{Chosen, Modes, Prediction, Shape, Verification};
use scenario::{Network, Scenario};
use std::fmt;
use std::path::{Path, PathBuf};

/// Exit status of a passing verdict.
pub const EXIT_PASS: u8 = 0;
/// Exit status of a failing verdict (unstable, cannot lock, or over budget).
pub const EXIT_FAIL: u8 = 1;
/// Exit status of bad input or usage.
pub const EXIT_INPUT: u8 = 2;

/// Largest number of sample runs drawn in the error-trace plot.
pub const PLOTTED_RUNS: u64 = 6;

/// Why a command could not give a verdict. Every variant exits with status 2.
#[derive(Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum CliError {
    /// The scenario file (or its edge list) is malformed or out of range.
    Scenario(scenario::ScenarioError),
    /// The library refused a value of the scenario.
    Input {
        /// The file the value came from.
        file: PathBuf,
        /// What the library said.
        message: String,
    },
    /// The build lacks what the command needs.
    Unavailable(String),
    /// An output file could not be written.
    Output {
        /// The file.
        file: PathBuf,
        /// What went wrong.
        message: String,
    },
}

impl CliError {
    /// A library refusal of a value from `file`.
    #[must_use]
    pub fn input(file: &Path, message: String) -> CliError {
        CliError::Input {
            file: file.to_path_buf(),
            message,
        }
    }
}

impl fmt::Display for CliError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CliError::Scenario(e) => write!(f, "{e}"),
            CliError::Input { file, message } => write!(f, "{}: {message}", file.display()),
            CliError::Unavailable(what) => f.write_str(what),
            CliError::Output { file, message } => {
                write!(f, "cannot write {}: {message}", file.display())
            }
        }
    }
}

impl std::error::Error for CliError {}

impl From<scenario::ScenarioError> for CliError {
    fn from(e: scenario::ScenarioError) -> Self {
        CliError::Scenario(e)
    }
}

/// One command, with its arguments already parsed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Command {
    /// Predict and verify; fail when unstable, unable to lock or over budget.
    Check {
        /// Scenario file.
        file: PathBuf,
        /// Override of `monte_carlo.runs`.
        runs: Option<u32>,
        /// Skip the Monte Carlo (prediction only).
        no_simulate: bool,
    },
    /// Tune the gains for the budget; optionally write firmware constants.
    Tune {
        /// Scenario file.
        file: PathBuf,
        /// Where to write the firmware constants (Rust source).
        out: Option<PathBuf>,
    },
    /// Run the Monte Carlo; optionally write SVG plots.
    Simulate {
        /// Scenario file.
        file: PathBuf,
        /// Folder for the SVG plots.
        plots: Option<PathBuf>,
        /// Override of `monte_carlo.runs`.
        runs: Option<u32>,
        /// Override of `monte_carlo.seed`.
        seed: Option<u64>,
    },
    /// Print the spectrum and the slowest mode.
    Spectrum {
        /// Scenario file.
        file: PathBuf,
    },
}

/// What a command prints and how it exits.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Output {
    /// Text for standard output.
    pub stdout: String,
    /// Exit status ([`EXIT_PASS`] or [`EXIT_FAIL`]).
    pub status: u8,
}

/// A reason for a failing verdict.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum Reason {
    /// Some mode does not decay at these gains.
    Unstable,
    /// The gains cannot hold lock against the worst crystal pattern (or the slew or trim
    /// limit is too tight).
    CannotLock,
    /// The predicted lock time exceeds the budget.
    PredictedOverBudget {
        /// Predicted lock time, seconds.
        lock_s: f64,
    },
    /// Some simulated runs never locked within the simulated time.
    RunsNeverLocked {
        /// How many.
        runs: usize,
    },
    /// The slowest simulated run locked after the budget.
    SimulatedOverBudget {
        /// Its lock time, seconds.
        lock_s: f64,
    },
    /// The tuner found no gains that meet the budget with margins.
    TuningInfeasible,
}

impl Reason {
    /// Stable keyword for JSON.
    #[must_use]
    pub fn code(&self) -> &'static str {
        match self {
            Reason::Unstable => "unstable",
            Reason::CannotLock => "cannot_lock",
            Reason::PredictedOverBudget { .. } => "predicted_over_budget",
            Reason::RunsNeverLocked { .. } => "runs_never_locked",
            Reason::SimulatedOverBudget { .. } => "simulated_over_budget",
            Reason::TuningInfeasible => "tuning_infeasible",
        }
    }

    /// One line for people.
    #[must_use]
    pub fn message(&self, budget_s: f64) -> String {
        use plot::seconds;
        match *self {
            Reason::Unstable => "unstable: some mode grows at these gains".to_owned(),
            Reason::CannotLock => {
                "cannot lock: the worst crystal pattern pulls harder than the coupling (or the slew or trim limit) can hold".to_owned()
            }
            Reason::PredictedOverBudget { lock_s } => format!(
                "predicted lock time {} exceeds the budget {}",
                seconds(lock_s),
                seconds(budget_s)
            ),
            Reason::RunsNeverLocked { runs } => {
                format!("{runs} simulated runs never locked within the simulated time")
            }
            Reason::SimulatedOverBudget { lock_s } => format!(
                "slowest simulated run locked after {}, beyond the budget {}",
                seconds(lock_s),
                seconds(budget_s)
            ),
            Reason::TuningInfeasible => {
                "no gains meet the budget with margins (the fastest gains are shown)".to_owned()
            }
        }
    }
}

/// Something the reader should weigh, though the verdict does not turn on it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Warning {
    /// Stable keyword for JSON.
    pub code: &'static str,
    /// One line for people.
    pub message: String,
}

/// The verdict of a check.
#[derive(Clone, Debug, PartialEq)]
pub struct Verdict {
    /// Pass: stable, locks, within budget (predicted and, when run, simulated).
    pub pass: bool,
    /// Why not, when failing.
    pub reasons: Vec<Reason>,
}

/// Everything `check` and `simulate` found.
#[derive(Clone, Debug)]
pub struct CheckResult {
    /// The scenario.
    pub scenario: Scenario,
    /// The library's view of the network.
    pub shape: Shape,
    /// The gains and, if tuned, the tuner's answer.
    pub chosen: Chosen,
    /// The closed-form prediction at the chosen gains.
    pub prediction: Prediction,
    /// The Monte Carlo, when run.
    pub verification: Option<Verification>,
    /// Monte-Carlo runs asked for (0 when skipped).
    pub runs: u32,
    /// The verdict.
    pub verdict: Verdict,
    /// Warnings.
    pub warnings: Vec<Warning>,
}

/// Everything `spectrum` found.
#[derive(Clone, Debug)]
pub struct SpectrumResult {
    /// The scenario.
    pub scenario: Scenario,
    /// The library's view of the network.
    pub shape: Shape,
    /// Eigenvalues and slowest mode.
    pub modes: Modes,
}

/// Everything `tune` found.
#[derive(Clone, Debug)]
pub struct TuneResult {
    /// The scenario.
    pub scenario: Scenario,
    /// The library's view of the network.
    pub shape: Shape,
    /// The tuner's answer.
    pub tuning: plan_types::Tuning,
    /// Prediction at the recommended gains as the node runs them.
    pub prediction: Option<Prediction>,
    /// Where the firmware constants were written.
    pub written: Option<PathBuf>,
}

mod plan_types {
    pub use crate::plan::Tuning;
}

/// How to show Monte-Carlo progress.
pub trait ProgressSink: Sync {
    /// A Monte Carlo of `total` runs starts.
    fn start(&self, total: u64);
    /// `done` runs have finished.
    fn set(&self, done: u64);
    /// The Monte Carlo is over.
    fn finish(&self);
}

/// Shows nothing.
#[derive(Clone, Copy, Debug, Default)]
pub struct NoProgress;

impl ProgressSink for NoProgress {
    fn start(&self, _total: u64) {}
    fn set(&self, _done: u64) {}
    fn finish(&self) {}
}

/// Output format.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    /// The aligned human report.
    Human,
    /// JSON (see [`json::SCHEMA_VERSION`]).
    Json,
}

/// Run `command`, rendering in `format`, showing Monte-Carlo progress on `progress`.
///
/// # Errors
/// A [`CliError`] for bad input, a missing capability or an unwritable output; the caller
/// exits with [`EXIT_INPUT`].
pub fn run(
    command: &Command,
    format: Format,
    progress: &dyn ProgressSink,
) -> Result<Output, CliError> {
    match command {
        Command::Check {
            file,
            runs,
            no_simulate,
        } => {
            let scenario = Scenario::load(file)?;
            let runs = if *no_simulate {
                0
            } else {
                runs.unwrap_or(scenario.runs)
            };
            let result = check(scenario, runs, None, progress)?;
            let stdout = match format {
                Format::Human => report::check(&result, "check"),
                Format::Json => json::check(&result, "check"),
            };
            Ok(Output {
                stdout,
                status: status(result.verdict.pass),
            })
        }
        Command::Simulate {
            file,
            plots,
            runs,
            seed,
        } => {
            let scenario = Scenario::load(file)?;
            if runs == &Some(0) {
                return Err(CliError::input(
                    file,
                    "--runs must be at least 1 for simulate".to_owned(),
                ));
            }
            let runs = runs.unwrap_or(scenario.runs);
            let result = check(scenario, runs, *seed, progress)?;
            let mut written = Vec::new();
            if let Some(dir) = plots {
                written = write_plots(&result, dir)?;
            }
            let stdout = match format {
                Format::Human => {
                    let mut s = report::check(&result, "simulate");
                    report::plots_written(&mut s, &written);
                    s
                }
                Format::Json => json::simulate(&result, &written),
            };
            Ok(Output {
                stdout,
                status: status(result.verdict.pass),
            })
        }
        Command::Spectrum { file } => {
            let scenario = Scenario::load(file)?;
            let shape = assess::shape(&scenario)?;
            let modes = assess::modes(&scenario, &shape)?;
            let result = SpectrumResult {
                scenario,
                shape,
                modes,
            };
            let stdout = match format {
                Format::Human => report::spectrum(&result),
                Format::Json => json::spectrum(&result),
            };
            Ok(Output {
                stdout,
                status: EXIT_PASS,
            })
        }
        Command::Tune { file, out } => {
            let scenario = Scenario::load(file)?;
            let shape = assess::shape(&scenario)?;
            let pi = match scenario.gains {
                scenario::Gains::Tune { pi } => pi,
                scenario::Gains::Fixed { ki, .. } => ki > 0.0,
            };
            let tuning = assess::tune(&scenario, &shape, pi)?;
            let prediction = match tuning.recommended {
                Some(c) => Some(assess::predict(&scenario, &shape, c.kp, c.ki)?),
                None => None,
            };
            let mut written = None;
            if let (Some(path), Some(p)) = (out, &prediction) {
                let text = p.constants.to_rust(&scenario);
                std::fs::write(path, text).map_err(|e| CliError::Output {
                    file: path.clone(),
                    message: e.to_string(),
                })?;
                written = Some(path.clone());
            }
            let feasible = tuning.feasible;
            let result = TuneResult {
                scenario,
                shape,
                tuning,
                prediction,
                written,
            };
            let stdout = match format {
                Format::Human => report::tune(&result),
                Format::Json => json::tune(&result),
            };
            Ok(Output {
                stdout,
                status: status(feasible),
            })
        }
    }
}

fn status(pass: bool) -> u8 {
    if pass { EXIT_PASS } else { EXIT_FAIL }
}

/// Predict, then (with `runs > 0`) verify by Monte Carlo, and decide the verdict.
///
/// # Errors
/// As [`run`].
pub fn check(
    scenario: Scenario,
    runs: u32,
    seed: Option<u64>,
    progress: &dyn ProgressSink,
) -> Result<CheckResult, CliError> {
    let shape = assess::shape(&scenario)?;
    let chosen = assess::choose(&scenario, &shape)?;
    let prediction = assess::predict(&scenario, &shape, chosen.kp, chosen.ki)?;
    let mut warnings = prediction_warnings(&scenario, &chosen, &prediction);

    let mut verification = None;
    let mut ran = 0;
    if runs > 0 {
        match assess::sim_scenario(&scenario, &shape, &prediction.constants) {
            Ok(sim_scenario) => {
                progress.start(u64::from(runs));
                let tick = |p: crate::sim::Progress| progress.set(p.done as u64);
                let v = assess::verify(
                    &scenario,
                    &sim_scenario,
                    runs,
                    seed.unwrap_or(scenario.seed),
                    &tick,
                );
                progress.finish();
                let v = v?;
                simulation_warnings(&v, &mut warnings);
                verification = Some(v);
                ran = runs;
            }
            Err(CliError::Unavailable(what)) => warnings.push(Warning {
                code: "simulation_unavailable",
                message: format!("{what}: the verdict rests on the prediction alone"),
            }),
            Err(e) => return Err(e),
        }
    }

    let verdict = decide(&scenario, &chosen, &prediction, verification.as_ref());
    Ok(CheckResult {
        scenario,
        shape,
        chosen,
        prediction,
        verification,
        runs: ran,
        verdict,
        warnings,
    })
}

fn decide(
    scenario: &Scenario,
    chosen: &Chosen,
    p: &Prediction,
    v: Option<&Verification>,
) -> Verdict {
    let mut reasons = Vec::new();
    if chosen.tuning.as_ref().is_some_and(|t| !t.feasible) {
        reasons.push(Reason::TuningInfeasible);
    }
    if !p.stability.stable {
        reasons.push(Reason::Unstable);
    }
    if p.locking.is_some_and(|l| !l.locks) {
        reasons.push(Reason::CannotLock);
    }
    if let Some(lock_s) = p.lock_s {
        if lock_s > scenario.lock_budget_s {
            reasons.push(Reason::PredictedOverBudget { lock_s });
        }
    }
    if let Some(v) = v {
        let never = v.summary.runs.saturating_sub(v.summary.settled_runs);
        if never > 0 {
            reasons.push(Reason::RunsNeverLocked { runs: never });
        }
        if let Some(p) = v.summary.settle_s {
            if p.max > scenario.lock_budget_s {
                reasons.push(Reason::SimulatedOverBudget { lock_s: p.max });
            }
        }
    }
    Verdict {
        pass: reasons.is_empty(),
        reasons,
    }
}

fn prediction_warnings(scenario: &Scenario, chosen: &Chosen, p: &Prediction) -> Vec<Warning> {
    let mut w = Vec::new();
    let mut add = |code: &'static str, message: String| w.push(Warning { code, message });
    if let Some(s) = &p.settling {
        if s.warnings.spread_half_turn_or_more {
            add(
                "spread_half_turn_or_more",
                "the initial spread is half a phase turn or more: nodes may lock the wrong way round or not at all, and the prediction does not hold".to_owned(),
            );
        }
        if s.warnings.twisted_states_possible {
            add(
                "twisted_states_possible",
                "this ring has stable twisted states: a large initial spread can leave it wound up for good".to_owned(),
            );
        }
        if s.warnings.slew_limited {
            add(
                "slew_limited",
                "the first corrections exceed the slew limit: the early phase is slew-limited and slower than the small-signal prediction".to_owned(),
            );
        }
        if s.warnings.bound_not_computed {
            add(
                "bound_not_computed",
                "the worst-case settling bound was not computed (very slow mode); the dominant-mode estimate is used".to_owned(),
            );
        }
    }
    if p.stability.stable && p.stability.gain_margin < crate::plan::MIN_GAIN_MARGIN {
        add(
            "small_gain_margin",
            format!(
                "gain margin {:.2} is below {}: small changes in the network or delay may make it unstable",
                p.stability.gain_margin,
                crate::plan::MIN_GAIN_MARGIN
            ),
        );
    }
    if p.locking.is_none() {
        add(
            "lock_not_predicted",
            "no worst-case lock test for this topology: lock against the crystal tolerance is left to the simulation".to_owned(),
        );
    }
    if let Some(n) = &p.noise {
        if 3.0 * n.phase_sd_s > scenario.lock_tolerance_s {
            add(
                "jitter_near_tolerance",
                format!(
                    "predicted steady jitter (3 σ = {}) reaches the lock tolerance {}: the network may drift in and out of lock",
                    plot::seconds(3.0 * n.phase_sd_s),
                    plot::seconds(scenario.lock_tolerance_s)
                ),
            );
        }
    }
    if let (Some(t), scenario::Gains::Tune { .. }) = (&chosen.tuning, scenario.gains) {
        if !t.feasible {
            add(
                "fastest_gains_shown",
                "no gains meet the budget with margins: the figures are for the tuner's fastest stable gains".to_owned(),
            );
        }
    }
    if matches!(
        scenario.network,
        Network::Topology(crate::plan::Topology::Grid { .. } | crate::plan::Topology::Torus { .. })
            | Network::EdgeList { .. }
    ) && p.locking.is_some()
    {
        add(
            "lock_test_sufficient_only",
            "the worst-case lock test on a general graph is sufficient, exact only for trees: it may refuse gains that would lock".to_owned(),
        );
    }
    w
}

fn simulation_warnings(v: &Verification, w: &mut Vec<Warning>) {
    if let Some(f) = v.summary.twisted_fraction {
        if f > 0.0 {
            w.push(Warning {
                code: "twisted_runs",
                message: format!(
                    "{:.0} % of simulated runs ended in a twisted state (the phase winds around the ring)",
                    f * 100.0
                ),
            });
        }
    }
    let full: u64 = v.summary.outcomes.iter().map(|o| o.stats.table_full).sum();
    if full > 0 {
        w.push(Warning {
            code: "neighbour_table_full",
            message: format!("{full} beacons were refused by a full neighbour table"),
        });
    }
}

fn write_plots(result: &CheckResult, dir: &Path) -> Result<Vec<PathBuf>, CliError> {
    std::fs::create_dir_all(dir).map_err(|e| CliError::Output {
        file: dir.to_path_buf(),
        message: e.to_string(),
    })?;
    let out = |e: plot::PlotError| CliError::Output {
        file: PathBuf::from(e.file.clone()),
        message: e.message,
    };
    let s = &result.scenario;
    let mut written = Vec::new();

    // Sample runs: the same runs as the Monte Carlo's first ones, traced.
    if let Some(v) = &result.verification {
        let sim_scenario = assess::sim_scenario(s, &result.shape, &result.prediction.constants)?;
        let mut traces = Vec::new();
        for run in 0..PLOTTED_RUNS.min(u64::from(result.runs)) {
            let (_, trace) = crate::sim::trace_run(&sim_scenario, v.seed, run, false)
                .map_err(|e| CliError::input(&s.path, format!("simulation: {e}")))?;
            traces.push(plot::ErrorTrace {
                run,
                step_s: trace.update_period_s,
                error_s: trace
                    .network_turns
                    .iter()
                    .map(|t| t * s.phase_period_s)
                    .collect(),
            });
        }
        let envelope = result.prediction.settling.map(|st| plot::Envelope {
            initial_spread_s: s.initial_spread_s,
            asymptotic_s: st.asymptotic_s,
            bound_s: st.bound_s,
        });
        let path = dir.join("phase_error.svg");
        plot::error_traces(
            &path,
            &format!("{}: largest phase difference, sample runs", s.name),
            &traces,
            envelope,
            s.lock_tolerance_s,
            s.lock_budget_s,
        )
        .map_err(out)?;
        written.push(path);

        let path = dir.join("lock_times.svg");
        plot::lock_histogram(
            &path,
            &format!("{}: lock times of {} runs", s.name, v.summary.runs),
            &v.lock_times_s,
            v.summary.runs.saturating_sub(v.summary.settled_runs),
            s.lock_budget_s,
        )
        .map_err(out)?;
        written.push(path);
    }

    let modes = assess::modes(s, &result.shape)?;
    let path = dir.join("slowest_mode.svg");
    plot::mode_shape(
        &path,
        &format!("{}: slowest mode along the network", s.name),
        &modes.slow_mode,
    )
    .map_err(out)?;
    written.push(path);
    Ok(written)
}
