//! Gain tuner: which gains meet a lock-time budget, and what to change when none do.

use super::error::{PlanError, non_negative, positive};
use super::lock::{Locking, lock_worst_case};
use super::model::Model;
use super::settle::{Settling, Spread, settle, settle_with};
use super::spectrum::Spectrum;
use super::stability::{margin_of, stable_with_delay};
use super::topology::Topology;

/// Smallest gain margin the tuner accepts for a recommendation: 2 (6 dB), common
/// practice, no source.
pub const MIN_GAIN_MARGIN: f64 = 2.0;

/// Number of `kp` values scanned per `ki/kp` ratio (log-spaced over four decades below
/// the stability limit).
pub const KP_SCAN_POINTS: usize = 96;

/// `ki/kp` ratios the tuner tries for the PI law.
pub const PI_RATIOS: [f64; 6] = [0.02, 0.05, 0.1, 0.2, 0.3, 0.5];

/// What the deployment must achieve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Budget {
    /// Longest acceptable time from power-up to lock, seconds (`> 0`).
    pub lock_time_budget_s: f64,
    /// Initial spread and lock tolerance, seconds of phase.
    pub spread: Spread,
    /// Crystal tolerance, ± ppm (`≥ 0`).
    pub crystal_tolerance_ppm: f64,
}

/// One pair of gains with its predicted behaviour.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GainChoice {
    /// Proportional gain per update.
    pub kp: f64,
    /// Integral gain per update (0 for the P-only law).
    pub ki: f64,
    /// Predicted lock time the tuner compares with the budget, seconds: the worst-case
    /// settling bound (asymptotic estimate where no bound is available) times the loss
    /// slowdown of Kar & Moura (2008).
    pub lock_s: f64,
    /// Full settling prediction at these gains.
    pub settling: Settling,
    /// Factor both gains can grow by before instability (≥ [`MIN_GAIN_MARGIN`] for a
    /// recommendation).
    pub gain_margin: f64,
    /// Worst-case lock verdict (`None` when the topology's flow factor is unknown).
    pub locking: Option<Locking>,
    /// Extra delay, in updates beyond the model's, that still keeps these gains stable
    /// (0 if even one more update of delay would not, capped by
    /// [`crate::plan::MAX_DELAY_UPDATES`]).
    pub delay_margin_updates: u32,
}

/// Why no gains meet the budget.
#[non_exhaustive]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Infeasibility {
    /// No stable gain holds lock against the worst crystal pattern (P-only law: the
    /// detuning needs more `kp` than stability allows, or the slew limit is too tight).
    CannotLock,
    /// The PI law would need trims beyond `trim_limit_ppm`.
    TrimOutOfRange,
    /// Even the fastest stable, locking gains take longer than the budget.
    BudgetTooShort,
    /// Some gains meet the budget, but none with the required gain and delay margins.
    MarginTooSmall,
}

/// What other designs would achieve (each with the fastest gains it allows).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Alternatives {
    /// Factor by which the update rate must grow for the fastest gains to meet the
    /// budget (lock time scales with the update period at fixed per-update gains; 1 if
    /// already met; infinite if nothing locks).
    pub update_rate_factor: f64,
    /// Chain only: fastest lock time, seconds, with the middle node disciplined by a
    /// reference (two pinned chains of half the length).
    pub middle_reference_lock_s: Option<f64>,
    /// Chain only: fastest lock time, seconds, of each half if the chain is split in two.
    pub split_in_two_lock_s: Option<f64>,
}

/// The tuner's answer.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tuning {
    /// A recommendation exists.
    pub feasible: bool,
    /// Smallest and largest scanned `kp` that meet the budget with margins.
    pub kp_range: Option<(f64, f64)>,
    /// Smallest and largest scanned `ki` that meet the budget with margins.
    pub ki_range: Option<(f64, f64)>,
    /// Fastest gains that meet the budget with margins.
    pub recommended: Option<GainChoice>,
    /// Fastest stable gains that lock, margins or budget aside.
    pub fastest: Option<GainChoice>,
    /// Why there is no recommendation.
    pub infeasibility: Option<Infeasibility>,
    /// What a different design would achieve.
    pub alternatives: Alternatives,
}

#[derive(Clone, Copy)]
struct Candidate {
    kp: f64,
    ki: f64,
    lock_s: f64,
    margin: f64,
    locks: bool,
    delay_ok: bool,
}

