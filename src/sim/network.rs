//! Event stepping of a network of real [`Node`] values: each node's own crystal, timer,
//! update schedule and PI state; beacons with latency, timestamp jitter and loss; reboots.
//!
//! The simulator never computes the law itself: every correction is the one
//! [`Node::update`] makes from the observations handed to [`Node::observe`].
//!
//! # Time
//! Real time runs in sub-ticks of 2^-16 nominal timer tick, from 0 at the start of a run.
//! Node i's timer advances `1 + e_i·10⁻⁶` ticks per nominal tick (`e_i` its crystal error
//! in ppm) and starts at a random count, so timer wrap is exercised. Node i updates when
//! its own timer reaches its next update instant (one update interval of its own ticks
//! after the last, plus jitter), then beacons its phase to its neighbours. A beacon is
//! taken by the receiver's first update *strictly after* it arrives, so with lock-step
//! updates and zero latency every node uses its neighbours' phases of the same instant
//! (a Jacobi step, x⁺ = (I − kp·L)x for the linear law).
//!
//! Reception timestamps are the receiver's timer to the *nearest* tick (error within
//! ±½ tick, zero mean), plus the scenario's timestamp jitter. A firmware that reads the
//! completed tick count should add half a tick: left in, the half-tick bias makes every
//! node see every neighbour slightly ahead, and the PI integrators then ramp the whole
//! network's rate until the trim limit.
//!
//! The network error is sampled once per nominal update interval, half an interval after
//! each nominal update instant: sample k, at `(k + ½)` intervals, sees the state after
//! the k-th update round (round 0 has no beacons yet, so sample 0 is the start spread).
//! A run takes samples 0 to `horizon_updates − 1` and never stops early; its settling
//! verdict comes from a [`SettleTracker`] fed every sample.

use std::collections::VecDeque;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::error::SimError;
use super::outcome::{RunOutcome, RunStats};
use super::settle::{
    SettleTracker, TURN, largest_neighbour_diff, largest_pairwise_diff, winding_number,
};
use super::setup::{Crystals, Setup, Stamping, StartPhases};
use super::telemetry::Recorder;
use super::trace::Trace;
use crate::{
    Config, Node, NodeId, Observation, ObserveError, Phase, Timing, UpdateReport, WEIGHT_ONE,
};

/// Sub-ticks per nominal tick.
const SUB: u64 = 1 << 16;

/// A beacon in flight or waiting in the receiver's inbox.
#[derive(Clone, Copy, Debug)]
struct Beacon {
    from: NodeId,
    phase: Phase,
    /// Real time of arrival, sub-ticks.
    arrive: u64,
    /// The receiver's reception timestamp (its own timer, with timestamp jitter).
    rx_ticks: u32,
    /// The link delay the receiver is told, its ticks.
    delay_ticks: u32,
    /// Two-way timing (version-2 beacons).
    timing: Option<Timing>,
    /// The link's coupling weight, Q16.16.
    weight_q16: u32,
}

/// One node's timer: real time ↔ local ticks.
#[derive(Clone, Copy, Debug)]
struct Timer {
    /// Real time of the origin, sub-ticks.
    t0: u64,
    /// Local ticks at the origin (unwrapped).
    l0: u64,
    /// Local ticks per nominal tick, Q32.32.
    fwd: u64,
    /// Sub-ticks per local tick, Q32.32.
    inv: u64,
}

impl Timer {
    fn new(ppm: f64, t0: u64, l0: u64) -> Timer {
        let rate = 1.0 + ppm * 1e-6;
        // ppm is within ±10⁵ (checked), so both fit comfortably.
        Timer {
            t0,
            l0,
            fwd: (rate * 4_294_967_296.0).round() as u64,
            inv: (281_474_976_710_656.0 / rate).round() as u64,
        }
    }

    /// Local ticks (unwrapped) at real time `t` (not before the origin).
    fn local_at(&self, t: u64) -> u64 {
        let span = u128::from(t.saturating_sub(self.t0));
        self.l0 + ((span * u128::from(self.fwd)) >> 48) as u64
    }

    /// Local ticks (unwrapped) nearest to real time `t`: an unbiased reception timestamp.
    fn nearest_at(&self, t: u64) -> u64 {
        let span = u128::from(t.saturating_sub(self.t0));
        self.l0 + ((span * u128::from(self.fwd) + (1 << 47)) >> 48) as u64
    }

    /// The reception timestamp of real time `t` under `stamping`.
    fn stamp_at(&self, t: u64, stamping: Stamping) -> u64 {
        match stamping {
            Stamping::Nearest => self.nearest_at(t),
            Stamping::CompletedTicks => self.local_at(t),
        }
    }

    /// Real time, sub-ticks, at which the timer reads `local`.
    fn real_at(&self, local: u64) -> u64 {
        let span = u128::from(local.saturating_sub(self.l0));
        self.t0 + ((span * u128::from(self.inv)) >> 32) as u64
    }
}

