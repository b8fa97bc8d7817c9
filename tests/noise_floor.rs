//! The noise floor (steady largest pairwise phase error) held against the linearised
//! network's steady covariance, computed here from the node law as documented and from
//! nothing in the crate but the Laplacian of the links:
//!
//! - state deviation from the network mean, per update (P law: `ki = 0`):
//!   `θ⁺ = θ + v − kp(Lθ − u)`, `v⁺ = v − ki(Lθ − u)`, where `u_i = Σ_j η_ij` sums node
//!   i's independent timestamp errors on its `deg_i` neighbours (so `Cov(u) = σ²·D`);
//! - the steady covariance solves the discrete Lyapunov equation `S = A S Aᵀ + G Q Gᵀ`
//!   (standard control practice), solved by the doubling iteration on the subspace
//!   orthogonal to the common mode (which the error does not see);
//! - the largest pairwise error of a Gaussian phase vector with that covariance, sampled,
//!   gives p50 and p99.
//!
//! Both the simulator (the real node code) and the forecast (the crate's independent
//! model) must land within ±5 % (p50) and ±8 % (p99) of it (measured: within 2.5 %). Timestamp errors are
//! uniform whole ticks on [−J, J], variance J(J+1)/3 ticks² (the discrete uniform law).
#![cfg(feature = "sim")]

use entrain::forecast::forecast;
use entrain::plan::Topology;
use entrain::sim::{Beacons, Crystals, Links, Schedule, Setup, StartPhases, monte_carlo};
use entrain::{Config, Gain, Law};
use nalgebra::{DMatrix, DVector, SymmetricEigen};
use rand::{Rng, SeedableRng};

/// Ticks per update and per turn (1 MHz timer: 100 updates/s, a 10 ms turn).
const M: u32 = 10_000;
const T: u32 = 10_000;

struct Case {
    name: &'static str,
    links: Links,
    law: Law,
    kp: f64,
    ki: f64,
    jitter_ticks: u32,
}

fn laplacian(links: &Links) -> DMatrix<f64> {
    let n = links.nodes();
    let mut l = DMatrix::<f64>::zeros(n, n);
    for &(a, b) in links.pairs() {
        l[(a, b)] -= 1.0;
        l[(b, a)] -= 1.0;
        l[(a, a)] += 1.0;
        l[(b, b)] += 1.0;
    }
    l
}

/// Steady covariance of the phase deviations (turns²).
fn phase_covariance(case: &Case) -> DMatrix<f64> {
    let l = laplacian(&case.links);
    let n = l.nrows();
    let j = f64::from(case.jitter_ticks);
    let sigma2 = j * (j + 1.0) / 3.0 / f64::from(T).powi(2);
    let eye = DMatrix::<f64>::identity(n, n);
    let centre = &eye - DMatrix::<f64>::from_element(n, n, 1.0 / n as f64);
    // A on (θ, v) (on θ alone for the P law, whose v stays 0), the projector onto
    // deviations from the mean, and the noise input G u with G = [kp·I; ki·I] and
    // Cov(u) = σ²·diag(degree).
    let dim = if case.ki > 0.0 { 2 * n } else { n };
    let mut a = DMatrix::<f64>::zeros(dim, dim);
    let mut p2 = DMatrix::<f64>::zeros(dim, dim);
    let mut g = DMatrix::<f64>::zeros(dim, n);
    a.view_mut((0, 0), (n, n)).copy_from(&(&eye - &l * case.kp));
    p2.view_mut((0, 0), (n, n)).copy_from(&centre);
    g.view_mut((0, 0), (n, n)).copy_from(&(&eye * case.kp));
    if dim == 2 * n {
        a.view_mut((0, n), (n, n)).copy_from(&eye);
        a.view_mut((n, 0), (n, n)).copy_from(&(-&l * case.ki));
        a.view_mut((n, n), (n, n)).copy_from(&eye);
        p2.view_mut((n, n), (n, n)).copy_from(&centre);
        g.view_mut((n, 0), (n, n)).copy_from(&(&eye * case.ki));
    }
    let degree = DMatrix::<f64>::from_diagonal(&l.diagonal());
    let w = &p2 * &g * (degree * sigma2) * g.transpose() * &p2;
    // Doubling: S_{k+1} = S_k + A_k S_k A_kᵀ, A_{k+1} = A_k², on the deviation subspace.
    let mut ak = &a * &p2;
    let mut s = w;
    for _ in 0..40 {
        s = &s + &ak * &s * ak.transpose();
        ak = &ak * &ak;
    }
    assert!(
        ak.norm() < 1e-9,
        "{}: the deviation dynamics must decay",
        case.name
    );
    s.view((0, 0), (n, n)).into_owned()
}

