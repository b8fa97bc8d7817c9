//! The human report: verdict first, then margins, then the figures behind them, then
//! warnings and the caution. Aligned columns, a unit on every figure.

use super::plot::seconds;
use super::{CheckResult, SpectrumResult, TuneResult, Warning};
use crate::plan::{GainChoice, Infeasibility};
use std::fmt::Write as _;
use std::path::PathBuf;

/// The caution every report ends with.
pub const CAUTION: &str = "Caution: this answer is an engineering aid, not a safety case. Where machinery is driven by these clocks, local codes and qualified review decide whether a deployment is safe.";

/// How phase error is measured, stated in every report.
pub const PHASE_ERROR_NOTE: &str = "Phase error here is the largest pairwise wrapped phase difference between any two nodes (for a pinned chain: the largest offset from the reference), in seconds of phase.";

const LABEL: usize = 30;
const VALUE: usize = 32;

fn row(s: &mut String, label: &str, value: &str, note: &str) {
    let _ = if note.is_empty() {
        writeln!(s, "  {label:<LABEL$}{value}")
    } else {
        writeln!(s, "  {label:<LABEL$}{value:<VALUE$}{note}")
    };
}

fn heading(s: &mut String, title: &str) {
    let _ = writeln!(s);
    let _ = writeln!(s, "{title}");
}

fn header(s: &mut String, command: &str, r: &super::scenario::Scenario) {
    let _ = writeln!(s, "entrain {command}: {}", r.name);
    let _ = writeln!(
        s,
        "scenario {} (version {})",
        r.path.display(),
        super::scenario::SCENARIO_VERSION
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
        let _ = writeln!(s, "  - {}", w.message);
    }
}

fn closing(s: &mut String) {
    let _ = writeln!(s);
    let _ = writeln!(s, "{PHASE_ERROR_NOTE}");
    let _ = writeln!(s, "{CAUTION}");
}

