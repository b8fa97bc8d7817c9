//! One sampled run of the forecast model: the node law stepped in `f64` in node
//! coordinates, on the real-time schedule the nodes' own timers give.
//!
//! Nothing here calls [`crate::Node`]: the law is written out again from its
//! specification (see the module docs of [`super`]) so that the forecast is an
//! independent model of the simulation, not a second run of the same code.

// Host-side code: every index comes from the adjacency built in `Replica::new`.
#![allow(clippy::indexing_slicing)]

use std::collections::{BinaryHeap, VecDeque};
use std::f64::consts::TAU;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::Law;
use crate::sim::{self, Crystals, StartPhases};

/// What the stepping needs from a scenario, in model units: time in nominal timer
/// ticks, phase in turns, phase relative to an ideal clock started at 0.
#[derive(Clone, Debug)]
pub(crate) struct Replica {
    /// Neighbour lists: node i hears `nbr[off[i]..off[i+1]]`.
    off: Vec<usize>,
    nbr: Vec<usize>,
    /// For receiver slot s (node i's neighbour j), the slot of i in j's list.
    back: Vec<usize>,
    reference: Option<usize>,
    /// Update interval M, ticks.
    m: f64,
    /// Turns per tick, `1/ticks_per_period`.
    r: f64,
    kp: f64,
    ki: f64,
    sine: bool,
    /// Slew limit, turns.
    slew: f64,
    /// Trim limit, turns per local tick.
    trim_limit: f64,
    /// Neighbour timeout, local ticks.
    timeout: f64,
    latency: f64,
    ts_jitter: i64,
    sched_jitter: i64,
    random_start: bool,
    p: f64,
    crystals: Crystals,
    start: StartPhases,
    /// Samples per run.
    pub(crate) horizon: usize,
}

impl Replica {
    pub(crate) fn new(s: &sim::Setup) -> Replica {
        let n = s.nodes();
        let mut lists: Vec<Vec<usize>> = vec![Vec::new(); n];
        for &(a, b) in s.links.pairs() {
            if let Some(l) = lists.get_mut(a) {
                l.push(b);
            }
            if let Some(l) = lists.get_mut(b) {
                l.push(a);
            }
        }
        let mut off = vec![0];
        let mut nbr = Vec::new();
        for l in &mut lists {
            l.sort_unstable();
            nbr.extend_from_slice(l);
            off.push(nbr.len());
        }
        let mut back = vec![0; nbr.len()];
        for i in 0..n {
            for s_ in off[i]..off[i + 1] {
                let j = nbr[s_];
                if let Some(pos) = nbr[off[j]..off[j + 1]].iter().position(|&x| x == i) {
                    back[s_] = off[j] + pos;
                }
            }
        }
        let c = &s.config;
        let r = 1.0 / f64::from(c.ticks_per_period());
        Replica {
            off,
            nbr,
            back,
            reference: s.links.reference(),
            m: f64::from(c.update_ticks()),
            r,
            kp: c.kp().to_f64(),
            ki: c.ki().to_f64(),
            sine: !matches!(c.law(), Law::Linear),
            slew: f64::from(c.slew_limit()) / 4_294_967_296.0,
            trim_limit: r * f64::from(c.trim_limit_ppb()) * 1e-9,
            timeout: f64::from(c.timeout_ticks()),
            latency: f64::from(s.beacons.latency_ticks),
            ts_jitter: i64::from(s.beacons.timestamp_jitter_ticks),
            sched_jitter: i64::from(s.schedule.jitter_ticks),
            random_start: s.schedule.random_start,
            p: s.beacons.success_prob,
            crystals: s.crystals.clone(),
            start: s.start.clone(),
            horizon: usize::try_from(s.horizon_updates).unwrap_or(usize::MAX),
        }
    }

    fn nodes(&self) -> usize {
        self.off.len() - 1
    }
}

/// A beacon on its way: the sender's phase right after its update, and when the
/// receiver's (jittered) timestamp says it arrived.
#[derive(Clone, Copy, Debug)]
struct Flight {
    /// Real arrival time, ticks.
    arrive: f64,
    /// Sender's relative phase at sending, turns.
    x: f64,
    /// Receiver's timestamp minus its true timer reading at arrival, ticks.
    stamp_err: f64,
}

