//! Dense Laplacian spectrum through `nalgebra`'s symmetric eigen-decomposition.

use nalgebra::{DMatrix, SymmetricEigen};

use super::{DENSE_MAX_NODES, Graph, GraphError};

/// All Laplacian eigenvalues (ascending) and the slowest mode's eigenvector; for a graph
/// with reference nodes, those of the grounded Laplacian.
#[derive(Clone, Debug, PartialEq)]
pub struct DenseSpectrum {
    eigenvalues: Vec<f64>,
    slow_mode: Vec<f64>,
    pinned: bool,
}

impl DenseSpectrum {
    /// All eigenvalues, ascending (the first is the zero mode, up to rounding; on a
    /// pinned graph one per adjusting node and no zero mode).
    pub fn eigenvalues(&self) -> &[f64] {
        &self.eigenvalues
    }

    /// The slowest mode's eigenvalue: λ2, the algebraic connectivity (0 for a disconnected
    /// graph, up to rounding); on a pinned graph the grounded Laplacian's smallest.
    pub fn lambda2(&self) -> f64 {
        self.eigenvalues[usize::from(!self.pinned)]
    }

    /// λmax.
    pub fn lambda_max(&self) -> f64 {
        *self
            .eigenvalues
            .last()
            .expect("a spectrum of a graph with 2 or more nodes")
    }

    /// The eigenvector of λ2, scaled so its largest magnitude is 1 and its largest entry
    /// positive, one entry per node (0 at reference nodes). Nodes with large magnitude are
    /// the last to agree.
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

    /// The grounded Laplacian: `L` with the reference nodes' rows and columns removed
    /// (rows and columns in ascending order of the other nodes); `L` itself on a free
    /// graph.
    ///
    /// # Errors
    /// [`GraphError::TooLargeForDense`] above [`DENSE_MAX_NODES`] nodes.
    pub fn grounded_laplacian_dense(&self) -> Result<DMatrix<f64>, GraphError> {
        let l = self.laplacian_dense()?;
        if !self.is_pinned() {
            return Ok(l);
        }
        let keep: Vec<usize> = (0..self.node_count())
            .filter(|&i| !self.is_reference(i))
            .collect();
        Ok(DMatrix::from_fn(keep.len(), keep.len(), |r, c| {
            l[(keep[r], keep[c])]
        }))
    }

    /// Every eigenvalue and the slowest mode, by dense symmetric eigen-decomposition
    /// (`nalgebra::SymmetricEigen`; eigenvalues accurate to about `1e-15·λmax`). Works on
    /// disconnected graphs too (then λ2 ≈ 0). On a pinned graph, of the grounded
    /// Laplacian ([`Self::grounded_laplacian_dense`]).
    ///
    /// # Errors
    /// [`GraphError::TooLargeForDense`] above [`DENSE_MAX_NODES`] nodes;
    /// [`GraphError::NoConvergence`] if the eigensolver hits its iteration cap.
    pub fn dense_spectrum(&self) -> Result<DenseSpectrum, GraphError> {
        let l = self.grounded_laplacian_dense()?;
        let n = l.nrows();
        let pinned = self.is_pinned();
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
        let slow_mode = match order.get(usize::from(!pinned)) {
            Some(&k) if k < eig.eigenvectors.ncols() => {
                let column_values: Vec<f64> = eig.eigenvectors.column(k).iter().copied().collect();
                let mut column = column_values.into_iter();
                // Back to one entry per node, 0 at the references.
                let full = (0..self.node_count())
                    .map(|i| {
                        if self.is_reference(i) {
                            0.0
                        } else {
                            column.next().unwrap_or(0.0)
                        }
                    })
                    .collect();
                normalise(full)
            }
            _ => vec![0.0; self.node_count()],
        };
        Ok(DenseSpectrum {
            eigenvalues,
            slow_mode,
            pinned,
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
        // `+ 0.0` turns a −0 (a grounded reference entry) into +0.
        v.iter_mut().for_each(|x| *x = *x / peak + 0.0);
    }
    v
}
