//! End-to-end runs of every command on the bundled examples. JSON answers are checked
//! against published closed forms and against the library's own planner and simulator
//! called directly (with the scenario mapping written out by hand here); SVG plots are
//! parsed as XML.
#![cfg(feature = "cli")]

use assert_cmd::Command;
use entrain::plan::{self, Model, Spread, Topology};
use entrain::{Config, Gain, Law, sim};
use serde_json::Value;
use std::f64::consts::PI;
use std::path::Path;

const TOL: f64 = 1e-12;

fn entrain() -> Command {
    let mut c = Command::cargo_bin("entrain").unwrap();
    c.current_dir(env!("CARGO_MANIFEST_DIR"));
    c
}

fn json(args: &[&str]) -> (Value, i32) {
    let out = entrain().args(args).arg("--json").output().unwrap();
    let status = out.status.code().unwrap();
    let v: Value = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "{args:?}: not JSON ({e}): {}",
            String::from_utf8_lossy(&out.stderr)
        )
    });
    assert_eq!(v["schema_version"], 2);
    (v, status)
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

/// Path P_N: λ_k = 2 − 2cos(kπ/N) (Fiedler 1973; Brouwer & Haemers 2012 §1.4).
fn path_eigenvalue(n: usize, k: usize) -> f64 {
    2.0 - 2.0 * (k as f64 * PI / n as f64).cos()
}

#[test]
fn spectrum_of_the_footbridge_chain_is_the_path_spectrum() {
    let (v, status) = json(&["spectrum", "examples/footbridge.toml"]);
    assert_eq!(status, 0);
    assert_eq!(v["command"], "spectrum");
    let ev: Vec<f64> = v["eigenvalues"].as_array().unwrap().iter().map(f).collect();
    assert_eq!(ev.len(), 24);
    for (k, l) in ev.iter().enumerate() {
        assert!((l - path_eigenvalue(24, k)).abs() < 1e-12, "λ{k} = {l}");
    }
    assert!((f(&v["spectrum"]["lambda_slow"]) - path_eigenvalue(24, 1)).abs() < TOL);
    assert!((f(&v["spectrum"]["lambda_max"]) - path_eigenvalue(24, 23)).abs() < TOL);
    // Slowest mode of P_N: cos(π(j+½)/N) (Brouwer & Haemers §1.4), scaled to peak 1.
    let mode: Vec<f64> = v["slow_mode"].as_array().unwrap().iter().map(f).collect();
    let peak = (PI * 0.5 / 24.0).cos();
    for (j, x) in mode.iter().enumerate() {
        let want = (PI * (j as f64 + 0.5) / 24.0).cos() / peak;
        assert!((x - want).abs() < 1e-12, "node {j}: {x} vs {want}");
    }
}

#[test]
fn spectrum_of_the_courtyard_ring_is_the_cycle_spectrum() {
    let (v, _) = json(&["spectrum", "examples/courtyard.toml"]);
    let ev: Vec<f64> = v["eigenvalues"].as_array().unwrap().iter().map(f).collect();
    // C_N: λ_k = 2 − 2cos(2πk/N) (Brouwer & Haemers 2012 §1.4); C12 sorted by hand.
    let mut want: Vec<f64> = (0..12)
        .map(|k| 2.0 - 2.0 * (2.0 * PI * k as f64 / 12.0).cos())
        .collect();
    want.sort_by(f64::total_cmp);
    for (a, b) in ev.iter().zip(&want) {
        assert!((a - b).abs() < 1e-12);
    }
    assert_eq!(v["spectrum"]["stable_twisted_states"], 4); // |q| < 12/4: q = ±1, ±2 (Wiley et al. 2006)
}

#[test]
fn spectrum_of_the_greenhouse_grid_and_the_text_report() {
    let (v, _) = json(&["spectrum", "examples/greenhouse.toml"]);
    // P10 □ P10: λ2 = λ2(P10), λmax = 2·λmax(P10) (Brouwer & Haemers §1.4).
    assert!((f(&v["spectrum"]["lambda_slow"]) - path_eigenvalue(10, 1)).abs() < TOL);
    assert!((f(&v["spectrum"]["lambda_max"]) - 2.0 * path_eigenvalue(10, 9)).abs() < TOL);
    let out = entrain()
        .args(["spectrum", "examples/greenhouse.toml"])
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("Slowest mode along the network"));
    assert!(text.contains("Caution:"));
}

