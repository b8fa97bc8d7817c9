//! Arbitrary coupling graphs and their numeric Laplacian spectra (host only, `std`).
//!
//! A [`Graph`] is built from an edge list with optional positive weights and validated
//! (no self-loops, no duplicates, indices in range). Its spectrum comes from a dense
//! symmetric eigen-decomposition (`nalgebra`) up to [`DENSE_MAX_NODES`] nodes, or, on
//! large sparse graphs, from Lanczos iteration: the few smallest non-zero eigenvalues by
//! shift-invert on the pseudo-inverse (a sparse Cholesky factorisation of the grounded
//! Laplacian with `faer`), λmax by shift-invert inside a bracket that Cholesky
//! factorisations of `σI − L` prove; every sparse eigenvalue comes with an error bound
//! (see [`SparseSpectrum`]). The slowest mode's eigenvector comes with either.
//!
//! # Example
//!
//! A courtyard lighting ring of 8 fixtures with one cross cable:
//!
//! ```
//! use entrain::graph::Graph;
//!
//! let mut edges: Vec<(usize, usize)> = (0..8).map(|i| (i, (i + 1) % 8)).collect();
//! edges.push((0, 4));
//! let g = Graph::from_edges(8, &edges)?;
//! let dense = g.dense_spectrum()?;
//! let sparse = g.sparse_spectrum()?;
//! assert!((dense.lambda2() - sparse.lambda2).abs() < 1e-9);
//! let summary = g.spectrum()?; // feeds entrain::plan::{stability, settle, tune}
//! assert!(summary.connected && summary.lambda_slow > 0.0);
//! # Ok::<(), entrain::graph::GraphError>(())
//! ```

mod dense;
mod error;
mod flow;
mod sparse;

pub use dense::DenseSpectrum;
pub use error::GraphError;
pub use sparse::{SparseOptions, SparseSpectrum, SparseStage};

use crate::plan::{Spectrum, Topology};

/// Largest node count of a [`Graph`] (2^28; a larger count is refused before anything
/// is allocated).
pub const MAX_GRAPH_NODES: usize = 1 << 28;

/// Largest node count of the dense path (an N×N matrix of `f64`: 128 MB at 4,000).
pub const DENSE_MAX_NODES: usize = 4000;

/// Node count up to which [`Graph::summary`] and [`Graph::spectrum`] take the dense path
/// (about a second at 1,000 nodes; the dense cost grows as N³); the sparse path above.
pub const DENSE_AUTO_MAX_NODES: usize = 1000;

/// How many of the smallest non-zero eigenvalues (λ2 to λ6) [`Graph::summary`] reports
/// on the sparse path (the dense path knows them all).
pub const SMALLEST_EIGENVALUES: usize = 5;

const _: () = assert!(DENSE_AUTO_MAX_NODES <= DENSE_MAX_NODES);

/// Everything the checker reports about a graph's spectrum, in one call
/// ([`Graph::summary`]).
#[derive(Clone, Debug, PartialEq)]
pub struct GraphSummary {
    /// The planner's input (λslow = λ2, λmax, degrees, connected or not).
    pub spectrum: Spectrum,
    /// Every eigenvalue, ascending, when the dense path ran (`node_count ≤ DENSE_AUTO_MAX_NODES`);
    /// of the grounded Laplacian (one per adjusting node, no zero mode) on a pinned graph.
    pub eigenvalues: Option<Vec<f64>>,
    /// The smallest eigenvalues, ascending: 0, then λ2 up to [`SMALLEST_EIGENVALUES`]
    /// non-zero ones (fewer on a small graph); on both paths. A pinned graph has no zero
    /// mode: its [`SMALLEST_EIGENVALUES`] + 1 smallest grounded eigenvalues. Empty for a
    /// disconnected graph on the sparse path.
    pub smallest_eigenvalues: Vec<f64>,
    /// The slowest mode's shape (largest magnitude 1), one entry per node (0 at reference
    /// nodes); empty for a disconnected graph.
    pub slow_mode: Vec<f64>,
    /// Worst edge load per unit detuning ([`Graph::worst_flow_factor`]) when the dense path
    /// ran and the graph is connected.
    pub worst_flow_factor: Option<f64>,
}

