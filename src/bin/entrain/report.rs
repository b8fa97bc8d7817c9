//! The human report: verdict first, then margins, then the figures behind them, then
//! warnings and the caution. Aligned columns, a unit on every figure.

use entrain::assess::{
    Assessment, GainsSource, NetworkModel, Warning, seconds, simulated_settle_s,
};
use entrain::plan::{GainChoice, GainRanges, Infeasibility, Search, Tuning};
use entrain::scenario::{SCENARIO_VERSION, Scenario, law_keyword};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// The caution every report ends with.
pub const CAUTION: &str = "Caution: this answer is an engineering aid, not a safety case. Where machinery is driven by these clocks, local codes and qualified review decide whether a deployment is safe.";

/// How phase error is measured, stated in every report.
pub const PHASE_ERROR_NOTE: &str = "Phase error here is the largest pairwise wrapped phase difference between any two nodes (for a pinned chain: the largest offset from the reference), in seconds of phase.";

const LABEL: usize = 34;
const VALUE: usize = 32;

fn row(s: &mut String, label: &str, value: &str, note: &str) {
    let _ = if note.is_empty() {
        writeln!(s, "  {label:<LABEL$}{value}")
    } else {
        // A value longer than its column still gets two spaces before the note.
        let gap = if value.chars().count() >= VALUE {
            "  "
        } else {
            ""
        };
        writeln!(s, "  {label:<LABEL$}{value:<VALUE$}{gap}{note}")
    };
}

fn heading(s: &mut String, title: &str) {
    let _ = writeln!(s);
    let _ = writeln!(s, "{title}");
}

fn header(s: &mut String, command: &str, r: &Scenario) {
    let _ = writeln!(s, "entrain {command}: {}", r.name);
    let _ = writeln!(
        s,
        "scenario {} (version {SCENARIO_VERSION})",
        r.path.display()
    );
}

fn ratio(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.2} ×")
    } else {
        "unlimited".to_owned()
    }
}

fn updates(n: i64) -> String {
    if n == 1 {
        "1 update".to_owned()
    } else {
        format!("{n} updates")
    }
}

fn ppm(x: f64) -> String {
    format!("{x:.1} ppm")
}

fn gain_text(kp: f64, ki: f64, kp_q16: u32, ki_q16: u32) -> String {
    if ki_q16 == 0 {
        format!("kp {kp:.6} (Q16 {kp_q16}), ki 0 (P law)")
    } else {
        format!("kp {kp:.6} (Q16 {kp_q16}), ki {ki:.6} (Q16 {ki_q16})")
    }
}

fn warnings(s: &mut String, list: &[Warning]) {
    heading(s, "Warnings");
    if list.is_empty() {
        let _ = writeln!(s, "  none");
    }
    for w in list {
        let _ = writeln!(s, "  - {w}");
    }
}

fn closing(s: &mut String) {
    let _ = writeln!(s);
    let _ = writeln!(s, "{PHASE_ERROR_NOTE}");
    let _ = writeln!(s, "{CAUTION}");
}

/// The report of `check` (and of `simulate`, which shares it), under `command`'s name.
#[must_use]
pub fn check(r: &Assessment, command: &str) -> String {
    let sc = &r.scenario;
    let mut s = String::new();
    header(&mut s, command, sc);
    let _ = writeln!(s);
    verdict(&mut s, r);
    body(&mut s, r);
    s
}

/// Margins, figures, tuning, warnings and the closing lines: what `check` and `tune`
/// print after their heads.
fn body(s: &mut String, r: &Assessment) {
    margins(s, r);
    figures(s, r);
    if let Some(t) = &r.gains.tuning {
        tuning(s, t, &r.scenario);
    }
    warnings(s, &r.warnings);
    closing(s);
}

fn verdict(s: &mut String, r: &Assessment) {
    let sc = &r.scenario;
    if r.verdict.pass {
        let how = if r.simulation.is_some() {
            "predicted and simulated"
        } else {
            "predicted"
        };
        let _ = writeln!(
            s,
            "VERDICT: PASS  stable, locks, margins met, clear of the noise floor, and {how} settling ({}) fits the {} budget",
            sc.quantile.label(),
            seconds(sc.lock_budget_s)
        );
    } else {
        let _ = writeln!(s, "VERDICT: FAIL");
        for reason in &r.verdict.reasons {
            let _ = writeln!(s, "  - {reason}");
        }
    }
}