/// A sender slot (node i's neighbour j): everything a beacon from i to j needs.
#[derive(Clone, Copy, Debug)]
struct OutSlot {
    /// The link's latency in this direction, sub-ticks.
    latency_sub: u64,
    /// The delay the receiver is told, its ticks.
    told_ticks: u32,
    /// The link's coupling weight, Q16.16.
    weight_q16: u32,
    /// The receiver.
    to: u16,
}

/// One simulated node: the real node law plus its hardware around it.
#[derive(Clone, Debug)]
struct Station<const N: usize> {
    node: Node<N>,
    timer: Timer,
    /// Local ticks (unwrapped) of the next update.
    next_local: u64,
    ppm: f64,
    alive: bool,
    /// A reference node: beacons, never takes observations or updates.
    reference: bool,
    /// Which neighbour (index into its target list) the next beacon echoes.
    echo_next: usize,
}

/// A reboot as two timed events.
#[derive(Clone, Copy, Debug)]
struct RebootEvent {
    at: u64,
    node: usize,
    up: bool,
}

/// A network of `Node<N>` values (`N` the neighbour-table capacity, at least the largest
/// degree) stepped in real time. Build one with [`Network::new`]; drive it with
/// [`Network::run`] or sample by sample with [`Network::step`].
#[derive(Clone, Debug)]
pub struct Network<const N: usize> {
    config: Config,
    stations: Vec<Station<N>>,
    row_start: Vec<usize>,
    targets: Vec<u16>,
    /// Per slot (as `targets`): the link's coupling weight, Q16.16 (links are
    /// undirected, so a sender slot and a receiver slot of one link agree).
    slot_weight: Vec<u32>,
    pairs: Vec<(usize, usize)>,
    ring: bool,
    inbox: Vec<Vec<Beacon>>,
    /// Pending updates `(real time, node)`, ascending; equal times in insertion order.
    queue: VecDeque<(u64, u16)>,
    reboots: Vec<RebootEvent>,
    next_reboot: usize,
    rng: ChaCha8Rng,
    update_ticks: u64,
    jitter_ticks: u32,
    /// Per sender slot (as `targets`): what a beacon on that slot needs, packed so one
    /// node's slots share a cache line (updates come in random node order).
    out: Vec<OutSlot>,
    /// Uniform latency in lock-step (whole ticks).
    latency_ticks: u32,
    ts_jitter: u32,
    /// Late stamps: probability per reception and the largest lateness, ticks.
    late_stamps: (f64, u32),
    stamping: Stamping,
    two_way: bool,
    success_prob: f64,
    /// Index of the next sample.
    sample: u64,
    tracker: SettleTracker,
    last_rejoin: Option<u64>,
    stats: RunStats,
    phases: Vec<Option<Phase>>,
    live: Vec<Phase>,
    scratch: Vec<u32>,
    horizon: u64,
    /// The last sample taken.
    last: Option<Sample>,
    /// Lock-step shortcut (see [`Network::event_driven`]): every node updates at the same
    /// instants, so rounds replace the event queue.
    lock_step: bool,
    /// Lock-step: each node's phase right after its last update (its last beacon).
    sent: Vec<Phase>,
    /// Lock-step: whether the beacon of sender slot `s` (sender-major, as `targets`)
    /// arrived.
    delivered: Vec<bool>,
    /// Lock-step: for receiver slot `s` (node i's neighbour j), the slot of i in j's list.
    reverse: Vec<usize>,
    /// Lock-step: rounds done.
    rounds: u64,
    /// Telemetry of every update, when asked ([`Network::record_telemetry`]).
    recorder: Option<Recorder>,
    /// The largest |trim| (raw) any node has held so far.
    trim_peak_raw: u64,
    /// Per sender slot (as `targets`), the beacon's success probability where a link's
    /// own loss was set ([`Network::with_link_loss`]).
    slot_success: Option<Vec<f64>>,
}

/// What one sample saw.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sample {
    /// Sample index: nominal update intervals from the start.
    pub at_updates: u64,
    /// Largest pairwise wrapped difference across the live nodes, counts.
    pub network_counts: u32,
    /// Largest wrapped difference across a link between live nodes, counts.
    pub link_counts: u32,
    /// Whether the sample is inside the tolerance band (both errors within the
    /// tolerance and every node up).
    pub inside: bool,
}

