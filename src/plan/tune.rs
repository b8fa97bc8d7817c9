//! Gain tuner: which gains meet a lock-time budget, and what to change when none do.

use super::error::{PlanError, non_negative, positive};
use super::lock::{Locking, lock_worst_case};
use super::model::Model;
use super::settle::{Settling, Spread, settle, settle_with};
use super::spectrum::Spectrum;
use super::stability::{margin_of, stable_with_delay};
use super::topology::Topology;

/// Default required gain margin: 2 (6 dB), common practice, no source. A scenario states
/// its own in [`Margins::gain`].
pub const MIN_GAIN_MARGIN: f64 = 2.0;

/// Default required delay margin, whole update intervals beyond the model's own delay.
pub const MIN_DELAY_MARGIN_UPDATES: u32 = 1;

/// Number of scanned values per swept gain (log-spaced over four decades below the
/// stability limit).
pub const KP_SCAN_POINTS: usize = 96;

/// `ki/kp` ratios the tuner tries when it chooses both gains of the PI law.
pub const PI_RATIOS: [f64; 6] = [0.02, 0.05, 0.1, 0.2, 0.3, 0.5];

/// Stated requirements on the margins of a pair of gains.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Margins {
    /// Factor both gains must be able to grow by before some mode stops decaying
    /// (`≥ 1`; 1 asks for no margin). See [`crate::plan::Stability::gain_margin`].
    pub gain: f64,
    /// Extra link delay, whole update intervals beyond the model's own, at which the
    /// gains must still be stable (`0..=MAX_DELAY_UPDATES`).
    pub delay_updates: u32,
}

impl Default for Margins {
    /// [`MIN_GAIN_MARGIN`] and [`MIN_DELAY_MARGIN_UPDATES`].
    fn default() -> Margins {
        Margins {
            gain: MIN_GAIN_MARGIN,
            delay_updates: MIN_DELAY_MARGIN_UPDATES,
        }
    }
}

impl Margins {
    /// Whether a gain margin of `gain` and a delay margin of `delay_updates` meet these
    /// requirements.
    pub fn met_by(&self, gain: f64, delay_updates: u32) -> bool {
        gain >= self.gain && delay_updates >= self.delay_updates
    }
}

/// What the deployment must achieve.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Budget {
    /// Longest acceptable time from power-up to lock, seconds (`> 0`).
    pub lock_time_budget_s: f64,
    /// Initial spread and lock tolerance, seconds of phase.
    pub spread: Spread,
    /// Crystal tolerance, ± ppm (`≥ 0`).
    pub crystal_tolerance_ppm: f64,
    /// Required margins of the gains.
    pub margins: Margins,
}

/// Which gains the tuner chooses; a gain not chosen stays as given.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Search {
    /// Choose `kp`; `ki` stays fixed at this value (0: the P law).
    Kp {
        /// The fixed integral gain per update.
        ki: f64,
    },
    /// Choose `ki` in `(0, kp)`; `kp` stays fixed.
    Ki {
        /// The fixed proportional gain per update.
        kp: f64,
    },
    /// Choose both (PI law): `kp` swept for each ratio of [`PI_RATIOS`].
    Both,
}

impl Search {
    /// Whether the searched law has its integral path on.
    pub fn is_pi(&self) -> bool {
        match *self {
            Search::Kp { ki } => ki > 0.0,
            Search::Ki { .. } | Search::Both => true,
        }
    }
}

/// The predicted lock time of one pair of gains, seconds: the worst-case settling bound
/// (the dominant-mode estimate where no bound was computed, never below it) stretched by
/// the loss slow-down of the mean dynamics (gains × p; Kar & Moura, IEEE TSP 56 (2008)).
///
/// This is the one definition the tuner, `check`, `tune` and `simulate` compare with the
/// budget.
pub fn predicted_lock_s(settling: &Settling) -> f64 {
    let slowdown = if settling.asymptotic_updates == 0 {
        1.0
    } else {
        (settling.with_loss_updates as f64 / settling.asymptotic_updates as f64).max(1.0)
    };
    settling
        .bound_s
        .unwrap_or(settling.asymptotic_s)
        .max(settling.asymptotic_s)
        * slowdown
}