fn margins(s: &mut String, r: &Assessment) {
    let sc = &r.scenario;
    let p = &r.prediction;
    heading(s, "Margins");
    let st = &p.stability;
    let m = &p.margins;
    row(
        s,
        "gain margin",
        &ratio(m.gain),
        &format!(
            "required {} ({}): factor both gains may grow by before a mode stops decaying",
            ratio(m.required.gain),
            if m.gain_ok() { "met" } else { "NOT met" }
        ),
    );
    row(
        s,
        "largest stable kp",
        &format!("{:.6}", st.kp_limit),
        "at this ki/kp ratio and delay",
    );
    match st.delay_limit_updates {
        Some(d) if st.stable => row(
            s,
            "delay margin",
            &updates(i64::from(m.delay_updates)),
            &format!(
                "required {} ({}): extra link delay tolerated (stable up to {d} updates)",
                updates(i64::from(m.required.delay_updates)),
                if m.delay_ok() { "met" } else { "NOT met" }
            ),
        ),
        _ => row(
            s,
            "delay margin",
            "none",
            "unstable at the scenario's own delay",
        ),
    }
    if let Some(l) = &p.locking {
        row(
            s,
            "lock margin",
            &ratio(l.lock_margin),
            "edge coupling capacity over worst crystal load",
        );
    }
    if let Some(lock_s) = p.lock_s {
        row(
            s,
            "budget left, predicted",
            &seconds(sc.lock_budget_s - lock_s),
            &format!("budget minus predicted settling ({})", sc.quantile.label()),
        );
    }
    if let Some(v) = &r.simulation {
        row(
            s,
            "budget left, simulated",
            &seconds(sc.lock_budget_s - simulated_settle_s(sc, v)),
            &format!(
                "budget minus simulated settling ({}) over {} runs",
                sc.quantile.label(),
                v.summary.runs
            ),
        );
    }
}

