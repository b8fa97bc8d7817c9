//! Spectrum benchmarks; prints figures (hand-written harness, `cargo bench --features check --bench spectrum`).
//!
//! Dense: our `Graph::dense_spectrum` against `nalgebra::SymmetricEigen` called directly on
//! the same Laplacian (the peer; ratio printed). Sparse: λ2 (and λmax) at 10,000 and
//! 100,000 nodes for a 2-D grid and a random geometric mesh (goal: a 100,000-node mesh in
//! under 5 s on a 2-core machine), plus the 100,000-node chain against its closed form.

use std::time::Instant;

use entrain::graph::Graph;
use entrain::plan::Topology;
use nalgebra::SymmetricEigen;

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
        "{:>8} {:>12} {:>14} {:>8}",
        "nodes", "ours_s", "nalgebra_s", "ratio"
    );
    for n in [200, 1000] {
        let g = geometric_mesh(n, 7);
        let l = g.laplacian_dense().unwrap();
        let (ours, t_ours) = seconds(|| g.dense_spectrum().unwrap());
        let (peer, t_peer) = seconds(|| SymmetricEigen::new(l));
        let mut pv: Vec<f64> = peer.eigenvalues.iter().copied().collect();
        pv.sort_by(f64::total_cmp);
        let diff = ours
            .eigenvalues()
            .iter()
            .zip(&pv)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        println!(
            "{:>8} {:>12.4} {:>14.4} {:>8.3}   (max |Δλ| = {diff:.1e})",
            g.node_count(),
            t_ours,
            t_peer,
            t_ours / t_peer
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
