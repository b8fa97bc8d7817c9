//! Phase error and settling.
//!
//! Phase error is always the largest pairwise wrapped difference, in counts of the
//! `u32` binary angle (2^32 counts = one turn) or in turns, across the whole network
//! and across links.
//!
//! Settling is defined on [`SettleTracker`].

use super::setup::SettleCriterion;
use crate::Phase;

/// Counts per turn as `f64`.
pub(crate) const TURN: f64 = 4_294_967_296.0;

/// Largest pairwise wrapped difference `max |θ_a − θ_b|` among `phases`, counts
/// (`0 ..= 2^31`; half a turn is the most two phases can differ). `scratch` is reused
/// between calls to avoid allocating.
///
/// Exact. When every phase lies within half a turn of the first (the usual case near
/// lock) it takes one pass; otherwise it sorts and, for each phase, looks up the one
/// nearest its antipode.
#[must_use]
pub fn largest_pairwise_diff(phases: &[Phase], scratch: &mut Vec<u32>) -> u32 {
    let Some(first) = phases.first() else {
        return 0;
    };
    let (mut lo, mut hi) = (0i64, 0i64);
    for p in phases {
        let d = i64::from(p.diff(*first));
        lo = lo.min(d);
        hi = hi.max(d);
    }
    let span = hi - lo;
    if span < 1 << 31 {
        // Every pairwise signed difference is below half a turn, so it is the wrapped one.
        return span as u32;
    }
    scratch.clear();
    scratch.extend(phases.iter().map(|p| p.counts()));
    scratch.sort_unstable();
    let mut best = 0u32;
    for &x in scratch.iter() {
        let target = x.wrapping_add(1 << 31);
        let at = scratch.partition_point(|&y| y < target);
        let len = scratch.len();
        for idx in [at % len, (at + len - 1) % len] {
            if let Some(&y) = scratch.get(idx) {
                best = best.max(wrapped_abs(y.wrapping_sub(x)));
            }
        }
    }
    best
}

/// `|θ_a − θ_b|` wrapped, counts (`0 ..= 2^31`).
#[must_use]
pub(crate) fn wrapped_abs(diff: u32) -> u32 {
    (diff as i32).unsigned_abs()
}

/// Largest wrapped difference across any link, counts.
#[must_use]
pub fn largest_neighbour_diff(phases: &[Phase], links: &[(usize, usize)]) -> u32 {
    links
        .iter()
        .filter_map(|&(a, b)| Some(phases.get(a)?.diff(*phases.get(b)?).unsigned_abs()))
        .max()
        .unwrap_or(0)
}

/// Winding number of phases around a ring in node order:
/// `Σ_i wrap(θ_{i+1} − θ_i) / 2^32` (with `θ_N = θ_0`). A `q`-twisted state winds `q`
/// times; a locked ring winds 0 (Wiley, Strogatz & Girvan, Chaos 16 (2006)).
#[must_use]
pub fn winding_number(phases: &[Phase]) -> i64 {
    let Some(first) = phases.first() else {
        return 0;
    };
    let mut sum = 0i64;
    for (a, b) in phases.iter().zip(phases.iter().skip(1).chain(Some(first))) {
        sum += i64::from(b.diff(*a));
    }
    // The sum of wrapped steps around a closed loop is a whole number of turns.
    sum.div_euclid(1 << 32) + i64::from(sum.rem_euclid(1 << 32) >= 1 << 31)
}

/// Upper bound on the steady-window samples one run keeps for the noise floor: the
/// second half of the horizon, decimated by [`steady_stride`], holds at most this many.
pub const STEADY_SAMPLES: u64 = 1024;

/// The decimation of steady-window samples for a horizon of `horizon_updates` samples:
/// `⌈⌊H/2⌋ / STEADY_SAMPLES⌉`, at least 1. Only samples whose index is a multiple of
/// the stride enter the noise floor and the per-node jitter (1 up to a horizon of 2,049
/// samples, so short runs keep every sample).
#[must_use]
pub fn steady_stride(horizon_updates: u64) -> u64 {
    (horizon_updates / 2).div_ceil(STEADY_SAMPLES).max(1)
}

/// First sample of the final fifth of a horizon of `horizon_updates` samples:
/// `H − ⌈H/5⌉` (the final fifth is never empty). A run whose last outside sample is at
/// or after it has not settled.
#[must_use]
pub fn final_fifth_start(horizon_updates: u64) -> u64 {
    horizon_updates - horizon_updates.div_ceil(5)
}

