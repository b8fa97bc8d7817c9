//! The firmware constants file written by `entrain tune` compiles where firmware would
//! `include!` it, and its `CONFIG` is the node law's own checked configuration.
//! `examples/firmware/footbridge_consts.rs` was written by
//! `entrain tune examples/footbridge.toml --out examples/firmware/footbridge_consts.rs`.
#![cfg(feature = "cli")]

mod consts {
    include!("../examples/firmware/footbridge_consts.rs");
}

use entrain::{Gain, Node, Observation, Phase};

#[test]
fn included_constants_make_the_config() {
    let c = consts::CONFIG;
    assert_eq!(c.ticks_per_period(), consts::TICKS_PER_PERIOD);
    assert_eq!(c.update_ticks(), consts::UPDATE_TICKS);
    assert_eq!(c.kp(), Gain::from_q16(consts::KP_Q16));
    assert_eq!(c.ki(), Gain::from_q16(consts::KI_Q16));
    assert_eq!(c.slew_limit(), consts::SLEW_LIMIT_COUNTS);
    assert_eq!(c.trim_limit_ppb(), consts::TRIM_LIMIT_PPB);
    assert_eq!(c.timeout_ticks(), consts::TIMEOUT_TICKS);
    assert_eq!(c.law(), consts::LAW);
    // The footbridge: 1 MHz timer, 1 ms turn, 10 Hz updates (hand-computed ticks).
    assert_eq!(consts::TICKS_PER_PERIOD, 1_000);
    assert_eq!(consts::UPDATE_TICKS, 100_000);
}

#[test]
fn a_node_runs_on_the_included_config() {
    let mut node: Node<2> = Node::new(consts::CONFIG, Phase::ZERO, 0);
    let ahead = Observation {
        from: 1,
        phase: Phase::from_turns(0.01),
        rx_ticks: 0,
        delay_ticks: 0,
    };
    node.observe(ahead).unwrap();
    let report = node.update(0);
    assert_eq!(report.used, 1);
    assert!(report.correction > 0);
}
