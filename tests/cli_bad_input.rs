//! Bad input never panics: every malformed scenario in `tests/bad_scenarios/` exits with
//! status 2 and a message naming the file, the place (where there is one) and what is
//! wrong. Each file states its expected message (`# expect:`) and place (`# at: L:C`, or
//! `--:--` where the problem has no single place) in its first lines; the places were
//! counted by hand from the file text, not taken from the program.
#![cfg(feature = "cli")]

use assert_cmd::Command;
use std::path::{Path, PathBuf};

fn entrain() -> Command {
    Command::cargo_bin("entrain").unwrap()
}

fn catalogue() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bad_scenarios");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    files.sort();
    files
}

fn header(text: &str, key: &str) -> String {
    let prefix = format!("# {key}: ");
    text.lines()
        .find_map(|l| l.strip_prefix(&prefix))
        .unwrap_or_else(|| panic!("no `{prefix}` line"))
        .to_owned()
}

#[test]
fn catalogue_is_large_enough() {
    assert!(
        catalogue().len() >= 20,
        "only {} bad scenarios",
        catalogue().len()
    );
}

#[test]
fn every_bad_scenario_exits_2_with_its_message() {
    let mut failures = Vec::new();
    for file in catalogue() {
        let text = std::fs::read_to_string(&file).unwrap();
        let expect = header(&text, "expect");
        let at = header(&text, "at");
        for command in ["check", "spectrum", "tune"] {
            let out = entrain().arg(command).arg(&file).output().unwrap();
            let stderr = String::from_utf8_lossy(&out.stderr);
            let name = file.file_name().unwrap().to_string_lossy();
            if out.status.code() != Some(2) {
                failures.push(format!(
                    "{name} ({command}): status {:?}, stderr {stderr}",
                    out.status.code()
                ));
                continue;
            }
            if !stderr.contains(&expect) {
                failures.push(format!(
                    "{name} ({command}): message missing `{expect}` in: {stderr}"
                ));
            }
            if stderr.contains("panicked") || stderr.contains("RUST_BACKTRACE") {
                failures.push(format!("{name} ({command}): panic: {stderr}"));
            }
            if let Some((line, col)) = at.split_once(':').filter(|_| at != "--:--") {
                let place = format!(
                    "{name}:{}:{}:",
                    line.parse::<u32>().unwrap(),
                    col.parse::<u32>().unwrap()
                );
                if !stderr.contains(&place) {
                    failures.push(format!(
                        "{name} ({command}): place `{place}` missing in: {stderr}"
                    ));
                }
            } else if !stderr.contains(&*name) && !stderr.contains(".edges") {
                failures.push(format!("{name} ({command}): file not named in: {stderr}"));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn missing_scenario_file_exits_2() {
    let out = entrain()
        .args(["check", "no/such/scenario.toml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("no/such/scenario.toml"), "{stderr}");
    assert!(stderr.contains("cannot read the scenario file"), "{stderr}");
}

#[test]
fn usage_errors_exit_2() {
    for args in [
        vec!["check"],
        vec!["frobnicate", "x.toml"],
        vec!["check", "examples/footbridge.toml", "--runs", "many"],
        vec!["simulate", "examples/footbridge.toml", "--colour"],
    ] {
        let out = entrain()
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .args(&args)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        assert!(!String::from_utf8_lossy(&out.stderr).contains("panicked"));
    }
}

#[test]
fn help_and_version_exit_0() {
    for arg in ["--help", "--version"] {
        entrain().arg(arg).assert().success();
    }
}

#[test]
fn simulate_refuses_zero_runs() {
    let out = entrain()
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["simulate", "examples/courtyard.toml", "--runs", "0"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("0 is not in 1..=10000"));
}
