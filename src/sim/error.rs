//! Why a simulation was refused.

use core::fmt;

use crate::graph::GraphError;

/// A scenario or run request the simulator cannot carry out; nothing panics on bad input.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum SimError {
    /// More nodes than node ids ([`crate::NodeId`] is `u16`: at most 65,536 nodes).
    TooManyNodes {
        /// Largest node count accepted.
        max: usize,
        /// Node count given.
        got: usize,
    },
    /// A node has more neighbours than a node's table can hold (255).
    DegreeTooHigh {
        /// The node.
        node: usize,
        /// Its number of neighbours.
        degree: usize,
        /// The largest degree accepted.
        max: usize,
    },
    /// A parameter outside its valid range; `valid` says what is accepted.
    InvalidParameter {
        /// The parameter's name.
        name: &'static str,
        /// The valid range.
        valid: &'static str,
    },
    /// A per-node list of the wrong length.
    WrongLength {
        /// The list's name.
        name: &'static str,
        /// The length needed (the node count).
        needed: usize,
        /// The length given.
        got: usize,
    },
    /// The horizon is so long that real time would overflow the simulator's clock
    /// (2^62 sub-ticks of 2^-16 nominal tick).
    HorizonTooLong {
        /// The largest horizon accepted for this update interval, in updates.
        max_updates: u64,
    },
    /// The links could not be built: the checker's graph error.
    Graph(GraphError),
    /// A Monte-Carlo request for zero runs.
    NoRuns,
}

impl fmt::Display for SimError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            SimError::TooManyNodes { max, got } => {
                write!(f, "too many nodes: {got} given, at most {max} accepted")
            }
            SimError::DegreeTooHigh { node, degree, max } => write!(
                f,
                "node {node} has {degree} neighbours, a node table holds at most {max}"
            ),
            SimError::InvalidParameter { name, valid } => {
                write!(f, "{name} out of range: must be {valid}")
            }
            SimError::WrongLength { name, needed, got } => {
                write!(
                    f,
                    "{name} has {got} entries, one per node ({needed}) needed"
                )
            }
            SimError::HorizonTooLong { max_updates } => {
                write!(f, "horizon too long: at most {max_updates} updates")
            }
            SimError::Graph(e) => write!(f, "links: {e}"),
            SimError::NoRuns => f.write_str("number of runs must be at least 1"),
        }
    }
}

impl core::error::Error for SimError {}