/// A run that settled: when, and what its steady window looks like.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Settle {
    /// The settling instant, nominal update intervals from the start: the sample right
    /// after the last sample outside the tolerance band (0 if none was outside). Below
    /// [`final_fifth_start`] of the horizon.
    pub at_updates: u64,
    /// First entry: the first sample within the band, nominal update intervals from the
    /// start (`≤ at_updates`).
    pub first_entry_updates: u64,
    /// Start of the steady window, `max(at_updates, ⌊horizon/2⌋)`, update intervals; the
    /// window runs to the end of the horizon.
    pub steady_from_updates: u64,
    /// Mean over every sample of the steady window of the largest pairwise difference
    /// across the network, turns (`0 ..= tolerance`).
    pub residual_turns: f64,
    /// Mean over every sample of the steady window of the largest difference across a
    /// link, turns.
    pub residual_link_turns: f64,
    /// Largest pairwise difference seen in the steady window, turns.
    pub worst_turns: f64,
    /// Phase jitter in the steady window: root-mean-square over nodes and strided
    /// samples (every [`steady_stride`]-th) of each node's deviation from the network
    /// mean, less that node's mean deviation over the window (the fluctuating part of its
    /// offset), turns.
    pub jitter_turns: f64,
}

/// Running sums over the current steady window of a settling candidate.
#[derive(Clone, Debug, Default)]
struct Window {
    samples: u64,
    sum_network: f64,
    sum_link: f64,
    worst: u32,
    strided: u64,
    sum_dev: Vec<f64>,
    sum_dev_sq: Vec<f64>,
}

impl Window {
    fn clear(&mut self) {
        self.samples = 0;
        self.sum_network = 0.0;
        self.sum_link = 0.0;
        self.worst = 0;
        self.strided = 0;
        self.sum_dev.iter_mut().for_each(|x| *x = 0.0);
        self.sum_dev_sq.iter_mut().for_each(|x| *x = 0.0);
    }

    /// Add one inside sample; `phases` (all live) only on strided samples.
    fn add(&mut self, network: u32, link: u32, phases: Option<&[Option<Phase>]>) {
        self.samples += 1;
        self.sum_network += f64::from(network);
        self.sum_link += f64::from(link);
        self.worst = self.worst.max(network);
        let Some(phases) = phases else {
            return;
        };
        // Deviations from the network mean, measured from the first node (every node is
        // up and within the tolerance, below half a turn, of it).
        let Some(reference) = phases.iter().flatten().next() else {
            return;
        };
        self.strided += 1;
        let live = phases.iter().flatten().count() as f64;
        let mean = phases
            .iter()
            .flatten()
            .map(|p| f64::from(p.diff(*reference)))
            .sum::<f64>()
            / live;
        for ((p, s), q) in phases
            .iter()
            .zip(self.sum_dev.iter_mut())
            .zip(self.sum_dev_sq.iter_mut())
        {
            if let Some(p) = p {
                let dev = f64::from(p.diff(*reference)) - mean;
                *s += dev;
                *q += dev * dev;
            }
        }
    }

    /// RMS of the fluctuating part of each node's deviation, counts.
    fn jitter(&self) -> f64 {
        if self.strided == 0 {
            return 0.0;
        }
        let m = self.strided as f64;
        let nodes = self.sum_dev.len().max(1) as f64;
        let var: f64 = self
            .sum_dev
            .iter()
            .zip(&self.sum_dev_sq)
            .map(|(s, q)| (q / m - (s / m) * (s / m)).max(0.0))
            .sum::<f64>()
            / nodes;
        var.sqrt()
    }
}

/// Follows the sampled error of one run over its horizon and finds the settling
/// instant, the first entry and the steady window.
///
/// Settling is meant as control engineering means it (common practice, no source): the
/// instant after which the error stays within the tolerance band for good, not the first
/// time it enters the band. A run of `H` samples (sample `k` at `k + ½` update
/// intervals, `k < H`) judges every sample *inside* when both errors are within the
/// tolerance and every node is up, *outside* otherwise; a reboot counts every sample up
/// to the rejoin as outside ([`SettleTracker::restart`]).
///
/// - **Settling instant**: the sample right after the last outside sample (0 if no
///   sample was outside).
/// - **Not settled**: the last outside sample lies in the final fifth of the horizon (the
///   last `⌈H/5⌉` samples, from [`final_fifth_start`] on), which includes a run outside
///   at its end. A run needs that quiet tail to show that it stays in the band.
/// - **First entry**: the first inside sample since power-up (a reboot does not reset
///   it); never later than the settling instant.
/// - **Steady window**: from `max(settling instant, ⌊H/2⌋)` to the end for a settled
///   run, the final fifth for a run that never settled. Its largest pairwise errors,
///   taken every [`steady_stride`]`(H)`-th sample (at most about [`STEADY_SAMPLES`] a
///   run), are the run's contribution to the noise floor.
///
/// Feed every sample in order with [`SettleTracker::sample`]; the verdict
/// ([`SettleTracker::settle`]) is given once the horizon is covered. No allocation per
/// sample: the steady-window store is reserved up front.
#[derive(Clone, Debug)]
pub struct SettleTracker {
    tolerance: u32,
    horizon: u64,
    half: u64,
    final_fifth: u64,
    stride: u64,
    /// First strided sample index at or after `half`.
    first_steady: u64,
    /// Samples fed (index of the next one).
    fed: u64,
    first_entry: Option<u64>,
    last_exit: Option<u64>,
    /// Sums over `[max(last exit + 1, half), fed)`.
    window: Window,
    /// Network error of strided samples from `first_steady` on, counts.
    steady: Vec<u32>,
}

