//! Lock detection: the largest pairwise wrapped phase difference, between neighbours and
//! across the whole network, within a tolerance for a hold window.
//!
//! Phase error is always the largest pairwise wrapped difference, in counts of the
//! `u32` binary angle (2^32 counts = one turn) or in turns.

use super::scenario::LockCriterion;
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

/// A confirmed lock.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Lock {
    /// The lock instant: the first sample, in nominal update intervals from the start,
    /// from which the error stayed within the tolerance for the whole hold window.
    pub at_updates: u64,
    /// Mean over the hold window of the largest pairwise difference across the network,
    /// turns.
    pub residual_turns: f64,
    /// Mean over the hold window of the largest difference across a link, turns.
    pub residual_link_turns: f64,
    /// Largest pairwise difference seen in the hold window, turns.
    pub worst_turns: f64,
    /// Phase jitter after lock: root-mean-square over nodes and hold-window samples of
    /// each node's deviation from the network mean, less that node's mean deviation over
    /// the window (the fluctuating part of its offset), turns.
    pub jitter_turns: f64,
}

/// Follows the sampled error of one run and finds the lock instant.
#[derive(Clone, Debug)]
pub struct LockTracker {
    tolerance: u32,
    hold: u64,
    start: Option<u64>,
    samples: u64,
    sum_network: f64,
    sum_link: f64,
    worst: u32,
    sum_dev: Vec<f64>,
    sum_dev_sq: Vec<f64>,
    lock: Option<Lock>,
}

impl LockTracker {
    /// A tracker for `nodes` nodes with `criterion` (tolerance rounded down to counts).
    #[must_use]
    pub fn new(criterion: &LockCriterion, nodes: usize) -> LockTracker {
        // The scenario check keeps the tolerance in (0, 0.5) turn.
        let tolerance = (criterion.tolerance_turns.clamp(0.0, 0.5) * TURN) as u32;
        LockTracker {
            tolerance,
            hold: criterion.hold_updates,
            start: None,
            samples: 0,
            sum_network: 0.0,
            sum_link: 0.0,
            worst: 0,
            sum_dev: vec![0.0; nodes],
            sum_dev_sq: vec![0.0; nodes],
            lock: None,
        }
    }

    /// The tolerance in counts.
    #[must_use]
    pub fn tolerance_counts(&self) -> u32 {
        self.tolerance
    }

    /// Forget any lock or candidate (after a disturbance such as a reboot): the search
    /// starts again from the next sample.
    pub fn restart(&mut self) {
        self.start = None;
        self.lock = None;
        self.clear_window();
    }

    fn clear_window(&mut self) {
        self.samples = 0;
        self.sum_network = 0.0;
        self.sum_link = 0.0;
        self.worst = 0;
        self.sum_dev.iter_mut().for_each(|x| *x = 0.0);
        self.sum_dev_sq.iter_mut().for_each(|x| *x = 0.0);
    }

    /// Feed sample `at_updates` with the network error and the link error (counts) and
    /// the phases of the live nodes at that instant (`None` for a node that is down).
    /// Returns true once the lock is confirmed (and keeps returning true).
    pub fn sample(
        &mut self,
        at_updates: u64,
        network: u32,
        link: u32,
        phases: &[Option<Phase>],
    ) -> bool {
        if self.lock.is_some() {
            return true;
        }
        if network > self.tolerance || link > self.tolerance {
            if self.start.is_some() {
                self.start = None;
                self.clear_window();
            }
            return false;
        }
        let start = *self.start.get_or_insert(at_updates);
        self.samples += 1;
        self.sum_network += f64::from(network);
        self.sum_link += f64::from(link);
        self.worst = self.worst.max(network);
        // Deviations from the network mean, measured from the first live node (all lie
        // within the tolerance, below half a turn, of it).
        if let Some(reference) = phases.iter().flatten().next() {
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
        if at_updates.saturating_sub(start) >= self.hold {
            let m = self.samples as f64;
            let nodes = self.sum_dev.len().max(1) as f64;
            let var: f64 = self
                .sum_dev
                .iter()
                .zip(&self.sum_dev_sq)
                .map(|(s, q)| (q / m - (s / m) * (s / m)).max(0.0))
                .sum::<f64>()
                / nodes;
            self.lock = Some(Lock {
                at_updates: start,
                residual_turns: self.sum_network / m / TURN,
                residual_link_turns: self.sum_link / m / TURN,
                worst_turns: f64::from(self.worst) / TURN,
                jitter_turns: var.sqrt() / TURN,
            });
            return true;
        }
        false
    }

    /// The lock instant, one candidate sample in progress: the sample from which the
    /// error has stayed within the tolerance so far.
    #[must_use]
    pub fn candidate(&self) -> Option<u64> {
        self.start
    }

    /// The confirmed lock, if any.
    #[must_use]
    pub fn lock(&self) -> Option<Lock> {
        self.lock
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
    fn lock_needs_the_whole_hold_window() {
        let c = LockCriterion {
            tolerance_turns: 0.01,
            hold_updates: 3,
        };
        let mut t = LockTracker::new(&c, 2);
        let small = (0.005 * TURN) as u32;
        let big = (0.02 * TURN) as u32;
        let ph = [Some(p(0.0)), Some(p(0.005))];
        assert!(!t.sample(0, big, big, &ph));
        assert!(!t.sample(1, small, small, &ph));
        assert!(!t.sample(2, big, small, &ph)); // breaks the candidate
        for k in 3..6 {
            assert!(!t.sample(k, small, small, &ph));
        }
        assert!(t.sample(6, small, small, &ph));
        let lock = t.lock().unwrap();
        assert_eq!(lock.at_updates, 3);
        assert!((lock.residual_turns - 0.005).abs() < 1e-9);
        // Constant offsets: no jitter.
        assert!(lock.jitter_turns < 1e-12);
    }
}
