//! One sampled run of the forecast model: the node law stepped in `f64` in node
//! coordinates, on the real-time schedule the nodes' own timers give.
//!
//! Nothing here calls [`crate::Node`]: the law is written out again from its
//! specification (see the module docs of [`super`]) so that the forecast is an
//! independent model of the simulation, not a second run of the same code.

// Host-side code: every index comes from the adjacency built in `Replica::new`.
#![allow(clippy::indexing_slicing)]

use std::collections::VecDeque;
use std::f64::consts::TAU;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::Law;
use crate::sim::{self, Crystals, Stamping, StartPhases};

/// What the stepping needs from a scenario, in model units: time in nominal timer
/// ticks, phase in turns, phase relative to an ideal clock started at 0.
#[derive(Clone, Debug)]
pub(crate) struct Replica {
    /// Neighbour lists: node i hears `nbr[off[i]..off[i+1]]`.
    off: Vec<usize>,
    nbr: Vec<usize>,
    /// For receiver slot s (node i's neighbour j), the slot of i in j's list.
    back: Vec<usize>,
    /// Coupling weight of each receiver slot's link, as the node applies it (Q16.16).
    weight: Vec<f64>,
    /// `true` at each reference node (beacons the ideal phase, never adjusts).
    reference: Vec<bool>,
    /// Update interval M, ticks.
    m: f64,
    /// Turns per tick, `1/ticks_per_period`.
    r: f64,
    kp: f64,
    ki: f64,
    /// Trim leak per update, fraction of the trim.
    leak: f64,
    sine: bool,
    /// Slew limit, turns.
    slew: f64,
    /// Trim limit, turns per local tick.
    trim_limit: f64,
    /// Neighbour timeout, local ticks.
    timeout: f64,
    /// Most negative corrected round trip taken, `⌊timeout/8⌋` local ticks.
    round_trip_floor: f64,
    /// Shortest link latency, nominal ticks.
    latency: f64,
    /// Width of the per-link latency draw, nominal ticks.
    latency_spread: f64,
    /// Largest difference between a link's two directions, nominal ticks.
    asymmetry: f64,
    /// Whether receivers are told each link's mean latency.
    latency_known: bool,
    /// Version-2 beacons: send stamps, one echo per frame, measured delays.
    two_way: bool,
    /// Weight of a new delay sample, `2^−smoothing`.
    smoothing_weight: f64,
    /// Receptions stamped with completed ticks (else the nearest).
    completed: bool,
    ts_jitter: i64,
    /// Late stamps: probability per reception and the largest lateness, ticks.
    late_p: f64,
    late_max: i64,
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
        let weight = (0..n)
            .flat_map(|i| (off[i]..off[i + 1]).map(move |s_| (i, s_)))
            .map(|(i, s_)| s.links.weight(i, nbr[s_]))
            .collect();
        let c = &s.config;
        let r = 1.0 / f64::from(c.ticks_per_period());
        Replica {
            off,
            nbr,
            back,
            weight,
            reference: (0..s.nodes()).map(|i| s.links.is_reference(i)).collect(),
            m: f64::from(c.update_ticks()),
            r,
            kp: c.kp().to_f64(),
            ki: c.ki().to_f64(),
            leak: c.leak().to_f64(),
            sine: !matches!(c.law(), Law::Linear),
            slew: f64::from(c.slew_limit()) / 4_294_967_296.0,
            trim_limit: r * f64::from(c.trim_limit_ppb()) * 1e-9,
            timeout: f64::from(c.timeout_ticks()),
            round_trip_floor: (f64::from(c.timeout_ticks()) / 8.0).floor(),
            latency: f64::from(s.beacons.latency_ticks),
            latency_spread: f64::from(s.beacons.latency_spread_ticks),
            asymmetry: f64::from(s.beacons.asymmetry_ticks),
            latency_known: s.beacons.latency_known,
            two_way: s.beacons.two_way,
            smoothing_weight: 0.5_f64.powi(i32::from(c.delay_smoothing())),
            completed: s.beacons.stamping == Stamping::CompletedTicks,
            ts_jitter: i64::from(s.beacons.timestamp_jitter_ticks),
            late_p: s.beacons.late_stamp_fraction,
            late_max: i64::from(s.beacons.late_stamp_max_ticks),
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
    /// Real sending time, ticks.
    sent_at: f64,
    /// Sender's relative phase at sending, turns.
    x: f64,
    /// Receiver's timestamp minus its true timer reading at arrival, ticks.
    stamp_err: f64,
    /// Version-2 timing: the sender's own send stamp (its local ticks) and its trim in
    /// effect as a fraction of the nominal rate.
    tx_local: f64,
    trim_frac: f64,
    /// The echo of the receiver's own beacon, when this frame carries it for this
    /// receiver: that beacon's send stamp (receiver's ticks) and the sender's held ticks.
    echo: Option<(f64, f64)>,
}

/// A neighbour-table entry: Δ at observation plus the node's corrections then, and the
/// link's two-way timing state.
#[derive(Clone, Copy, Debug)]
struct Entry {
    anchored_diff: f64,
    /// Receiver's timestamp of the reception, local ticks.
    heard: f64,
    /// The neighbour's send stamp of the last beacon heard, when it carried timing.
    their_tx: Option<f64>,
    /// Smoothed one-way delay beyond the told latency, local ticks; `None` before the
    /// first echo.
    delay: Option<f64>,
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
    /// The neighbour (index into its list) the next beacon echoes.
    echo_next: usize,
}

impl State {
    /// Relative drift, turns per nominal tick.
    fn drift(&self, r: f64) -> f64 {
        r * self.e + self.trim * (1.0 + self.e)
    }
}

/// The nodes' next update instants, earliest first, ties by node index (as the
/// simulator orders equal instants).
///
/// Every node is in the queue once, and a node that updates is due again about an
/// update interval later, behind nearly every other: the order changes by a few places
/// at a time, so a sorted ring with insertion from the back costs a few comparisons per
/// update where a binary heap costs a sift through all its levels. The order is the
/// heap's exactly (the key is total: instant by `total_cmp`, then index).
struct DueQueue {
    at: Vec<f64>,
    order: VecDeque<usize>,
}

impl DueQueue {
    fn new(at: impl IntoIterator<Item = f64>) -> DueQueue {
        let at: Vec<f64> = at.into_iter().collect();
        let mut order: Vec<usize> = (0..at.len()).collect();
        order.sort_by(|&a, &b| Self::key_cmp(&at, a, b));
        DueQueue {
            at,
            order: order.into(),
        }
    }