fn lock_time(settling: &Settling, loss_slowdown: f64) -> f64 {
    settling
        .bound_s
        .unwrap_or(settling.asymptotic_s)
        .max(settling.asymptotic_s)
        * loss_slowdown
}

fn slowdown(settling: &Settling) -> f64 {
    if settling.asymptotic_updates == 0 {
        1.0
    } else {
        (settling.with_loss_updates as f64 / settling.asymptotic_updates as f64).max(1.0)
    }
}

/// Visit every scanned gain pair (no storage, so the scan also runs on a small stack).
fn scan(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    mut visit: impl FnMut(Candidate),
) {
    let ratios: &[f64] = if template.is_pi() { &PI_RATIOS } else { &[0.0] };
    for &ratio in ratios {
        let unit = Model {
            kp: 1.0,
            ki: ratio,
            ..*template
        };
        let kp_limit = margin_of(&unit, spectrum);
        for i in 0..KP_SCAN_POINTS {
            let exponent = -4.0 * (1.0 - i as f64 / (KP_SCAN_POINTS - 1) as f64);
            let kp = 0.999 * kp_limit * libm::pow(10.0, exponent);
            let model = Model {
                kp,
                ki: ratio * kp,
                ..*template
            };
            let Ok(settling) = settle_with(&model, spectrum, &budget.spread, false) else {
                continue;
            };
            let locks = match flow_factor {
                Some(f) => lock_worst_case(&model, spectrum, f, budget.crystal_tolerance_ppm)
                    .is_ok_and(|l| l.locks),
                None => true,
            };
            let delay_ok =
                stable_with_delay(&model, spectrum, template.delay_updates.saturating_add(1));
            visit(Candidate {
                kp,
                ki: ratio * kp,
                lock_s: lock_time(&settling, slowdown(&settling)),
                margin: kp_limit / kp,
                locks,
                delay_ok,
            });
        }
    }
}

/// Running summary of a scan.
#[derive(Default)]
struct Summary {
    fastest: Option<Candidate>,
    best: Option<Candidate>,
    kp_range: Option<(f64, f64)>,
    ki_range: Option<(f64, f64)>,
}

fn widen(range: Option<(f64, f64)>, x: f64) -> Option<(f64, f64)> {
    Some(match range {
        Some((lo, hi)) => (lo.min(x), hi.max(x)),
        None => (x, x),
    })
}

fn summarise(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
) -> Summary {
    let mut sum = Summary::default();
    scan(template, spectrum, flow_factor, budget, |c| {
        if !c.locks {
            return;
        }
        let feasible =
            c.delay_ok && c.margin >= MIN_GAIN_MARGIN && c.lock_s <= budget.lock_time_budget_s;
        if feasible {
            sum.kp_range = widen(sum.kp_range, c.kp);
            sum.ki_range = widen(sum.ki_range, c.ki);
            if sum.best.as_ref().is_none_or(|b| c.lock_s < b.lock_s) {
                sum.best = Some(c);
            }
        }
        if sum.fastest.as_ref().is_none_or(|b| c.lock_s < b.lock_s) {
            sum.fastest = Some(c);
        }
    });
    sum
}

fn choice(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    kp: f64,
    ki: f64,
) -> Option<GainChoice> {
    let model = Model {
        kp,
        ki,
        ..*template
    };
    let settling = settle(&model, spectrum, &budget.spread).ok()?;
    let locking = flow_factor
        .and_then(|f| lock_worst_case(&model, spectrum, f, budget.crystal_tolerance_ppm).ok());
    let mut extra = 0;
    let base = template.delay_updates;
    while base.saturating_add(extra) < super::model::MAX_DELAY_UPDATES
        && stable_with_delay(
            &model,
            spectrum,
            base.saturating_add(extra).saturating_add(1),
        )
    {
        extra += 1;
    }
    Some(GainChoice {
        kp,
        ki,
        lock_s: lock_time(&settling, slowdown(&settling)),
        settling,
        gain_margin: margin_of(&model, spectrum),
        locking,
        delay_margin_updates: extra,
    })
}

fn fastest_lock_s(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
) -> Option<f64> {
    summarise(template, spectrum, flow_factor, budget)
        .fastest
        .map(|c| c.lock_s)
}

