//! Sparse extremal eigenvalues for large graphs: the few smallest non-zero eigenvalues
//! with the slowest mode, and λmax, each with a bound on its error.
//!
//! **Smallest eigenvalues** (λ2, λ3, …): Lanczos on the Laplacian pseudo-inverse `L†`
//! restricted to the vectors orthogonal to the constant one (and to the eigenvectors
//! already found). Its largest eigenvalue is `1/λ2`, well separated on every graph we
//! meet (`1 − λ2/λ3`), so a few dozen solves suffice even when `λ2/λmax` is 1e-12.
//! `L†x` is applied without a shift: ground node 0 (drop its row and column, leaving a
//! positive definite matrix for a connected graph) and solve with `faer`'s sparse
//! Cholesky factorisation. Each eigenvalue is then certified on `L` itself: one more
//! solve with a step of iterative refinement (residual formed from edge differences)
//! gives the vector `z`; the eigenvalue reported is its Rayleigh quotient
//! `ρ = Σ_edges w·(z_a − z_b)² / ‖z‖²`, evaluated from edge differences so that it keeps
//! its relative accuracy when λ2 is 1e-12 (a form `zᵀ(Dz − Az)` would cancel). Its error
//! bound is `min(‖r‖, ‖r‖²/gap)` with `r = Lz − ρz` (Kato–Temple), `gap` the distance
//! from `ρ` to the next eigenvalue as the Lanczos run estimates it.
//!
//! **λmax**: a bracket `[lo, hi]` that always holds λmax. `lo` is a Rayleigh quotient
//! (every Rayleigh quotient is ≤ λmax) or a shift where `σI − L` failed to factorise
//! (then λmax > σ); `hi` is a shift where the Cholesky factorisation of `σI − L`
//! succeeded (then λmax < σ), starting from the Gershgorin bound `2·max degree`. Each
//! round runs shift-invert Lanczos on `(σI − L)⁻¹` at `σ = hi` (the closer σ lies to λmax,
//! the better the top of a crowded spectrum separates), raises `lo` to the Rayleigh
//! quotient of the Ritz vector, and moves `hi` down to just above it, by the
//! Kato–Temple estimate, if the factorisation there succeeds. It stops when
//! `hi − lo ≤ tolerance · lo`: that width is a bound on the error, not an estimate.
//!
//! **Reference nodes** ([`Graph::with_references`]): the spectrum is the grounded
//! Laplacian's `L_g` (reference rows and columns removed). The factorised matrix carries
//! each reference as an identity row and column, decoupled from the rest, and every
//! vector has its reference entries set to 0 (in place of removing the mean): `L_g⁻¹` then
//! replaces `L†` above, its largest eigenvalue `1/λ1(L_g)`, and `σI − L_g` the shifted
//! operator; the Rayleigh quotients from edge differences stay exact with `z = 0` at the
//! references.
//!
//! Both solvers keep every Lanczos vector and re-orthogonalise fully (twice), restart from
//! the Ritz vector when the basis is full, and return
//! [`GraphError::EigenvalueNotConverged`] rather than a number when the bound does not
//! reach the tolerance.
//!
//! **Time and memory**: one symbolic analysis (fill-reducing ordering) serves every
//! factorisation. On graphs of 20,000 nodes or more, and where the machine has a second
//! hardware thread, λmax runs on a second thread while the calling thread finds the
//! smallest eigenvalues; the work is the same as in turn, so every figure is identical.
//! At most two factors are held at once (the grounded one and one shifted one): the λmax
//! search drops its factor before trying a closer shift and rebuilds it only if no closer
//! shift factorises.

use faer::linalg::solvers::Solve;
use faer::sparse::linalg::solvers::{Llt, SymbolicLlt};
use faer::sparse::{SparseColMat, Triplet};
use faer::{Mat, Side};
use nalgebra::{DMatrix, SymmetricEigen};

use super::dense::normalise;
use super::{Graph, GraphError};

/// Knobs of the sparse eigensolver.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SparseOptions {
    /// Relative error bound every reported eigenvalue must reach (see the module
    /// documentation for how each bound is formed). Default 1e-10.
    pub tolerance: f64,
    /// Lanczos vectors kept before a restart (memory: this many vectors of N `f64`).
    /// Default 40.
    pub max_basis: usize,
    /// Restarts allowed per eigenvalue (smallest eigenvalues), and shift rounds (λmax),
    /// before giving up with [`GraphError::EigenvalueNotConverged`]. Default 16.
    pub max_restarts: usize,
    /// Seed of the start vectors (any value; results agree to the tolerance). Default 1.
    pub seed: u64,
    /// How many of the smallest non-zero eigenvalues to find (λ2 first). Default 1.
    pub smallest: usize,
}