    fn key_cmp(at: &[f64], a: usize, b: usize) -> core::cmp::Ordering {
        let t = |i: usize| at.get(i).copied().unwrap_or(f64::INFINITY);
        t(a).total_cmp(&t(b)).then(a.cmp(&b))
    }

    /// The earliest node and its instant, if due strictly before `t`.
    fn first_before(&self, t: f64) -> Option<(f64, usize)> {
        let &i = self.order.front()?;
        let at = self.at.get(i).copied()?;
        (at < t).then_some((at, i))
    }

    /// Move the earliest node to its next instant `at` (`None`: out of the queue).
    fn reschedule_first(&mut self, at: Option<f64>) {
        let (Some(i), Some(at)) = (self.order.pop_front(), at) else {
            return;
        };
        if let Some(slot) = self.at.get_mut(i) {
            *slot = at;
        }
        let mut pos = self.order.len();
        while pos > 0 {
            let Some(&before) = self.order.get(pos - 1) else {
                break;
            };
            if Self::key_cmp(&self.at, before, i).is_gt() {
                pos -= 1;
            } else {
                break;
            }
        }
        self.order.insert(pos, i);
    }
}

fn wrap(d: f64) -> f64 {
    d - round(d)
}

/// Below this magnitude every `f64` converts to `i64` and back exactly.
const EXACT_INT: f64 = 4_503_599_627_370_496.0; // 2^52

/// `x.floor()`, bit for bit (signed zeros and NaN included), without the libm call the
/// baseline x86-64 target makes for it: truncation through `i64` is exact below 2^52.
#[inline]
fn floor(x: f64) -> f64 {
    if x.abs() < EXACT_INT {
        let t = x as i64 as f64;
        if t == x {
            x
        } else if t > x {
            t - 1.0
        } else {
            t
        }
    } else {
        x.floor()
    }
}

/// `x.round()` (half away from zero), bit for bit, as [`floor`]: `x − trunc(x)` is exact
/// below 2^52, and the result carries the sign of `x` (so −0.3 rounds to −0.0).
#[inline]
fn round(x: f64) -> f64 {
    if x.abs() < EXACT_INT {
        let t = x as i64 as f64;
        let d = x - t;
        let r = if d >= 0.5 {
            t + 1.0
        } else if d <= -0.5 {
            t - 1.0
        } else {
            t
        };
        r.copysign(x)
    } else {
        x.round()
    }
}

/// Largest pairwise wrapped difference of phases in turns (`0..=½`).
pub(crate) fn largest_pairwise(x: &[f64], scratch: &mut Vec<f64>) -> f64 {
    let Some(&first) = x.first() else { return 0.0 };
    // Below half a turn from the first phase, `wrap` leaves a difference as it is but
    // for a negative zero, which it makes positive, as adding +0 does: the usual case
    // needs no rounding, and the result is the same bit for bit.
    let (mut lo, mut hi) = (0.0_f64, 0.0_f64);
    let mut near = true;
    for &v in x {
        let d = (v - first) + 0.0;
        near &= d.abs() < 0.5;
        lo = lo.min(d);
        hi = hi.max(d);
    }
    if !near {
        (lo, hi) = (0.0, 0.0);
        for &v in x {
            let d = wrap(v - first);
            lo = lo.min(d);
            hi = hi.max(d);
        }
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

/// Each link's latency in each direction and the latency its receiver is told, per
/// receiver slot (node i's neighbour j: the link j → i), nominal ticks and the
/// receiver's ticks: every link `latency` when the scenario has one latency; otherwise,
/// per link, a mean drawn uniformly from `[latency, latency + spread]` and a direction
/// difference `d` uniform within `±asymmetry`, the two directions `mean ± d/2` (not
/// below 0), the receiver told the mean in its own ticks, rounded, when it is told.
fn link_latencies(setup: &Replica, e: &[f64], rng: &mut ChaCha8Rng) -> (Vec<f64>, Vec<f64>) {
    let slots = setup.nbr.len();
    let told = |rx: usize, mean: f64| {
        if setup.latency_known {
            round(mean * (1.0 + e.get(rx).copied().unwrap_or(0.0)))
        } else {
            0.0
        }
    };
    if setup.latency_spread == 0.0 && setup.asymmetry == 0.0 {
        // One latency, told in nominal ticks (the crystal's residue left in).
        let told = if setup.latency_known {
            setup.latency
        } else {
            0.0
        };
        return (vec![setup.latency; slots], vec![told; slots]);
    }
    let (mut lat, mut told_in) = (vec![0.0; slots], vec![0.0; slots]);
    for i in 0..setup.nodes() {
        for s in setup.off[i]..setup.off[i + 1] {
            let j = setup.nbr[s];
            if j < i {
                continue;
            }
            let mean = setup.latency + rng.random::<f64>() * setup.latency_spread;
            let d = (rng.random::<f64>() * 2.0 - 1.0) * setup.asymmetry;
            // Slot s is i's entry for j (the link j → i); back[s] is j's entry for i.
            lat[setup.back[s]] = (mean + d / 2.0).max(0.0);
            lat[s] = (mean - d / 2.0).max(0.0);
            told_in[setup.back[s]] = told(j, mean);
            told_in[s] = told(i, mean);
        }
    }
    (lat, told_in)
}

/// The per-run state of the links: latency and told latency per receiver slot, beacons
/// in flight and the neighbour tables.
struct Wires {
    lat: Vec<f64>,
    told: Vec<f64>,
    flights: Vec<VecDeque<Flight>>,
    table: Vec<Option<Entry>>,
}

/// When a sampled run may stop before the horizon: once its error has stayed within
/// `inner` for `stay` samples.
#[derive(Clone, Copy, Debug)]
pub(crate) struct EarlyStop {
    pub(crate) inner: f64,
    pub(crate) stay: usize,
}

/// One run of the model from the generator's stream `run`: the largest pairwise phase
/// error at each sample `k` (at `(k + ½)` update intervals), turns. With `stop` the run
/// may end early (see [`EarlyStop`]; the series is then shorter than the horizon).
pub(crate) fn run(setup: &Replica, seed: u64, run: u64, stop: Option<EarlyStop>) -> Vec<f64> {
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
            let e = if setup.reference[i] {
                0.0
            } else {
                ppm[i] * 1e-6
            };
            let x = match &setup.start {
                StartPhases::Uniform { spread_turns } => (rng.random::<f64>() - 0.5) * spread_turns,
                StartPhases::Fixed(v) => v[i],
            };
            // Every reference holds the reference phase: the ideal clock's (the draw
            // above still happens, so the other nodes' draws do not move).
            let x = if setup.reference[i] { 0.0 } else { x };
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
                echo_next: 0,
            }
        })
        .collect();
    let e: Vec<f64> = st.iter().map(|s| s.e).collect();
    let (lat, told) = link_latencies(setup, &e, &mut rng);
    let slots = setup.nbr.len();
    let mut wires = Wires {
        lat,
        told,
        flights: vec![VecDeque::new(); slots],
        table: vec![None; slots],
    };
    let mut queue = DueQueue::new(st.iter().map(|s| s.next_local / (1.0 + s.e)));
    let mut errors = Vec::with_capacity(setup.horizon);
    let mut phases = vec![0.0; n];
    let mut scratch = Vec::new();
    let mut inside = 0_usize;
    for k in 0..setup.horizon {
        let t_sample = (k as f64 + 0.5) * m;
        while let Some((t, i)) = queue.first_before(t_sample) {
            update(setup, &mut st, &mut wires, &mut rng, t, i);
            queue.reschedule_first(st.get(i).map(|s| s.next_local / (1.0 + s.e)));
        }
        for (p, s) in phases.iter_mut().zip(&st) {
            // The simulator reads each node at its completed timer tick.
            let local = t_sample * (1.0 + s.e);
            let q = local - floor(local);
            *p = s.x + s.drift(r) * (t_sample - s.t_last) - q * (r + s.trim);
        }
        let error = largest_pairwise(&phases, &mut scratch);
        errors.push(error);
        if let Some(stop) = stop {
            inside = if error > stop.inner { 0 } else { inside + 1 };
            if inside >= stop.stay {
                break;
            }
        }
    }
    errors
}

