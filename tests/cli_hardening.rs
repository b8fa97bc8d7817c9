//! Hostile files and arguments (each test reproduces one finding of a hostile-user trial):
//! special files and oversized files refused before reading, command-line values held to
//! the scenario file's ranges, a Monte Carlo that would run for days refused before it
//! starts, outputs written whole and never over an input or through a symbolic link,
//! control characters shown escaped.
#![cfg(all(feature = "cli", unix))]

use assert_cmd::Command;
use std::path::{Path, PathBuf};
use std::process::Output;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn run(args: &[&str]) -> Output {
    Command::cargo_bin("entrain")
        .unwrap()
        .current_dir(root())
        .args(args)
        .timeout(std::time::Duration::from_secs(300))
        .output()
        .unwrap()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn refused(args: &[&str], says: &str) {
    let o = run(args);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {e}");
    assert!(e.contains(says), "{args:?}: {e}");
    assert!(!e.contains("panicked"), "{args:?}: {e}");
}

fn temp() -> tempfile::TempDir {
    tempfile::tempdir().unwrap()
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn mkfifo(p: &Path) {
    let ok = std::process::Command::new("mkfifo")
        .arg(p)
        .status()
        .unwrap()
        .success();
    assert!(ok, "mkfifo");
}

/// Finding: `check /dev/zero` grew without bound; a FIFO hung for ever.
#[test]
fn devices_pipes_and_directories_are_refused_before_reading() {
    let dir = temp();
    let fifo = dir.path().join("scenario.toml");
    mkfifo(&fifo);
    refused(&["check", "/dev/zero"], "not a regular file");
    refused(&["check", s(&fifo)], "not a regular file");
    refused(&["spectrum", s(dir.path())], "is a directory");
}

/// Finding: `edge_list_file = "/dev/zero"` grew to 11 GB; the same for a FIFO.
#[test]
fn an_edge_list_that_is_a_device_or_pipe_is_refused() {
    let dir = temp();
    let text = std::fs::read_to_string(root().join("examples/conveyor.toml")).unwrap();
    for (name, edges) in [("zero.toml", "/dev/zero"), ("fifo.toml", "fifo")] {
        let changed: String = text
            .lines()
            .map(|l| {
                if l.starts_with("edge_list_file") {
                    format!("edge_list_file = \"{edges}\"\n")
                } else {
                    format!("{l}\n")
                }
            })
            .collect();
        std::fs::write(dir.path().join(name), changed).unwrap();
    }
    mkfifo(&dir.path().join("fifo"));
    for name in ["zero.toml", "fifo.toml"] {
        refused(&["spectrum", s(&dir.path().join(name))], "edge-list file");
        refused(
            &["spectrum", s(&dir.path().join(name))],
            "not a regular file",
        );
    }
}

/// A scenario file over the documented size cap is refused without being read.
#[test]
fn an_oversized_scenario_file_is_refused() {
    let dir = temp();
    let big = dir.path().join("big.toml");
    let f = std::fs::File::create(&big).unwrap();
    f.set_len(entrain::scenario::MAX_SCENARIO_BYTES + 1)
        .unwrap();
    refused(&["check", s(&big)], "larger than the 1048576-byte limit");
}

/// Findings: `--runs` skipped the file's limit (4,294,967,295 accepted), `check --runs 0`
/// skipped the verification and exited 0, `--seed` took 2^64 − 1.
#[test]
fn command_line_runs_and_seed_obey_the_file_ranges() {
    refused(
        &["check", "examples/footbridge.toml", "--runs", "0"],
        "0 is not in 1..=10000",
    );
    refused(
        &["check", "examples/footbridge.toml", "--runs", "4294967295"],
        "is not in 1..=10000",
    );
    refused(
        &[
            "simulate",
            "examples/footbridge.toml",
            "--seed",
            "18446744073709551615",
        ],
        "is not in 0..=9223372036854775807",
    );
    refused(
        &["check", "examples/footbridge.toml", "--max-minutes", "0"],
        "not a positive number of minutes",
    );
}

/// Finding: values inside the documented ranges could run for years with no estimate.
/// A 2,000-node string with 5,000 runs is estimated (at a rate measured on the spot)
/// and refused before the Monte Carlo, naming the option that accepts it.
#[test]
fn a_monte_carlo_of_days_is_refused_with_its_estimate() {
    let dir = temp();
    let text = std::fs::read_to_string(root().join("examples/footbridge.toml")).unwrap();
    let big = text
        .replace("nodes = 24", "nodes = 2000")
        .replace("runs = 24", "runs = 5000");
    assert_ne!(big, text);
    let path = dir.path().join("long.toml");
    std::fs::write(&path, big).unwrap();
    let o = run(&["check", s(&path), "--max-minutes", "1"]);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(e.contains("the Monte Carlo would take about"), "{e}");
    assert!(e.contains("neighbour-updates"), "{e}");
    assert!(e.contains("pass --max-minutes"), "{e}");
}

fn conveyor_copy(dir: &Path) -> PathBuf {
    for f in ["conveyor.toml", "conveyor.edges"] {
        std::fs::copy(root().join("examples").join(f), dir.join(f)).unwrap();
    }
    dir.join("conveyor.toml")
}

/// Findings: `tune --out` overwrote the scenario itself, followed symlinks silently, and a
/// failed write could leave a truncated file.
#[test]
fn tune_never_writes_over_its_inputs_or_through_a_link_unless_forced() {
    let dir = temp();
    let scenario = conveyor_copy(dir.path());
    let before = std::fs::read(&scenario).unwrap();
    refused(
        &["tune", s(&scenario), "--out", s(&scenario)],
        "is an input of this run",
    );
    refused(
        &[
            "tune",
            s(&scenario),
            "--out",
            s(&dir.path().join("conveyor.edges")),
        ],
        "is an input of this run",
    );
    // A link to the scenario: refused as a link, and forced still refused as an input.
    let link = dir.path().join("consts.rs");
    std::os::unix::fs::symlink(&scenario, &link).unwrap();
    refused(&["tune", s(&scenario), "--out", s(&link)], "symbolic link");
    refused(
        &["tune", s(&scenario), "--out", s(&link), "--force"],
        "is an input of this run",
    );
    assert_eq!(std::fs::read(&scenario).unwrap(), before);

    // A link to an ordinary file is written through with --force; the link stays a link.
    let target = dir.path().join("real_consts.rs");
    std::fs::write(&target, "old").unwrap();
    let link2 = dir.path().join("consts2.rs");
    std::os::unix::fs::symlink(&target, &link2).unwrap();
    let o = run(&["tune", s(&scenario), "--out", s(&link2), "--force"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let written = std::fs::read_to_string(&target).unwrap();
    assert!(written.contains("pub const KP_Q16"), "{written}");
    assert!(
        std::fs::symlink_metadata(&link2)
            .unwrap()
            .file_type()
            .is_symlink()
    );
    // Nothing half-written is left behind.
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".partial"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

/// Finding: `--plots` errors on an unwritable folder only after the whole Monte Carlo.
/// Here the folder cannot exist (its parent is a file) and the Monte Carlo would be
/// refused as too long: the folder's error comes first, so it was checked before.
#[test]
fn plots_folder_is_checked_before_the_monte_carlo() {
    let dir = temp();
    let file = dir.path().join("not_a_folder");
    std::fs::write(&file, "x").unwrap();
    let text = std::fs::read_to_string(root().join("examples/footbridge.toml")).unwrap();
    let path = dir.path().join("long.toml");
    std::fs::write(
        &path,
        text.replace("nodes = 24", "nodes = 2000")
            .replace("runs = 24", "runs = 5000"),
    )
    .unwrap();
    let plots = file.join("plots");
    let o = run(&[
        "simulate",
        s(&path),
        "--plots",
        s(&plots),
        "--max-minutes",
        "1",
    ]);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(e.contains("cannot write"), "{e}");
    assert!(!e.contains("Monte Carlo would take"), "{e}");

    // A plots folder that is a symbolic link is refused unless forced.
    let real = dir.path().join("real_plots");
    std::fs::create_dir(&real).unwrap();
    let link = dir.path().join("plots_link");
    std::os::unix::fs::symlink(&real, &link).unwrap();
    refused(
        &[
            "simulate",
            "examples/conveyor.toml",
            "--runs",
            "2",
            "--plots",
            s(&link),
        ],
        "symbolic link",
    );
}

/// Finding: control characters in `name` reached the terminal raw.
#[test]
fn control_characters_in_names_are_shown_escaped() {
    let dir = temp();
    let text = std::fs::read_to_string(root().join("examples/footbridge.toml")).unwrap();
    let hostile = text
        .lines()
        .map(|l| {
            if l.starts_with("name") {
                "name = \"rail\\u001b[2J\\u0007 string\"\n".to_owned()
            } else {
                format!("{l}\n")
            }
        })
        .collect::<String>();
    let path = dir.path().join("hostile.toml");
    std::fs::write(&path, hostile).unwrap();
    let o = run(&["check", s(&path), "--no-simulate"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("rail\\u{1b}[2J\\u{7} string"), "{out}");
    assert!(!out.contains('\u{1b}') && !out.contains('\u{7}'));
    // The JSON answer keeps the name exact, escaped as JSON escapes it.
    let o = run(&["spectrum", s(&path), "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["scenario"]["name"], "rail\u{1b}[2J\u{7} string");
    // Error lines too: an unknown key with an escape in it.
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, "version = 1\n\"\\u001b[31mkey\" = 1\n").unwrap();
    let o = run(&["check", s(&bad)]);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(!e.contains('\u{1b}'), "{e:?}");
}
