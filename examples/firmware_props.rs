//! How a firmware repository property-tests the constants it flashes (feature
//! `proptest`).
//!
//! The firmware keeps the scenario it tuned from (`footbridge.toml`) and the constants
//! `entrain tune --out` wrote (`firmware/footbridge_consts.rs`), which its node code
//! `include!`s. Its test states what must hold for every deployment the product may meet
//! and checks it on the real node code. In the firmware repository this is a test:
//!
//! ```ignore
//! #[test]
//! fn flashed_constants_hold_on_every_handrail() {
//!     handrail_properties();
//! }
//! ```
//!
//! Here it runs as an example:
//! `cargo run --release --features proptest --example firmware_props`.
//! On a failure it panics with the smallest failing deployment as a scenario file (also
//! written under the temp folder) to investigate with `entrain check`.

use entrain::props::{Deployments, Effort, Family, Firmware, Property};
use entrain::scenario::Scenario;
use std::path::Path;

/// The constants as flashed, from the file `entrain tune --out` wrote.
mod sync_consts {
    include!("firmware/footbridge_consts.rs");
}

/// The firmware: its flashed configuration, its 1 MHz timer, and `Node<4>` (a handrail
/// node hears at most its two neighbours; the table has room for four).
const FIRMWARE: Firmware<4> = Firmware::new(sync_consts::CONFIG, 1_000_000);

fn handrail_properties() {
    let base =
        Scenario::load(&Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/footbridge.toml"))
            .expect("the scenario the constants were tuned from");
    // Every handrail section of 2 to 24 sensors, every crystal pattern within ±20 ppm
    // (the worst-case split included), 0 to 10 % of beacons lost, a start spread of up to
    // 0.4 of a sample period, and one sensor browning out in the first minute: the
    // constants we flash lock within the file's 240 s budget.
    let deployments = Deployments::new(FIRMWARE.fix(&base).expect("constants fit the file"))
        .family(Family::Chain, 2..=24)
        .crystals_within(20.0)
        .loss(0.0..=0.10)
        .initial_spread_s(0.0001..=0.0004)
        .reboots(0..=1, 60.0, 20);
    let effort = Effort {
        cases: 64,
        ..Effort::default()
    };
    FIRMWARE.verify(
        &deployments,
        &[
            Property::Stable,
            Property::SettlesWithinBudget,
            Property::TrimBelowLimit,
            Property::TableFits,
        ],
        &effort,
    );
}

fn main() {
    let start = std::time::Instant::now();
    handrail_properties();
    println!(
        "footbridge constants: 64 deployments passed in {:.1} s",
        start.elapsed().as_secs_f64()
    );
}