/// The footbridge example as the planner sees it, mapped by hand from the file.
fn footbridge_model() -> Model {
    Model {
        law: plan::Shape::Sine,
        kp: 15_073.0 / 65_536.0, // 0.23 × 65536 = 15073.28 → 15073 in Q16.16
        ki: 754.0 / 65_536.0,    // 0.0115 × 65536 = 753.66 → 754
        update_period_s: 0.1,
        phase_period_s: 0.001,
        delay_updates: 0, // 0.4 ms latency at 10 Hz
        success_prob: 0.98,
        slew_limit_turns: 0.0625,
        trim_limit_ppm: 200.0,
    }
}

#[test]
fn check_footbridge_matches_the_planner_and_the_simulator() {
    let (v, status) = json(&["check", "examples/footbridge.toml"]);
    assert_eq!(status, 0, "{v}");
    assert_eq!(v["verdict"]["pass"], true);
    assert_eq!(v["gains_source"], "scenario");
    let p = &v["prediction"];
    assert_eq!(p["gains"]["kp_q16"], 15_073);
    assert_eq!(p["gains"]["ki_q16"], 754);

    let model = footbridge_model();
    let spectrum = Topology::Chain { nodes: 24 }.spectrum().unwrap();
    let st = plan::stability(&model, &spectrum).unwrap();
    assert!((f(&p["stability"]["radius"]) - st.radius).abs() < TOL);
    assert!((f(&p["stability"]["gain_margin"]) - st.gain_margin).abs() < 1e-9);
    let se = plan::settle(
        &model,
        &spectrum,
        &Spread {
            initial_spread_s: 0.0004,
            tolerance_s: 0.00004,
        },
    )
    .unwrap();
    assert!((f(&p["settling"]["asymptotic_s"]) - se.asymptotic_s).abs() < 1e-9);
    assert!((f(&p["settling"]["bound_s"]) - se.bound_s.unwrap()).abs() < 1e-9);

    // The same Monte Carlo, built by hand from the file's keys.
    let config = Config::builder(1_000, 100_000)
        .kp(Gain::from_q16(15_073))
        .ki(Gain::from_q16(754))
        // The scenario's default trim leak, ki/64: 754/64 = 11.8 → 12 in Q16.
        .leak(Gain::from_q16(12))
        .law(Law::Sine)
        .slew_limit(1 << 28)
        .trim_limit_ppb(200_000)
        .timeout_ticks(500_000)
        .build()
        .unwrap();
    let mut s = sim::Setup::new(sim::Links::chain(24).unwrap(), config, 1e6);
    s.crystals = sim::Crystals::Uniform {
        tolerance_ppm: 20.0,
    };
    s.schedule = sim::Schedule {
        random_start: true,
        jitter_ticks: 0,
    };
    s.beacons = sim::Beacons {
        latency_ticks: 400,
        timestamp_jitter_ticks: 1,
        success_prob: 0.98,
        // The scenario's defaults: version-2 beacons, latency told, completed-tick stamps.
        two_way: true,
        latency_known: true,
        stamping: sim::Stamping::CompletedTicks,
        ..sim::Beacons::IDEAL
    };
    s.start = sim::StartPhases::Uniform { spread_turns: 0.4 };
    s.settle = sim::SettleCriterion {
        tolerance_turns: 0.04,
    };
    s.horizon_updates = 4_800; // 2 × the 240 s budget at 10 Hz
    let summary = sim::monte_carlo(&s, 24, 2024, &|_| {}).unwrap();
    let m = &v["simulation"];
    assert_eq!(m["runs"], 24);
    assert_eq!(
        m["settled_runs"].as_u64().unwrap() as usize,
        summary.settled_runs
    );
    let lock = summary.settle_s.unwrap();
    assert!((f(&m["settle_s"]["p50"]) - lock.p50).abs() < 1e-9);
    assert!((f(&m["settle_s"]["max"]) - lock.max).abs() < 1e-9);
    assert!(lock.max <= 240.0);
}