/// The report of `check` (and of `simulate`, which shares it), under `command`'s name.
#[must_use]
pub fn check(r: &CheckResult, command: &str) -> String {
    let sc = &r.scenario;
    let p = &r.prediction;
    let mut s = String::new();
    header(&mut s, command, sc);
    let _ = writeln!(s);
    if r.verdict.pass {
        let how = if r.verification.is_some() {
            "predicted and simulated"
        } else {
            "predicted"
        };
        let _ = writeln!(
            s,
            "VERDICT: PASS  stable, locks, and {how} lock fits the {} budget",
            seconds(sc.lock_budget_s)
        );
    } else {
        let _ = writeln!(s, "VERDICT: FAIL");
        for reason in &r.verdict.reasons {
            let _ = writeln!(s, "  - {}", reason.message(sc.lock_budget_s));
        }
    }

    heading(&mut s, "Margins");
    let st = &p.stability;
    row(
        &mut s,
        "gain margin",
        &ratio(st.gain_margin),
        "factor both gains may grow by before a mode stops decaying",
    );
    row(
        &mut s,
        "largest stable kp",
        &format!("{:.6}", st.kp_limit),
        "at this ki/kp ratio and delay",
    );
    match st.delay_limit_updates {
        Some(d) => row(
            &mut s,
            "delay margin",
            &updates(i64::from(d) - i64::from(sc.delay_updates())),
            &format!("extra link delay tolerated (stable up to {d} updates)"),
        ),
        None => row(
            &mut s,
            "delay margin",
            "none",
            "unstable even without delay",
        ),
    }
    if let Some(l) = &p.locking {
        row(
            &mut s,
            "lock margin",
            &ratio(l.lock_margin),
            "edge coupling capacity over worst crystal load",
        );
    }
    if let Some(lock_s) = p.lock_s {
        row(
            &mut s,
            "budget left, predicted",
            &seconds(sc.lock_budget_s - lock_s),
            "budget minus predicted lock time",
        );
    }
    if let Some(v) = &r.verification {
        if let Some(pc) = v.summary.settle_s {
            row(
                &mut s,
                "budget left, simulated",
                &seconds(sc.lock_budget_s - pc.max),
                &format!("budget minus the slowest of {} runs", v.summary.runs),
            );
        }
    }

    heading(&mut s, "Figures");
    row(&mut s, "network", &sc.network.describe(), "");
    row(
        &mut s,
        &format!("spectrum ({})", r.shape.source.keyword().replace('_', " ")),
        &format!(
            "λslow {:.6}, λmax {:.6}",
            r.shape.spectrum.lambda_slow, r.shape.spectrum.lambda_max
        ),
        "",
    );
    row(
        &mut s,
        "timing",
        &format!(
            "{} Hz updates, {} phase turn, {} Hz timer",
            sc.update_rate_hz,
            seconds(sc.phase_period_s),
            sc.timer_hz
        ),
        "",
    );
    let source = if r.chosen.tuning.is_some() {
        "gains (tuned, as flashed)"
    } else {
        "gains (as flashed)"
    };
    row(
        &mut s,
        source,
        &gain_text(p.kp, p.ki, p.constants.kp_q16, p.constants.ki_q16),
        "",
    );
    row(
        &mut s,
        "law",
        &format!(
            "{} coupling, slew limit {:.6} turn, trim limit ±{}",
            sc.coupling.keyword(),
            p.constants.slew_limit_turns(),
            ppm(sc.trim_limit_ppm)
        ),
        "",
    );
    row(
        &mut s,
        "link",
        &format!(
            "latency {} ({} updates), loss {:.1} %, timestamp jitter ±{}",
            seconds(sc.latency_s),
            sc.delay_updates(),
            sc.loss_fraction * 100.0,
            seconds(sc.timestamp_jitter_s)
        ),
        "",
    );
    row(
        &mut s,
        "convergence per update",
        &format!("{:.6}", st.radius),
        &format!(
            "slowest mode {:.6}, fastest mode {:.6}",
            st.radius_slow, st.radius_fast
        ),
    );
    if sc.loss_fraction > 0.0 {
        row(
            &mut s,
            "convergence with loss",
            &format!("{:.6}", st.mean_radius_with_loss),
            &format!("mean dynamics, {:.2} × slower", st.loss_slowdown),
        );
    }
    if let Some(se) = &p.settling {
        row(
            &mut s,
            "spread to tolerance",
            &format!(
                "{} → {}",
                seconds(sc.initial_spread_s),
                seconds(sc.lock_tolerance_s)
            ),
            "",
        );
        if let Some(lock_s) = p.lock_s {
            row(
                &mut s,
                "predicted lock time",
                &seconds(lock_s),
                "larger of worst-case bound and with-loss estimate",
            );
        }
        row(
            &mut s,
            "  slowest-mode estimate",
            &seconds(se.asymptotic_s),
            "",
        );
        if let Some(b) = se.bound_s {
            row(&mut s, "  worst-case bound", &seconds(b), "");
        }
        if sc.loss_fraction > 0.0 {
            row(&mut s, "  with message loss", &seconds(se.with_loss_s), "");
        }
        if let Some(sine) = se.sine_s {
            row(
                &mut s,
                "  sine, large spread",
                &seconds(sine),
                "slowest mode with the sine's weaker pull far from lock",
            );
        }
        row(
            &mut s,
            "  slew-limit floor",
            &seconds(se.slew_floor_updates as f64 * sc.update_period_s()),
            "no lock can come sooner",
        );
    }
    if let Some(l) = &p.locking {
        row(
            &mut s,
            "worst crystal pattern",
            &format!("±{}", ppm(sc.crystal_tolerance_ppm)),
            if l.locks { "held" } else { "NOT held" },
        );
        if p.ki > 0.0 {
            row(
                &mut s,
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
                &mut s,
                "  steady offset, worst edge",
                &seconds(l.max_offset_s),
                "the P law holds drift with a standing offset",
            );
            row(
                &mut s,
                "  steady correction",
                &format!("{:.3e} turn/update", l.max_correction_turns_per_update),
                if l.slew_ok {
                    "within the slew limit"
                } else {
                    "beyond the slew limit"
                },
            );
        }
    }
    if let Some(n) = &p.noise {
        row(
            &mut s,
            "steady jitter",
            &format!("{} rms", seconds(n.phase_sd_s)),
            "from timestamp jitter, per node about the mean",
        );
    }
    match &r.verification {
        Some(v) => {
            let sm = &v.summary;
            row(
                &mut s,
                "simulated runs",
                &format!("{} of {} locked", sm.settled_runs, sm.runs),
                &format!(
                    "seed {}, {} simulated per run",
                    v.seed,
                    seconds(sc.duration_s)
                ),
            );
            if let Some(pc) = sm.settle_s {
                row(
                    &mut s,
                    "simulated lock time",
                    &format!("p50 {}, p90 {}", seconds(pc.p50), seconds(pc.p90)),
                    &format!("p99 {}, max {}", seconds(pc.p99), seconds(pc.max)),
                );
            }
            if let Some(res) = sm.residual_turns {
                row(
                    &mut s,
                    "simulated residual",
                    &seconds(res * sc.phase_period_s),
                    "median largest pairwise difference after lock",
                );
            }
            if let Some(j) = sm.jitter_turns {
                row(
                    &mut s,
                    "simulated jitter",
                    &format!("{} rms", seconds(j * sc.phase_period_s)),
                    "median over locked runs",
                );
            }
        }
        None => row(&mut s, "simulated runs", "not run", ""),
    }
    if let Some(t) = &r.chosen.tuning {
        alternatives(&mut s, t, sc.lock_budget_s);
    }
    warnings(&mut s, &r.warnings);
    closing(&mut s);
    s
}

