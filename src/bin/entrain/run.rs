//! The commands: load the scenario, call the library's assessment, render the answer.
//! No formula, threshold or unit conversion beyond presentation lives here.

use crate::output::WritePolicy;
use crate::{firmware, json, plot, report};
use entrain::assess::{self, AssessError, Assessment, NetworkModel, Options};
use entrain::scenario::Scenario;
use std::fmt;
use std::path::{Path, PathBuf};

/// Exit status of a passing verdict.
pub const EXIT_PASS: u8 = 0;
/// Exit status of a failing verdict.
pub const EXIT_FAIL: u8 = 1;
/// Exit status of bad input or usage.
pub const EXIT_INPUT: u8 = 2;

/// Largest number of sample runs drawn in the error-trace plot.
const PLOTTED_RUNS: u64 = 6;

/// Why a command could not give a verdict. Every variant exits with status 2.
#[derive(Debug)]
pub enum CliError {
    /// The library refused the scenario.
    Assess(AssessError),
    /// A command-line value out of range.
    Usage(String),
    /// An output file could not be written.
    Output {
        /// The file.
        file: PathBuf,
        /// What went wrong.
        message: String,
    },
}

impl fmt::Display for CliError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CliError::Assess(e) => write!(f, "{e}"),
            CliError::Usage(what) => f.write_str(what),
            CliError::Output { file, message } => {
                write!(f, "cannot write {}: {message}", file.display())
            }
        }
    }
}

impl From<AssessError> for CliError {
    fn from(e: AssessError) -> Self {
        CliError::Assess(e)
    }
}

impl From<entrain::scenario::ScenarioError> for CliError {
    fn from(e: entrain::scenario::ScenarioError) -> Self {
        CliError::Assess(AssessError::Scenario(e))
    }
}

/// One command, with its arguments already parsed.
pub enum Command {
    /// Predict and verify.
    Check {
        file: PathBuf,
        runs: Option<u32>,
        no_simulate: bool,
        limits: Limits,
    },
    /// Tune the gains marked "tune"; optionally write firmware constants.
    Tune {
        file: PathBuf,
        out: Option<PathBuf>,
        limits: Limits,
    },
    /// Run the Monte Carlo; optionally write SVG plots.
    Simulate {
        file: PathBuf,
        plots: Option<PathBuf>,
        telemetry: Option<PathBuf>,
        runs: Option<u32>,
        seed: Option<u64>,
        limits: Limits,
    },
    /// Print the spectrum and the slowest mode.
    Spectrum { file: PathBuf },
    /// Hold telemetry logs against the scenario; optionally write the plot.
    Field {
        file: PathBuf,
        logs: Vec<PathBuf>,
        plot: Option<PathBuf>,
        force: bool,
    },
}

/// Default limit on a Monte Carlo's estimated duration, minutes (`--max-minutes`).
pub const DEFAULT_MAX_MINUTES: f64 = 30.0;

/// How far a command may go: time and the files it may write through.
#[derive(Clone, Copy)]
pub struct Limits {
    /// Refuse a Monte Carlo estimated to take longer, minutes.
    pub max_minutes: f64,
    /// Write through symbolic links.
    pub force: bool,
}

impl Limits {
    fn options(&self, scenario: &Scenario) -> Options {
        Options {
            time_limit_s: Some(self.max_minutes * 60.0),
            ..Options::of(scenario)
        }
    }

    fn policy(&self, scenario: &Scenario) -> WritePolicy {
        WritePolicy::new(
            std::iter::once(scenario.path.as_path()).chain(edge_list(scenario)),
            self.force,
        )
    }
}

/// The scenario's edge-list file, if it has one.
fn edge_list(scenario: &Scenario) -> Option<&Path> {
    match &scenario.layout {
        entrain::scenario::Layout::EdgeList { path, .. } => Some(path.as_path()),
        entrain::scenario::Layout::Topology(_) => None,
    }
}