/// One undirected edge with its weight (coupling strength relative to a plain link).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Edge {
    /// One end.
    pub a: usize,
    /// The other end.
    pub b: usize,
    /// Weight, finite and `> 0` (1 for a plain link).
    pub weight: f64,
}

/// A validated undirected weighted graph with adjacency lists.
#[derive(Clone, Debug, PartialEq)]
pub struct Graph {
    nodes: usize,
    edges: Vec<Edge>,
    /// `row_start[i]..row_start[i+1]` indexes `neighbours` for node i.
    row_start: Vec<usize>,
    neighbours: Vec<(usize, f64)>,
    degrees: Vec<f64>,
    components: usize,
    /// Reference nodes, ascending (empty: a free graph).
    references: Vec<usize>,
    /// `true` at each reference node (empty when there are none).
    grounded: Vec<bool>,
    /// Connected pieces without a reference node (0 when there are no references).
    unreferenced: usize,
}

impl Graph {
    /// Build from unweighted edges (weight 1).
    ///
    /// # Errors
    /// See [`Self::from_weighted_edges`].
    pub fn from_edges(nodes: usize, edges: &[(usize, usize)]) -> Result<Self, GraphError> {
        let weighted: Vec<(usize, usize, f64)> = edges.iter().map(|&(a, b)| (a, b, 1.0)).collect();
        Self::from_weighted_edges(nodes, &weighted)
    }

    /// Build from weighted edges `(a, b, weight)`. A disconnected graph is accepted here
    /// (see [`Self::component_count`]); the spectrum methods report it.
    ///
    /// # Errors
    /// [`GraphError::NoNodes`], [`GraphError::TooManyNodes`], [`GraphError::NodeOutOfRange`], [`GraphError::SelfLoop`],
    /// [`GraphError::DuplicateEdge`], [`GraphError::BadWeight`].
    pub fn from_weighted_edges(
        nodes: usize,
        edges: &[(usize, usize, f64)],
    ) -> Result<Self, GraphError> {
        if nodes == 0 {
            return Err(GraphError::NoNodes);
        }
        if nodes > MAX_GRAPH_NODES {
            return Err(GraphError::TooManyNodes {
                nodes,
                max: MAX_GRAPH_NODES,
            });
        }
        let mut seen = std::collections::HashMap::with_capacity(edges.len());
        let mut list = Vec::with_capacity(edges.len());
        for (index, &(a, b, weight)) in edges.iter().enumerate() {
            for node in [a, b] {
                if node >= nodes {
                    return Err(GraphError::NodeOutOfRange {
                        edge: index,
                        node,
                        nodes,
                    });
                }
            }
            if a == b {
                return Err(GraphError::SelfLoop {
                    edge: index,
                    node: a,
                });
            }
            if !(weight.is_finite() && weight > 0.0) {
                return Err(GraphError::BadWeight { edge: index });
            }
            if let Some(&first) = seen.get(&(a.min(b), a.max(b))) {
                return Err(GraphError::DuplicateEdge {
                    first,
                    second: index,
                });
            }
            seen.insert((a.min(b), a.max(b)), index);
            list.push(Edge { a, b, weight });
        }
        let mut counts = vec![0_usize; nodes + 1];
        for e in &list {
            for node in [e.a, e.b] {
                if let Some(c) = counts.get_mut(node + 1) {
                    *c += 1;
                }
            }
        }
        let mut row_start = counts;
        for i in 1..row_start.len() {
            row_start[i] += row_start[i - 1];
        }
        let mut fill = row_start.clone();
        let mut neighbours = vec![(0_usize, 0.0_f64); 2 * list.len()];
        let mut degrees = vec![0.0_f64; nodes];
        for e in &list {
            for (from, to) in [(e.a, e.b), (e.b, e.a)] {
                if let Some(pos) = fill.get_mut(from) {
                    if let Some(slot) = neighbours.get_mut(*pos) {
                        *slot = (to, e.weight);
                    }
                    *pos += 1;
                }
                if let Some(d) = degrees.get_mut(from) {
                    *d += e.weight;
                }
            }
        }
        let mut graph = Self {
            nodes,
            edges: list,
            row_start,
            neighbours,
            degrees,
            components: 0,
            references: Vec::new(),
            grounded: Vec::new(),
            unreferenced: 0,
        };
        graph.components = graph.count_components().0;
        Ok(graph)
    }

