//! The README's JSON section documents what the command emits: every key of every JSON
//! answer (`check`, `simulate`, `tune`, `spectrum` on bundled examples) is named in it,
//! and every key it names in backticks is one the command emits or a documented value.
#![cfg(feature = "cli")]

use assert_cmd::Command;
use serde_json::Value;
use std::collections::BTreeSet;

fn answer(args: &[&str]) -> Value {
    let out = Command::cargo_bin("entrain")
        .unwrap()
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(args)
        .arg("--json")
        .output()
        .unwrap();
    serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "{args:?}: not JSON ({e}): {}",
            String::from_utf8_lossy(&out.stderr)
        )
    })
}

/// Every object key, and every string value, anywhere in `v`.
fn collect(v: &Value, keys: &mut BTreeSet<String>, strings: &mut BTreeSet<String>) {
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                keys.insert(k.clone());
                collect(x, keys, strings);
            }
        }
        Value::Array(a) => a.iter().for_each(|x| collect(x, keys, strings)),
        Value::String(s) => {
            strings.insert(s.clone());
        }
        _ => {}
    }
}

/// The README's JSON section: from its heading to the next heading of the same level.
fn json_section() -> String {
    let readme = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md"))
        .expect("README.md");
    let start = readme
        .find("### JSON, schema version")
        .expect("README has a JSON section");
    let rest = &readme[start + 3..];
    let end = rest.find("\n### ").map_or(rest.len(), |e| e + 3);
    readme[start..start + end].to_string()
}

/// Backticked words that look like JSON keys or codes (lower case, digits, underscores).
fn backticked(text: &str) -> BTreeSet<String> {
    text.split('`')
        .skip(1)
        .step_by(2)
        .filter(|w| {
            !w.is_empty()
                && w.chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
        })
        .map(str::to_string)
        .collect()
}

#[test]
fn every_emitted_key_is_documented_and_every_documented_key_is_emitted() {
    let mut keys = BTreeSet::new();
    let mut strings = BTreeSet::new();
    let plots = tempfile::tempdir().unwrap();
    let plots = plots.path().join("plots");
    let plots = plots.to_str().unwrap();
    for args in [
        &[
            "simulate",
            "examples/conveyor.toml",
            "--runs",
            "8",
            "--plots",
            plots,
        ][..],
        &["check", "examples/footbridge.toml", "--runs", "8"],
        &["check", "examples/conveyor.toml", "--no-simulate"],
        &["tune", "examples/conveyor.toml"],
        &["spectrum", "examples/footbridge.toml"],
        &["spectrum", "examples/courtyard.toml"],
    ] {
        collect(&answer(args), &mut keys, &mut strings);
    }
    // The field check on the logs `simulate --telemetry` writes.
    let logs = tempfile::tempdir().unwrap();
    let dir = logs.path().join("logs");
    let dir_s = dir.to_str().unwrap();
    collect(
        &answer(&[
            "simulate",
            "examples/footbridge.toml",
            "--runs",
            "1",
            "--telemetry",
            dir_s,
        ]),
        &mut keys,
        &mut strings,
    );
    let mut field: Vec<String> = vec!["field".into(), "examples/footbridge.toml".into()];
    for e in std::fs::read_dir(&dir).unwrap() {
        field.push(e.unwrap().path().to_str().unwrap().to_owned());
    }
    // A damaged line, so that the list of refused lines is emitted too.
    let damaged = logs.path().join("damaged.log");
    std::fs::write(&damaged, "ET1 1 2 x\n").unwrap();
    field.push(damaged.to_str().unwrap().to_owned());
    field.extend([
        "--plot".into(),
        logs.path().join("field.svg").to_str().unwrap().to_owned(),
    ]);
    let field: Vec<&str> = field.iter().map(String::as_str).collect();
    collect(&answer(&field), &mut keys, &mut strings);
    let section = json_section();
    let documented = backticked(&section);

    let missing: Vec<&String> = keys.iter().filter(|k| !documented.contains(*k)).collect();
    assert!(
        missing.is_empty(),
        "keys emitted but not named in the README's JSON section: {missing:?}"
    );

    // Codes and enumerated values are documented although one run emits only some of them.
    let codes: BTreeSet<String> = entrain::assess::Reason::CODES
        .iter()
        .chain(entrain::assess::Warning::CODES)
        .chain(&entrain::field::FieldReason::CODES)
        .chain(&entrain::field::FieldWarning::CODES)
        .map(|c| (*c).to_string())
        .collect();
    let unknown: Vec<&String> = documented
        .iter()
        .filter(|w| !keys.contains(*w) && !strings.contains(*w) && !codes.contains(*w))
        .filter(|w| !DOCUMENTED_VALUES.contains(&w.as_str()))
        .collect();
    assert!(
        unknown.is_empty(),
        "named in the README's JSON section but never emitted: {unknown:?}"
    );
}

/// Enumerated values the README lists that these few runs do not all produce.
const DOCUMENTED_VALUES: &[&str] = &[
    "closed_form",
    "numeric",
    "scenario",
    "tuned",
    "fixed",
    "tune_p",
    "tune_pi",
    "check",
    "simulate",
    "tune",
    "spectrum",
    "field",
    "kp",
    "ki",
    "kp_and_ki",
    "cannot_lock",
    "trim_out_of_range",
    "budget_too_short",
    "margin_too_small",
    "bound",
    "null",
];
