//! Sparse λ2 and λmax for large graphs (≥ 100,000 nodes).
//!
//! λ2: Lanczos on the Laplacian pseudo-inverse `L†` restricted to the vectors orthogonal
//! to the constant one (the zero mode is deflated). Its largest eigenvalue is `1/λ2` and
//! is well separated (`λ3/λ2 − 1` relative gap), so a few dozen iterations suffice even
//! when `λ2/λmax` is 1e-10. `L†x` is applied exactly, without a shift: ground node 0
//! (drop its row and column, leaving a positive definite matrix for a connected graph),
//! solve with `faer`'s sparse Cholesky factorisation, subtract the mean. The grounded
//! factorisation keeps small eigenvalues accurate where a tiny shift `L + σI` would
//! lose them to cancellation. λmax: Lanczos on `(σI − L)⁻¹` with σ just above the
//! Gershgorin bound `2·max degree` (positive definite; the top of a long chain's
//! spectrum is too crowded for plain Lanczos on `L`). Both keep every Lanczos vector
//! and re-orthogonalise fully (twice), and restart from the Ritz vector when the basis
//! is full.

use faer::linalg::solvers::Solve;
use faer::sparse::linalg::solvers::Llt;
use faer::sparse::{SparseColMat, Triplet};
use faer::{Mat, Side};
use nalgebra::{DMatrix, SymmetricEigen};

use super::dense::normalise;
use super::{Graph, GraphError};

/// Knobs of the sparse eigensolver.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SparseOptions {
    /// Stop when the Ritz residual is below this fraction of the Ritz value (λ2's
    /// relative error is about this value squared over the relative gap). Default 1e-10.
    pub tolerance: f64,
    /// Lanczos vectors kept before a restart (memory: this many vectors of N `f64`).
    /// Default 60.
    pub max_basis: usize,
    /// Restarts allowed before giving up. Default 10.
    pub max_restarts: usize,
    /// Seed of the start vector (any value; results agree to the tolerance). Default 1.
    pub seed: u64,
}

impl Default for SparseOptions {
    fn default() -> Self {
        Self {
            tolerance: 1e-10,
            max_basis: 60,
            max_restarts: 10,
            seed: 1,
        }
    }
}

/// λ2 and λmax with the slowest mode, from the sparse path.
#[derive(Clone, Debug, PartialEq)]
pub struct SparseSpectrum {
    /// λ2, the algebraic connectivity.
    pub lambda2: f64,
    /// Ritz residual of `1/λ2` relative to the Ritz value (an eigenvalue of `L†` lies
    /// within this fraction).
    pub lambda2_relative_residual: f64,
    /// λmax, from shift-invert Lanczos below the Gershgorin bound.
    pub lambda_max: f64,
    /// `lambda_max` plus twice its residual-based error estimate, capped at the Gershgorin
    /// bound `2·max degree`: the conservative figure for step-size limits.
    pub lambda_max_upper: f64,
    /// The eigenvector of λ2, scaled so its largest magnitude is 1 and positive.
    pub slow_mode: Vec<f64>,
    /// Solves with the two Cholesky factors (grounded for λ2, shifted for λmax).
    pub operator_applications: usize,
}

/// `L†` on the vectors orthogonal to 1, through the grounded Laplacian's Cholesky factor.
pub(crate) struct Grounded {
    llt: Llt<usize, f64>,
    nodes: usize,
}

impl Grounded {
    /// Factorise the Laplacian with node 0 grounded.
    pub(crate) fn new(graph: &Graph) -> Result<Self, GraphError> {
        graph.require_connected()?;
        let n = graph.node_count();
        if n < 2 {
            return Err(GraphError::TooSmall { nodes: n, min: 2 });
        }
        let mut triplets = Vec::with_capacity(n + graph.edges().len());
        for (i, &d) in graph.degrees().iter().enumerate().skip(1) {
            triplets.push(Triplet::new(i - 1, i - 1, d));
        }
        for e in graph.edges() {
            if e.a > 0 && e.b > 0 {
                let (hi, lo) = (e.a.max(e.b), e.a.min(e.b));
                triplets.push(Triplet::new(hi - 1, lo - 1, -e.weight));
            }
        }
        let m = SparseColMat::<usize, f64>::try_new_from_triplets(n - 1, n - 1, &triplets)
            .map_err(|_| GraphError::Factorization)?;
        let llt = m
            .sp_cholesky(Side::Lower)
            .map_err(|_| GraphError::Factorization)?;
        Ok(Self { llt, nodes: n })
    }