#[test]
fn check_report_reads_verdict_first_and_ends_with_the_caution() {
    let out = entrain()
        .args(["check", "examples/courtyard.toml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8(out.stdout).unwrap();
    let at = |s: &str| {
        text.find(s)
            .unwrap_or_else(|| panic!("no `{s}` in:\n{text}"))
    };
    assert!(at("VERDICT: PASS") < at("Margins"));
    assert!(at("Margins") < at("Figures"));
    assert!(at("Figures") < at("Warnings"));
    assert!(at("Warnings") < at("Caution:"));
    assert!(text.contains("local codes and qualified review"));
    assert!(text.contains("largest pairwise wrapped phase difference"));
}

fn variant(name: &str, from: &str, edits: &[(&str, &str)]) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let mut text =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join(from)).unwrap();
    for (a, b) in edits {
        assert!(text.contains(a), "{a}");
        text = text.replace(a, b);
    }
    std::fs::write(dir.path().join(name), text).unwrap();
    dir
}

#[test]
fn check_fails_with_status_1_when_unstable() {
    // kp·λmax = 0.9 × 3.98 > 2: the fastest mode grows (Xiao & Boyd 2004).
    let dir = variant(
        "x.toml",
        "examples/footbridge.toml",
        &[("kp = 0.23", "kp = 0.9")],
    );
    let file = dir.path().join("x.toml");
    let (v, status) = json(&["check", file.to_str().unwrap(), "--no-simulate"]);
    assert_eq!(status, 1);
    assert_eq!(v["verdict"]["pass"], false);
    let codes: Vec<&str> = v["verdict"]["reasons"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["code"].as_str().unwrap())
        .collect();
    assert!(codes.contains(&"unstable"), "{codes:?}");
    assert_eq!(v["simulation"], Value::Null);
}