/// One telemetry log per node of the Monte Carlo's first run, `node-<id>.log` in `dir`
/// (a pinned chain's reference runs no law and logs nothing).
fn write_telemetry(
    a: &Assessment,
    dir: &Path,
    policy: &WritePolicy,
) -> Result<Vec<PathBuf>, CliError> {
    let Some(v) = &a.simulation else {
        return Ok(Vec::new());
    };
    let logs = entrain::field::simulate_logs(&a.scenario, &v.setup, v.seed, 0, &[])?;
    let mut written = Vec::new();
    for (id, text) in logs.iter().enumerate() {
        if text.is_empty() {
            continue;
        }
        let path = dir.join(format!("node-{id}.log"));
        policy.write(&path, text.as_bytes())?;
        written.push(path);
    }
    Ok(written)
}

/// The field plot's figures from a field check.
fn field_plot(c: &entrain::field::FieldCheck) -> plot::FieldPlot {
    let a = &c.assessment;
    let r = &c.report;
    let s = &a.scenario;
    plot::FieldPlot {
        title: format!("{}: phase error reconstructed from the logs", s.name),
        error_s: r.error_s.clone(),
        settle_s: r.settle_s,
        tolerance_s: s.lock_tolerance_s,
        budget_s: s.lock_budget_s,
        predicted_floor_s: a.prediction.noise_floor.map(|n| (n.p50_s, n.p99_s)),
        decay: r.decay.map(|d| plot::DecayLines {
            from_s: d.from_s,
            to_s: d.to_s,
            start_error_s: d.start_error_s,
            fitted_per_s: d.fitted_per_update.ln() * s.update_rate_hz,
            predicted_per_s: d.predicted_per_update.ln() * s.update_rate_hz,
        }),
    }
}

/// What a command prints and how it exits.
pub struct Output {
    /// Text for standard output.
    pub stdout: String,
    /// Exit status.
    pub status: u8,
}

/// How to show Monte-Carlo progress.
pub trait ProgressSink: Sync {
    /// A Monte Carlo of `total` runs starts.
    fn start(&self, total: u64);
    /// `done` runs have finished.
    fn set(&self, done: u64);
    /// The Monte Carlo is over.
    fn finish(&self);
    /// The eigensolver is at `stage` (called at each stage; a display may show it once
    /// the solve has taken a second).
    fn solving(&self, _stage: &str) {}
    /// The eigensolver is done.
    fn solved(&self) {}
}

/// The network model, showing the sparse eigensolver's stages on `progress`.
fn network_with_progress(
    scenario: &Scenario,
    progress: &dyn ProgressSink,
) -> Result<NetworkModel, CliError> {
    let mut observe = |stage: entrain::graph::SparseStage| {
        use entrain::graph::SparseStage;
        let text = match stage {
            SparseStage::Factorising => "factorising the Laplacian".to_owned(),
            SparseStage::Smallest { index, of } => {
                format!("smallest eigenvalues: λ{} of λ2 to λ{}", index + 2, of + 1)
            }
            SparseStage::Largest { round } => format!("λmax: shift {}", round + 1),
            _ => "spectrum".to_owned(),
        };
        progress.solving(&text);
    };
    let network = NetworkModel::of_observed(scenario, &mut observe);
    progress.solved();
    Ok(network?)
}

/// Output format.
#[derive(Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// The aligned human report.
    Human,
    /// JSON.
    Json,
}

fn status(pass: bool) -> u8 {
    if pass { EXIT_PASS } else { EXIT_FAIL }
}

fn assess_with_progress(
    scenario: Scenario,
    options: &Options,
    progress: &dyn ProgressSink,
) -> Result<Assessment, CliError> {
    if options.runs > 0 {
        progress.start(u64::from(options.runs));
    }
    let network = network_with_progress(&scenario, progress)?;
    let tick = |p: entrain::sim::Progress| progress.set(p.done as u64);
    let result = assess::assess_with_network(scenario, network, options, &tick);
    if options.runs > 0 {
        progress.finish();
    }
    result.map_err(|e| match e {
        AssessError::TooMuchWork(w) => CliError::Usage(format!(
            "{w}: pass --max-minutes {} to accept it, or ask for fewer runs (--runs, monte_carlo.runs)",
            (w.estimated_s / 60.0 * 1.2).ceil().max(1.0)
        )),
        other => CliError::Assess(other),
    })
}