/// One pair of gains with its predicted behaviour.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GainChoice {
    /// Proportional gain per update (a whole number of Q16.16 steps: as flashed).
    pub kp: f64,
    /// Integral gain per update (0 for the P-only law; as flashed).
    pub ki: f64,
    /// Predicted lock time, seconds (see [`predicted_lock_s`], or the estimate handed to
    /// [`tune_with`]).
    pub lock_s: f64,
    /// Full settling prediction at these gains.
    pub settling: Settling,
    /// Factor both gains can grow by before instability.
    pub gain_margin: f64,
    /// Worst-case lock verdict (`None` when the topology's flow factor is unknown).
    pub locking: Option<Locking>,
    /// Extra delay, whole updates beyond the model's, that still keeps these gains stable
    /// (capped by [`crate::plan::MAX_DELAY_UPDATES`] in all).
    pub delay_margin_updates: u32,
    /// Locks and fits the budget.
    pub meets_budget: bool,
    /// Meets the required [`Margins`].
    pub meets_margins: bool,
}

/// Why no gains meet the budget with the required margins.
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

/// Smallest and largest scanned value of each swept quantity among the gains that meet
/// a condition (the scan points, and the refined recommended and fastest gains between
/// them). A quantity the search does not sweep is `None`.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct GainRanges {
    /// Proportional gain per update.
    pub kp: Option<(f64, f64)>,
    /// Integral gain per update (only when `ki` is swept on its own, [`Search::Ki`]).
    pub ki: Option<(f64, f64)>,
    /// The ratio `ki/kp` (only when both are chosen, [`Search::Both`]: a band of ratios).
    pub ki_over_kp: Option<(f64, f64)>,
}

/// The tuner's answer.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tuning {
    /// Which gains were chosen.
    pub search: Search,
    /// A recommendation exists: some gains lock, fit the budget and meet the margins.
    pub feasible: bool,
    /// Scanned gains that lock and fit the budget, margins aside.
    pub meeting_budget: GainRanges,
    /// Scanned gains that lock, fit the budget and meet the margins.
    pub meeting_budget_and_margins: GainRanges,
    /// Fastest gains that fit the budget with the margins.
    pub recommended: Option<GainChoice>,
    /// What to show when nothing is recommended: among the gains that fit the budget,
    /// the one with the largest gain margin; else the fastest stable, locking gains.
    pub closest: Option<GainChoice>,
    /// Fastest stable gains that lock, margins or budget aside.
    pub fastest: Option<GainChoice>,
    /// Why there is no recommendation.
    pub infeasibility: Option<Infeasibility>,
    /// What a different design would achieve.
    pub alternatives: Alternatives,
}

impl Tuning {
    /// The gains to use: the recommendation, else [`Self::closest`].
    pub fn pick(&self) -> Option<GainChoice> {
        self.recommended.or(self.closest)
    }
}

#[derive(Clone, Copy)]
struct Candidate {
    kp: f64,
    ki: f64,
    lock_s: f64,
    margin: f64,
    locks: bool,
    margins_ok: bool,
}

impl Candidate {
    fn meets_budget(&self, budget: &Budget) -> bool {
        self.locks && self.lock_s <= budget.lock_time_budget_s
    }
}

/// A gain rounded to a whole number of Q16.16 steps, as the node runs it.
fn flashable(g: f64) -> f64 {
    libm::round(g * 65_536.0) / 65_536.0
}

/// Largest `x` in `(lo, hi]` with `stable(x)`, assuming the stable set is `(lo, limit)`
/// (bisection to 1e-10 relative); `lo` if none.
fn largest_stable(lo: f64, hi: f64, stable: impl Fn(f64) -> bool) -> f64 {
    let mut a = lo;
    let mut b = hi;
    while stable(b) && b < 1e6 {
        a = b;
        b *= 2.0;
    }
    for _ in 0..100 {
        let mid = 0.5 * (a + b);
        if stable(mid) {
            a = mid;
        } else {
            b = mid;
        }
        if b - a <= 1e-10 * b {
            break;
        }
    }
    a
}

