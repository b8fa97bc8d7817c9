//! The library assessment: one design gets one verdict however it reaches the checker,
//! a gain given as a number is never tuned, margins are stated requirements, and every
//! reason and warning code fires where it should.
#![cfg(feature = "assess")]

use entrain::assess::{
    Assessment, GainsSource, MarginKind, Options, Reason, Warning, assess, search,
};
use entrain::plan::{Search, Topology};
use entrain::scenario::{GainSetting, Layout, Scenario};
use std::path::Path;

/// A scenario from TOML text (all values invented for these tests).
fn scenario(text: &str) -> Scenario {
    Scenario::from_toml(Path::new("test.toml"), text).unwrap()
}

fn run(text: &str, runs: u32) -> Assessment {
    let s = scenario(text);
    let options = Options {
        runs,
        seed: 7,
        time_limit_s: None,
    };
    assess(s, &options, &|_| {}).unwrap()
}

fn codes(a: &Assessment) -> Vec<&'static str> {
    a.verdict.reasons.iter().map(Reason::code).collect()
}

fn warning_codes(a: &Assessment) -> Vec<&'static str> {
    a.warnings.iter().map(Warning::code).collect()
}

/// A 12 × 12 grid of greenhouse valve controllers, 4 Hz updates, 50 ms turn.
fn grid(kp: &str, ki: &str, margins: &str) -> String {
    format!(
        r#"
version = 1
name = "grid test"
[network]
topology = "grid"
rows = 12
cols = 12
[timing]
update_rate_hz = 4
phase_period_s = 0.05
timer_hz = 32768
[law]
coupling = "sine"
kp = {kp}
ki = {ki}
[clock]
crystal_tolerance_ppm = 20
[lock]
initial_spread_s = 0.01
tolerance_s = 0.0005
budget_s = 600
{margins}
"#
    )
}

/// A chain of vibration sensors along a handrail: 10 Hz updates, 1 ms turn.
fn chain(nodes: usize, law: &str, extra: &str) -> String {
    format!(
        r#"
version = 1
name = "chain test"
[network]
topology = "chain"
nodes = {nodes}
[timing]
update_rate_hz = 10
phase_period_s = 0.001
[law]
coupling = "sine"
{law}
[clock]
crystal_tolerance_ppm = 20
[lock]
initial_spread_s = 0.0004
tolerance_s = 0.00002
budget_s = 240
{extra}
"#
    )
}

#[test]
fn typed_and_tuned_gains_get_the_same_verdict() {
    let tuned = run(&grid("\"tune\"", "\"tune\"", ""), 0);
    assert_eq!(tuned.gains.source, GainsSource::Tuned);
    let kp = tuned.prediction.kp();
    let ki = tuned.prediction.ki();
    // Type the gains exactly as the report prints them (six decimals).
    let typed = run(&grid(&format!("{kp:.6}"), &format!("{ki:.6}"), ""), 0);
    assert_eq!(typed.gains.source, GainsSource::Scenario);
    assert_eq!(typed.prediction.constants, tuned.prediction.constants);
    assert_eq!(typed.verdict.pass, tuned.verdict.pass);
    assert_eq!(codes(&typed), codes(&tuned));
    assert_eq!(typed.prediction.lock_s, tuned.prediction.lock_s);
}

#[test]
fn tuned_gains_that_miss_a_margin_say_which() {
    // Ask for a gain margin no gain meeting the budget can have: the verdict names the
    // margin, never "no gains meet the budget".
    let a = run(&grid("\"tune\"", "\"tune\"", "[margins]\ngain = 100"), 0);
    assert!(!a.verdict.pass);
    let margin = a
        .verdict
        .reasons
        .iter()
        .find_map(|r| match *r {
            Reason::MarginTooSmall {
                margin: MarginKind::Gain,
                value,
                required,
            } => Some((value, required)),
            _ => None,
        })
        .expect("margin_too_small");
    assert_eq!(margin.1, 100.0);
    assert!(margin.0 < 100.0);
    let text = a.verdict.reasons[0].to_string();
    assert!(text.contains("margins.gain"), "{text}");
    assert!(warning_codes(&a).contains(&"closest_gains_shown"));
    // The same gains typed give the same verdict.
    let (kp, ki) = (a.prediction.kp(), a.prediction.ki());
    let typed = run(
        &grid(
            &format!("{kp:.6}"),
            &format!("{ki:.6}"),
            "[margins]\ngain = 100",
        ),
        0,
    );
    assert_eq!(codes(&typed), codes(&a));
}

