//! Noise coherence (Bamieh et al. 2012; Lyapunov solution by nalgebra) and the gain tuner.
#![cfg(feature = "plan")]

use entrain::plan::{
    Budget, Infeasibility, MIN_GAIN_MARGIN, Margins, Model, PlanError, Search, Shape, Spread,
    Topology, continuous_coherence, mode_variance, phase_jitter, predicted_lock_s, settle,
    stability, tune, tune_topology,
};
use nalgebra::{DMatrix, DVector};

#[test]
fn bamieh_p5_coherence() {
    // Bamieh, Jovanović, Mitra & Patterson, IEEE TAC 57 (2012): (σ²/2N)·Σ1/λ, P5: 0.4.
    let t = Topology::Chain { nodes: 5 };
    assert!(
        (continuous_coherence(1.0, 5, t.sum_inverse_eigenvalues().unwrap()) - 0.4).abs() < 1e-12
    );
    // The discrete per-mode variance tends to it for small gains: kp/(2λ) per mode.
    let kp = 1e-5;
    let discrete: f64 = t
        .nonzero_modes()
        .map(|l| mode_variance(kp, 0.0, l) / kp)
        .sum::<f64>()
        / 5.0;
    assert!((discrete - 0.4).abs() < 1e-4, "{discrete}");
}

#[test]
fn pi_mode_variance_matches_lyapunov() {
    // Σ = AΣAᵀ + BBᵀ solved by nalgebra through (I − A⊗A)·vec Σ = vec(BBᵀ).
    for (kp, ki, lambda) in [(0.3, 0.05, 0.7), (0.1, 0.01, 2.0), (0.45, 0.2, 1.3)] {
        let a = DMatrix::from_row_slice(2, 2, &[1.0 - kp * lambda, 1.0, -ki * lambda, 1.0]);
        let b = DVector::from_vec(vec![kp, ki]);
        let q = &b * b.transpose();
        let k = DMatrix::identity(4, 4) - a.kronecker(&a);
        let vec_q = DVector::from_iterator(4, q.iter().copied());
        let sigma = k.lu().solve(&vec_q).unwrap();
        assert!(
            (mode_variance(kp, ki, lambda) - sigma[0]).abs() < 1e-10 * sigma[0],
            "{kp} {ki} {lambda}"
        );
    }
}

#[test]
fn ring_jitter_scales_with_timestamp_jitter() {
    // Ring (regular, degree 2): per-node variance = 2(σ/P)²·(1/N)Σ mode variances.
    let t = Topology::Ring { nodes: 10 };
    let m = Model::p_only(Shape::Linear, 0.25, 0.1, 1e-3);
    let n = phase_jitter(&m, &t.spectrum().unwrap(), t.nonzero_modes(), 1e-6).unwrap();
    let sum: f64 = t
        .nonzero_modes()
        .map(|l| 0.25f64.powi(2) / (1.0 - (1.0 - 0.25 * l).powi(2)))
        .sum();
    let want = (2.0 * 1e-6f64.powi(2) * sum / 10.0).sqrt(); // in turns·P = seconds
    assert!((n.phase_sd_s - want).abs() < 1e-12 * want.max(1e-30) + 1e-18);
    assert!(phase_jitter(&m, &t.spectrum().unwrap(), t.nonzero_modes(), -1.0).is_err());
    assert!(phase_jitter(&m, &t.spectrum().unwrap(), [f64::NAN], 1e-6).is_err());
}

fn string_budget(budget_s: f64, ppm: f64) -> Budget {
    Budget {
        lock_time_budget_s: budget_s,
        spread: Spread {
            initial_spread_s: 4e-4,
            tolerance_s: 1e-5,
        },
        crystal_tolerance_ppm: ppm,
        margins: Margins::default(),
    }
}

/// The predicted lock time as the tuner defines it.
fn lock(_: &Model, s: &entrain::plan::Settling) -> f64 {
    predicted_lock_s(s)
}