/// One gain pair as the scan sees it (rounded to whole Q16.16 steps), or `None` when it
/// is invalid or unstable.
fn evaluate(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    lock_time: &mut dyn FnMut(&Model, &Settling) -> f64,
    kp: f64,
    ki: f64,
) -> Option<Candidate> {
    let (kp, ki) = (flashable(kp), flashable(ki));
    if !(kp > 0.0 && ki >= 0.0 && ki < kp) {
        return None;
    }
    let model = Model {
        kp,
        ki,
        ..*template
    };
    // The quick screen: the bound's recurrences run only for the gains reported.
    let settling = settle_with(&model, spectrum, &budget.spread, false).ok()?;
    let locks = match flow_factor {
        Some(f) => lock_worst_case(&model, spectrum, f, budget.crystal_tolerance_ppm)
            .is_ok_and(|l| l.locks),
        None => true,
    };
    let margin = margin_of(&model, spectrum);
    let delay_ok = stable_with_delay(
        &model,
        spectrum,
        template
            .delay_updates
            .saturating_add(budget.margins.delay_updates),
    );
    Some(Candidate {
        kp,
        ki,
        lock_s: lock_time(&model, &settling),
        margin,
        locks,
        margins_ok: delay_ok && margin >= budget.margins.gain,
    })
}

/// Points tried between a scan point's two neighbours when refining it: the scan points
/// are 10⁴ᐟ⁹⁵ ≈ 1.10 apart, so the refined gain lies within 0.5 % of the best gain of
/// the tuner's own objective on that stretch.
pub const REFINE_POINTS: usize = 41;

/// The best of `REFINE_POINTS` gains log-spaced from `c`'s scan neighbour below to its
/// neighbour above (the swept gain only; for [`Search::Both`] the ratio `ki/kp` is
/// kept), among those `accept` takes; `c` itself when none is faster.
#[allow(clippy::too_many_arguments)]
fn refine(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    search: Search,
    lock_time: &mut dyn FnMut(&Model, &Settling) -> f64,
    c: Candidate,
    accept: impl Fn(&Candidate) -> bool,
) -> Candidate {
    let step = libm::pow(10.0, 4.0 / (KP_SCAN_POINTS - 1) as f64);
    let mut best = c;
    for i in 0..REFINE_POINTS {
        let f = libm::pow(step, 2.0 * i as f64 / (REFINE_POINTS - 1) as f64 - 1.0);
        let (kp, ki) = match search {
            Search::Kp { ki } => (c.kp * f, ki),
            Search::Ki { kp } => (kp, c.ki * f),
            Search::Both => (c.kp * f, c.ki * f),
        };
        if let Some(t) = evaluate(template, spectrum, flow_factor, budget, lock_time, kp, ki) {
            if accept(&t) && t.lock_s < best.lock_s {
                best = t;
            }
        }
    }
    best
}

/// Visit every scanned gain pair (no storage, so the scan also runs on a small stack).
fn scan(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    search: Search,
    lock_time: &mut dyn FnMut(&Model, &Settling) -> f64,
    mut visit: impl FnMut(Candidate),
) {
    let mut try_pair = |kp: f64, ki: f64| {
        if let Some(c) = evaluate(template, spectrum, flow_factor, budget, lock_time, kp, ki) {
            visit(c);
        }
    };
    let stable_at = |kp: f64, ki: f64| {
        let m = Model {
            kp,
            ki,
            ..*template
        };
        stable_with_delay(&m, spectrum, template.delay_updates)
    };
    let sweep = |limit: f64, i: usize| {
        let exponent = -4.0 * (1.0 - i as f64 / (KP_SCAN_POINTS - 1) as f64);
        0.999 * limit * libm::pow(10.0, exponent)
    };
    match search {
        Search::Both => {
            for &ratio in &PI_RATIOS {
                let unit = Model {
                    kp: 1.0,
                    ki: ratio,
                    ..*template
                };
                let kp_limit = margin_of(&unit, spectrum);
                for i in 0..KP_SCAN_POINTS {
                    let kp = sweep(kp_limit, i);
                    try_pair(kp, ratio * kp);
                }
            }
        }
        Search::Kp { ki } => {
            let start = if ki > 0.0 { ki } else { 1e-9 };
            let kp_limit = largest_stable(start, start * 2.0, |kp| stable_at(kp, ki));
            for i in 0..KP_SCAN_POINTS {
                let kp = sweep(kp_limit, i);
                if kp > ki {
                    try_pair(kp, ki);
                }
            }
        }
        Search::Ki { kp } => {
            let ki_limit = if stable_at(kp, kp * 1e-9) {
                largest_stable(kp * 1e-9, kp * 1e-3, |ki| ki < kp && stable_at(kp, ki))
            } else {
                0.0
            };
            for i in 0..KP_SCAN_POINTS {
                try_pair(kp, sweep(ki_limit, i));
            }
        }
    }
}

