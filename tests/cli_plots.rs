//! The SVG plots read back: every element that carries meaning is found and checked
//! against the command's own JSON answer, the example files and published facts (the
//! plots mark their elements with `class`, `data-key` and `data-value`).
#![cfg(feature = "cli")]

use assert_cmd::Command;
use roxmltree::{Document, Node};
use serde_json::Value;
use std::collections::BTreeSet;
use std::path::Path;

/// Most sample runs the phase-error plot draws (as the command documents).
const DRAWN_RUNS: usize = 6;

fn simulate(file: &Path, runs: u32, dir: &Path) -> Value {
    let out = Command::cargo_bin("entrain")
        .unwrap()
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["simulate", "--json", "--runs", &runs.to_string(), "--plots"])
        .arg(dir)
        .arg(file)
        .output()
        .unwrap();
    assert!(
        matches!(out.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn has_class(n: &Node, class: &str) -> bool {
    n.attribute("class")
        .is_some_and(|c| c.split(' ').any(|w| w == class))
}

fn with_class<'a>(doc: &'a Document, class: &str) -> Vec<Node<'a, 'a>> {
    doc.descendants().filter(|n| has_class(n, class)).collect()
}

fn attr(n: &Node, name: &str) -> String {
    n.attribute(name)
        .unwrap_or_else(|| panic!("no {name} on {:?}", n.attribute("class")))
        .to_owned()
}

fn num(n: &Node, name: &str) -> f64 {
    attr(n, name)
        .parse()
        .unwrap_or_else(|e| panic!("{name}: {e}"))
}

/// Keys of the legend's entries and of the drawn series.
fn legend_and_series(doc: &Document) -> (BTreeSet<String>, BTreeSet<String>) {
    let legend = with_class(doc, "legend-entry")
        .iter()
        .map(|n| attr(n, "data-key"))
        .collect();
    let series = with_class(doc, "series")
        .iter()
        .map(|n| attr(n, "data-key"))
        .collect();
    (legend, series)
}

/// The one marked line or band with `key`.
fn mark<'a>(doc: &'a Document, key: &str) -> Node<'a, 'a> {
    let found: Vec<_> = with_class(doc, "series")
        .into_iter()
        .filter(|n| n.attribute("data-key") == Some(key))
        .collect();
    assert_eq!(found.len(), 1, "series {key}: {} found", found.len());
    found[0]
}

fn close(a: f64, b: f64, what: &str) {
    assert!(
        (a - b).abs() <= 1e-9 * b.abs().max(1e-12),
        "{what}: {a} against {b}"
    );
}

/// The x axis's value-to-pixel map from its first and last tick (each tick is a group
/// with a `data-value` and a line at its pixel).
fn x_axis(doc: &Document) -> impl Fn(f64) -> f64 {
    let ticks: Vec<(f64, f64)> = with_class(doc, "tick")
        .iter()
        .filter(|n| n.attribute("data-axis") == Some("x"))
        .map(|n| {
            let line = n.children().find(|c| c.has_tag_name("line")).unwrap();
            (num(n, "data-value"), num(&line, "x1"))
        })
        .collect();
    assert!(ticks.len() >= 2, "x axis has {} ticks", ticks.len());
    let ((v0, p0), (v1, p1)) = (ticks[0], ticks[ticks.len() - 1]);
    move |v| p0 + (v - v0) * (p1 - p0) / (v1 - v0)
}

fn points(n: &Node) -> Vec<(f64, f64)> {
    attr(n, "points")
        .split(' ')
        .map(|p| {
            let (x, y) = p.split_once(',').unwrap();
            (x.parse().unwrap(), y.parse().unwrap())
        })
        .collect()
}

fn texts(doc: &Document) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(str::to_owned))
        .collect()
}

fn parse(dir: &Path, name: &str) -> String {
    std::fs::read_to_string(dir.join(name)).unwrap()
}

