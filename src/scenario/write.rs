//! The scenario file written back: [`Scenario::to_toml`].

use super::{GainSetting, Layout, LockQuantile, SCENARIO_VERSION, Scenario, law_keyword};
use crate::plan::Topology;
use std::fmt::Write as _;

/// A TOML basic string: quotes, backslashes and control characters escaped.
fn quoted(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 2);
    out.push('"');
    for ch in text.chars() {
        match ch {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\t' => out.push_str("\\t"),
            c if c.is_control() => {
                let _ = write!(out, "\\u{:04X}", u32::from(c));
            }
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// A real as TOML: the shortest text that reads back to the same `f64` (Rust's `Debug`
/// form, always with a `.` or an exponent, both valid TOML floats).
fn real(v: f64) -> String {
    assert!(
        v.is_finite(),
        "a checked scenario holds only finite numbers, found {v}"
    );
    format!("{v:?}")
}

fn gain(g: GainSetting) -> String {
    match g {
        GainSetting::Fixed(v) => real(v),
        GainSetting::Tune => "\"tune\"".to_owned(),
    }
}

impl Scenario {
    /// The scenario as a scenario file that [`Scenario::from_toml`] reads back to an equal
    /// value (given the same path): every key written out, defaults included, reals in
    /// their shortest exact form. An edge-list layout is written inline
    /// (`[network] edges`), so the file stands on its own.
    #[must_use]
    pub fn to_toml(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "version = {SCENARIO_VERSION}");
        let _ = writeln!(s, "name = {}", quoted(&self.name));
        let _ = writeln!(s, "\n[network]");
        let _ = writeln!(s, "topology = \"{}\"", self.layout.keyword());
        match &self.layout {
            Layout::Topology(
                Topology::Chain { nodes }
                | Topology::Ring { nodes }
                | Topology::Star { nodes }
                | Topology::Complete { nodes }
                | Topology::PinnedChain { nodes },
            ) => {
                let _ = writeln!(s, "nodes = {nodes}");
            }
            Layout::Topology(Topology::Grid { rows, cols } | Topology::Torus { rows, cols }) => {
                let _ = writeln!(s, "rows = {rows}\ncols = {cols}");
            }
            Layout::EdgeList {
                nodes,
                edges,
                weights,
                references,
                ..
            } => {
                let _ = writeln!(s, "nodes = {nodes}");
                let list: Vec<String> = edges
                    .iter()
                    .enumerate()
                    .map(|(k, (a, b))| match weights.get(k) {
                        Some(&w) => format!("[{a}, {b}, {}]", real(w)),
                        None => format!("[{a}, {b}]"),
                    })
                    .collect();
                let _ = writeln!(s, "edges = [{}]", list.join(", "));
                if !references.is_empty() {
                    let list: Vec<String> = references.iter().map(ToString::to_string).collect();
                    let _ = writeln!(s, "reference_nodes = [{}]", list.join(", "));
                }
            }
        }
        let _ = writeln!(s, "\n[timing]");
        let _ = writeln!(s, "update_rate_hz = {}", real(self.update_rate_hz));
        let _ = writeln!(s, "phase_period_s = {}", real(self.phase_period_s));
        let _ = writeln!(s, "timer_hz = {}", self.timer_hz);
        let _ = writeln!(s, "\n[law]");
        let _ = writeln!(s, "coupling = \"{}\"", law_keyword(self.law));
        let _ = writeln!(s, "kp = {}", gain(self.gains.kp));
        let _ = writeln!(s, "ki = {}", gain(self.gains.ki));
        let _ = writeln!(s, "slew_limit_turns = {}", real(self.slew_limit_turns));
        let _ = writeln!(s, "trim_limit_ppm = {}", real(self.trim_limit_ppm));
        let _ = writeln!(
            s,
            "neighbour_timeout_updates = {}",
            self.neighbour_timeout_updates
        );
        if let Some(leak) = self.trim_leak {
            let _ = writeln!(s, "trim_leak = {}", real(leak));
        }
        let _ = writeln!(s, "\n[clock]");
        let _ = writeln!(
            s,
            "crystal_tolerance_ppm = {}",
            real(self.crystal_tolerance_ppm)
        );
        if let Some(pattern) = &self.crystal_ppm {
            let list: Vec<String> = pattern.iter().map(|&e| real(e)).collect();
            let _ = writeln!(s, "crystal_ppm = [{}]", list.join(", "));
        }
        let _ = writeln!(s, "timestamp_jitter_s = {}", real(self.timestamp_jitter_s));
        if self.late_stamp_fraction > 0.0 {
            let _ = writeln!(
                s,
                "late_stamp_fraction = {}",
                real(self.late_stamp_fraction)
            );
            let _ = writeln!(s, "late_stamp_max_s = {}", real(self.late_stamp_max_s));
        }
        let _ = writeln!(
            s,
            "stamping = \"{}\"",
            match self.stamping {
                crate::sim::Stamping::CompletedTicks => "completed_ticks",
                crate::sim::Stamping::Nearest => "nearest",
            }
        );
        let _ = writeln!(s, "\n[link]");
        if self.latency_max_s > self.latency_s {
            let _ = writeln!(
                s,
                "latency_range_s = [{}, {}]",
                real(self.latency_s),
                real(self.latency_max_s)
            );
        } else {
            let _ = writeln!(s, "latency_s = {}", real(self.latency_s));
        }
        let _ = writeln!(s, "asymmetry_s = {}", real(self.asymmetry_s));
        let _ = writeln!(s, "latency_known = {}", self.latency_known);
        let _ = writeln!(s, "beacon_version = {}", self.beacon_version);
        let _ = writeln!(s, "loss_fraction = {}", real(self.loss_fraction));
        let _ = writeln!(s, "\n[lock]");
        let _ = writeln!(s, "initial_spread_s = {}", real(self.initial_spread_s));
        let _ = writeln!(s, "tolerance_s = {}", real(self.lock_tolerance_s));
        let _ = writeln!(s, "budget_s = {}", real(self.lock_budget_s));
        match self.quantile {
            LockQuantile::Fraction(q) => {
                let _ = writeln!(s, "quantile = {}", real(q));
            }
            LockQuantile::Bound => {
                let _ = writeln!(s, "quantile = \"bound\"");
            }
        }
        let _ = writeln!(s, "\n[margins]");
        let _ = writeln!(s, "gain = {}", real(self.margins.gain));
        let _ = writeln!(s, "delay_updates = {}", self.margins.delay_updates);
        let _ = writeln!(s, "\n[monte_carlo]");
        let _ = writeln!(s, "runs = {}", self.runs);
        let _ = writeln!(s, "seed = {}", self.seed);
        if let Some(d) = self.duration_s {
            let _ = writeln!(s, "duration_s = {}", real(d));
        }
        for r in &self.reboots {
            let _ = writeln!(s, "\n[[reboot]]");
            let _ = writeln!(s, "node = {}", r.node);
            let _ = writeln!(s, "at_s = {}", real(r.at_s));
            let _ = writeln!(s, "down_s = {}", real(r.down_s));
        }
        s
    }
}
