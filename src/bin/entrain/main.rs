//! `entrain`: check, tune, simulate and inspect a deployment of phase-coupled nodes from
//! a TOML scenario file. Exit status: 0 pass, 1 verdict fail, 2 bad input or usage.

use clap::{Parser, Subcommand};
mod firmware;
mod json;
mod plot;
mod report;
mod run;

use run::{Command, Format, ProgressSink};
use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::process::ExitCode;

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
        /// Monte-Carlo runs (overrides monte_carlo.runs).
        #[arg(long, value_name = "N")]
        runs: Option<u32>,
        /// Prediction only: skip the Monte Carlo.
        #[arg(long)]
        no_simulate: bool,
    },
    /// Tune the gains for the lock-time budget and write firmware constants.
    Tune {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Write the firmware constants (Rust source to include!) to this file.
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
        /// Print JSON instead of the report.
        #[arg(long)]
        json: bool,
    },
    /// Run the Monte Carlo of the real node code and write SVG plots.
    Simulate {
        /// Scenario file (TOML).
        file: PathBuf,
        /// Folder for the SVG plots (created if missing).
        #[arg(long, value_name = "DIR")]
        plots: Option<PathBuf>,
        /// Monte-Carlo runs (overrides monte_carlo.runs).
        #[arg(long, value_name = "N")]
        runs: Option<u32>,
        /// Master seed (overrides monte_carlo.seed).
        #[arg(long, value_name = "SEED")]
        seed: Option<u64>,
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

/// A progress bar on standard error, drawn only when it is a terminal.
struct Bar(indicatif::ProgressBar);

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
        } => (
            Command::Check {
                file,
                runs,
                no_simulate,
            },
            json,
        ),
        Sub::Tune { file, out, json } => (Command::Tune { file, out }, json),
        Sub::Simulate {
            file,
            plots,
            runs,
            seed,
            json,
        } => (
            Command::Simulate {
                file,
                plots,
                runs,
                seed,
            },
            json,
        ),
        Sub::Spectrum { file, json } => (Command::Spectrum { file }, json),
    };
    let format = if json { Format::Json } else { Format::Human };
    let bar = if std::io::stderr().is_terminal() {
        let style = indicatif::ProgressStyle::with_template(
            "simulating {bar:40} {pos}/{len} runs, {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
        indicatif::ProgressBar::new(0).with_style(style)
    } else {
        indicatif::ProgressBar::hidden()
    };
    match run::run(&command, format, &Bar(bar)) {
        Ok(out) => {
            let mut stdout = std::io::stdout().lock();
            // A closed pipe is not an error worth a panic.
            let _ = stdout.write_all(out.stdout.as_bytes());
            let _ = stdout.flush();
            ExitCode::from(out.status)
        }
        Err(e) => {
            eprintln!("entrain: error: {e}");
            ExitCode::from(run::EXIT_INPUT)
        }
    }
}
