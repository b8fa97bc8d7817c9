//! The verdict: typed reasons for failing, typed warnings, and the rules that produce
//! them. Every threshold the verdict turns on lives here or in the scenario.

use super::prediction::Prediction;
use super::simulation::Simulation;
use crate::plan::Topology;
use crate::scenario::{Layout, Scenario};
use std::fmt;

/// Seconds with a unit scaled for people (`ns`, `µs`, `ms`, `s`, three decimals);
/// `never` for a non-finite value.
#[must_use]
pub fn seconds(s: f64) -> String {
    let a = s.abs();
    if !s.is_finite() {
        "never".to_owned()
    } else if a == 0.0 {
        "0 s".to_owned()
    } else if a < 1e-6 {
        format!("{:.3} ns", s * 1e9)
    } else if a < 1e-3 {
        format!("{:.3} µs", s * 1e6)
    } else if a < 1.0 {
        format!("{:.3} ms", s * 1e3)
    } else {
        format!("{s:.3} s")
    }
}

/// Which required margin a reason is about.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum MarginKind {
    /// The gain margin (`[margins] gain`, a factor).
    Gain,
    /// The delay margin (`[margins] delay_updates`, whole update intervals).
    Delay,
}

/// Why a verdict fails. Each variant has a stable [`Reason::code`] for JSON.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum Reason {
    /// Some mode does not decay at these gains.
    Unstable,
    /// The gains cannot hold lock against the worst crystal pattern (or the slew or trim
    /// limit is too tight).
    CannotLock,
    /// A required margin is not met.
    MarginTooSmall {
        /// Which margin.
        margin: MarginKind,
        /// What the gains have (a factor, or whole updates).
        value: f64,
        /// What the scenario requires.
        required: f64,
    },
    /// The predicted lock time exceeds the budget.
    PredictedOverBudget {
        /// Predicted lock time, seconds.
        lock_s: f64,
        /// The budget, seconds.
        budget_s: f64,
    },
    /// Some simulated runs never settled: their error left the tolerance again in the
    /// final fifth of the horizon, or never stayed within it.
    RunsNeverSettled {
        /// How many.
        runs: usize,
        /// Out of how many.
        of: usize,
    },
    /// The slowest simulated run settled after the budget.
    SimulatedOverBudget {
        /// Its settling time, seconds.
        lock_s: f64,
        /// The budget, seconds.
        budget_s: f64,
    },
}

impl Reason {
    /// Stable keyword for JSON.
    #[must_use]
    pub fn code(&self) -> &'static str {
        match self {
            Reason::Unstable => "unstable",
            Reason::CannotLock => "cannot_lock",
            Reason::MarginTooSmall { .. } => "margin_too_small",
            Reason::PredictedOverBudget { .. } => "predicted_over_budget",
            Reason::RunsNeverSettled { .. } => "runs_never_settled",
            Reason::SimulatedOverBudget { .. } => "simulated_over_budget",
        }
    }
}

impl fmt::Display for Reason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Reason::Unstable => f.write_str("unstable: some mode grows at these gains"),
            Reason::CannotLock => f.write_str(
                "cannot lock: the worst crystal pattern pulls harder than the coupling (or the slew or trim limit) can hold",
            ),
            Reason::MarginTooSmall {
                margin: MarginKind::Gain,
                value,
                required,
            } => write!(
                f,
                "gain margin {value:.2} × is below the required {required:.2} × (margins.gain): a small change in the network or the gains could make it unstable"
            ),
            Reason::MarginTooSmall {
                margin: MarginKind::Delay,
                value,
                required,
            } => write!(
                f,
                "delay margin {value:.0} updates is below the required {required:.0} (margins.delay_updates): {:.0} more update(s) of link delay would make it unstable",
                value + 1.0
            ),
            Reason::PredictedOverBudget { lock_s, budget_s } => write!(
                f,
                "predicted lock time {} exceeds the budget {}",
                seconds(lock_s),
                seconds(budget_s)
            ),
            Reason::RunsNeverSettled { runs, of } => write!(
                f,
                "{runs} of {of} simulated runs never settled: the error did not stay within the tolerance to the end of the run"
            ),
            Reason::SimulatedOverBudget { lock_s, budget_s } => write!(
                f,
                "slowest simulated run settled after {}, beyond the budget {}",
                seconds(lock_s),
                seconds(budget_s)
            ),
        }
    }
}