fn widen(range: Option<(f64, f64)>, x: f64) -> Option<(f64, f64)> {
    Some(match range {
        Some((lo, hi)) => (lo.min(x), hi.max(x)),
        None => (x, x),
    })
}

impl GainRanges {
    fn widen(&mut self, c: &Candidate, search: Search) {
        match search {
            Search::Kp { .. } => self.kp = widen(self.kp, c.kp),
            Search::Ki { .. } => self.ki = widen(self.ki, c.ki),
            Search::Both => {
                self.kp = widen(self.kp, c.kp);
                self.ki_over_kp = widen(self.ki_over_kp, c.ki / c.kp);
            }
        }
    }
}

/// Running summary of a scan.
#[derive(Default)]
struct ScanSummary {
    fastest: Option<Candidate>,
    best: Option<Candidate>,
    widest_margin_in_budget: Option<Candidate>,
    meeting_budget: GainRanges,
    meeting_both: GainRanges,
}

fn summarise(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    search: Search,
    lock_time: &mut dyn FnMut(&Model, &Settling) -> f64,
) -> ScanSummary {
    let mut sum = ScanSummary::default();
    scan(
        template,
        spectrum,
        flow_factor,
        budget,
        search,
        lock_time,
        |c| {
            if !c.locks {
                return;
            }
            if c.meets_budget(budget) {
                sum.meeting_budget.widen(&c, search);
                if sum
                    .widest_margin_in_budget
                    .as_ref()
                    .is_none_or(|b| c.margin > b.margin)
                {
                    sum.widest_margin_in_budget = Some(c);
                }
                if c.margins_ok {
                    sum.meeting_both.widen(&c, search);
                    if sum.best.as_ref().is_none_or(|b| c.lock_s < b.lock_s) {
                        sum.best = Some(c);
                    }
                }
            }
            if sum.fastest.as_ref().is_none_or(|b| c.lock_s < b.lock_s) {
                sum.fastest = Some(c);
            }
        },
    );
    sum
}

/// The full prediction of one pair of gains, as [`tune`] reports it.
///
/// Returns `None` when the gains are unstable or invalid.
pub fn gain_choice(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    kp: f64,
    ki: f64,
    lock_time: &mut dyn FnMut(&Model, &Settling) -> f64,
) -> Option<GainChoice> {
    let model = Model {
        kp,
        ki,
        ..*template
    };
    let settling = settle(&model, spectrum, &budget.spread).ok()?;
    let locking = flow_factor
        .and_then(|f| lock_worst_case(&model, spectrum, f, budget.crystal_tolerance_ppm).ok());
    let delay_margin_updates = delay_margin(&model, spectrum);
    let gain_margin = margin_of(&model, spectrum);
    let lock_s = lock_time(&model, &settling);
    let locks = locking.is_none_or(|l| l.locks);
    Some(GainChoice {
        kp,
        ki,
        lock_s,
        settling,
        gain_margin,
        locking,
        delay_margin_updates,
        meets_budget: locks && lock_s <= budget.lock_time_budget_s,
        meets_margins: budget.margins.met_by(gain_margin, delay_margin_updates),
    })
}

