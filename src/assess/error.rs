//! Why an assessment could not give a verdict.

use crate::scenario::ScenarioError;
use std::fmt;
use std::path::{Path, PathBuf};

/// Why an assessment could not give a verdict (bad input, not a failing design).
#[derive(Clone, Debug, PartialEq, Eq)]
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
        }
    }
}

impl std::error::Error for AssessError {}

impl From<ScenarioError> for AssessError {
    fn from(e: ScenarioError) -> Self {
        AssessError::Scenario(e)
    }
}