#[test]
fn tuner_recommends_gains_that_meet_the_budget() {
    let t = Topology::Chain { nodes: 16 };
    let template = Model::p_only(Shape::Sine, 0.1, 0.1, 1e-3);
    let tuning = tune_topology(
        &template,
        &t,
        &string_budget(600.0, 20.0),
        Search::Kp { ki: 0.0 },
        &mut lock,
    )
    .unwrap();
    assert!(tuning.feasible && tuning.infeasibility.is_none());
    let r = tuning.recommended.unwrap();
    let (lo, hi) = tuning.meeting_budget_and_margins.kp.unwrap();
    // The ranges say what they are: a P-law search sweeps kp alone.
    assert!(tuning.meeting_budget_and_margins.ki_over_kp.is_none());
    let (blo, bhi) = tuning.meeting_budget.kp.unwrap();
    assert!(blo <= lo && hi <= bhi);
    assert!(lo <= r.kp && r.kp <= hi);
    // Re-check the recommendation with the independent entry points.
    let m = Model {
        kp: r.kp,
        ..template
    };
    let sp = t.spectrum().unwrap();
    let st = stability(&m, &sp).unwrap();
    assert!(st.stable && st.gain_margin >= MIN_GAIN_MARGIN * 0.999);
    let s = settle(&m, &sp, &string_budget(600.0, 20.0).spread).unwrap();
    assert!(s.bound_s.unwrap() <= 600.0);
    assert!(r.locking.unwrap().locks);
    // The fastest stable gains are at least as fast as the recommendation.
    assert!(tuning.fastest.unwrap().lock_s <= r.lock_s);
}

#[test]
fn tuner_explains_a_short_budget() {
    let t = Topology::Chain { nodes: 64 };
    let template = Model::p_only(Shape::Sine, 0.1, 0.1, 1e-3);
    let tuning = tune_topology(
        &template,
        &t,
        &string_budget(5.0, 20.0),
        Search::Kp { ki: 0.0 },
        &mut lock,
    )
    .unwrap();
    assert!(!tuning.feasible);
    assert_eq!(tuning.infeasibility, Some(Infeasibility::BudgetTooShort));
    let fastest = tuning.fastest.unwrap().lock_s;
    assert!(fastest > 5.0);
    assert!((tuning.alternatives.update_rate_factor - fastest / 5.0).abs() < 1e-9 * fastest);
    // A reference in the middle leaves the slowest rate unchanged: the free chain's slow
    // mode is antisymmetric with a node at the centre, so λ2(P_{2m+1}) = λ1(pinned m)
    // (Fiedler 1973 vs Yueh 2005); only the projection constant differs.
    let middle = tuning.alternatives.middle_reference_lock_s.unwrap();
    assert!(
        (middle / fastest - 1.0).abs() < 0.1,
        "{middle} vs {fastest}"
    );
    // Splitting the chain in two quarters λ2's inverse: much faster.
    assert!(tuning.alternatives.split_in_two_lock_s.unwrap() < 0.5 * fastest);
}

#[test]
fn tuner_reports_cannot_lock_and_pi_trims() {
    let t = Topology::Chain { nodes: 16 };
    let template = Model::p_only(Shape::Sine, 0.1, 0.1, 1e-3);
    let tuning = tune_topology(
        &template,
        &t,
        &string_budget(600.0, 5e4),
        Search::Kp { ki: 0.0 },
        &mut lock,
    )
    .unwrap();
    assert_eq!(tuning.infeasibility, Some(Infeasibility::CannotLock));
    // The PI law needs no lock capacity, only trims.
    let pi = Model {
        ki: 0.01,
        trim_limit_ppm: 200.0,
        ..template
    };
    let ok = tune_topology(
        &pi,
        &t,
        &string_budget(600.0, 50.0),
        Search::Both,
        &mut lock,
    )
    .unwrap();
    assert!(ok.feasible, "{ok:?}");
    let r = ok.recommended.unwrap();
    assert!(r.ki > 0.0 && r.ki < r.kp);
    let (klo, khi) = ok.meeting_budget_and_margins.ki_over_kp.unwrap();
    let ratio = r.ki / r.kp;
    assert!(
        klo <= ratio * 1.001 && ratio <= khi * 1.001,
        "{klo} {ratio} {khi}"
    );
}