/// Run `command`, rendering in `format`, showing Monte-Carlo progress on `progress`.
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
            limits,
        } => {
            let scenario = Scenario::load(file)?;
            let mut options = limits.options(&scenario);
            if let Some(r) = runs {
                options.runs = *r;
            }
            if *no_simulate {
                options.runs = 0;
            }
            let a = assess_with_progress(scenario, &options, progress)?;
            let stdout = match format {
                Format::Human => report::check(&a, "check"),
                Format::Json => json::check(&a, "check"),
            };
            Ok(Output {
                stdout,
                status: status(a.verdict.pass),
            })
        }
        Command::Simulate {
            file,
            plots,
            telemetry,
            runs,
            seed,
            limits,
        } => {
            let scenario = Scenario::load(file)?;
            let policy = limits.policy(&scenario);
            // Before the Monte Carlo, not after it: the folders must take the files.
            for dir in plots.iter().chain(telemetry) {
                policy.check_dir(dir)?;
            }
            let mut options = limits.options(&scenario);
            if let Some(r) = runs {
                options.runs = *r;
            }
            if let Some(s) = seed {
                options.seed = *s;
            }
            let a = assess_with_progress(scenario, &options, progress)?;
            let (written, failed) = match plots {
                Some(dir) => write_plots(&a, dir, &policy)?,
                None => (Vec::new(), Vec::new()),
            };
            let logs = match telemetry {
                Some(dir) => write_telemetry(&a, dir, &policy)?,
                None => Vec::new(),
            };
            let stdout = match format {
                Format::Human => {
                    let mut s = report::check(&a, "simulate");
                    report::plots_written(&mut s, &written, &failed);
                    report::telemetry_written(&mut s, &logs);
                    s
                }
                Format::Json => json::simulate(&a, &written, &failed, &logs),
            };
            // A plot asked for and not made is an output error, after the report.
            Ok(Output {
                stdout,
                status: if failed.is_empty() {
                    status(a.verdict.pass)
                } else {
                    EXIT_INPUT
                },
            })
        }
        Command::Spectrum { file } => {
            let scenario = Scenario::load(file)?;
            let network = network_with_progress(&scenario, progress)?;
            let stdout = match format {
                Format::Human => report::spectrum(&scenario, &network),
                Format::Json => json::spectrum(&scenario, &network),
            };
            Ok(Output {
                stdout,
                status: EXIT_PASS,
            })
        }
        Command::Field {
            file,
            logs,
            plot: plot_file,
            force,
        } => {
            let scenario = Scenario::load(file)?;
            let policy = WritePolicy::new(
                std::iter::once(scenario.path.as_path())
                    .chain(edge_list(&scenario))
                    .chain(logs.iter().map(PathBuf::as_path)),
                *force,
            );
            let mut set = entrain::field::LogSet::new();
            for log in logs {
                set.load(log).map_err(|e| CliError::Usage(e.to_string()))?;
            }
            let check = entrain::field::field_check(scenario, &set)?;
            let mut written = None;
            if let Some(path) = plot_file {
                let out = |e: plot::PlotError| std::io::Error::other(e.message);
                let p = field_plot(&check);
                policy.write_with(path, |temp| plot::field(temp, &p).map_err(out))?;
                written = Some(path.clone());
            }
            let stdout = match format {
                Format::Human => report::field(&check, written.as_deref()),
                Format::Json => json::field(&check, &set, written.as_deref()),
            };
            Ok(Output {
                stdout,
                status: status(check.report.pass()),
            })
        }
        Command::Tune { file, out, limits } => {
            let scenario = Scenario::load(file)?;
            let policy = limits.policy(&scenario);
            // Nothing marked "tune": answered as `check` would (prediction and Monte
            // Carlo at the file's own gains).
            let options = if assess::search(&scenario).is_some() {
                Options::predict_only(&scenario)
            } else {
                limits.options(&scenario)
            };
            let a = assess_with_progress(scenario, &options, progress)?;
            let mut written = None;
            if let (Some(path), true) = (out, a.verdict.pass) {
                let text = firmware::to_rust(&a.prediction.constants, &a.scenario);
                policy.write(path, text.as_bytes())?;
                written = Some(path.clone());
            }
            let stdout = match format {
                Format::Human => report::tune(&a, written.as_deref()),
                Format::Json => json::tune(&a, written.as_deref()),
            };
            Ok(Output {
                stdout,
                status: status(a.verdict.pass),
            })
        }
    }
}