#[test]
fn phase_error_draws_whole_runs_and_marks_every_line() {
    let dir = tempfile::tempdir().unwrap();
    let v = simulate(Path::new("examples/footbridge.toml"), 10, dir.path());
    let text = parse(dir.path(), "phase_error.svg");
    let doc = Document::parse(&text).unwrap();

    let (legend, series) = legend_and_series(&doc);
    assert_eq!(legend, series, "legend entries against drawn series");
    for key in [
        "runs",
        "first-entry",
        "settled",
        "prediction-p50",
        "prediction-p90",
        "bound",
        "noise-floor",
        "tolerance",
        "budget",
    ] {
        assert!(series.contains(key), "no {key} series");
    }

    // The marked lines sit at the scenario's and the prediction's figures.
    let sc = &v["scenario"];
    let pr = &v["prediction"];
    close(
        num(&mark(&doc, "tolerance"), "data-value"),
        f(&sc["lock_tolerance_s"]),
        "tolerance",
    );
    close(
        num(&mark(&doc, "budget"), "data-value"),
        f(&sc["lock_budget_s"]),
        "budget",
    );
    close(
        num(&mark(&doc, "bound"), "data-value"),
        f(&pr["settle_s"]["bound"]),
        "bound",
    );
    let band = mark(&doc, "noise-floor");
    close(
        num(&band, "data-lo"),
        f(&pr["noise_floor_s"]["p50"]),
        "noise floor p50",
    );
    close(
        num(&band, "data-hi"),
        f(&pr["noise_floor_s"]["p99"]),
        "noise floor p99",
    );
    for key in ["prediction-p50", "prediction-p90"] {
        let line = mark(&doc, key);
        let drawn = line
            .descendants()
            .filter(|n| n.has_tag_name("polyline"))
            .count();
        assert_eq!(drawn, 1, "{key}");
    }

    // One group per drawn run, each reaching the end of the horizon (not stopping at lock).
    let runs = mark(&doc, "runs");
    let drawn: Vec<Node> = runs.children().filter(|n| has_class(n, "run")).collect();
    let expected = DRAWN_RUNS.min(v["simulation"]["runs"].as_u64().unwrap() as usize);
    assert_eq!(drawn.len(), expected);
    assert_eq!(attr(&runs, "data-count"), expected.to_string());
    let legend_runs = with_class(&doc, "legend-entry")
        .into_iter()
        .find(|n| n.attribute("data-key") == Some("runs"))
        .unwrap();
    let legend_text: String = legend_runs.descendants().filter_map(|n| n.text()).collect();
    assert!(
        legend_text.contains(&format!("{expected} drawn")),
        "{legend_text}"
    );
    let horizon_s = f(&pr["horizon_updates"]) / f(&sc["update_rate_hz"]);
    let at = x_axis(&doc);
    for run in &drawn {
        let line = run.children().find(|n| n.has_tag_name("polyline")).unwrap();
        let last_x = points(&line).iter().map(|p| p.0).fold(f64::MIN, f64::max);
        assert!(
            last_x >= at(0.99 * horizon_s),
            "run {} ends at pixel {last_x}, before {}",
            attr(run, "data-run"),
            at(0.99 * horizon_s)
        );
    }

    // Every drawn run settled here, so run k's settling marker is the Monte Carlo's k-th
    // settling time, and its first entry comes no later.
    assert_eq!(v["simulation"]["settled_runs"], v["simulation"]["runs"]);
    let settle_times: Vec<f64> = v["simulation"]["settle_times_s"]
        .as_array()
        .unwrap()
        .iter()
        .map(f)
        .collect();
    let markers = |key: &str| -> Vec<(usize, f64)> {
        mark(&doc, key)
            .children()
            .filter(|n| has_class(n, "marker"))
            .map(|n| (attr(&n, "data-run").parse().unwrap(), num(&n, "data-value")))
            .collect()
    };
    let settled = markers("settled");
    let entries = markers("first-entry");
    assert_eq!(settled.len(), expected);
    assert_eq!(entries.len(), expected);
    for ((run, s), (run_e, e)) in settled.iter().zip(&entries) {
        assert_eq!(run, run_e);
        close(*s, settle_times[*run], "settling marker");
        assert!(
            *e <= *s + 1e-12,
            "run {run}: first entry {e} after settling {s}"
        );
    }
}