/// One delay sample from an echo at a reception stamped `heard` (receiver's ticks):
/// the round trip less the sender's held ticks (converted to the receiver's through the
/// two trims), halved, less the told latency; `None` when the node would refuse it (a
/// negative raw round trip, or a corrected one below minus an eighth of the timeout or
/// above twice the timeout).
fn delay_sample(setup: &Replica, f: &Flight, heard: f64, own_trim: f64, told: f64) -> Option<f64> {
    let (echo_tx, held) = f.echo?;
    let round = heard - echo_tx;
    if round < 0.0 {
        return None;
    }
    let held_here = held * (1.0 + f.trim_frac) / (1.0 + own_trim / setup.r);
    let corrected = round - held_here;
    if corrected < -setup.round_trip_floor || corrected > 2.0 * setup.timeout {
        return None;
    }
    Some(corrected / 2.0 - told)
}

/// Node `i`'s update at real time `t` (ticks): take the beacons that arrived strictly
/// before, apply the law, schedule the next update, send beacons.
fn update(
    setup: &Replica,
    st: &mut [State],
    wires: &mut Wires,
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
    // Updates fall on whole ticks of the node's own timer.
    let now_local = me.next_local;
    let is_ref = setup.reference[i];
    for s in lo..hi {
        while wires.flights[s].front().is_some_and(|f| f.arrive < t) {
            let Some(f) = wires.flights[s].pop_front() else {
                break;
            };
            if is_ref {
                continue;
            }
            let heard = round(f.arrive * (1.0 + me.e) + f.stamp_err);
            let told = wires.told[s];
            let sample = delay_sample(setup, &f, heard, me.trim, told);
            let entry = wires.table[s].get_or_insert(Entry {
                anchored_diff: 0.0,
                heard,
                their_tx: None,
                delay: None,
            });
            if let Some(x) = sample {
                entry.delay = Some(match entry.delay {
                    None => x,
                    Some(d) => d + (x - d) * setup.smoothing_weight,
                });
            }
            if entry.heard > heard {
                continue; // a held reception is newer
            }
            // The node extrapolates the sent phase over `told + measured + (now −
            // stamp)` of its own ticks at its own rate; relative to an ideal clock that
            // leaves the crystal's share of the span, the stamp error and the delay
            // estimate's error.
            let span = told + entry.delay.unwrap_or(0.0) + (now_local - heard);
            let est = f.x + (r + me.trim) * span - r * (t - f.sent_at);
            entry.anchored_diff = est - me.x + me.corr;
            entry.heard = heard;
            entry.their_tx = setup.two_way.then_some(f.tx_local);
        }
    }
    if !is_ref {
        me.trim = me.trim_next;
        let mut sum = 0.0;
        let mut used = 0;
        for (slot, &w) in wires.table[lo..hi].iter_mut().zip(&setup.weight[lo..hi]) {
            let Some(e) = *slot else { continue };
            if now_local - e.heard > setup.timeout {
                *slot = None;
                continue;
            }
            let d = wrap(e.anchored_diff - me.corr);
            sum += w * if setup.sine { (TAU * d).sin() / TAU } else { d };
            used += 1;
        }
        if used > 0 {
            let raw = setup.kp * sum;
            let step = raw.clamp(-setup.slew, setup.slew);
            me.x += step;
            me.corr += step;
            if step == raw {
                me.trim_next = (me.trim * (1.0 - setup.leak) + setup.ki * sum / setup.m)
                    .clamp(-setup.trim_limit, setup.trim_limit);
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
    let trim_frac = me.trim / r;
    // Version 2: one echo per frame, to the neighbours in turn: the last send stamp
    // heard from it and the ticks held since.
    let echo = if setup.two_way && hi > lo {
        let k = me.echo_next % (hi - lo);
        me.echo_next = (k + 1) % (hi - lo);
        wires.table[lo + k].and_then(|e| {
            let tx = e.their_tx?;
            let held = now_local - e.heard;
            (held >= 0.0).then_some((lo + k, (tx, held)))
        })
    } else {
        None
    };
    // Beacons to every neighbour, each lost with probability 1 − p.
    for s in lo..hi {
        let j = setup.nbr[s];
        if setup.p < 1.0 && rng.random::<f64>() >= setup.p {
            continue;
        }
        let into = setup.back[s];
        let mut arrive = t + wires.lat[into];
        // A stall: the frame is taken (and stamped) late by a uniform draw, never later
        // than the link's next frame (the draw is at most a quarter update interval).
        if setup.late_p > 0.0 && rng.random::<f64>() < setup.late_p {
            arrive += rng.random_range(0..=setup.late_max) as f64;
        }
        let ej = st.get(j).map_or(0.0, |s| s.e);
        let local = arrive * (1.0 + ej);
        let mut stamp_err = if setup.completed {
            floor(local) - local
        } else {
            round(local) - local
        };
        if setup.ts_jitter > 0 {
            stamp_err += rng.random_range(-setup.ts_jitter..=setup.ts_jitter) as f64;
        }
        wires.flights[into].push_back(Flight {
            arrive,
            sent_at: t,
            x,
            stamp_err,
            tx_local: now_local,
            trim_frac,
            echo: echo.and_then(|(slot, e)| (slot == s).then_some(e)),
        });
    }
}

#[cfg(test)]
mod tests {
    use super::{DueQueue, floor, largest_pairwise, round, wrap};
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// The fast `floor` and `round` are the standard library's bit for bit: halves,
    /// signed zeros, integers, the 2^52 edge, infinities, NaN and random values over
    /// many magnitudes.
    #[test]
    fn floor_and_round_are_bit_exact() {
        let mut xs = vec![
            0.0,
            -0.0,
            0.5,
            -0.5,
            1.5,
            -1.5,
            2.5,
            -2.5,
            0.49999999999999994,
            -0.49999999999999994,
            1.0 - f64::EPSILON / 2.0,
            4_503_599_627_370_495.5,
            -4_503_599_627_370_495.5,
            4_503_599_627_370_496.0,
            9_007_199_254_740_993.0,
            1e300,
            -1e300,
            f64::MIN_POSITIVE,
            -f64::MIN_POSITIVE,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NAN,
        ];
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        for _ in 0..200_000 {
            let scale = 10f64.powi(rng.random_range(-6..18));
            xs.push((rng.random::<f64>() - 0.5) * scale);
            xs.push(f64::from(rng.random_range(-1000..1000)) + 0.5);
        }
        for x in xs {
            assert_eq!(floor(x).to_bits(), x.floor().to_bits(), "floor({x:e})");
            assert_eq!(round(x).to_bits(), x.round().to_bits(), "round({x:e})");
        }
    }

    /// The largest pairwise difference without rounding in the usual case is the one
    /// that wraps every difference, bit for bit: phases near each other, across a whole
    /// turn, signed zeros, and spreads of half a turn and more.
    #[test]
    fn largest_pairwise_matches_wrapping_every_difference() {
        fn wrapping_every(x: &[f64]) -> f64 {
            let first = x[0];
            let (lo, hi) = x.iter().fold((0.0_f64, 0.0_f64), |(lo, hi), &v| {
                let d = wrap(v - first);
                (lo.min(d), hi.max(d))
            });
            hi - lo
        }
        let mut rng = ChaCha8Rng::seed_from_u64(17);
        let mut cases: Vec<Vec<f64>> = vec![
            vec![0.0, -0.0],
            vec![-0.0, 0.0, -0.0],
            vec![0.25, 0.25],
            vec![3.2, 3.2 + 0.499_999, 3.2 - 0.1],
            vec![-7.75, -7.25],
        ];
        for _ in 0..20_000 {
            let n = rng.random_range(1..12);
            let base = (rng.random::<f64>() - 0.5) * 10f64.powi(rng.random_range(0..4));
            let width = 10f64.powi(rng.random_range(-6..1));
            cases.push(
                (0..n)
                    .map(|_| base + (rng.random::<f64>() - 0.5) * width)
                    .collect(),
            );
        }
        let mut scratch = Vec::new();
        for x in cases {
            let want = wrapping_every(&x);
            if want < 0.5 {
                let got = largest_pairwise(&x, &mut scratch);
                assert_eq!(got.to_bits(), want.to_bits(), "{x:?}");
            }
        }
    }

    /// The queue hands out nodes in the order a binary heap keyed on (instant, index)
    /// would, with ties and reschedules to any place.
    #[test]
    fn due_queue_matches_a_heap() {
        use std::cmp::Reverse;
        use std::collections::BinaryHeap;
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        for _ in 0..200 {
            let n = rng.random_range(1..40);
            // Coarse instants, so that ties are common.
            let start: Vec<f64> = (0..n).map(|_| f64::from(rng.random_range(0..20))).collect();
            let mut queue = DueQueue::new(start.iter().copied());
            let mut heap: BinaryHeap<Reverse<(u64, usize)>> = start
                .iter()
                .enumerate()
                .map(|(i, &t)| Reverse((t.to_bits(), i)))
                .collect();
            for _ in 0..500 {
                let Reverse((bits, i)) = heap.pop().unwrap();
                let t = f64::from_bits(bits);
                assert_eq!(queue.first_before(f64::INFINITY), Some((t, i)));
                assert_eq!(queue.first_before(t), None, "strictly before");
                let next = t + f64::from(rng.random_range(0..25));
                queue.reschedule_first(Some(next));
                heap.push(Reverse((next.to_bits(), i)));
            }
        }
    }
}