#[test]
fn a_gain_given_as_a_number_is_never_tuned() {
    let s = scenario(&chain(24, "kp = 0.25\nki = \"tune\"", ""));
    assert_eq!(search(&s), Some(Search::Ki { kp: 0.25 }));
    let o = Options::predict_only(&s);
    let a = assess(s, &o, &|_| {}).unwrap();
    assert_eq!(a.prediction.constants.kp_q16, 16_384); // 0.25 × 65536
    assert!(a.prediction.ki() > 0.0 && a.prediction.ki() < 0.25);

    let s = scenario(&chain(24, "kp = \"tune\"\nki = 0.01", ""));
    assert_eq!(search(&s), Some(Search::Kp { ki: 0.01 }));
    let o = Options::predict_only(&s);
    let a = assess(s, &o, &|_| {}).unwrap();
    assert_eq!(a.prediction.constants.ki_q16, 655); // 0.01 × 65536 = 655.36
    // A P-law search has no integral range at all.
    let s = scenario(&chain(24, "kp = \"tune\"", ""));
    assert_eq!(search(&s), Some(Search::Kp { ki: 0.0 }));
    let o = Options::predict_only(&s);
    let a = assess(s, &o, &|_| {}).unwrap();
    let t = a.gains.tuning.unwrap();
    assert!(t.meeting_budget.ki.is_none() && t.meeting_budget.ki_over_kp.is_none());
    assert_eq!(a.prediction.constants.ki_q16, 0);

    let s = scenario(&chain(24, "kp = 0.2\nki = 0.01", ""));
    assert_eq!(search(&s), None);
    assert_eq!(s.gains.kp, GainSetting::Fixed(0.2));
}

#[test]
fn reason_unstable() {
    // kp·λmax = 0.9 × 3.98 > 2 on a 24-node chain: the fastest mode grows (Xiao & Boyd,
    // Systems & Control Letters 53 (2004)).
    let a = run(&chain(24, "kp = 0.9", ""), 0);
    assert!(codes(&a).contains(&"unstable"), "{:?}", codes(&a));
}

#[test]
fn reason_cannot_lock() {
    // A P law holds a ±800 ppm detuning only with more coupling than kp 0.05 carries.
    let a = run(
        &chain(24, "kp = 0.05", "")
            .replace("crystal_tolerance_ppm = 20", "crystal_tolerance_ppm = 800"),
        0,
    );
    assert!(codes(&a).contains(&"cannot_lock"), "{:?}", codes(&a));
}

#[test]
fn reason_margin_too_small_for_delay() {
    // kp 0.25, ki 0.02 on the 24-node chain: stable with no delay, unstable with one
    // update of it, so the default delay margin of one update is not met.
    let a = run(&chain(24, "kp = 0.25\nki = 0.02", ""), 0);
    assert!(a.prediction.stability.stable);
    assert_eq!(a.prediction.margins.delay_updates, 0);
    assert!(
        a.verdict.reasons.iter().any(|r| matches!(
            r,
            Reason::MarginTooSmall {
                margin: MarginKind::Delay,
                ..
            }
        )),
        "{:?}",
        codes(&a)
    );
    // Asking for no delay margin lets the same gains pass the margin check.
    let a = run(
        &chain(24, "kp = 0.25\nki = 0.02", "[margins]\ndelay_updates = 0"),
        0,
    );
    assert!(!codes(&a).contains(&"margin_too_small"), "{:?}", codes(&a));
}

#[test]
fn reason_predicted_over_budget() {
    let a = run(
        &chain(24, "kp = 0.2\nki = 0.01", "").replace("budget_s = 240", "budget_s = 5"),
        0,
    );
    assert!(
        codes(&a).contains(&"predicted_over_budget"),
        "{:?}",
        codes(&a)
    );
}

/// The footbridge example with its tolerance and timer replaced.
fn footbridge(replace: &[(&str, &str)]) -> String {
    let mut text = std::fs::read_to_string("examples/footbridge.toml").unwrap();
    for (from, to) in replace {
        assert!(text.contains(from), "{from}");
        text = text.replace(from, to);
    }
    text
}