/// Quantile by linear interpolation between order statistics (Hyndman & Fan 1996,
/// definition 7), written out again here.
fn quantile7(sorted: &[f64], q: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * q;
    let lo = h.floor() as usize;
    let hi = h.ceil() as usize;
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

#[test]
fn lock_histogram_bins_by_freedman_diaconis_and_counts_every_run() {
    let dir = tempfile::tempdir().unwrap();
    let v = simulate(Path::new("examples/greenhouse.toml"), 16, dir.path());
    let text = parse(dir.path(), "lock_times.svg");
    let doc = Document::parse(&text).unwrap();
    let (legend, series) = legend_and_series(&doc);
    assert_eq!(legend, series, "legend entries against drawn series");

    // Bin width 2·IQR·n^(−1/3) (Freedman & Diaconis, Z. Wahrscheinlichkeitstheorie verw.
    // Gebiete 57, 1981) from the settling times the JSON reports.
    let mut times: Vec<f64> = v["simulation"]["settle_times_s"]
        .as_array()
        .unwrap()
        .iter()
        .map(f)
        .collect();
    times.sort_by(f64::total_cmp);
    let iqr = quantile7(&times, 0.75) - quantile7(&times, 0.25);
    assert!(iqr > 0.0, "this example's settling times spread");
    let width = 2.0 * iqr * (times.len() as f64).powf(-1.0 / 3.0);
    let bars = mark(&doc, "settled-runs");
    assert_eq!(attr(&bars, "data-rule"), "FreedmanDiaconis");
    close(num(&bars, "data-width"), width, "bin width");
    let bins: Vec<(f64, f64, usize)> = bars
        .children()
        .filter(|n| has_class(n, "bin"))
        .map(|n| {
            (
                num(&n, "data-lo"),
                num(&n, "data-hi"),
                attr(&n, "data-count").parse().unwrap(),
            )
        })
        .collect();
    assert!(bins.len() >= 2, "{} bins", bins.len());
    for pair in bins.windows(2) {
        close(pair[1].0, pair[0].1, "bins are contiguous");
    }
    assert!(bins[0].0 <= times[0] && bins[bins.len() - 1].1 >= times[times.len() - 1]);
    for (lo, hi, count) in &bins {
        let inside = times
            .iter()
            .filter(|t| **t >= *lo && (**t < *hi || (*hi - bins[bins.len() - 1].1).abs() < 1e-9))
            .count();
        assert_eq!(*count, inside, "bin {lo}..{hi}");
    }
    let runs = v["simulation"]["runs"].as_u64().unwrap() as usize;
    let settled = v["simulation"]["settled_runs"].as_u64().unwrap() as usize;
    assert_eq!(bins.iter().map(|b| b.2).sum::<usize>(), settled);
    let never = mark(&doc, "never-settled");
    assert_eq!(attr(&never, "data-count"), (runs - settled).to_string());

    // Predicted p50, p90, bound and the budget are all marked at their figures.
    let pr = &v["prediction"]["settle_s"];
    close(
        num(&mark(&doc, "prediction-p50"), "data-value"),
        f(&pr["p50"]),
        "p50",
    );
    close(
        num(&mark(&doc, "prediction-p90"), "data-value"),
        f(&pr["p90"]),
        "p90",
    );
    close(
        num(&mark(&doc, "bound"), "data-value"),
        f(&pr["bound"]),
        "bound",
    );
    close(
        num(&mark(&doc, "budget"), "data-value"),
        f(&v["scenario"]["lock_budget_s"]),
        "budget",
    );
}

#[test]
fn runs_that_never_settle_are_counted_in_their_own_bar() {
    // The courtyard ring with a tolerance far below its timestamp noise: no run settles.
    let dir = tempfile::tempdir().unwrap();
    let base = std::fs::read_to_string("examples/courtyard.toml").unwrap();
    let tight = base.replace("tolerance_s = 0.0002", "tolerance_s = 0.000002");
    assert_ne!(base, tight, "the example's tolerance line moved");
    let file = dir.path().join("tight.toml");
    std::fs::write(&file, tight).unwrap();
    let v = simulate(&file, 8, dir.path());
    assert_eq!(v["simulation"]["settled_runs"], 0);
    let doc_text = parse(dir.path(), "lock_times.svg");
    let doc = Document::parse(&doc_text).unwrap();
    let (legend, series) = legend_and_series(&doc);
    assert_eq!(legend, series);
    let never = mark(&doc, "never-settled");
    assert_eq!(attr(&never, "data-count"), "8");
    let shown: Vec<String> = never
        .descendants()
        .filter_map(|n| n.text().map(str::to_owned))
        .collect();
    assert!(shown.contains(&"8".to_owned()), "{shown:?}");
    let rect = never.children().find(|n| n.has_tag_name("rect")).unwrap();
    assert!(num(&rect, "height") > 100.0, "the bar is drawn tall");
}

/// Edges of an edge-list file (`a b` per line, `#` comments).
fn edge_file(path: &str) -> BTreeSet<(usize, usize)> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| l.split('#').next().unwrap().trim())
        .filter(|l| !l.is_empty())
        .map(|l| {
            let mut it = l.split_whitespace().map(|x| x.parse::<usize>().unwrap());
            let (a, b) = (it.next().unwrap(), it.next().unwrap());
            (a.min(b), a.max(b))
        })
        .collect()
}

fn multiplicity(doc: &Document) -> String {
    let notes = with_class(doc, "note");
    assert_eq!(notes.len(), 1);
    attr(&notes[0], "data-multiplicity")
}

