//! Closed-form spectra against the published tables and against `nalgebra`'s dense
//! symmetric eigen-decomposition of matrices built here, independently of the crate.
#![cfg(feature = "plan")]

use entrain::plan::{PlanError, Topology, tridiagonal_toeplitz_eigenvalue};
use nalgebra::{DMatrix, SymmetricEigen};
use proptest::prelude::*;

const TABLE_TOL: f64 = 1e-9;
const DENSE_TOL: f64 = 1e-12;

fn sorted(t: &Topology) -> Vec<f64> {
    let mut v = vec![0.0; t.node_count()];
    t.eigenvalues(&mut v).unwrap();
    v
}

fn assert_close(got: &[f64], want: &[f64], tol: f64) {
    assert_eq!(got.len(), want.len());
    for (g, w) in got.iter().zip(want) {
        assert!((g - w).abs() <= tol, "got {g}, want {w} (all: {got:?})");
    }
}

/// Laplacian of an edge list, built directly (the reference side of every check).
fn laplacian(n: usize, edges: &[(usize, usize)]) -> DMatrix<f64> {
    let mut l = DMatrix::zeros(n, n);
    for &(a, b) in edges {
        l[(a, a)] += 1.0;
        l[(b, b)] += 1.0;
        l[(a, b)] -= 1.0;
        l[(b, a)] -= 1.0;
    }
    l
}

fn dense_eigenvalues(m: DMatrix<f64>) -> Vec<f64> {
    let mut v: Vec<f64> = SymmetricEigen::new(m).eigenvalues.iter().copied().collect();
    v.sort_by(f64::total_cmp);
    v
}

fn path_edges(n: usize) -> Vec<(usize, usize)> {
    (1..n).map(|i| (i - 1, i)).collect()
}

fn edges_of(t: &Topology) -> Vec<(usize, usize)> {
    match *t {
        Topology::Chain { nodes } => path_edges(nodes),
        Topology::Ring { nodes } => (0..nodes).map(|i| (i, (i + 1) % nodes)).collect(),
        Topology::Star { nodes } => (1..nodes).map(|i| (0, i)).collect(),
        Topology::Complete { nodes } => (0..nodes)
            .flat_map(|i| (i + 1..nodes).map(move |j| (i, j)))
            .collect(),
        Topology::Grid { rows, cols } => {
            let mut e = Vec::new();
            for r in 0..rows {
                for c in 0..cols {
                    let i = r * cols + c;
                    if c + 1 < cols {
                        e.push((i, i + 1));
                    }
                    if r + 1 < rows {
                        e.push((i, i + cols));
                    }
                }
            }
            e
        }
        Topology::Torus { rows, cols } => {
            let mut e = Vec::new();
            for r in 0..rows {
                for c in 0..cols {
                    let i = r * cols + c;
                    e.push((i, r * cols + (c + 1) % cols));
                    e.push((i, ((r + 1) % rows) * cols + c));
                }
            }
            e
        }
        _ => unreachable!(),
    }
}

/// Grounded Laplacian of a chain pinned at node 0's end: diag (2, …, 2, 1).
fn pinned_matrix(n: usize) -> DMatrix<f64> {
    let mut m = laplacian(n, &path_edges(n));
    m[(0, 0)] += 1.0;
    m
}

#[test]
fn path_p5_table() {
    // Fiedler 1973; Brouwer & Haemers 2012 §1.4.
    let want = [0.0, 0.3819660113, 1.3819660113, 2.6180339887, 3.6180339887];
    assert_close(&sorted(&Topology::Chain { nodes: 5 }), &want, TABLE_TOL);
}

#[test]
fn cycle_c6_table() {
    // Brouwer & Haemers 2012 §1.4.
    assert_close(
        &sorted(&Topology::Ring { nodes: 6 }),
        &[0.0, 1.0, 1.0, 3.0, 3.0, 4.0],
        TABLE_TOL,
    );
}

#[test]
fn star_s5_and_complete_table() {
    // Brouwer & Haemers 2012 §1.4: S5 {0,1,1,1,5}; K_N {0, N (×N−1)}.
    assert_close(
        &sorted(&Topology::Star { nodes: 5 }),
        &[0.0, 1.0, 1.0, 1.0, 5.0],
        TABLE_TOL,
    );
    assert_close(
        &sorted(&Topology::Complete { nodes: 4 }),
        &[0.0, 4.0, 4.0, 4.0],
        TABLE_TOL,
    );
}

#[test]
fn grid_p3_p4_lambda2_table() {
    // Brouwer & Haemers 2012: λ(G□H) = λ_i(G) + λ_j(H); P3□P4 λ2 = 0.5857864.
    let t = Topology::Grid { rows: 3, cols: 4 };
    assert!((t.lambda_slow().unwrap() - 0.5857864).abs() < 1e-7);
    assert!((sorted(&t)[1] - 0.5857864).abs() < 1e-7);
}

