//! Detuning and lock against Strogatz & Mirollo's chain condition, a direct simulation of
//! the sine law written here, brute force over crystal patterns, and nalgebra's
//! pseudo-inverse for the general-graph flow factor.
#![cfg(feature = "plan")]

use std::f64::consts::PI;

use entrain::plan::{
    Model, PlanError, Shape, Topology, chain_lock, kp_lock_minimum, lock_worst_case,
    pinned_chain_lock, worst_chain_pattern,
};
use nalgebra::DMatrix;

/// A model in which 1 ppm of crystal error is 1 turn per update (T/P = 1e6).
fn unit_model(law: Shape, kp: f64) -> Model {
    Model::p_only(law, kp, 1.0, 1e-6)
}

#[test]
fn strogatz_mirollo_critical_coupling() {
    // Strogatz & Mirollo, Physica D 31 (1988): ω = [1.0, 0.2, −0.5, −0.7] ⇒ K_c = 1.2.
    let omega = [1.0, 0.2, -0.5, -0.7];
    let mut offsets = [0.0; 3];
    let kc = 1.2;
    let above = chain_lock(
        &unit_model(Shape::Sine, 2.0 * PI * kc * 1.001),
        &omega,
        &mut offsets,
    )
    .unwrap();
    assert!(above.locks);
    assert!((above.edge_flow_turns_per_update - kc).abs() < 1e-12);
    let below = chain_lock(
        &unit_model(Shape::Sine, 2.0 * PI * kc * 0.999),
        &omega,
        &mut offsets,
    )
    .unwrap();
    assert!(!below.locks);
    // Edge offsets −arcsin(S_k/K)/(2π) with S = [1.0, 1.2, 0.7] (partial sums by hand).
    let k = 2.0;
    let kp = 2.0 * PI * k;
    let got = chain_lock(&unit_model(Shape::Sine, kp), &omega, &mut offsets).unwrap();
    assert!(got.locks);
    for (o, s) in offsets.iter().zip([1.0f64, 1.2, 0.7]) {
        assert!((o - (-(s / k).asin() / (2.0 * PI))).abs() < 1e-12);
    }
    // Linear law: offsets −S_k/kp, lock iff below ½ turn.
    let lin = chain_lock(&unit_model(Shape::Linear, 3.0), &omega, &mut offsets).unwrap();
    assert!(lin.locks && (offsets[1] + 0.4).abs() < 1e-12);
    assert!(
        !chain_lock(&unit_model(Shape::Linear, 2.4), &omega, &mut offsets)
            .unwrap()
            .locks
    );
}

#[test]
fn sine_offsets_match_simulation() {
    // Run the sine law θ_i += ω_i + kp Σ sin(2π(θ_j − θ_i))/(2π) to its locked state.
    let omega = [0.004, -0.001, 0.002, -0.003, -0.002];
    let kp = 0.3;
    let m = unit_model(Shape::Sine, kp);
    let mut offsets = [0.0; 4];
    let lock = chain_lock(&m, &omega, &mut offsets).unwrap();
    assert!(lock.locks);
    let mut th = [0.0f64; 5];
    for _ in 0..20000 {
        let old = th;
        for i in 0..5usize {
            let mut c = 0.0;
            for j in [i.wrapping_sub(1), i + 1] {
                if j < 5 {
                    c += (2.0 * PI * (old[j] - old[i])).sin() / (2.0 * PI);
                }
            }
            th[i] = old[i] + omega[i] + kp * c;
        }
    }
    for k in 0..4 {
        assert!((th[k + 1] - th[k] - offsets[k]).abs() < 1e-9, "edge {k}");
    }
}

#[test]
fn pinned_offsets_match_simulation() {
    let omega = [0.002, -0.001, 0.003];
    let kp = 0.4;
    let mut offsets = [0.0; 3];
    let lock = pinned_chain_lock(&unit_model(Shape::Sine, kp), &omega, &mut offsets).unwrap();
    assert!(lock.locks);
    let mut th = [0.0f64; 4]; // th[0] is the reference, never moves
    for _ in 0..20000 {
        let old = th;
        for i in 1..4 {
            let mut c = (2.0 * PI * (old[i - 1] - old[i])).sin() / (2.0 * PI);
            if i + 1 < 4 {
                c += (2.0 * PI * (old[i + 1] - old[i])).sin() / (2.0 * PI);
            }
            th[i] = old[i] + omega[i - 1] + kp * c;
        }
    }
    for k in 0..3 {
        assert!((th[k + 1] - th[k] - offsets[k]).abs() < 1e-9, "edge {k}");
    }
}