impl<const N: usize> Network<N> {
    /// Set up run `run` of `scenario` from the generator seeded with `seed` (the run
    /// uses stream `run` of ChaCha8 with that seed, so runs are independent and any run
    /// can be replayed on its own).
    ///
    /// # Errors
    /// The scenario's [`Setup::validate`] error, or [`SimError::DegreeTooHigh`] if a
    /// node has more neighbours than the table capacity `N`.
    pub fn new(scenario: &Setup, seed: u64, run: u64) -> Result<Network<N>, SimError> {
        scenario.validate()?;
        let degree = scenario.links.max_degree();
        if degree > N {
            return Err(SimError::DegreeTooHigh {
                node: 0,
                degree,
                max: N,
            });
        }
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        rng.set_stream(run);
        let n = scenario.nodes();
        let config = scenario.config;
        let update_ticks = u64::from(config.update_ticks());
        let links = &scenario.links;
        let mut ppm: Vec<f64> = match &scenario.crystals {
            Crystals::Identical { ppm } => vec![*ppm; n],
            Crystals::Uniform { tolerance_ppm } => (0..n)
                .map(|_| (rng.random::<f64>() * 2.0 - 1.0) * tolerance_ppm)
                .collect(),
            Crystals::Fixed(v) => v.clone(),
        };
        // The reference is a disciplined clock: nominal rate.
        for &r in links.references() {
            if let Some(e) = ppm.get_mut(r) {
                *e = 0.0;
            }
        }
        let mut start: Vec<Phase> = match &scenario.start {
            StartPhases::Uniform { spread_turns } => (0..n)
                .map(|_| phase_from_turns((rng.random::<f64>() - 0.5) * spread_turns))
                .collect(),
            StartPhases::Fixed(v) => v.iter().map(|&t| phase_from_turns(t)).collect(),
        };
        // Every reference holds the reference phase, the ideal clock's (started at 0);
        // the draws above are kept so the other nodes' start phases do not move.
        for &r in links.references() {
            if let Some(p) = start.get_mut(r) {
                *p = Phase::ZERO;
            }
        }
        let mut stations = Vec::with_capacity(n);
        for (i, (&e, &phase)) in ppm.iter().zip(&start).enumerate() {
            let l0 = u64::from(rng.random::<u32>());
            let offset = if scenario.schedule.random_start {
                rng.random_range(0..update_ticks)
            } else {
                0
            };
            stations.push(Station {
                node: Node::new(config, phase, l0 as u32),
                timer: Timer::new(e, 0, l0),
                next_local: l0 + offset,
                ppm: e,
                alive: true,
                reference: links.is_reference(i),
                echo_next: 0,
            });
        }
        let mut queue: Vec<(u64, u16)> = stations
            .iter()
            .enumerate()
            .map(|(i, s)| (s.timer.real_at(s.next_local), i as u16))
            .collect();
        queue.sort_by_key(|&(t, i)| (t, i));
        let interval = update_ticks * SUB;
        let mut reboots: Vec<RebootEvent> = scenario
            .reboots
            .iter()
            .flat_map(|r| {
                [
                    RebootEvent {
                        at: r.at_updates * interval,
                        node: r.node,
                        up: false,
                    },
                    RebootEvent {
                        at: (r.at_updates + r.down_updates) * interval,
                        node: r.node,
                        up: true,
                    },
                ]
            })
            .collect();
        reboots.sort_by_key(|r| (r.at, r.up));
        let (row_start, targets) = scenario.links.adjacency();
        let reverse = reverse_slots(&row_start, &targets);
        let b = &scenario.beacons;
        let (latency_sub, told_ticks) =
            link_latencies(&row_start, &targets, &reverse, b, &ppm, &mut rng);
        let lock_step = !scenario.schedule.random_start
            && scenario.schedule.jitter_ticks == 0
            && ppm.iter().all(|&e| e == 0.0)
            && b.timestamp_jitter_ticks == 0
            && b.late_stamp_fraction == 0.0
            && u64::from(b.latency_ticks) < update_ticks
            && b.uniform_latency()
            && b.latency_known
            && !b.two_way
            && b.stamping == Stamping::Nearest
            && scenario.reboots.is_empty();
        let slots = targets.len();
        let slot_weight: Vec<u32> = (0..n)
            .flat_map(|i| {
                let (lo, hi) = (row_start[i], row_start[i + 1]);
                let links = &scenario.links;
                targets[lo..hi]
                    .iter()
                    .map(move |&j| links.weight_q16(i, usize::from(j)))
            })
            .collect();
        let out: Vec<OutSlot> = latency_sub
            .iter()
            .zip(&told_ticks)
            .zip(slot_weight.iter().zip(&targets))
            .map(
                |((&latency_sub, &told_ticks), (&weight_q16, &to))| OutSlot {
                    latency_sub,
                    told_ticks,
                    weight_q16,
                    to,
                },
            )
            .collect();
        Ok(Network {
            config,
            stations,
            row_start,
            targets,
            out,
            slot_weight,
            pairs: scenario.links.pairs().to_vec(),
            ring: scenario.links.is_ring(),
            inbox: vec![Vec::with_capacity(2 * N.min(8)); n],
            queue: queue.into(),
            reboots,
            next_reboot: 0,
            rng,
            update_ticks,
            jitter_ticks: scenario.schedule.jitter_ticks,
            latency_ticks: scenario.beacons.latency_ticks,
            ts_jitter: scenario.beacons.timestamp_jitter_ticks,
            late_stamps: (b.late_stamp_fraction, b.late_stamp_max_ticks),
            stamping: b.stamping,
            two_way: b.two_way,
            success_prob: scenario.beacons.success_prob,
            sample: 0,
            tracker: SettleTracker::new(&scenario.settle, n, scenario.horizon_updates),
            last_rejoin: None,
            stats: RunStats::default(),
            phases: vec![None; n],
            live: Vec::with_capacity(n),
            scratch: Vec::new(),
            horizon: scenario.horizon_updates,
            last: None,
            lock_step,
            sent: start,
            delivered: vec![false; slots],
            reverse,
            rounds: 0,
            recorder: None,
            slot_success: None,
            trim_peak_raw: 0,
        })
    }