#[test]
fn pinned_chain_n3_table() {
    // Yueh, Appl. Math. E-Notes 5 (2005).
    assert_close(
        &sorted(&Topology::PinnedChain { nodes: 3 }),
        &[0.1980622642, 1.5549581321, 3.2469796037],
        TABLE_TOL,
    );
}

#[test]
fn toeplitz_table() {
    // Noschese, Pasquini & Reichel 2013: a=3, b=1, c=4, n=4.
    let want = [6.2360680, 4.2360680, 1.7639320, -0.2360680];
    for (k, w) in (1..=4).zip(want) {
        assert!((tridiagonal_toeplitz_eigenvalue(3.0, 1.0, 4.0, 4, k).unwrap() - w).abs() < 1e-7);
    }
}

#[test]
fn closed_forms_equal_dense_up_to_500_nodes() {
    // Closed forms (Brouwer & Haemers 2012; Yueh 2005) vs nalgebra::SymmetricEigen.
    let cases = [
        Topology::Chain { nodes: 2 },
        Topology::Chain { nodes: 7 },
        Topology::Chain { nodes: 500 },
        Topology::Ring { nodes: 3 },
        Topology::Ring { nodes: 101 },
        Topology::Ring { nodes: 500 },
        Topology::Star { nodes: 2 },
        Topology::Star { nodes: 300 },
        Topology::Complete { nodes: 60 },
        Topology::Grid { rows: 1, cols: 9 },
        Topology::Grid { rows: 20, cols: 25 },
        Topology::Torus { rows: 3, cols: 5 },
        Topology::Torus { rows: 16, cols: 30 },
    ];
    for t in cases {
        let dense = dense_eigenvalues(laplacian(t.node_count(), &edges_of(&t)));
        assert_close(&sorted(&t), &dense, DENSE_TOL);
        let spec = t.spectrum().unwrap();
        assert!((spec.lambda_slow - dense[1]).abs() <= DENSE_TOL, "{t:?}");
        assert!(
            (spec.lambda_max - dense[dense.len() - 1]).abs() <= DENSE_TOL,
            "{t:?}"
        );
        let sum_inv: f64 = dense.iter().skip(1).map(|l| 1.0 / l).sum();
        let rel = (t.sum_inverse_eigenvalues().unwrap() - sum_inv).abs() / sum_inv;
        assert!(rel < 1e-9, "{t:?}: {rel}");
    }
    for n in [1, 3, 64, 500] {
        let t = Topology::PinnedChain { nodes: n };
        assert_close(&sorted(&t), &dense_eigenvalues(pinned_matrix(n)), DENSE_TOL);
    }
}

#[test]
fn path_inverse_sum_table() {
    // Bamieh, Jovanović, Mitra & Patterson 2012: path Σ 1/λ = (N² − 1)/6; P5: 4.
    assert!(
        (Topology::Chain { nodes: 5 }
            .sum_inverse_eigenvalues()
            .unwrap()
            - 4.0)
            .abs()
            < 1e-12
    );
}

#[test]
fn slow_mode_is_an_eigenvector() {
    // L·v = λslow·v with L built here, for every kind.
    let cases = [
        Topology::Chain { nodes: 40 },
        Topology::Ring { nodes: 12 },
        Topology::Star { nodes: 6 },
        Topology::Complete { nodes: 5 },
        Topology::Grid { rows: 4, cols: 9 },
        Topology::Grid { rows: 9, cols: 4 },
        Topology::Torus { rows: 5, cols: 7 },
    ];
    for t in cases {
        let l = laplacian(t.node_count(), &edges_of(&t));
        let mut v = vec![0.0; t.node_count()];
        t.slow_mode_shape(&mut v).unwrap();
        assert!(v.iter().any(|x| (x.abs() - 1.0).abs() < 1e-15));
        let v = nalgebra::DVector::from_vec(v);
        let r = &l * &v - t.lambda_slow().unwrap() * &v;
        assert!(r.norm() < 1e-12 * v.norm(), "{t:?}");
    }
    let t = Topology::PinnedChain { nodes: 30 };
    let mut v = vec![0.0; 30];
    t.slow_mode_shape(&mut v).unwrap();
    let v = nalgebra::DVector::from_vec(v);
    let r = pinned_matrix(30) * &v - t.lambda_slow().unwrap() * &v;
    assert!(r.norm() < 1e-12);
}