/// Write the plots; a plot that cannot be made is named in the second list with why, and
/// the others are still written (the report is never lost to a plot).
fn write_plots(
    a: &Assessment,
    dir: &Path,
    policy: &WritePolicy,
) -> Result<(Vec<PathBuf>, Vec<String>), CliError> {
    policy.check_dir(dir)?;
    let out = |e: plot::PlotError| std::io::Error::other(e.message);
    let s = &a.scenario;
    let mut written = Vec::new();
    let mut failed = Vec::new();
    let mut attempt = |path: PathBuf, result: Result<(), CliError>| match result {
        Ok(()) => written.push(path),
        Err(e) => failed.push(format!("{}: {e}", path.display())),
    };

    // Sample runs: the same runs as the Monte Carlo's first ones, traced over the whole
    // horizon (the simulator never stops a run at settling).
    if let Some(v) = &a.simulation {
        let mut runs = Vec::new();
        let mut traced = Ok(());
        for run in 0..PLOTTED_RUNS.min(v.summary.runs as u64) {
            let trace = match entrain::sim::trace_run(&v.setup, v.seed, run, false) {
                Ok((_, trace)) => trace,
                Err(e) => {
                    traced = Err(CliError::Assess(AssessError::input(
                        &s.path,
                        format!("simulation: {e}"),
                    )));
                    break;
                }
            };
            let step_s = trace.update_period_s;
            runs.push(plot::RunTrace {
                run,
                step_s,
                error_s: trace
                    .network_turns
                    .iter()
                    .map(|t| t * s.phase_period_s)
                    .collect(),
                first_entry_s: trace.first_entry_updates.map(|k| k as f64 * step_s),
                settle_s: trace.settle_updates.map(|k| k as f64 * step_s),
            });
        }
        let period = s.update_period_s();
        let envelope = a.prediction.forecast.as_ref().map(|f| plot::Envelope {
            step_s: f.envelope.stride_updates as f64 * period,
            p50_s: f
                .envelope
                .p50_turns
                .iter()
                .map(|t| t * s.phase_period_s)
                .collect(),
            p90_s: f
                .envelope
                .p90_turns
                .iter()
                .map(|t| t * s.phase_period_s)
                .collect(),
            samples: f.samples,
        });
        let settle = a.prediction.settle;
        let path = dir.join("phase_error.svg");
        let plot = plot::PhaseErrorPlot {
            title: format!("{}: largest phase difference over whole runs", s.name),
            runs,
            runs_total: v.summary.runs,
            envelope,
            bound_s: settle.map(|t| t.bound_s),
            noise_floor_s: a.prediction.noise_floor.map(|n| (n.p50_s, n.p99_s)),
            initial_spread_s: s.initial_spread_s,
            tolerance_s: s.lock_tolerance_s,
            budget_s: s.lock_budget_s,
        };
        let result = traced.and_then(|()| {
            policy.write_with(&path, |temp| plot::phase_error(temp, &plot).map_err(out))
        });
        attempt(path, result);

        let path = dir.join("lock_times.svg");
        let histogram = plot::LockHistogram {
            title: format!("{}: settling times of {} runs", s.name, v.summary.runs),
            settle_times_s: v.settle_times_s.clone(),
            runs: v.summary.runs,
            p50_s: settle.and_then(|t| t.p50_s),
            p90_s: settle.and_then(|t| t.p90_s),
            bound_s: settle.map(|t| t.bound_s),
            budget_s: s.lock_budget_s,
        };
        let result = policy.write_with(&path, |temp| {
            plot::lock_histogram(temp, &histogram).map_err(out)
        });
        attempt(path, result);
    }

    let path = dir.join("slowest_mode.svg");
    let n = &a.network;
    let mode = plot::ModePlot {
        title: format!("{}: slowest mode over the network", s.name),
        shape: n.slow_mode.clone(),
        layout: mode_layout(n),
        lambda_slow: n.spectrum.lambda_slow,
        multiplicity: (!n.smallest_eigenvalues.is_empty())
            .then(|| plot::mode::multiplicity(&n.smallest_eigenvalues, n.spectrum.lambda_slow)),
    };
    let result = policy.write_with(&path, |temp| plot::mode_shape(temp, &mode).map_err(out));
    attempt(path, result);
    Ok((written, failed))
}