    /// Record every node's every update as telemetry (the node-side encoder's binary
    /// records); take them with [`Network::take_telemetry`].
    #[must_use]
    pub fn record_telemetry(mut self) -> Self {
        self.recorder = Some(Recorder::new(self.stations.len()));
        self
    }

    /// The telemetry recorded so far, per node (records back to back); `None` unless
    /// [`Network::record_telemetry`] was asked. Recording stops.
    pub fn take_telemetry(&mut self) -> Option<Vec<Vec<u8>>> {
        self.recorder.take().map(Recorder::into_logs)
    }

    /// Give the link between nodes `a` and `b` its own beacon loss `loss` (both
    /// directions) instead of the setup's. The network then steps through the event
    /// queue.
    ///
    /// # Errors
    /// [`SimError::InvalidParameter`] when `a`–`b` is not a link or `loss` is not in
    /// `[0, 1]`.
    pub fn with_link_loss(mut self, a: usize, b: usize, loss: f64) -> Result<Self, SimError> {
        let refused = SimError::InvalidParameter {
            name: "link loss",
            valid: "a link of the network and a loss in [0, 1]",
        };
        if !(0.0..=1.0).contains(&loss) {
            return Err(refused);
        }
        let slot = |from: usize, to: usize| {
            let lo = *self.row_start.get(from)?;
            let hi = *self.row_start.get(from + 1)?;
            let at = self
                .targets
                .get(lo..hi)?
                .iter()
                .position(|&t| usize::from(t) == to)?;
            Some(lo + at)
        };
        let (Some(ab), Some(ba)) = (slot(a, b), slot(b, a)) else {
            return Err(refused);
        };
        let p = self.success_prob;
        let slots = self
            .slot_success
            .get_or_insert_with(|| vec![p; self.targets.len()]);
        slots[ab] = 1.0 - loss;
        slots[ba] = 1.0 - loss;
        self.lock_step = false;
        Ok(self)
    }

    /// Step every scenario through the general event queue, even one that qualifies for
    /// the lock-step shortcut (ideal crystals, lock-step schedule, no timestamp jitter,
    /// latency below one update interval, no reboots). Both give bit-identical runs; the
    /// shortcut only skips the queue and the timers.
    #[must_use]
    pub fn event_driven(mut self) -> Self {
        self.lock_step = false;
        self
    }

    /// Whether this network takes the lock-step shortcut.
    #[must_use]
    pub fn is_lock_step(&self) -> bool {
        self.lock_step
    }

    /// Number of nodes.
    #[must_use]
    pub fn nodes(&self) -> usize {
        self.stations.len()
    }

    /// Node `i` (the real node law and its state), or `None` out of range.
    #[must_use]
    pub fn node(&self, i: usize) -> Option<&Node<N>> {
        self.stations.get(i).map(|s| &s.node)
    }

    /// Node `i`'s crystal error, ppm, as drawn for this run.
    #[must_use]
    pub fn crystal_ppm(&self, i: usize) -> Option<f64> {
        self.stations.get(i).map(|s| s.ppm)
    }

    /// The latency of the link from node `from` to node `to` in this run, nominal ticks,
    /// or `None` if they are not linked.
    #[must_use]
    pub fn latency_ticks(&self, from: usize, to: usize) -> Option<f64> {
        let (lo, hi) = (*self.row_start.get(from)?, *self.row_start.get(from + 1)?);
        let slot =
            (lo..hi).find(|&s| self.targets.get(s).is_some_and(|&t| usize::from(t) == to))?;
        Some(self.out.get(slot)?.latency_sub as f64 / SUB as f64)
    }

    /// The largest trim magnitude, `|`[`Node::trim_raw`]`|`, any node has held so far:
    /// no node's trim at any sample taken has been larger. A trim changes only in an
    /// update, so this is kept as the updates go.
    #[must_use]
    pub fn largest_trim_raw(&self) -> u64 {
        self.trim_peak_raw
    }

    /// Counters so far.
    #[must_use]
    pub fn stats(&self) -> RunStats {
        self.stats
    }

    /// The phases at the last sample (`None` for a node that was down).
    #[must_use]
    pub fn sampled_phases(&self) -> &[Option<Phase>] {
        &self.phases
    }

    /// Real time of sample `k`, sub-ticks.
    fn sample_time(&self, k: u64) -> u64 {
        k * self.update_ticks * SUB + self.update_ticks * SUB / 2
    }