#[test]
fn twisted_states_table() {
    // Wiley, Strogatz & Girvan 2006: N = 10 ⇒ q = 0, ±1, ±2 stable (4 twisted).
    assert_eq!(Topology::Ring { nodes: 10 }.stable_twisted_states(), 4);
    assert_eq!(Topology::Ring { nodes: 4 }.stable_twisted_states(), 0);
    assert_eq!(Topology::Ring { nodes: 5 }.stable_twisted_states(), 2);
}

#[test]
fn bad_topologies_are_errors() {
    assert_eq!(
        Topology::Chain { nodes: 0 }.spectrum(),
        Err(PlanError::TooFewNodes { min: 2, got: 0 })
    );
    assert_eq!(
        Topology::Ring { nodes: 2 }.validate(),
        Err(PlanError::TooFewNodes { min: 3, got: 2 })
    );
    assert!(Topology::Grid { rows: 0, cols: 5 }.validate().is_err());
    assert_eq!(
        Topology::Grid {
            rows: usize::MAX,
            cols: 3
        }
        .validate(),
        Err(PlanError::TooManyNodes)
    );
    assert_eq!(
        Topology::PinnedChain { nodes: 0 }.lambda_max(),
        Err(PlanError::TooFewNodes { min: 1, got: 0 })
    );
    assert_eq!(
        Topology::Chain { nodes: 4 }.mode(4),
        Err(PlanError::ModeOutOfRange { index: 4, count: 4 })
    );
    let mut short = [0.0; 3];
    assert_eq!(
        Topology::Chain { nodes: 4 }.eigenvalues(&mut short),
        Err(PlanError::WrongLength { needed: 4, got: 3 })
    );
    assert!(tridiagonal_toeplitz_eigenvalue(1.0, -1.0, 1.0, 3, 1).is_err());
    assert!(tridiagonal_toeplitz_eigenvalue(f64::NAN, 1.0, 1.0, 3, 1).is_err());
    assert!(tridiagonal_toeplitz_eigenvalue(1.0, 1.0, 1.0, 3, 0).is_err());
    assert_eq!(
        Topology::Grid { rows: 3, cols: 3 }.worst_flow_factor(),
        Err(PlanError::NoClosedForm)
    );
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]
    #[test]
    fn toeplitz_matches_nalgebra(a in -5.0f64..5.0, b in 0.05f64..4.0, c in 0.05f64..4.0, sign in prop::bool::ANY, n in 1usize..12) {
        // Noschese, Pasquini & Reichel 2013 vs nalgebra's Schur eigenvalues of the
        // (non-symmetric) matrix itself.
        let (b, c) = if sign { (-b, -c) } else { (b, c) };
        let m = DMatrix::from_fn(n, n, |i, j| if i == j { a } else if j == i + 1 { b } else if i == j + 1 { c } else { 0.0 });
        // Schur with an iteration cap (the uncapped call can loop on rare inputs).
        let schur = nalgebra::linalg::Schur::try_new(m, 1e-15, 100_000);
        prop_assume!(schur.is_some());
        let mut reference: Vec<f64> = schur.unwrap().complex_eigenvalues().iter().map(|z| { assert!(z.im.abs() < 1e-8); z.re }).collect();
        reference.sort_by(f64::total_cmp);
        let mut ours: Vec<f64> = (1..=n).map(|k| tridiagonal_toeplitz_eigenvalue(a, b, c, n, k).unwrap()).collect();
        ours.sort_by(f64::total_cmp);
        for (x, y) in ours.iter().zip(&reference) {
            prop_assert!((x - y).abs() < 1e-8 * (1.0 + y.abs()), "{ours:?} vs {reference:?}");
        }
    }
}

#[test]
fn middle_reference_equals_free_chain_of_twice_the_length() {
    // Fiedler 1973 (λ2 of P_{2m+1} = 2 − 2cos(π/(2m+1))) and Yueh 2005 (λ1 of the pinned
    // chain of m = 2 − 2cos(π/(2m+1))) agree.
    for m in [1, 5, 40] {
        let free = Topology::Chain { nodes: 2 * m + 1 }.lambda_slow().unwrap();
        let pinned = Topology::PinnedChain { nodes: m }.lambda_slow().unwrap();
        assert!((free - pinned).abs() < 1e-15);
    }
}

#[test]
fn huge_counts_are_refused_not_overflowed() {
    assert_eq!(
        Topology::PinnedChain { nodes: usize::MAX }.spectrum(),
        Err(PlanError::TooManyNodes)
    );
    assert_eq!(
        Topology::Chain {
            nodes: entrain::plan::MAX_PLAN_NODES + 1
        }
        .lambda_slow(),
        Err(PlanError::TooManyNodes)
    );
    assert_eq!(
        Topology::Torus {
            rows: 1 << 20,
            cols: 1 << 20
        }
        .validate(),
        Err(PlanError::TooManyNodes)
    );
}
