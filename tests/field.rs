//! The field check on simulated logs: a healthy network passes; a network with a link
//! taken out, a node on a 200 ppm crystal and one link losing 30 % of its beacons is
//! diagnosed from its logs, each fault named and nothing else blamed; the log reader
//! survives what real logs do (damage, repeats, gaps, reboots, counter wrap).
#![cfg(feature = "field")]

use entrain::assess::{self, Assessment, Options};
use entrain::field::{FieldReason, LogSet, field_check, fit_line, simulate_logs};
use entrain::scenario::Scenario;
use entrain::telemetry::{Head, Neighbour, write_line_parts};
use std::path::Path;

/// The deployment as planned: a ring of 8 greenhouse sensor nodes.
const PLANNED: &str = r#"
version = 1
name = "Greenhouse ring"
[network]
topology = "ring"
nodes = 8
[timing]
update_rate_hz = 10
phase_period_s = 0.01
[law]
coupling = "sine"
kp = 0.3
ki = 0.02
[clock]
crystal_tolerance_ppm = 20
timestamp_jitter_s = 0.000002
[link]
loss_fraction = 0.02
[lock]
initial_spread_s = 0.003
tolerance_s = 0.0001
budget_s = 120
[monte_carlo]
runs = 4
seed = 11
"#;

fn planned() -> Scenario {
    Scenario::from_toml(Path::new("greenhouse.toml"), PLANNED).unwrap()
}

fn assessed(s: Scenario) -> Assessment {
    assess::assess(s.clone(), &Options::predict_only(&s), &|_| {}).unwrap()
}

/// Logs of run 0 of `truth` (with extra per-link losses), as a log set, plus the
/// crystals the run drew.
fn logs_of(truth: &Scenario, link_loss: &[(usize, usize, f64)]) -> LogSet {
    let a = assessed(truth.clone());
    let setup = assess::setup(
        &a.scenario,
        &a.network,
        &a.prediction.constants,
        a.prediction.horizon_updates,
    )
    .unwrap();
    let logs = simulate_logs(truth, &setup, truth.seed, 0, link_loss).unwrap();
    let mut set = LogSet::new();
    for (id, text) in logs.iter().enumerate() {
        set.add_text(Path::new(&format!("node-{id}.log")), text);
    }
    set
}

#[test]
fn a_healthy_network_passes_and_its_loss_and_crystals_read_back() {
    // The real crystals fixed, so the estimate can be held against them.
    let crystals = [12.0, -7.5, 3.0, 18.0, -15.0, 0.5, -2.0, 9.0];
    let truth_text = PLANNED.replace(
        "timestamp_jitter_s",
        &format!("crystal_ppm = {crystals:?}\ntimestamp_jitter_s"),
    );
    let truth = Scenario::from_toml(Path::new("truth.toml"), &truth_text).unwrap();
    let logs = logs_of(&truth, &[]);
    let check = field_check(planned(), &logs).unwrap();
    let r = &check.report;
    assert!(r.pass(), "{:?}", r.reasons);
    assert!(r.missing.is_empty() && r.unexpected.is_empty());
    // Loss: 2 % per beacon in the simulation; over ~4,800 intervals per link the
    // binomial standard deviation is 0.2 %, so every link reads 2 % ± 1 %.
    for l in &r.links {
        let loss = l.loss.unwrap();
        assert!((loss - 0.02).abs() < 0.01, "link {}–{}: {loss}", l.a, l.b);
    }
    // Crystals: the estimate is relative to the median crystal (the median of the
    // eight, the mean of the middle two: 1.75 ppm).
    let mut sorted = crystals;
    sorted.sort_by(f64::total_cmp);
    let med = 0.5 * (sorted[3] + sorted[4]);
    for n in &r.nodes {
        let est = n.crystal_ppm.unwrap();
        let want = crystals[n.id] - med;
        assert!(
            (est - want).abs() < 1.0,
            "node {}: {est} against {want}",
            n.id
        );
    }
    // Settling within the forecast's spread, and a decay near the prediction.
    let settle = r.settle_s.unwrap();
    let p = check.assessment.prediction.settle.unwrap();
    assert!(settle < 3.0 * p.p90_s.unwrap(), "{settle} vs {p:?}");
    let d = r.decay.unwrap();
    let ratio = d.fitted_time_constant_s / d.predicted_time_constant_s;
    assert!((0.5..1.5).contains(&ratio), "{d:?}");
}

