//! λ2 and λmax of big graphs by the sparse path; prints figures
//! (`cargo bench --features check --bench big_spectra`).
//!
//! Each case runs in a child process of this bench, so that its peak memory (`VmHWM` of
//! `/proc/self/status`, read by the child at its end) is its own. Goals (issue 13): each
//! case under 10 s and 2 GB on this machine, relative error at most 1e-9 against the
//! closed forms. The closed forms use `4·sin²(x/2)`, not `2 − 2cos x`, which cancels at
//! this size. Path P_n: λ_k = 4·sin²(kπ/(2n)), k = 0..n−1 (Fiedler 1973; Brouwer &
//! Haemers, *Spectra of Graphs* §1.4); the r×c grid is the Cartesian product P_r □ P_c,
//! whose eigenvalues are the sums λ_i(P_r) + λ_j(P_c) (Brouwer & Haemers §1.4.6, from
//! memory of the section number). The random geometric mesh has no closed form: its
//! reference is a second run of the same solver at tolerance 1e-13 with another seed and
//! a larger basis (a check of self-consistency, not of correctness).
//!
//! Baseline measured in the same run: one sparse Cholesky factorisation of the grounded
//! Laplacian of the same graph; the ratio says how many factorisations the whole solve
//! costs.

use std::f64::consts::PI;
use std::process::Command;
use std::time::Instant;

use entrain::graph::{Graph, SparseOptions};
use entrain::plan::Topology;

#[path = "common/mod.rs"]
mod common;

const CASES: [&str; 5] = ["chain", "grid", "thin", "ladder", "mesh"];

fn path_eigen(n: usize, k: usize) -> f64 {
    let s = (k as f64 * PI / (2.0 * n as f64)).sin();
    4.0 * s * s
}

/// The case's graph, a label and the (λ2, λmax) to compare against (`None`: no closed form).
fn case(name: &str) -> (Graph, String, Option<(f64, f64)>) {
    let grid = |rows: usize, cols: usize| {
        let g = Graph::from_topology(&Topology::Grid { rows, cols }).unwrap();
        let lambda2 = path_eigen(rows.max(cols), 1);
        let top = path_eigen(rows, rows - 1) + path_eigen(cols, cols - 1);
        (g, format!("grid {rows}×{cols}"), Some((lambda2, top)))
    };
    match name {
        "chain" => {
            let n = 1_000_000;
            let g = Graph::from_topology(&Topology::Chain { nodes: n }).unwrap();
            (
                g,
                "chain 1,000,000".into(),
                Some((path_eigen(n, 1), path_eigen(n, n - 1))),
            )
        }
        "grid" => grid(1000, 1000),
        "thin" => grid(10, 100_000),
        "ladder" => grid(2, 500_000),
        "mesh" => {
            let g = common::geometric_mesh(100_000, 11);
            let label = format!("mesh {} (random geometric)", g.node_count());
            (g, label, None)
        }
        _ => panic!("unknown case {name}"),
    }
}

fn peak_mb() -> f64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse::<f64>().ok())
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

fn child(name: &str) {
    let (g, label, closed) = case(name);
    // Baseline: one grounded factorisation, through the public flow solve (a factorisation
    // and one solve).
    let drift: Vec<f64> = (0..g.node_count()).map(|i| (i % 7) as f64).collect();
    let t0 = Instant::now();
    let _ = g.edge_flows(&drift).unwrap();
    let baseline = t0.elapsed().as_secs_f64();
    let t0 = Instant::now();
    let s = g.sparse_spectrum().unwrap();
    let secs = t0.elapsed().as_secs_f64();
    let peak = peak_mb();
    let (reference, how) = match closed {
        Some(c) => (c, "closed form"),
        None => {
            let tight = SparseOptions {
                tolerance: 1e-13,
                max_basis: 60,
                seed: 77,
                ..SparseOptions::default()
            };
            let r = g.sparse_spectrum_with(&tight).unwrap();
            ((r.lambda2, r.lambda_max), "tight rerun")
        }
    };
    let e2 = ((s.lambda2 - reference.0) / reference.0).abs();
    let emax = ((s.lambda_max - reference.1) / reference.1).abs();
    let goal = secs < 10.0 && peak < 2048.0 && e2 <= 1e-9 && emax <= 1e-9;
    println!(
        "{label:<30} {:>9} {:>8.2} {:>8.0} {:>7.1} {:>9.1e} {:>9.1e} {:>9.1e} {:>9.1e} {:>5} {:>3}  {how:<11} {}",
        g.node_count(),
        secs,
        peak,
        secs / baseline,
        e2,
        emax,
        s.lambda2_error_bound / s.lambda2,
        (s.lambda_max_upper - s.lambda_max_lower) / s.lambda_max_lower,
        s.operator_applications,
        s.factorizations,
        if goal { "met" } else { "NOT MET" },
    );
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--case") {
        child(&args[i + 1]);
        return;
    }
    println!("sparse λ2 and λmax (goal: < 10 s, < 2 GB, relative error ≤ 1e-9)");
    println!(
        "{:<30} {:>9} {:>8} {:>8} {:>7} {:>9} {:>9} {:>9} {:>9} {:>5} {:>3}  {:<11} goal",
        "graph",
        "nodes",
        "time_s",
        "peak_MB",
        "×fact",
        "err_λ2",
        "err_λmax",
        "bound_λ2",
        "bound_max",
        "solves",
        "fac",
        "reference"
    );
    let only: Vec<&String> = args
        .iter()
        .skip(1)
        .filter(|a| !a.starts_with('-'))
        .collect();
    let exe = std::env::current_exe().unwrap();
    for name in CASES {
        if !only.is_empty() && !only.iter().any(|o| o.as_str() == name) {
            continue;
        }
        let out = Command::new(&exe).args(["--case", name]).output().unwrap();
        print!("{}", String::from_utf8_lossy(&out.stdout));
        if !out.status.success() {
            println!(
                "{name}: failed: {}",
                String::from_utf8_lossy(&out.stderr).trim()
            );
        }
    }
}
