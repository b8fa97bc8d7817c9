//! The coupling graph as the assessment sees it: spectrum, flow factor and modes, each
//! computed once per assessment.

use super::AssessError;
use crate::graph::{DENSE_AUTO_MAX_NODES, Graph, SMALLEST_EIGENVALUES, SparseStage};
use crate::plan::{Spectrum, Topology};
use crate::scenario::{Layout, Scenario};

/// Where the spectrum came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SpectrumSource {
    /// The topology's closed form.
    ClosedForm,
    /// The numeric graph path (edge list).
    Numeric,
}

impl SpectrumSource {
    /// Keyword used in reports and JSON.
    #[must_use]
    pub fn keyword(self) -> &'static str {
        match self {
            SpectrumSource::ClosedForm => "closed_form",
            SpectrumSource::Numeric => "numeric",
        }
    }
}

/// The coupling graph of a scenario with everything the assessment needs from its
/// spectrum. Built once by [`NetworkModel::of`]; nothing here is recomputed later.
#[derive(Clone, Debug)]
pub struct NetworkModel {
    /// Closed-form topology, when the layout has one.
    pub topology: Option<Topology>,
    /// The graph (edge lists; also the simulator's links).
    pub graph: Option<Graph>,
    /// Spectrum summary (λslow, λmax, degrees).
    pub spectrum: Spectrum,
    /// Where the spectrum came from.
    pub source: SpectrumSource,
    /// Worst edge load per unit detuning (`None`: no closed form and the graph is too
    /// large for the dense path).
    pub flow_factor: Option<f64>,
    /// Every eigenvalue, ascending (grounded Laplacian for a pinned chain), when known:
    /// closed forms always, edge lists on the dense path.
    pub eigenvalues: Option<Vec<f64>>,
    /// The smallest eigenvalues, ascending: the first [`SMALLEST_EIGENVALUES`] + 1 of
    /// `eigenvalues` when every one is known, else 0 and the sparse path's λ2 to λ6.
    pub smallest_eigenvalues: Vec<f64>,
    /// The slowest mode's value at each node, largest magnitude 1.
    pub slow_mode: Vec<f64>,
}

impl NetworkModel {
    /// The network model of `scenario`'s layout.
    ///
    /// # Errors
    /// [`AssessError::Input`] for a graph the library refuses (disconnected, too small).
    pub fn of(scenario: &Scenario) -> Result<NetworkModel, AssessError> {
        Self::of_observed(scenario, &mut |_| {})
    }

    /// As [`Self::of`], telling `observe` what the sparse eigensolver is doing (edge lists
    /// above [`DENSE_AUTO_MAX_NODES`] nodes), for a progress display.
    ///
    /// # Errors
    /// As [`Self::of`].
    pub fn of_observed(
        scenario: &Scenario,
        observe: &mut dyn FnMut(SparseStage),
    ) -> Result<NetworkModel, AssessError> {
        let input = |message: String| AssessError::input(&scenario.path, message);
        match &scenario.layout {
            Layout::Topology(t) => {
                let t = *t;
                let spectrum = t.spectrum().map_err(|e| input(format!("network: {e}")))?;
                let n = spectrum.node_count;
                let mut eigenvalues = vec![0.0; n];
                t.eigenvalues(&mut eigenvalues)
                    .map_err(|e| input(format!("spectrum: {e}")))?;
                let mut slow_mode = vec![0.0; n];
                t.slow_mode_shape(&mut slow_mode)
                    .map_err(|e| input(format!("spectrum: {e}")))?;
                let flow_factor = match t.worst_flow_factor() {
                    Ok(f) => Some(f),
                    // Grid and torus have no closed form: the numeric path gives it where
                    // the graph is small enough for the dense method (O(N³)).
                    Err(_) if n <= DENSE_AUTO_MAX_NODES => Graph::from_topology(&t)
                        .ok()
                        .and_then(|g| g.worst_flow_factor().ok()),
                    Err(_) => None,
                };
                let smallest_eigenvalues = eigenvalues[..n.min(SMALLEST_EIGENVALUES + 1)].to_vec();
                Ok(NetworkModel {
                    topology: Some(t),
                    graph: None,
                    spectrum,
                    source: SpectrumSource::ClosedForm,
                    flow_factor,
                    eigenvalues: Some(eigenvalues),
                    smallest_eigenvalues,
                    slow_mode,
                })
            }
            Layout::EdgeList {
                nodes,
                edges,
                weights,
                path,
                references,
            } => {
                let at_file = |message: String| AssessError::input(path, message);
                let weighted: Vec<(usize, usize, f64)> = edges
                    .iter()
                    .enumerate()
                    .map(|(k, &(a, b))| (a, b, weights.get(k).copied().unwrap_or(1.0)))
                    .collect();
                let graph = Graph::from_weighted_edges(*nodes, &weighted)
                    .and_then(|g| g.with_references(references))
                    .map_err(|e| at_file(format!("edge list: {e}")))?;
                if graph.is_pinned() && !graph.is_connected() {
                    return Err(at_file(format!(
                        "edge list: {}",
                        graph
                            .require_connected()
                            .err()
                            .map_or_else(String::new, |e| e.to_string())
                    )));
                }
                if !graph.is_connected() {
                    return Err(at_file(format!(
                        "edge list: the graph falls apart into {} pieces that can never lock to each other: every node must be reachable from every other",
                        graph.component_count()
                    )));
                }
                let summary = graph
                    .summary_observed(observe)
                    .map_err(|e| at_file(format!("edge list: {e}")))?;
                Ok(NetworkModel {
                    topology: None,
                    spectrum: summary.spectrum,
                    source: SpectrumSource::Numeric,
                    flow_factor: summary.worst_flow_factor,
                    eigenvalues: summary.eigenvalues,
                    smallest_eigenvalues: summary.smallest_eigenvalues,
                    slow_mode: summary.slow_mode,
                    graph: Some(graph),
                })
            }
        }
    }

    /// The non-zero eigenvalues, ascending, when every eigenvalue is known.
    #[must_use]
    pub fn nonzero_eigenvalues(&self) -> Option<&[f64]> {
        let all = self.eigenvalues.as_deref()?;
        // A pinned chain's grounded Laplacian has no zero mode.
        Some(if self.spectrum.pinned {
            all
        } else {
            all.get(1..).unwrap_or(&[])
        })
    }
}