#[test]
fn under_the_p_law_crystals_are_not_estimated() {
    // No integral path: every node's trim stays 0 whatever its crystal, so reading the
    // crystals from the trims would report every one as 0 ppm (here they are up to
    // 18 ppm off). The check must say it cannot tell, not 0.
    let crystals = [12.0, -7.5, 3.0, 18.0, -15.0, 0.5, -2.0, 9.0];
    let p_law = |text: &str| {
        text.replace("ki = 0.02\n", "").replace(
            "timestamp_jitter_s",
            &format!("crystal_ppm = {crystals:?}\ntimestamp_jitter_s"),
        )
    };
    let truth = Scenario::from_toml(Path::new("p-law.toml"), &p_law(PLANNED)).unwrap();
    assert!(!truth.gains.is_pi());
    let logs = logs_of(&truth, &[]);
    assert!(logs.records.iter().all(|r| r.head.trim_ppb == 0));
    let check = field_check(truth, &logs).unwrap();
    let r = &check.report;
    assert!(!r.crystals_estimated);
    assert_eq!(r.nodes.len(), crystals.len());
    for n in &r.nodes {
        assert_eq!(n.trim_ppm, Some(0.0), "node {}", n.id);
        assert_eq!(n.crystal_ppm, None, "node {}", n.id);
    }
    // The PI scenario of the same network does estimate them (see the healthy test).
    assert!(planned().gains.is_pi());
}

#[test]
fn each_fault_is_named_and_nothing_else_is_blamed() {
    // As built: link 3–4 never installed, node 5 on a 200 ppm crystal, and link 0–1
    // losing 30 % of its beacons.
    let mut edges: Vec<[usize; 2]> = (0..8).map(|i| [i, (i + 1) % 8]).collect();
    edges.retain(|e| *e != [3, 4]);
    let crystals = [5.0, -3.0, 8.0, -10.0, 2.0, 200.0, -6.0, 1.0];
    let truth_text = PLANNED
        .replace(
            "topology = \"ring\"\nnodes = 8",
            &format!("topology = \"edge_list\"\nnodes = 8\nedges = {edges:?}"),
        )
        .replace(
            "crystal_tolerance_ppm = 20",
            &format!("crystal_tolerance_ppm = 200\ncrystal_ppm = {crystals:?}"),
        );
    let truth = Scenario::from_toml(Path::new("as-built.toml"), &truth_text).unwrap();
    let logs = logs_of(&truth, &[(0, 1, 0.3)]);
    let check = field_check(planned(), &logs).unwrap();
    let r = &check.report;
    let codes: Vec<&str> = r.reasons.iter().map(FieldReason::code).collect();
    assert!(!r.pass());
    let mut named = 0;
    for reason in &r.reasons {
        eprintln!("{}: {reason}", reason.code());
        match reason {
            FieldReason::LinkMissing(v) => {
                assert_eq!(v, &[(3, 4)]);
                named += 1;
            }
            FieldReason::LinkLossy(v, _) => {
                assert_eq!(v.len(), 1, "{v:?}");
                let (a, b, loss) = v[0];
                assert_eq!((a, b), (0, 1));
                assert!((loss - 0.3).abs() < 0.03, "{loss}");
                named += 1;
            }
            FieldReason::CrystalOutOfTolerance(v, _) => {
                assert_eq!(v.len(), 1, "{v:?}");
                assert_eq!(v[0].0, 5);
                // 200 ppm against a median of 1.5 ppm.
                assert!((v[0].1 - 198.5).abs() < 3.0, "{v:?}");
                named += 1;
            }
            FieldReason::TrimAtLimit(v, _) => assert!(v.iter().all(|&i| i == 5), "{v:?}"),
            // Consequences of the faults, allowed but not required: a ring opened into a
            // chain is slower (λslow of a chain of 8 is a quarter of a ring's) and
            // noisier (its noise sum Σ 1/λ_k is larger), and so is a lossy link.
            FieldReason::SlowerThanPredicted(_)
            | FieldReason::SettledOverBudget(..)
            | FieldReason::NoiseFloorAbovePrediction(..) => {}
            other => panic!("blamed wrongly: {other}"),
        }
    }
    assert_eq!(named, 3, "{codes:?}");
    assert!(r.unexpected.is_empty());
}

#[test]
fn a_link_that_is_not_planned_is_unexpected() {
    // As built: a chord 0–4 across the ring that the plan does not have.
    let mut edges: Vec<[usize; 2]> = (0..8).map(|i| [i, (i + 1) % 8]).collect();
    edges.push([0, 4]);
    let truth_text = PLANNED.replace(
        "topology = \"ring\"\nnodes = 8",
        &format!("topology = \"edge_list\"\nnodes = 8\nedges = {edges:?}"),
    );
    let truth = Scenario::from_toml(Path::new("chord.toml"), &truth_text).unwrap();
    let check = field_check(planned(), &logs_of(&truth, &[])).unwrap();
    assert_eq!(check.report.unexpected, vec![(0, 4)]);
    assert!(
        check
            .report
            .reasons
            .iter()
            .any(|r| r == &FieldReason::LinkUnexpected(vec![(0, 4)]))
    );
}

