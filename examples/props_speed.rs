//! Time of a property run: 256 deployments, chains of 2 to 64 nodes, every crystal
//! pattern within ±50 ppm, 0 to 10 % loss, lock within 60 s, on the real node code
//! (feature `proptest`).
//!
//! `cargo run --release --features proptest --example props_speed`
//!
//! The constants are the tuner's for the longest chain (what `entrain tune --out` would
//! write for `vineyard` below), held fixed for every deployment.

use entrain::assess::{self, NetworkModel};
use entrain::props::{self, Deployments, Effort, Family, Firmware, Property};
use entrain::scenario::Scenario;
use std::path::Path;
use std::time::Instant;

/// A row of irrigation valves strung along a vineyard terrace, opening in turn: 64 nodes
/// on a chain, 50 updates a second over a low-power radio. Invented for entrain.
const VINEYARD: &str = r#"
version = 1
name = "Vineyard terrace valves"
[network]
topology = "chain"
nodes = 64
[timing]
update_rate_hz = 50
phase_period_s = 0.01
[law]
coupling = "sine"
kp = "tune"
ki = "tune"
[clock]
crystal_tolerance_ppm = 50
[link]
loss_fraction = 0.1
[lock]
initial_spread_s = 0.004
tolerance_s = 0.0002
budget_s = 60
[margins]
gain = 1.5
"#;

fn main() {
    let tuned = Scenario::from_toml(Path::new("vineyard.toml"), VINEYARD).expect("valid scenario");
    let network = NetworkModel::of(&tuned).expect("a chain");
    let gains = assess::choose(&tuned, &network).expect("the tuner finds gains");
    let p = assess::predict(&tuned, &network, gains.kp, gains.ki).expect("a prediction");
    let config = p
        .constants
        .config()
        .expect("the node law takes the tuned constants");
    let firmware = Firmware::<2>::new(config, tuned.timer_hz);
    println!(
        "constants: kp {:.6}, ki {:.6} (Q16.16 {} / {}), 64-node bound {:.1} s",
        p.kp(),
        p.ki(),
        p.constants.kp_q16,
        p.constants.ki_q16,
        p.settle.map_or(f64::NAN, |s| s.bound_s)
    );
    let deployments = Deployments::new(firmware.fix(&tuned).expect("constants fit"))
        .family(Family::Chain, 2..=64)
        .crystals_within(50.0)
        .loss(0.0..=0.10);
    let effort = Effort::default();
    let properties = [
        Property::Stable,
        Property::SettlesWithinBudget,
        Property::TrimBelowLimit,
        Property::TableFits,
    ];
    let threads = rayon::current_num_threads();
    let start = Instant::now();
    let outcome = props::search::<2>(&deployments, &properties, &effort);
    let took = start.elapsed().as_secs_f64();
    match outcome {
        Ok(cases) => println!(
            "{cases} deployments passed in {took:.1} s ({:.0} ms a deployment, {} runs each, {threads} threads)",
            took * 1e3 / f64::from(cases),
            effort.runs
        ),
        Err(c) => println!("failed after {took:.1} s:\n{c}"),
    }
}