/// Something to weigh, though the verdict does not turn on it. Each variant has a
/// stable [`Warning::code`] for JSON.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum Warning {
    /// The initial spread is half a turn or more: the prediction does not hold.
    SpreadHalfTurnOrMore,
    /// A ring with stable twisted states.
    TwistedStatesPossible,
    /// The first corrections exceed the slew limit.
    SlewLimited,
    /// The worst-case settling bound was not computed (very slow mode).
    BoundNotComputed,
    /// No worst-case lock test exists for this network at this size.
    LockNotPredicted,
    /// The predicted steady jitter (3σ per node) reaches the lock tolerance.
    JitterNearTolerance {
        /// Three standard deviations of a node's steady phase, seconds.
        three_sigma_s: f64,
        /// The tolerance, seconds.
        tolerance_s: f64,
    },
    /// Nothing met the budget with the margins: the figures are for the tuner's closest
    /// gains.
    ClosestGainsShown,
    /// The lock test on a general graph is sufficient only.
    LockTestSufficientOnly,
    /// Some simulated runs ended in a twisted state.
    TwistedRuns {
        /// Fraction of runs.
        fraction: f64,
    },
}

impl Warning {
    /// Stable keyword for JSON.
    #[must_use]
    pub fn code(&self) -> &'static str {
        match self {
            Warning::SpreadHalfTurnOrMore => "spread_half_turn_or_more",
            Warning::TwistedStatesPossible => "twisted_states_possible",
            Warning::SlewLimited => "slew_limited",
            Warning::BoundNotComputed => "bound_not_computed",
            Warning::LockNotPredicted => "lock_not_predicted",
            Warning::JitterNearTolerance { .. } => "jitter_near_tolerance",
            Warning::ClosestGainsShown => "closest_gains_shown",
            Warning::LockTestSufficientOnly => "lock_test_sufficient_only",
            Warning::TwistedRuns { .. } => "twisted_runs",
        }
    }
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Warning::SpreadHalfTurnOrMore => f.write_str(
                "the initial spread is half a phase turn or more: nodes may lock the wrong way round or not at all, and the prediction does not hold",
            ),
            Warning::TwistedStatesPossible => f.write_str(
                "this ring has stable twisted states: a large initial spread can leave it wound up for good",
            ),
            Warning::SlewLimited => f.write_str(
                "the first corrections exceed the slew limit: the early phase is slew-limited and slower than the small-signal prediction",
            ),
            Warning::BoundNotComputed => f.write_str(
                "the worst-case settling bound was not computed (very slow mode); the dominant-mode estimate is used",
            ),
            Warning::LockNotPredicted => f.write_str(
                "no worst-case lock test for this network: lock against the crystal tolerance is left to the simulation",
            ),
            Warning::JitterNearTolerance {
                three_sigma_s,
                tolerance_s,
            } => write!(
                f,
                "predicted steady jitter (3 σ = {}) reaches the lock tolerance {}: the network may drift in and out of lock",
                seconds(three_sigma_s),
                seconds(tolerance_s)
            ),
            Warning::ClosestGainsShown => f.write_str(
                "no gains meet the budget with the required margins: the figures are for the tuner's closest gains",
            ),
            Warning::LockTestSufficientOnly => f.write_str(
                "the worst-case lock test on a general graph is sufficient, exact only for trees: it may refuse gains that would lock",
            ),
            Warning::TwistedRuns { fraction } => write!(
                f,
                "{:.0} % of simulated runs ended in a twisted state (the phase winds around the ring)",
                fraction * 100.0
            ),
        }
    }
}

