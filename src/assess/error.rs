//! Why an assessment could not give a verdict.

use crate::scenario::ScenarioError;
use std::fmt;
use std::path::{Path, PathBuf};

/// Why an assessment could not give a verdict (bad input, not a failing design).
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum AssessError {
    /// The scenario file (or its edge list) is malformed or out of range.
    Scenario(ScenarioError),
    /// The library refused a value of the scenario.
    Input {
        /// The file the value came from.
        file: PathBuf,
        /// What the library said.
        message: String,
    },
    /// The Monte Carlo would run longer than [`Options::time_limit_s`](super::Options)
    /// allows (refused before it starts).
    TooMuchWork(WorkEstimate),
}

/// What a Monte Carlo would cost, estimated before it runs.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WorkEstimate {
    /// Neighbour-updates in all runs (runs × horizon × Σ degree).
    pub neighbour_updates: f64,
    /// Neighbour-updates per second of one thread, measured on the spot on this scenario.
    pub rate_per_thread: f64,
    /// Threads the Monte Carlo runs on.
    pub threads: usize,
    /// Estimated wall-clock time, seconds.
    pub estimated_s: f64,
    /// The limit it was held against, seconds.
    pub limit_s: f64,
}

impl fmt::Display for WorkEstimate {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "the Monte Carlo would take about {} ({:.2e} neighbour-updates at {:.2e} per second on each of {} threads, measured just now), over the limit of {}",
            human_duration(self.estimated_s),
            self.neighbour_updates,
            self.rate_per_thread,
            self.threads,
            human_duration(self.limit_s)
        )
    }
}

/// `s` seconds as the largest fitting unit, e.g. "3.2 h".
#[must_use]
pub fn human_duration(s: f64) -> String {
    if s < 120.0 {
        format!("{s:.0} s")
    } else if s < 7_200.0 {
        format!("{:.1} min", s / 60.0)
    } else if s < 172_800.0 {
        format!("{:.1} h", s / 3_600.0)
    } else if s < 2.0 * 31_557_600.0 {
        format!("{:.1} days", s / 86_400.0)
    } else {
        format!("{:.1} years", s / 31_557_600.0)
    }
}

impl AssessError {
    /// A library refusal of a value from `file`.
    #[must_use]
    pub fn input(file: &Path, message: String) -> AssessError {
        AssessError::Input {
            file: file.to_path_buf(),
            message,
        }
    }
}

impl fmt::Display for AssessError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            AssessError::Scenario(e) => write!(f, "{e}"),
            AssessError::Input { file, message } => write!(f, "{}: {message}", file.display()),
            AssessError::TooMuchWork(w) => write!(f, "{w}"),
        }
    }
}

impl std::error::Error for AssessError {}

impl From<ScenarioError> for AssessError {
    fn from(e: ScenarioError) -> Self {
        AssessError::Scenario(e)
    }
}
