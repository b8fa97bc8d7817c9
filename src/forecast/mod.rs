//! Forecast of settling and of the steady noise floor from a simulator
//! [`Setup`], by an independent model of the network that is
//! cheap to sample: the node law written out again in `f64`, in node coordinates,
//! stepped on the real-time schedule the nodes' own timers give.
//!
//! # What is forecast
//! - **Settling** (last exit): per sampled run, the first sample after which the
//!   largest pairwise wrapped phase difference stays within the tolerance up to the
//!   scenario's horizon. Settling time is when the error stays in the band for good, not
//!   its first entry (standard control practice, no source). A run whose last exit
//!   falls in the final fifth of the horizon has not settled, as the simulator counts
//!   it. Quantiles over the settled runs,
//!   nominal update intervals.
//! - **Noise floor**: the largest pairwise difference over each run's steady window
//!   (from the settling instant or half the horizon on, as the simulator measures it),
//!   pooled over runs (p50 and p99), turns.
//! - **Slowest oscillation period** of the small-signal modes, for choosing a horizon.
//!
//! # The model and its derivation
//! Phase is kept relative to an ideal clock started at 0, in turns; time in nominal
//! timer ticks. Node i's crystal is `e_i` fast (uniform within the tolerance, as the
//! scenario says; a pinned chain's reference is ideal), so between its updates its
//! relative phase drifts at `R·e_i + τ_i·(1 + e_i)` turns per tick, `R` the nominal
//! rate (1/ticks per period) and `τ_i` the trim in effect. It updates at whole ticks
//! of its own timer, `M` (the update interval) apart plus the schedule jitter, first at
//! a uniform offset within one interval when the schedule starts at random.
//!
//! At its update node i takes every beacon that arrived *strictly before* (each
//! beacon leaves right after the sender's update and arrives after its link's latency
//! in that direction; it is lost with probability `1 − p`). Each link's latency is one
//! value when the scenario gives one; otherwise it is drawn per run as the simulator
//! draws it: a mean uniform in `[latency, latency + spread]`, the two directions
//! `mean ± d/2` with `d` uniform within `±asymmetry`. A beacon carries the sender's
//! phase `x_j` then; the node extrapolates it over `told + measured + (now − stamp)` of
//! its own ticks at its own rate (`told`: the mean latency in its own ticks, rounded,
//! when it is told, else 0; `measured`: its smoothed two-way estimate below), so
//! relative to an ideal clock its estimate of the neighbour is
//! `x̂_j = x_j(t_s) + (R + τ_i)·span − R·(t − t_s)`, compared with its *current* own
//! phase: a delayed neighbour against a current self. With staggered schedules the age
//! `t − t_s` is the latency plus the part of an interval to the receiver's next update;
//! with lock-step schedules it is the latency rounded up to whole updates. A lost
//! beacon leaves the previous entry in the node's table: the entry keeps `Δ` at its
//! observation and is reduced by the node's own corrections since, so loss ages the
//! neighbour's information rather than removing the coupling. (The mean-field model in
//! which `p` scales the gains — Kar & Moura, IEEE TSP 56 (2008) — is for links whose
//! term is absent when the message is lost; it predicts a loss slow-down this node
//! does not have, because the held entry keeps pulling. Here loss is sampled per
//! beacon, which costs one draw and is exact for the law as specified.)
//!
//! Version-2 beacons also carry the sender's send stamp, its trim, and an echo for one
//! neighbour in turn: that neighbour's last send stamp heard and the ticks held since.
//! The echoed node takes the round trip `(stamp − echoed send) − held·(1 + τ_j)/(1 +
//! τ_i)` (trims as fractions of the nominal rate), refuses a negative raw round trip or
//! a corrected one below minus an eighth of the timeout or above twice it, halves it,
//! subtracts the told latency, and smooths the samples per link (the first taken whole,
//! then weight `2^−s`, `s` the delay smoothing). With asymmetric directions the
//! estimate is the mean of the two, so each side's view is off by half the difference
//! (the two-way time-transfer residual; RFC 5905 §8), which the model keeps as it is.
//!
//! The law per update, with `Σ = Σ_j f(wrap(Δ_j))`, `f(Δ) = Δ` (linear) or
//! `sin(2πΔ)/2π` (sine, applied per neighbour difference):
//! `step = clamp(kp·Σ, ±slew)`, `x += step`, and, unless the step was clamped,
//! `τ_next = clamp((1 − γ)·τ + ki·Σ/M, ±trim limit)` (`γ` the trim leak), which takes
//! effect at the next update.
//! Small-signal, with lock-step updates and no delay, each Laplacian mode λ then obeys
//! `z² − (2 − kp·λ)z + (1 − kp·λ + ki·λ)` (P: `z = 1 − kp·λ`); its roots inside the
//! unit circle (Jury criterion: `0 < ki·λ`, `ki < kp`, `2kp − ki < 4/λ`) give the
//! stability region; cf. Schenato & Fiorentin, Automatica 47 (2011) and Carli & Zampieri,
//! IEEE TAC 59 (2014) for the PI consensus form. The oscillation period reported is
//! `2π/|arg z|` of the slowest-turning complex root over the modes of the (grounded,
//! when pinned) Laplacian, from `nalgebra::SymmetricEigen`.
//!
//! Noise is modelled where the simulator makes it: the receiver stamps a beacon with
//! its *completed* timer ticks (on average half a tick early, as a capture register
//! reads) or, as the scenario says, its *nearest* tick (the rounding error follows from
//! the two crystals' tick grids, computed exactly rather than drawn; the nearest tick's
//! is zero for ideal crystals and whole-tick latency) plus a uniform integer draw within ±j ticks (variance `j(j+1)/3` ticks²),
//! and the network is read at each node's *completed* timer tick (a quantisation of
//! up to one tick, uniform over nodes when the crystals differ; Widrow, Kollár & Liu,
//! IEEE Trans. Instrum. Meas. 45 (1996) for the uniform-quantiser model). Scheduling at
//! whole ticks adds no phase error (the phase is a function of the node's own ticks), so
//! it is not modelled as noise. The noise floor is then read off the noise-driven model
//! itself rather than from a steady Lyapunov covariance: the largest pairwise
//! difference of correlated nodes has no closed form anyway, and sampling the same
//! model keeps the bounded, partly static rounding errors as they are.
//!
//! # What is modelled and what is left to the simulation
//! Modelled: random start phases and crystals, staggered or lock-step schedules with
//! jitter, fractional latency as the node sees it, per-link and per-direction
//! latencies, told or measured two-way with the echo schedule, plausibility checks and
//! smoothing of the node, per-beacon loss with the held entry, the neighbour timeout,
//! timestamp jitter and tick rounding (completed or nearest), the sine law per
//! neighbour difference, the slew limit with the frozen integrator, the trim leak, the
//! trim limit, phase wrapping, and a pinned reference. Left to the simulation: reboots
//! (refused), integer rounding of the gains' products and of the delay estimate (below
//! a count, and 2⁻¹⁶ tick), the sender's trim quantised to ppb in the held-tick
//! conversion, the sine law's polynomial error (below 8.4·10⁻⁶ turn) and the
//! neighbour-table capacity.
//!
//! ```
//! use entrain::forecast::forecast;
//! use entrain::sim::{Crystals, Links, Setup};
//! use entrain::{Config, Gain};
//!
//! // Light fixtures around a courtyard: a ring of 10, 1 MHz timers, 10 ms period.
//! let config = Config::builder(10_000, 10_000).kp(Gain::from_f32(0.3)?).build()?;
//! let mut s = Setup::new(Links::ring(10)?, config, 1e6);
//! s.crystals = Crystals::Uniform { tolerance_ppm: 20.0 };
//! s.horizon_updates = 400;
//! let f = forecast(&s, 64, 1)?;
//! assert!(f.settle_updates.p50 <= f.settle_updates.p90);
//! assert!(f.settle_updates.p90 < 400.0);
//! // The error over time, pointwise over the sampled runs: one point per update here.
//! assert_eq!(f.envelope.p50_turns.len(), 400);
//! assert!(f.envelope.p50_turns.iter().zip(&f.envelope.p90_turns).all(|(a, b)| a <= b));
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod replica;

