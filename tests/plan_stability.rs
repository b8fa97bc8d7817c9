//! Stability, convergence factors, delay, PI and loss against the published closed forms (docs/design.md), and
//! the root finder against `nalgebra`'s companion-matrix eigenvalues.
#![cfg(feature = "plan")]

use entrain::plan::{
    Model, PlanError, Shape, Topology, delay_gain_bound, mode_radius, pi_jury_stable, stability,
};
use nalgebra::DMatrix;
use proptest::prelude::*;

fn model(kp: f64, ki: f64) -> Model {
    Model {
        ki,
        ..Model::p_only(Shape::Linear, kp, 0.1, 1e-3)
    }
}

#[test]
fn xiao_boyd_p5_optimum() {
    // Xiao & Boyd, Systems & Control Letters 53 (2004): P5, ε* = 2/(λ2+λmax) = 0.5,
    // ρ* = 0.809016994.
    let s = Topology::Chain { nodes: 5 }.spectrum().unwrap();
    let eps = 2.0 / (s.lambda_slow + s.lambda_max);
    assert!((eps - 0.5).abs() < 1e-12);
    let st = stability(&model(eps, 0.0), &s).unwrap();
    assert!(st.stable);
    assert!((st.radius - 0.809016994).abs() < 1e-9);
    // Stable iff 0 < ελmax < 2.
    assert!((st.kp_limit - 2.0 / s.lambda_max).abs() < 1e-9);
    assert!(
        !stability(&model(2.0 / s.lambda_max * 1.001, 0.0), &s)
            .unwrap()
            .stable
    );
}

#[test]
fn delay_bound_table() {
    // Levin & May 1976; Kuruklis 1994: stable iff ελmax < 2 sin(π/(2(2d+1))); d=1: 1, d=2: 0.618034.
    assert!((delay_gain_bound(1) - 1.0).abs() < 1e-12);
    assert!((delay_gain_bound(2) - 0.618034).abs() < 1e-6);
    assert!((delay_gain_bound(0) - 2.0).abs() < 1e-12);
    for d in 1..=8 {
        let bound = delay_gain_bound(d);
        assert!(mode_radius(1.0, 0.0, d, bound * 0.999) < 1.0, "d = {d}");
        assert!(mode_radius(1.0, 0.0, d, bound * 1.001) > 1.0, "d = {d}");
        // The bisected gain limit agrees with the closed form.
        let s = Topology::Chain { nodes: 10 }.spectrum().unwrap();
        let m = Model {
            delay_updates: d,
            ..model(0.05, 0.0)
        };
        let st = stability(&m, &s).unwrap();
        let closed = bound / s.lambda_max;
        assert!(
            (st.kp_limit - closed).abs() < 1e-7 * closed,
            "d = {d}: {} vs {closed}",
            st.kp_limit
        );
    }
}

#[test]
fn pi_p5_table() {
    // PI row of docs/design.md (Jury criterion; cf. Schenato & Fiorentin 2011; Carli & Zampieri
    // 2014): P5, kp = 0.4, ki = 0.05 ⇒ ρ = 0.930758774.
    let s = Topology::Chain { nodes: 5 }.spectrum().unwrap();
    let st = stability(&model(0.4, 0.05), &s).unwrap();
    assert!(st.stable);
    assert!((st.radius - 0.930758774).abs() < 1e-9);
}

#[test]
fn kar_moura_p5_table() {
    // Kar & Moura, IEEE TSP 56 (2008): P5, p = 0.8, ε = 0.5 ⇒ mean factor 0.8472135955.
    let s = Topology::Chain { nodes: 5 }.spectrum().unwrap();
    let m = Model {
        success_prob: 0.8,
        ..model(0.5, 0.0)
    };
    let st = stability(&m, &s).unwrap();
    assert!((st.mean_radius_with_loss - 0.8472135955).abs() < 1e-9);
    assert!(st.loss_slowdown > 1.0);
}

#[test]
fn dominant_rate_of_long_chain() {
    // Fact of the trade, no source: an (n+1)-node chain with gain ε decays at ≈ επ²/(n+1)².
    let n = 50;
    let eps = 0.3;
    let s = Topology::Chain { nodes: n + 1 }.spectrum().unwrap();
    let st = stability(&model(eps, 0.0), &s).unwrap();
    let rate = 1.0 - st.radius;
    let approx = eps * std::f64::consts::PI.powi(2) / ((n + 1) as f64).powi(2);
    assert!((rate / approx - 1.0).abs() < 0.01, "{rate} vs {approx}");
}

#[test]
fn radius_at_spectrum_ends_covers_every_mode() {
    // The overall factor uses λslow and λmax only; check no interior chain mode is slower.
    let t = Topology::Chain { nodes: 30 };
    let s = t.spectrum().unwrap();
    for (kp, ki, d) in [
        (0.3, 0.0, 0),
        (0.2, 0.02, 0),
        (0.1, 0.0, 2),
        (0.15, 0.03, 1),
        (0.45, 0.1, 0),
    ] {
        let m = Model {
            delay_updates: d,
            ..model(kp, ki)
        };
        let st = stability(&m, &s).unwrap();
        for lambda in t.nonzero_modes() {
            assert!(
                mode_radius(kp, ki, d, lambda) <= st.radius + 1e-9,
                "kp {kp} ki {ki} d {d} λ {lambda}"
            );
        }
    }
}

