//! The verdict: typed reasons for failing, typed warnings, and the rules that produce
//! them. Every threshold the verdict turns on lives here or in the scenario.

use super::prediction::Prediction;
use super::simulation::Simulation;
use crate::plan::Topology;
use crate::scenario::{Layout, LockQuantile, Scenario};
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
    /// The simulated settling at the scenario's quantile came after the budget.
    SimulatedOverBudget {
        /// That settling time, seconds.
        lock_s: f64,
        /// The budget, seconds.
        budget_s: f64,
    },
    /// The steady noise floor (p99 of the largest pairwise error after settling) reaches
    /// the tolerance: the network drifts in and out of it for good.
    NoiseFloor {
        /// Predicted p99, seconds (when the forecast ran).
        predicted_p99_s: Option<f64>,
        /// Simulated p99, seconds (when simulated).
        simulated_p99_s: Option<f64>,
        /// The tolerance, seconds.
        tolerance_s: f64,
        /// The scenario's timestamp jitter, ± seconds.
        jitter_s: f64,
        /// One timer tick, seconds.
        tick_s: f64,
    },
    /// A timer tick is not well below the tolerance.
    TimerResolution {
        /// One tick, seconds.
        tick_s: f64,
        /// The tolerance, seconds.
        tolerance_s: f64,
    },
}

