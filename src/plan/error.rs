//! The error value every planning function returns on bad input.

use core::fmt;

/// Why a planning function refused its input.
///
/// Small and `Copy`, so a node can size its own gains at boot and report the refusal
/// without allocating. Every variant names what was wrong and, where it applies, the
/// valid range.
#[non_exhaustive]
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum PlanError {
    /// The topology has fewer nodes than it needs (`min` nodes for this kind).
    TooFewNodes {
        /// Smallest node count this topology kind accepts.
        min: usize,
        /// Node count that was given.
        got: usize,
    },
    /// The node count is above [`crate::plan::MAX_PLAN_NODES`] (or rows × cols overflowed).
    TooManyNodes,
    /// A numeric parameter is NaN, infinite or outside its valid range.
    InvalidParameter {
        /// Name of the parameter, as spelled in the API (e.g. `"kp"`).
        name: &'static str,
        /// The valid range, in words (e.g. `"finite and > 0"`).
        valid: &'static str,
    },
    /// A mode index is past the last mode.
    ModeOutOfRange {
        /// Index that was asked for.
        index: usize,
        /// Number of modes (valid indices are `0..count`).
        count: usize,
    },
    /// A caller-provided output or input slice has the wrong length.
    WrongLength {
        /// Length the function needs.
        needed: usize,
        /// Length that was given.
        got: usize,
    },
    /// The delay is longer than the root finder supports.
    DelayTooLong {
        /// Largest supported delay in updates ([`crate::plan::MAX_DELAY_UPDATES`]).
        max: u32,
        /// Delay that was given, in updates.
        got: u32,
    },
    /// The lock tolerance is not below the initial spread, so there is nothing to settle.
    ToleranceNotBelowSpread,
    /// The coupling graph is disconnected: its parts drift apart and never lock.
    Disconnected,
    /// The gains make the network unstable (some mode has convergence factor ≥ 1).
    Unstable,
    /// The answer needs a quantity this topology has no closed form for (use the
    /// numeric graph path instead).
    NoClosedForm,
}

impl fmt::Display for PlanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::TooFewNodes { min, got } => {
                write!(
                    f,
                    "topology has {got} nodes; this kind needs at least {min}"
                )
            }
            Self::TooManyNodes => write!(
                f,
                "too many nodes; at most {} are supported",
                super::topology::MAX_PLAN_NODES
            ),
            Self::InvalidParameter { name, valid } => {
                write!(f, "parameter `{name}` is invalid; it must be {valid}")
            }
            Self::ModeOutOfRange { index, count } => {
                write!(f, "mode index {index} is out of range; valid is 0..{count}")
            }
            Self::WrongLength { needed, got } => {
                write!(f, "slice has length {got}; it must have length {needed}")
            }
            Self::DelayTooLong { max, got } => {
                write!(
                    f,
                    "delay of {got} updates is too long; at most {max} is supported"
                )
            }
            Self::ToleranceNotBelowSpread => {
                f.write_str("lock tolerance must be smaller than the initial spread")
            }
            Self::Disconnected => {
                f.write_str("coupling graph is disconnected; its parts can never lock")
            }
            Self::Unstable => f.write_str("gains are unstable: some mode does not decay"),
            Self::NoClosedForm => f.write_str(
                "this topology has no closed form for the quantity; use the numeric graph path",
            ),
        }
    }
}

impl core::error::Error for PlanError {}

/// Check that `value` is finite and strictly positive.
pub(crate) fn positive(value: f64, name: &'static str) -> Result<f64, PlanError> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(PlanError::InvalidParameter {
            name,
            valid: "finite and > 0",
        })
    }
}

/// Check that `value` is finite and not negative.
pub(crate) fn non_negative(value: f64, name: &'static str) -> Result<f64, PlanError> {
    if value.is_finite() && value >= 0.0 {
        Ok(value)
    } else {
        Err(PlanError::InvalidParameter {
            name,
            valid: "finite and >= 0",
        })
    }
}
