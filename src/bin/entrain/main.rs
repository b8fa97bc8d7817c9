//! `entrain`: check, tune, simulate and inspect a deployment of phase-coupled nodes from
//! a TOML scenario file. Exit status: 0 pass, 1 verdict fail, 2 bad input or usage.

use clap::{Parser, Subcommand};
mod firmware;
mod json;
mod output;
mod plot;
mod report;
mod run;

use entrain::scenario::MAX_RUNS;
use run::{Command, DEFAULT_MAX_MINUTES, Format, Limits, ProgressSink};
use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// `--runs`: the scenario file's range, 1 to `MAX_RUNS` (`--no-simulate` skips the
/// Monte Carlo).
fn runs_parser() -> clap::builder::RangedI64ValueParser<u32> {
    clap::value_parser!(u32).range(1..=i64::from(MAX_RUNS))
}

/// `--seed`: the scenario file's range, 0 to 2^63 − 1 (TOML integers are signed 64-bit).
fn seed_parser() -> clap::builder::RangedU64ValueParser<u64> {
    clap::value_parser!(u64).range(0..=i64::MAX as u64)
}

/// `--max-minutes`: a positive number of minutes.
fn minutes(text: &str) -> Result<f64, String> {
    match text.parse::<f64>() {
        Ok(m) if m.is_finite() && m > 0.0 => Ok(m),
        _ => Err(format!("{text:?} is not a positive number of minutes")),
    }
}

/// Options shared by the commands that may run a Monte Carlo or write files.
#[derive(clap::Args)]
struct LimitArgs {
    /// Refuse a Monte Carlo estimated (before it starts, at a rate measured on the spot)
    /// to take longer than this many minutes.
    #[arg(long, value_name = "MINUTES", default_value_t = DEFAULT_MAX_MINUTES, value_parser = minutes)]
    max_minutes: f64,
}

impl LimitArgs {
    fn limits(&self, force: bool) -> Limits {
        Limits {
            max_minutes: self.max_minutes,
            force,
        }
    }
}

/// Predict and verify whether neighbour-coupled node clocks lock, and how fast.
#[derive(Parser)]
#[command(name = "entrain", version, about, long_about = None)]
struct Args {
    #[command(subcommand)]
    command: Sub,
}