/// A neighbour-table entry: Δ at observation plus the node's corrections then.
#[derive(Clone, Copy, Debug)]
struct Entry {
    anchored_diff: f64,
    /// Receiver's timestamp of the reception, local ticks.
    heard: f64,
}

#[derive(Clone, Copy, Debug)]
struct State {
    /// Relative phase at `t_last`, turns.
    x: f64,
    t_last: f64,
    /// Crystal error, fraction (ppm·10⁻⁶).
    e: f64,
    /// Trim in effect and next, turns per local tick.
    trim: f64,
    trim_next: f64,
    /// Sum of corrections, turns.
    corr: f64,
    /// Local ticks of the next update, counted from the timer origin of the run.
    next_local: f64,
}

impl State {
    /// Relative drift, turns per nominal tick.
    fn drift(&self, r: f64) -> f64 {
        r * self.e + self.trim * (1.0 + self.e)
    }
}

/// Time-ordered update queue entry (earliest first, ties by node index, as the
/// simulator orders equal instants).
#[derive(Clone, Copy, Debug, PartialEq)]
struct Due(f64, usize);

impl Eq for Due {}
impl PartialOrd for Due {
    fn partial_cmp(&self, other: &Self) -> Option<core::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Due {
    fn cmp(&self, other: &Self) -> core::cmp::Ordering {
        other.0.total_cmp(&self.0).then(other.1.cmp(&self.1))
    }
}

fn wrap(d: f64) -> f64 {
    d - d.round()
}

/// Largest pairwise wrapped difference of phases in turns (`0..=½`).
pub(crate) fn largest_pairwise(x: &[f64], scratch: &mut Vec<f64>) -> f64 {
    let Some(&first) = x.first() else { return 0.0 };
    let (mut lo, mut hi) = (0.0_f64, 0.0_f64);
    for &v in x {
        let d = wrap(v - first);
        lo = lo.min(d);
        hi = hi.max(d);
    }
    if hi - lo < 0.5 {
        return hi - lo;
    }
    scratch.clear();
    scratch.extend(x.iter().map(|v| v.rem_euclid(1.0)));
    scratch.sort_by(f64::total_cmp);
    let mut best = 0.0_f64;
    for &a in scratch.iter() {
        let target = (a + 0.5).rem_euclid(1.0);
        let at = scratch.partition_point(|&y| y < target);
        let len = scratch.len();
        for idx in [at % len, (at + len - 1) % len] {
            if let Some(&b) = scratch.get(idx) {
                best = best.max(wrap(b - a).abs());
            }
        }
    }
    best
}

/// One run of the model from the generator's stream `run`: the largest pairwise phase
/// error at each sample `k` (at `(k + ½)` update intervals), turns.
pub(crate) fn run(setup: &Replica, seed: u64, run: u64) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(run);
    let n = setup.nodes();
    let m = setup.m;
    let r = setup.r;
    let ppm: Vec<f64> = match &setup.crystals {
        Crystals::Identical { ppm } => vec![*ppm; n],
        Crystals::Uniform { tolerance_ppm } => (0..n)
            .map(|_| (rng.random::<f64>() * 2.0 - 1.0) * tolerance_ppm)
            .collect(),
        Crystals::Fixed(v) => v.clone(),
    };
    let mut st: Vec<State> = (0..n)
        .map(|i| {
            let e = if setup.reference == Some(i) {
                0.0
            } else {
                ppm[i] * 1e-6
            };
            let x = match &setup.start {
                StartPhases::Uniform { spread_turns } => (rng.random::<f64>() - 0.5) * spread_turns,
                StartPhases::Fixed(v) => v[i],
            };
            let first = if setup.random_start {
                rng.random_range(0..setup.m as u64) as f64
            } else {
                0.0
            };
            State {
                x,
                t_last: 0.0,
                e,
                trim: 0.0,
                trim_next: 0.0,
                corr: 0.0,
                next_local: first,
            }
        })
        .collect();
    let slots = setup.nbr.len();
    let mut flights: Vec<VecDeque<Flight>> = vec![VecDeque::new(); slots];
    let mut table: Vec<Option<Entry>> = vec![None; slots];
    let mut queue: BinaryHeap<Due> = st
        .iter()
        .enumerate()
        .map(|(i, s)| Due(s.next_local / (1.0 + s.e), i))
        .collect();
    let mut errors = Vec::with_capacity(setup.horizon);
    let mut phases = vec![0.0; n];
    let mut scratch = Vec::new();
    for k in 0..setup.horizon {
        let t_sample = (k as f64 + 0.5) * m;
        while let Some(&Due(t, i)) = queue.peek() {
            if t >= t_sample {
                break;
            }
            queue.pop();
            update(setup, &mut st, &mut flights, &mut table, &mut rng, t, i);
            if let Some(s) = st.get(i) {
                queue.push(Due(s.next_local / (1.0 + s.e), i));
            }
        }
        for (p, s) in phases.iter_mut().zip(&st) {
            // The simulator reads each node at its completed timer tick.
            let local = t_sample * (1.0 + s.e);
            let q = local - local.floor();
            *p = s.x + s.drift(r) * (t_sample - s.t_last) - q * (r + s.trim);
        }
        errors.push(largest_pairwise(&phases, &mut scratch));
    }
    errors
}