fn figures(s: &mut String, r: &Assessment) {
    let sc = &r.scenario;
    let p = &r.prediction;
    let st = &p.stability;
    let period = sc.update_period_s();
    heading(s, "Figures");
    row(s, "network", &sc.layout.describe(), "");
    row(
        s,
        &format!(
            "spectrum ({})",
            r.network.source.keyword().replace('_', " ")
        ),
        &format!(
            "λslow {:.6}, λmax {:.6}",
            r.network.spectrum.lambda_slow, r.network.spectrum.lambda_max
        ),
        "",
    );
    row(
        s,
        "timing",
        &format!(
            "{} Hz updates, {} phase turn, {} Hz timer",
            sc.update_rate_hz,
            seconds(sc.phase_period_s),
            sc.timer_hz
        ),
        "",
    );
    let t = &p.timer;
    row(
        s,
        "  as the timer runs it",
        &format!(
            "{} ticks/turn, {} ticks/update",
            t.ticks_per_period, t.update_ticks
        ),
        &format!(
            "period {} ({:+.1} ppm), update {:+.1} ppm, tick {}",
            seconds(t.period_s),
            t.period_error_ppm,
            t.update_error_ppm,
            seconds(t.tick_s)
        ),
    );
    let source = match r.gains.source {
        GainsSource::Tuned => "gains (tuned, as flashed)",
        GainsSource::Scenario => "gains (as flashed)",
    };
    row(
        s,
        source,
        &gain_text(p.kp(), p.ki(), p.constants.kp_q16, p.constants.ki_q16),
        "",
    );
    row(
        s,
        "law",
        &format!(
            "{} coupling, slew limit {:.6} turn, trim limit ±{}",
            law_keyword(sc.law),
            p.constants.slew_limit_turns(),
            ppm(sc.trim_limit_ppm)
        ),
        "",
    );
    let late = if sc.late_stamp_fraction > 0.0 {
        format!(
            ", {:.1} % of stamps late by up to {}",
            sc.late_stamp_fraction * 100.0,
            seconds(sc.late_stamp_max_s)
        )
    } else {
        String::new()
    };
    row(
        s,
        "link",
        &format!(
            "latency {} ({:.2} updates), loss {:.1} %, timestamp jitter ±{}{late}",
            seconds(sc.latency_s),
            sc.latency_s * sc.update_rate_hz,
            sc.loss_fraction * 100.0,
            seconds(sc.timestamp_jitter_s)
        ),
        "",
    );
    row(
        s,
        "convergence per update",
        &format!("{:.6}", st.radius),
        &format!(
            "slowest mode {:.6}, fastest mode {:.6}",
            st.radius_slow, st.radius_fast
        ),
    );
    row(
        s,
        "spread to tolerance",
        &format!(
            "{} → {}",
            seconds(sc.initial_spread_s),
            seconds(sc.lock_tolerance_s)
        ),
        "random power-up phases within the spread",
    );
    if let Some(se) = &p.settle {
        let opt = |x: Option<f64>| x.map_or("never".to_owned(), seconds);
        row(
            s,
            &format!("predicted settling ({})", sc.quantile.label()),
            &seconds(se.compared_s),
            "compared with the budget",
        );
        row(
            s,
            "  forecast p50, p90",
            &format!("{}, {}", opt(se.p50_s), opt(se.p90_s)),
            &format!(
                "{} sampled runs of an independent model of the law; {:.0} % never settle",
                p.forecast.as_ref().map_or(0, |f| f.samples),
                se.never_settled_fraction * 100.0
            ),
        );
        row(
            s,
            "  worst-case bound",
            &seconds(se.bound_s),
            "planner bound × loss slow-down; no start settles later",
        );
    }
    if let Some(se) = &p.settling {
        row(
            s,
            "  slew-limit floor",
            &seconds(se.slew_floor_updates as f64 * period),
            "no settling can come sooner",
        );
    }
    if let Some(n) = &p.noise_floor {
        row(
            s,
            "predicted noise floor",
            &format!("p50 {}, p99 {}", seconds(n.p50_s), seconds(n.p99_s)),
            "steady largest pairwise error from jitter and whole ticks",
        );
    }
    if let Some(l) = &p.locking {
        row(
            s,
            "worst crystal pattern",
            &format!("±{}", ppm(sc.crystal_tolerance_ppm)),
            if l.locks { "held" } else { "NOT held" },
        );
        if p.ki() > 0.0 {
            row(
                s,
                "  rate trims needed",
                &format!("{} to {}", ppm(l.trim_min_ppm), ppm(l.trim_max_ppm)),
                &format!(
                    "of ±{} ({})",
                    ppm(sc.trim_limit_ppm),
                    if l.trim_ok { "fits" } else { "does NOT fit" }
                ),
            );
        } else {
            row(
                s,
                "  steady offset, worst edge",
                &seconds(l.max_edge_lag_s),
                "the P law holds drift with a standing offset",
            );
        }
    }
    match &r.simulation {
        Some(v) => {
            let sm = &v.summary;
            row(
                s,
                "simulated runs",
                &format!("{} of {} settled", sm.settled_runs, sm.runs),
                &format!(
                    "seed {}, {} simulated per run",
                    v.seed,
                    seconds(p.horizon_updates as f64 * period)
                ),
            );
            row(
                s,
                &format!("simulated settling ({})", sc.quantile.label()),
                &seconds(simulated_settle_s(sc, v)),
                "compared with the budget; a run that never settles counts as never",
            );
            if let Some(pc) = sm.settle_s {
                row(
                    s,
                    "  settled runs p50, p90",
                    &format!("{}, {}", seconds(pc.p50), seconds(pc.p90)),
                    &format!("p99 {}, max {}", seconds(pc.p99), seconds(pc.max)),
                );
            }
            if let Some(pc) = sm.first_entry_s {
                row(
                    s,
                    "  first entry p50, p90",
                    &format!("{}, {}", seconds(pc.p50), seconds(pc.p90)),
                    "first time within the tolerance (not settling)",
                );
            }
            if let Some(n) = sm.noise_floor_turns {
                row(
                    s,
                    "simulated noise floor",
                    &format!(
                        "p50 {}, p99 {}",
                        seconds(n.p50 * sc.phase_period_s),
                        seconds(n.p99 * sc.phase_period_s)
                    ),
                    "measured over each run's steady window",
                );
            }
            row(
                s,
                "simulated common rate",
                &format!(
                    "up to {:.1} ppm, {:.0} % at a trim limit",
                    sm.common_rate_max_ppm,
                    sm.trim_at_limit_fraction * 100.0
                ),
                "largest |mean crystal + trim| at a run's end",
            );
            if let Some(t) = sm.trim_error_ppm {
                row(
                    s,
                    "simulated trim error",
                    &format!("p50 {:.2} ppm, max {:.2} ppm", t.p50, t.max),
                    "|trim − crystal's offset from the network rate| at a run's end",
                );
            }
            if let Some(t) = sm.trim_spread_error_ppm {
                row(
                    s,
                    "  relative to the trims' mean",
                    &format!("p50 {:.2} ppm, max {:.2} ppm", t.p50, t.max),
                    "the same with the common rate taken out",
                );
            }
        }
        None => row(s, "simulated runs", "not run", ""),
    }
}

