//! Closed-form Laplacian spectra of the topologies firmware teams wire up.
//!
//! Every formula here needs only `libm`; nothing allocates. Sources: path and cycle,
//! star and complete graph, Cartesian products — Brouwer & Haemers, *Spectra of Graphs*
//! (2012) §1.4 (path also Fiedler 1973); chain pinned to a reference at one end —
//! Yueh, Appl. Math. E-Notes 5 (2005); tridiagonal Toeplitz — Noschese, Pasquini &
//! Reichel, Numer. Linear Algebra Appl. 20 (2013).

use core::f64::consts::PI;

use super::error::PlanError;
use super::spectrum::Spectrum;

/// A coupling topology with a closed-form Laplacian spectrum (unit edge weights).
///
/// Node numbering: chains and rings `0..nodes` in order; a star's hub is node 0; a grid
/// or torus node at row `r`, column `c` is `r·cols + c`; a pinned chain's node 0 is the
/// one next to the reference (the reference itself is not a node here).
#[non_exhaustive]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Topology {
    /// Open chain (path graph P_N), `nodes ≥ 2`.
    Chain {
        /// Number of nodes.
        nodes: usize,
    },
    /// Closed ring (cycle C_N), `nodes ≥ 3`.
    Ring {
        /// Number of nodes.
        nodes: usize,
    },
    /// Star: one hub (node 0) linked to every other node, `nodes ≥ 2`.
    Star {
        /// Number of nodes including the hub.
        nodes: usize,
    },
    /// Complete graph K_N: every node hears every other, `nodes ≥ 2`.
    Complete {
        /// Number of nodes.
        nodes: usize,
    },
    /// 2-D grid P_rows □ P_cols, `rows, cols ≥ 1`, at least 2 nodes.
    Grid {
        /// Number of rows.
        rows: usize,
        /// Number of columns.
        cols: usize,
    },
    /// 2-D torus C_rows □ C_cols, `rows, cols ≥ 3`.
    Torus {
        /// Number of rows.
        rows: usize,
        /// Number of columns.
        cols: usize,
    },
    /// Chain of `nodes ≥ 1` nodes whose node 0 also listens to a reference that never
    /// moves (a node disciplined by an external clock). The grounded Laplacian is the
    /// N×N tridiagonal matrix with diagonal (2, …, 2, 1).
    PinnedChain {
        /// Number of nodes, not counting the reference.
        nodes: usize,
    },
}

/// Largest node count any topology accepts (2^30, so index arithmetic such as `2N + 1`
/// cannot overflow even where `usize` is 32 bits).
pub const MAX_PLAN_NODES: usize = 1 << 30;

/// `2 − 2cos(x)`, written as `4 sin²(x/2)` so small eigenvalues keep full relative precision.
fn two_minus_two_cos(x: f64) -> f64 {
    let s = libm::sin(x / 2.0);
    4.0 * s * s
}

/// Eigenvalue k (ascending, `k = 0..n`) of the path P_n; 0 for a single node.
fn path_eigenvalue(n: usize, k: usize) -> f64 {
    two_minus_two_cos(k as f64 * PI / n as f64)
}

/// Eigenvalue k (natural order, `k = 0..n`) of the cycle C_n.
fn cycle_eigenvalue(n: usize, k: usize) -> f64 {
    two_minus_two_cos(2.0 * PI * k as f64 / n as f64)
}

/// Largest eigenvalue of the cycle C_n.
fn cycle_max(n: usize) -> f64 {
    cycle_eigenvalue(n, n / 2)
}

/// Slowest non-zero eigenvalue of the path P_n (0 for one node).
fn path_slow(n: usize) -> f64 {
    if n < 2 { 0.0 } else { path_eigenvalue(n, 1) }
}