impl SettleTracker {
    /// A tracker for `nodes` nodes with `criterion` (tolerance rounded down to counts)
    /// over a horizon of `horizon_updates` samples.
    #[must_use]
    pub fn new(criterion: &SettleCriterion, nodes: usize, horizon_updates: u64) -> SettleTracker {
        // The scenario check keeps the tolerance in (0, 0.5) turn.
        let tolerance = (criterion.tolerance_turns.clamp(0.0, 0.5) * TURN) as u32;
        let half = horizon_updates / 2;
        let stride = steady_stride(horizon_updates);
        let first_steady = half.div_ceil(stride) * stride;
        let keep = horizon_updates
            .saturating_sub(first_steady)
            .div_ceil(stride);
        SettleTracker {
            tolerance,
            horizon: horizon_updates,
            half,
            final_fifth: final_fifth_start(horizon_updates),
            stride,
            first_steady,
            fed: 0,
            first_entry: None,
            last_exit: None,
            window: Window {
                sum_dev: vec![0.0; nodes],
                sum_dev_sq: vec![0.0; nodes],
                ..Window::default()
            },
            steady: Vec::with_capacity(usize::try_from(keep).unwrap_or(0)),
        }
    }

    /// The tolerance in counts.
    #[must_use]
    pub fn tolerance_counts(&self) -> u32 {
        self.tolerance
    }

    /// A disturbance (a rebooted node rejoining): every sample fed so far counts as
    /// outside, so settling starts again from the next sample. The first entry stays.
    pub fn restart(&mut self) {
        if let Some(last) = self.fed.checked_sub(1) {
            self.last_exit = Some(last);
        }
        self.window.clear();
    }

    /// Feed sample `at_updates` (the next index, from 0 up) with the network error and
    /// the link error (counts) and the phases at that instant (`None` for a node that is
    /// down). Returns whether the sample is inside the band: both errors within the
    /// tolerance and every node up.
    pub fn sample(
        &mut self,
        at_updates: u64,
        network: u32,
        link: u32,
        phases: &[Option<Phase>],
    ) -> bool {
        let k = at_updates;
        self.fed = k.saturating_add(1);
        let inside = network <= self.tolerance
            && link <= self.tolerance
            && phases.iter().all(Option::is_some);
        if inside {
            self.first_entry.get_or_insert(k);
        } else {
            self.last_exit = Some(k);
            self.window.clear();
        }
        if k >= self.half && k < self.horizon {
            let strided = k.is_multiple_of(self.stride);
            if strided {
                self.steady.push(network);
            }
            if inside {
                self.window.add(network, link, strided.then_some(phases));
            }
        }
        inside
    }

    /// The first sample inside the band so far.
    #[must_use]
    pub fn first_entry(&self) -> Option<u64> {
        self.first_entry
    }

    /// The last sample outside the band so far.
    #[must_use]
    pub fn last_exit(&self) -> Option<u64> {
        self.last_exit
    }

    /// End the run here as if every sample still to come were inside the band (and
    /// none of them in the steady window): the verdict is then what the whole run gives
    /// when it never leaves the band again. For a caller that stops a run once it has
    /// stayed deep inside the band long enough (see [`crate::props`]); the steady window
    /// holds only the samples fed.
    pub fn assume_inside_to_horizon(&mut self) {
        self.fed = self.fed.max(self.horizon);
    }

    /// Whether the samples fed cover the whole horizon (the verdict is final).
    #[must_use]
    pub fn is_complete(&self) -> bool {
        self.fed >= self.horizon
    }

    /// The verdict: `Some` for a run that settled, `None` for one that did not or whose
    /// horizon is not yet covered.
    #[must_use]
    pub fn settle(&self) -> Option<Settle> {
        if !self.is_complete() {
            return None;
        }
        let at = match self.last_exit {
            Some(e) if e >= self.final_fifth => return None,
            Some(e) => e + 1,
            None => 0,
        };
        let m = self.window.samples.max(1) as f64;
        Some(Settle {
            at_updates: at,
            first_entry_updates: self.first_entry.unwrap_or(at),
            steady_from_updates: at.max(self.half),
            residual_turns: self.window.sum_network / m / TURN,
            residual_link_turns: self.window.sum_link / m / TURN,
            worst_turns: f64::from(self.window.worst) / TURN,
            jitter_turns: self.window.jitter() / TURN,
        })
    }