#[test]
fn slowest_mode_follows_each_layout() {
    let dir = tempfile::tempdir().unwrap();
    let read = |example: &str| {
        let out = dir.path().join(example);
        simulate(Path::new(&format!("examples/{example}.toml")), 2, &out);
        parse(&out, "slowest_mode.svg")
    };

    // 10 × 10 grid: a heat map of 100 cells, node r·10 + c at row r, column c. λ_slow of
    // P10 □ P10 is 2 − 2cos(π/10), once from the rows and once from the columns
    // (Brouwer & Haemers, Spectra of Graphs, 2012, §1.4): repeated, and said so.
    let text = read("greenhouse");
    let doc = Document::parse(&text).unwrap();
    let map = with_class(&doc, "heatmap");
    assert_eq!(map.len(), 1);
    assert_eq!(
        (attr(&map[0], "data-rows"), attr(&map[0], "data-cols")),
        ("10".into(), "10".into())
    );
    let cells = with_class(&doc, "cell");
    assert_eq!(cells.len(), 100);
    for c in &cells {
        let (r, col, node): (usize, usize, usize) = (
            attr(c, "data-row").parse().unwrap(),
            attr(c, "data-col").parse().unwrap(),
            attr(c, "data-node").parse().unwrap(),
        );
        assert_eq!(node, r * 10 + col);
    }
    assert_eq!(multiplicity(&doc), "2");
    assert!(texts(&doc).iter().any(|t| t.contains("one of several")));

    // Ring of 12: λ_k = λ_(12−k) for the cycle (ibid.): repeated.
    let doc_text = read("courtyard");
    let doc = Document::parse(&doc_text).unwrap();
    assert_eq!(multiplicity(&doc), "2");
    assert_eq!(with_class(&doc, "edge").len(), 12);

    // Chain of 24: simple λ_slow; node ticks are whole numbers.
    let doc_text = read("footbridge");
    let doc = Document::parse(&doc_text).unwrap();
    assert_eq!(multiplicity(&doc), "1");
    let ticks: Vec<String> = with_class(&doc, "tick")
        .iter()
        .filter(|n| n.attribute("data-axis") == Some("x"))
        .map(|n| {
            let label = n.descendants().find(|t| t.has_tag_name("text")).unwrap();
            label.text().unwrap().to_owned()
        })
        .collect();
    assert!(ticks.len() >= 5);
    for t in &ticks {
        t.parse::<u32>()
            .unwrap_or_else(|_| panic!("node tick {t:?} is not a whole number"));
    }

    // Edge list: exactly the file's edges are drawn, each from one node's centre to the
    // other's (so no line joins nodes that are not neighbours).
    let doc_text = read("conveyor");
    let doc = Document::parse(&doc_text).unwrap();
    let centre = |node: usize| {
        let g = with_class(&doc, "node")
            .into_iter()
            .find(|n| n.attribute("data-node") == Some(&node.to_string()))
            .unwrap_or_else(|| panic!("node {node} not drawn"));
        let c = g.children().find(|n| n.has_tag_name("circle")).unwrap();
        (num(&c, "cx"), num(&c, "cy"))
    };
    let mut drawn = BTreeSet::new();
    for e in with_class(&doc, "edge") {
        let (a, b): (usize, usize) = (
            attr(&e, "data-a").parse().unwrap(),
            attr(&e, "data-b").parse().unwrap(),
        );
        let line = e.children().find(|n| n.has_tag_name("line")).unwrap();
        let (p, q) = (
            (num(&line, "x1"), num(&line, "y1")),
            (num(&line, "x2"), num(&line, "y2")),
        );
        let near =
            |u: (f64, f64), w: (f64, f64)| (u.0 - w.0).abs() < 0.2 && (u.1 - w.1).abs() < 0.2;
        assert!(
            near(p, centre(a)) && near(q, centre(b)),
            "edge {a}-{b} is not drawn between its nodes"
        );
        drawn.insert((a.min(b), a.max(b)));
    }
    assert_eq!(drawn, edge_file("examples/conveyor.edges"));
    assert_eq!(with_class(&doc, "node").len(), 16);
}

#[test]
fn no_plot_prints_a_negative_zero() {
    let dir = tempfile::tempdir().unwrap();
    simulate(Path::new("examples/courtyard.toml"), 4, dir.path());
    for name in ["phase_error.svg", "lock_times.svg", "slowest_mode.svg"] {
        let text = parse(dir.path(), name);
        let doc = Document::parse(&text).unwrap();
        for t in texts(&doc) {
            for word in t.split_whitespace() {
                let w = word.trim_start_matches(['-', '−']);
                if word.len() != w.len() {
                    assert!(
                        w.parse::<f64>() != Ok(0.0),
                        "{name}: negative zero in {t:?}"
                    );
                }
            }
        }
    }
}