impl Topology {
    /// Check the node counts.
    ///
    /// # Errors
    /// [`PlanError::TooFewNodes`] below each kind's minimum (see the variants);
    /// [`PlanError::TooManyNodes`] above [`MAX_PLAN_NODES`] nodes (or if `rows·cols` overflows).
    pub fn validate(&self) -> Result<(), PlanError> {
        let (min, got) = match *self {
            Self::Chain { nodes } | Self::Star { nodes } | Self::Complete { nodes } => (2, nodes),
            Self::Ring { nodes } => (3, nodes),
            Self::PinnedChain { nodes } => (1, nodes),
            Self::Grid { rows, cols } => {
                let n = rows.checked_mul(cols).ok_or(PlanError::TooManyNodes)?;
                (2, if rows == 0 || cols == 0 { 0 } else { n })
            }
            Self::Torus { rows, cols } => {
                rows.checked_mul(cols).ok_or(PlanError::TooManyNodes)?;
                (3, rows.min(cols))
            }
        };
        if got < min {
            Err(PlanError::TooFewNodes { min, got })
        } else if self.node_count() > MAX_PLAN_NODES {
            Err(PlanError::TooManyNodes)
        } else {
            Ok(())
        }
    }

    /// Number of nodes that adjust their phase (the reference of a pinned chain is not
    /// counted). Saturates at `usize::MAX` for an overflowing grid (which `validate` rejects).
    pub fn node_count(&self) -> usize {
        match *self {
            Self::Chain { nodes }
            | Self::Ring { nodes }
            | Self::Star { nodes }
            | Self::Complete { nodes }
            | Self::PinnedChain { nodes } => nodes,
            Self::Grid { rows, cols } | Self::Torus { rows, cols } => rows.saturating_mul(cols),
        }
    }

    /// Validate, then check that a caller's output slice has one slot per node.
    fn checked_len(&self, out: &[f64]) -> Result<(), PlanError> {
        self.validate()?;
        let count = self.node_count();
        if out.len() == count {
            Ok(())
        } else {
            Err(PlanError::WrongLength {
                needed: count,
                got: out.len(),
            })
        }
    }

    /// Whether the network follows an external reference (no zero mode).
    pub fn is_pinned(&self) -> bool {
        matches!(self, Self::PinnedChain { .. })
    }

    /// Laplacian eigenvalue number `k`, `k = 0..node_count()`.
    ///
    /// Ascending in `k` for chain, ring, star, complete and pinned chain. For grid and
    /// torus `k = i·cols + j` gives `λ_i(rows) + λ_j(cols)` (product order, not sorted;
    /// use [`Self::eigenvalues`] for the sorted list). Mode 0 of a free network is the
    /// zero mode. Accurate to a few ulps of `λmax` (computed as `4 sin²(x/2)`).
    ///
    /// # Errors
    /// [`PlanError::ModeOutOfRange`] for `k ≥ node_count()`, or the [`Self::validate`] error.
    pub fn mode(&self, k: usize) -> Result<f64, PlanError> {
        self.validate()?;
        let count = self.node_count();
        if k >= count {
            return Err(PlanError::ModeOutOfRange { index: k, count });
        }
        Ok(match *self {
            // Fiedler 1973; Brouwer & Haemers 2012 §1.4.
            Self::Chain { nodes } => path_eigenvalue(nodes, k),
            // Brouwer & Haemers 2012 §1.4; sorted: 0, λ1, λ1, λ2, λ2, ...
            Self::Ring { nodes } => cycle_eigenvalue(nodes, k.div_ceil(2)),
            // Brouwer & Haemers 2012 §1.4: {0, 1 (×N−2), N}.
            Self::Star { nodes } => {
                if k == 0 {
                    0.0
                } else if k + 1 == nodes {
                    nodes as f64
                } else {
                    1.0
                }
            }
            // Brouwer & Haemers 2012 §1.4: {0, N (×N−1)}.
            Self::Complete { nodes } => {
                if k == 0 {
                    0.0
                } else {
                    nodes as f64
                }
            }
            // λ(G□H) = λ_i(G) + λ_j(H), Brouwer & Haemers 2012 §1.4.
            Self::Grid { rows, cols } => {
                path_eigenvalue(rows, k / cols) + path_eigenvalue(cols, k % cols)
            }
            Self::Torus { rows, cols } => {
                cycle_eigenvalue(rows, k / cols) + cycle_eigenvalue(cols, k % cols)
            }
            // Yueh 2005: 2 − 2cos((2k−1)π/(2N+1)), k = 1..N (here k is 0-based).
            Self::PinnedChain { nodes } => {
                two_minus_two_cos((2 * k + 1) as f64 * PI / (2 * nodes + 1) as f64)
            }
        })
    }