fn alternatives(s: &mut String, t: &Tuning, budget_s: f64) {
    let a = &t.alternatives;
    if a.update_rate_factor.is_finite() && a.update_rate_factor > 1.0 {
        row(
            s,
            "to meet the budget",
            &format!("update {:.2} × faster", a.update_rate_factor),
            &format!("fastest gains would then fit {}", seconds(budget_s)),
        );
    }
    if let Some(m) = a.middle_reference_lock_s {
        row(
            s,
            "with a reference mid-chain",
            &seconds(m),
            "fastest lock time",
        );
    }
    if let Some(h) = a.split_in_two_lock_s {
        row(
            s,
            "with the chain split in two",
            &seconds(h),
            "fastest lock time",
        );
    }
}

/// Why the tuner found nothing, in words.
#[must_use]
pub fn infeasibility(i: Infeasibility, scenario: &Scenario) -> String {
    match i {
        Infeasibility::CannotLock => {
            "no stable gains hold lock against the worst crystal pattern (or the slew limit is too tight)".to_owned()
        }
        Infeasibility::TrimOutOfRange => {
            "the PI law would need rate trims beyond law.trim_limit_ppm".to_owned()
        }
        Infeasibility::BudgetTooShort => {
            "even the fastest stable, locking gains take longer than the budget".to_owned()
        }
        Infeasibility::MarginTooSmall => format!(
            "gains that meet the budget exist, but none with gain margin {} and {} of delay margin (margins.gain, margins.delay_updates)",
            ratio(scenario.margins.gain),
            updates(i64::from(scenario.margins.delay_updates))
        ),
        _ => "no gains meet the budget with the margins".to_owned(),
    }
}

/// Machine keyword for an infeasibility.
#[must_use]
pub fn infeasibility_code(i: Infeasibility) -> &'static str {
    match i {
        Infeasibility::CannotLock => "cannot_lock",
        Infeasibility::TrimOutOfRange => "trim_out_of_range",
        Infeasibility::BudgetTooShort => "budget_too_short",
        Infeasibility::MarginTooSmall => "margin_too_small",
        _ => "infeasible",
    }
}

fn choice_rows(s: &mut String, label: &str, c: &GainChoice) {
    row(
        s,
        label,
        &format!("kp {:.6}, ki {:.6}", c.kp, c.ki),
        &format!(
            "lock {}, gain margin {}, delay margin {} updates",
            seconds(c.lock_s),
            ratio(c.gain_margin),
            c.delay_margin_updates
        ),
    );
}