use core::fmt;

use nalgebra::{DMatrix, SymmetricEigen};
use rayon::prelude::*;

use crate::sim::{Setup, SimError, final_fifth_start, steady_stride};

/// Predicted settling from random starts, nominal update intervals (nearest-rank
/// quantiles over the sampled runs that settle before the final fifth of the horizon,
/// as the simulator counts them; NaN if none does).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SettleQuantiles {
    /// Median, updates (`0 ..= horizon`).
    pub p50: f64,
    /// 90th percentile, updates (`p50 ..= horizon`).
    pub p90: f64,
}

/// Predicted steady noise floor: the largest pairwise phase difference over each run's
/// steady window (see [`steady_window`]), pooled over runs, turns (`0 ..= ½`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NoiseQuantiles {
    /// Median, turns.
    pub p50: f64,
    /// 99th percentile, turns.
    pub p99: f64,
}

/// What [`forecast`] predicts for a scenario.
#[derive(Clone, Debug, PartialEq)]
pub struct Forecast {
    /// Settling (last exit from the tolerance), nominal updates.
    pub settle_updates: SettleQuantiles,
    /// Fraction of sampled runs whose last exit falls in the final fifth of the horizon
    /// (not settled, as the simulator counts them), `0..=1`.
    pub never_settled_fraction: f64,
    /// Steady largest pairwise error, turns.
    pub noise_floor_turns: NoiseQuantiles,
    /// Longest oscillation period of the small-signal modes (lock-step, no delay),
    /// nominal updates; `None` when no mode oscillates slower than every 2 updates.
    pub slowest_oscillation_period_updates: Option<f64>,
    /// Sampled runs.
    pub samples: usize,
    /// Settling of every sampled run that settled, nominal updates, ascending.
    pub settled_updates: Vec<f64>,
    /// The predicted error over time: pointwise quantiles over the sampled runs.
    pub envelope: ErrorEnvelope,
}