    /// Run every event up to the next sample instant and take the sample.
    pub fn step(&mut self) -> Sample {
        let t_sample = self.sample_time(self.sample);
        if self.lock_step {
            while self.rounds <= self.sample {
                self.lock_step_round();
            }
            return self.take_sample(t_sample);
        }
        loop {
            let t_update = self.queue.front().map_or(u64::MAX, |&(t, _)| t);
            let t_reboot = self
                .reboots
                .get(self.next_reboot)
                .map_or(u64::MAX, |r| r.at);
            if t_reboot <= t_update.min(t_sample) {
                self.reboot_event();
            } else if t_sample <= t_update {
                break;
            } else if let Some((t, i)) = self.queue.pop_front() {
                self.update(t, usize::from(i));
            }
        }
        self.take_sample(t_sample)
    }

    fn take_sample(&mut self, t: u64) -> Sample {
        self.live.clear();
        for (s, slot) in self.stations.iter().zip(self.phases.iter_mut()) {
            *slot = if s.alive {
                let p = s.node.phase_at(s.timer.local_at(t) as u32);
                self.live.push(p);
                Some(p)
            } else {
                None
            };
        }
        let network = largest_pairwise_diff(&self.live, &mut self.scratch);
        let link = largest_neighbour_diff_live(&self.live, &self.pairs, &self.phases);
        let k = self.sample;
        self.sample += 1;
        let inside = self.tracker.sample(k, network, link, &self.phases);
        let sample = Sample {
            at_updates: k,
            network_counts: network,
            link_counts: link,
            inside,
        };
        self.last = Some(sample);
        sample
    }

    fn reboot_event(&mut self) {
        let Some(ev) = self.reboots.get(self.next_reboot).copied() else {
            return;
        };
        self.next_reboot += 1;
        let Some(st) = self.stations.get_mut(ev.node) else {
            return;
        };
        if !ev.up {
            if st.alive {
                st.alive = false;
                self.queue.retain(|&(_, i)| usize::from(i) != ev.node);
                if let Some(b) = self.inbox.get_mut(ev.node) {
                    b.clear();
                }
                self.stats.reboots += 1;
            }
            return;
        }
        if st.alive {
            return;
        }
        let phase = Phase::from_counts(self.rng.random::<u32>());
        let l0 = u64::from(self.rng.random::<u32>());
        let offset = self.rng.random_range(0..self.update_ticks);
        st.node = Node::new(self.config, phase, l0 as u32);
        st.timer = Timer::new(st.ppm, ev.at, l0);
        st.next_local = l0 + offset;
        st.alive = true;
        if let Some(r) = self.recorder.as_mut() {
            r.reboot(ev.node);
        }
        let t = st.timer.real_at(st.next_local);
        insert_sorted(&mut self.queue, t, ev.node as u16);
        self.tracker.restart();
        self.last_rejoin = Some(ev.at / (self.update_ticks * SUB));
    }

