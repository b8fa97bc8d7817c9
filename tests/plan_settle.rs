//! Settling predictions: the Xiao & Boyd check value, and the worst-case bound against
//! direct simulation of the linear iteration written here.
#![cfg(feature = "plan")]

use entrain::plan::{Model, PlanError, Shape, Spread, Topology, settle};

fn laplacian_step(x: &[f64], kp: f64, edges: &[(usize, usize)]) -> Vec<f64> {
    let mut next = x.to_vec();
    for &(a, b) in edges {
        next[a] += kp * (x[b] - x[a]);
        next[b] += kp * (x[a] - x[b]);
    }
    next
}

fn spread(x: &[f64]) -> f64 {
    x.iter().copied().fold(f64::MIN, f64::max) - x.iter().copied().fold(f64::MAX, f64::min)
}

#[test]
fn xiao_boyd_p5_two_percent_in_19_steps() {
    // Xiao & Boyd 2004: P5 at ε* = 0.5, ρ* = 0.809016994: 2 % in 19 steps,
    // ⌈ln(0.02)/ln ρ⌉ (standard control practice).
    let m = Model::p_only(Shape::Linear, 0.5, 0.01, 1.0);
    let s = settle(
        &m,
        &Topology::Chain { nodes: 5 }.spectrum().unwrap(),
        &Spread {
            initial_spread_s: 0.1,
            tolerance_s: 0.002,
        },
    )
    .unwrap();
    assert_eq!(s.asymptotic_updates, 19);
    assert!((s.asymptotic_s - 0.19).abs() < 1e-12);
    assert!(s.bound_updates.unwrap() >= 19);
}

#[test]
fn bound_holds_in_simulation() {
    // The bound must hold from any start within the spread: try the slow mode itself,
    // alternating extremes and pseudo-random starts, for P (closed-form bound) and PI
    // (recurrence bound; the simulation below includes the trim state).
    let n = 12;
    let edges: Vec<(usize, usize)> = (1..n).map(|i| (i - 1, i)).collect();
    let t = Topology::Chain { nodes: n };
    let sp = t.spectrum().unwrap();
    let (e0, tol) = (0.2, 0.002);
    let mut starts: Vec<Vec<f64>> = Vec::new();
    let mut shape = vec![0.0; n];
    t.slow_mode_shape(&mut shape).unwrap();
    starts.push(shape.iter().map(|v| v * e0 / 2.0).collect());
    starts.push((0..n).map(|i| if i % 2 == 0 { e0 } else { 0.0 }).collect());
    let mut seed = 7u64;
    for _ in 0..20 {
        starts.push(
            (0..n)
                .map(|_| {
                    seed = seed.wrapping_mul(6364136223846793005).wrapping_add(1);
                    (seed >> 11) as f64 / (1u64 << 53) as f64 * e0
                })
                .collect(),
        );
    }
    for (kp, ki) in [(0.3, 0.0), (0.45, 0.0), (0.3, 0.03)] {
        let m = Model {
            ki,
            ..Model::p_only(Shape::Linear, kp, 0.01, 1.0)
        };
        let s = settle(
            &m,
            &sp,
            &Spread {
                initial_spread_s: e0,
                tolerance_s: tol,
            },
        )
        .unwrap();
        let bound = s.bound_updates.unwrap() as usize;
        for x0 in &starts {
            let s0 = spread(x0);
            let mut x = x0.clone();
            let mut v = vec![0.0; n];
            for step in 0..bound + 200 {
                let corrected = laplacian_step(&x, kp, &edges);
                let trim_step = laplacian_step(&x, ki, &edges);
                for i in 0..n {
                    let correction = corrected[i] - x[i];
                    let dv = trim_step[i] - x[i];
                    x[i] += v[i] + correction;
                    v[i] += dv;
                }
                if step + 1 >= bound {
                    assert!(
                        spread(&x) <= tol * s0 / e0 + 1e-15,
                        "kp {kp} ki {ki} step {step}: {}",
                        spread(&x)
                    );
                }
            }
        }
    }
}