/// Points of [`ErrorEnvelope`] at most (the horizon is strided down to this many).
pub const ENVELOPE_POINTS: u64 = 600;

/// The largest pairwise error over time as the sampled runs show it: at every
/// `stride_updates`-th sample from power-up, the nearest-rank p50 and p90 of that
/// sample's error over the runs, turns.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ErrorEnvelope {
    /// Nominal updates between points (point `k` is at update `k·stride_updates`).
    pub stride_updates: u64,
    /// Median error per point, turns.
    pub p50_turns: Vec<f64>,
    /// 90th-percentile error per point, turns.
    pub p90_turns: Vec<f64>,
}

impl ErrorEnvelope {
    /// Pointwise quantiles of `runs` (each the error at every `stride`-th sample; at a
    /// point past a run's end, over the runs that reach it); empty without runs.
    fn of(runs: &[Vec<f64>], stride: u64) -> ErrorEnvelope {
        let points = runs.iter().map(Vec::len).max().unwrap_or(0);
        let mut column = Vec::with_capacity(runs.len());
        let (mut p50, mut p90) = (Vec::with_capacity(points), Vec::with_capacity(points));
        for k in 0..points {
            column.clear();
            column.extend(runs.iter().filter_map(|r| r.get(k).copied()));
            column.sort_by(f64::total_cmp);
            p50.push(nearest_rank(&column, 0.5));
            p90.push(nearest_rank(&column, 0.9));
        }
        ErrorEnvelope {
            stride_updates: stride,
            p50_turns: p50,
            p90_turns: p90,
        }
    }
}

impl Forecast {
    /// Settling at quantile `q ∈ (0, 1]` over *all* sampled runs, nominal updates, with
    /// runs that never settle counted as infinitely slow (nearest rank): infinite when
    /// more than `1 − q` of the runs never settle.
    #[must_use]
    pub fn settle_quantile_updates(&self, q: f64) -> f64 {
        let rank = ((q * self.samples as f64).ceil() as usize).clamp(1, self.samples.max(1));
        self.settled_updates
            .get(rank - 1)
            .copied()
            .unwrap_or(f64::INFINITY)
    }
}

/// Why [`forecast`] refused.
#[derive(Clone, Debug, PartialEq)]
pub enum ForecastError {
    /// The scenario's own validation failed.
    Setup(SimError),
    /// Zero samples, or a horizon of fewer than 2 updates.
    TooFewSamples,
    /// The scenario has reboots, which the model does not follow.
    RebootsNotModelled,
}

