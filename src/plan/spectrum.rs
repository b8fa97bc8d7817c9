//! The spectrum summary that every stability, settling and tuning function reads.

use super::error::PlanError;

/// What the planner needs to know about a coupling graph's Laplacian `L = D − A`.
///
/// Built by [`crate::plan::Topology::spectrum`] (closed forms) or, with feature `check`,
/// by the numeric graph path. All eigenvalues are in units of edge weight (1 for an
/// unweighted edge); with a per-update gain `kp` the product `kp·λ` is dimensionless.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Spectrum {
    /// Number of nodes that adjust their phase (the reference of a pinned chain is not
    /// counted).
    pub node_count: usize,
    /// The slowest decaying mode's eigenvalue: λ2 (the algebraic connectivity, Fiedler
    /// 1973) for a free network, the smallest eigenvalue of the grounded Laplacian for a
    /// network pinned to a reference. Zero when the graph is disconnected.
    pub lambda_slow: f64,
    /// The largest Laplacian eigenvalue λmax (sets the step-size limit `2/λmax`).
    pub lambda_max: f64,
    /// Largest weighted degree (sum of edge weights at one node), including the edge to the
    /// reference for a pinned network. Bounds the jitter injected per update.
    pub max_degree: f64,
    /// Whether every node is connected to every other (or, pinned, to the reference).
    pub connected: bool,
    /// Whether the network follows an external reference (no zero mode; the phase error
    /// is measured against the reference instead of between nodes).
    pub pinned: bool,
    /// Number of stable twisted states `q ≠ 0` (ring: `|q| < N/4`, Wiley, Strogatz &
    /// Girvan 2006); 0 where none are known.
    pub stable_twisted_states: usize,
}

impl Spectrum {
    /// Check that the summary describes a connected graph with finite, ordered
    /// eigenvalues `0 < lambda_slow ≤ lambda_max`.
    ///
    /// # Errors
    /// [`PlanError::Disconnected`] if `connected` is false or `lambda_slow` is zero;
    /// [`PlanError::InvalidParameter`] for NaN, negative or unordered values, or no nodes.
    pub fn validate(&self) -> Result<(), PlanError> {
        if self.node_count == 0 {
            return Err(PlanError::TooFewNodes { min: 1, got: 0 });
        }
        if !self.connected {
            return Err(PlanError::Disconnected);
        }
        if !(self.lambda_max.is_finite() && self.lambda_max > 0.0) {
            return Err(PlanError::InvalidParameter {
                name: "lambda_max",
                valid: "finite and > 0",
            });
        }
        if !self.lambda_slow.is_finite() || self.lambda_slow < 0.0 {
            return Err(PlanError::InvalidParameter {
                name: "lambda_slow",
                valid: "finite and >= 0",
            });
        }
        if self.lambda_slow <= 0.0 {
            return Err(PlanError::Disconnected);
        }
        if self.lambda_slow > self.lambda_max * (1.0 + 1e-12) {
            return Err(PlanError::InvalidParameter {
                name: "lambda_slow",
                valid: "<= lambda_max",
            });
        }
        if !(self.max_degree.is_finite() && self.max_degree > 0.0) {
            return Err(PlanError::InvalidParameter {
                name: "max_degree",
                valid: "finite and > 0",
            });
        }
        Ok(())
    }

    /// The constant `C` of the worst-case settling bound: the largest pairwise spread at
    /// update `t` is at most `C · spread(0) · max_k |h_k(t)|`, where `h_k` is mode k's
    /// response. `C = √(N/2)` for a free network (the spread is at most `√2·‖x − x̄‖₂`
    /// and `‖x − x̄‖₂ ≤ √N·spread/2`), `C = √N` for a pinned one (offsets from the
    /// reference). Standard norm inequalities, no source needed.
    pub fn projection_constant(&self) -> f64 {
        let n = self.node_count as f64;
        if self.pinned {
            libm::sqrt(n)
        } else {
            libm::sqrt(n / 2.0)
        }
    }
}
