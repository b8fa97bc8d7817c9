//! Dense Laplacian spectrum through `nalgebra`'s symmetric eigen-decomposition.

use nalgebra::{DMatrix, SymmetricEigen};

use super::{DENSE_MAX_NODES, Graph, GraphError};

/// All Laplacian eigenvalues (ascending) and the slowest mode's eigenvector.
#[derive(Clone, Debug, PartialEq)]
pub struct DenseSpectrum {
    eigenvalues: Vec<f64>,
    slow_mode: Vec<f64>,
}

impl DenseSpectrum {
    /// All eigenvalues, ascending (the first is the zero mode, up to rounding).
    pub fn eigenvalues(&self) -> &[f64] {
        &self.eigenvalues
    }

    /// λ2, the algebraic connectivity (0 for a disconnected graph, up to rounding).
    pub fn lambda2(&self) -> f64 {
        self.eigenvalues[1]
    }

    /// λmax.
    pub fn lambda_max(&self) -> f64 {
        *self
            .eigenvalues
            .last()
            .expect("a spectrum of a graph with 2 or more nodes")
    }

    /// The eigenvector of λ2, scaled so its largest magnitude is 1 and its largest entry
    /// positive. Nodes with large magnitude are the last to agree.
    pub fn slow_mode(&self) -> &[f64] {
        &self.slow_mode
    }
}

impl Graph {
    /// The dense weighted Laplacian `L = D − A` (row-major order irrelevant: symmetric).
    ///
    /// # Errors
    /// [`GraphError::TooLargeForDense`] above [`DENSE_MAX_NODES`] nodes.
    pub fn laplacian_dense(&self) -> Result<DMatrix<f64>, GraphError> {
        if self.node_count() > DENSE_MAX_NODES {
            return Err(GraphError::TooLargeForDense {
                nodes: self.node_count(),
                max: DENSE_MAX_NODES,
            });
        }
        let n = self.node_count();
        let mut l = DMatrix::<f64>::zeros(n, n);
        for e in self.edges() {
            for (i, j, v) in [
                (e.a, e.a, e.weight),
                (e.b, e.b, e.weight),
                (e.a, e.b, -e.weight),
                (e.b, e.a, -e.weight),
            ] {
                if let Some(x) = l.get_mut((i, j)) {
                    *x += v;
                }
            }
        }
        Ok(l)
    }

    /// Every eigenvalue and the slowest mode, by dense symmetric eigen-decomposition
    /// (`nalgebra::SymmetricEigen`; eigenvalues accurate to about `1e-15·λmax`). Works on
    /// disconnected graphs too (then λ2 ≈ 0).
    ///
    /// # Errors
    /// [`GraphError::TooLargeForDense`] above [`DENSE_MAX_NODES`] nodes;
    /// [`GraphError::NoConvergence`] if the eigensolver hits its iteration cap.
    pub fn dense_spectrum(&self) -> Result<DenseSpectrum, GraphError> {
        let l = self.laplacian_dense()?;
        let n = self.node_count();
        // Capped iteration count: symmetric QR converges in O(N) sweeps, the cap only
        // turns a pathological input into an error instead of a hang.
        let eig = SymmetricEigen::try_new(l, f64::EPSILON, 1_000_000).ok_or(
            GraphError::NoConvergence {
                relative_residual: f64::NAN,
            },
        )?;
        let mut order: Vec<usize> = (0..n).collect();
        order.sort_by(|&a, &b| {
            let va = eig.eigenvalues.get(a).copied().unwrap_or(f64::INFINITY);
            let vb = eig.eigenvalues.get(b).copied().unwrap_or(f64::INFINITY);
            va.total_cmp(&vb)
        });
        let eigenvalues: Vec<f64> = order
            .iter()
            .filter_map(|&k| eig.eigenvalues.get(k).copied())
            .collect();
        let slow_mode = match order.get(1) {
            Some(&k) if k < eig.eigenvectors.ncols() => {
                normalise(eig.eigenvectors.column(k).iter().copied().collect())
            }
            _ => vec![0.0; n],
        };
        Ok(DenseSpectrum {
            eigenvalues,
            slow_mode,
        })
    }
}

/// Scale so the largest magnitude is 1 and that entry is positive.
pub(crate) fn normalise(mut v: Vec<f64>) -> Vec<f64> {
    let peak = v
        .iter()
        .copied()
        .fold(0.0_f64, |m, x| if x.abs() > m.abs() { x } else { m });
    if peak != 0.0 {
        v.iter_mut().for_each(|x| *x /= peak);
    }
    v
}
