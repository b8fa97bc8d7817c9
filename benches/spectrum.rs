//! Spectrum benchmarks; prints figures (hand-written harness, `cargo bench --features check --bench spectrum`).
//!
//! Dense: `Graph::dense_spectrum` (nalgebra's symmetric eigensolver inside, every
//! eigenvalue and the slow mode's vector) against two baselines measured in the same run
//! on the same Laplacian: faer's dense self-adjoint eigendecomposition (another library's
//! solver, eigenvectors included; the eigenvalues are compared too), and this crate's
//! sparse path (λ2 and λmax only, what the planner needs). Sparse: λ2 (and λmax) at
//! 10,000 and 100,000 nodes for a 2-D grid and a random geometric mesh (goal: a
//! 100,000-node mesh in under 5 s on a 2-core machine), plus the 100,000-node chain
//! against its closed form.

use std::time::Instant;

use entrain::graph::Graph;
use entrain::plan::Topology;
use faer::{Mat, Side};

#[path = "common/mod.rs"]
mod common;
use common::geometric_mesh;

fn seconds<T>(f: impl FnOnce() -> T) -> (T, f64) {
    let start = Instant::now();
    let out = f();
    (out, start.elapsed().as_secs_f64())
}

fn square_grid(n: usize) -> Graph {
    let side = (n as f64).sqrt().round() as usize;
    Graph::from_topology(&Topology::Grid {
        rows: side,
        cols: side,
    })
    .unwrap()
}

fn main() {
    println!("dense spectrum (all eigenvalues + slow mode), random geometric mesh");
    println!(
        "{:>8} {:>10} {:>10} {:>10} {:>12} {:>12}",
        "nodes", "ours_s", "faer_s", "sparse_s", "ours/faer", "ours/sparse"
    );
    for n in [200, 1000] {
        let g = geometric_mesh(n, 7);
        let l = g.laplacian_dense().unwrap();
        let m = Mat::from_fn(l.nrows(), l.ncols(), |i, j| l[(i, j)]);
        let (ours, t_ours) = seconds(|| g.dense_spectrum().unwrap());
        let (peer, t_peer) = seconds(|| m.self_adjoint_eigen(Side::Lower).unwrap());
        let (sparse, t_sparse) = seconds(|| g.sparse_spectrum().unwrap());
        let pv: Vec<f64> = (0..peer.S().dim()).map(|k| peer.S()[k]).collect();
        let diff = ours
            .eigenvalues()
            .iter()
            .zip(&pv)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        let ev = ours.eigenvalues();
        let (l2, lmax) = (ev[1], ev[ev.len() - 1]);
        println!(
            "{:>8} {:>10.4} {:>10.4} {:>10.4} {:>12.3} {:>12.3}   (max |Δλ| against faer {diff:.1e}; sparse λ2, λmax off by {:.1e}, {:.1e})",
            g.node_count(),
            t_ours,
            t_peer,
            t_sparse,
            t_ours / t_peer,
            t_ours / t_sparse,
            (sparse.lambda2 - l2).abs(),
            (sparse.lambda_max - lmax).abs()
        );
    }

    println!();
    println!("sparse λ2 and λmax (grounded Cholesky + Lanczos; shift-invert for λmax)");
    println!(
        "{:>10} {:>8} {:>10} {:>14} {:>12} {:>10} {:>8}",
        "graph", "nodes", "edges", "lambda2", "lambda_max", "total_s", "applies"
    );
    for n in [10_000, 100_000] {
        for (name, g) in [("grid", square_grid(n)), ("mesh", geometric_mesh(n, 11))] {
            let (s, t) = seconds(|| g.sparse_spectrum().unwrap());
            println!(
                "{:>10} {:>8} {:>10} {:>14.6e} {:>12.6} {:>10.3} {:>8}",
                name,
                g.node_count(),
                g.edges().len(),
                s.lambda2,
                s.lambda_max,
                t,
                s.operator_applications
            );
        }
    }

    println!();
    let t = Topology::Chain { nodes: 100_000 };
    let g = Graph::from_topology(&t).unwrap();
    let (s, secs) = seconds(|| g.sparse_spectrum().unwrap());
    let want = t.lambda_slow().unwrap();
    println!(
        "chain 100000: sparse λ2 = {:.12e}, closed form {:.12e}, relative error {:.1e}, {:.3} s",
        s.lambda2,
        want,
        ((s.lambda2 - want) / want).abs(),
        secs
    );
}
