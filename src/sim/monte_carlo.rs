//! Many runs of one scenario in parallel, with deterministic per-run seeds.
//!
//! Run `r` of a Monte Carlo with seed `s` draws everything from stream `r` of a ChaCha8
//! generator seeded with `s`, so the result depends only on `(scenario, s, runs)` —
//! never on the number of threads or the order in which runs finish.

use std::sync::atomic::{AtomicUsize, Ordering};

use rayon::prelude::*;

use super::error::SimError;
use super::network::Network;
use super::outcome::RunOutcome;
use super::predict::{Prediction, predict};
use super::scenario::Scenario;
use super::trace::Trace;

/// Run `run` of `scenario` with `seed` (the same run as number `run` of a Monte Carlo
/// with that seed).
///
/// # Errors
/// The scenario's [`Scenario::validate`] error.
pub fn run_once(scenario: &Scenario, seed: u64, run: u64) -> Result<RunOutcome, SimError> {
    with_capacity(scenario, seed, run, None)
}

/// Run `run` of `scenario` with `seed` and record its trace (with every node's phase if
/// `phases`).
///
/// # Errors
/// The scenario's [`Scenario::validate`] error.
pub fn trace_run(
    scenario: &Scenario,
    seed: u64,
    run: u64,
    phases: bool,
) -> Result<(RunOutcome, Trace), SimError> {
    let period = scenario.update_period_s();
    let mut trace = if phases {
        Trace::with_phases(period)
    } else {
        Trace::new(period)
    };
    let outcome = with_capacity(scenario, seed, run, Some(&mut trace))?;
    Ok((outcome, trace))
}

/// Pick the smallest neighbour-table capacity that holds the largest degree.
fn with_capacity(
    scenario: &Scenario,
    seed: u64,
    run: u64,
    trace: Option<&mut Trace>,
) -> Result<RunOutcome, SimError> {
    fn go<const N: usize>(
        s: &Scenario,
        seed: u64,
        run: u64,
        trace: Option<&mut Trace>,
    ) -> Result<RunOutcome, SimError> {
        Ok(Network::<N>::new(s, seed, run)?.run(trace))
    }
    match scenario.links.max_degree() {
        0..=2 => go::<2>(scenario, seed, run, trace),
        3..=4 => go::<4>(scenario, seed, run, trace),
        5..=8 => go::<8>(scenario, seed, run, trace),
        9..=32 => go::<32>(scenario, seed, run, trace),
        _ => go::<255>(scenario, seed, run, trace),
    }
}

/// Lock-time distribution, nominal update intervals (nearest-rank percentiles, common
/// practice, no source).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Percentiles {
    /// Median.
    pub p50: f64,
    /// 90th percentile.
    pub p90: f64,
    /// 99th percentile.
    pub p99: f64,
    /// Largest.
    pub max: f64,
}

impl Percentiles {
    /// Nearest-rank percentiles of `values` (sorted in place); `None` if empty or any is NaN.
    #[must_use]
    pub fn of(values: &mut [f64]) -> Option<Percentiles> {
        if values.is_empty() || values.iter().any(|v| v.is_nan()) {
            return None;
        }
        values.sort_by(f64::total_cmp);
        let at = |q: f64| {
            let rank = (q * values.len() as f64).ceil() as usize;
            values
                .get(rank.clamp(1, values.len()) - 1)
                .copied()
                .unwrap_or(f64::NAN)
        };
        Some(Percentiles {
            p50: at(0.50),
            p90: at(0.90),
            p99: at(0.99),
            max: at(1.0),
        })
    }

    /// Every figure times `factor` (for example the update period, to get seconds).
    #[must_use]
    pub fn scaled(&self, factor: f64) -> Percentiles {
        Percentiles {
            p50: self.p50 * factor,
            p90: self.p90 * factor,
            p99: self.p99 * factor,
            max: self.max * factor,
        }
    }
}

/// Progress of a Monte Carlo, handed to the callback after each finished run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Progress {
    /// Runs finished so far.
    pub done: usize,
    /// Runs in total.
    pub total: usize,
}

