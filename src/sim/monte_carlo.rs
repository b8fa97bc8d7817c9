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
use super::settle::TURN;
use super::setup::Setup;
use super::trace::Trace;

/// Run `run` of `scenario` with `seed` (the same run as number `run` of a Monte Carlo
/// with that seed).
///
/// # Errors
/// The scenario's [`Setup::validate`] error.
pub fn run_once(scenario: &Setup, seed: u64, run: u64) -> Result<RunOutcome, SimError> {
    with_capacity(scenario, seed, run, None)
}

/// Neighbour-updates per second of one thread on `scenario`, measured on the spot: one
/// run cut to at most `updates` updates (its first ones, so the transient, usually the
/// costliest part, is included), timed with the wall clock.
///
/// # Errors
/// The scenario's [`Setup::validate`] error.
pub fn measure_rate(scenario: &Setup, seed: u64, updates: u64) -> Result<f64, SimError> {
    let mut short = scenario.clone();
    short.horizon_updates = scenario.horizon_updates.min(updates.max(2));
    let started = std::time::Instant::now();
    let outcome = run_once(&short, seed, 0)?;
    let elapsed = started.elapsed().as_secs_f64().max(1e-6);
    Ok(outcome.stats.neighbour_updates as f64 / elapsed)
}

/// Run `run` of `scenario` with `seed` and record its trace (with every node's phase if
/// `phases`).
///
/// # Errors
/// The scenario's [`Setup::validate`] error.
pub fn trace_run(
    scenario: &Setup,
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
    scenario: &Setup,
    seed: u64,
    run: u64,
    trace: Option<&mut Trace>,
) -> Result<RunOutcome, SimError> {
    fn go<const N: usize>(
        s: &Setup,
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

/// A distribution (settling or first-entry times, nominal update intervals or seconds) as
/// nearest-rank percentiles (common practice, no source).
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
            values
                .get(nearest_rank(q, values.len()))
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

/// Index (0-based) of the nearest-rank `q`-quantile among `len ≥ 1` sorted values:
/// rank `⌈q·len⌉`, at least 1 (common practice, no source).
fn nearest_rank(q: f64, len: usize) -> usize {
    let rank = (q * len as f64).ceil() as usize;
    rank.clamp(1, len.max(1)) - 1
}

/// The measured noise floor: nearest-rank percentiles of the largest pairwise phase
/// difference over the steady-window samples of every run pooled (settled runs from
/// `max(settling instant, horizon/2)`, never-settled runs over the final fifth; every
/// [`crate::sim::steady_stride`]-th sample), turns.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NoiseFloor {
    /// Median, turns.
    pub p50: f64,
    /// 99th percentile, turns.
    pub p99: f64,
    /// Samples pooled (over all runs, settled or not).
    pub samples: usize,
}

impl NoiseFloor {
    /// The noise floor of the steady-window samples of `outcomes`, or `None` without any.
    #[must_use]
    pub fn of(outcomes: &[RunOutcome]) -> Option<NoiseFloor> {
        let mut pooled: Vec<u32> = outcomes
            .iter()
            .flat_map(|o| o.steady_counts.iter().copied())
            .collect();
        if pooled.is_empty() {
            return None;
        }
        pooled.sort_unstable();
        let at = |q: f64| {
            pooled
                .get(nearest_rank(q, pooled.len()))
                .map_or(f64::NAN, |&c| f64::from(c) / TURN)
        };
        Some(NoiseFloor {
            p50: at(0.50),
            p99: at(0.99),
            samples: pooled.len(),
        })
    }
}

/// What the runs of a Monte Carlo show together. Every run goes to the horizon; see
/// [`crate::sim::SettleTracker`] for the settling instant, the first entry and the steady
/// window.
#[derive(Clone, Debug, PartialEq)]
pub struct Summary {
    /// Runs made.
    pub runs: usize,
    /// Runs that settled (last exit from the band before the final fifth of the horizon).
    pub settled_runs: usize,
    /// Fraction of runs that never settled.
    pub never_settled_fraction: f64,
    /// Rings: fraction of runs that ended in a twisted state (winding number not 0).
    pub twisted_fraction: Option<f64>,
    /// Settling instant over the settled runs, nominal update intervals.
    pub settle_updates: Option<Percentiles>,
    /// Settling instant over the settled runs, seconds.
    pub settle_s: Option<Percentiles>,
    /// First entry into the band over the runs that entered it (settled or not), nominal
    /// update intervals. Shown beside settling, never instead of it: under the PI law the
    /// error passes through the band and swings out again.
    pub first_entry_updates: Option<Percentiles>,
    /// First entry over the runs that entered the band, seconds.
    pub first_entry_s: Option<Percentiles>,
    /// The measured noise floor over every run's steady window (settled or not).
    pub noise_floor_turns: Option<NoiseFloor>,
    /// Median over settled runs of the mean largest pairwise difference in the steady
    /// window, turns.
    pub residual_turns: Option<f64>,
    /// Median over settled runs of the mean largest link difference in the steady
    /// window, turns.
    pub residual_link_turns: Option<f64>,
    /// Median over settled runs of the phase jitter in the steady window, turns (see
    /// [`crate::sim::Settle::jitter_turns`]).
    pub jitter_turns: Option<f64>,
    /// Neighbour terms summed over all runs (the work done).
    pub neighbour_updates: u64,
    /// Largest |common rate| at the end of a run over all runs, ppm from nominal (see
    /// [`RunOutcome::common_rate_ppm`]); 0 with no runs.
    pub common_rate_max_ppm: f64,
    /// Fraction of runs that ended with some node's rate trim at its limit.
    pub trim_at_limit_fraction: f64,
    /// PI law: the median and largest over every adjusting node of every run of
    /// |trim − ideal trim| at the run's end, ppm (see [`RunOutcome::trim_errors_ppm`]);
    /// `None` for the P law.
    pub trim_error_ppm: Option<Percentiles>,
    /// PI law: the same with the common rate taken out (see
    /// [`RunOutcome::trim_spread_errors_ppm`]); `None` for the P law.
    pub trim_spread_error_ppm: Option<Percentiles>,
    /// Every run's outcome, in run order.
    pub outcomes: Vec<RunOutcome>,
}

impl Summary {
    /// Combine run outcomes (in run order); `update_period_s` converts updates to
    /// seconds.
    #[must_use]
    pub fn from_outcomes(outcomes: Vec<RunOutcome>, update_period_s: f64) -> Summary {
        let runs = outcomes.len();
        let settles: Vec<_> = outcomes.iter().filter_map(|o| o.settle).collect();
        let mut times: Vec<f64> = settles.iter().map(|s| s.at_updates as f64).collect();
        let settle_updates = Percentiles::of(&mut times);
        let mut entries: Vec<f64> = outcomes
            .iter()
            .filter_map(|o| o.first_entry_updates)
            .map(|k| k as f64)
            .collect();
        let first_entry_updates = Percentiles::of(&mut entries);
        let median = |mut v: Vec<f64>| Percentiles::of(&mut v).map(|p| p.p50);
        let rings = outcomes.iter().filter(|o| o.winding.is_some()).count();
        let twisted = outcomes.iter().filter(|o| o.twisted()).count();
        let common_rate_max_ppm = outcomes
            .iter()
            .map(|o| o.common_rate_ppm.abs())
            .fold(0.0, f64::max);
        let at_limit = outcomes.iter().filter(|o| o.trims_at_limit > 0).count();
        let mut trim_errors: Vec<f64> = outcomes
            .iter()
            .flat_map(|o| o.trim_errors_ppm.iter().copied())
            .collect();
        let mut spread_errors: Vec<f64> = outcomes
            .iter()
            .flat_map(|o| o.trim_spread_errors_ppm.iter().copied())
            .collect();
        Summary {
            trim_error_ppm: Percentiles::of(&mut trim_errors),
            trim_spread_error_ppm: Percentiles::of(&mut spread_errors),
            common_rate_max_ppm,
            trim_at_limit_fraction: if runs == 0 {
                0.0
            } else {
                at_limit as f64 / runs as f64
            },
            runs,
            settled_runs: settles.len(),
            never_settled_fraction: if runs == 0 {
                0.0
            } else {
                (runs - settles.len()) as f64 / runs as f64
            },
            twisted_fraction: (rings > 0).then(|| twisted as f64 / runs as f64),
            settle_updates,
            settle_s: settle_updates.map(|p| p.scaled(update_period_s)),
            first_entry_updates,
            first_entry_s: first_entry_updates.map(|p| p.scaled(update_period_s)),
            noise_floor_turns: NoiseFloor::of(&outcomes),
            residual_turns: median(settles.iter().map(|s| s.residual_turns).collect()),
            residual_link_turns: median(settles.iter().map(|s| s.residual_link_turns).collect()),
            jitter_turns: median(settles.iter().map(|s| s.jitter_turns).collect()),
            neighbour_updates: outcomes.iter().map(|o| o.stats.neighbour_updates).sum(),
            outcomes,
        }
    }
}

/// `runs` runs of `scenario` with master `seed`, in parallel on the current rayon pool
/// (use `ThreadPool::install` to choose the threads). `progress` is called after each
/// finished run, from whichever thread finished it.
///
/// # Errors
/// [`SimError::NoRuns`] for zero runs; the scenario's [`Setup::validate`] error.
pub fn monte_carlo(
    scenario: &Setup,
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