/// p50 and p99 of max − min of a Gaussian vector with covariance `c` (turns).
fn gaussian_range_quantiles(c: &DMatrix<f64>, samples: usize, seed: u64) -> (f64, f64) {
    let n = c.nrows();
    let eig = SymmetricEigen::new(c.clone());
    let scale: Vec<f64> = eig.eigenvalues.iter().map(|v| v.max(0.0).sqrt()).collect();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let mut ranges = Vec::with_capacity(samples);
    for _ in 0..samples {
        // Box–Muller normals.
        let z = DVector::<f64>::from_fn(n, |k, _| {
            let u1: f64 = rng.random::<f64>().max(1e-300);
            let u2: f64 = rng.random();
            (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos() * scale[k]
        });
        let x = &eig.eigenvectors * z;
        ranges.push(x.max() - x.min());
    }
    ranges.sort_by(f64::total_cmp);
    let q = |p: f64| ranges[((p * (samples - 1) as f64).round()) as usize];
    (q(0.5), q(0.99))
}

fn setup(case: &Case) -> Setup {
    let config = Config::builder(T, M)
        .law(case.law)
        .kp(Gain::from_f32(case.kp as f32).unwrap())
        .ki(Gain::from_f32(case.ki as f32).unwrap())
        .trim_limit_ppb(500_000)
        .timeout_ticks(M * 20)
        .build()
        .unwrap();
    let mut s = Setup::new(case.links.clone(), config, 1e6);
    s.start = StartPhases::Uniform { spread_turns: 0.02 };
    s.crystals = Crystals::Identical { ppm: 0.0 };
    s.schedule = Schedule::LOCK_STEP;
    s.beacons = Beacons {
        latency_ticks: 0,
        timestamp_jitter_ticks: case.jitter_ticks,
        success_prob: 1.0,
        ..Beacons::IDEAL
    };
    // The band is far above the floor, so every run settles early and the steady window
    // is long.
    s.settle.tolerance_turns = 0.05;
    s.horizon_updates = 6_000;
    s
}

fn within(got: f64, want: f64, rel: f64) -> bool {
    (got - want).abs() <= rel * want
}

#[test]
fn noise_floor_matches_the_linearised_steady_covariance() {
    let topo = |t: Topology| Links::from_topology(&t).unwrap();
    let cases = [
        Case {
            name: "ring 12, linear, P",
            links: topo(Topology::Ring { nodes: 12 }),
            law: Law::Linear,
            kp: 0.3,
            ki: 0.0,
            jitter_ticks: 20,
        },
        Case {
            name: "chain 10, sine, P (irregular degrees)",
            links: topo(Topology::Chain { nodes: 10 }),
            law: Law::Sine,
            kp: 0.4,
            ki: 0.0,
            jitter_ticks: 30,
        },
        Case {
            name: "star 8, linear, P (hub of degree 7)",
            links: topo(Topology::Star { nodes: 8 }),
            law: Law::Linear,
            kp: 0.2,
            ki: 0.0,
            jitter_ticks: 20,
        },
        Case {
            name: "ring 12, sine, PI",
            links: topo(Topology::Ring { nodes: 12 }),
            law: Law::Sine,
            kp: 0.3,
            ki: 0.03,
            jitter_ticks: 20,
        },
    ];
    let mut failures = Vec::new();
    for case in &cases {
        let cov = phase_covariance(case);
        let (want50, want99) = gaussian_range_quantiles(&cov, 40_000, 11);
        let s = setup(case);
        let sim = monte_carlo(&s, 40, 5, &|_| {}).unwrap();
        let sim_floor = sim.noise_floor_turns.expect("steady windows");
        let fc = forecast(&s, 40, 5).unwrap();
        println!(
            "{:40} covariance p50 {:.3e} p99 {:.3e} | simulator {:.3e} {:.3e} | forecast {:.3e} {:.3e}",
            case.name,
            want50,
            want99,
            sim_floor.p50,
            sim_floor.p99,
            fc.noise_floor_turns.p50,
            fc.noise_floor_turns.p99
        );
        for (who, p50, p99) in [
            ("simulator", sim_floor.p50, sim_floor.p99),
            (
                "forecast",
                fc.noise_floor_turns.p50,
                fc.noise_floor_turns.p99,
            ),
        ] {
            if !within(p50, want50, 0.05) || !within(p99, want99, 0.08) {
                failures.push(format!(
                    "{}: {who} p50 {p50:.3e} p99 {p99:.3e} against covariance {want50:.3e} {want99:.3e}",
                    case.name
                ));
            }
        }
    }
    assert!(failures.is_empty(), "{failures:#?}");
}