fn range_rows(s: &mut String, what: &str, r: &GainRanges) {
    let text = |(lo, hi): (f64, f64)| format!("{lo:.6} to {hi:.6}");
    if let Some(x) = r.kp {
        row(s, &format!("kp {what}"), &text(x), "");
    }
    if let Some(x) = r.ki {
        row(s, &format!("ki {what}"), &text(x), "");
    }
    if let Some(x) = r.ki_over_kp {
        row(s, &format!("ki/kp {what}"), &text(x), "a band of ratios");
    }
}

fn tuning(s: &mut String, t: &Tuning, sc: &Scenario) {
    heading(s, "Tuning");
    let tuned = match t.search {
        Search::Kp { ki } if ki > 0.0 => format!("kp (ki fixed at {ki:.6})"),
        Search::Kp { .. } => "kp (P law, ki = 0)".to_owned(),
        Search::Ki { kp } => format!("ki (kp fixed at {kp:.6})"),
        Search::Both => "kp and ki".to_owned(),
    };
    row(s, "tuned", &tuned, "gains given as numbers stay as given");
    if let Some(i) = t.infeasibility {
        row(s, "no recommendation", &infeasibility(i, sc), "");
    }
    range_rows(s, "meeting the budget", &t.meeting_budget);
    range_rows(
        s,
        "meeting budget and margins",
        &t.meeting_budget_and_margins,
    );
    if let Some(c) = &t.recommended {
        choice_rows(s, "recommended", c);
    }
    if let Some(c) = &t.closest {
        choice_rows(s, "closest (shown)", c);
    }
    if let Some(c) = &t.fastest {
        choice_rows(s, "fastest stable, locking", c);
    }
    alternatives(s, t, sc.lock_budget_s);
}

/// The report of `tune`: the check report at the tuned gains (prediction only), with the
/// gains to flash first. With nothing to tune it is the `check` report.
#[must_use]
pub fn tune(r: &Assessment, written: Option<&Path>) -> String {
    let sc = &r.scenario;
    let p = &r.prediction;
    let mut s = String::new();
    header(&mut s, "tune", sc);
    if r.gains.tuning.is_none() {
        let _ = writeln!(
            s,
            "nothing in the scenario is marked \"tune\": answered as `check` would, at the file's own gains"
        );
    }
    let _ = writeln!(s);
    verdict(&mut s, r);
    heading(&mut s, "Gains to flash");
    row(
        &mut s,
        "kp",
        &format!("{:.6}", p.kp()),
        &format!("Q16.16 raw {}", p.constants.kp_q16),
    );
    row(
        &mut s,
        "ki",
        &format!("{:.6}", p.ki()),
        &format!("Q16.16 raw {}", p.constants.ki_q16),
    );
    row(
        &mut s,
        "slew limit",
        &format!("{} counts", p.constants.slew_limit_counts),
        &format!("{:.6} turn per update", p.constants.slew_limit_turns()),
    );
    row(
        &mut s,
        "ticks per turn / per update",
        &format!(
            "{} / {}",
            p.constants.ticks_per_period, p.constants.update_ticks
        ),
        &format!("{} Hz timer", sc.timer_hz),
    );
    match written {
        Some(path) => row(
            &mut s,
            "firmware constants",
            &path.display().to_string(),
            "include! it; CONFIG is checked at compile time",
        ),
        None if r.verdict.pass => row(
            &mut s,
            "firmware constants",
            "not written",
            "pass --out FILE to write them",
        ),
        None => row(
            &mut s,
            "firmware constants",
            "not written",
            "the verdict fails: nothing is written",
        ),
    }
    body(&mut s, r);
    s
}