/// Extra delay, whole updates beyond `model.delay_updates`, at which `model` is still
/// stable (0 when one more update would not be, or when it is not stable at all; the
/// total is capped at [`crate::plan::MAX_DELAY_UPDATES`]).
pub fn delay_margin(model: &Model, spectrum: &Spectrum) -> u32 {
    let base = model.delay_updates;
    let mut extra = 0;
    while base.saturating_add(extra) < super::model::MAX_DELAY_UPDATES
        && stable_with_delay(
            model,
            spectrum,
            base.saturating_add(extra).saturating_add(1),
        )
    {
        extra += 1;
    }
    extra
}

fn check_budget(budget: &Budget) -> Result<(), PlanError> {
    positive(budget.lock_time_budget_s, "lock_time_budget_s")?;
    non_negative(budget.crystal_tolerance_ppm, "crystal_tolerance_ppm")?;
    positive(budget.spread.initial_spread_s, "initial_spread_s")?;
    positive(budget.spread.tolerance_s, "tolerance_s")?;
    if budget.spread.tolerance_s >= budget.spread.initial_spread_s {
        return Err(PlanError::ToleranceNotBelowSpread);
    }
    if !(budget.margins.gain >= 1.0 && budget.margins.gain.is_finite()) {
        return Err(PlanError::InvalidParameter {
            name: "margins.gain",
            valid: ">= 1",
        });
    }
    if budget.margins.delay_updates > super::model::MAX_DELAY_UPDATES {
        return Err(PlanError::DelayTooLong {
            max: super::model::MAX_DELAY_UPDATES,
            got: budget.margins.delay_updates,
        });
    }
    Ok(())
}

/// Tune the gains `search` names for `budget`, with the one definition of the predicted
/// lock time, [`predicted_lock_s`]. See [`tune_with`].
///
/// # Errors
/// As [`tune_with`].
pub fn tune(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    search: Search,
) -> Result<Tuning, PlanError> {
    tune_with(
        template,
        spectrum,
        flow_factor,
        budget,
        search,
        &mut |_, s| predicted_lock_s(s),
    )
}