impl Reason {
    /// Every reason's [`code`](Reason::code), in declaration order.
    pub const CODES: &'static [&'static str] = &[
        "unstable",
        "cannot_lock",
        "margin_too_small",
        "predicted_over_budget",
        "runs_never_settled",
        "simulated_over_budget",
        "noise_floor",
        "timer_resolution",
    ];

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
            Reason::NoiseFloor { .. } => "noise_floor",
            Reason::TimerResolution { .. } => "timer_resolution",
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
            Reason::PredictedOverBudget { lock_s, budget_s } if lock_s.is_finite() => write!(
                f,
                "predicted settling {} (at the scenario's quantile) exceeds the budget {}",
                seconds(lock_s),
                seconds(budget_s)
            ),
            Reason::PredictedOverBudget { budget_s, .. } => write!(
                f,
                "more of the forecast's runs never settle than the scenario's quantile allows, so the predicted settling never fits the budget {}",
                seconds(budget_s)
            ),
            Reason::RunsNeverSettled { runs, of } => write!(
                f,
                "{runs} of {of} simulated runs never settled: the error did not stay within the tolerance to the end of the run"
            ),
            Reason::SimulatedOverBudget { lock_s, budget_s } => write!(
                f,
                "simulated settling {} (at the scenario's quantile) exceeds the budget {}",
                seconds(lock_s),
                seconds(budget_s)
            ),
            Reason::NoiseFloor {
                predicted_p99_s,
                simulated_p99_s,
                tolerance_s,
                jitter_s,
                tick_s,
            } => {
                let p99 = predicted_p99_s
                    .unwrap_or(0.0)
                    .max(simulated_p99_s.unwrap_or(0.0));
                write!(
                    f,
                    "noise floor: the steady largest pairwise error has p99 {} (predicted {}, simulated {}) against the tolerance {}; ",
                    seconds(p99),
                    predicted_p99_s.map_or("not run".to_owned(), seconds),
                    simulated_p99_s.map_or("not run".to_owned(), seconds),
                    seconds(tolerance_s)
                )?;
                write!(
                    f,
                    "grow lock.tolerance_s to at least {} (twice the p99 leaves room for rare excursions), or cut the timestamp noise (jitter ±{}, tick {}) by a factor of about {:.1}",
                    seconds(2.0 * p99),
                    seconds(jitter_s),
                    seconds(tick_s),
                    2.0 * p99 / tolerance_s
                )
            }
            Reason::TimerResolution {
                tick_s,
                tolerance_s,
            } => write!(
                f,
                "timer resolution: one tick is {} against a tolerance of {}; a tick must be at most a quarter of the tolerance: raise timing.timer_hz to at least {:.0} Hz or widen lock.tolerance_s",
                seconds(tick_s),
                seconds(tolerance_s),
                4.0 / tolerance_s
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
    /// The predicted noise-floor p99 is above [`NOISE_WARNING_FRACTION`] of the tolerance:
    /// rare excursions may leave the band.
    NoiseNearTolerance {
        /// Predicted p99, seconds.
        p99_s: f64,
        /// The tolerance, seconds.
        tolerance_s: f64,
    },
    /// Rounding the phase period to whole timer ticks moves it by more than the crystal
    /// tolerance.
    TimerRounding {
        /// Period error from rounding, ppm.
        period_error_ppm: f64,
        /// The crystal tolerance, ppm.
        crystal_ppm: f64,
    },
    /// The forecast did not run (too much work for the network's size and horizon, or a
    /// setup it does not model): the predicted settling is the worst-case bound.
    ForecastSkipped,
    /// The horizon needed to tell settling from a passing entry is beyond the
    /// simulator's limit: it was cut.
    HorizonCapped {
        /// The horizon used, updates.
        updates: u64,
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
    /// The network's common rate drifted in simulation: some run ended with a rate trim
    /// at its limit, or with the common rate (mean of crystal plus trim) further from
    /// nominal than any crystal (a known weakness of the PI law: nothing pins the common
    /// rate, so a bias the nodes cannot see integrates into every trim alike).
    CommonRateDrift {
        /// Largest |common rate| at the end of a run, ppm.
        common_rate_max_ppm: f64,
        /// The largest crystal error the scenario allows, ppm.
        crystal_bound_ppm: f64,
        /// Fraction of runs that ended with a trim at its limit.
        trim_at_limit_fraction: f64,
    },
}

impl Warning {
    /// Every warning's [`code`](Warning::code), in declaration order.
    pub const CODES: &'static [&'static str] = &[
        "spread_half_turn_or_more",
        "twisted_states_possible",
        "slew_limited",
        "bound_not_computed",
        "lock_not_predicted",
        "noise_near_tolerance",
        "timer_rounding",
        "horizon_capped",
        "forecast_skipped",
        "closest_gains_shown",
        "lock_test_sufficient_only",
        "twisted_runs",
        "common_rate_drift",
    ];

    /// Stable keyword for JSON.
    #[must_use]
    pub fn code(&self) -> &'static str {
        match self {
            Warning::SpreadHalfTurnOrMore => "spread_half_turn_or_more",
            Warning::TwistedStatesPossible => "twisted_states_possible",
            Warning::SlewLimited => "slew_limited",
            Warning::BoundNotComputed => "bound_not_computed",
            Warning::LockNotPredicted => "lock_not_predicted",
            Warning::NoiseNearTolerance { .. } => "noise_near_tolerance",
            Warning::TimerRounding { .. } => "timer_rounding",
            Warning::HorizonCapped { .. } => "horizon_capped",
            Warning::ForecastSkipped => "forecast_skipped",
            Warning::ClosestGainsShown => "closest_gains_shown",
            Warning::LockTestSufficientOnly => "lock_test_sufficient_only",
            Warning::TwistedRuns { .. } => "twisted_runs",
            Warning::CommonRateDrift { .. } => "common_rate_drift",
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
                "the first corrections exceed the slew limit: the forecast and the simulation step the clamp, the worst-case bound does not",
            ),
            Warning::BoundNotComputed => f.write_str(
                "the worst-case settling bound was not computed (very slow mode); the dominant-mode estimate is used",
            ),
            Warning::LockNotPredicted => f.write_str(
                "no worst-case lock test for this network: lock against the crystal tolerance is left to the simulation",
            ),
            Warning::NoiseNearTolerance { p99_s, tolerance_s } => write!(
                f,
                "the predicted noise floor (p99 {}) is more than half the tolerance {}: rare excursions may leave the band",
                seconds(p99_s),
                seconds(tolerance_s)
            ),
            Warning::TimerRounding {
                period_error_ppm,
                crystal_ppm,
            } => write!(
                f,
                "whole timer ticks move the phase period by {period_error_ppm:+.1} ppm, more than the crystal tolerance ±{crystal_ppm:.1} ppm: nodes with other timers will not share this period"
            ),
            Warning::ForecastSkipped => f.write_str(
                "the settling forecast did not run (too much work for this network and horizon): the predicted settling is the worst-case bound, and the noise floor is not predicted",
            ),
            Warning::HorizonCapped { updates } => write!(
                f,
                "the simulation horizon was cut to the simulator's limit of {updates} updates, shorter than settling needs to be told apart from a passing entry"
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
            Warning::CommonRateDrift {
                common_rate_max_ppm,
                crystal_bound_ppm,
                trim_at_limit_fraction,
            } => write!(
                f,
                "the common rate drifted: runs ended up to {common_rate_max_ppm:.1} ppm from nominal (crystals within ±{crystal_bound_ppm:.1} ppm), {:.0} % with a rate trim at its limit; under the PI law the common rate wanders with every timestamp error and the trim leak (law.trim_leak, default ki/64) pulls it back only over 1/leak updates, so every node's clock may run that far off nominal: a smaller ki or a larger trim_leak holds it closer",
                trim_at_limit_fraction * 100.0
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

/// Fraction of the tolerance above which the predicted noise-floor p99 draws a warning
/// (own choice, no source).
pub const NOISE_WARNING_FRACTION: f64 = 0.5;

/// Nearest-rank quantile `q` of the simulated settling over *all* runs, seconds, with runs
/// that never settled counted as infinitely slow; `max` of the settled runs for the bound.
fn simulated_quantile_s(v: &Simulation, quantile: LockQuantile, period_s: f64) -> f64 {
    let mut times: Vec<f64> = v
        .summary
        .outcomes
        .iter()
        .map(|o| {
            o.settle
                .map_or(f64::INFINITY, |s| s.at_updates as f64 * period_s)
        })
        .collect();
    times.sort_by(f64::total_cmp);
    let q = match quantile {
        LockQuantile::Fraction(q) => q,
        LockQuantile::Bound => 1.0,
    };
    let rank = ((q * times.len() as f64).ceil() as usize).clamp(1, times.len().max(1));
    times.get(rank - 1).copied().unwrap_or(f64::INFINITY)
}

/// The verdict for `prediction` (and `simulation`, when run) against `scenario`'s
/// budget, quantile, tolerance and margins.
#[must_use]
pub fn decide(
    scenario: &Scenario,
    prediction: &Prediction,
    simulation: Option<&Simulation>,
) -> Verdict {
    let mut reasons = Vec::new();
    let budget_s = scenario.lock_budget_s;
    let tolerance_s = scenario.lock_tolerance_s;
    if !prediction.stability.stable {
        reasons.push(Reason::Unstable);
    }
    if !prediction.timer.tick_ok {
        reasons.push(Reason::TimerResolution {
            tick_s: prediction.timer.tick_s,
            tolerance_s,
        });
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
    let predicted_p99_s = prediction.noise_floor.map(|n| n.p99_s);
    let simulated_p99_s = simulation.and_then(|v| {
        v.summary
            .noise_floor_turns
            .map(|n| n.p99 * scenario.phase_period_s)
    });
    if predicted_p99_s.is_some_and(|p| p >= tolerance_s)
        || simulated_p99_s.is_some_and(|p| p >= tolerance_s)
    {
        reasons.push(Reason::NoiseFloor {
            predicted_p99_s,
            simulated_p99_s,
            tolerance_s,
            jitter_s: scenario.timestamp_jitter_s,
            tick_s: prediction.timer.tick_s,
        });
    }
    if let Some(lock_s) = prediction.lock_s {
        if lock_s > budget_s {
            reasons.push(Reason::PredictedOverBudget { lock_s, budget_s });
        }
    }
    if let Some(v) = simulation {
        let never = v.summary.runs.saturating_sub(v.summary.settled_runs);
        let allowed = scenario.quantile.allowed_misses() * v.summary.runs as f64;
        if never as f64 > allowed {
            reasons.push(Reason::RunsNeverSettled {
                runs: never,
                of: v.summary.runs,
            });
        }
        let lock_s = simulated_quantile_s(v, scenario.quantile, scenario.update_period_s());
        if lock_s.is_finite() && lock_s > budget_s {
            reasons.push(Reason::SimulatedOverBudget { lock_s, budget_s });
        }
    }
    Verdict {
        pass: reasons.is_empty(),
        reasons,
    }
}

/// The simulated settling the verdict compares with the budget, seconds (see
/// [`decide`]): infinite when too many runs never settled.
#[must_use]
pub fn simulated_settle_s(scenario: &Scenario, simulation: &Simulation) -> f64 {
    simulated_quantile_s(simulation, scenario.quantile, scenario.update_period_s())
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
    if let Some(n) = &p.noise_floor {
        let tolerance_s = scenario.lock_tolerance_s;
        if n.p99_s > NOISE_WARNING_FRACTION * tolerance_s && n.p99_s < tolerance_s {
            w.push(Warning::NoiseNearTolerance {
                p99_s: n.p99_s,
                tolerance_s,
            });
        }
    }
    if p.timer.rounding_beyond_crystal {
        w.push(Warning::TimerRounding {
            period_error_ppm: p.timer.period_error_ppm,
            crystal_ppm: scenario.crystal_tolerance_ppm,
        });
    }
    if p.stability.stable && p.forecast.is_none() {
        w.push(Warning::ForecastSkipped);
    }
    if p.horizon_capped {
        w.push(Warning::HorizonCapped {
            updates: p.horizon_updates,
        });
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
    // The PI law has no restoring force on the common rate: a bias the node cannot see
    // integrates into every trim alike. Shown when a trim ended at its limit, or the
    // common rate ended further from nominal than any crystal is.
    let crystal_bound_ppm = match &v.setup.crystals {
        crate::sim::Crystals::Identical { ppm } => ppm.abs(),
        crate::sim::Crystals::Uniform { tolerance_ppm } => *tolerance_ppm,
        crate::sim::Crystals::Fixed(ppm) => ppm.iter().fold(0.0_f64, |m, p| m.max(p.abs())),
    };
    let s = &v.summary;
    if s.trim_at_limit_fraction > 0.0 || s.common_rate_max_ppm > crystal_bound_ppm + 1.0 {
        w.push(Warning::CommonRateDrift {
            common_rate_max_ppm: s.common_rate_max_ppm,
            crystal_bound_ppm,
            trim_at_limit_fraction: s.trim_at_limit_fraction,
        });
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