#[derive(Subcommand)]
enum Sub {
    /// Predict and verify a scenario; exit 1 when unstable, unable to lock or over budget.
    Check {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Print JSON instead of the report.
        #[arg(long)]
        json: bool,
        /// Monte-Carlo runs, 1 to 10000 (overrides monte_carlo.runs).
        #[arg(long, value_name = "N", value_parser = runs_parser(), conflicts_with = "no_simulate")]
        runs: Option<u32>,
        /// Prediction only: skip the Monte Carlo.
        #[arg(long)]
        no_simulate: bool,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Tune the gains for the lock-time budget and write firmware constants.
    Tune {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Write the firmware constants (Rust source to include!) to this file.
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
        /// Write through a symbolic link given as --out (refused otherwise).
        #[arg(long)]
        force: bool,
        /// Print JSON instead of the report.
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Run the Monte Carlo of the real node code and write SVG plots.
    Simulate {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Folder for the SVG plots (created if missing).
        #[arg(long, value_name = "DIR")]
        plots: Option<PathBuf>,
        /// Folder for one telemetry log per node of the first run (created if missing).
        #[arg(long, value_name = "DIR")]
        telemetry: Option<PathBuf>,
        /// Write plots and logs through symbolic links (refused otherwise).
        #[arg(long)]
        force: bool,
        /// Monte-Carlo runs, 1 to 10000 (overrides monte_carlo.runs).
        #[arg(long, value_name = "N", value_parser = runs_parser())]
        runs: Option<u32>,
        /// Master seed, 0 to 2^63-1 (overrides monte_carlo.seed).
        #[arg(long, value_name = "SEED", value_parser = seed_parser())]
        seed: Option<u64>,
        /// Print JSON instead of the report.
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        limits: LimitArgs,
    },
    /// Hold the telemetry logs of a running network against the scenario's prediction;
    /// exit 1 when a fault is found.
    Field {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Telemetry logs (any number; one per node or mixed).
        #[arg(required = true, value_name = "LOG")]
        logs: Vec<PathBuf>,
        /// Write the phase-error plot (SVG) to this file.
        #[arg(long, value_name = "FILE")]
        plot: Option<PathBuf>,
        /// Write the plot through a symbolic link (refused otherwise).
        #[arg(long)]
        force: bool,
        /// Print JSON instead of the report.
        #[arg(long)]
        json: bool,
    },
    /// Print the coupling graph's spectrum and the slowest mode's shape.
    Spectrum {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Print JSON instead of the report.
        #[arg(long)]
        json: bool,
    },
}

/// A progress bar on standard error, drawn when it is a terminal; and a spinner for an
/// eigensolve, drawn once it has taken a second.
struct Bar(indicatif::ProgressBar, Mutex<Option<Solve>>);

struct Solve {
    started: Instant,
    spinner: Option<indicatif::ProgressBar>,
}

/// How long an eigensolve runs before its spinner is drawn.
const SOLVE_QUIET_FOR: Duration = Duration::from_secs(1);

impl ProgressSink for Bar {
    fn start(&self, total: u64) {
        self.0.set_length(total);
        self.0.set_position(0);
    }
    fn set(&self, done: u64) {
        self.0.set_position(done);
    }
    fn finish(&self) {
        self.0.finish_and_clear();
    }
    fn solving(&self, stage: &str) {
        let Ok(mut solve) = self.1.lock() else { return };
        let solve = solve.get_or_insert_with(|| Solve {
            started: Instant::now(),
            spinner: None,
        });
        if solve.spinner.is_none() && solve.started.elapsed() >= SOLVE_QUIET_FOR {
            let spinner = indicatif::ProgressBar::new_spinner();
            spinner.enable_steady_tick(Duration::from_millis(120));
            solve.spinner = Some(spinner);
        }
        if let Some(spinner) = &solve.spinner {
            spinner.set_message(format!(
                "spectrum: {stage} ({:.0} s)",
                solve.started.elapsed().as_secs_f64()
            ));
        }
    }
    fn solved(&self) {
        if let Ok(mut solve) = self.1.lock() {
            if let Some(spinner) = solve.take().and_then(|s| s.spinner) {
                spinner.finish_and_clear();
            }
        }
    }
}

/// How often progress is written as a line when standard error is not a terminal.
const PROGRESS_LINE_EVERY: Duration = Duration::from_secs(10);

/// Progress as a plain line on standard error every [`PROGRESS_LINE_EVERY`] (for logs
/// and CI, where a bar would be noise): `entrain: 120 of 1000 runs simulated (12 %),
/// about 3.1 min left`.
struct Lines {
    state: Mutex<LinesState>,
}

struct LinesState {
    started: Instant,
    last: Instant,
    total: u64,
}

impl ProgressSink for Lines {
    fn start(&self, total: u64) {
        if let Ok(mut s) = self.state.lock() {
            let now = Instant::now();
            *s = LinesState {
                started: now,
                last: now,
                total,
            };
        }
    }
    fn set(&self, done: u64) {
        let Ok(mut s) = self.state.lock() else { return };
        let now = Instant::now();
        if now.duration_since(s.last) < PROGRESS_LINE_EVERY || done == 0 || s.total == 0 {
            return;
        }
        s.last = now;
        let elapsed = now.duration_since(s.started).as_secs_f64();
        let left = elapsed / done as f64 * s.total.saturating_sub(done) as f64;
        eprintln!(
            "entrain: {done} of {} runs simulated ({:.0} %), about {} left",
            s.total,
            100.0 * done as f64 / s.total as f64,
            entrain::assess::human_duration(left)
        );
    }
    fn finish(&self) {}
}

fn main() -> ExitCode {
    let args = match Args::try_parse() {
        Ok(a) => a,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() {
                run::EXIT_INPUT
            } else {
                run::EXIT_PASS
            });
        }
    };
    let (command, json) = match args.command {
        Sub::Check {
            file,
            json,
            runs,
            no_simulate,
            limits,
        } => (
            Command::Check {
                file,
                runs,
                no_simulate,
                limits: limits.limits(false),
            },
            json,
        ),
        Sub::Tune {
            file,
            out,
            force,
            json,
            limits,
        } => (
            Command::Tune {
                file,
                out,
                limits: limits.limits(force),
            },
            json,
        ),
        Sub::Simulate {
            file,
            plots,
            telemetry,
            force,
            runs,
            seed,
            json,
            limits,
        } => (
            Command::Simulate {
                file,
                plots,
                telemetry,
                runs,
                seed,
                limits: limits.limits(force),
            },
            json,
        ),
        Sub::Spectrum { file, json } => (Command::Spectrum { file }, json),
        Sub::Field {
            file,
            logs,
            plot,
            force,
            json,
        } => (
            Command::Field {
                file,
                logs,
                plot,
                force,
            },
            json,
        ),
    };
    let format = if json { Format::Json } else { Format::Human };
    let result = if std::io::stderr().is_terminal() {
        let style = indicatif::ProgressStyle::with_template(
            "simulating {bar:40} {pos}/{len} runs, {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
        let bar = Bar(
            indicatif::ProgressBar::new(0).with_style(style),
            Mutex::new(None),
        );
        run::run(&command, format, &bar)
    } else {
        let now = Instant::now();
        let lines = Lines {
            state: Mutex::new(LinesState {
                started: now,
                last: now,
                total: 0,
            }),
        };
        run::run(&command, format, &lines)
    };
    match result {
        Ok(out) => {
            let mut stdout = std::io::stdout().lock();
            // Names and echoed values may hold control characters: the report shows
            // them escaped (JSON escapes them itself).
            let text = match format {
                Format::Human => output::terminal_safe(&out.stdout),
                Format::Json => out.stdout,
            };
            // A closed pipe is not an error worth a panic.
            let _ = stdout.write_all(text.as_bytes());
            let _ = stdout.flush();
            ExitCode::from(out.status)
        }
        Err(e) => {
            eprintln!("entrain: error: {}", output::terminal_safe(&e.to_string()));
            ExitCode::from(run::EXIT_INPUT)
        }
    }
}
