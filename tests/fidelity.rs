//! Fidelity of the forecast (an independent `f64` model of the network) against the
//! simulator (the real node code, every run stepped to its horizon), and of the
//! planner's worst-case settling bound against the simulated worst run.
//!
//! Per scenario: forecast settling p50 and p90 within ±15 % of the simulated p50 and
//! p90 over 200 runs; the planner's bound never below the simulated maximum; forecast
//! noise-floor p99 within ±20 % of the simulated one. The simulated figures come from
//! the simulator alone (last exit from the tolerance in each run's own trace), never
//! from the forecast, so every check can fail.
#![cfg(feature = "sim")]

mod fidelity_cases;

use fidelity_cases::{Row, cases, evaluate, table};

fn within(got: f64, want: f64, rel: f64) -> bool {
    (got - want).abs() <= rel * want
}

#[test]
fn forecast_and_bound_match_the_simulation() {
    let mut all = cases();
    assert!(all.len() >= 12);
    let rows: Vec<Row> = all.iter_mut().map(evaluate).collect();
    println!("{}", table(&rows));
    let mut failures = Vec::new();
    for r in &rows {
        let f = &r.forecast;
        // Every run settles within the horizon, or the last exit is not measured.
        if r.sim_never > 0.0 {
            failures.push(format!(
                "{}: {:.1} % of runs never settled",
                r.name,
                100.0 * r.sim_never
            ));
        }
        if !within(f.settle_updates.p50, r.sim_p50, 0.15) {
            failures.push(format!(
                "{}: p50 {} vs simulated {}",
                r.name, f.settle_updates.p50, r.sim_p50
            ));
        }
        if !within(f.settle_updates.p90, r.sim_p90, 0.15) {
            failures.push(format!(
                "{}: p90 {} vs simulated {}",
                r.name, f.settle_updates.p90, r.sim_p90
            ));
        }
        match r.bound {
            Some(b) if (b as f64) >= r.sim_max => {}
            b => failures.push(format!(
                "{}: bound {b:?} below simulated max {}",
                r.name, r.sim_max
            )),
        }
        if !within(f.noise_floor_turns.p99, r.sim_noise_p99, 0.20) {
            failures.push(format!(
                "{}: noise p99 {:.3e} vs simulated {:.3e}",
                r.name, f.noise_floor_turns.p99, r.sim_noise_p99
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// Oscillation period of a PI mode against the polar form of its complex roots:
/// `|z|² = c` and `cos(arg z) = b/(2√c)` for `z² − bz + c` (closed form, school algebra).
#[test]
fn mode_period_matches_the_polar_form() {
    let (kp, ki, lambda) = (0.3, 0.02, 0.1);
    let b = 2.0 - kp * lambda;
    let c = 1.0 - kp * lambda + ki * lambda;
    let angle = (b / (2.0 * f64::sqrt(c))).acos();
    let want = std::f64::consts::TAU / angle;
    let got = entrain::forecast::mode_period(kp, ki, lambda).unwrap();
    assert!((got - want).abs() < 1e-9 * want, "{got} vs {want}");
    // Real positive roots (λ = 1: discriminant 0.01) do not oscillate; a P mode past
    // kp·λ = 1 alternates every update (period 2).
    assert_eq!(entrain::forecast::mode_period(kp, ki, 1.0), None);
    assert_eq!(entrain::forecast::mode_period(0.6, 0.0, 2.0), Some(2.0));
}

/// Last exit, not first entry: the error dips into the band, leaves it and comes back.
#[test]
fn settling_is_the_last_exit() {
    let e = [0.5, 0.2, 0.5, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1];
    assert_eq!(entrain::forecast::last_exit(&e, 0.3), Some(3));
    // Outside in the final fifth (samples 8 and 9 of 10): not settled.
    let late = [0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.5, 0.1];
    assert_eq!(entrain::forecast::last_exit(&late, 0.3), None);
}

/// The property kit's cheaper forecast (runs stop once they have stayed within half the
/// tolerance for the final fifth of the horizon) against the full forecast on every
/// fidelity scenario, same seed, so the runs are the same until one stops: the settling
/// quantiles and the never-settled share must agree (a late exit after such a stay is
/// what the early stop would miss; noisy scenarios never stop early).
#[test]
fn early_stop_forecast_agrees_with_the_full_one() {
    let mut failures = Vec::new();
    for mut case in cases() {
        fidelity_cases::horizon(&mut case.scenario);
        let s = &case.scenario;
        let full = entrain::forecast::forecast(s, 100, 7).unwrap();
        let early = entrain::forecast::forecast_early_stop(s, 100, 7).unwrap();
        let same = |a: f64, b: f64| (a.is_nan() && b.is_nan()) || (a - b).abs() <= 0.01 * b;
        if !same(early.settle_updates.p50, full.settle_updates.p50)
            || !same(early.settle_updates.p90, full.settle_updates.p90)
            || early.never_settled_fraction != full.never_settled_fraction
        {
            failures.push(format!(
                "{}: early p50 {} p90 {} never {} vs full p50 {} p90 {} never {}",
                case.name,
                early.settle_updates.p50,
                early.settle_updates.p90,
                early.never_settled_fraction,
                full.settle_updates.p50,
                full.settle_updates.p90,
                full.never_settled_fraction
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