impl Default for SparseOptions {
    fn default() -> Self {
        Self {
            tolerance: 1e-10,
            max_basis: 40,
            max_restarts: 16,
            seed: 1,
            smallest: 1,
        }
    }
}

/// The few smallest non-zero eigenvalues, λmax and the slowest mode, from the sparse path.
#[derive(Clone, Debug, PartialEq)]
pub struct SparseSpectrum {
    /// λ2, the algebraic connectivity (= `smallest[0]`); on a pinned graph the grounded
    /// Laplacian's smallest eigenvalue.
    pub lambda2: f64,
    /// Bound on `|λ2 − lambda2|` (absolute).
    pub lambda2_error_bound: f64,
    /// The smallest non-zero eigenvalues, ascending (`options.smallest` of them, fewer
    /// only when the graph has fewer), each a Rayleigh quotient.
    pub smallest: Vec<f64>,
    /// Bound on the error of each entry of `smallest` (absolute).
    pub smallest_error_bounds: Vec<f64>,
    /// λmax, the middle of the bracket `[lambda_max_lower, lambda_max_upper]`.
    pub lambda_max: f64,
    /// A proven lower bound on λmax (a Rayleigh quotient, or a shift where `σI − L` is
    /// not positive definite).
    pub lambda_max_lower: f64,
    /// A proven upper bound on λmax (a shift where `σI − L` has a Cholesky factor), at
    /// most `tolerance · lambda_max_lower` above the lower bound: the conservative figure
    /// for step-size limits.
    pub lambda_max_upper: f64,
    /// The eigenvector of λ2, scaled so its largest magnitude is 1 and positive (0 at
    /// reference nodes).
    pub slow_mode: Vec<f64>,
    /// Solves with a Cholesky factor (grounded for the smallest, shifted for λmax).
    pub operator_applications: usize,
    /// Numeric Cholesky factorisations (one grounded, one or more shifted).
    pub factorizations: usize,
}

/// What the sparse solver is doing, for a progress display
/// ([`Graph::sparse_spectrum_observed`]).
#[non_exhaustive]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SparseStage {
    /// Factorising the grounded Laplacian.
    Factorising,
    /// Finding the `index`-th smallest non-zero eigenvalue (0 = λ2) of `of`.
    Smallest {
        /// Which (0 = λ2).
        index: usize,
        /// How many are asked.
        of: usize,
    },
    /// Narrowing the bracket around λmax, round `round`.
    Largest {
        /// Shift round (0 first).
        round: usize,
    },
}

/// The lower triangle of `L`'s pattern with one symbolic Cholesky analysis, shared by the
/// grounded factorisation and every shifted one (`σI − L`).
pub(crate) struct Pattern {
    symbolic: SymbolicLlt<usize>,
    /// Lower triangle of `L` (diagonal included).
    matrix: SparseColMat<usize, f64>,
    /// Position of each node's diagonal entry among the values.
    diagonal: Vec<usize>,
    /// Whether the graph has reference nodes (then `matrix` is already grounded).
    pinned: bool,
    /// `true` at each reference node (empty on a free graph).
    reference: Vec<bool>,
}

enum ShiftOutcome {
    /// `σI − L` is positive definite: λmax < σ.
    Factor(Llt<usize, f64>),
    /// A non-positive pivot: λmax > σ (up to rounding).
    Indefinite,
}

impl Pattern {
    pub(crate) fn new(graph: &Graph) -> Result<Self, GraphError> {
        let n = graph.node_count();
        let mut triplets = Vec::with_capacity(n + graph.edges().len());
        // Reference nodes are grounded here: an identity row and column (the edges keep
        // their place in the pattern with value 0), which leaves the other nodes' block
        // equal to the grounded Laplacian and decoupled from the references.
        for (i, &d) in graph.degrees().iter().enumerate() {
            let d = if graph.is_reference(i) { 1.0 } else { d };
            triplets.push(Triplet::new(i, i, d));
        }
        for e in graph.edges() {
            let w = if graph.is_reference(e.a) || graph.is_reference(e.b) {
                0.0
            } else {
                -e.weight
            };
            triplets.push(Triplet::new(e.a.max(e.b), e.a.min(e.b), w));
        }
        let matrix = SparseColMat::<usize, f64>::try_new_from_triplets(n, n, &triplets)
            .map_err(|_| GraphError::Factorization)?;
        let symbolic = SymbolicLlt::try_new(matrix.symbolic(), Side::Lower)
            .map_err(|_| GraphError::Factorization)?;
        let (col_ptr, row_idx) = (matrix.col_ptr(), matrix.row_idx());
        let diagonal = (0..n)
            .map(|j| {
                (col_ptr[j]..col_ptr[j + 1])
                    .find(|&k| row_idx[k] == j)
                    .expect("every node has a diagonal entry")
            })
            .collect();
        Ok(Self {
            symbolic,
            matrix,
            diagonal,
            pinned: graph.is_pinned(),
            reference: (0..n).map(|i| graph.is_reference(i)).collect(),
        })
    }