    /// Mark `references` as reference nodes: they beacon the reference phase and never
    /// adjust, so every spectrum of this graph is the grounded Laplacian's (their rows and
    /// columns removed; no zero mode), and the planner sees only the other nodes. An empty
    /// list gives back the free graph.
    ///
    /// # Errors
    /// [`GraphError::ReferenceOutOfRange`], [`GraphError::DuplicateReference`],
    /// [`GraphError::AllReferences`].
    pub fn with_references(mut self, references: &[usize]) -> Result<Self, GraphError> {
        let mut grounded = vec![false; self.nodes];
        for &node in references {
            match grounded.get_mut(node) {
                None => {
                    return Err(GraphError::ReferenceOutOfRange {
                        node,
                        nodes: self.nodes,
                    });
                }
                Some(true) => return Err(GraphError::DuplicateReference { node }),
                Some(g) => *g = true,
            }
        }
        if !references.is_empty() && references.len() == self.nodes {
            return Err(GraphError::AllReferences { nodes: self.nodes });
        }
        let mut sorted = references.to_vec();
        sorted.sort_unstable();
        self.references = sorted;
        self.grounded = if references.is_empty() {
            Vec::new()
        } else {
            grounded
        };
        self.unreferenced = self.count_components().1;
        Ok(self)
    }

    /// The reference nodes, ascending (empty for a free graph).
    pub fn references(&self) -> &[usize] {
        &self.references
    }

    /// Whether `node` is a reference node.
    pub fn is_reference(&self, node: usize) -> bool {
        self.grounded.get(node).copied().unwrap_or(false)
    }

    /// Whether the graph has reference nodes (its spectra are then grounded).
    pub fn is_pinned(&self) -> bool {
        !self.references.is_empty()
    }

    /// Number of nodes that adjust their phase (all but the references).
    pub fn free_count(&self) -> usize {
        self.nodes - self.references.len()
    }

    /// Set the reference entries of `v` to zero (pinned graphs), or subtract its mean
    /// (free graphs): the projection onto the space the spectra live on.
    pub(crate) fn remove_null(&self, v: &mut [f64]) {
        if self.is_pinned() {
            for (x, &g) in v.iter_mut().zip(&self.grounded) {
                if g {
                    *x = 0.0;
                }
            }
        } else {
            let mean = v.iter().sum::<f64>() / v.len().max(1) as f64;
            v.iter_mut().for_each(|x| *x -= mean);
        }
    }

    /// The graph of a closed-form topology (node numbering as in [`Topology`]). A pinned
    /// chain becomes a chain of `nodes + 1` with the reference as the last node, marked
    /// as a reference ([`Self::with_references`]), so its spectrum is the grounded one.
    ///
    /// # Errors
    /// [`GraphError::NoNodes`] if the topology is invalid.
    pub fn from_topology(topology: &Topology) -> Result<Self, GraphError> {
        topology.validate().map_err(|_| GraphError::NoNodes)?;
        let mut edges = Vec::new();
        let n = topology.node_count();
        match *topology {
            Topology::Chain { nodes } => edges.extend((1..nodes).map(|i| (i - 1, i))),
            Topology::PinnedChain { nodes } => {
                edges.extend((1..nodes).map(|i| (i - 1, i)));
                edges.push((0, nodes));
                return Self::from_edges(nodes + 1, &edges)?.with_references(&[nodes]);
            }
            Topology::Ring { nodes } => edges.extend((0..nodes).map(|i| (i, (i + 1) % nodes))),
            Topology::Star { nodes } => edges.extend((1..nodes).map(|i| (0, i))),
            Topology::Complete { nodes } => {
                for i in 0..nodes {
                    edges.extend((i + 1..nodes).map(|j| (i, j)));
                }
            }
            Topology::Grid { rows, cols } => {
                for r in 0..rows {
                    for c in 0..cols {
                        let i = r * cols + c;
                        if c + 1 < cols {
                            edges.push((i, i + 1));
                        }
                        if r + 1 < rows {
                            edges.push((i, i + cols));
                        }
                    }
                }
            }
            Topology::Torus { rows, cols } => {
                for r in 0..rows {
                    for c in 0..cols {
                        let i = r * cols + c;
                        edges.push((i, r * cols + (c + 1) % cols));
                        edges.push((i, ((r + 1) % rows) * cols + c));
                    }
                }
            }
        }
        Self::from_edges(n, &edges)
    }