/// The report of `spectrum`.
#[must_use]
pub fn spectrum(sc: &Scenario, r: &NetworkModel) -> String {
    let sp = &r.spectrum;
    let mut s = String::new();
    header(&mut s, "spectrum", sc);
    heading(&mut s, "Summary");
    row(&mut s, "network", &sc.layout.describe(), "");
    row(&mut s, "source", &r.source.keyword().replace('_', " "), "");
    row(
        &mut s,
        "slowest mode λslow",
        &format!("{:.9}", sp.lambda_slow),
        if sp.pinned {
            "smallest grounded eigenvalue"
        } else {
            "algebraic connectivity λ2"
        },
    );
    row(
        &mut s,
        "largest λmax",
        &format!("{:.9}", sp.lambda_max),
        "sets the gain limit 2/λmax",
    );
    row(
        &mut s,
        "λmax / λslow",
        &format!("{:.1}", sp.lambda_max / sp.lambda_slow),
        "how much slower the slowest mode is",
    );
    row(&mut s, "largest degree", &format!("{}", sp.max_degree), "");
    if sp.stable_twisted_states > 0 {
        row(
            &mut s,
            "stable twisted states",
            &format!("{}", sp.stable_twisted_states),
            "ring patterns that never unwind",
        );
    }
    let ev = match r.eigenvalues.as_deref() {
        Some(all) => {
            heading(&mut s, "Eigenvalues (ascending)");
            all
        }
        None => {
            heading(
                &mut s,
                if sp.pinned {
                    "Smallest eigenvalues (ascending; sparse solver: the grounded λ1 to λ6, each within 1e-10 of its value)"
                } else {
                    "Smallest eigenvalues (ascending; sparse solver: 0, then λ2 to λ6, each within 1e-10 of its value)"
                },
            );
            &r.smallest_eigenvalues[..]
        }
    };
    let shown: Vec<String> = if ev.len() <= 24 {
        ev.iter().map(|&v| eigenvalue_text(v)).collect()
    } else {
        let mut v: Vec<String> = ev.iter().take(12).map(|&v| eigenvalue_text(v)).collect();
        v.push(format!("… ({} more) …", ev.len() - 24));
        v.extend(ev.iter().skip(ev.len() - 12).map(|&v| eigenvalue_text(v)));
        v
    };
    for chunk in shown.chunks(6) {
        let _ = writeln!(s, "  {}", chunk.join("  "));
    }
    heading(
        &mut s,
        "Slowest mode along the network (largest magnitude 1)",
    );
    let shape = &r.slow_mode;
    let step = shape.len().div_ceil(48).max(1);
    for (i, v) in shape.iter().enumerate().step_by(step) {
        let _ = writeln!(s, "  node {i:>5}  {v:>+9.4}  {}", bar(*v));
    }
    if step > 1 {
        let _ = writeln!(s, "  (every {step}th node shown)");
    }
    closing(&mut s);
    s
}

/// An eigenvalue for the spectrum report: six decimals, or scientific notation below
/// 1e-3 in magnitude (where six decimals would hide it; 0 stays `0`).
fn eigenvalue_text(v: f64) -> String {
    if v != 0.0 && v.abs() < 1e-3 {
        format!("{v:.5e}")
    } else {
        format!("{v:.6}")
    }
}

/// A text bar centred on zero, 20 characters each way.
fn bar(v: f64) -> String {
    let n = (v.abs().min(1.0) * 20.0).round() as usize;
    if v < 0.0 {
        format!("{:>20}|", "#".repeat(n))
    } else {
        format!("{:>20}|{}", "", "#".repeat(n))
    }
}

/// Append the lists of written plots, and of plots that could not be made, to a report.
pub fn plots_written(s: &mut String, written: &[PathBuf], failed: &[String]) {
    if !written.is_empty() {
        let _ = writeln!(s);
        let _ = writeln!(s, "Plots written");
        for p in written {
            let _ = writeln!(s, "  {}", p.display());
        }
    }
    if !failed.is_empty() {
        let _ = writeln!(s);
        let _ = writeln!(s, "Plots not written");
        for f in failed {
            let _ = writeln!(s, "  {f}");
        }
    }
}

/// The telemetry logs written by `simulate --telemetry`.
pub fn telemetry_written(s: &mut String, written: &[PathBuf]) {
    if written.is_empty() {
        return;
    }
    heading(s, "Telemetry written (the first run, one log per node)");
    for p in written {
        let _ = writeln!(s, "  {}", p.display());
    }
}

fn pair_list(v: &[(usize, usize)]) -> String {
    if v.is_empty() {
        return "none".to_owned();
    }
    v.iter()
        .map(|(a, b)| format!("{a}–{b}"))
        .collect::<Vec<_>>()
        .join(", ")
}

