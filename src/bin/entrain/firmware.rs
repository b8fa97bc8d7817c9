//! Firmware constants in the node law's own units, as a Rust source file to `include!`.
//!
//! The written file holds plain `pub const` items (timer ticks, Q16.16 gain raw values,
//! phase counts, ppb) and a `CONFIG: entrain::Config` built from them in a `const`
//! context, so a value the node law refuses stops the firmware build instead of reaching
//! a board:
//!
//! ```ignore
//! mod sync_consts { include!("sync_consts.rs"); }
//! let node: entrain::Node<4> = entrain::Node::new(sync_consts::CONFIG, entrain::Phase::ZERO, 0);
//! ```

use entrain::Law;
use entrain::assess::NodeConstants;
use entrain::scenario::Scenario;
use std::fmt::Write as _;

/// Version of the constants file layout (a comment in its header).
pub const FIRMWARE_FORMAT_VERSION: u32 = 1;

/// The Rust source of the constants file of `constants` for `scenario`.
pub fn to_rust(constants: &NodeConstants, scenario: &Scenario) -> String {
    let (kp, ki) = constants.gains();
    let law = match constants.law {
        Law::Linear => "Linear",
        _ => "Sine",
    };
    let file = scenario
        .path
        .file_name()
        .map_or_else(String::new, |n| n.to_string_lossy().into_owned());
    let mut s = String::new();
    let _ = writeln!(
        s,
        "// Node-law constants for \"{}\", written by `entrain tune` from {file}.",
        scenario.name.replace(['\n', '\r'], " ")
    );
    let _ = writeln!(
        s,
        "// Constants format {FIRMWARE_FORMAT_VERSION}. Units: timer ticks, Q16.16 gains, phase counts (2^32 = one turn), ppb."
    );
    let _ = writeln!(
        s,
        "// Use: `mod sync_consts {{ include!(\"this_file.rs\"); }}` then `sync_consts::CONFIG`."
    );
    let _ = writeln!(s);
    let item = |s: &mut String, doc: String, name: &str, ty: &str, value: String| {
        let _ = writeln!(s, "/// {doc}");
        let _ = writeln!(s, "pub const {name}: {ty} = {value};");
    };
    item(
        &mut s,
        format!(
            "Timer ticks per phase turn ({} Hz timer, {} s turn).",
            scenario.timer_hz, scenario.phase_period_s
        ),
        "TICKS_PER_PERIOD",
        "u32",
        constants.ticks_per_period.to_string(),
    );
    item(
        &mut s,
        format!(
            "Timer ticks between updates ({} Hz updates).",
            scenario.update_rate_hz
        ),
        "UPDATE_TICKS",
        "u32",
        constants.update_ticks.to_string(),
    );
    item(
        &mut s,
        format!("Proportional gain per update, Q16.16 raw ({kp:.6})."),
        "KP_Q16",
        "u32",
        constants.kp_q16.to_string(),
    );
    item(
        &mut s,
        format!("Integral (rate-trim) gain per update, Q16.16 raw ({ki:.6})."),
        "KI_Q16",
        "u32",
        constants.ki_q16.to_string(),
    );
    item(
        &mut s,
        format!(
            "Trim leak per update, Q16.16 raw ({:.6}; holds the common rate at the crystals' mean).",
            constants.leak()
        ),
        "LEAK_Q16",
        "u32",
        constants.leak_q16.to_string(),
    );
    item(
        &mut s,
        format!(
            "Largest phase step per update, counts ({:.6} turn).",
            constants.slew_limit_turns()
        ),
        "SLEW_LIMIT_COUNTS",
        "u32",
        constants.slew_limit_counts.to_string(),
    );
    item(
        &mut s,
        "Largest rate trim either way, parts per billion.".to_owned(),
        "TRIM_LIMIT_PPB",
        "u32",
        constants.trim_limit_ppb.to_string(),
    );
    item(
        &mut s,
        format!(
            "Silence before a neighbour is dropped, timer ticks ({} updates).",
            scenario.neighbour_timeout_updates
        ),
        "TIMEOUT_TICKS",
        "u32",
        constants.timeout_ticks.to_string(),
    );
    item(
        &mut s,
        "Coupling law.".to_owned(),
        "LAW",
        "entrain::Law",
        format!("entrain::Law::{law}"),
    );
    let _ = writeln!(
        s,
        "/// The node configuration; a value the node law refuses fails the build."
    );
    let _ = writeln!(
        s,
        "pub const CONFIG: entrain::Config = match entrain::Config::builder(TICKS_PER_PERIOD, UPDATE_TICKS)"
    );
    for line in [
        "    .kp(entrain::Gain::from_q16(KP_Q16))",
        "    .ki(entrain::Gain::from_q16(KI_Q16))",
        "    .leak(entrain::Gain::from_q16(LEAK_Q16))",
        "    .law(LAW)",
        "    .slew_limit(SLEW_LIMIT_COUNTS)",
        "    .trim_limit_ppb(TRIM_LIMIT_PPB)",
        "    .timeout_ticks(TIMEOUT_TICKS)",
        "    .build()",
        "{",
        "    Ok(config) => config,",
        "    Err(_) => panic!(\"entrain: these constants do not make a valid node configuration\"),",
        "};",
    ] {
        let _ = writeln!(s, "{line}");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use entrain::{Config, ConfigError, Gain};
    use std::path::Path;

    fn scenario() -> Scenario {
        let text = r#"
version = 1
[network]
topology = "ring"
nodes = 12
[timing]
update_rate_hz = 20
phase_period_s = 0.02
timer_hz = 32768
[law]
coupling = "linear"
kp = 0.3
ki = 0.01
slew_limit_turns = 0.125
trim_limit_ppm = 150
neighbour_timeout_updates = 4
[lock]
initial_spread_s = 0.005
tolerance_s = 0.0001
budget_s = 20
"#;
        Scenario::from_toml(Path::new("ring.toml"), text).unwrap()
    }

    /// Pull `pub const NAME: u32 = VALUE;` out of the written text, independently of the
    /// writer's own numbers.
    fn read_const(text: &str, name: &str) -> u32 {
        let prefix = format!("pub const {name}: u32 = ");
        let line = text.lines().find(|l| l.starts_with(&prefix)).unwrap();
        line[prefix.len()..line.len() - 1].parse().unwrap()
    }

    #[test]
    fn written_constants_build_the_config() {
        let s = scenario();
        let c = NodeConstants::new(&s, 0.3, 0.01).unwrap();
        let text = to_rust(&c, &s);
        let built = Config::builder(
            read_const(&text, "TICKS_PER_PERIOD"),
            read_const(&text, "UPDATE_TICKS"),
        )
        .kp(Gain::from_q16(read_const(&text, "KP_Q16")))
        .ki(Gain::from_q16(read_const(&text, "KI_Q16")))
        .leak(Gain::from_q16(read_const(&text, "LEAK_Q16")))
        .law(Law::Linear)
        .slew_limit(read_const(&text, "SLEW_LIMIT_COUNTS"))
        .trim_limit_ppb(read_const(&text, "TRIM_LIMIT_PPB"))
        .timeout_ticks(read_const(&text, "TIMEOUT_TICKS"))
        .build()
        .unwrap();
        assert_eq!(Ok(built), c.config());
        // Hand-computed: 32768 Hz × 0.02 s = 655.36 → 655 ticks; 32768 / 20 = 1638.4 → 1638;
        // 0.3 × 65536 = 19660.8 → 19661; 0.01 × 65536 = 655.36 → 655; 1/8 turn = 2^29.
        assert_eq!(built.ticks_per_period(), 655);
        assert_eq!(built.update_ticks(), 1638);
        assert_eq!(built.kp().q16(), 19_661);
        assert_eq!(built.ki().q16(), 655);
        assert_eq!(built.slew_limit(), 1 << 29);
        assert_eq!(built.trim_limit_ppb(), 150_000);
        assert_eq!(built.timeout_ticks(), 4 * 1638);
        assert!(text.contains("entrain::Law::Linear"));
    }

    #[test]
    fn bad_gain_is_refused() {
        let s = scenario();
        assert_eq!(
            NodeConstants::new(&s, 2.5, 0.0),
            Err(ConfigError::GainOutOfRange)
        );
        let c = NodeConstants::new(&s, 0.1, 0.2).unwrap();
        assert_eq!(
            c.config(),
            Err(ConfigError::IntegralGainNotBelowProportional)
        );
    }
}