/// Tune the gains of `template` (its `kp` is ignored; `ki > 0` asks for the PI law and
/// its value is ignored too) on `spectrum` for `budget`.
///
/// Scans `kp` over four decades below the stability limit, for each `ki/kp` ratio of
/// [`PI_RATIOS`] (PI) or `ki = 0` (P). A gain pair is *feasible* when it is stable with
/// gain margin ≥ [`MIN_GAIN_MARGIN`], stays stable with one more update of delay, locks
/// the worst crystal pattern (when `flow_factor` is given; see
/// [`crate::plan::Topology::worst_flow_factor`]) and its predicted lock time (see
/// [`GainChoice::lock_s`]; during the scan the PI/delayed bound uses the normal-matrix
/// form `⌈ln(tol/(C·e0))/ln ρ⌉`, the reported choices carry the full bound) fits the
/// budget. The recommendation is the fastest feasible pair.
///
/// # Errors
/// Invalid budget values ([`PlanError::InvalidParameter`], [`PlanError::ToleranceNotBelowSpread`])
/// and spectrum errors.
pub fn tune(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
) -> Result<Tuning, PlanError> {
    positive(budget.lock_time_budget_s, "lock_time_budget_s")?;
    non_negative(budget.crystal_tolerance_ppm, "crystal_tolerance_ppm")?;
    positive(budget.spread.initial_spread_s, "initial_spread_s")?;
    positive(budget.spread.tolerance_s, "tolerance_s")?;
    if budget.spread.tolerance_s >= budget.spread.initial_spread_s {
        return Err(PlanError::ToleranceNotBelowSpread);
    }
    spectrum.validate()?;
    if let Some(f) = flow_factor {
        non_negative(f, "flow_factor")?;
    }
    // Validate the rest of the template with a placeholder gain pair.
    let probe_ki = if template.is_pi() { 0.1 } else { 0.0 };
    Model {
        kp: 1.0,
        ki: probe_ki,
        ..*template
    }
    .validate()?;

    let Summary {
        fastest,
        best,
        kp_range,
        ki_range,
    } = summarise(template, spectrum, flow_factor, budget);
    let fastest = fastest.as_ref();
    let best = best.as_ref();

    let pi_trims_fit =
        !template.is_pi() || budget.crystal_tolerance_ppm * 2.0 <= template.trim_limit_ppm;
    let infeasibility = if best.is_some() {
        None
    } else if fastest.is_none() {
        Some(if template.is_pi() && !pi_trims_fit {
            Infeasibility::TrimOutOfRange
        } else {
            Infeasibility::CannotLock
        })
    } else if fastest.is_some_and(|c| c.lock_s > budget.lock_time_budget_s) {
        Some(Infeasibility::BudgetTooShort)
    } else {
        Some(Infeasibility::MarginTooSmall)
    };
    let fastest_choice =
        fastest.and_then(|c| choice(template, spectrum, flow_factor, budget, c.kp, c.ki));
    let recommended =
        best.and_then(|c| choice(template, spectrum, flow_factor, budget, c.kp, c.ki));
    let update_rate_factor = match fastest {
        Some(c) => (c.lock_s / budget.lock_time_budget_s).max(1.0),
        None => f64::INFINITY,
    };
    Ok(Tuning {
        feasible: recommended.is_some(),
        kp_range,
        ki_range,
        recommended,
        fastest: fastest_choice,
        infeasibility,
        alternatives: Alternatives {
            update_rate_factor,
            middle_reference_lock_s: None,
            split_in_two_lock_s: None,
        },
    })
}

/// [`tune`] for a closed-form topology, adding for chains what a reference node in the
/// middle or splitting the chain in two would achieve. The flow factor comes from
/// [`Topology::worst_flow_factor`] (grid and torus: no lock check; use the numeric
/// graph path for it).
///
/// # Errors
/// As [`tune`], plus the topology's validate error.
pub fn tune_topology(
    template: &Model,
    topology: &Topology,
    budget: &Budget,
) -> Result<Tuning, PlanError> {
    let spectrum = topology.spectrum()?;
    let flow = topology.worst_flow_factor().ok();
    let mut tuning = tune(template, &spectrum, flow, budget)?;
    if let Topology::Chain { nodes } = *topology {
        let others = nodes - 1;
        let pinned_half = Topology::PinnedChain {
            nodes: others - others / 2,
        };
        let split = Topology::Chain {
            nodes: nodes.div_ceil(2),
        };
        let fastest_on = |t: Topology| {
            let spec = t.spectrum().ok()?;
            fastest_lock_s(template, &spec, t.worst_flow_factor().ok(), budget)
        };
        tuning.alternatives.middle_reference_lock_s = fastest_on(pinned_half);
        tuning.alternatives.split_in_two_lock_s = if nodes >= 4 { fastest_on(split) } else { None };
    }
    Ok(tuning)
}