#[test]
fn tuner_bad_inputs_are_errors() {
    let sp = Topology::Chain { nodes: 5 }.spectrum().unwrap();
    let m = Model::p_only(Shape::Sine, 0.1, 0.1, 1e-3);
    assert!(matches!(
        tune(
            &m,
            &sp,
            None,
            &string_budget(0.0, 1.0),
            Search::Kp { ki: 0.0 }
        ),
        Err(PlanError::InvalidParameter { .. })
    ));
    assert!(matches!(
        tune(
            &m,
            &sp,
            None,
            &string_budget(f64::NAN, 1.0),
            Search::Kp { ki: 0.0 }
        ),
        Err(PlanError::InvalidParameter { .. })
    ));
    assert!(matches!(
        tune(
            &m,
            &sp,
            None,
            &string_budget(1.0, -1.0),
            Search::Kp { ki: 0.0 }
        ),
        Err(PlanError::InvalidParameter { .. })
    ));
    let mut b = string_budget(1.0, 1.0);
    b.spread.tolerance_s = 1.0;
    assert_eq!(
        tune(&m, &sp, None, &b, Search::Kp { ki: 0.0 }),
        Err(PlanError::ToleranceNotBelowSpread)
    );
    assert!(
        tune(
            &Model {
                update_period_s: 0.0,
                ..m
            },
            &sp,
            None,
            &string_budget(1.0, 1.0),
            Search::Kp { ki: 0.0 }
        )
        .is_err()
    );
}

/// Best constant step of the consensus iteration (Xiao & Boyd, Systems & Control Letters
/// 53 (2004)): ε* = 2/(λ2 + λmax), checked against a brute-force minimisation of the
/// convergence factor max(|1 − ελ2|, |1 − ελmax|) on a 37-node chain's closed-form
/// spectrum (path graph: λ_k = 4·sin²(kπ/2N), Brouwer & Haemers 2012 §1.4).
#[test]
fn optimal_step_minimises_the_convergence_factor() {
    let n = 37.0_f64;
    let l2 = 4.0 * (std::f64::consts::PI / (2.0 * n)).sin().powi(2);
    let lmax = 4.0 * ((n - 1.0) * std::f64::consts::PI / (2.0 * n)).sin().powi(2);
    let (step, rate) = entrain::plan::optimal_step(l2, lmax).unwrap();
    assert!((step - 0.5).abs() < 1e-3, "{step}"); // l2 + lmax = 4 exactly for a path
    let factor = |e: f64| (1.0 - e * l2).abs().max((1.0 - e * lmax).abs());
    let (best_e, best_rho) = (1..200_000)
        .map(|i| f64::from(i) * 1e-5)
        .map(|e| (e, factor(e)))
        .fold((0.0, f64::INFINITY), |a, b| if b.1 < a.1 { b } else { a });
    assert!((best_e - step).abs() < 2e-5, "{best_e} vs {step}");
    assert!((best_rho - rate).abs() < 1e-4, "{best_rho} vs {rate}");
    assert!(entrain::plan::optimal_step(0.0, 1.0).is_err());
    assert!(entrain::plan::optimal_step(2.0, 1.0).is_err());
}

/// The tuner's fastest gain is refined between its scan points: on a 37-node chain
/// (linear P law, no delay, generous budget) its predicted lock time is within 0.5 % of
/// the best over a dense independent scan of the same objective, and its gain is near
/// the best constant step 2/(λ2 + λmax) = 0.5 (a scan alone landed on 0.454).
#[test]
fn tuner_fastest_gain_is_refined_between_scan_points() {
    let t = Topology::Chain { nodes: 37 };
    let template = Model::p_only(Shape::Linear, 0.1, 0.1, 1e-3);
    let budget = string_budget(1e6, 0.0);
    let tuning = tune_topology(&template, &t, &budget, Search::Kp { ki: 0.0 }, &mut lock).unwrap();
    let fastest = tuning.fastest.unwrap();
    let sp = t.spectrum().unwrap();
    let objective = |kp: f64| {
        let m = Model { kp, ..template };
        settle(&m, &sp, &budget.spread).map_or(f64::INFINITY, |s| predicted_lock_s(&s))
    };
    let dense_best = (1..4_000)
        .map(|i| f64::from(i) * 2.5e-4)
        .map(objective)
        .fold(f64::INFINITY, f64::min);
    println!(
        "fastest kp {} lock {} s; dense best {dense_best} s",
        fastest.kp, fastest.lock_s
    );
    assert!(
        fastest.lock_s <= dense_best * 1.005,
        "{} vs {dense_best}",
        fastest.lock_s
    );
    assert!((fastest.kp - 0.5).abs() < 0.5 * 0.05, "{}", fastest.kp);
}