    /// Number of nodes.
    pub fn node_count(&self) -> usize {
        self.nodes
    }

    /// The validated edges, in input order.
    pub fn edges(&self) -> &[Edge] {
        &self.edges
    }

    /// Neighbours of `node` with the edge weights (empty for an unknown node).
    pub fn neighbours(&self, node: usize) -> &[(usize, f64)] {
        let start = self.row_start.get(node).copied().unwrap_or(0);
        let end = self.row_start.get(node + 1).copied().unwrap_or(start);
        self.neighbours.get(start..end).unwrap_or(&[])
    }

    /// Weighted degree of every node.
    pub fn degrees(&self) -> &[f64] {
        &self.degrees
    }

    /// Largest weighted degree.
    pub fn max_degree(&self) -> f64 {
        self.degrees.iter().copied().fold(0.0, f64::max)
    }

    /// Number of connected components (1 = connected).
    pub fn component_count(&self) -> usize {
        self.components
    }

    /// Whether every node can reach every other (free graph), or every node can reach a
    /// reference node (pinned graph): the spectrum's notion of connected.
    pub fn is_connected(&self) -> bool {
        if self.is_pinned() {
            self.unreferenced == 0
        } else {
            self.components == 1
        }
    }

    /// Fail with [`GraphError::Disconnected`] (free graph) or
    /// [`GraphError::NoReferenceReached`] (pinned graph) unless connected.
    pub fn require_connected(&self) -> Result<(), GraphError> {
        if self.is_connected() {
            Ok(())
        } else if self.is_pinned() {
            Err(GraphError::NoReferenceReached {
                pieces: self.unreferenced,
            })
        } else {
            Err(GraphError::Disconnected {
                components: self.components,
            })
        }
    }

    /// `y = L·x` for the weighted Laplacian `L = D − A`; on a pinned graph the grounded
    /// Laplacian: reference entries of `x` are taken as 0 and those of `y` come out 0.
    ///
    /// # Errors
    /// [`GraphError::WrongLength`] unless both slices have `node_count()` entries.
    pub fn laplacian_times(&self, x: &[f64], y: &mut [f64]) -> Result<(), GraphError> {
        for len in [x.len(), y.len()] {
            if len != self.nodes {
                return Err(GraphError::WrongLength {
                    needed: self.nodes,
                    got: len,
                });
            }
        }
        let at = |j: usize| if self.is_reference(j) { 0.0 } else { x[j] };
        for (i, out) in y.iter_mut().enumerate() {
            if self.is_reference(i) {
                *out = 0.0;
                continue;
            }
            let xi = x[i];
            *out = self
                .neighbours(i)
                .iter()
                .map(|&(j, w)| w * (xi - at(j)))
                .sum();
        }
        Ok(())
    }

    /// Connected components, and how many of them hold no reference node (0 on a free
    /// graph).
    fn count_components(&self) -> (usize, usize) {
        let mut seen = vec![false; self.nodes];
        let mut stack = Vec::new();
        let mut count = 0;
        let mut unreferenced = 0;
        for start in 0..self.nodes {
            if seen.get(start).copied().unwrap_or(true) {
                continue;
            }
            count += 1;
            let mut holds_reference = false;
            stack.push(start);
            if let Some(s) = seen.get_mut(start) {
                *s = true;
            }
            while let Some(i) = stack.pop() {
                holds_reference |= self.is_reference(i);
                for &(j, _) in self.neighbours(i) {
                    if let Some(s) = seen.get_mut(j) {
                        if !*s {
                            *s = true;
                            stack.push(j);
                        }
                    }
                }
            }
            if self.is_pinned() && !holds_reference {
                unreferenced += 1;
            }
        }
        (count, unreferenced)
    }

    /// The full report: spectrum summary, all eigenvalues and the flow factor where the
    /// dense path applies (up to [`DENSE_AUTO_MAX_NODES`] nodes), the slowest mode's shape. A disconnected graph is reported with
    /// `connected: false` (no error; the planner refuses it with
    /// [`crate::plan::PlanError::Disconnected`]).
    ///
    /// # Errors
    /// [`GraphError::TooSmall`] for a single node; sparse-path errors on large graphs.
    pub fn summary(&self) -> Result<GraphSummary, GraphError> {
        self.summary_observed(&mut |_| {})
    }