    /// `y = L†·x` for `x` with zero sum (the mean of `x` is ignored).
    pub(crate) fn apply(&self, x: &[f64], y: &mut [f64]) {
        let n = self.nodes;
        let mean = x.iter().sum::<f64>() / n as f64;
        let mut rhs = Mat::<f64>::from_fn(n - 1, 1, |i, _| x[i + 1] - mean);
        self.llt.solve_in_place(rhs.as_mut());
        let solved = rhs.col_as_slice(0);
        if let Some(first) = y.first_mut() {
            *first = 0.0;
        }
        for (out, v) in y.iter_mut().skip(1).zip(solved) {
            *out = *v;
        }
        subtract_mean(y);
    }
}

/// `(σI − L)⁻¹` through a sparse Cholesky factor, for σ above the Gershgorin bound.
struct Shifted {
    llt: Llt<usize, f64>,
    nodes: usize,
}

impl Shifted {
    fn new(graph: &Graph, shift: f64) -> Result<Self, GraphError> {
        let n = graph.node_count();
        let mut triplets = Vec::with_capacity(n + graph.edges().len());
        for (i, &d) in graph.degrees().iter().enumerate() {
            triplets.push(Triplet::new(i, i, shift - d));
        }
        for e in graph.edges() {
            triplets.push(Triplet::new(e.a.max(e.b), e.a.min(e.b), e.weight));
        }
        let m = SparseColMat::<usize, f64>::try_new_from_triplets(n, n, &triplets)
            .map_err(|_| GraphError::Factorization)?;
        let llt = m
            .sp_cholesky(Side::Lower)
            .map_err(|_| GraphError::Factorization)?;
        Ok(Self { llt, nodes: n })
    }

    fn apply(&self, x: &[f64], y: &mut [f64]) {
        let mut rhs = Mat::<f64>::from_fn(self.nodes, 1, |i, _| x[i]);
        self.llt.solve_in_place(rhs.as_mut());
        for (out, v) in y.iter_mut().zip(rhs.col_as_slice(0)) {
            *out = *v;
        }
    }
}

