//! Steady edge flows of the P-only law on a general graph (Dörfler, Chertkov & Bullo,
//! PNAS 110, 2013): the linearised steady state `θ = L†ω̃/kp` puts flow `Bᵀ L† ω̃` on the
//! edges (turns per update, ω̃ the drift minus its mean). The law locks if every flow is
//! at most the edge capacity (`kp/(2π)` sine, `kp/2` linear); sufficient, exact on trees.

use super::sparse::Grounded;
use super::{DENSE_MAX_NODES, Graph, GraphError};

impl Graph {
    /// Flow on each edge (in [`Graph::edges`] order, from `a` to `b`) for node drifts
    /// `drift` (any unit per update; the mean is removed), weighted: `w_e·(x_a − x_b)`
    /// with `x = L†·drift`.
    ///
    /// # Errors
    /// [`GraphError::WrongLength`], [`GraphError::NotFinite`], [`GraphError::Disconnected`],
    /// [`GraphError::Factorization`].
    pub fn edge_flows(&self, drift: &[f64]) -> Result<Vec<f64>, GraphError> {
        if drift.len() != self.node_count() {
            return Err(GraphError::WrongLength {
                needed: self.node_count(),
                got: drift.len(),
            });
        }
        if drift.iter().any(|d| !d.is_finite()) {
            return Err(GraphError::NotFinite { name: "drift" });
        }
        let grounded = Grounded::new(self)?;
        let mut x = vec![0.0; drift.len()];
        grounded.apply(drift, &mut x);
        Ok(self
            .edges()
            .iter()
            .map(|e| e.weight * (x[e.a] - x[e.b]))
            .collect())
    }

    /// Worst edge load per unit detuning, relative to each edge's own capacity:
    /// `max over edges e of ‖L†b_e‖₁` (the flow `‖w_e·L†b_e‖₁` over the edge's weight
    /// `w_e`, since a link of weight `w` carries `w` times a plain link's coupling), so
    /// drifts within `±d` load no edge beyond `d ×` this many plain-link capacities (the
    /// input of [`crate::plan::lock_worst_case`]). Equal to the flow itself when every
    /// weight is 1. Dense `L†` via a Cholesky inverse; O(N³).
    ///
    /// # Errors
    /// [`GraphError::Disconnected`], [`GraphError::TooLargeForDense`].
    pub fn worst_flow_factor(&self) -> Result<f64, GraphError> {
        self.worst_load().map(|(factor, _)| factor)
    }

    /// The crystal pattern within `±tolerance` (any unit) that loads the worst edge most:
    /// `tolerance · sign(w_e·L†b_e)` for the edge e of [`Self::worst_flow_factor`]
    /// (Dörfler, Chertkov & Bullo 2013). On a chain: the first half fast, the rest slow.
    ///
    /// # Errors
    /// As [`Self::worst_flow_factor`], plus [`GraphError::NotFinite`] for a NaN tolerance.
    pub fn worst_crystal_pattern(&self, tolerance: f64) -> Result<Vec<f64>, GraphError> {
        if !tolerance.is_finite() {
            return Err(GraphError::NotFinite { name: "tolerance" });
        }
        let (_, direction) = self.worst_load()?;
        Ok(direction
            .iter()
            .map(|d| if *d >= 0.0 { tolerance } else { -tolerance })
            .collect())
    }

    /// The worst edge load and that edge's column of `L†b_e`.
    fn worst_load(&self) -> Result<(f64, Vec<f64>), GraphError> {
        self.require_connected()?;
        if self.node_count() > DENSE_MAX_NODES {
            return Err(GraphError::TooLargeForDense {
                nodes: self.node_count(),
                max: DENSE_MAX_NODES,
            });
        }
        let n = self.node_count();
        let pinv = if self.is_pinned() {
            // Referenced: θ = L_g⁻¹ω̃ on the adjusting nodes, 0 at the references.
            let inverse = self
                .grounded_laplacian_dense()?
                .cholesky()
                .ok_or(GraphError::Factorization)?
                .inverse();
            let keep: Vec<Option<usize>> = {
                let mut next = 0;
                (0..n)
                    .map(|i| {
                        (!self.is_reference(i)).then(|| {
                            next += 1;
                            next - 1
                        })
                    })
                    .collect()
            };
            nalgebra::DMatrix::from_fn(n, n, |r, c| match (keep[r], keep[c]) {
                (Some(a), Some(b)) => inverse[(a, b)],
                _ => 0.0,
            })
        } else {
            // L† = (L + J/n)⁻¹ − J/n for a connected graph.
            let l = self.laplacian_dense()?;
            let shifted = l.add_scalar(1.0 / n as f64);
            let inverse = shifted
                .cholesky()
                .ok_or(GraphError::Factorization)?
                .inverse();
            inverse.add_scalar(-1.0 / n as f64)
        };
        let mut worst = (0.0_f64, vec![0.0; n]);
        for e in self.edges() {
            let (ca, cb) = (pinv.column(e.a), pinv.column(e.b));
            let load: f64 = ca
                .iter()
                .zip(cb.iter())
                .map(|(x, y)| (x - y).abs())
                .sum::<f64>();
            if load > worst.0 {
                worst = (load, ca.iter().zip(cb.iter()).map(|(x, y)| x - y).collect());
            }
        }
        Ok(worst)
    }
}