/// What the runs of a Monte Carlo show together.
#[derive(Clone, Debug, PartialEq)]
pub struct Summary {
    /// Runs made.
    pub runs: usize,
    /// Runs that locked within the horizon.
    pub locked_runs: usize,
    /// Fraction of runs that never locked within the horizon.
    pub never_locked_fraction: f64,
    /// Rings: fraction of runs that ended in a twisted state (winding number not 0).
    pub twisted_fraction: Option<f64>,
    /// Lock time over the locked runs, nominal update intervals.
    pub lock_updates: Option<Percentiles>,
    /// Lock time over the locked runs, seconds.
    pub lock_s: Option<Percentiles>,
    /// Median over locked runs of the residual largest pairwise difference, turns.
    pub residual_turns: Option<f64>,
    /// Median over locked runs of the residual largest link difference, turns.
    pub residual_link_turns: Option<f64>,
    /// Median over locked runs of the phase jitter after lock, turns.
    pub jitter_turns: Option<f64>,
    /// Neighbour terms summed over all runs (the work done).
    pub neighbour_updates: u64,
    /// Every run's outcome, in run order.
    pub outcomes: Vec<RunOutcome>,
    /// The checker's prediction for the same scenario, or why it refused.
    pub prediction: Result<Prediction, SimError>,
    /// The accuracy figure: simulated median lock time over the predicted lock time
    /// ([`Prediction::lock_updates`]); `None` without both.
    pub accuracy: Option<f64>,
}

impl Summary {
    /// Combine run outcomes (in run order).
    #[must_use]
    pub fn from_outcomes(
        outcomes: Vec<RunOutcome>,
        update_period_s: f64,
        prediction: Result<Prediction, SimError>,
    ) -> Summary {
        let runs = outcomes.len();
        let locks: Vec<_> = outcomes.iter().filter_map(|o| o.lock).collect();
        let mut times: Vec<f64> = locks.iter().map(|l| l.at_updates as f64).collect();
        let lock_updates = Percentiles::of(&mut times);
        let median = |mut v: Vec<f64>| Percentiles::of(&mut v).map(|p| p.p50);
        let rings = outcomes.iter().filter(|o| o.winding.is_some()).count();
        let twisted = outcomes.iter().filter(|o| o.twisted()).count();
        Summary {
            runs,
            locked_runs: locks.len(),
            never_locked_fraction: if runs == 0 {
                0.0
            } else {
                (runs - locks.len()) as f64 / runs as f64
            },
            twisted_fraction: (rings > 0).then(|| twisted as f64 / runs as f64),
            lock_updates,
            lock_s: lock_updates.map(|p| p.scaled(update_period_s)),
            residual_turns: median(locks.iter().map(|l| l.residual_turns).collect()),
            residual_link_turns: median(locks.iter().map(|l| l.residual_link_turns).collect()),
            jitter_turns: median(locks.iter().map(|l| l.jitter_turns).collect()),
            neighbour_updates: outcomes.iter().map(|o| o.stats.neighbour_updates).sum(),
            outcomes,
            accuracy: match (&prediction, lock_updates) {
                (Ok(p), Some(sim)) if p.lock_updates > 0 => Some(sim.p50 / p.lock_updates as f64),
                _ => None,
            },
            prediction,
        }
    }
}

/// `runs` runs of `scenario` with master `seed`, in parallel on the current rayon pool
/// (use `ThreadPool::install` to choose the threads). `progress` is called after each
/// finished run, from whichever thread finished it.
///
/// # Errors
/// [`SimError::NoRuns`] for zero runs; the scenario's [`Scenario::validate`] error.
pub fn monte_carlo(
    scenario: &Scenario,
    runs: usize,
    seed: u64,
    progress: &(dyn Fn(Progress) + Sync),
) -> Result<Summary, SimError> {
    if runs == 0 {
        return Err(SimError::NoRuns);
    }
    scenario.validate()?;
    let done = AtomicUsize::new(0);
    let outcomes: Result<Vec<RunOutcome>, SimError> = (0..runs)
        .into_par_iter()
        .map(|r| {
            let o = run_once(scenario, seed, r as u64);
            let d = done.fetch_add(1, Ordering::Relaxed) + 1;
            progress(Progress {
                done: d,
                total: runs,
            });
            o
        })
        .collect();
    Ok(Summary::from_outcomes(
        outcomes?,
        scenario.update_period_s(),
        predict(scenario),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nearest_rank_percentiles() {
        // Nearest rank on 1..=100: p50 = 50, p90 = 90, p99 = 99 (common practice).
        let mut v: Vec<f64> = (1..=100).rev().map(f64::from).collect();
        let p = Percentiles::of(&mut v).unwrap();
        assert_eq!((p.p50, p.p90, p.p99, p.max), (50.0, 90.0, 99.0, 100.0));
        assert_eq!(Percentiles::of(&mut []), None);
        assert_eq!(Percentiles::of(&mut [1.0, f64::NAN]), None);
        let one = Percentiles::of(&mut [7.0]).unwrap();
        assert_eq!((one.p50, one.max), (7.0, 7.0));
    }
}