fn subtract_mean(v: &mut [f64]) {
    let mean = v.iter().sum::<f64>() / v.len().max(1) as f64;
    v.iter_mut().for_each(|x| *x -= mean);
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn axpy(alpha: f64, x: &[f64], y: &mut [f64]) {
    y.iter_mut().zip(x).for_each(|(yi, xi)| *yi += alpha * xi);
}

/// Largest eigenpair of the tridiagonal matrix with `alphas` and `betas`.
fn ritz(alphas: &[f64], betas: &[f64]) -> (f64, Vec<f64>) {
    let m = alphas.len();
    let t = DMatrix::<f64>::from_fn(m, m, |i, j| {
        if i == j {
            alphas[i]
        } else if i + 1 == j || j + 1 == i {
            betas[i.min(j)]
        } else {
            0.0
        }
    });
    let Some(eig) = SymmetricEigen::try_new(t, f64::EPSILON, 100_000) else {
        return (f64::NAN, vec![0.0; m]);
    };
    let mut best = 0;
    let mut theta = f64::NEG_INFINITY;
    for (k, &v) in eig.eigenvalues.iter().enumerate() {
        if v > theta {
            theta = v;
            best = k;
        }
    }
    let s = if best < eig.eigenvectors.ncols() {
        eig.eigenvectors.column(best).iter().copied().collect()
    } else {
        vec![0.0; m]
    };
    (theta, s)
}

struct Ritz {
    value: f64,
    relative_residual: f64,
    vector: Vec<f64>,
    applications: usize,
}

/// Restarted Lanczos for the largest eigenpair of the symmetric operator `apply`,
/// optionally deflating the constant vector.
fn lanczos_largest(
    n: usize,
    mut apply: impl FnMut(&[f64], &mut [f64]),
    options: &SparseOptions,
    deflate: bool,
) -> Ritz {
    let mut state = options.seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
    let mut q: Vec<f64> = (0..n)
        .map(|_| {
            // xorshift64*: a deterministic start vector with no structure.
            state ^= state >> 12;
            state ^= state << 25;
            state ^= state >> 27;
            (state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        })
        .collect();
    let mut applications = 0;
    let mut best = Ritz {
        value: 0.0,
        relative_residual: f64::INFINITY,
        vector: vec![0.0; n],
        applications: 0,
    };
    let basis_cap = options.max_basis.clamp(2, n.max(2));
    for _ in 0..=options.max_restarts {
        if deflate {
            subtract_mean(&mut q);
        }
        let norm = dot(&q, &q).sqrt();
        if norm == 0.0 || !norm.is_finite() {
            break;
        }
        q.iter_mut().for_each(|x| *x /= norm);
        let mut basis: Vec<Vec<f64>> = vec![q.clone()];
        let mut alphas = Vec::new();
        let mut betas: Vec<f64> = Vec::new();
        let mut w = vec![0.0; n];
        let mut done = false;
        let mut s = Vec::new();
        let mut theta = 0.0;
        for j in 0..basis_cap {
            let Some(vj) = basis.get(j) else { break };
            apply(vj, &mut w);
            applications += 1;
            let alpha = dot(vj, &w);
            axpy(-alpha, vj, &mut w);
            if let (Some(prev), Some(&b)) =
                (j.checked_sub(1).and_then(|p| basis.get(p)), betas.last())
            {
                axpy(-b, prev, &mut w);
            }
            for _ in 0..2 {
                for v in &basis {
                    let c = dot(v, &w);
                    axpy(-c, v, &mut w);
                }
                if deflate {
                    subtract_mean(&mut w);
                }
            }
            alphas.push(alpha);
            let beta = dot(&w, &w).sqrt();
            (theta, s) = ritz(&alphas, &betas);
            let residual = beta * s.last().expect("a Ritz vector has m ≥ 1 entries").abs();
            let relative = if theta != 0.0 {
                residual / theta.abs()
            } else {
                f64::INFINITY
            };
            if relative < best.relative_residual || j + 1 == basis_cap {
                best.relative_residual = relative;
            }
            if relative <= options.tolerance
                || beta <= 1e-300
                || j + 1 == n.saturating_sub(usize::from(deflate))
            {
                best.relative_residual = relative;
                done = true;
                break;
            }
            betas.push(beta);
            let next: Vec<f64> = w.iter().map(|x| x / beta).collect();
            basis.push(next);
        }
        // Ritz vector: Σ s_k v_k.
        let mut vector = vec![0.0; n];
        for (sk, v) in s.iter().zip(&basis) {
            axpy(*sk, v, &mut vector);
        }
        best.value = theta;
        best.vector = vector.clone();
        if done {
            break;
        }
        q = vector;
    }
    best.applications = applications;
    best
}

/// Accept a Ritz pair whose residual is within √tolerance (NaN never passes).
fn converged(r: &Ritz, tolerance: f64) -> bool {
    r.value.is_finite() && r.value > 0.0 && r.relative_residual <= tolerance.sqrt()
}

impl Graph {
    /// λ2, λmax and the slowest mode by the sparse path with default options.
    ///
    /// # Errors
    /// See [`Self::sparse_spectrum_with`].
    pub fn sparse_spectrum(&self) -> Result<SparseSpectrum, GraphError> {
        self.sparse_spectrum_with(&SparseOptions::default())
    }

    /// λ2, λmax and the slowest mode by the sparse path.
    ///
    /// # Errors
    /// [`GraphError::Disconnected`]; [`GraphError::TooSmall`] below 3 nodes;
    /// [`GraphError::Factorization`]; [`GraphError::NoConvergence`] if λ2 does not reach
    /// `options.tolerance` within the restarts; [`GraphError::NotFinite`] for a NaN
    /// tolerance.
    pub fn sparse_spectrum_with(
        &self,
        options: &SparseOptions,
    ) -> Result<SparseSpectrum, GraphError> {
        if !options.tolerance.is_finite() || options.tolerance <= 0.0 {
            return Err(GraphError::NotFinite { name: "tolerance" });
        }
        let n = self.node_count();
        if n < 3 {
            return Err(GraphError::TooSmall { nodes: n, min: 3 });
        }
        let grounded = Grounded::new(self)?;
        let inverse = lanczos_largest(n, |x, y| grounded.apply(x, y), options, true);
        if !converged(&inverse, options.tolerance) {
            return Err(GraphError::NoConvergence {
                relative_residual: inverse.relative_residual,
            });
        }
        let gershgorin = 2.0 * self.max_degree();
        // The closer σ is to λmax the faster the top of a crowded spectrum separates; a
        // relative 1e-10 keeps σI − L safely positive definite in double precision
        // (λ = σ − 1/μ loses nothing to the conditioning). Wider shifts are fallbacks.
        let mut factor = None;
        for relative in [1e-10, 1e-6, 1e-3] {
            let shift = gershgorin * (1.0 + relative);
            if let Ok(f) = Shifted::new(self, shift) {
                factor = Some((shift, f));
                break;
            }
        }
        let (shift, shifted) = factor.ok_or(GraphError::Factorization)?;
        let top = lanczos_largest(n, |x, y| shifted.apply(x, y), options, false);
        if !converged(&top, options.tolerance) {
            return Err(GraphError::NoConvergence {
                relative_residual: top.relative_residual,
            });
        }
        // Eigenvalue μ of (σI − L)⁻¹ ↔ λ = σ − 1/μ; μ is known to the relative residual.
        let gap = 1.0 / top.value;
        let lambda_max = (shift - gap).min(gershgorin);
        Ok(SparseSpectrum {
            lambda2: 1.0 / inverse.value,
            lambda2_relative_residual: inverse.relative_residual,
            lambda_max,
            lambda_max_upper: (lambda_max + 2.0 * top.relative_residual * gap).min(gershgorin),
            slow_mode: normalise(inverse.vector),
            operator_applications: inverse.applications + top.applications,
        })
    }
}
