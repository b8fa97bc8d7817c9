//! The 5-node chain of the timing-bias tests and its closed forms (own derivation from the
//! law as documented in `Node::update`, docs/design.md "How hard a mean bias pushes the
//! common rate"; no published source).

use std::path::Path;

use entrain::assess::NodeConstants;
use entrain::scenario::Scenario;

/// A 5-node chain of our own for the bias tests: 10 Hz updates of a 1 s period on a 1 MHz
/// timer, ideal crystals, stamps to the nearest tick, version-1 beacons (no two-way
/// timing); `law`, extra `[clock]` lines and `[link]` lines as given.
pub fn ideal_chain(law: &str, clock: &str, link: &str) -> Scenario {
    let text = format!(
        r#"
version = 1
name = "biased chain"
[network]
topology = "chain"
nodes = 5
[timing]
update_rate_hz = 10
phase_period_s = 1
timer_hz = 1_000_000
[law]
{law}
[clock]
crystal_tolerance_ppm = 1
crystal_ppm = [0, 0, 0, 0, 0]
stamping = "nearest"
{clock}
[link]
{link}
beacon_version = 1
[lock]
initial_spread_s = 0.01
tolerance_s = 0.001
budget_s = 600
"#
    );
    Scenario::from_toml(Path::new("biased.toml"), &text).unwrap()
}

/// [`ideal_chain`] under the PI law (sine, kp 0.25, ki 0.0002) with `leak` and a trim
/// limit of `limit_ppm`, on links `latency_s` slower than anyone was told.
pub fn unseen_latency_chain(leak: f64, limit_ppm: f64, latency_s: f64) -> Scenario {
    ideal_chain(
        &format!(
            "coupling = \"sine\"\nkp = 0.25\nki = 0.0002\ntrim_leak = {leak}\ntrim_limit_ppm = {limit_ppm}"
        ),
        "",
        &format!("latency_range_s = [{latency_s}, {latency_s}]\nlatency_known = false"),
    )
}

/// [`ideal_chain`]'s nominal advance, turns per update (10 Hz updates of a 1 s period).
pub const TURNS_PER_UPDATE: f64 = 0.1;

/// [`ideal_chain`]'s updates a second.
pub const UPDATES_PER_S: f64 = 10.0;

/// The mean error every node of [`ideal_chain`] (4 links, 5 nodes) pulls with, turns,
/// when every node sees each neighbour late by `bias_turns`, at the proportional gain as
/// the node runs it (Q16.16).
pub fn mean_error_turns(constants: &NodeConstants, bias_turns: f64) -> f64 {
    let kp = f64::from(constants.kp_q16) / 65536.0;
    let (links, nodes) = (4.0, 5.0);
    -2.0 * links * bias_turns / (nodes - links * kp)
}

/// [`ideal_chain`]'s common rate, ppm, when every node sees each neighbour late by
/// `bias_turns`, at the gains and leak as the node runs them.
pub fn closed_form_ppm(constants: &NodeConstants, bias_turns: f64) -> f64 {
    let kp = f64::from(constants.kp_q16) / 65536.0;
    let ki_over_leak = if constants.ki_q16 == 0 {
        0.0
    } else {
        f64::from(constants.ki_q16) / f64::from(constants.leak_q16)
    };
    (kp + ki_over_leak) * mean_error_turns(constants, bias_turns) / TURNS_PER_UPDATE * 1e6
}

/// Without a leak, the ramp of [`ideal_chain`]'s common rate, ppm a second: every integral
/// grows by `ki·ē` per update, `ki` as the node runs it.
pub fn ramp_ppm_per_s(constants: &NodeConstants, bias_turns: f64) -> f64 {
    let ki = f64::from(constants.ki_q16) / 65536.0;
    ki * mean_error_turns(constants, bias_turns) / TURNS_PER_UPDATE * 1e6 * UPDATES_PER_S
}