    /// As [`Self::summary`], telling `observe` what the sparse solver is doing (for a
    /// progress display; the dense path says nothing).
    ///
    /// # Errors
    /// As [`Self::summary`].
    pub fn summary_observed(
        &self,
        observe: &mut dyn FnMut(SparseStage),
    ) -> Result<GraphSummary, GraphError> {
        if self.nodes < 2 {
            return Err(GraphError::TooSmall {
                nodes: self.nodes,
                min: 2,
            });
        }
        if self.nodes <= DENSE_AUTO_MAX_NODES {
            let d = self.dense_spectrum()?;
            let connected = self.is_connected();
            let lambda_slow = if connected { d.lambda2() } else { 0.0 };
            let all = d.eigenvalues();
            Ok(GraphSummary {
                spectrum: self.spectrum_of(lambda_slow, d.lambda_max()),
                slow_mode: if connected {
                    d.slow_mode().to_vec()
                } else {
                    Vec::new()
                },
                smallest_eigenvalues: all[..all.len().min(SMALLEST_EIGENVALUES + 1)].to_vec(),
                eigenvalues: Some(all.to_vec()),
                worst_flow_factor: if connected {
                    self.worst_flow_factor().ok()
                } else {
                    None
                },
            })
        } else if self.is_connected() {
            // A pinned graph has no zero mode: one more eigenvalue makes up the list.
            let options = SparseOptions {
                smallest: SMALLEST_EIGENVALUES + usize::from(self.is_pinned()),
                ..SparseOptions::default()
            };
            let s = self.sparse_spectrum_observed(&options, observe)?;
            let mut smallest = if self.is_pinned() {
                Vec::new()
            } else {
                vec![0.0]
            };
            smallest.extend(&s.smallest);
            Ok(GraphSummary {
                spectrum: self.spectrum_of(s.lambda2, s.lambda_max_upper),
                eigenvalues: None,
                smallest_eigenvalues: smallest,
                slow_mode: s.slow_mode,
                worst_flow_factor: None,
            })
        } else {
            Ok(GraphSummary {
                spectrum: self.spectrum_of(0.0, 2.0 * self.max_degree()),
                eigenvalues: None,
                smallest_eigenvalues: Vec::new(),
                slow_mode: Vec::new(),
                worst_flow_factor: None,
            })
        }
    }

    /// Spectrum summary for the planner: dense up to [`DENSE_AUTO_MAX_NODES`] nodes, sparse
    /// above (with `lambda_max` the sparse path's upper estimate). A disconnected graph
    /// gives `connected: false` and `lambda_slow: 0` (the planner then refuses it).
    ///
    /// # Errors
    /// [`GraphError::TooSmall`] for a single node; sparse-path errors.
    pub fn spectrum(&self) -> Result<Spectrum, GraphError> {
        if self.nodes < 2 {
            return Err(GraphError::TooSmall {
                nodes: self.nodes,
                min: 2,
            });
        }
        let (lambda_slow, lambda_max) = if !self.is_connected() {
            (
                0.0,
                if self.nodes <= DENSE_AUTO_MAX_NODES {
                    self.dense_spectrum()?.lambda_max()
                } else {
                    2.0 * self.max_degree()
                },
            )
        } else if self.nodes <= DENSE_AUTO_MAX_NODES {
            let d = self.dense_spectrum()?;
            (d.lambda2(), d.lambda_max())
        } else {
            let s = self.sparse_spectrum()?;
            (s.lambda2, s.lambda_max_upper)
        };
        Ok(self.spectrum_of(lambda_slow, lambda_max))
    }

    /// The planner's summary of this graph with the given extremes (for a pinned graph:
    /// the nodes that adjust, their largest degree counting links to references).
    fn spectrum_of(&self, lambda_slow: f64, lambda_max: f64) -> Spectrum {
        let max_degree = self
            .degrees
            .iter()
            .enumerate()
            .filter(|&(i, _)| !self.is_reference(i))
            .fold(0.0, |m: f64, (_, &d)| m.max(d));
        Spectrum {
            node_count: self.free_count(),
            lambda_slow,
            lambda_max,
            max_degree,
            connected: self.is_connected(),
            pinned: self.is_pinned(),
            stable_twisted_states: 0,
        }
    }
}