fn alternatives(s: &mut String, t: &crate::plan::Tuning, budget_s: f64) {
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
pub fn infeasibility(i: Infeasibility) -> &'static str {
    match i {
        Infeasibility::CannotLock => {
            "no stable gains hold lock against the worst crystal pattern (or the slew limit is too tight)"
        }
        Infeasibility::TrimOutOfRange => {
            "the PI law would need rate trims beyond law.trim_limit_ppm"
        }
        Infeasibility::BudgetTooShort => {
            "even the fastest stable, locking gains take longer than the budget"
        }
        Infeasibility::MarginTooSmall => {
            "gains that meet the budget exist, but none with gain margin 2 and one update of delay margin"
        }
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

/// The report of `tune`.
#[must_use]
pub fn tune(r: &TuneResult) -> String {
    let sc = &r.scenario;
    let t = &r.tuning;
    let mut s = String::new();
    header(&mut s, "tune", sc);
    let _ = writeln!(s);
    match (&t.recommended, &r.prediction) {
        (Some(_), Some(p)) => {
            let _ = writeln!(
                s,
                "VERDICT: PASS  gains found that lock within the {} budget with margins",
                seconds(sc.lock_budget_s)
            );
            heading(&mut s, "Gains to flash");
            row(
                &mut s,
                "kp",
                &format!("{:.6}", p.kp),
                &format!("Q16.16 raw {}", p.constants.kp_q16),
            );
            row(
                &mut s,
                "ki",
                &format!("{:.6}", p.ki),
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
            match &r.written {
                Some(path) => row(
                    &mut s,
                    "firmware constants",
                    &path.display().to_string(),
                    "include! it; CONFIG is checked at compile time",
                ),
                None => row(
                    &mut s,
                    "firmware constants",
                    "not written",
                    "pass --out FILE to write them",
                ),
            }
            heading(&mut s, "Margins");
            row(
                &mut s,
                "gain margin",
                &ratio(p.stability.gain_margin),
                "at the gains as flashed",
            );
            if let Some(lock_s) = p.lock_s {
                row(
                    &mut s,
                    "budget left, predicted",
                    &seconds(sc.lock_budget_s - lock_s),
                    &format!("predicted lock time {}", seconds(lock_s)),
                );
            }
        }
        _ => {
            let _ = writeln!(s, "VERDICT: FAIL");
            let why = t
                .infeasibility
                .map_or("no gains meet the budget", infeasibility);
            let _ = writeln!(s, "  - {why}");
            if r.written.is_none() {
                let _ = writeln!(s, "  - no firmware constants written");
            }
        }
    }
    heading(&mut s, "Figures");
    row(&mut s, "network", &sc.network.describe(), "");
    row(
        &mut s,
        "spectrum",
        &format!(
            "λslow {:.6}, λmax {:.6}",
            r.shape.spectrum.lambda_slow, r.shape.spectrum.lambda_max
        ),
        r.shape.source.keyword(),
    );
    if let Some((lo, hi)) = t.kp_range {
        row(
            &mut s,
            "kp meeting the budget",
            &format!("{lo:.6} to {hi:.6}"),
            "",
        );
    }
    if let Some((lo, hi)) = t.ki_range {
        row(
            &mut s,
            "ki meeting the budget",
            &format!("{lo:.6} to {hi:.6}"),
            "",
        );
    }
    if let Some(c) = &t.recommended {
        choice_rows(&mut s, "recommended (unrounded)", c);
    }
    if let Some(c) = &t.fastest {
        choice_rows(&mut s, "fastest stable, locking", c);
    }
    alternatives(&mut s, t, sc.lock_budget_s);
    warnings(&mut s, &[]);
    closing(&mut s);
    s
}

/// The report of `spectrum`.
#[must_use]
pub fn spectrum(r: &SpectrumResult) -> String {
    let sc = &r.scenario;
    let sp = &r.shape.spectrum;
    let mut s = String::new();
    header(&mut s, "spectrum", sc);
    heading(&mut s, "Summary");
    row(&mut s, "network", &sc.network.describe(), "");
    row(
        &mut s,
        "source",
        &r.shape.source.keyword().replace('_', " "),
        "",
    );
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
    heading(&mut s, "Eigenvalues (ascending)");
    let ev = &r.modes.eigenvalues;
    let shown: Vec<String> = if ev.len() <= 24 {
        ev.iter().map(|v| format!("{v:.6}")).collect()
    } else {
        let mut v: Vec<String> = ev.iter().take(12).map(|v| format!("{v:.6}")).collect();
        v.push(format!("… ({} more) …", ev.len() - 24));
        v.extend(ev.iter().skip(ev.len() - 12).map(|v| format!("{v:.6}")));
        v
    };
    for chunk in shown.chunks(6) {
        let _ = writeln!(s, "  {}", chunk.join("  "));
    }
    heading(
        &mut s,
        "Slowest mode along the network (largest magnitude 1)",
    );
    let shape = &r.modes.slow_mode;
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

/// A text bar centred on zero, 20 characters each way.
fn bar(v: f64) -> String {
    let n = (v.abs().min(1.0) * 20.0).round() as usize;
    if v < 0.0 {
        format!("{:>20}|", "#".repeat(n))
    } else {
        format!("{:>20}|{}", "", "#".repeat(n))
    }
}

/// Append the list of written plots to a report.
pub fn plots_written(s: &mut String, written: &[PathBuf]) {
    if written.is_empty() {
        return;
    }
    let _ = writeln!(s);
    let _ = writeln!(s, "Plots written");
    for p in written {
        let _ = writeln!(s, "  {}", p.display());
    }
}