#[test]
fn bad_models_are_errors() {
    let s = Topology::Chain { nodes: 5 }.spectrum().unwrap();
    for kp in [0.0, -0.1, f64::NAN, f64::INFINITY] {
        assert_eq!(
            stability(&model(kp, 0.0), &s).unwrap_err(),
            PlanError::InvalidParameter {
                name: "kp",
                valid: "finite and > 0"
            }
        );
    }
    assert!(matches!(
        stability(&model(0.2, -0.01), &s),
        Err(PlanError::InvalidParameter { name: "ki", .. })
    ));
    assert!(matches!(
        stability(&model(0.2, f64::NAN), &s),
        Err(PlanError::InvalidParameter { name: "ki", .. })
    ));
    assert!(matches!(
        stability(&model(0.2, 0.3), &s),
        Err(PlanError::InvalidParameter { name: "ki", .. })
    ));
    let m = Model {
        success_prob: 0.0,
        ..model(0.2, 0.0)
    };
    assert!(matches!(
        stability(&m, &s),
        Err(PlanError::InvalidParameter {
            name: "success_prob",
            ..
        })
    ));
    let m = Model {
        delay_updates: 99,
        ..model(0.2, 0.0)
    };
    assert_eq!(
        stability(&m, &s),
        Err(PlanError::DelayTooLong { max: 30, got: 99 })
    );
    let m = Model {
        update_period_s: f64::NAN,
        ..model(0.2, 0.0)
    };
    assert!(stability(&m, &s).is_err());
    let disconnected = entrain::plan::Spectrum {
        connected: false,
        ..s
    };
    assert_eq!(
        stability(&model(0.2, 0.0), &disconnected),
        Err(PlanError::Disconnected)
    );
    let zero = entrain::plan::Spectrum {
        lambda_slow: 0.0,
        ..s
    };
    assert_eq!(
        stability(&model(0.2, 0.0), &zero),
        Err(PlanError::Disconnected)
    );
    let nan = entrain::plan::Spectrum {
        lambda_max: f64::NAN,
        ..s
    };
    assert!(stability(&model(0.2, 0.0), &nan).is_err());
}

/// Largest |root| of the monic polynomial with the given low-to-high coefficients, from
/// nalgebra's eigenvalues of its companion matrix (the independent reference).
fn companion_radius(coeffs: &[f64]) -> f64 {
    let n = coeffs.len() - 1;
    let m = DMatrix::from_fn(n, n, |i, j| {
        if i == 0 {
            -coeffs[n - 1 - j]
        } else if i == j + 1 {
            1.0
        } else {
            0.0
        }
    });
    // Schur with an iteration cap (the uncapped call can loop on rare inputs).
    nalgebra::linalg::Schur::try_new(m, 1e-15, 100_000)
        .map(|s| {
            s.complex_eigenvalues()
                .iter()
                .map(|z| z.norm())
                .fold(0.0, f64::max)
        })
        .unwrap_or(f64::NAN)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    #[test]
    fn delayed_radius_matches_companion(a in 0.001f64..1.5, ratio in 0.0f64..0.9, d in 1u32..8) {
        let b = if ratio < 0.1 { 0.0 } else { ratio * a };
        let d_us = d as usize;
        let coeffs: Vec<f64> = if b == 0.0 {
            // z^{d+1} − z^d + a
            let mut c = vec![0.0; d_us + 2];
            c[0] += a; c[d_us] -= 1.0; c[d_us + 1] = 1.0; c
        } else {
            // z^d (z − 1)² + a(z − 1) + b
            let mut c = vec![0.0; d_us + 3];
            c[d_us] += 1.0; c[d_us + 1] -= 2.0; c[d_us + 2] = 1.0; c[1] += a; c[0] += b - a; c
        };
        let ours = mode_radius(a, b, d, 1.0);
        let reference = companion_radius(&coeffs);
        prop_assume!(!reference.is_nan());
        prop_assert!((ours - reference).abs() < 1e-6, "{ours} vs {reference}");
    }

    #[test]
    fn jury_agrees_with_roots(kp in 0.01f64..1.5, frac in 0.01f64..0.99, lmax in 0.5f64..6.0) {
        // PI row of docs/design.md: Jury conditions vs the quadratic's roots on (0, λmax].
        let ki = frac * kp;
        let worst = (1..=200).map(|i| mode_radius(kp, ki, 0, lmax * i as f64 / 200.0)).fold(0.0, f64::max);
        let jury = pi_jury_stable(kp, ki, lmax);
        if (worst - 1.0).abs() > 1e-6 {
            prop_assert_eq!(jury, worst < 1.0, "kp {} ki {} λmax {} worst {}", kp, ki, lmax, worst);
        }
    }
}