/// Node `i`'s update at real time `t` (ticks): take the beacons that arrived strictly
/// before, apply the law, schedule the next update, send beacons.
fn update(
    setup: &Replica,
    st: &mut [State],
    flights: &mut [VecDeque<Flight>],
    table: &mut [Option<Entry>],
    rng: &mut ChaCha8Rng,
    t: f64,
    i: usize,
) {
    let r = setup.r;
    let (lo, hi) = (setup.off[i], setup.off[i + 1]);
    let Some(me) = st.get_mut(i) else { return };
    // Advance at the rate in effect over the last interval.
    me.x += me.drift(r) * (t - me.t_last);
    me.t_last = t;
    let now_local = t * (1.0 + me.e);
    let is_ref = setup.reference == Some(i);
    for s in lo..hi {
        let q = &mut flights[s];
        while q.front().is_some_and(|f| f.arrive < t) {
            let Some(f) = q.pop_front() else { break };
            if is_ref {
                continue;
            }
            let heard = f.arrive * (1.0 + me.e) + f.stamp_err;
            // The node extrapolates the sent phase over `latency + (now − stamp)` of
            // its own ticks at its own rate; relative to an ideal clock that leaves
            // the crystal's share of the stamp-to-now span and the stamp error.
            let span = setup.latency + (now_local - heard);
            let sent_at = f.arrive - setup.latency;
            let est = f.x + (r + me.trim) * span - r * (t - sent_at);
            let diff = est - me.x;
            let entry = Entry {
                anchored_diff: diff + me.corr,
                heard,
            };
            match &mut table[s] {
                Some(held) if held.heard > heard => {}
                slot => *slot = Some(entry),
            }
        }
    }
    if !is_ref {
        me.trim = me.trim_next;
        let mut sum = 0.0;
        let mut used = 0;
        for slot in &mut table[lo..hi] {
            let Some(e) = *slot else { continue };
            if now_local - e.heard > setup.timeout {
                *slot = None;
                continue;
            }
            let d = wrap(e.anchored_diff - me.corr);
            sum += if setup.sine { (TAU * d).sin() / TAU } else { d };
            used += 1;
        }
        if used > 0 {
            let raw = setup.kp * sum;
            let step = raw.clamp(-setup.slew, setup.slew);
            me.x += step;
            me.corr += step;
            if step == raw {
                me.trim_next =
                    (me.trim + setup.ki * sum / setup.m).clamp(-setup.trim_limit, setup.trim_limit);
            }
        }
    }
    let jitter = if setup.sched_jitter > 0 {
        rng.random_range(-setup.sched_jitter..=setup.sched_jitter) as f64
    } else {
        0.0
    };
    me.next_local += setup.m + jitter;
    let x = me.x;
    // Beacons to every neighbour, each lost with probability 1 − p.
    for s in lo..hi {
        let j = setup.nbr[s];
        if setup.p < 1.0 && rng.random::<f64>() >= setup.p {
            continue;
        }
        let arrive = t + setup.latency;
        let ej = st.get(j).map_or(0.0, |s| s.e);
        let local = arrive * (1.0 + ej);
        let mut stamp_err = local.round() - local;
        if setup.ts_jitter > 0 {
            stamp_err += rng.random_range(-setup.ts_jitter..=setup.ts_jitter) as f64;
        }
        flights[setup.back[s]].push_back(Flight {
            arrive,
            x,
            stamp_err,
        });
    }
}