impl fmt::Display for ForecastError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ForecastError::Setup(e) => write!(f, "scenario: {e}"),
            ForecastError::TooFewSamples => {
                write!(f, "need at least one sample and a horizon of 2 updates")
            }
            ForecastError::RebootsNotModelled => {
                write!(f, "the forecast does not model reboots; simulate them")
            }
        }
    }
}

impl std::error::Error for ForecastError {}

/// The scenario's settling tolerance, turns (one place to follow a rename of the
/// criterion).
#[must_use]
pub fn tolerance_turns(s: &Setup) -> f64 {
    s.settle.tolerance_turns
}

/// Settling of one error series as the simulator measures it: the sample after the
/// last one above `tol` (0 if none is); `None` (not settled) when that falls in the
/// final fifth of the series ([`crate::sim::final_fifth_start`]).
#[must_use]
pub fn last_exit(errors: &[f64], tol: f64) -> Option<usize> {
    let at = errors.iter().rposition(|&e| e > tol).map_or(0, |k| k + 1);
    let fifth = final_fifth_start(errors.len() as u64);
    ((at as u64) < fifth).then_some(at)
}

/// The steady-window samples of one error series, as the simulator pools them for its
/// noise floor: every [`crate::sim::steady_stride`]-th sample from the settling instant
/// or half the horizon, whichever is later (from the final fifth if not settled).
pub fn steady_window(errors: &[f64], settle: Option<usize>) -> impl Iterator<Item = f64> + '_ {
    let h = errors.len() as u64;
    let stride = steady_stride(h);
    let from = settle.map_or(final_fifth_start(h), |a| (a as u64).max(h / 2));
    errors
        .iter()
        .enumerate()
        .filter(move |&(k, _)| k as u64 >= from && (k as u64).is_multiple_of(stride))
        .map(|(_, &e)| e)
}

/// Nearest-rank quantile `q ∈ (0, 1]` of `sorted` (ascending, non-empty).
#[must_use]
pub fn nearest_rank(sorted: &[f64], q: f64) -> f64 {
    let rank = (q * sorted.len() as f64).ceil() as usize;
    sorted
        .get(rank.clamp(1, sorted.len().max(1)) - 1)
        .copied()
        .unwrap_or(f64::NAN)
}

/// Forecast settling and noise floor of `s` from `samples` sampled runs of the model
/// (run `r` draws from stream `r` of ChaCha8 seeded with `seed`; the result does not
/// depend on the thread count). Runs span `s.horizon_updates` samples.
///
/// # Errors
/// [`ForecastError::Setup`] if the scenario does not validate;
/// [`ForecastError::TooFewSamples`]; [`ForecastError::RebootsNotModelled`].
pub fn forecast(s: &Setup, samples: usize, seed: u64) -> Result<Forecast, ForecastError> {
    forecast_runs(s, samples, seed, false)
}

/// [`forecast`], cheaper: a sampled run stops as soon as its error has stayed within
/// *half* the tolerance for as many samples as the final fifth of the horizon holds (the
/// span a run must stay inside to count as settled at all) and at least half the slowest
/// oscillation period of the small-signal modes (a decaying oscillation's largest
/// pairwise error peaks once per half period, so the stay has seen a peak and the later
/// ones are lower); its settling is then the
/// last exit from the tolerance so far. Runs that settle early cost a fraction of the
/// horizon; runs whose noise or slow tail keeps them above half the tolerance run the
/// whole horizon, as in [`forecast`].
///
/// What this gives up: a run stopped early that would have left the band later
/// counts as settled. After a stay that long that deep inside the band, only a noise
/// excursion of more than twice anything seen in the stay could do that. The noise
/// floor of a run stopped early is taken over its stay, which was below half the
/// tolerance by construction: a low estimate, not to be compared with the tolerance
/// (the property kit, the user of this, reads only the settling). The envelope is over
/// the runs still running at each point.
///
/// # Errors
/// As [`forecast`].
pub fn forecast_early_stop(
    s: &Setup,
    samples: usize,
    seed: u64,
) -> Result<Forecast, ForecastError> {
    forecast_runs(s, samples, seed, true)
}