/// Tune the gains `search` names (the others stay as given; the template's own `kp`
/// and `ki` are ignored) on `spectrum` for `budget`, comparing the budget with
/// `lock_time(model, settling)` seconds.
///
/// Sweeps the chosen gain over four decades below its stability limit
/// ([`KP_SCAN_POINTS`] log-spaced values; for [`Search::Both`], `kp` for each ratio of
/// [`PI_RATIOS`]), every value rounded to a whole Q16.16 step so that the answer is
/// exactly what the node runs. A gain pair *meets the budget* when it is stable, locks
/// the worst crystal pattern (when `flow_factor` is given; see
/// [`crate::plan::Topology::worst_flow_factor`]) and its lock time fits the budget; it
/// *meets the margins* when its gain margin is at least [`Margins::gain`] and it stays
/// stable with [`Margins::delay_updates`] more updates of delay. The recommendation is
/// the fastest pair that meets both.
///
/// # Errors
/// Invalid budget values ([`PlanError::InvalidParameter`],
/// [`PlanError::ToleranceNotBelowSpread`], [`PlanError::DelayTooLong`]) and spectrum or
/// model errors.
pub fn tune_with(
    template: &Model,
    spectrum: &Spectrum,
    flow_factor: Option<f64>,
    budget: &Budget,
    search: Search,
    lock_time: &mut dyn FnMut(&Model, &Settling) -> f64,
) -> Result<Tuning, PlanError> {
    check_budget(budget)?;
    spectrum.validate()?;
    if let Some(f) = flow_factor {
        non_negative(f, "flow_factor")?;
    }
    // Validate the rest of the template with a placeholder gain pair.
    let (probe_kp, probe_ki) = match search {
        Search::Kp { ki } => (ki + 1.0, ki),
        Search::Ki { kp } => (kp, 0.0),
        Search::Both => (1.0, 0.1),
    };
    Model {
        kp: probe_kp,
        ki: probe_ki,
        ..*template
    }
    .validate()?;

    let ScanSummary {
        fastest,
        best,
        widest_margin_in_budget,
        mut meeting_budget,
        mut meeting_both,
    } = summarise(template, spectrum, flow_factor, budget, search, lock_time);
    // Between scan points: the fastest gains that lock, and the fastest that also fit the
    // budget and the margins.
    let mut refined = |c: Option<Candidate>, accept: &dyn Fn(&Candidate) -> bool| {
        c.map(|c| {
            refine(
                template,
                spectrum,
                flow_factor,
                budget,
                search,
                lock_time,
                c,
                accept,
            )
        })
    };
    let fastest = refined(fastest, &|t| t.locks);
    let best = refined(best, &|t| t.meets_budget(budget) && t.margins_ok);
    // The refined gains belong to the ranges they meet.
    for c in [fastest, best].into_iter().flatten() {
        if c.meets_budget(budget) {
            meeting_budget.widen(&c, search);
            if c.margins_ok {
                meeting_both.widen(&c, search);
            }
        }
    }

    let pi_trims_fit =
        !search.is_pi() || budget.crystal_tolerance_ppm * 2.0 <= template.trim_limit_ppm;
    let infeasibility = if best.is_some() {
        None
    } else if fastest.is_none() {
        Some(if search.is_pi() && !pi_trims_fit {
            Infeasibility::TrimOutOfRange
        } else {
            Infeasibility::CannotLock
        })
    } else if widest_margin_in_budget.is_none() {
        Some(Infeasibility::BudgetTooShort)
    } else {
        Some(Infeasibility::MarginTooSmall)
    };
    let mut report = |c: Option<Candidate>| {
        c.and_then(|c| {
            gain_choice(
                template,
                spectrum,
                flow_factor,
                budget,
                c.kp,
                c.ki,
                lock_time,
            )
        })
    };
    let recommended = report(best);
    let fastest_choice = report(fastest);
    let closest = if recommended.is_some() {
        None
    } else {
        report(widest_margin_in_budget.or(fastest))
    };
    let update_rate_factor = match fastest {
        Some(c) => (c.lock_s / budget.lock_time_budget_s).max(1.0),
        None => f64::INFINITY,
    };
    Ok(Tuning {
        search,
        feasible: recommended.is_some(),
        meeting_budget,
        meeting_budget_and_margins: meeting_both,
        recommended,
        closest,
        fastest: fastest_choice,
        infeasibility,
        alternatives: Alternatives {
            update_rate_factor,
            middle_reference_lock_s: None,
            split_in_two_lock_s: None,
        },
    })
}

/// [`tune_with`] for a closed-form topology, adding for chains what a reference node in
/// the middle or splitting the chain in two would achieve. The flow factor comes from
/// [`Topology::worst_flow_factor`] (grid and torus: no lock check; use the numeric
/// graph path for it).
///
/// # Errors
/// As [`tune_with`], plus the topology's validate error.
pub fn tune_topology(
    template: &Model,
    topology: &Topology,
    budget: &Budget,
    search: Search,
    lock_time: &mut dyn FnMut(&Model, &Settling) -> f64,
) -> Result<Tuning, PlanError> {
    let spectrum = topology.spectrum()?;
    let flow = topology.worst_flow_factor().ok();
    let mut tuning = tune_with(template, &spectrum, flow, budget, search, lock_time)?;
    if let Topology::Chain { nodes } = *topology {
        let others = nodes - 1;
        let pinned_half = Topology::PinnedChain {
            nodes: others - others / 2,
        };
        let split = Topology::Chain {
            nodes: nodes.div_ceil(2),
        };
        let mut fastest_on = |t: Topology| {
            let spec = t.spectrum().ok()?;
            summarise(
                template,
                &spec,
                t.worst_flow_factor().ok(),
                budget,
                search,
                lock_time,
            )
            .fastest
            .map(|c| c.lock_s)
        };
        tuning.alternatives.middle_reference_lock_s = fastest_on(pinned_half);
        tuning.alternatives.split_in_two_lock_s = if nodes >= 4 { fastest_on(split) } else { None };
    }
    Ok(tuning)
}