    /// One update of node `i` at real time `t`, its beacons, and its next schedule.
    fn update(&mut self, t: u64, i: usize) {
        let (Some(st), Some(inbox)) = (self.stations.get_mut(i), self.inbox.get_mut(i)) else {
            return;
        };
        let local = st.next_local as u32;
        st.node.advance_to(local);
        let node = &mut st.node;
        let mut full = 0u64;
        if st.reference {
            inbox.clear();
        }
        inbox.retain(|b| {
            if b.arrive < t {
                let obs = Observation {
                    from: b.from,
                    phase: b.phase,
                    rx_ticks: b.rx_ticks,
                    delay_ticks: b.delay_ticks,
                };
                // A reception more than the timeout after the node's last update
                // (only with a timeout shorter than the update interval) is refused
                // as from the future; the node's next update would have emptied its
                // table anyway. Only a full table is counted.
                if let Err(ObserveError::TableFull(_)) =
                    node.observe_weighted(obs, b.timing, b.weight_q16)
                {
                    full += 1;
                }
                false
            } else {
                true
            }
        });
        let report = if st.reference {
            UpdateReport::default()
        } else {
            self.stats.node_updates += 1;
            let report = node.update(local);
            self.trim_peak_raw = self.trim_peak_raw.max(node.trim_raw().unsigned_abs());
            if let Some(r) = self.recorder.as_mut() {
                r.record(i, &report, node);
            }
            report
        };
        let phase = node.phase();
        self.stats.table_full += full;
        self.stats.neighbour_updates += u64::from(report.used);
        self.stats.slew_limited += u64::from(report.slew_limited);
        // Next update: one interval of this node's own ticks, plus jitter.
        let jitter = if self.jitter_ticks > 0 {
            let j = i64::from(self.jitter_ticks);
            self.rng.random_range(-j..=j)
        } else {
            0
        };
        st.next_local = st
            .next_local
            .saturating_add_signed(self.update_ticks as i64 + jitter);
        let next = st.timer.real_at(st.next_local);
        insert_sorted(&mut self.queue, next, i as u16);
        // Beacons: one frame, heard by every neighbour; with two-way timing it echoes
        // one neighbour, in turn.
        let from = i as NodeId;
        let (lo, hi) = (self.row_start[i], self.row_start[i + 1]);
        let timing = self.two_way.then(|| {
            let degree = hi - lo;
            let echo = (degree > 0)
                .then(|| {
                    // Round robin without a division per update (`echo_next` stays
                    // below the degree, which never changes).
                    let k = if st.echo_next < degree {
                        st.echo_next
                    } else {
                        0
                    };
                    st.echo_next = if k + 1 < degree { k + 1 } else { 0 };
                    let target = self.targets[lo + k];
                    st.node.echo_for(target, local).map(|echo| (target, echo))
                })
                .flatten();
            (
                Timing {
                    tx_ticks: local,
                    trim_ppb: st.node.trim_ppb(),
                    echo: None,
                },
                echo,
            )
        });
        for slot in lo..hi {
            let Some(&out) = self.out.get(slot) else {
                continue;
            };
            let j = usize::from(out.to);
            let Some(rx) = self.stations.get(j) else {
                continue;
            };
            if !rx.alive {
                continue;
            }
            let mut arrive = t + out.latency_sub;
            self.stats.beacons_sent += 1;
            let success = self
                .slot_success
                .as_ref()
                .and_then(|v| v.get(slot).copied())
                .unwrap_or(self.success_prob);
            if success < 1.0 && self.rng.random::<f64>() >= success {
                self.stats.beacons_lost += 1;
                continue;
            }
            // A stall at the receiver: the frame is taken, and stamped, late (at most a
            // quarter update interval, so never after the link's next frame).
            let (late_p, late_max) = self.late_stamps;
            if late_p > 0.0 && self.rng.random::<f64>() < late_p {
                arrive += u64::from(self.rng.random_range(0..=late_max)) * SUB;
            }
            let mut rx_ticks = rx.timer.stamp_at(arrive, self.stamping) as u32;
            if self.ts_jitter > 0 {
                let j = self.ts_jitter as i32;
                rx_ticks = rx_ticks.wrapping_add_signed(self.rng.random_range(-j..=j));
            }
            let timing = timing.map(|(mut t, echo)| {
                t.echo = echo.and_then(|(target, e)| (usize::from(target) == j).then_some(e));
                t
            });
            if let Some(b) = self.inbox.get_mut(j) {
                b.push(Beacon {
                    from,
                    phase,
                    arrive,
                    rx_ticks,
                    delay_ticks: out.told_ticks,
                    timing,
                    weight_q16: out.weight_q16,
                });
            }
        }
    }

    /// One round of the lock-step shortcut: every node updates at the same instant from
    /// the beacons of the previous round, then beacons. The same observations, in the
    /// same order, and the same random draws as the event queue makes for this schedule.
    fn lock_step_round(&mut self) {
        let m = self.update_ticks;
        let first = self.rounds == 0;
        let latency = self.latency_ticks;
        for (i, st) in self.stations.iter_mut().enumerate() {
            let local = st.next_local as u32;
            st.node.advance_to(local);
            let (lo, hi) = (self.row_start[i], self.row_start[i + 1]);
            if !first && !st.reference {
                // Beacons of the previous round: sent at local − m, received `latency`
                // ticks later by this node's (ideal) timer.
                let rx_ticks = local.wrapping_sub(m as u32).wrapping_add(latency);
                for s in lo..hi {
                    let (Some(&j), Some(&back)) = (self.targets.get(s), self.reverse.get(s)) else {
                        continue;
                    };
                    if !self.delivered.get(back).copied().unwrap_or(false) {
                        continue;
                    }
                    let Some(&phase) = self.sent.get(usize::from(j)) else {
                        continue;
                    };
                    let obs = Observation {
                        from: j,
                        phase,
                        rx_ticks,
                        delay_ticks: latency,
                    };
                    // As above: only a full table is counted.
                    let weight = self.slot_weight.get(s).copied().unwrap_or(WEIGHT_ONE);
                    if let Err(ObserveError::TableFull(_)) =
                        st.node.observe_weighted(obs, None, weight)
                    {
                        self.stats.table_full += 1;
                    }
                }
            }
            if !st.reference {
                let report = st.node.update(local);
                self.trim_peak_raw = self.trim_peak_raw.max(st.node.trim_raw().unsigned_abs());
                if let Some(r) = self.recorder.as_mut() {
                    r.record(i, &report, &st.node);
                }
                self.stats.node_updates += 1;
                self.stats.neighbour_updates += u64::from(report.used);
                self.stats.slew_limited += u64::from(report.slew_limited);
            }
            st.next_local += m;
        }
        for (st, sent) in self.stations.iter().zip(self.sent.iter_mut()) {
            *sent = st.node.phase();
        }
        let slots = self.delivered.len() as u64;
        self.stats.beacons_sent += slots;
        if self.success_prob < 1.0 {
            for d in &mut self.delivered {
                *d = self.rng.random::<f64>() < self.success_prob;
                self.stats.beacons_lost += u64::from(!*d);
            }
        } else {
            self.delivered.iter_mut().for_each(|d| *d = true);
        }
        self.rounds += 1;
    }

