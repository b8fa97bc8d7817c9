//! Errors of the numeric graph path.

use core::fmt;

/// Why a graph was refused or a numeric method gave up.
#[non_exhaustive]
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum GraphError {
    /// The graph has no nodes.
    NoNodes,
    /// An edge names a node that does not exist.
    NodeOutOfRange {
        /// Position of the edge in the input list.
        edge: usize,
        /// The node index it named.
        node: usize,
        /// Number of nodes (valid indices are `0..nodes`).
        nodes: usize,
    },
    /// An edge joins a node to itself.
    SelfLoop {
        /// Position of the edge in the input list.
        edge: usize,
        /// The node.
        node: usize,
    },
    /// The same pair of nodes appears twice (in either order).
    DuplicateEdge {
        /// Position of the first occurrence.
        first: usize,
        /// Position of the repeat.
        second: usize,
    },
    /// An edge weight is not finite and positive.
    BadWeight {
        /// Position of the edge in the input list.
        edge: usize,
    },
    /// The graph falls apart into `components` pieces that can never lock to each other.
    Disconnected {
        /// Number of connected components (≥ 2).
        components: usize,
    },
    /// A reference node index is not a node of the graph.
    ReferenceOutOfRange {
        /// The index given.
        node: usize,
        /// Number of nodes.
        nodes: usize,
    },
    /// A reference node is listed twice.
    DuplicateReference {
        /// The repeated index.
        node: usize,
    },
    /// Every node is a reference: nothing would adjust.
    AllReferences {
        /// Number of nodes.
        nodes: usize,
    },
    /// With reference nodes: `pieces` connected pieces hold no reference, so nothing
    /// pulls them toward the reference phase.
    NoReferenceReached {
        /// Pieces without a reference (≥ 1).
        pieces: usize,
    },
    /// More nodes than a graph may have ([`crate::graph::MAX_GRAPH_NODES`]).
    TooManyNodes {
        /// Node count that was given.
        nodes: usize,
        /// Largest accepted node count.
        max: usize,
    },
    /// The dense path was asked for more nodes than it handles.
    TooLargeForDense {
        /// Node count of the graph.
        nodes: usize,
        /// Largest node count of the dense path ([`crate::graph::DENSE_MAX_NODES`]).
        max: usize,
    },
    /// The graph is too small for the method (sparse path: at least 3 nodes).
    TooSmall {
        /// Node count of the graph.
        nodes: usize,
        /// Smallest node count the method accepts.
        min: usize,
    },
    /// A slice argument has the wrong length.
    WrongLength {
        /// Length needed.
        needed: usize,
        /// Length given.
        got: usize,
    },
    /// A value argument is NaN or infinite.
    NotFinite {
        /// Name of the argument.
        name: &'static str,
    },
    /// The sparse factorisation failed (out of memory, or not positive definite).
    Factorization,
    /// The dense eigensolver hit its iteration cap.
    NoConvergence {
        /// Relative residual reached (NaN when the solver does not report one).
        relative_residual: f64,
    },
    /// The sparse eigensolver could not bound an eigenvalue's error within the tolerance
    /// (it gives no number rather than a wrong one).
    EigenvalueNotConverged {
        /// Which eigenvalue (`"λ2"`, `"a small eigenvalue"`, `"λmax"`).
        which: &'static str,
        /// The smallest error bound reached, relative to the eigenvalue.
        relative_bound: f64,
        /// The relative bound that was asked for.
        tolerance: f64,
    },
}

impl fmt::Display for GraphError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::NoNodes => f.write_str("graph has no nodes; it needs at least 2"),
            Self::NodeOutOfRange { edge, node, nodes } => {
                write!(
                    f,
                    "edge {edge} names node {node}; valid nodes are 0..{nodes}"
                )
            }
            Self::SelfLoop { edge, node } => write!(f, "edge {edge} joins node {node} to itself"),
            Self::DuplicateEdge { first, second } => {
                write!(f, "edge {second} repeats edge {first} (same two nodes)")
            }
            Self::BadWeight { edge } => {
                write!(f, "edge {edge} has a weight that is not finite and > 0")
            }
            Self::Disconnected { components } => {
                write!(
                    f,
                    "graph is disconnected ({components} components); its parts can never lock"
                )
            }
            Self::ReferenceOutOfRange { node, nodes } => write!(
                f,
                "reference node {node} is not a node; valid nodes are 0..{nodes}"
            ),
            Self::DuplicateReference { node } => {
                write!(f, "reference node {node} is listed twice")
            }
            Self::AllReferences { nodes } => write!(
                f,
                "all {nodes} nodes are references; at least one node must adjust its phase"
            ),
            Self::NoReferenceReached { pieces } => write!(
                f,
                "{pieces} connected piece(s) of the graph hold no reference node, so nothing pulls them to the reference phase"
            ),
            Self::TooManyNodes { nodes, max } => {
                write!(f, "graph has {nodes} nodes; at most {max} are supported")
            }
            Self::TooLargeForDense { nodes, max } => {
                write!(
                    f,
                    "graph has {nodes} nodes; the dense path handles at most {max}"
                )
            }
            Self::TooSmall { nodes, min } => write!(
                f,
                "graph has {nodes} nodes; this method needs at least {min}"
            ),
            Self::WrongLength { needed, got } => {
                write!(f, "slice has length {got}; it must have length {needed}")
            }
            Self::NotFinite { name } => write!(f, "`{name}` contains a NaN or infinite value"),
            Self::Factorization => f.write_str("sparse Cholesky factorisation failed"),
            Self::NoConvergence { relative_residual } => {
                write!(
                    f,
                    "eigensolver stopped at relative residual {relative_residual:e} without converging"
                )
            }
            Self::EigenvalueNotConverged {
                which,
                relative_bound,
                tolerance,
            } => write!(
                f,
                "sparse eigensolver could not pin down {which}: its error bound reached {relative_bound:.1e} of its value, the tolerance is {tolerance:.0e}"
            ),
        }
    }
}

impl core::error::Error for GraphError {}