#[test]
fn worst_chain_pattern_is_worst_by_brute_force() {
    // Every ±w pattern of N ≤ 10 nodes: none loads an edge beyond the closed form.
    for n in 2..=10 {
        let w = 1.0;
        let mut worst = 0.0f64;
        let mut offsets = vec![0.0; n - 1];
        for bits in 0u32..(1 << n) {
            let omega: Vec<f64> = (0..n)
                .map(|i| if bits >> i & 1 == 1 { w } else { -w })
                .collect();
            let l = chain_lock(&unit_model(Shape::Sine, 100.0), &omega, &mut offsets).unwrap();
            worst = worst.max(l.edge_flow_turns_per_update);
        }
        let factor = Topology::Chain { nodes: n }.worst_flow_factor().unwrap();
        assert!((worst - factor * w).abs() < 1e-12, "n = {n}");
        let mut pattern = vec![0.0; n];
        worst_chain_pattern(w, false, &mut pattern).unwrap();
        let l = chain_lock(&unit_model(Shape::Sine, 100.0), &pattern, &mut offsets).unwrap();
        assert!((l.edge_flow_turns_per_update - factor * w).abs() < 1e-12);
    }
}

fn ring_pinv(n: usize) -> DMatrix<f64> {
    let mut l = DMatrix::zeros(n, n);
    for i in 0..n {
        let j = (i + 1) % n;
        l[(i, i)] += 1.0;
        l[(j, j)] += 1.0;
        l[(i, j)] -= 1.0;
        l[(j, i)] -= 1.0;
    }
    l.pseudo_inverse(1e-10).unwrap()
}

#[test]
fn ring_flow_factor_matches_pseudo_inverse() {
    // Dörfler, Chertkov & Bullo 2013: worst flow = max_e ‖L† b_e‖₁ (nalgebra pseudo-inverse).
    for n in [3, 4, 7, 10, 25] {
        let p = ring_pinv(n);
        let load: f64 = (0..n).map(|i| (p[(i, 0)] - p[(i, 1)]).abs()).sum();
        let closed = Topology::Ring { nodes: n }.worst_flow_factor().unwrap();
        assert!((load - closed).abs() < 1e-9, "n = {n}: {load} vs {closed}");
    }
}

#[test]
fn worst_case_verdict_and_pi_trims() {
    let t = Topology::Chain { nodes: 8 };
    let sp = t.spectrum().unwrap();
    // 10 Hz updates, 1 ms phase period: 20 ppm is 2e-3 turns per update.
    let m = Model::p_only(Shape::Sine, 0.2, 0.1, 1e-3);
    let f = t.worst_flow_factor().unwrap();
    let l = lock_worst_case(&m, &sp, f, 20.0).unwrap();
    assert!((l.edge_flow_turns_per_update - 2e-3 * 4.0).abs() < 1e-15);
    assert_eq!(l.locks, 2e-3 * 4.0 <= 0.2 / (2.0 * PI));
    let kmin = kp_lock_minimum(&m, f, 20.0);
    assert!(
        lock_worst_case(
            &Model {
                kp: kmin * 1.0001,
                ..m
            },
            &sp,
            f,
            20.0
        )
        .unwrap()
        .locks
    );
    assert!(
        !lock_worst_case(
            &Model {
                kp: kmin * 0.9999,
                ..m
            },
            &sp,
            f,
            20.0
        )
        .unwrap()
        .locks
    );
    // PI: zero offset; trims span ē − e_i.
    let pi = Model {
        ki: 0.02,
        trim_limit_ppm: 50.0,
        ..m
    };
    let mut offsets = [0.0; 3];
    let l = chain_lock(&pi, &[10.0, -5.0, 3.0, -8.0], &mut offsets).unwrap();
    assert_eq!(offsets, [0.0; 3]);
    assert!((l.trim_min_ppm - (0.0 - 10.0)).abs() < 1e-12 && (l.trim_max_ppm - 8.0).abs() < 1e-12);
    assert!(l.locks && l.max_edge_lag_turns == 0.0);
    let tight = Model {
        trim_limit_ppm: 5.0,
        ..pi
    };
    assert!(
        !chain_lock(&tight, &[10.0, -5.0, 3.0, -8.0], &mut offsets)
            .unwrap()
            .locks
    );
    // Slew limit below the needed correction: no lock.
    let slow = Model {
        slew_limit_turns: 1e-4,
        ..Model::p_only(Shape::Sine, 2.0, 0.1, 1e-3)
    };
    assert!(
        !chain_lock(&slow, &[10.0, -5.0, 3.0, -8.0], &mut offsets)
            .unwrap()
            .slew_ok
    );
}

#[test]
fn bad_lock_inputs_are_errors() {
    let m = unit_model(Shape::Sine, 1.0);
    let mut out = [0.0; 1];
    assert!(matches!(
        chain_lock(&m, &[1.0], &mut []),
        Err(PlanError::TooFewNodes { .. })
    ));
    assert!(matches!(
        chain_lock(&m, &[1.0, 2.0, 3.0], &mut out),
        Err(PlanError::WrongLength { needed: 2, got: 1 })
    ));
    assert!(matches!(
        chain_lock(&m, &[1.0, f64::NAN], &mut out),
        Err(PlanError::InvalidParameter { .. })
    ));
    assert!(worst_chain_pattern(-1.0, false, &mut out).is_err());
    let sp = Topology::Chain { nodes: 3 }.spectrum().unwrap();
    assert!(lock_worst_case(&m, &sp, 1.0, f64::NAN).is_err());
    assert!(lock_worst_case(&unit_model(Shape::Sine, -1.0), &sp, 1.0, 1.0).is_err());
}