    /// The settling tracker of this run (its verdict is final once the horizon is
    /// covered).
    #[must_use]
    pub fn tracker(&self) -> &SettleTracker {
        &self.tracker
    }

    /// Run every sample up to the horizon (no early stop: settling is judged over the
    /// whole run), recording into `trace` if given, and report the run. Samples already
    /// taken with [`Network::step`] count; a network stepped past its horizon reports as
    /// it stands.
    pub fn run(&mut self, mut trace: Option<&mut Trace>) -> RunOutcome {
        while self.sample < self.horizon {
            let s = self.step();
            if let Some(tr) = trace.as_deref_mut() {
                tr.record(&s, &self.phases);
            }
        }
        self.outcome(trace)
    }

    /// Report the run as it stands, taking it to have stayed inside the band from the
    /// last sample to the horizon ([`SettleTracker::assume_inside_to_horizon`]): for a
    /// caller that stops a run early once it has stayed deep inside the band (the
    /// outcome's `samples` says how far it went; its steady window holds only the samples
    /// taken).
    pub fn finish_settled(&mut self) -> RunOutcome {
        self.tracker.assume_inside_to_horizon();
        self.outcome(None)
    }

    fn outcome(&mut self, trace: Option<&mut Trace>) -> RunOutcome {
        let settle = self.tracker.settle();
        let first_entry = self.tracker.first_entry();
        if let Some(tr) = trace {
            tr.settle_updates = settle.map(|s| s.at_updates);
            tr.first_entry_updates = first_entry;
        }
        let winding = if self.ring {
            let phases: Vec<Phase> = self.phases.iter().flatten().copied().collect();
            (phases.len() == self.phases.len()).then(|| winding_number(&phases))
        } else {
            None
        };
        let live: Vec<Phase> = self.phases.iter().flatten().copied().collect();
        let limit = i64::from(self.config.trim_limit_ppb());
        let adjusting: Vec<&Station<N>> = self.stations.iter().filter(|s| !s.reference).collect();
        let common_rate_ppm = adjusting
            .iter()
            .map(|s| s.ppm + f64::from(s.node.trim_ppb()) / 1000.0)
            .sum::<f64>()
            / adjusting.len().max(1) as f64;
        // Within one ppb of the limit (the ppb figure rounds toward zero).
        let trims_at_limit = adjusting
            .iter()
            .filter(|s| i64::from(s.node.trim_ppb()).abs() >= limit - 1)
            .count();
        let target = if self.stations.iter().any(|s| s.reference) {
            0.0
        } else {
            adjusting.iter().map(|s| s.ppm).sum::<f64>() / adjusting.len().max(1) as f64
        };
        // Each adjusting node's trim minus its ideal trim, ppm (PI law only).
        let signed: Vec<f64> = if self.config.ki().q16() == 0 {
            Vec::new()
        } else {
            adjusting
                .iter()
                .map(|s| {
                    let ideal = ((1.0 + target * 1e-6) / (1.0 + s.ppm * 1e-6) - 1.0) * 1e6;
                    f64::from(s.node.trim_ppb()) / 1000.0 - ideal
                })
                .collect()
        };
        let common = signed.iter().sum::<f64>() / signed.len().max(1) as f64;
        let trim_spread_errors_ppm = signed.iter().map(|e| (e - common).abs()).collect();
        let trim_errors_ppm = signed.iter().map(|e| e.abs()).collect();
        RunOutcome {
            trim_errors_ppm,
            trim_spread_errors_ppm,
            settle,
            first_entry_updates: first_entry,
            steady_counts: self.tracker.steady_counts().to_vec(),
            steady_stride: self.tracker.stride(),
            samples: self.sample,
            final_network_turns: f64::from(self.last.map_or(0, |l| l.network_counts)) / TURN,
            final_link_turns: f64::from(largest_neighbour_diff_live(
                &live,
                &self.pairs,
                &self.phases,
            )) / TURN,
            winding,
            last_rejoin_updates: self.last_rejoin,
            common_rate_ppm,
            trims_at_limit,
            stats: self.stats,
        }
    }
}

/// The link error among live nodes (down nodes are skipped).
fn largest_neighbour_diff_live(
    live: &[Phase],
    pairs: &[(usize, usize)],
    phases: &[Option<Phase>],
) -> u32 {
    if live.len() == phases.len() {
        return largest_neighbour_diff(live, pairs);
    }
    pairs
        .iter()
        .filter_map(|&(a, b)| {
            let pa = (*phases.get(a)?)?;
            let pb = (*phases.get(b)?)?;
            Some(pa.diff(pb).unsigned_abs())
        })
        .max()
        .unwrap_or(0)
}