#[test]
fn footbridge_as_first_shipped_does_not_pass() {
    // ±1 µs timestamp jitter and whole-tick stamping against a 20 µs tolerance: the steady
    // largest pairwise error reaches the band, so runs never settle for good. As first
    // shipped: version-1 beacons, receptions stamped to the nearest tick, no trim leak.
    let a = run(
        &footbridge(&[
            ("tolerance_s = 0.00004", "tolerance_s = 0.00002 #"),
            (
                "latency_s = 0.0004",
                "latency_s = 0.0004\nbeacon_version = 1",
            ),
            (
                "timestamp_jitter_s = 0.000001",
                "timestamp_jitter_s = 0.000001\nstamping = \"nearest\"",
            ),
            (
                "neighbour_timeout_updates = 5",
                "neighbour_timeout_updates = 5\ntrim_leak = 0",
            ),
        ]),
        24,
    );
    assert!(!a.verdict.pass);
    let c = codes(&a);
    assert!(c.contains(&"runs_never_settled"), "{c:?}");
    let v = a.simulation.as_ref().unwrap();
    let p99 = v.summary.noise_floor_turns.unwrap().p99 * a.scenario.phase_period_s;
    assert!(p99 > 0.5 * 20e-6, "{p99}");
    // Independent of the verdict's own figures: re-read the runs' steady windows.
    let never = v
        .summary
        .outcomes
        .iter()
        .filter(|o| o.settle.is_none())
        .count();
    assert!(never > 0);
}

#[test]
fn reason_timer_resolution_and_noise_floor() {
    // A 32,768 Hz watch-crystal timer: one tick is 30.5 µs, more than a quarter of the
    // 40 µs tolerance (and whole-tick stamping alone fills the band).
    let a = run(
        &footbridge(&[("timer_hz = 1_000_000", "timer_hz = 32768")]),
        0,
    );
    let c = codes(&a);
    assert!(c.contains(&"timer_resolution"), "{c:?}");
    assert!(c.contains(&"noise_floor"), "{c:?}");
    // 1 ms at 32768 Hz is 32.768 ticks, run as 33: 33/32.768 − 1 = +7080.08 ppm (hand-computed).
    assert_eq!(a.prediction.timer.ticks_per_period, 33);
    assert!((a.prediction.timer.period_error_ppm - 7080.078).abs() < 0.01);
    assert!(warning_codes(&a).contains(&"timer_rounding"));
    let text = a
        .verdict
        .reasons
        .iter()
        .map(ToString::to_string)
        .collect::<Vec<_>>();
    assert!(text.iter().any(|t| t.contains("timer_hz")), "{text:?}");
    assert!(
        text.iter().any(|t| t.contains("lock.tolerance_s")),
        "{text:?}"
    );
}

#[test]
fn the_quantile_is_the_scenarios() {
    // The same design against its bound and against its p90: the bound is the larger.
    let p90 = run(&footbridge(&[]), 0);
    let bound = run(
        &footbridge(&[("budget_s = 240", "budget_s = 240\nquantile = \"bound\"")]),
        0,
    );
    let s90 = p90.prediction.settle.unwrap();
    let sb = bound.prediction.settle.unwrap();
    assert_eq!(s90.compared_s, s90.p90_s.unwrap());
    assert_eq!(sb.compared_s, sb.bound_s);
    assert!(sb.compared_s >= s90.compared_s);
}

#[test]
fn warnings_fire() {
    // A ring of 40 with a spread of most of a turn: twisted states are possible, the
    // spread is more than half a turn, and the first corrections hit the slew limit.
    let ring = r#"
version = 1
[network]
topology = "ring"
nodes = 40
[timing]
update_rate_hz = 10
phase_period_s = 0.01
[law]
coupling = "sine"
kp = 0.3
slew_limit_turns = 0.01
[lock]
initial_spread_s = 0.006
tolerance_s = 0.0001
budget_s = 600
"#;
    let a = run(ring, 0);
    let w = warning_codes(&a);
    for code in [
        "twisted_states_possible",
        "spread_half_turn_or_more",
        "slew_limited",
    ] {
        assert!(w.contains(&code), "{code} missing from {w:?}");
    }
    // A grid: the lock test is sufficient only.
    let g = run(&grid("0.2", "0.01", ""), 0);
    assert!(warning_codes(&g).contains(&"lock_test_sufficient_only"));
    // A grid above the dense flow computation's 4000 nodes: no lock test at all.
    let big = grid("0.2", "0.01", "")
        .replace("rows = 12", "rows = 70")
        .replace("cols = 12", "cols = 70");
    let b = run(&big, 0);
    assert!(warning_codes(&b).contains(&"lock_not_predicted"));
    // Timestamp jitter that puts the noise floor between half the tolerance and all of it.
    let j = run(
        &footbridge(&[(
            "timestamp_jitter_s = 0.000001",
            "timestamp_jitter_s = 0.0000015",
        )]),
        0,
    );
    assert!(
        warning_codes(&j).contains(&"noise_near_tolerance"),
        "{:?}",
        warning_codes(&j)
    );
    // Every warning prints a sentence.
    for w in a.warnings.iter().chain(&j.warnings) {
        assert!(w.to_string().len() > 20);
    }
}