/// How the slowest-mode plot lays out `n`'s network.
fn mode_layout(n: &NetworkModel) -> plot::ModeLayout {
    use entrain::plan::Topology;
    use plot::ModeLayout;
    let on_circle = |count: usize, edges: Vec<(usize, usize)>, how: &str| ModeLayout::Graph {
        positions: plot::mode::circle(count),
        edges,
        how: how.to_owned(),
    };
    let as_graph = |g: &entrain::graph::Graph| {
        let edges: Vec<(usize, usize)> = g.edges().iter().map(|e| (e.a, e.b)).collect();
        match plot::mode::spectral(g) {
            Some(start) if g.node_count() <= plot::mode::SPREAD_MAX_NODES => ModeLayout::Graph {
                positions: plot::mode::spread(&start, &edges),
                edges,
                how: "spectral layout spread to hop distances".to_owned(),
            },
            Some(positions) => ModeLayout::Graph {
                positions,
                edges,
                how: "placed by the two slowest non-trivial modes (spectral layout)".to_owned(),
            },
            None => on_circle(
                g.node_count(),
                edges,
                "nodes on a circle in number order (too many for the spectral layout)",
            ),
        }
    };
    match (&n.topology, &n.graph) {
        (Some(Topology::Grid { rows, cols }), _) => ModeLayout::Cells {
            rows: *rows,
            cols: *cols,
            wraps: false,
        },
        (Some(Topology::Torus { rows, cols }), _) => ModeLayout::Cells {
            rows: *rows,
            cols: *cols,
            wraps: true,
        },
        (Some(Topology::Chain { .. }), _) => ModeLayout::Line { pinned: false },
        (Some(Topology::PinnedChain { .. }), _) => ModeLayout::Line { pinned: true },
        (Some(Topology::Ring { nodes }), _) => on_circle(
            *nodes,
            (0..*nodes).map(|i| (i, (i + 1) % nodes)).collect(),
            "nodes on a circle in ring order",
        ),
        (Some(Topology::Star { nodes }), _) => ModeLayout::Graph {
            positions: plot::mode::star(*nodes),
            edges: (1..*nodes).map(|i| (0, i)).collect(),
            how: "hub (node 0) in the middle".to_owned(),
        },
        (Some(Topology::Complete { nodes }), _) if *nodes <= 60 => on_circle(
            *nodes,
            (0..*nodes)
                .flat_map(|i| (i + 1..*nodes).map(move |j| (i, j)))
                .collect(),
            "every node hears every other",
        ),
        (Some(Topology::Complete { nodes }), _) => on_circle(
            *nodes,
            Vec::new(),
            "every node hears every other (edges not drawn above 60 nodes)",
        ),
        (Some(t), _) => match entrain::graph::Graph::from_topology(t) {
            Ok(g) => as_graph(&g),
            Err(_) => on_circle(
                t.node_count(),
                Vec::new(),
                "nodes on a circle in number order",
            ),
        },
        (None, Some(g)) => as_graph(g),
        (None, None) => panic!(
            "network model without topology or graph: a broken invariant of NetworkModel::of"
        ),
    }
}