/// Each link's latency per direction (sub-ticks, per sender slot) and the delay its
/// receiver is told (its own ticks): drawn once per run (see [`Beacons`](super::Beacons)).
fn link_latencies(
    row_start: &[usize],
    targets: &[u16],
    reverse: &[usize],
    b: &super::setup::Beacons,
    ppm: &[f64],
    rng: &mut ChaCha8Rng,
) -> (Vec<u64>, Vec<u32>) {
    let slots = targets.len();
    let base = u64::from(b.latency_ticks) * SUB;
    let mut latency = vec![base; slots];
    let mut told = vec![if b.latency_known { b.latency_ticks } else { 0 }; slots];
    if b.uniform_latency() {
        // Told in nominal ticks: a crystal error leaves a small residue.
        return (latency, told);
    }
    let spread = u64::from(b.latency_spread_ticks) * SUB;
    let asym = i64::from(b.asymmetry_ticks) * SUB as i64;
    for (i, w) in row_start.windows(2).enumerate() {
        for s in w[0]..w[1] {
            let j = usize::from(targets[s]);
            if j < i {
                continue; // drawn with the other direction
            }
            let mean = base
                + if spread > 0 {
                    rng.random_range(0..=spread)
                } else {
                    0
                };
            let d = if asym > 0 {
                rng.random_range(-asym..=asym)
            } else {
                0
            };
            let there = (mean as i64 + d / 2).max(0) as u64;
            let back = (mean as i64 - (d - d / 2)).max(0) as u64;
            let r = reverse[s];
            latency[s] = there;
            latency[r] = back;
            if b.latency_known {
                // The mean latency in each receiver's own ticks, to the nearest tick.
                let ticks = |rx: usize| {
                    let e = ppm.get(rx).copied().unwrap_or(0.0);
                    (mean as f64 / SUB as f64 * (1.0 + e * 1e-6)).round() as u32
                };
                told[s] = ticks(j);
                told[r] = ticks(i);
            }
        }
    }
    (latency, told)
}

/// For each receiver slot (node i's neighbour j, in `targets`), the slot of i in j's
/// neighbour list.
fn reverse_slots(row_start: &[usize], targets: &[u16]) -> Vec<usize> {
    let mut reverse = vec![0; targets.len()];
    for (i, w) in row_start.windows(2).enumerate() {
        let (lo, hi) = (w[0], w[1]);
        for s in lo..hi {
            let j = usize::from(targets[s]);
            let (jlo, jhi) = (row_start[j], row_start[j + 1]);
            let pos = targets[jlo..jhi]
                .iter()
                .position(|&x| usize::from(x) == i)
                .expect("links are undirected: j lists i when i lists j");
            reverse[s] = jlo + pos;
        }
    }
    reverse
}

/// Insert keeping ascending time, after any equal times (scans from the back: a new
/// update time is almost always among the latest).
fn insert_sorted(queue: &mut VecDeque<(u64, u16)>, t: u64, i: u16) {
    let mut at = queue.len();
    while at > 0 && queue.get(at - 1).is_some_and(|&(u, _)| u > t) {
        at -= 1;
    }
    if at == queue.len() {
        // The usual case, without `insert`'s shifting machinery.
        queue.push_back((t, i));
    } else {
        queue.insert(at, (t, i));
    }
}

/// A phase from any real number of turns, rounded to the nearest count.
#[must_use]
pub fn phase_from_turns(turns: f64) -> Phase {
    let frac = turns.rem_euclid(1.0);
    Phase::from_counts(((frac * TURN).round() as u64) as u32)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timer_maps_both_ways() {
        let t = Timer::new(50.0, 1_000 * SUB, 7);
        // 10⁶ nominal ticks later the fast crystal has counted 50 extra (the timer shows
        // completed ticks, and the Q32.32 rate is rounded, so it may show one less).
        let local = t.local_at(1_000 * SUB + 1_000_000 * SUB);
        assert!((7 + 1_000_049..=7 + 1_000_050).contains(&local), "{local}");
        let back = t.real_at(7 + 1_000_050);
        assert!((back as i64 - (1_001_000 * SUB) as i64).abs() <= 1);
        let ideal = Timer::new(0.0, 0, 0);
        assert_eq!(ideal.real_at(12_345), 12_345 * SUB);
    }

    #[test]
    fn insertion_keeps_order_and_fifo_ties() {
        let mut q: VecDeque<(u64, u16)> = [(1, 0), (5, 1), (9, 2)].into();
        insert_sorted(&mut q, 5, 3);
        insert_sorted(&mut q, 0, 4);
        insert_sorted(&mut q, 10, 5);
        let order: Vec<u16> = q.iter().map(|&(_, i)| i).collect();
        assert_eq!(order, vec![4, 0, 1, 3, 2, 5]);
    }

    #[test]
    fn phase_from_turns_wraps_and_rounds() {
        assert_eq!(phase_from_turns(0.25).counts(), 1 << 30);
        assert_eq!(phase_from_turns(-0.25).counts(), 3 << 30);
        assert_eq!(phase_from_turns(3.5).counts(), 1 << 31);
    }
}