fn opt_seconds(x: Option<f64>) -> String {
    x.map_or_else(|| "—".to_owned(), seconds)
}

/// The report of `field`.
#[must_use]
pub fn field(c: &entrain::field::FieldCheck, plot: Option<&Path>) -> String {
    let a = &c.assessment;
    let r = &c.report;
    let sc = &a.scenario;
    let mut s = String::new();
    header(&mut s, "field", sc);
    let _ = writeln!(s);
    if r.pass() {
        let _ = writeln!(
            s,
            "VERDICT: PASS  every link heard, losses and crystals within the scenario, settled within the {} budget, decay and noise floor as predicted",
            seconds(sc.lock_budget_s)
        );
    } else {
        let _ = writeln!(s, "VERDICT: FAIL");
        for reason in &r.reasons {
            let _ = writeln!(s, "  - {}: {reason}", reason.code());
        }
    }

    heading(&mut s, "Logs");
    let l = &r.log;
    row(
        &mut s,
        "files, lines",
        &format!("{}, {}", l.files, l.lines),
        &format!("{} other lines skipped", l.other_lines),
    );
    row(
        &mut s,
        "records kept",
        &l.records.to_string(),
        &format!(
            "{} repeats and {} conflicts dropped, {} updates missing",
            l.duplicates, l.conflicts, l.missing_updates
        ),
    );
    row(
        &mut s,
        "reboots, counter wraps",
        &format!("{}, {}", l.reboots, l.wraps),
        &format!(
            "{} reboots placed by the neighbours' logs",
            l.reboots_aligned
        ),
    );
    row(
        &mut s,
        "malformed lines",
        &l.malformed_count.to_string(),
        "telemetry lines refused",
    );
    for m in &l.malformed {
        let _ = writeln!(s, "    {}:{}: {}", m.file.display(), m.line, m.message);
    }
    if l.malformed_count > l.malformed.len() {
        let _ = writeln!(s, "    … {} more", l.malformed_count - l.malformed.len());
    }

    heading(&mut s, "Links");
    let expected = r.links.iter().filter(|k| k.expected).count();
    let present = r.links.iter().filter(|k| k.expected && k.heard()).count();
    row(
        &mut s,
        "present",
        &format!("{present} of {expected}"),
        "links of the scenario heard in at least one direction",
    );
    row(&mut s, "missing", &pair_list(&r.missing), "");
    row(&mut s, "unexpected", &pair_list(&r.unexpected), "");
    let _ = writeln!(
        s,
        "  {:<10}{:<10}{:<12}{:<12}{:<14}age p90",
        "link", "heard", "loss", "intervals", "age p50"
    );
    for k in &r.links {
        let heard = match (k.a_hears_b, k.b_hears_a) {
            (true, true) => "both",
            (true, false) => "a hears b",
            (false, true) => "b hears a",
            (false, false) => "never",
        };
        let mark = if k.expected { "" } else { " (unexpected)" };
        let _ = writeln!(
            s,
            "  {:<10}{:<10}{:<12}{:<12}{:<14}{}{mark}",
            format!("{}–{}", k.a, k.b),
            heard,
            k.loss
                .map_or_else(|| "—".to_owned(), |x| format!("{:.1} %", x * 100.0)),
            k.intervals,
            opt_seconds(k.age.map(|x| x.p50_s)),
            opt_seconds(k.age.map(|x| x.p90_s)),
        );
    }

    heading(&mut s, "Nodes");
    let _ = writeln!(
        s,
        "  {:<8}{:<10}{:<14}{:<18}notes",
        "node", "records", "trim", "crystal (est.)"
    );
    for n in &r.nodes {
        let mut notes = Vec::new();
        if !n.in_scenario {
            notes.push("not in the scenario".to_owned());
        }
        if n.merge.records == 0 && n.in_scenario {
            notes.push("no records".to_owned());
        }
        if n.trim_at_limit {
            notes.push("trim at its limit".to_owned());
        }
        if n.merge.reboots > 0 {
            notes.push(format!("{} reboots", n.merge.reboots));
        }
        if n.merge.missing > 0 {
            notes.push(format!("{} updates missing", n.merge.missing));
        }
        let _ = writeln!(
            s,
            "  {:<8}{:<10}{:<14}{:<18}{}",
            n.id,
            n.merge.records,
            n.trim_ppm.map_or_else(|| "—".to_owned(), ppm),
            match n.crystal_ppm {
                Some(x) => ppm(x),
                None if r.crystals_estimated => "—".to_owned(),
                None => "not estimated".to_owned(),
            },
            notes.join("; ")
        );
    }
    if !r.crystals_estimated {
        let _ = writeln!(
            s,
            "  crystal offsets not estimated: the P law (ki = 0) keeps no rate trim to read them from"
        );
    }

    heading(&mut s, "Against the prediction");
    let p = &a.prediction;
    row(
        &mut s,
        "rounds",
        &format!("{} ({} left out)", r.rounds, r.incomplete_rounds),
        "update intervals spanned by the logs",
    );
    let predicted = p.settle.map_or_else(
        || "—".to_owned(),
        |t| format!("p50 {}, p90 {}", opt_seconds(t.p50_s), opt_seconds(t.p90_s)),
    );
    row(
        &mut s,
        "settling, observed",
        &opt_seconds(r.settle_s),
        &format!(
            "predicted {predicted}; budget {}",
            seconds(sc.lock_budget_s)
        ),
    );
    row(
        &mut s,
        "noise floor, observed",
        &r.noise_floor_s.map_or_else(
            || "—".to_owned(),
            |(a, b)| format!("p50 {}, p99 {}", seconds(a), seconds(b)),
        ),
        &format!(
            "predicted {}; p99 limit {}",
            p.noise_floor.map_or_else(
                || "—".to_owned(),
                |n| format!("p50 {}, p99 {}", seconds(n.p50_s), seconds(n.p99_s))
            ),
            opt_seconds(r.noise_limit_s)
        ),
    );
    match &r.decay {
        Some(d) => {
            row(
                &mut s,
                "decay per update, fitted",
                &format!("{:.6}", d.fitted_per_update),
                &format!(
                    "time constant {}, from {} rounds between {} and {}",
                    seconds(d.fitted_time_constant_s),
                    d.points,
                    seconds(d.from_s),
                    seconds(d.to_s)
                ),
            );
            row(
                &mut s,
                "decay per update, predicted",
                &format!("{:.6}", d.predicted_per_update),
                &format!(
                    "time constant {} (slowest mode, mean dynamics with loss)",
                    seconds(d.predicted_time_constant_s)
                ),
            );
        }
        None => {
            row(
                &mut s,
                "decay per update, fitted",
                "—",
                "no transient to fit",
            );
            row(
                &mut s,
                "decay per update, predicted",
                &format!("{:.6}", p.stability.mean_radius_with_loss),
                "slowest mode, mean dynamics with loss",
            );
        }
    }
    if let Some(c) = &r.common_trim {
        row(
            &mut s,
            "common rate, fitted",
            &format!("{:+.3} ppm/min", c.slope_ppm_per_min),
            &format!(
                "mean trim {:+.1} ppm at the end, moved {:+.1} ppm over {} rounds between {} and {}; {}",
                c.end_ppm,
                c.moved_ppm,
                c.points,
                seconds(c.from_s),
                seconds(c.to_s),
                match (c.heading_to_ppm, c.leak_time_constant_s) {
                    (Some(h), Some(t)) => format!(
                        "heading for {h:+.1} ppm (trim leak, time constant {})",
                        seconds(t)
                    ),
                    _ => "no trim leak to hold it".to_owned(),
                }
            ),
        );
    }
    heading(&mut s, "Warnings");
    if r.warnings.is_empty() {
        let _ = writeln!(s, "  none");
    }
    for w in &r.warnings {
        let _ = writeln!(s, "  - {w}");
    }
    if let Some(p) = plot {
        heading(&mut s, "Plot written");
        let _ = writeln!(s, "  {}", p.display());
    }
    closing(&mut s);
    s
}