/// The verdict of an assessment.
#[derive(Clone, Debug, PartialEq)]
pub struct Verdict {
    /// Pass: stable, locks, margins met, within budget (predicted and, when run,
    /// simulated).
    pub pass: bool,
    /// Why not, when failing (empty on a pass).
    pub reasons: Vec<Reason>,
}

/// The verdict for `prediction` (and `simulation`, when run) against `scenario`'s
/// budget and margins.
#[must_use]
pub fn decide(
    scenario: &Scenario,
    prediction: &Prediction,
    simulation: Option<&Simulation>,
) -> Verdict {
    let mut reasons = Vec::new();
    let budget_s = scenario.lock_budget_s;
    if !prediction.stability.stable {
        reasons.push(Reason::Unstable);
    }
    if prediction.locking.is_some_and(|l| !l.locks) {
        reasons.push(Reason::CannotLock);
    }
    let m = &prediction.margins;
    if prediction.stability.stable {
        if !m.gain_ok() {
            reasons.push(Reason::MarginTooSmall {
                margin: MarginKind::Gain,
                value: m.gain,
                required: m.required.gain,
            });
        }
        if !m.delay_ok() {
            reasons.push(Reason::MarginTooSmall {
                margin: MarginKind::Delay,
                value: f64::from(m.delay_updates),
                required: f64::from(m.required.delay_updates),
            });
        }
    }
    if let Some(lock_s) = prediction.lock_s {
        if lock_s > budget_s {
            reasons.push(Reason::PredictedOverBudget { lock_s, budget_s });
        }
    }
    if let Some(v) = simulation {
        let never = v.summary.runs.saturating_sub(v.summary.settled_runs);
        if never > 0 {
            reasons.push(Reason::RunsNeverSettled {
                runs: never,
                of: v.summary.runs,
            });
        }
        if let Some(p) = v.summary.settle_s {
            if p.max > budget_s {
                reasons.push(Reason::SimulatedOverBudget {
                    lock_s: p.max,
                    budget_s,
                });
            }
        }
    }
    Verdict {
        pass: reasons.is_empty(),
        reasons,
    }
}

/// Warnings from the prediction.
#[must_use]
pub fn prediction_warnings(scenario: &Scenario, p: &Prediction) -> Vec<Warning> {
    let mut w = Vec::new();
    if let Some(s) = &p.settling {
        if s.warnings.spread_half_turn_or_more {
            w.push(Warning::SpreadHalfTurnOrMore);
        }
        if s.warnings.twisted_states_possible {
            w.push(Warning::TwistedStatesPossible);
        }
        if s.warnings.slew_limited {
            w.push(Warning::SlewLimited);
        }
        if s.warnings.bound_not_computed {
            w.push(Warning::BoundNotComputed);
        }
    }
    if p.locking.is_none() {
        w.push(Warning::LockNotPredicted);
    }
    if let Some(n) = &p.noise {
        // Three standard deviations: common practice, no source.
        if 3.0 * n.phase_sd_s > scenario.lock_tolerance_s {
            w.push(Warning::JitterNearTolerance {
                three_sigma_s: 3.0 * n.phase_sd_s,
                tolerance_s: scenario.lock_tolerance_s,
            });
        }
    }
    if matches!(
        scenario.layout,
        Layout::Topology(Topology::Grid { .. } | Topology::Torus { .. }) | Layout::EdgeList { .. }
    ) && p.locking.is_some()
    {
        w.push(Warning::LockTestSufficientOnly);
    }
    w
}

/// Warnings from the simulation.
#[must_use]
pub fn simulation_warnings(v: &Simulation) -> Vec<Warning> {
    let mut w = Vec::new();
    if let Some(fraction) = v.summary.twisted_fraction {
        if fraction > 0.0 {
            w.push(Warning::TwistedRuns { fraction });
        }
    }
    // The simulator sizes every neighbour table for the largest degree, so a full table
    // is a broken invariant, not a finding.
    let refused: u64 = v.summary.outcomes.iter().map(|o| o.stats.table_full).sum();
    assert_eq!(
        refused, 0,
        "the simulator sized a neighbour table below a node's degree"
    );
    w
}