fn line(node: u16, update: u32, trim: i32, nbs: &[(u16, i32, i32)]) -> String {
    let mut s = String::new();
    write_line_parts(
        &mut s,
        &Head {
            node,
            update,
            correction: 0,
            trim_ppb: trim,
            slew_limited: false,
        },
        nbs.iter().map(|&(id, diff, age_ticks)| Neighbour {
            id,
            diff,
            age_ticks,
        }),
    )
    .unwrap();
    s
}

#[test]
fn damaged_repeated_gapped_rebooted_and_wrapped_logs_are_counted_not_believed() {
    let mut text = String::new();
    text.push_str("boot banner: firmware 1.2\n");
    for k in 0..10u32 {
        text.push_str(&line(1, k, 5, &[(0, 10, 100_000)]));
        text.push('\n');
        if k == 3 {
            // The same line twice (a logger repeating itself).
            text.push_str(&line(1, k, 5, &[(0, 10, 100_000)]));
            text.push('\n');
        }
    }
    // A gap of 5 updates, then a damaged line and a defmt-style prefix.
    text.push_str(&line(1, 15, 5, &[]));
    text.push('\n');
    let mut bad = line(1, 16, 5, &[]);
    bad.replace_range(6..7, "9");
    text.push_str(&bad);
    text.push('\n');
    text.push_str(&format!("0.000123 INFO  {}\n", line(1, 17, 5, &[])));
    text.push_str("ET1 this is not a record\n");
    // A reboot: the count starts again.
    for k in 0..3u32 {
        text.push_str(&line(1, k, 0, &[]));
        text.push('\n');
    }
    let mut set = LogSet::new();
    set.add_text(Path::new("n1.log"), &text);
    assert_eq!(set.lines, 19);
    assert_eq!(set.other_lines, 1);
    assert_eq!(set.malformed_count, 2);
    assert_eq!(
        set.malformed.iter().map(|m| m.line).collect::<Vec<_>>(),
        vec![14, 16]
    );
    let merged = entrain::field::merge(&set, 150_000);
    let m = &merged[&1].counts;
    assert_eq!(m.duplicates, 1);
    assert_eq!(m.missing, 5 + 1); // 10..=14 and 16 (the damaged line)
    assert_eq!(m.reboots, 1);
    assert_eq!(merged[&1].at.len(), 10 + 2 + 3);

    // Counter wrap: 2^32 − 2 … 1 is progress, not a reboot.
    let mut set = LogSet::new();
    let wrap: String = [u32::MAX - 1, u32::MAX, 0, 1]
        .iter()
        .map(|&k| line(2, k, 0, &[]) + "\n")
        .collect();
    set.add_text(Path::new("n2.log"), &wrap);
    let merged = entrain::field::merge(&set, 150_000);
    assert_eq!(merged[&2].counts.reboots, 0);
    assert_eq!(merged[&2].counts.wraps, 1);
    let times: Vec<i64> = merged[&2].at.keys().copied().collect();
    let base = i64::from(u32::MAX - 1);
    assert_eq!(times, vec![base, base + 1, base + 2, base + 3]);
}

#[test]
fn unreadable_and_special_files_are_clear_errors() {
    let dir = tempfile::tempdir().unwrap();
    let mut set = LogSet::new();
    let e = set.load(&dir.path().join("absent.log")).unwrap_err();
    assert!(e.to_string().contains("absent.log"), "{e}");
    let e = set.load(dir.path()).unwrap_err();
    assert!(e.to_string().contains("directory"), "{e}");
    // Not UTF-8: counted as a malformed line, with its line number.
    let f = dir.path().join("binary.log");
    std::fs::write(&f, b"ET1 \xff\xfe\n").unwrap();
    set.load(&f).unwrap();
    assert_eq!(set.malformed_count, 1);
    assert_eq!(set.malformed[0].line, 1);
}

#[test]
fn least_squares_recovers_a_known_line() {
    // y = 2 − 0.05 x exactly, and the same with symmetric ±0.1 noise that cancels in
    // pairs (closed form of ordinary least squares: slope = Sxy / Sxx).
    let exact: Vec<(f64, f64)> = (0..20)
        .map(|k| (f64::from(k), 2.0 - 0.05 * f64::from(k)))
        .collect();
    let (a, b) = fit_line(&exact).unwrap();
    assert!((a - 2.0).abs() < 1e-12 && (b + 0.05).abs() < 1e-12);
    let points = [(0.0, 1.1), (0.0, 0.9), (2.0, 1.1), (2.0, 0.9)];
    assert_eq!(fit_line(&points), Some((1.0, 0.0)));
    assert_eq!(fit_line(&[(1.0, 1.0), (1.0, 2.0)]), None);
}