    /// The largest pairwise errors of the steady window at strided samples, counts: from
    /// `max(settling instant, ⌊H/2⌋)` for a settled run, from the final fifth otherwise
    /// (or while the horizon is not yet covered).
    #[must_use]
    pub fn steady_counts(&self) -> &[u32] {
        let from = self
            .settle()
            .map_or(self.final_fifth, |s| s.steady_from_updates);
        let skip = from.saturating_sub(self.first_steady).div_ceil(self.stride);
        let skip = usize::try_from(skip).unwrap_or(usize::MAX);
        self.steady.get(skip..).unwrap_or(&[])
    }

    /// The stride of the steady-window samples ([`steady_stride`] of the horizon).
    #[must_use]
    pub fn stride(&self) -> u64 {
        self.stride
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(turns: f64) -> Phase {
        Phase::from_counts((turns.rem_euclid(1.0) * TURN) as u64 as u32)
    }

    /// Exhaustive pairwise reference, written separately from the fast path.
    fn brute(phases: &[Phase]) -> u32 {
        let mut best = 0;
        for a in phases {
            for b in phases {
                best = best.max(a.diff(*b).unsigned_abs());
            }
        }
        best
    }

    #[test]
    fn pairwise_matches_brute_force_on_and_off_the_fast_path() {
        let mut scratch = Vec::new();
        let cases: [&[f64]; 5] = [
            &[0.1, 0.12, 0.05],
            &[0.95, 0.05, 0.0],
            &[0.0, 0.3, 0.6],
            &[0.0, 0.25, 0.5, 0.75],
            &[0.1, 0.6],
        ];
        for case in cases {
            let phases: Vec<Phase> = case.iter().map(|&t| p(t)).collect();
            assert_eq!(
                largest_pairwise_diff(&phases, &mut scratch),
                brute(&phases),
                "{case:?}"
            );
        }
        // Wrapped across zero: 0.95 and 0.05 are a tenth of a turn apart.
        let near = largest_pairwise_diff(&[p(0.95), p(0.05)], &mut scratch);
        assert!((f64::from(near) / TURN - 0.1).abs() < 1e-9);
        // A pseudo-random sweep (fixed multiplicative sequence).
        let mut x = 12_345u32;
        for _ in 0..200 {
            let phases: Vec<Phase> = (0..7)
                .map(|_| {
                    x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
                    Phase::from_counts(x)
                })
                .collect();
            assert_eq!(largest_pairwise_diff(&phases, &mut scratch), brute(&phases));
        }
    }

    #[test]
    fn winding_counts_twists() {
        // A 1-twist on 8 nodes: phase k/8.
        let one: Vec<Phase> = (0..8).map(|k| p(f64::from(k) / 8.0)).collect();
        assert_eq!(winding_number(&one), 1);
        let minus_two: Vec<Phase> = (0..8).map(|k| p(-2.0 * f64::from(k) / 8.0)).collect();
        assert_eq!(winding_number(&minus_two), -2);
        let flat = [p(0.1), p(0.11), p(0.09)];
        assert_eq!(winding_number(&flat), 0);
    }

    #[test]
    fn steady_window_figures_of_constant_offsets() {
        // Horizon 20: half 10, final fifth from 16. Outside up to sample 11, then two
        // nodes a constant 0.005 turn apart: settled at 12, steady window 12..20.
        let c = SettleCriterion {
            tolerance_turns: 0.01,
        };
        let mut t = SettleTracker::new(&c, 2, 20);
        let small = (0.005 * TURN) as u32;
        let big = (0.02 * TURN) as u32;
        let ph = [Some(p(0.0)), Some(p(0.005))];
        for k in 0..20 {
            let e = if k <= 11 && k != 3 { big } else { small };
            t.sample(k, e, e, &ph);
        }
        let s = t.settle().unwrap();
        assert_eq!((s.at_updates, s.first_entry_updates), (12, 3));
        assert_eq!(s.steady_from_updates, 12);
        assert!((s.residual_turns - f64::from(small) / TURN).abs() < 1e-12);
        assert!((s.worst_turns - f64::from(small) / TURN).abs() < 1e-12);
        // Constant offsets: no jitter.
        assert!(s.jitter_turns < 1e-12);
        assert_eq!(t.steady_counts(), &[small; 8]);
    }
}