    fn factor(&self, m: &SparseColMat<usize, f64>) -> Result<ShiftOutcome, GraphError> {
        match Llt::try_new_with_symbolic(self.symbolic.clone(), m.as_ref(), Side::Lower) {
            Ok(llt) => Ok(ShiftOutcome::Factor(llt)),
            Err(faer::sparse::linalg::LltError::Numeric(_)) => Ok(ShiftOutcome::Indefinite),
            Err(faer::sparse::linalg::LltError::Generic(_)) => Err(GraphError::Factorization),
        }
    }

    /// Factorise `σI − L` (on a pinned graph `σI − L_g` with the references' identity
    /// rows kept, so that they cannot spoil the factorisation whatever `σ`).
    fn shifted(&self, shift: f64) -> Result<ShiftOutcome, GraphError> {
        let mut m = self.matrix.clone();
        let values = m.val_mut();
        values.iter_mut().for_each(|v| *v = -*v);
        for (i, &k) in self.diagonal.iter().enumerate() {
            values[k] = if self.reference.get(i).copied().unwrap_or(false) {
                1.0
            } else {
                values[k] + shift
            };
        }
        self.factor(&m)
    }

    /// Factorise `L` with node 0 grounded: its row and column replaced by the identity's,
    /// so a right-hand side with a zero first entry solves the grounded Laplacian. On a
    /// pinned graph the matrix is already grounded at the references.
    fn grounded(&self) -> Result<Llt<usize, f64>, GraphError> {
        let mut m = self.matrix.clone();
        if self.pinned {
            return match self.factor(&m)? {
                ShiftOutcome::Factor(llt) => Ok(llt),
                ShiftOutcome::Indefinite => Err(GraphError::Factorization),
            };
        }
        let end = m.col_ptr()[1];
        let first = self.diagonal[0];
        let values = m.val_mut();
        for (k, v) in values.iter_mut().enumerate().take(end) {
            *v = if k == first { 1.0 } else { 0.0 };
        }
        match self.factor(&m)? {
            ShiftOutcome::Factor(llt) => Ok(llt),
            ShiftOutcome::Indefinite => Err(GraphError::Factorization),
        }
    }
}

/// `L†` on the vectors orthogonal to 1, through the grounded Laplacian's Cholesky factor.
pub(crate) struct Grounded<'g> {
    llt: Llt<usize, f64>,
    graph: &'g Graph,
}

impl<'g> Grounded<'g> {
    /// Factorise the Laplacian with node 0 grounded.
    pub(crate) fn new(graph: &'g Graph) -> Result<Self, GraphError> {
        graph.require_connected()?;
        Self::with_pattern(graph, &Pattern::new(graph)?)
    }

    fn with_pattern(graph: &'g Graph, pattern: &Pattern) -> Result<Self, GraphError> {
        graph.require_connected()?;
        let n = graph.node_count();
        if n < 2 && !graph.is_pinned() {
            return Err(GraphError::TooSmall { nodes: n, min: 2 });
        }
        Ok(Self {
            llt: pattern.grounded()?,
            graph,
        })
    }

    /// `y = L_g⁻¹·x[1..]` with `y[0] = 0` (one solve, no refinement); on a pinned graph
    /// the grounded Laplacian's inverse with 0 at the references.
    fn solve(&self, x: &[f64], y: &mut [f64]) {
        let pinned = self.graph.is_pinned();
        let ground = |i: usize| {
            if pinned {
                self.graph.is_reference(i)
            } else {
                i == 0
            }
        };
        let mut rhs = Mat::<f64>::from_fn(x.len(), 1, |i, _| if ground(i) { 0.0 } else { x[i] });
        self.llt.solve_in_place(rhs.as_mut());
        for (i, (out, v)) in y.iter_mut().zip(rhs.col_as_slice(0)).enumerate() {
            *out = if ground(i) { 0.0 } else { *v };
        }
    }

    /// `y = L†·x` for `x` with zero sum (the mean of `x` is ignored): one solve. On a
    /// pinned graph `y = L_g⁻¹·x` (reference entries ignored, and 0 in `y`).
    pub(crate) fn apply(&self, x: &[f64], y: &mut [f64]) {
        let mut centred = x.to_vec();
        self.graph.remove_null(&mut centred);
        self.solve(&centred, y);
        self.graph.remove_null(y);
    }