#[test]
fn check_fails_with_status_1_when_over_budget() {
    let dir = variant(
        "x.toml",
        "examples/footbridge.toml",
        &[("budget_s = 240", "budget_s = 5")],
    );
    let file = dir.path().join("x.toml");
    let out = entrain()
        .args(["check", file.to_str().unwrap(), "--runs", "4"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.starts_with("entrain check"));
    assert!(text.contains("VERDICT: FAIL"));
    assert!(text.contains("exceeds the budget"));
}

#[test]
fn tune_writes_constants_that_build_the_tuned_config() {
    let dir = tempfile::tempdir().unwrap();
    let out_file = dir.path().join("consts.rs");
    let (v, status) = json(&[
        "tune",
        "examples/courtyard.toml",
        "--out",
        out_file.to_str().unwrap(),
    ]);
    assert_eq!(status, 0, "{v}");
    assert_eq!(v["tuning"]["feasible"], true);

    // The tuner called directly on the same model (courtyard: ring of 12, 20 Hz, 20 ms
    // turn, 3 ms latency = 0 updates, 10 % loss, slew 1/8 turn, trim ±150 ppm).
    let template = Model {
        law: plan::Shape::Sine,
        kp: 1.0,
        ki: 0.1,
        update_period_s: 0.05,
        phase_period_s: 0.02,
        delay_updates: 0,
        success_prob: 0.9,
        slew_limit_turns: 0.125,
        trim_limit_ppm: 150.0,
    };
    let budget = plan::Budget {
        lock_time_budget_s: 20.0,
        spread: Spread {
            initial_spread_s: 0.006,
            tolerance_s: 0.0002,
        },
        crystal_tolerance_ppm: 30.0,
        margins: plan::Margins::default(),
    };
    let tuning = plan::tune_topology(
        &template,
        &Topology::Ring { nodes: 12 },
        &budget,
        plan::Search::Both,
        &mut |_, s| plan::predicted_lock_s(s),
    )
    .unwrap();
    let rec = tuning.recommended.unwrap();
    assert!((f(&v["tuning"]["recommended"]["kp"]) - rec.kp).abs() < TOL);
    assert!((f(&v["tuning"]["recommended"]["ki"]) - rec.ki).abs() < TOL);

    let text = std::fs::read_to_string(&out_file).unwrap();
    let read = |name: &str| -> u32 {
        let prefix = format!("pub const {name}: u32 = ");
        let line = text.lines().find(|l| l.starts_with(&prefix)).unwrap();
        line[prefix.len()..line.len() - 1].parse().unwrap()
    };
    assert_eq!(read("KP_Q16"), Gain::from_f32(rec.kp as f32).unwrap().q16());
    assert_eq!(read("KI_Q16"), Gain::from_f32(rec.ki as f32).unwrap().q16());
    // 32768 Hz × 20 ms = 655.36 → 655 ticks; 32768 / 20 Hz = 1638.4 → 1638 ticks.
    assert_eq!(read("TICKS_PER_PERIOD"), 655);
    assert_eq!(read("UPDATE_TICKS"), 1638);
    let config = Config::builder(read("TICKS_PER_PERIOD"), read("UPDATE_TICKS"))
        .kp(Gain::from_q16(read("KP_Q16")))
        .ki(Gain::from_q16(read("KI_Q16")))
        .law(Law::Sine)
        .slew_limit(read("SLEW_LIMIT_COUNTS"))
        .trim_limit_ppb(read("TRIM_LIMIT_PPB"))
        .timeout_ticks(read("TIMEOUT_TICKS"))
        .build();
    assert!(config.is_ok(), "{config:?}");
    assert_eq!(read("SLEW_LIMIT_COUNTS"), 1 << 29); // 1/8 turn of 2^32
    assert_eq!(read("TRIM_LIMIT_PPB"), 150_000);
    assert_eq!(v["firmware_constants_file"], out_file.to_str().unwrap());
}

#[test]
fn tune_without_feasible_gains_exits_1_and_writes_nothing() {
    let dir = variant(
        "x.toml",
        "examples/courtyard.toml",
        &[("budget_s = 20", "budget_s = 0.05")],
    );
    let file = dir.path().join("x.toml");
    let out_file = dir.path().join("consts.rs");
    let (v, status) = json(&[
        "tune",
        file.to_str().unwrap(),
        "--out",
        out_file.to_str().unwrap(),
    ]);
    assert_eq!(status, 1);
    assert_eq!(v["tuning"]["feasible"], false);
    assert!(v["tuning"]["infeasibility"].is_string());
    assert!(!out_file.exists());
}

#[test]
fn simulate_writes_three_svg_plots() {
    let dir = tempfile::tempdir().unwrap();
    let (v, status) = json(&[
        "simulate",
        "examples/courtyard.toml",
        "--plots",
        dir.path().to_str().unwrap(),
        "--runs",
        "8",
    ]);
    assert_eq!(status, 0, "{v}");
    assert_eq!(v["command"], "simulate");
    assert_eq!(v["simulation"]["runs"], 8);
    let plots = v["plots"].as_array().unwrap();
    assert_eq!(plots.len(), 3);
    for (name, must) in [
        ("phase_error.svg", "lock tolerance"),
        ("lock_times.svg", "lock-time budget"),
        ("slowest_mode.svg", "slowest mode"),
    ] {
        let text = std::fs::read_to_string(dir.path().join(name)).unwrap();
        let doc = roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(doc.root_element().tag_name().name(), "svg");
        let texts: String = doc
            .descendants()
            .filter(|n| n.tag_name().name() == "text")
            .filter_map(|n| n.text())
            .collect::<Vec<_>>()
            .join(" ");
        assert!(texts.contains(must), "{name}: no `{must}` in {texts}");
        let drawn = doc
            .descendants()
            .filter(|n| {
                matches!(
                    n.tag_name().name(),
                    "polyline" | "polygon" | "line" | "rect" | "circle"
                )
            })
            .count();
        assert!(drawn > 10, "{name}: only {drawn} shapes");
    }
}

#[test]
fn simulate_human_report_lists_the_plots() {
    let dir = tempfile::tempdir().unwrap();
    let out = entrain()
        .args([
            "simulate",
            "examples/greenhouse.toml",
            "--runs",
            "3",
            "--seed",
            "5",
            "--plots",
        ])
        .arg(dir.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.starts_with("entrain simulate"));
    assert!(text.contains("seed 5"));
    assert!(text.contains("slowest_mode.svg"));
}

#[test]
fn every_example_checks_and_passes() {
    for file in [
        "examples/footbridge.toml",
        "examples/courtyard.toml",
        "examples/greenhouse.toml",
        "examples/conveyor.toml",
    ] {
        let out = entrain().args(["check", file]).output().unwrap();
        assert_eq!(
            out.status.code(),
            Some(0),
            "{file}: {}",
            String::from_utf8_lossy(&out.stdout)
        );
    }
}

/// Grounded chain of N followers, reference at one end: λ_k = 4·sin²((2k − 1)π/(2(2N + 1))),
/// k = 1..N. Yueh (2005), "Eigenvalues of several tridiagonal matrices", Applied
/// Mathematics E-Notes 5, 66–74 (form quoted from memory; tests/graph_spectra.rs also
/// checks it against nalgebra).
fn pinned_chain_eigenvalue(n: usize, k: usize) -> f64 {
    let x = (2 * k - 1) as f64 * PI / (2 * (2 * n + 1)) as f64;
    4.0 * x.sin().powi(2)
}

/// The conveyor example rewritten as a 12-segment line fed by a disciplined clock at
/// node 0 (`reference_nodes`), next to the same line as a `pinned_chain`.
fn referenced_line(kp: &str, ki: &str) -> tempfile::TempDir {
    let edges: Vec<String> = (0..12).map(|i| format!("[{i}, {}]", i + 1)).collect();
    let network = format!("edges = [{}]\nreference_nodes = [0]", edges.join(", "));
    let dir = variant(
        "line.toml",
        "examples/conveyor.toml",
        &[
            ("edge_list_file = \"conveyor.edges\"", &network),
            ("kp = \"tune\"", kp),
            ("ki = \"tune\"", ki),
        ],
    );
    let pinned = std::fs::read_to_string(dir.path().join("line.toml"))
        .unwrap()
        .replace(
            "topology = \"edge_list\"",
            "topology = \"pinned_chain\"\nnodes = 12",
        )
        .replace(&network, "");
    std::fs::write(dir.path().join("pinned.toml"), pinned).unwrap();
    dir
}

#[test]
fn reference_nodes_plan_as_the_grounded_laplacian() {
    let dir = referenced_line("kp = 0.4", "ki = 0.02");
    let line = dir.path().join("line.toml");
    let (v, status) = json(&["spectrum", line.to_str().unwrap()]);
    assert_eq!(status, 0);
    assert_eq!(v["scenario"]["reference_nodes"], serde_json::json!([0]));
    assert_eq!(v["spectrum"]["pinned"], true);
    assert_eq!(v["spectrum"]["node_count"], 12);
    let ev = v["eigenvalues"].as_array().unwrap();
    assert_eq!(ev.len(), 12);
    for (k, x) in ev.iter().enumerate() {
        assert!(
            (f(x) - pinned_chain_eigenvalue(12, k + 1)).abs() < TOL,
            "k={k}"
        );
    }
    // λslow ≈ 0.01577, not the free 13-node chain's 0.0584.
    assert!((f(&v["spectrum"]["lambda_slow"]) - 0.01577).abs() < 5e-6);
    // The reference does not move in the slowest mode; the far end moves most.
    assert_eq!(f(&v["slow_mode"][0]), 0.0);
    assert_eq!(f(&v["slow_mode"][12]), 1.0);
    // The planner's verdict and stability figures equal the closed-form pinned chain's.
    let pinned = dir.path().join("pinned.toml");
    let (a, sa) = json(&["check", line.to_str().unwrap(), "--no-simulate"]);
    let (b, sb) = json(&["check", pinned.to_str().unwrap(), "--no-simulate"]);
    assert_eq!(sa, sb);
    assert_eq!(a["verdict"], b["verdict"]);
    for key in ["stability", "margins"] {
        assert_eq!(a["prediction"][key], b["prediction"][key], "{key}");
    }
    assert_eq!(b["spectrum"]["source"], "closed_form");
    for key in ["lambda_slow", "lambda_max", "max_degree", "flow_factor"] {
        assert!(
            (f(&a["spectrum"][key]) - f(&b["spectrum"][key])).abs() < 1e-9,
            "{key}"
        );
    }
}

#[test]
fn reference_nodes_tune_and_simulate() {
    // Undelayed P law: the fastest gain of a pinned network is near
    // 2/(λ1 + λmax) (Xiao & Boyd 2004, the optimal constant step for the grounded
    // Laplacian's spectrum); the tuner's scan is coarse, so within 5 %.
    let dir = referenced_line("kp = \"tune\"", "ki = 0");
    let line = dir.path().join("line.toml");
    let (v, _) = json(&["tune", line.to_str().unwrap()]);
    let best = 2.0 / (pinned_chain_eigenvalue(12, 1) + pinned_chain_eigenvalue(12, 12));
    let fastest = f(&v["tuning"]["fastest"]["kp"]);
    assert!((fastest / best - 1.0).abs() < 0.05, "{fastest} vs {best}");
    // The simulator runs the node code with node 0 held to the reference: every run
    // settles onto it.
    let dir = referenced_line("kp = 0.4", "ki = 0.02");
    let line = dir.path().join("line.toml");
    let (v, status) = json(&["simulate", line.to_str().unwrap(), "--runs", "2"]);
    assert!(status == 0 || status == 1, "{status}");
    assert_eq!(v["simulation"]["runs"], 2);
    assert_eq!(v["simulation"]["settled_runs"], 2);
}

#[test]
fn spectrum_prints_tiny_eigenvalues_in_scientific_notation() {
    // A 300-node chain: λ2 = 4·sin²(π/600) = 1.0966e-4 (path spectrum, Fiedler 1973).
    let dir = variant(
        "long.toml",
        "examples/footbridge.toml",
        &[("nodes = 24", "nodes = 300")],
    );
    let file = dir.path().join("long.toml");
    let out = entrain()
        .args(["spectrum", file.to_str().unwrap()])
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    let want = path_eigenvalue(300, 1);
    assert!(want < 1e-3);
    assert!(text.contains(&format!("{want:.5e}")), "{text}");
    assert!(!text.contains("  0.000110  "), "{text}");
}

/// The conveyor example with its edge list replaced by `edges` (the file's text), fixed
/// gains kp 0.2, ki 0.01.
fn conveyor_with_edges(edges: &str) -> tempfile::TempDir {
    let dir = variant(
        "c.toml",
        "examples/conveyor.toml",
        &[
            ("kp = \"tune\"", "kp = 0.2"),
            ("ki = \"tune\"", "ki = 0.01"),
        ],
    );
    std::fs::write(dir.path().join("conveyor.edges"), edges).unwrap();
    dir
}

#[test]
fn weighted_edge_lists_plan_and_simulate_with_their_weights() {
    // A 12-node chain whose links all weigh 2: L = 2·L(P_12), so λ_k = 2·(2 − 2cos(kπ/12))
    // (path spectrum, Fiedler 1973, scaled by the weight).
    let text: String = (1..12).map(|k| format!("{} {k} 2\n", k - 1)).collect();
    let dir = conveyor_with_edges(&text);
    let file = dir.path().join("c.toml");
    let (v, status) = json(&["spectrum", file.to_str().unwrap()]);
    assert_eq!(status, 0);
    let ev = v["eigenvalues"].as_array().unwrap();
    assert_eq!(ev.len(), 12);
    for (k, x) in ev.iter().enumerate().skip(1) {
        assert!((f(x) - 2.0 * path_eigenvalue(12, k)).abs() < TOL, "k={k}");
    }
    assert_eq!(f(&v["spectrum"]["max_degree"]), 4.0);
    // The planner's stability follows the weighted λmax: kp·λmax against 2 (Xiao & Boyd
    // 2004), so the gain margin halves against the unweighted chain's.
    let plain: String = (1..12).map(|k| format!("{} {k}\n", k - 1)).collect();
    let plain_dir = conveyor_with_edges(&plain);
    let plain_file = plain_dir.path().join("c.toml");
    let (a, _) = json(&["check", file.to_str().unwrap(), "--no-simulate"]);
    let (b, _) = json(&["check", plain_file.to_str().unwrap(), "--no-simulate"]);
    let margin = |v: &Value| f(&v["prediction"]["margins"]["gain"]);
    assert!(
        (margin(&a) / margin(&b) - 0.5).abs() < 0.02,
        "{} vs {}",
        margin(&a),
        margin(&b)
    );
    assert!(
        (f(&a["prediction"]["stability"]["kp_limit"])
            / f(&b["prediction"]["stability"]["kp_limit"])
            - 0.5)
            .abs()
            < 0.02
    );
    // Tune runs end to end: its fastest P gain sits near 2/(λ2 + λmax) of the weighted
    // spectrum (Xiao & Boyd 2004; the tuner's scan is coarse, so within 5 %), half the
    // unweighted chain's.
    let tune_dir = variant(
        "t.toml",
        "examples/conveyor.toml",
        &[("ki = \"tune\"", "ki = 0")],
    );
    std::fs::write(tune_dir.path().join("conveyor.edges"), &text).unwrap();
    let tune_file = tune_dir.path().join("t.toml");
    let (t, status) = json(&["tune", tune_file.to_str().unwrap()]);
    assert!(status == 0 || status == 1, "{status}");
    let best = 2.0 / (2.0 * path_eigenvalue(12, 1) + 2.0 * path_eigenvalue(12, 11));
    let fastest = f(&t["tuning"]["fastest"]["kp"]);
    assert!((fastest / best - 1.0).abs() < 0.05, "{fastest} vs {best}");
    // The simulator runs the node code with the weights.
    let (s, status) = json(&["simulate", file.to_str().unwrap(), "--runs", "2"]);
    assert!(status == 0 || status == 1, "{status}");
    assert_eq!(s["simulation"]["settled_runs"], 2);
}

#[test]
fn weight_one_is_the_unweighted_edge_list() {
    // The conveyor's own edges, once as given and once with an explicit weight 1 on
    // every line: every command's answer is the same, simulation included (the node law
    // takes weight one as the unweighted law, bit for bit).
    let plain = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/conveyor.edges"),
    )
    .unwrap();
    let ones: String = plain
        .lines()
        .map(|l| {
            if l.trim().is_empty() || l.starts_with('#') {
                format!("{l}\n")
            } else {
                format!("{l} 1\n")
            }
        })
        .collect();
    assert_ne!(plain, ones);
    let (da, db) = (conveyor_with_edges(&plain), conveyor_with_edges(&ones));
    for args in [vec!["spectrum"], vec!["simulate", "--runs", "2"]] {
        let run = |dir: &tempfile::TempDir| {
            let file = dir.path().join("c.toml");
            let mut full = args.clone();
            full.insert(1, file.to_str().unwrap());
            let (mut v, _) = json(&full);
            v["scenario"]["file"] = Value::Null;
            v
        };
        let (va, vb) = (run(&da), run(&db));
        assert_eq!(va, vb, "{args:?}");
    }
}

#[test]
fn simulation_reports_the_neighbour_updates_it_made() {
    // Without beacon loss every node hears each neighbour once per update interval and
    // keeps the entry until the timeout (5 intervals), so from its third update on each
    // update uses every neighbour: per run the work lies between (H − 2)·Σdegree and
    // (H + 1)·Σdegree for H update intervals (a fast crystal fits one more update in);
    // Σdegree = 2·23 on the 24-node chain. Counted by hand, not by the simulator.
    let dir = variant(
        "x.toml",
        "examples/footbridge.toml",
        &[
            ("loss_fraction = 0.02", "loss_fraction = 0.0"),
            ("runs = 24", "runs = 3"),
        ],
    );
    let file = dir.path().join("x.toml");
    let (v, _) = json(&["check", file.to_str().unwrap()]);
    let h = f(&v["prediction"]["horizon_updates"]);
    let runs = f(&v["simulation"]["runs"]);
    let work = f(&v["simulation"]["neighbour_updates"]);
    assert_eq!(runs, 3.0);
    let degrees = 46.0;
    assert!(work >= runs * (h - 2.0) * degrees, "{work} for horizon {h}");
    assert!(work <= runs * (h + 1.0) * degrees, "{work} for horizon {h}");
}
