//! `entrain simulate --telemetry` and `entrain field` end to end: the logs the simulator
//! writes pass the field check of their own scenario; damaged lines are listed with file
//! and line; unreadable logs exit 2 with a clear line; the plot marks what it shows.
#![cfg(feature = "cli")]

use assert_cmd::Command;
use serde_json::Value;
use std::path::{Path, PathBuf};

fn entrain() -> Command {
    let mut c = Command::cargo_bin("entrain").unwrap();
    c.current_dir(env!("CARGO_MANIFEST_DIR"));
    c
}

const SCENARIO: &str = "examples/footbridge.toml";

/// Simulated logs of the courtyard ring in a fresh folder.
fn simulated_logs(dir: &Path) -> Vec<PathBuf> {
    let logs = dir.join("logs");
    let out = entrain()
        .args(["simulate", SCENARIO, "--runs", "1", "--telemetry"])
        .arg(&logs)
        .arg("--json")
        .output()
        .unwrap();
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let written: Vec<PathBuf> = v["telemetry"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| PathBuf::from(p.as_str().unwrap()))
        .collect();
    assert_eq!(written.len(), 24, "one log per node of the string");
    written
}

#[test]
fn simulated_logs_pass_their_own_scenario_and_damage_is_listed() {
    let dir = tempfile::tempdir().unwrap();
    let mut logs = simulated_logs(dir.path());
    logs.sort();
    let plot = dir.path().join("field.svg");
    let out = entrain()
        .args(["field", SCENARIO])
        .args(&logs)
        .arg("--plot")
        .arg(&plot)
        .arg("--json")
        .output()
        .unwrap();
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["command"], "field");
    assert_eq!(v["verdict"]["pass"], true, "{}", v["verdict"]);
    assert_eq!(out.status.code(), Some(0));
    assert_eq!(v["links"]["missing"], serde_json::json!([]));
    assert_eq!(v["links"]["unexpected"], serde_json::json!([]));
    assert_eq!(v["links"]["present"], 23);

    // The plot: the observed series has one point per reconstructed round, and the
    // tolerance and budget are marked at their values.
    let svg = std::fs::read_to_string(&plot).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let key = |k: &str| {
        doc.descendants()
            .find(|n| {
                n.attribute("data-key") == Some(k)
                    && n.attribute("class").is_some_and(|c| c.contains("series"))
            })
            .unwrap_or_else(|| panic!("no {k} in the plot"))
    };
    let rounds = v["observed"]["rounds"].as_u64().unwrap()
        - v["observed"]["incomplete_rounds"].as_u64().unwrap();
    assert_eq!(
        key("observed").attribute("data-count"),
        Some(rounds.to_string().as_str())
    );
    let tol: f64 = key("tolerance")
        .attribute("data-value")
        .unwrap()
        .parse()
        .unwrap();
    assert_eq!(tol, v["scenario"]["lock_tolerance_s"].as_f64().unwrap());
    assert!(
        doc.descendants()
            .any(|n| n.attribute("data-key") == Some("decay-fitted"))
    );

    // Damage one line of node 3's log: the line is listed with file and line number.
    let victim = logs.iter().find(|p| p.ends_with("node-3.log")).unwrap();
    let text = std::fs::read_to_string(victim).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_owned).collect();
    lines[9] = lines[9].replacen("ET1 3 9 ", "ET1 3 8 ", 1);
    std::fs::write(victim, lines.join("\n") + "\n").unwrap();
    let out = entrain()
        .args(["field", SCENARIO])
        .args(&logs)
        .output()
        .unwrap();
    let report = String::from_utf8(out.stdout).unwrap();
    let want = format!("{}:10: column", victim.display());
    assert!(report.contains(&want), "{report}");
    let row = report
        .lines()
        .find(|l| l.trim_start().starts_with("malformed lines"))
        .unwrap();
    assert_eq!(row.split_whitespace().nth(2), Some("1"), "{row}");
}

#[test]
fn unreadable_logs_exit_2_with_a_clear_line() {
    let dir = tempfile::tempdir().unwrap();
    let absent = dir.path().join("absent.log");
    let out = entrain()
        .args(["field", SCENARIO])
        .arg(&absent)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains("absent.log") && err.starts_with("entrain: error:"),
        "{err}"
    );
    let out = entrain()
        .args(["field", SCENARIO])
        .arg(dir.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(
        String::from_utf8(out.stderr)
            .unwrap()
            .contains("not a regular file")
    );
    // No log at all is a usage error.
    let out = entrain().args(["field", SCENARIO]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    // A log with no telemetry fails the check, it does not crash it.
    let empty = dir.path().join("console.log");
    std::fs::write(&empty, "boot\nhello\n").unwrap();
    let out = entrain()
        .args(["field", SCENARIO])
        .arg(&empty)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["verdict"]["reasons"][0]["code"], "no_telemetry");
    // The plot is never written over a log.
    let logs = simulated_logs(dir.path());
    let out = entrain()
        .args(["field", SCENARIO])
        .args(&logs)
        .arg("--plot")
        .arg(&logs[0])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn p_law_logs_say_crystals_not_estimated() {
    // A chain of four under the P law: no node trims, so the report must not turn the
    // zero trims into crystal estimates of 0 ppm.
    let dir = tempfile::tempdir().unwrap();
    let scenario = dir.path().join("p-chain.toml");
    std::fs::write(
        &scenario,
        r#"version = 1
name = "P-law chain"
[network]
topology = "chain"
nodes = 4
[timing]
update_rate_hz = 10
phase_period_s = 1
[law]
coupling = "sine"
kp = 0.25
[clock]
crystal_tolerance_ppm = 50
crystal_ppm = [40, -30, 10, -45]
timestamp_jitter_s = 0.00001
[lock]
initial_spread_s = 0.2
tolerance_s = 0.005
budget_s = 20
[monte_carlo]
runs = 1
seed = 3
"#,
    )
    .unwrap();
    let logs = dir.path().join("logs");
    let out = entrain()
        .arg("simulate")
        .arg(&scenario)
        .arg("--telemetry")
        .arg(&logs)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut files: Vec<PathBuf> = std::fs::read_dir(&logs)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    assert_eq!(files.len(), 4);
    let out = entrain()
        .arg("field")
        .arg(&scenario)
        .args(&files)
        .arg("--json")
        .output()
        .unwrap();
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["observed"]["crystals_estimated"], false);
    let nodes = v["nodes"].as_array().unwrap();
    assert_eq!(nodes.len(), 4);
    for n in nodes {
        assert_eq!(n["trim_ppm"], 0.0, "{n}");
        assert!(n["crystal_ppm"].is_null(), "{n}");
    }
    let out = entrain()
        .arg("field")
        .arg(&scenario)
        .args(&files)
        .output()
        .unwrap();
    let report = String::from_utf8(out.stdout).unwrap();
    let rows: Vec<&str> = report
        .lines()
        .skip_while(|l| l.trim() != "Nodes")
        .skip(2)
        .take(4)
        .collect();
    assert_eq!(rows.len(), 4, "{report}");
    for row in rows {
        // The trim column reads 0.0 ppm; the crystal column must not.
        assert!(row.contains("not estimated"), "{row}");
        assert_eq!(row.matches("ppm").count(), 1, "{row}");
    }
    assert!(report.contains("crystal offsets not estimated"), "{report}");
}