fn forecast_runs(
    s: &Setup,
    samples: usize,
    seed: u64,
    early_stop: bool,
) -> Result<Forecast, ForecastError> {
    s.validate().map_err(ForecastError::Setup)?;
    if samples == 0 || s.horizon_updates < 2 {
        return Err(ForecastError::TooFewSamples);
    }
    if !s.reboots.is_empty() {
        return Err(ForecastError::RebootsNotModelled);
    }
    let setup = replica::Replica::new(s);
    let tol = tolerance_turns(s);
    let stride = s.horizon_updates.div_ceil(ENVELOPE_POINTS).max(1);
    let period = slowest_period(s);
    let stay = usize::try_from(early_stop_stay(s, period)).unwrap_or(usize::MAX);
    let stop = early_stop.then_some(replica::EarlyStop {
        inner: tol / 2.0,
        stay,
    });
    // Per run: settling, steady-window samples, strided errors for the envelope.
    type PerRun = (Option<usize>, Vec<f64>, Vec<f64>);
    let per_run: Vec<PerRun> = (0..samples as u64)
        .into_par_iter()
        .map(|r| {
            let errors = replica::run(&setup, seed, r, stop);
            let (settle, tail) = if errors.len() < setup.horizon {
                // Stopped early: settled after the last sample above the tolerance; the
                // noise is sampled over the stay (inside half the tolerance).
                let settle = errors.iter().rposition(|&e| e > tol).map_or(0, |k| k + 1);
                let from = errors.len().saturating_sub(stay);
                let stride = steady_stride(s.horizon_updates) as usize;
                let tail = errors
                    .get(from..)
                    .unwrap_or_default()
                    .iter()
                    .step_by(stride.max(1));
                (Some(settle), tail.copied().collect())
            } else {
                let settle = last_exit(&errors, tol);
                (settle, steady_window(&errors, settle).collect())
            };
            let points = errors.iter().step_by(stride as usize).copied().collect();
            (settle, tail, points)
        })
        .collect();
    let (per_run, points): (Vec<_>, Vec<Vec<f64>>) = per_run
        .into_iter()
        .map(|(settle, tail, points)| ((settle, tail), points))
        .unzip();
    let mut settle: Vec<f64> = per_run
        .iter()
        .filter_map(|r| r.0.map(|a| a as f64))
        .collect();
    settle.sort_by(f64::total_cmp);
    let never = 1.0 - settle.len() as f64 / samples as f64;
    let mut tail: Vec<f64> = per_run.into_iter().flat_map(|r| r.1).collect();
    tail.sort_by(f64::total_cmp);
    Ok(Forecast {
        settle_updates: SettleQuantiles {
            p50: nearest_rank(&settle, 0.5),
            p90: nearest_rank(&settle, 0.9),
        },
        never_settled_fraction: never,
        noise_floor_turns: NoiseQuantiles {
            p50: nearest_rank(&tail, 0.5),
            p99: nearest_rank(&tail, 0.99),
        },
        slowest_oscillation_period_updates: period,
        samples,
        settled_updates: settle,
        envelope: ErrorEnvelope::of(&points, stride),
    })
}

/// The samples a run stopped early must have stayed within half the tolerance (see
/// [`forecast_early_stop`]): the final fifth of the horizon (what a settled run stays
/// inside at least), and half the slowest oscillation period `period` (the largest
/// pairwise error of a decaying oscillating mode peaks once per half period, so the stay
/// has seen a peak and later ones are lower); at least one.
fn early_stop_stay(s: &Setup, period: Option<f64>) -> u64 {
    let fifth = s.horizon_updates - final_fifth_start(s.horizon_updates);
    let half_period = period.map_or(0.0, |p| (p / 2.0).ceil());
    fifth.max(half_period.min(u64::MAX as f64) as u64).max(1)
}

/// How long a run of `s` must stay within half the tolerance before it stops early, in
/// samples: the final fifth of the horizon, or half the slowest oscillation period of
/// `s`'s small-signal modes when that is longer (as [`forecast_early_stop`]'s runs do).
/// The property kit's simulated runs of the real node code stop by it too.
#[must_use]
pub fn stay_before_early_stop(s: &Setup) -> u64 {
    early_stop_stay(s, slowest_period(s))
}