    /// `L†·x` with one step of iterative refinement, the residual formed from edge
    /// differences (`Graph::laplacian_times`), so that a smooth solution keeps its
    /// accuracy where the factor's rounding would leave noise of relative size ε.
    fn apply_refined(&self, x: &[f64], y: &mut [f64]) {
        let n = self.graph.node_count();
        let mut b = x.to_vec();
        self.graph.remove_null(&mut b);
        self.solve(&b, y);
        let mut ly = vec![0.0; n];
        self.graph
            .laplacian_times(y, &mut ly)
            .expect("vectors of node_count entries");
        let residual: Vec<f64> = b.iter().zip(&ly).map(|(bi, li)| bi - li).collect();
        let mut correction = vec![0.0; n];
        self.solve(&residual, &mut correction);
        axpy(1.0, &correction, y);
        self.graph.remove_null(y);
    }
}

fn shifted_solve(llt: &Llt<usize, f64>, x: &[f64], y: &mut [f64]) {
    let mut rhs = Mat::<f64>::from_fn(x.len(), 1, |i, _| x[i]);
    llt.solve_in_place(rhs.as_mut());
    for (out, v) in y.iter_mut().zip(rhs.col_as_slice(0)) {
        *out = *v;
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    // Four running sums, so that the loop vectorises (a single sum must keep its order).
    let mut acc = [0.0_f64; 4];
    let (ca, cb) = (a.chunks_exact(4), b.chunks_exact(4));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for k in 0..4 {
            acc[k] += x[k] * y[k];
        }
    }
    let tail: f64 = ra.iter().zip(rb).map(|(x, y)| x * y).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

fn axpy(alpha: f64, x: &[f64], y: &mut [f64]) {
    y.iter_mut().zip(x).for_each(|(yi, xi)| *yi += alpha * xi);
}

fn normalised(mut v: Vec<f64>) -> Option<Vec<f64>> {
    let norm = dot(&v, &v).sqrt();
    if norm == 0.0 || !norm.is_finite() {
        return None;
    }
    v.iter_mut().for_each(|x| *x /= norm);
    Some(v)
}

/// A deterministic start vector with no structure (xorshift64*).
fn start_vector(n: usize, seed: u64) -> Vec<f64> {
    let mut state = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
    (0..n)
        .map(|_| {
            state ^= state >> 12;
            state ^= state << 25;
            state ^= state >> 27;
            (state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        })
        .collect()
}

/// `Σ_edges w·(z_a − z_b)²`: the Laplacian's quadratic form from edge differences (keeps
/// its relative accuracy for smooth `z`, where `zᵀDz − zᵀAz` would cancel).
fn quadratic_form(graph: &Graph, z: &[f64]) -> f64 {
    graph
        .edges()
        .iter()
        .map(|e| {
            let d = z[e.a] - z[e.b];
            e.weight * d * d
        })
        .sum()
}

/// Rayleigh quotient of a unit vector and the norm of its residual `Lz − ρz`.
fn rayleigh(graph: &Graph, z: &[f64]) -> (f64, f64) {
    let rho = quadratic_form(graph, z);
    let mut lz = vec![0.0; z.len()];
    graph
        .laplacian_times(z, &mut lz)
        .expect("vectors of node_count entries");
    axpy(-rho, z, &mut lz);
    (rho, dot(&lz, &lz).sqrt())
}

/// The top two Ritz pairs of one Lanczos run: values, residual norms `β·|s_m|`.
#[derive(Clone, Copy, Debug)]
struct Ritzes {
    theta: f64,
    residual: f64,
    second: Option<(f64, f64)>,
}

impl Ritzes {
    /// Error estimate of `theta` in the operator's own space: `min(r, r²/gap)` with the
    /// gap to the second Ritz value widened by its residual.
    fn estimate(&self) -> f64 {
        match self.second {
            Some((t2, r2)) if self.theta - t2 - r2 > 0.0 => self
                .residual
                .min(self.residual * self.residual / (self.theta - t2 - r2)),
            _ => self.residual,
        }
    }
}

struct Run {
    ritzes: Ritzes,
    vector: Vec<f64>,
    applications: usize,
}

/// The top eigenvalue of the Lanczos tridiagonal, its eigenvector's last component, the
/// second eigenvalue with its last component, and the top eigenvector.
type TridiagonalTop = (f64, f64, Option<(f64, f64)>, Vec<f64>);

/// Eigen-decomposition of the Lanczos tridiagonal: the top two pairs' values and
/// last components, and the top eigenvector.
fn tridiagonal_top(alphas: &[f64], betas: &[f64]) -> Option<TridiagonalTop> {
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
    let eig = SymmetricEigen::try_new(t, f64::EPSILON, 100_000)?;
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| eig.eigenvalues[b].total_cmp(&eig.eigenvalues[a]));
    let top = order[0];
    let s: Vec<f64> = eig.eigenvectors.column(top).iter().copied().collect();
    let second = order
        .get(1)
        .map(|&k| (eig.eigenvalues[k], eig.eigenvectors[(m - 1, k)]));
    Some((eig.eigenvalues[top], s[m - 1], second, s))
}

/// One Lanczos run of at most `steps` steps for the largest eigenpair of the symmetric
/// operator `apply` on the subspace kept by `project`, with full re-orthogonalisation.
/// `stop` sees the Ritz estimates after every step. `None` if the start vector vanishes
/// under the projection or the tridiagonal solver fails.
fn lanczos(
    start: Vec<f64>,
    steps: usize,
    apply: &mut dyn FnMut(&[f64], &mut [f64]),
    project: &dyn Fn(&mut [f64]),
    stop: &mut dyn FnMut(&Ritzes) -> bool,
) -> Option<Run> {
    let n = start.len();
    let mut q = start;
    project(&mut q);
    let q = normalised(q)?;
    let mut basis: Vec<Vec<f64>> = vec![q];
    let mut alphas: Vec<f64> = Vec::new();
    let mut betas: Vec<f64> = Vec::new();
    let mut w = vec![0.0; n];
    let mut applications = 0;
    let steps = steps.max(1);
    loop {
        let j = alphas.len();
        let vj = &basis[j];
        apply(vj, &mut w);
        applications += 1;
        let alpha = dot(vj, &w);
        axpy(-alpha, vj, &mut w);
        if let (Some(prev), Some(&b)) = (j.checked_sub(1).map(|p| &basis[p]), betas.last()) {
            axpy(-b, prev, &mut w);
        }
        // Full re-orthogonalisation, repeated once when it removed much of `w` ("twice is
        // enough", Kahan's criterion as given by Parlett, *The Symmetric Eigenvalue
        // Problem*, §6.9; from memory of the section).
        for _ in 0..2 {
            let before = dot(&w, &w);
            project(&mut w);
            for v in &basis {
                let c = dot(v, &w);
                axpy(-c, v, &mut w);
            }
            if dot(&w, &w) > 0.5 * before {
                break;
            }
        }
        alphas.push(alpha);
        let beta = dot(&w, &w).sqrt();
        let (theta, last, second, s) = tridiagonal_top(&alphas, &betas)?;
        let ritzes = Ritzes {
            theta,
            residual: beta * last.abs(),
            second: second.map(|(t, l)| (t, beta * l.abs())),
        };
        let exhausted = beta <= 1e-14 * theta.abs() || !beta.is_finite();
        if exhausted || alphas.len() >= steps || alphas.len() >= n || stop(&ritzes) {
            let mut vector = vec![0.0; n];
            for (sk, v) in s.iter().zip(&basis) {
                axpy(*sk, v, &mut vector);
            }
            project(&mut vector);
            let vector = normalised(vector)?;
            return Some(Run {
                ritzes,
                vector,
                applications,
            });
        }
        betas.push(beta);
        basis.push(w.iter().map(|x| x / beta).collect());
    }
}

/// One certified smallest eigenpair on the complement of `locked` (and of 1).
struct Smallest {
    value: f64,
    bound: f64,
    vector: Vec<f64>,
    applications: usize,
}

fn smallest_one(
    graph: &Graph,
    grounded: &Grounded<'_>,
    locked: &[Vec<f64>],
    options: &SparseOptions,
    index: usize,
) -> Result<Smallest, GraphError> {
    let n = graph.node_count();
    let project = |v: &mut [f64]| {
        graph.remove_null(v);
        for u in locked {
            let c = dot(u, v);
            axpy(-c, u, v);
        }
    };
    let mut start = start_vector(n, options.seed.wrapping_add(index as u64));
    let mut applications = 0;
    let mut reached = f64::INFINITY;
    let steps = options.max_basis.clamp(2, n);
    let tolerance = options.tolerance;
    for _ in 0..=options.max_restarts {
        let mut apply = |x: &[f64], y: &mut [f64]| grounded.apply(x, y);
        let mut stop = |r: &Ritzes| r.theta > 0.0 && r.estimate() <= 0.25 * tolerance * r.theta;
        let Some(run) = lanczos(start, steps, &mut apply, &project, &mut stop) else {
            break;
        };
        applications += run.applications;
        // Certify on L: one refined solve, the Rayleigh quotient from edge differences,
        // its residual, and the gap to the next eigenvalue as this run estimates it.
        let mut z = vec![0.0; n];
        grounded.apply_refined(&run.vector, &mut z);
        applications += 2;
        project(&mut z);
        let Some(z) = normalised(z) else { break };
        let (rho, residual) = rayleigh(graph, &z);
        let next = run
            .ritzes
            .second
            .filter(|&(t2, r2)| t2 + r2 > 0.0)
            .map_or(f64::INFINITY, |(t2, r2)| 1.0 / (t2 + r2));
        let bound = if next > rho {
            residual.min(residual * residual / (next - rho))
        } else {
            residual
        };
        if rho.is_finite() && rho > 0.0 && bound <= tolerance * rho {
            return Ok(Smallest {
                value: rho,
                bound,
                vector: z,
                applications,
            });
        }
        if rho > 0.0 {
            reached = reached.min(bound / rho);
        }
        start = z;
    }
    Err(GraphError::EigenvalueNotConverged {
        which: if index == 0 {
            "λ2"
        } else {
            "a small eigenvalue"
        },
        relative_bound: reached,
        tolerance,
    })
}

/// Lanczos steps per shift round for λmax.
const LARGEST_BASIS: usize = 20;

/// λmax bracket `(lo, hi)`, solves and factorisations.
fn largest(
    graph: &Graph,
    shifted: &Pattern,
    options: &SparseOptions,
    observe: &mut dyn FnMut(SparseStage),
) -> Result<(f64, f64, usize, usize), GraphError> {
    let n = graph.node_count();
    let tolerance = options.tolerance;
    let gershgorin = 2.0 * graph.max_degree();
    let mut factorizations = 0;
    let mut applications = 0;
    // Gershgorin bounds λmax (reached by bipartite regular graphs), so any σ above it
    // factorises; a hair above keeps the first bracket tight on chains and square grids.
    let mut current = None;
    for relative in [1e-13, 1e-10, 1e-6] {
        let shift = gershgorin * (1.0 + relative);
        factorizations += 1;
        if let ShiftOutcome::Factor(f) = shifted.shifted(shift)? {
            current = Some((shift, f));
            break;
        }
    }
    let (mut hi, first) = current.ok_or(GraphError::Factorization)?;
    // The factor at `hi`; dropped before each trial shift so that two factors of a big
    // graph are never held at once, and rebuilt at `hi` only if no trial factorised.
    let mut factor = Some(first);
    let mut lo = 0.0_f64;
    let mut start = start_vector(n, options.seed.wrapping_add(0x5EED));
    // A shorter basis per round: the shift moves toward λmax between rounds, which
    // separates the top of the spectrum better than more steps at one shift.
    let steps = options.max_basis.min(LARGEST_BASIS).clamp(2, n);
    // On a pinned graph the references' identity rows put eigenvalue 1 into the shifted
    // inverse: project them out. A free graph needs no projection.
    let project = |v: &mut [f64]| {
        if graph.is_pinned() {
            graph.remove_null(v);
        }
    };
    for round in 0..=options.max_restarts {
        if hi - lo <= tolerance * lo {
            return Ok((lo, hi, applications, factorizations));
        }
        observe(SparseStage::Largest { round });
        let sigma = hi;
        let at_hi = match factor.take() {
            Some(f) => f,
            None => {
                factorizations += 1;
                match shifted.shifted(hi)? {
                    ShiftOutcome::Factor(f) => f,
                    // `hi` factorised before: the same matrix cannot fail now.
                    ShiftOutcome::Indefinite => return Err(GraphError::Factorization),
                }
            }
        };
        let mut apply = |x: &[f64], y: &mut [f64]| shifted_solve(&at_hi, x, y);
        // The Ritz vector's Rayleigh quotient on L is short of λmax by about
        // (r/θ)²·λmax (its weight off the top mode), so run until r/θ ≤ ½√tolerance, or
        // until the top Ritz pair has converged in the shifted operator's own terms.
        let mut stop = |r: &Ritzes| {
            r.theta > 0.0
                && (r.residual <= 0.5 * tolerance.sqrt() * r.theta
                    || r.estimate() <= 1e-12 * r.theta)
        };
        let outcome = lanczos(start, steps, &mut apply, &project, &mut stop);
        drop(at_hi);
        let Some(run) = outcome else {
            break;
        };
        applications += run.applications;
        let (rho, _) = rayleigh(graph, &run.vector);
        lo = lo.max(rho);
        if hi - lo <= tolerance * lo {
            return Ok((lo, hi, applications, factorizations));
        }
        // Where λmax probably lies: σ − 1/θ (below λmax, as θ is below the top of the
        // shifted operator), short of it by about the Ritz error estimate, or by the
        // spacing to the next Ritz value where the top of the spectrum is crowded.
        let theta = run.ritzes.theta;
        let guess = (sigma - 1.0 / theta).max(lo);
        let spacing = run
            .ritzes
            .second
            .filter(|&(t2, _)| t2 > 0.0)
            .map_or(f64::INFINITY, |(t2, _)| 1.0 / t2 - 1.0 / theta);
        let error = (run.ritzes.estimate() / (theta * theta)).min(spacing);
        let mut margin = 2.0 * error;
        for _ in 0..4 {
            let step = margin.max(0.25 * tolerance * guess);
            let trial = guess + step;
            if trial >= hi || !trial.is_finite() {
                break;
            }
            factorizations += 1;
            match shifted.shifted(trial)? {
                ShiftOutcome::Factor(f) => {
                    hi = trial;
                    factor = Some(f);
                    break;
                }
                ShiftOutcome::Indefinite => {
                    lo = lo.max(trial);
                    margin *= 8.0;
                    if hi - lo <= tolerance * lo {
                        return Ok((lo, hi, applications, factorizations));
                    }
                }
            }
        }
        start = run.vector;
    }
    if hi - lo <= tolerance * lo {
        return Ok((lo, hi, applications, factorizations));
    }
    Err(GraphError::EigenvalueNotConverged {
        which: "λmax",
        relative_bound: if lo > 0.0 {
            (hi - lo) / lo
        } else {
            f64::INFINITY
        },
        tolerance,
    })
}

/// Graphs from this many nodes find λmax on a second thread (when the machine has one)
/// while the calling thread finds the smallest eigenvalues. Below it a thread costs more
/// than it saves.
const CONCURRENT_MIN_NODES: usize = 20_000;

/// The smallest eigenvalues in ascending order, their error bounds, the slowest mode and
/// the operator applications, through the grounded factorisation (dropped on return).
type SmallestFound = (Vec<f64>, Vec<f64>, Vec<f64>, usize);

fn smallest_all(
    graph: &Graph,
    pattern: &Pattern,
    options: &SparseOptions,
    dimension: usize,
    observe: &mut dyn FnMut(SparseStage),
) -> Result<SmallestFound, GraphError> {
    let grounded = Grounded::with_pattern(graph, pattern)?;
    let wanted = options.smallest.clamp(1, dimension);
    let mut locked: Vec<Vec<f64>> = Vec::with_capacity(wanted);
    let mut smallest = Vec::with_capacity(wanted);
    let mut bounds = Vec::with_capacity(wanted);
    let mut applications = 0;
    for index in 0..wanted {
        observe(SparseStage::Smallest { index, of: wanted });
        let found = smallest_one(graph, &grounded, &locked, options, index)?;
        applications += found.applications;
        smallest.push(found.value);
        bounds.push(found.bound);
        locked.push(found.vector);
    }
    // Found one at a time from the top of L†, so ascending up to the bounds; sort
    // the values with their vectors so that rounding cannot misorder them.
    let mut order: Vec<usize> = (0..wanted).collect();
    order.sort_by(|&a, &b| smallest[a].total_cmp(&smallest[b]));
    let slow_mode = normalise(locked.swap_remove(order[0]));
    let smallest_sorted: Vec<f64> = order.iter().map(|&k| smallest[k]).collect();
    let bounds_sorted: Vec<f64> = order.iter().map(|&k| bounds[k]).collect();
    Ok((smallest_sorted, bounds_sorted, slow_mode, applications))
}

impl Graph {
    /// λ2, λmax and the slowest mode by the sparse path with default options.
    ///
    /// # Errors
    /// See [`Self::sparse_spectrum_with`].
    pub fn sparse_spectrum(&self) -> Result<SparseSpectrum, GraphError> {
        self.sparse_spectrum_with(&SparseOptions::default())
    }

    /// The smallest non-zero eigenvalues, λmax and the slowest mode by the sparse path.
    ///
    /// # Errors
    /// [`GraphError::Disconnected`]; [`GraphError::TooSmall`] below 3 nodes;
    /// [`GraphError::Factorization`]; [`GraphError::EigenvalueNotConverged`] if an
    /// eigenvalue's error bound does not reach `options.tolerance` within the restarts;
    /// [`GraphError::NotFinite`] for a tolerance that is not finite and positive.
    pub fn sparse_spectrum_with(
        &self,
        options: &SparseOptions,
    ) -> Result<SparseSpectrum, GraphError> {
        self.sparse_spectrum_observed(options, &mut |_| {})
    }

    /// As [`Self::sparse_spectrum_with`], telling `observe` what it is doing (for a
    /// progress display on long solves).
    ///
    /// # Errors
    /// As [`Self::sparse_spectrum_with`].
    pub fn sparse_spectrum_observed(
        &self,
        options: &SparseOptions,
        observe: &mut dyn FnMut(SparseStage),
    ) -> Result<SparseSpectrum, GraphError> {
        if !options.tolerance.is_finite() || options.tolerance <= 0.0 {
            return Err(GraphError::NotFinite { name: "tolerance" });
        }
        let n = self.node_count();
        if n < 3 && !self.is_pinned() {
            return Err(GraphError::TooSmall { nodes: n, min: 3 });
        }
        // The space the spectrum lives on: orthogonal to 1, or the adjusting nodes.
        let dimension = if self.is_pinned() {
            self.free_count()
        } else {
            n - 1
        };
        observe(SparseStage::Factorising);
        let pattern = Pattern::new(self)?;
        let concurrent = n >= CONCURRENT_MIN_NODES
            && std::thread::available_parallelism().is_ok_and(|p| p.get() > 1);
        self.sparse_spectrum_from(&pattern, options, dimension, concurrent, observe)
    }

    /// Both ends of the spectrum from the shared symbolic analysis, in turn or at once.
    fn sparse_spectrum_from(
        &self,
        pattern: &Pattern,
        options: &SparseOptions,
        dimension: usize,
        concurrent: bool,
        observe: &mut dyn FnMut(SparseStage),
    ) -> Result<SparseSpectrum, GraphError> {
        let (small, top) = if concurrent {
            // The two ends of the spectrum share nothing but the symbolic analysis: λmax
            // runs on a second thread while this one finds the smallest eigenvalues. The
            // work, and so every figure, is the same as in turn; its stages reach
            // `observe` from this thread.
            let (sender, stages) = std::sync::mpsc::channel();
            std::thread::scope(|scope| {
                let worker = scope.spawn(move || {
                    largest(self, pattern, options, &mut |stage| {
                        // The receiver outlives the worker (same scope).
                        let _ = sender.send(stage);
                    })
                });
                let mut forward = |stage| {
                    stages.try_iter().for_each(&mut *observe);
                    observe(stage);
                };
                let small = smallest_all(self, pattern, options, dimension, &mut forward);
                // Then the worker's stages as they come, until it ends (its sender is
                // dropped with it), so that a progress display follows λmax live.
                stages.iter().for_each(&mut *observe);
                let top = worker
                    .join()
                    .unwrap_or_else(|panic| std::panic::resume_unwind(panic));
                (small, top)
            })
        } else {
            let small = smallest_all(self, pattern, options, dimension, observe);
            (small, largest(self, pattern, options, observe))
        };
        let (smallest_sorted, bounds_sorted, slow_mode, applications) = small?;
        let (lo, hi, top_applications, shifted_factorizations) = top?;
        Ok(SparseSpectrum {
            lambda2: smallest_sorted[0],
            lambda2_error_bound: bounds_sorted[0],
            smallest: smallest_sorted,
            smallest_error_bounds: bounds_sorted,
            lambda_max: 0.5 * (lo + hi),
            lambda_max_lower: lo,
            lambda_max_upper: hi,
            slow_mode,
            operator_applications: applications + top_applications,
            factorizations: 1 + shifted_factorizations,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::Topology;

    /// λmax on a second thread does the same work as in turn: every figure is identical,
    /// bit for bit, and every stage still reaches the observer.
    #[test]
    fn concurrent_ends_equal_the_ends_in_turn() {
        let g = Graph::from_topology(&Topology::Grid { rows: 7, cols: 30 }).unwrap();
        let options = SparseOptions {
            smallest: 3,
            ..SparseOptions::default()
        };
        let pattern = Pattern::new(&g).unwrap();
        let dimension = g.node_count() - 1;
        let run = |concurrent| {
            let mut stages = Vec::new();
            let s = g
                .sparse_spectrum_from(&pattern, &options, dimension, concurrent, &mut |st| {
                    stages.push(format!("{st:?}"))
                })
                .unwrap();
            stages.sort();
            (s, stages)
        };
        let (alone, stages_alone) = run(false);
        let (together, stages_together) = run(true);
        assert_eq!(alone, together);
        assert_eq!(stages_alone, stages_together);
        assert!(stages_alone.iter().any(|s| s.starts_with("Largest")));
    }
}