#[test]
fn twisted_runs_are_counted() {
    // A ring of 16 started over almost the whole circle often ends wound up (Wiley,
    // Strogatz & Girvan, Chaos 16 (2006): q-twists with |q| < N/4 are stable).
    let ring = r#"
version = 1
[network]
topology = "ring"
nodes = 16
[timing]
update_rate_hz = 10
phase_period_s = 0.01
[law]
coupling = "sine"
kp = 0.3
[lock]
initial_spread_s = 0.0099
tolerance_s = 0.0001
budget_s = 60
[monte_carlo]
duration_s = 30
"#;
    let a = run(ring, 16);
    assert!(
        warning_codes(&a).contains(&"twisted_runs"),
        "{:?}",
        warning_codes(&a)
    );
}

#[test]
fn spectra_are_computed_once_and_match_the_closed_form() {
    let a = run(&chain(24, "kp = 0.2", ""), 0);
    let ev = a.network.eigenvalues.as_ref().unwrap();
    // Path P_24: λ_k = 2 − 2cos(kπ/24) (Fiedler 1973; Brouwer & Haemers 2012 §1.4).
    for (k, v) in ev.iter().enumerate() {
        let want = 2.0 - 2.0 * (k as f64 * std::f64::consts::PI / 24.0).cos();
        assert!((v - want).abs() < 1e-12, "{k}: {v} vs {want}");
    }
    assert!(matches!(
        a.scenario.layout,
        Layout::Topology(Topology::Chain { nodes: 24 })
    ));
}

/// Two sensors whose crystals are +5 and −5 ppm, PI law, random power-up instants,
/// receptions stamped with completed ticks. With version-1 beacons nothing removes the
/// half-tick stamping bias: each sees the other early, and the common trim ramps until
/// a trim reaches its limit. The check must say so (`common_rate_drift`). With two-way
/// timing (version 2, the default) and the default leak the common rate stays within the
/// crystals and the warning is silent; under the P law there is no trim to drift.
#[test]
fn common_rate_drift_is_reported() {
    let pair = |law: &str, link: &str| {
        format!(
            r#"
version = 1
name = "pair"
[network]
topology = "chain"
nodes = 2
[timing]
update_rate_hz = 10
phase_period_s = 0.001
[law]
coupling = "sine"
{law}
trim_limit_ppm = 200
[clock]
crystal_ppm = [5.0, -5.0]
[link]
{link}
[lock]
initial_spread_s = 0.0004
tolerance_s = 0.00004
budget_s = 240
[monte_carlo]
duration_s = 1500
"#
        )
    };
    let pi = run(&pair("kp = 0.3\nki = 0.02", "beacon_version = 1"), 4);
    let summary = &pi.simulation.as_ref().unwrap().summary;
    assert!(
        summary.trim_at_limit_fraction > 0.0 || summary.common_rate_max_ppm > 6.0,
        "{} ppm, {}",
        summary.common_rate_max_ppm,
        summary.trim_at_limit_fraction
    );
    assert!(
        warning_codes(&pi).contains(&"common_rate_drift"),
        "{:?}",
        warning_codes(&pi)
    );

    let v2 = run(&pair("kp = 0.3\nki = 0.02", ""), 4);
    let summary = &v2.simulation.as_ref().unwrap().summary;
    assert!(
        summary.common_rate_max_ppm < 5.0 && summary.trim_at_limit_fraction == 0.0,
        "{} ppm, {}",
        summary.common_rate_max_ppm,
        summary.trim_at_limit_fraction
    );
    assert!(!warning_codes(&v2).contains(&"common_rate_drift"));
    assert!(summary.trim_error_ppm.unwrap().max < 2.0);

    let p = run(&pair("kp = 0.3", ""), 4);
    let summary = &p.simulation.as_ref().unwrap().summary;
    // The P law leaves each node at its crystal: the common rate is their mean, 0 ppm.
    assert!(
        summary.common_rate_max_ppm < 1e-9,
        "{}",
        summary.common_rate_max_ppm
    );
    assert_eq!(summary.trim_at_limit_fraction, 0.0);
    assert!(!warning_codes(&p).contains(&"common_rate_drift"));
}