/// Longest `2π/|arg z|` over the complex (or negative real) roots of the per-mode
/// polynomials on the Laplacian's eigenvalues (grounded at a pinned reference).
fn slowest_period(s: &Setup) -> Option<f64> {
    let n = s.nodes();
    let keep: Vec<usize> = (0..n).filter(|&i| !s.links.is_reference(i)).collect();
    let pos = |i: usize| keep.iter().position(|&k| k == i);
    let mut l = DMatrix::<f64>::zeros(keep.len(), keep.len());
    for &(a, b) in s.links.pairs() {
        let w = s.links.weight(a, b);
        for (u, v) in [(a, b), (b, a)] {
            if let Some(pu) = pos(u) {
                if let Some(x) = l.get_mut((pu, pu)) {
                    *x += w;
                }
                if let Some(x) = pos(v).and_then(|pv| l.get_mut((pu, pv))) {
                    *x -= w;
                }
            }
        }
    }
    let eig = SymmetricEigen::try_new(l, f64::EPSILON, 100_000)?;
    let kp = s.config.kp().to_f64();
    let ki = s.config.ki().to_f64();
    eig.eigenvalues
        .iter()
        .filter(|&&lam| lam > 1e-9)
        .filter_map(|&lam| mode_period(kp, ki, lam))
        .fold(None, |acc: Option<f64>, p| {
            Some(acc.map_or(p, |a| a.max(p)))
        })
}

/// Oscillation period of mode λ, updates: from the roots of
/// `z² − (2 − kpλ)z + (1 − kpλ + kiλ)` (PI) or `z = 1 − kpλ` (P); `None` for
/// non-oscillating (positive real) roots.
#[must_use]
pub fn mode_period(kp: f64, ki: f64, lambda: f64) -> Option<f64> {
    if ki == 0.0 {
        return (1.0 - kp * lambda < 0.0).then_some(2.0);
    }
    let b = 2.0 - kp * lambda;
    let c = 1.0 - kp * lambda + ki * lambda;
    let disc = b * b - 4.0 * c;
    if disc >= 0.0 {
        // Real roots: oscillate (period 2) only if one is negative.
        let r1 = (b + disc.sqrt()) / 2.0;
        let r2 = (b - disc.sqrt()) / 2.0;
        return (r1 < 0.0 || r2 < 0.0).then_some(2.0);
    }
    let angle = (-disc).sqrt().atan2(b).abs();
    (angle > 0.0).then(|| core::f64::consts::TAU / angle)
}

/// The planner's model of `s`'s node law (gains, law, periods, the longest latency in
/// whole updates, loss, clamps), for setting [`crate::plan::settle`]'s worst-case bound beside
/// the forecast. A zero trim range is the smallest positive one to the planner.
#[must_use]
pub fn planner_model(s: &Setup) -> crate::plan::Model {
    let c = &s.config;
    let trim_ppm = f64::from(c.trim_limit_ppb()) / 1000.0;
    crate::plan::Model {
        law: c.law().into(),
        kp: c.kp().to_f64(),
        ki: c.ki().to_f64(),
        update_period_s: s.update_period_s(),
        phase_period_s: s.phase_period_s(),
        // The longest latency of any link direction, whole updates.
        delay_updates: (s.beacons.latency_ticks
            + s.beacons.latency_spread_ticks
            + s.beacons.asymmetry_ticks.div_ceil(2))
            / c.update_ticks(),
        success_prob: s.beacons.success_prob,
        slew_limit_turns: f64::from(c.slew_limit()) / 4_294_967_296.0,
        trim_limit_ppm: if trim_ppm > 0.0 {
            trim_ppm
        } else {
            f64::MIN_POSITIVE
        },
    }
}

/// The widest start spread of `s`, turns: the interval width for uniform start phases,
/// the largest pairwise wrapped difference for given ones (`0 ..= ½` then).
#[must_use]
pub fn start_spread_turns(s: &Setup) -> f64 {
    match &s.start {
        crate::sim::StartPhases::Uniform { spread_turns } => *spread_turns,
        crate::sim::StartPhases::Fixed(v) => replica::largest_pairwise(v, &mut Vec::new()),
    }
}
