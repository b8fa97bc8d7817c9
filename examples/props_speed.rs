//! Time of a property run: 256 deployments, chains of 2 to 64 nodes, every crystal
//! pattern within ±50 ppm, 0 to 10 % loss, p90 lock within 60 s, on the real node code
//! (feature `proptest`).
//!
//! `cargo run --release --features proptest --example props_speed [default|whole|full]`
//! (a section's name runs that section alone)
//!
//! The constants are what `entrain check` passes for the longest chain (the file below,
//! at the flashed Q16.16 gains), held fixed for every deployment. The effort is
//! [`Effort::default`]: 4 runs, a 20-sample forecast (only where the planner's worst-case
//! bound misses the budget), a horizon of 1.25 × the budget per deployment, and every
//! run, simulated or forecast, stopped once settled deep inside the band; the same search
//! with the forecast at every deployment and the simulated runs taken to the horizon
//! follows as a baseline, then that with full forecast runs, and the ratios are printed.

use entrain::assess::{self, NetworkModel, Options, PredictEffort};
use entrain::props::{self, Deployments, Effort, Family, Firmware, Property};
use entrain::scenario::Scenario;
use std::path::Path;
use std::time::Instant;

/// A row of irrigation valves strung along a vineyard terrace, opening in turn: 64 nodes
/// on a chain, 100 updates a second over a low-power radio. Invented for entrain.
const VINEYARD: &str = r#"
version = 1
name = "Vineyard terrace valves"
[network]
topology = "chain"
nodes = 64
[timing]
update_rate_hz = 100
phase_period_s = 0.01
[law]
coupling = "sine"
kp = 0.2
ki = 0.002
trim_limit_ppm = 500
[clock]
crystal_tolerance_ppm = 50
[link]
loss_fraction = 0.1
[lock]
initial_spread_s = 0.001
tolerance_s = 0.0002
budget_s = 60
[margins]
gain = 1.5
"#;

fn main() {
    let vineyard =
        Scenario::from_toml(Path::new("vineyard.toml"), VINEYARD).expect("valid scenario");
    let network = NetworkModel::of(&vineyard).expect("a chain");
    // The constants only (no forecast): the gains rounded to what the node law takes.
    let constants_only = PredictEffort {
        forecast_samples: 0,
        ..PredictEffort::FULL
    };
    let p = assess::predict_with(&vineyard, &network, 0.2, 0.002, constants_only)
        .expect("a prediction");
    let firmware = Firmware::<2>::new(
        p.constants.config().expect("the node law takes them"),
        vineyard.timer_hz,
    );
    let deployments = Deployments::new(firmware.fix(&vineyard).expect("constants fit"))
        .family(Family::Chain, 2..=64)
        .crystals_within(50.0)
        .loss(0.0..=0.10);
    let properties = [
        Property::Stable,
        Property::SettlesWithinBudget,
        Property::TableFits,
    ];
    let threads = rayon::current_num_threads();
    // The default effort (the forecast only where the planner's bound misses the budget;
    // its runs and the simulated runs stopped once settled deep inside the band) and, in
    // the same run, two baselines: the forecast at every deployment with every simulated
    // run taken to its horizon, and that with full forecast runs too.
    // One section alone when named (`default`, `whole`, `full`), for timing one against
    // another from outside (CPU seconds on a shared machine).
    let only = std::env::args().nth(1);
    if only.is_none() {
        let full = assess::assess(vineyard.clone(), &Options::of(&vineyard), &|_| {})
            .expect("an assessment");
        println!(
            "constants: KP_Q16 {}, KI_Q16 {}; `entrain check` of the 64-node chain: {}",
            p.constants.kp_q16,
            p.constants.ki_q16,
            if full.verdict.pass { "pass" } else { "FAIL" }
        );
    }
    let mut times = Vec::new();
    for (key, label, effort) in [
        ("default", "default effort", Effort::default()),
        (
            "whole",
            "forecast at every deployment, simulated runs to the horizon (baseline 1)",
            Effort {
                forecast_only_over_budget: false,
                simulation_early_stop: false,
                ..Effort::default()
            },
        ),
        (
            "full",
            "as baseline 1, and full forecast runs (baseline 2)",
            Effort {
                forecast_only_over_budget: false,
                simulation_early_stop: false,
                forecast_early_stop: false,
                ..Effort::default()
            },
        ),
    ] {
        if only.as_deref().is_some_and(|o| o != key) {
            continue;
        }
        let start = Instant::now();
        let outcome = props::search::<2>(&deployments, &properties, &effort);
        let took = start.elapsed().as_secs_f64();
        times.push(took);
        match outcome {
            Ok(cases) => println!(
                "{label}: {cases} deployments passed in {took:.1} s ({:.0} ms a deployment, {} runs each, {threads} threads)",
                took * 1e3 / f64::from(cases),
                effort.runs
            ),
            Err(c) => println!("{label}: failed after {took:.1} s:\n{c}"),
        }
    }
    if let [default, whole, full] = times[..] {
        println!(
            "ratio default/baseline 1: {:.2}, default/baseline 2: {:.2}",
            default / whole,
            default / full
        );
    }
}