#[test]
fn sine_law_estimate_and_warnings() {
    let ring = Topology::Ring { nodes: 16 };
    let m = Model::p_only(Shape::Sine, 0.3, 0.01, 1.0);
    let small = settle(
        &m,
        &ring.spectrum().unwrap(),
        &Spread {
            initial_spread_s: 0.01,
            tolerance_s: 0.0001,
        },
    )
    .unwrap();
    // Small spread: the sinc reduction vanishes and the sine estimate tends to the linear one.
    let sine = small.sine_updates.unwrap() as f64;
    assert!((sine / small.asymptotic_updates as f64 - 1.0).abs() < 0.01);
    let large = settle(
        &m,
        &ring.spectrum().unwrap(),
        &Spread {
            initial_spread_s: 0.45,
            tolerance_s: 0.0001,
        },
    )
    .unwrap();
    // Dörfler & Bullo 2014: sinc(2π·0.45) = sin(0.9π)/(0.9π).
    let want = (0.9 * std::f64::consts::PI).sin() / (0.9 * std::f64::consts::PI);
    assert!((large.sine_rate_factor.unwrap() - want).abs() < 1e-12);
    assert!(large.sine_updates.unwrap() > large.asymptotic_updates);
    assert!(!large.warnings.spread_half_turn_or_more);
    let wound = settle(
        &m,
        &ring.spectrum().unwrap(),
        &Spread {
            initial_spread_s: 0.6,
            tolerance_s: 0.0001,
        },
    )
    .unwrap();
    assert!(wound.warnings.spread_half_turn_or_more && wound.warnings.twisted_states_possible);
    assert_eq!(wound.sine_updates, None);
}

#[test]
fn bad_spreads_are_errors() {
    let sp = Topology::Chain { nodes: 5 }.spectrum().unwrap();
    let m = Model::p_only(Shape::Linear, 0.3, 0.01, 1.0);
    assert_eq!(
        settle(
            &m,
            &sp,
            &Spread {
                initial_spread_s: 0.1,
                tolerance_s: 0.1
            }
        ),
        Err(PlanError::ToleranceNotBelowSpread)
    );
    assert_eq!(
        settle(
            &m,
            &sp,
            &Spread {
                initial_spread_s: 0.1,
                tolerance_s: 0.2
            }
        ),
        Err(PlanError::ToleranceNotBelowSpread)
    );
    assert!(matches!(
        settle(
            &m,
            &sp,
            &Spread {
                initial_spread_s: f64::NAN,
                tolerance_s: 0.01
            }
        ),
        Err(PlanError::InvalidParameter { .. })
    ));
    assert!(matches!(
        settle(
            &m,
            &sp,
            &Spread {
                initial_spread_s: 0.1,
                tolerance_s: -1.0
            }
        ),
        Err(PlanError::InvalidParameter { .. })
    ));
    let unstable = Model::p_only(Shape::Linear, 0.6, 0.01, 1.0);
    assert_eq!(
        settle(
            &unstable,
            &sp,
            &Spread {
                initial_spread_s: 0.1,
                tolerance_s: 0.01
            }
        ),
        Err(PlanError::Unstable)
    );
}

#[test]
fn delayed_bound_holds_in_simulation() {
    // x⁺ = x − kp·L·x[t−d], history constant before the start (the model's convention).
    let n = 10;
    let edges: Vec<(usize, usize)> = (1..n).map(|i| (i - 1, i)).collect();
    let sp = Topology::Chain { nodes: n }.spectrum().unwrap();
    let (e0, tol) = (0.2, 0.002);
    for (kp, d) in [(0.1, 1u32), (0.08, 2), (0.2, 1)] {
        let m = Model {
            delay_updates: d,
            ..Model::p_only(Shape::Linear, kp, 0.01, 1.0)
        };
        let s = settle(
            &m,
            &sp,
            &Spread {
                initial_spread_s: e0,
                tolerance_s: tol,
            },
        )
        .unwrap();
        let bound = s.bound_updates.unwrap() as usize;
        assert!(bound >= s.asymptotic_updates as usize / 2);
        let mut seed = 3u64;
        for trial in 0..12 {
            let x0: Vec<f64> = (0..n)
                .map(|i| {
                    seed = seed
                        .wrapping_mul(6364136223846793005)
                        .wrapping_add(1442695040888963407);
                    if trial == 0 {
                        if i < n / 2 { e0 } else { 0.0 }
                    } else {
                        (seed >> 11) as f64 / (1u64 << 53) as f64 * e0
                    }
                })
                .collect();
            let s0 = spread(&x0);
            let mut history: Vec<Vec<f64>> = vec![x0.clone(); d as usize + 1];
            for step in 0..bound + 300 {
                let now = history.last().unwrap().clone();
                let old = &history[history.len() - 1 - d as usize];
                let pulled = laplacian_step(old, kp, &edges);
                let next: Vec<f64> = (0..n).map(|i| now[i] + pulled[i] - old[i]).collect();
                history.push(next);
                if history.len() > d as usize + 1 {
                    history.remove(0);
                }
                if step + 1 >= bound {
                    let x = history.last().unwrap();
                    assert!(
                        spread(x) <= tol * s0 / e0 + 1e-15,
                        "kp {kp} d {d} step {step}: {}",
                        spread(x)
                    );
                }
            }
        }
    }
}