    /// All eigenvalues, ascending, written into `out` (length `node_count()`).
    ///
    /// # Errors
    /// [`PlanError::WrongLength`] if `out.len() != node_count()`, or the [`Self::validate`] error.
    pub fn eigenvalues(&self, out: &mut [f64]) -> Result<(), PlanError> {
        self.checked_len(out)?;
        for (k, slot) in out.iter_mut().enumerate() {
            *slot = self.mode(k)?;
        }
        out.sort_unstable_by(f64::total_cmp);
        Ok(())
    }

    /// The non-zero-mode eigenvalues (all of them for a pinned chain), in [`Self::mode`]
    /// order, without allocating. Empty if the topology is invalid.
    pub fn nonzero_modes(&self) -> impl Iterator<Item = f64> + '_ {
        let ok = self.validate().is_ok();
        let count = if ok { self.node_count() } else { 0 };
        let skip = usize::from(!self.is_pinned());
        (skip..count).filter_map(move |k| self.mode(k).ok())
    }

    /// The slowest mode's eigenvalue: λ2 for a free network, the smallest grounded
    /// eigenvalue for a pinned chain.
    ///
    /// # Errors
    /// The [`Self::validate`] error.
    pub fn lambda_slow(&self) -> Result<f64, PlanError> {
        self.validate()?;
        Ok(match *self {
            Self::Chain { nodes } => path_eigenvalue(nodes, 1),
            Self::Ring { nodes } => cycle_eigenvalue(nodes, 1),
            Self::Star { nodes } => {
                if nodes == 2 {
                    2.0
                } else {
                    1.0
                }
            }
            Self::Complete { nodes } => nodes as f64,
            Self::Grid { rows, cols } => {
                let (r, c) = (path_slow(rows), path_slow(cols));
                if r == 0.0 {
                    c
                } else if c == 0.0 {
                    r
                } else {
                    r.min(c)
                }
            }
            Self::Torus { rows, cols } => cycle_eigenvalue(rows.max(cols), 1),
            Self::PinnedChain { .. } => self.mode(0)?,
        })
    }

    /// The largest eigenvalue λmax.
    ///
    /// # Errors
    /// The [`Self::validate`] error.
    pub fn lambda_max(&self) -> Result<f64, PlanError> {
        self.validate()?;
        Ok(match *self {
            Self::Chain { nodes } | Self::PinnedChain { nodes } => self.mode(nodes - 1)?,
            Self::Ring { nodes } => cycle_max(nodes),
            Self::Star { nodes } | Self::Complete { nodes } => nodes as f64,
            Self::Grid { rows, cols } => {
                path_eigenvalue(rows, rows - 1) + path_eigenvalue(cols, cols - 1)
            }
            Self::Torus { rows, cols } => cycle_max(rows) + cycle_max(cols),
        })
    }

    /// Largest node degree (a pinned chain's node 0 counts its reference link).
    ///
    /// # Errors
    /// The [`Self::validate`] error.
    pub fn max_degree(&self) -> Result<f64, PlanError> {
        self.validate()?;
        let side = |n: usize| match n {
            0 | 1 => 0.0,
            2 => 1.0,
            _ => 2.0,
        };
        Ok(match *self {
            Self::Chain { nodes } => side(nodes),
            Self::Ring { .. } => 2.0,
            Self::Star { nodes } | Self::Complete { nodes } => (nodes - 1) as f64,
            Self::Grid { rows, cols } => side(rows) + side(cols),
            Self::Torus { .. } => 4.0,
            Self::PinnedChain { nodes } => {
                if nodes == 1 {
                    1.0
                } else {
                    2.0
                }
            }
        })
    }

    /// The spectrum summary the stability, settling and tuning functions read.
    ///
    /// # Errors
    /// The [`Self::validate`] error.
    pub fn spectrum(&self) -> Result<Spectrum, PlanError> {
        Ok(Spectrum {
            node_count: self.node_count(),
            lambda_slow: self.lambda_slow()?,
            lambda_max: self.lambda_max()?,
            max_degree: self.max_degree()?,
            connected: true,
            pinned: self.is_pinned(),
            stable_twisted_states: self.stable_twisted_states(),
        })
    }

    /// Value of the slowest mode's eigenvector at `node` (unnormalised; its largest
    /// magnitude is close to 1). It shows where the network is slow: the nodes with the
    /// largest magnitude are the last to agree.
    ///
    /// Chain: `cos(π(j+½)/N)` (Brouwer & Haemers §1.4); ring: `cos(2πj/N)`; pinned chain:
    /// `sin(π(j+1)/(2N+1))` (Yueh 2005); grid/torus: the chain/ring mode along the longer
    /// side; star: leaf 1 against leaf 2; complete: node 0 against node 1 (these two have
    /// repeated slowest eigenvalues, so any vector of the eigenspace is equally slow).
    ///
    /// # Errors
    /// [`PlanError::ModeOutOfRange`] for `node ≥ node_count()`, or the validate error.
    pub fn slow_mode(&self, node: usize) -> Result<f64, PlanError> {
        self.validate()?;
        let count = self.node_count();
        if node >= count {
            return Err(PlanError::ModeOutOfRange { index: node, count });
        }
        let j = node as f64;
        let unit = |one: bool, minus: bool| {
            if one {
                1.0
            } else if minus {
                -1.0
            } else {
                0.0
            }
        };
        Ok(match *self {
            Self::Chain { nodes } => libm::cos(PI * (j + 0.5) / nodes as f64),
            Self::Ring { nodes } => libm::cos(2.0 * PI * j / nodes as f64),
            Self::Star { nodes } => {
                if nodes == 2 {
                    unit(node == 0, node == 1)
                } else {
                    unit(node == 1, node == 2)
                }
            }
            Self::Complete { .. } => unit(node == 0, node == 1),
            Self::Grid { rows, cols } => {
                if cols >= rows {
                    libm::cos(PI * ((node % cols) as f64 + 0.5) / cols as f64)
                } else {
                    libm::cos(PI * ((node / cols) as f64 + 0.5) / rows as f64)
                }
            }
            Self::Torus { rows, cols } => {
                if cols >= rows {
                    libm::cos(2.0 * PI * (node % cols) as f64 / cols as f64)
                } else {
                    libm::cos(2.0 * PI * (node / cols) as f64 / rows as f64)
                }
            }
            Self::PinnedChain { nodes } => libm::sin(PI * (j + 1.0) / (2 * nodes + 1) as f64),
        })
    }

    /// The slowest mode's shape written into `out` (length `node_count()`), scaled so
    /// the largest magnitude is exactly 1.
    ///
    /// # Errors
    /// [`PlanError::WrongLength`] or the validate error.
    pub fn slow_mode_shape(&self, out: &mut [f64]) -> Result<(), PlanError> {
        self.checked_len(out)?;
        let mut peak = 0.0_f64;
        for (node, slot) in out.iter_mut().enumerate() {
            *slot = self.slow_mode(node)?;
            peak = peak.max(libm::fabs(*slot));
        }
        if peak > 0.0 {
            out.iter_mut().for_each(|x| *x /= peak);
        }
        Ok(())
    }

    /// `Σ 1/λ_k` over the non-zero modes (all modes when pinned): the sum in the
    /// network-coherence formula of Bamieh, Jovanović, Mitra & Patterson (2012). Closed
    /// for chain (`(N²−1)/6`), ring (`(N²−1)/12`), star (`N−2+1/N`), complete
    /// (`(N−1)/N`); summed mode by mode (O(N)) for the others.
    ///
    /// # Errors
    /// The validate error.
    pub fn sum_inverse_eigenvalues(&self) -> Result<f64, PlanError> {
        self.validate()?;
        Ok(match *self {
            Self::Chain { nodes } => {
                let n = nodes as f64;
                (n * n - 1.0) / 6.0
            }
            Self::Ring { nodes } => {
                let n = nodes as f64;
                (n * n - 1.0) / 12.0
            }
            Self::Star { nodes } => {
                let n = nodes as f64;
                n - 2.0 + 1.0 / n
            }
            Self::Complete { nodes } => {
                let n = nodes as f64;
                (n - 1.0) / n
            }
            _ => self.nonzero_modes().map(|l| 1.0 / l).sum(),
        })
    }

    /// Worst-case lock load per unit of detuning: `max over edges e of ‖L† b_e‖₁`, so the
    /// largest steady edge flow for detunings `|ω_i| ≤ w` is `w ×` this (Dörfler, Chertkov
    /// & Bullo 2013, exact on trees; Strogatz & Mirollo 1988 for the chain, where it is
    /// `max_k 2k(N−k)/N`). Pinned chain: `N` (the link to the reference carries every
    /// node's detuning). Ring: `N/4` (even N) or `(N²−1)/(4N)` (odd) — the current
    /// through a ring edge with unit injection (own derivation). Star: `2(N−1)/N`;
    /// complete: `2/N`.
    ///
    /// # Errors
    /// [`PlanError::NoClosedForm`] for grid and torus (use the numeric graph path), or
    /// the validate error.
    pub fn worst_flow_factor(&self) -> Result<f64, PlanError> {
        self.validate()?;
        match *self {
            Self::Chain { nodes } => {
                let half = (nodes / 2) as f64;
                let n = nodes as f64;
                Ok(2.0 * half * (n - half) / n)
            }
            Self::PinnedChain { nodes } => Ok(nodes as f64),
            Self::Ring { nodes } => {
                let n = nodes as f64;
                Ok(if nodes % 2 == 0 {
                    n / 4.0
                } else {
                    (n * n - 1.0) / (4.0 * n)
                })
            }
            Self::Star { nodes } => Ok(2.0 * (nodes as f64 - 1.0) / nodes as f64),
            Self::Complete { nodes } => Ok(2.0 / nodes as f64),
            Self::Grid { .. } | Self::Torus { .. } => Err(PlanError::NoClosedForm),
        }
    }

    /// Number of stable twisted states `q ≠ 0` of a ring (`|q| < N/4`; Wiley, Strogatz &
    /// Girvan 2006): phase patterns that wind `q` turns around the ring and never unwind
    /// under sine coupling. Zero for other topologies.
    pub fn stable_twisted_states(&self) -> usize {
        match *self {
            // q = ±1 .. ±q_max with q_max < N/4, i.e. 4q < N.
            Self::Ring { nodes } if nodes >= 3 => 2 * (nodes.saturating_sub(1) / 4),
            _ => 0,
        }
    }
}

/// Eigenvalue `k` (`k = 1..=n`, descending in k when `√(bc) > 0`) of the n×n tridiagonal
/// Toeplitz matrix with diagonal `a`, super-diagonal `b` and sub-diagonal `c`:
/// `a + 2√(bc)·cos(kπ/(n+1))` (Noschese, Pasquini & Reichel 2013).
///
/// # Errors
/// [`PlanError::InvalidParameter`] unless `a`, `b`, `c` are finite with `b·c > 0` (real
/// spectrum), [`PlanError::ModeOutOfRange`] unless `1 ≤ k ≤ n`.
pub fn tridiagonal_toeplitz_eigenvalue(
    a: f64,
    b: f64,
    c: f64,
    n: usize,
    k: usize,
) -> Result<f64, PlanError> {
    let bc = b * c;
    if !(a.is_finite() && bc.is_finite() && bc > 0.0) {
        return Err(PlanError::InvalidParameter {
            name: "a, b, c",
            valid: "finite with b·c > 0",
        });
    }
    if k == 0 || k > n {
        return Err(PlanError::ModeOutOfRange { index: k, count: n });
    }
    Ok(a + 2.0 * libm::sqrt(bc) * libm::cos(k as f64 * PI / (n as f64 + 1.0)))
}
