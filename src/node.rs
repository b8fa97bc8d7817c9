//! One node: its local clock, its neighbour table and the PI update law.

use crate::arith::{mul_64_32, mul_ppb, mul_q16_round};
use crate::law::{Coupling, Linear, Sine};
use crate::{Config, Law, Phase};
use core::fmt;
use heapless::Vec;

/// A node's identity on the network.
pub type NodeId = u16;

/// One neighbour phase observation, as a node's receive path hands it over.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Observation {
    /// The neighbour's id.
    pub from: NodeId,
    /// The neighbour's phase at the instant it sent.
    pub phase: Phase,
    /// This node's timer, in ticks, when the message arrived (wrapping).
    pub rx_ticks: u32,
    /// The known link delay from the sender's send instant to `rx_ticks`, in this node's
    /// timer ticks.
    pub delay_ticks: u32,
}

/// Why [`Node::observe`] refused an observation; the observation is handed back and the
/// node is unchanged.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ObserveError {
    /// The observation is from a neighbour not in the table, and all `N` entries are
    /// taken.
    TableFull(Observation),
    /// The observation was received later than the node's current instant
    /// ([`Node::now_ticks`]) by more than the timeout
    /// ([`Config::timeout_ticks`](crate::Config::timeout_ticks)): a timestamp from a
    /// broken clock or a wrong unit, or the node's clock was not advanced for longer than
    /// the timeout (its next advance would empty the table anyway). Kept, such an entry
    /// would count as the newest from its neighbour and shadow every genuine observation
    /// until the node's clock caught up with it, up to 2^31 ticks.
    FromTheFuture(Observation),
}

impl ObserveError {
    /// The refused observation.
    #[must_use]
    pub const fn observation(&self) -> Observation {
        match *self {
            ObserveError::TableFull(obs) | ObserveError::FromTheFuture(obs) => obs,
        }
    }
}

impl fmt::Display for ObserveError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ObserveError::TableFull(obs) => write!(
                f,
                "neighbour table full: observation from node {} rejected",
                obs.from
            ),
            ObserveError::FromTheFuture(obs) => write!(
                f,
                "observation from node {} received at tick {}, later than the node's clock by more than the timeout: rejected",
                obs.from, obs.rx_ticks
            ),
        }
    }
}

impl core::error::Error for ObserveError {}

/// Two-way timing that a version-2 beacon carries with its phase: what the receiving
/// node needs to measure the link's delay instead of being told it.
///
/// The sender stamps its own timer when the frame leaves (`tx_ticks`); the receiver
/// keeps that stamp with its reception time and, in one of its own later beacons,
/// echoes it back with how long it held it ([`Echo`]). The first node then knows the
/// round trip `(rx − echoed tx) − held`, and takes half of it as the one-way delay —
/// two-way time transfer, as the open network-time standards measure path delay (Mills,
/// RFC 5905 §8, "Computing the offset and delay"). A delay the node measures this way is
/// exact when the two directions of the link are equally late; if they differ by `a`,
/// the node sees its neighbour off by `a/2` (the standard's own residual, ibid.).
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Timing {
    /// The sender's timer when the beacon left, the sender's ticks.
    pub tx_ticks: u32,
    /// The sender's rate trim when it sent, parts per billion (the frame's trim field):
    /// it converts the sender's held ticks into this node's.
    pub trim_ppb: i32,
    /// The sender's echo of this node's own last beacon it heard, if it carries one for
    /// this node.
    pub echo: Option<Echo>,
}

/// A neighbour's echo of one of this node's beacons (see [`Timing`]).
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Echo {
    /// This node's own `tx_ticks` of the beacon echoed, as it sent them.
    pub tx_ticks: u32,
    /// The echoing neighbour's ticks from that beacon's reception to the send of the
    /// beacon that carries the echo.
    pub held_ticks: u32,
}

/// Fractional bits of a measured link delay (`Entry::delay_q16`): 2^-16 tick.
const DELAY_FRAC: u32 = 16;

/// A neighbour's coupling weight of one (a plain link), Q16.16: the weight
/// [`observe`](Node::observe) and [`observe_timed`](Node::observe_timed) give every
/// neighbour. With weight one the law's arithmetic is exactly the unweighted law's.
pub const WEIGHT_ONE: u32 = 1 << 16;

/// What one update did.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct UpdateReport {
    /// The phase step applied, counts (after the slew limit).
    pub correction: i32,
    /// True when the slew limit cut the step (the integral term then holds still).
    pub slew_limited: bool,
    /// Neighbours that pulled.
    pub used: u8,
    /// Neighbours dropped this update for silence longer than the timeout.
    pub evicted: u8,
    /// The largest |Δ| to a neighbour before the step, counts.
    pub largest_diff: u32,
}

/// One neighbour-table entry.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Entry {
    id: NodeId,
    /// Estimated Δ (neighbour − self) at the node's current instant, plus the
    /// node's cumulative correction then: Δ now = anchored_diff − corrections.
    anchored_diff: u32,
    /// Local ticks when last heard.
    heard: u32,
    /// The neighbour's own `tx_ticks` of the beacon last heard (to echo back), valid
    /// when `timed`.
    their_tx: u32,
    /// Whether the last beacon heard carried two-way timing.
    timed: bool,
    /// Echo samples taken into `delay_q16` (saturating; 0: no measurement yet).
    samples: u8,
    /// Measured one-way delay beyond the observation's `delay_ticks`, this node's ticks
    /// in Q.16, smoothed over the echoes (see [`Config::delay_smoothing`]).
    delay_q16: i64,
    /// Coupling weight of this neighbour, Q16.16 ([`WEIGHT_ONE`] for a plain link), as
    /// the last accepted observation gave it.
    weight_q16: u32,
}

/// A neighbour as the node sees it: what [`Node::links`] yields.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LinkView {
    /// The neighbour's id.
    pub id: NodeId,
    /// Its phase minus this node's, counts, extrapolated to the node's current instant
    /// (the Δ the next update pulls with, if nothing newer arrives).
    pub diff: i32,
    /// The node's timer when the neighbour was last heard.
    pub heard_ticks: u32,
    /// The link delay measured by two-way timing beyond the configured `delay_ticks`,
    /// ticks (rounded), or `None` before the first echo.
    pub measured_delay_ticks: Option<i32>,
}

/// One node's phase state, its neighbour table of capacity `N`, and the PI law.
///
/// The local clock advances the phase from the node's own timer ticks: a Q32.32
/// accumulator gains `rate_nominal + trim` per tick, so a trim of 0.01 ppm is about
/// 184,000 units of 2^-32 count per tick at a 1 MHz timer and 1 s period, and nothing
/// is lost to rounding over days (the per-tick rounding of the nominal rate is below
/// 2^-32 count, a relative 5·10⁻¹⁴ at that rate).
///
/// Each [`update`](Node::update) applies
/// `phase += clamp(kp · Σ pull(Δ_j), ±slew_limit)` and
/// `trim += ki · Σ pull(Δ_j) / update_ticks − leak · trim` (not while slew-limited; clamped
/// to the trim range), where `Δ_j` is neighbour j's phase, extrapolated from its observation to now,
/// minus this node's. The new trim takes effect from the next update, so at update
/// instants the node follows the PI model θ⁺ = θ + v − kp·Lθ, v⁺ = v − ki·Lθ exactly
/// (v: the trim as phase per update; with a leak γ, v⁺ = (1 − γ)v − ki·Lθ), whose modes
/// obey z² − (2 − γ − kpλ)z + (1 − γ)(1 − kpλ) + kiλ. The leak holds the network's common
/// rate at the mean of its crystals: without it the sum of all trims has no restoring
/// force and wanders with every timestamp error (docs/design.md, "Two-way timing and the
/// leak").
///
/// A neighbour heard through [`observe_weighted`](Node::observe_weighted) pulls with its
/// link's weight, `pull(Δ_j)·w_j` in both sums (the weighted Laplacian's law).
///
/// Observations with two-way [`Timing`] ([`observe_timed`](Node::observe_timed)) let
/// the node measure each link's delay itself, so that neither an unknown latency nor a
/// biased reception timestamp leaves every node seeing its neighbours late.
///
/// One neighbour, however it lies, moves the node at most `slew_limit` counts per
/// update.
///
/// The node never allocates and never panics. All arithmetic wraps or saturates
/// explicitly, so the integer laws give the same bits on every target.
///
/// ```
/// use entrain::{Config, Node, Observation, Phase};
/// let config = Config::builder(1_000_000, 100_000).build().unwrap();
/// let mut node: Node<2> = Node::new(config, Phase::ZERO, 0);
/// // A neighbour a hundredth of a turn ahead, heard just now over a 50-tick link.
/// let ahead = Phase::from_turns(0.01);
/// node.observe(Observation { from: 7, phase: ahead, rx_ticks: 0, delay_ticks: 50 }).unwrap();
/// let report = node.update(0);
/// assert_eq!(report.used, 1);
/// assert!(report.correction > 0); // pulled forward, toward the neighbour
/// ```
#[derive(Clone, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Node<const N: usize> {
    config: Config,
    /// Phase in Q32.32 counts.
    acc: u64,
    /// Rate trim in effect, Q32.32 counts per tick.
    trim: i64,
    /// Rate trim that takes effect at the next update.
    trim_next: i64,
    /// Local timer at the last advance.
    now: u32,
    /// Sum of all corrections applied (wrapping), the reference of `Entry::anchored_diff`.
    corrections: u32,
    /// Completed turns, net of corrections stepping back across zero.
    cycles: u32,
    table: Vec<Entry, N>,
}

/// Largest neighbour table a [`Node`] holds (`N ≤ MAX_NEIGHBOURS`): table indices fit a `u8`.
/// Every host-side neighbour limit (simulator, scenario files) is this one.
pub const MAX_NEIGHBOURS: usize = 255;

impl<const N: usize> Node<N> {
    const CAPACITY_OK: () = assert!(
        N >= 1 && N <= MAX_NEIGHBOURS,
        "a node holds 1 to 255 neighbours"
    );

    /// A node starting at `phase` with its timer reading `now_ticks`, no neighbours, and
    /// zero trim.
    #[must_use]
    pub const fn new(config: Config, phase: Phase, now_ticks: u32) -> Self {
        let () = Self::CAPACITY_OK;
        Node {
            config,
            acc: (phase.counts() as u64) << 32,
            trim: 0,
            trim_next: 0,
            now: now_ticks,
            corrections: 0,
            cycles: 0,
            table: Vec::new(),
        }
    }

    /// The configuration this node runs.
    #[must_use]
    pub const fn config(&self) -> &Config {
        &self.config
    }

    /// The phase at the last advance.
    #[must_use]
    pub const fn phase(&self) -> Phase {
        Phase::from_counts((self.acc >> 32) as u32)
    }

    /// The local timer at the last advance.
    #[must_use]
    pub const fn now_ticks(&self) -> u32 {
        self.now
    }

    /// Completed turns since start (wrapping), net of corrections that stepped back
    /// across zero: it rises by exactly one per period, which is what a sync-pulse
    /// output keys on.
    #[must_use]
    pub const fn cycles(&self) -> u32 {
        self.cycles
    }

    /// Neighbours in the table (fresh or not yet evicted).
    #[must_use]
    pub fn neighbour_count(&self) -> usize {
        self.table.len()
    }

    /// Ids of the neighbours in the table.
    pub fn neighbours(&self) -> impl Iterator<Item = NodeId> + '_ {
        self.table.iter().map(|e| e.id)
    }

    /// Rate per tick, Q32.32 counts: nominal plus trim.
    const fn rate(&self) -> u64 {
        self.config.rate_nominal().wrapping_add(self.trim as u64)
    }

    /// The phase at local time `now_ticks`, extrapolated at the current rate without
    /// changing any state. `now_ticks` may be up to 2^31 ticks either side of
    /// [`now_ticks`](Node::now_ticks).
    #[must_use]
    pub const fn phase_at(&self, now_ticks: u32) -> Phase {
        let span = now_ticks.wrapping_sub(self.now) as i32 as i64 as u64;
        Phase::from_counts((self.acc.wrapping_add(span.wrapping_mul(self.rate())) >> 32) as u32)
    }

    /// The current rate trim in Q32.32 counts per tick.
    #[must_use]
    pub const fn trim_raw(&self) -> i64 {
        self.trim
    }

    /// The current rate trim, parts per billion of the nominal rate (rounded toward zero).
    #[must_use]
    pub const fn trim_ppb(&self) -> i32 {
        // |trim|·10⁹ within 64 bits (|trim| < 1.8·10¹⁰, every trim up to 1,000 ppm at a
        // 1 MHz timer and a 1 s period): a u64 division of the magnitudes truncates toward
        // zero as the i128 one does.
        let (low, high) = mul_64_32(self.trim.unsigned_abs(), 1_000_000_000);
        if high == 0 {
            let mag = match low.checked_div(self.config.rate_nominal()) {
                Some(q) => q,
                None => 0,
            };
            // mag ≤ 10⁸ (see below).
            return if self.trim < 0 {
                -(mag as i32)
            } else {
                mag as i32
            };
        }
        self.trim_ppb_wide()
    }

    /// [`trim_ppb`](Node::trim_ppb) in `i128`, for any trim.
    const fn trim_ppb_wide(&self) -> i32 {
        // `checked_div`, not `/`: the nominal rate is never zero (a built `Config` has at
        // most 2^32 − 1 ticks per period, so the rate is at least 2^32), but the compiler
        // cannot see that, and `/` would carry a division-by-zero panic into every
        // firmware that sends a beacon. The `None` arm is never taken.
        let ppb = match (self.trim as i128 * 1_000_000_000)
            .checked_div(self.config.rate_nominal() as i128)
        {
            Some(ppb) => ppb,
            None => 0,
        };
        // |trim| ≤ 10 % of the nominal rate, so |ppb| ≤ 10⁸.
        ppb as i32
    }

    /// Set the rate trim (for example from a value saved before a reboot), clamped to the
    /// configured range.
    pub const fn set_trim_ppb(&mut self, ppb: i32) {
        let raw = self.config.rate_nominal() as i128 * ppb as i128 / 1_000_000_000;
        self.trim = clamp_i128(raw, self.config.trim_limit_raw());
        self.trim_next = self.trim;
    }

    /// Run the local clock to `now_ticks` (which must be within 2^31 ticks after the
    /// last advance; an earlier time changes nothing). Returns the forward turns
    /// completed through zero. A silence longer than the timeout empties the neighbour
    /// table, so a timer wrap can never make a stale neighbour look fresh.
    pub fn advance_to(&mut self, now_ticks: u32) -> u32 {
        let elapsed = now_ticks.wrapping_sub(self.now);
        if elapsed == 0 || elapsed > i32::MAX as u32 {
            return 0;
        }
        self.now = now_ticks;
        if elapsed > self.config.timeout_ticks() {
            self.table.clear();
        }
        // acc + elapsed·rate, a 96-bit sum: its top word is the turns completed.
        let (low, high) = mul_64_32(self.rate(), elapsed);
        let (acc, carry) = self.acc.overflowing_add(low);
        self.acc = acc;
        // elapsed < 2^31 and rate < 2^64, so the turn count is below 2^31.
        let turns = high + carry as u32;
        self.cycles = self.cycles.wrapping_add(turns);
        turns
    }

    /// Take one neighbour observation. The neighbour's phase is extrapolated from its
    /// send instant (`rx_ticks − delay_ticks`) to the node's current instant at the
    /// node's own rate. An entry for the same neighbour is replaced, unless the held one
    /// is newer (then it is kept: it is the fresher estimate).
    ///
    /// `rx_ticks` may be later than [`now_ticks`](Node::now_ticks) (a frame heard
    /// between two updates) by at most the timeout,
    /// [`Config::timeout_ticks`](crate::Config::timeout_ticks); a reception stamped
    /// further ahead is refused, so a held entry is never more than the timeout ahead of
    /// the node's clock and cannot shadow later genuine observations for longer.
    ///
    /// # Errors
    /// The observation is handed back, the node unchanged:
    /// [`ObserveError::FromTheFuture`] when `rx_ticks` is more than the timeout after
    /// [`now_ticks`](Node::now_ticks) and at most 2^31 after (further still reads as the
    /// past); [`ObserveError::TableFull`] when it comes from a new neighbour and
    /// all `N` entries are taken.
    pub fn observe(&mut self, obs: Observation) -> Result<(), ObserveError> {
        self.observe_timed(obs, None)
    }

    /// [`observe`](Node::observe) with the two-way timing of a version-2 beacon.
    ///
    /// The node keeps the sender's `tx_ticks` to echo back ([`echo_for`](Node::echo_for)),
    /// and when the timing carries an echo of this node's own beacon it takes a delay
    /// sample: the round trip `(rx_ticks − echo.tx_ticks) − held` (the held ticks
    /// converted from the sender's timer to this node's through the two trims), halved,
    /// less the observation's `delay_ticks`. The samples are smoothed per neighbour
    /// (exponentially, weight 2^−[`delay_smoothing`](Config::delay_smoothing); the
    /// first is taken whole) and the estimate is added to `delay_ticks` in every later
    /// observation from that neighbour, timed or not. An echo of a send after this
    /// reception, or a round trip below minus an eighth of the timeout or above twice
    /// the timeout, is stale or broken (for example an echo of a beacon sent before this
    /// node rebooted) and is ignored; small negative round trips, which stamps of
    /// completed ticks produce on short links, are kept, so the mean stays unbiased.
    ///
    /// With `timing: None` this is exactly `observe`.
    ///
    /// # Errors
    /// As [`observe`](Node::observe); a refused observation changes nothing, delay
    /// estimate included.
    pub fn observe_timed(
        &mut self,
        obs: Observation,
        timing: Option<Timing>,
    ) -> Result<(), ObserveError> {
        self.observe_weighted(obs, timing, WEIGHT_ONE)
    }

    /// [`observe_timed`](Node::observe_timed) from a neighbour whose link carries the
    /// coupling weight `weight_q16` (Q16.16; [`WEIGHT_ONE`] is a plain link): that
    /// neighbour's pull enters the update scaled by the weight,
    /// `round(pull(Δ_j) · weight_q16 / 2^16)` (ties away from zero, saturating), so the
    /// node follows the weighted Laplacian's law. Every accepted observation sets the
    /// neighbour's weight. With `WEIGHT_ONE` this is exactly `observe_timed`.
    ///
    /// # Errors
    /// As [`observe`](Node::observe).
    pub fn observe_weighted(
        &mut self,
        obs: Observation,
        timing: Option<Timing>,
        weight_q16: u32,
    ) -> Result<(), ObserveError> {
        let age = self.now.wrapping_sub(obs.rx_ticks) as i32;
        // The timeout is at most i32::MAX (checked when the configuration was built).
        if age < 0 && age.unsigned_abs() > self.config.timeout_ticks() {
            return Err(ObserveError::FromTheFuture(obs));
        }
        let sample = match timing {
            Some(Timing {
                trim_ppb,
                echo: Some(echo),
                ..
            }) => self.delay_sample(&obs, trim_ppb, echo),
            _ => None,
        };
        let index = match self.table.iter().position(|e| e.id == obs.from) {
            Some(i) => i,
            None => {
                let fresh = Entry {
                    id: obs.from,
                    anchored_diff: 0,
                    heard: obs.rx_ticks,
                    their_tx: 0,
                    timed: false,
                    samples: 0,
                    delay_q16: 0,
                    weight_q16,
                };
                if self.table.push(fresh).is_err() {
                    return Err(ObserveError::TableFull(obs));
                }
                self.table.len().wrapping_sub(1)
            }
        };
        let rate = self.rate();
        let acc = self.acc;
        let corrections = self.corrections;
        let smoothing = self.config.delay_smoothing();
        let Some(entry) = self.table.get_mut(index) else {
            return Ok(());
        };
        entry.weight_q16 = weight_q16;
        // A fresh entry was stamped with this reception; a held one is replaced only by
        // a reception at least as new (the held one is otherwise the fresher estimate).
        let newer = (obs.rx_ticks.wrapping_sub(entry.heard) as i32) >= 0;
        if let Some(s) = sample {
            entry.delay_q16 = if entry.samples == 0 {
                s
            } else {
                let step = s.wrapping_sub(entry.delay_q16);
                let half = if smoothing == 0 {
                    0
                } else {
                    1i64 << (smoothing - 1)
                };
                entry
                    .delay_q16
                    .wrapping_add((step.wrapping_add(half)) >> smoothing)
            };
            entry.samples = entry.samples.saturating_add(1);
        }
        if !newer {
            return Ok(());
        }
        let ticks = i64::from(obs.delay_ticks).wrapping_add(i64::from(age));
        let (whole, frac) = if entry.samples == 0 {
            (ticks, 0)
        } else {
            (
                ticks.wrapping_add(entry.delay_q16 >> DELAY_FRAC),
                (entry.delay_q16 & ((1 << DELAY_FRAC) - 1)) as u64,
            )
        };
        // The fractional tick at the rate less its low 16 bits: off by under 2^-32 count.
        let span_phase = (whole as u64)
            .wrapping_mul(rate)
            .wrapping_add((rate >> DELAY_FRAC).wrapping_mul(frac));
        let neighbour = (u64::from(obs.phase.counts()) << 32).wrapping_add(span_phase);
        // Round to the nearest count.
        let diff = (neighbour.wrapping_sub(acc).wrapping_add(1 << 31) >> 32) as u32;
        entry.anchored_diff = diff.wrapping_add(corrections);
        entry.heard = obs.rx_ticks;
        match timing {
            Some(t) => {
                entry.their_tx = t.tx_ticks;
                entry.timed = true;
            }
            None => entry.timed = false,
        }
        Ok(())
    }

    /// One delay sample from an echo, this node's ticks in Q.16 beyond `delay_ticks`, or
    /// `None` for an implausible round trip.
    fn delay_sample(&self, obs: &Observation, their_trim_ppb: i32, echo: Echo) -> Option<i64> {
        let round = obs.rx_ticks.wrapping_sub(echo.tx_ticks) as i32;
        let timeout = i64::from(self.config.timeout_ticks());
        if round < 0 || echo.held_ticks > i32::MAX as u32 {
            return None;
        }
        // Held ticks of the sender's timer in this node's: at lock both trimmed clocks
        // run at the network's rate, so ticks scale by (nominal + their trim) / (nominal
        // + our trim). i128: held < 2^31, shifted 16, times a rate < 2^64.
        let nominal = i128::from(self.config.rate_nominal());
        let theirs = nominal + mul_ppb(self.config.rate_nominal(), their_trim_ppb);
        let ours = nominal + i128::from(self.trim);
        let held_q16 = match (i128::from(echo.held_ticks) << DELAY_FRAC)
            .wrapping_mul(theirs)
            .checked_div(ours)
        {
            Some(h) => h as i64,
            None => return None,
        };
        let round_q16 = (i64::from(round) << DELAY_FRAC).wrapping_sub(held_q16);
        // Stamps of completed ticks at both ends shorten a true round trip by up to two
        // ticks, timestamp jitter by more: a short link's samples straddle zero, and
        // refusing the negative ones would bias the mean (every node would then see its
        // neighbours ahead). Only a round trip shorter than minus an eighth of the
        // timeout, or longer than twice the timeout, is broken.
        if round_q16 < -((timeout >> 3) << DELAY_FRAC) || round_q16 > (2 * timeout) << DELAY_FRAC {
            return None;
        }
        let one_way = round_q16 / 2;
        Some(one_way.wrapping_sub(i64::from(obs.delay_ticks) << DELAY_FRAC))
    }

    /// The echo this node's next beacon, sent at `tx_ticks`, carries for neighbour `id`:
    /// that neighbour's own send stamp of the last beacon heard from it, and the ticks
    /// held since. `None` if the neighbour is not in the table, its last beacon carried
    /// no timing, or `tx_ticks` is before that reception.
    #[must_use]
    pub fn echo_for(&self, id: NodeId, tx_ticks: u32) -> Option<Echo> {
        let e = self.table.iter().find(|e| e.id == id && e.timed)?;
        let held = tx_ticks.wrapping_sub(e.heard);
        (held as i32 >= 0).then_some(Echo {
            tx_ticks: e.their_tx,
            held_ticks: held,
        })
    }

    /// The neighbours in the table as the node sees them now (for telemetry and
    /// diagnostics). Read right after [`update`](Node::update), each difference is the
    /// one the law used minus the step just applied.
    pub fn links(&self) -> impl Iterator<Item = LinkView> + Clone + '_ {
        let corrections = self.corrections;
        self.table.iter().map(move |e| LinkView {
            id: e.id,
            diff: e.anchored_diff.wrapping_sub(corrections) as i32,
            heard_ticks: e.heard,
            measured_delay_ticks: (e.samples > 0)
                .then_some((e.delay_q16.wrapping_add(1 << (DELAY_FRAC - 1)) >> DELAY_FRAC) as i32),
        })
    }

    /// Drop a neighbour from the table; true if it was there.
    pub fn forget(&mut self, id: NodeId) -> bool {
        match self.table.iter().position(|e| e.id == id) {
            Some(i) => {
                self.table.swap_remove(i);
                true
            }
            None => false,
        }
    }

    /// Advance to `now_ticks`, drop neighbours silent longer than the timeout, and apply
    /// one step of the PI law with the configured coupling.
    pub fn update(&mut self, now_ticks: u32) -> UpdateReport {
        self.advance_to(now_ticks);
        match self.config.law() {
            Law::Linear => self.step::<Linear>(),
            Law::Sine => self.step::<Sine>(),
            #[cfg(feature = "libm")]
            Law::SineLibm => self.step::<crate::law::SineLibm>(),
            #[cfg(feature = "micromath")]
            Law::SineMicromath => self.step::<crate::law::SineMicromath>(),
        }
    }

    /// One step of the law, monomorphised per coupling so the neighbour loop has no
    /// dispatch in it.
    fn step<L: Coupling>(&mut self) -> UpdateReport {
        // The trim integrated at the previous update takes effect now, for the period
        // that starts here (v_k of the PI model; see the type's docs).
        self.trim = self.trim_next;
        let now = self.now;
        let corrections = self.corrections;
        let timeout = self.config.timeout_ticks();
        let mut sum: i64 = 0;
        let mut used: u8 = 0;
        let mut largest: u32 = 0;
        let before = self.table.len();
        self.table.retain(|e| {
            let age = now.wrapping_sub(e.heard) as i32;
            if age > timeout as i32 {
                return false;
            }
            let diff = e.anchored_diff.wrapping_sub(corrections) as i32;
            largest = largest.max(diff.unsigned_abs());
            // Weight one skips the multiply (it would give the same bits:
            // (|p|·2^16 + 2^15) >> 16 = |p|).
            let pull = i64::from(L::pull(diff));
            let pull = if e.weight_q16 == WEIGHT_ONE {
                pull
            } else {
                mul_q16_sym(pull, i64::from(e.weight_q16))
            };
            sum = sum.wrapping_add(pull);
            used = used.wrapping_add(1);
            true
        });
        // The table holds at most 255 entries (checked at compile time).
        let evicted = before.wrapping_sub(self.table.len()) as u8;
        let mut report = UpdateReport {
            used,
            evicted,
            largest_diff: largest,
            ..UpdateReport::default()
        };
        if used == 0 {
            return report;
        }
        let raw = self.config.kp().apply(sum);
        let limit = i64::from(self.config.slew_limit());
        // `max`/`min`, not `clamp`: `clamp` carries a panic path (min > max) into firmware.
        let step = raw.max(-limit).min(limit);
        report.slew_limited = step != raw;
        // |step| ≤ slew_limit ≤ i32::MAX.
        report.correction = step as i32;
        self.apply_step(report.correction);
        if !report.slew_limited {
            let delta = mul_q16_sym_inline(sum, self.config.ki_tick());
            // No leak (the default) is a zero product: skip it.
            let leak = match self.config.leak().q16() {
                0 => 0,
                q16 => mul_q16_sym(self.trim, i64::from(q16)),
            };
            let limit = self.config.trim_limit_raw();
            self.trim_next = self
                .trim
                .saturating_sub(leak)
                .saturating_add(delta)
                .max(-limit)
                .min(limit);
        }
        report
    }

    /// Step the phase by `counts`, keeping the cycle count true across zero.
    fn apply_step(&mut self, counts: i32) {
        let before = self.phase().counts();
        self.acc = self.acc.wrapping_add((i64::from(counts) as u64) << 32);
        self.corrections = self.corrections.wrapping_add(counts as u32);
        let after = self.phase().counts();
        if counts > 0 && after < before {
            self.cycles = self.cycles.wrapping_add(1);
        } else if counts < 0 && after > before {
            self.cycles = self.cycles.wrapping_sub(1);
        }
    }
}

/// `round(x · k / 2^16)`, ties away from zero (odd in `x`), saturating. Out of line for
/// the weights and the leak on 32-bit targets: inlined at every use it would cost hundreds
/// of bytes there. On 64-bit targets it is a few instructions, left to the compiler.
#[cfg_attr(not(target_pointer_width = "64"), inline(never))]
const fn mul_q16_sym(x: i64, k: i64) -> i64 {
    mul_q16_sym_inline(x, k)
}

/// [`mul_q16_sym`] inline, for the integral step every update takes.
#[inline(always)]
const fn mul_q16_sym_inline(x: i64, k: i64) -> i64 {
    // At most i64::MAX, so the negation cannot overflow.
    let mag = mul_q16_round(x.unsigned_abs(), k.unsigned_abs()) as i64;
    if (x < 0) != (k < 0) { -mag } else { mag }
}

const fn clamp_i128(x: i128, limit: i64) -> i64 {
    if x > limit as i128 {
        limit
    } else if x < -(limit as i128) {
        -limit
    } else {
        x as i64
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::{ConfigError, Gain};

    fn config(law: Law, kp: u32, ki: u32) -> Config {
        Config::builder(1_000_000, 100_000)
            .law(law)
            .kp(Gain::from_q16(kp))
            .ki(Gain::from_q16(ki))
            .slew_limit(i32::MAX as u32)
            .build()
            .unwrap()
    }

    fn obs(from: NodeId, phase: u32, rx: u32) -> Observation {
        Observation {
            from,
            phase: Phase::from_counts(phase),
            rx_ticks: rx,
            delay_ticks: 0,
        }
    }

    #[test]
    fn weights_scale_each_neighbours_pull() {
        // Linear law, kp = 1/4: two neighbours 40,000 and −8,000 counts away. Unweighted
        // the step is round((40,000 − 8,000)/4) = 8,000; with weights 3/2 and 1/4 (Q16
        // 98,304 and 16,384) it is round((60,000 − 2,000)/4) = 14,500, worked by hand.
        let c = config(Law::Linear, 16_384, 0);
        let step = |w1: u32, w2: u32| {
            let mut n: Node<2> = Node::new(c, Phase::ZERO, 0);
            n.observe_weighted(obs(1, 40_000, 0), None, w1).unwrap();
            n.observe_weighted(obs(2, 0u32.wrapping_sub(8_000), 0), None, w2)
                .unwrap();
            n.update(0).correction
        };
        assert_eq!(step(WEIGHT_ONE, WEIGHT_ONE), 8_000);
        assert_eq!(step(98_304, 16_384), 14_500);
        // An odd pull at weight 1/2 rounds away from zero: round(−3/2) = −2.
        let mut n: Node<1> = Node::new(config(Law::Linear, 65_536, 0), Phase::ZERO, 0);
        n.observe_weighted(obs(1, 0u32.wrapping_sub(3), 0), None, 32_768)
            .unwrap();
        assert_eq!(n.update(0).correction, -2);
        // Weight one through observe_weighted is observe, bit for bit.
        let mut a: Node<2> = Node::new(config(Law::Sine, 20_000, 900), Phase::ZERO, 0);
        let mut b = a.clone();
        for k in 0..50u32 {
            let t = k * 100_000;
            a.observe(obs(1, k.wrapping_mul(7_919_177), t)).unwrap();
            b.observe_weighted(obs(1, k.wrapping_mul(7_919_177), t), None, WEIGHT_ONE)
                .unwrap();
            assert_eq!(a.update(t), b.update(t));
            assert_eq!((a.phase(), a.trim_raw()), (b.phase(), b.trim_raw()));
        }
    }

    #[test]
    fn entry_size_with_the_weight() {
        // id u16 + three u32 + bool + u8 + i64 + the u32 weight = 28 bytes, padded to the
        // i64's alignment: 32 (24 before the weight), so Node<N> grew by 8·N bytes.
        assert_eq!(core::mem::size_of::<Entry>(), 32);
    }

    #[test]
    fn clock_advances_one_turn_per_period() {
        let mut n: Node<1> = Node::new(config(Law::Linear, 1000, 0), Phase::ZERO, 0);
        let mut wraps = 0;
        for k in 1..=40u32 {
            wraps += n.advance_to(k * 250_000);
        }
        assert_eq!(wraps, 10);
        assert_eq!(n.cycles(), 10);
        // 2^64/10^6 is rounded up by 0.45 units of 2^-32 count per tick, so after 10^7
        // ticks the phase leads by about 1/1000 count: exactly zero counts.
        assert_eq!(n.phase().counts(), 0);
    }

    #[test]
    fn timer_wrap_is_harmless() {
        let mut n: Node<1> = Node::new(config(Law::Linear, 1000, 0), Phase::ZERO, u32::MAX - 99);
        n.advance_to(150); // 250 ticks across the timer wrap
        assert_eq!(
            n.phase().counts(),
            (250u64 * (1u64 << 32) / 1_000_000) as u32
        );
        n.advance_to(100); // earlier: no change
        assert_eq!(n.now_ticks(), 150);
    }

    #[test]
    fn trim_of_a_hundredth_ppm_is_representable_and_accumulates() {
        let mut n: Node<1> = Node::new(config(Law::Linear, 1000, 0), Phase::ZERO, 0);
        n.set_trim_ppb(10);
        assert_eq!(n.trim_ppb(), 9); // rounded toward zero from 9.99999...
        assert!(n.trim_raw() > 0);
        // One day at 1 MHz: 8.64e10 ticks, 86,400 turns; 10 ppb of that is 864 µs, i.e.
        // 864e-6 turn = 3,710,851 counts. Trim quantisation (2^-32 count per tick) and the
        // nominal rate's rounding together must cost less than 10 ns a day (43 counts).
        let mut t = 0u32;
        for _ in 0..86_400 {
            for _ in 0..4 {
                t = t.wrapping_add(250_000);
                n.advance_to(t);
            }
        }
        let got = n.phase().counts();
        let want = 3_710_851u32;
        assert!(got.abs_diff(want) <= 43, "got {got}");
    }

    #[test]
    fn trim_ppb_fast_path_is_the_i128_division() {
        // Trims on both sides of |trim|·10⁹ = 2^64, the fast path's limit, on timers from
        // 2 to 2^32 − 1 ticks per period, against the i128 division.
        let limit = u64::MAX / 1_000_000_000;
        for ticks in [2, 3, 1_000, 32_768, 1_000_000, 16_000_000, u32::MAX] {
            let c = Config::builder(ticks, 1)
                .trim_limit_ppb(100_000_000)
                .build()
                .unwrap();
            let mut n: Node<1> = Node::new(c, Phase::ZERO, 0);
            let raw_limit = c.trim_limit_raw();
            for t in [
                0,
                1,
                999,
                limit as i64 - 1,
                limit as i64,
                limit as i64 + 1,
                raw_limit,
            ] {
                for trim in [t, -t] {
                    let trim = trim.max(-raw_limit).min(raw_limit);
                    n.trim = trim;
                    assert_eq!(
                        n.trim_ppb(),
                        n.trim_ppb_wide(),
                        "{ticks} ticks, trim {trim}"
                    );
                }
            }
        }
    }

    proptest::proptest! {
        #[test]
        fn trim_ppb_is_the_i128_division(
            ticks in 2u32..,
            frac in -1.0f64..1.0,
            scale in 0u32..40,
        ) {
            let c = Config::builder(ticks, 1).trim_limit_ppb(100_000_000).build().unwrap();
            let mut n: Node<1> = Node::new(c, Phase::ZERO, 0);
            // A trim anywhere in the range, on every scale below the limit.
            n.trim = (frac * (c.trim_limit_raw() >> scale) as f64) as i64;
            proptest::prop_assert_eq!(n.trim_ppb(), n.trim_ppb_wide());
        }
    }

    #[test]
    fn trim_is_clamped() {
        let mut n: Node<1> = Node::new(config(Law::Linear, 1000, 0), Phase::ZERO, 0);
        n.set_trim_ppb(1_000_000);
        assert_eq!(n.trim_ppb(), 199_999);
        n.set_trim_ppb(-1_000_000);
        assert_eq!(n.trim_ppb(), -199_999);
    }

    #[test]
    fn full_table_hands_the_observation_back() {
        let mut n: Node<2> = Node::new(config(Law::Linear, 1000, 0), Phase::ZERO, 0);
        assert_eq!(n.observe(obs(1, 0, 0)), Ok(()));
        assert_eq!(n.observe(obs(2, 0, 0)), Ok(()));
        assert_eq!(n.observe(obs(1, 5, 0)), Ok(())); // same id: replaced
        let third = obs(3, 0, 0);
        assert_eq!(n.observe(third), Err(ObserveError::TableFull(third)));
        assert!(n.forget(2));
        assert!(!n.forget(2));
        assert_eq!(n.observe(third), Ok(()));
    }

    #[test]
    fn stale_neighbours_are_evicted() {
        let c = Config::builder(1_000_000, 100_000)
            .law(Law::Linear)
            .timeout_ticks(300_000)
            .build()
            .unwrap();
        let mut n: Node<2> = Node::new(c, Phase::ZERO, 0);
        n.observe(obs(1, 1000, 0)).unwrap();
        n.advance_to(200_000);
        n.observe(obs(2, 1000, 200_000)).unwrap();
        assert_eq!(n.update(300_000).used, 2);
        let r = n.update(400_000);
        assert_eq!((r.used, r.evicted), (1, 1));
        assert_eq!(
            n.neighbours().collect::<heapless::Vec<_, 2>>().as_slice(),
            &[2]
        );
        // A silence longer than the timeout in one step clears the table.
        n.advance_to(900_001);
        assert_eq!(n.neighbour_count(), 0);
        assert_eq!(n.update(900_002), UpdateReport::default());
    }

    #[test]
    fn delay_is_compensated() {
        // A neighbour in perfect step sends phase p at local time 1000; it arrives 400
        // ticks later. Compensated, the difference is zero.
        let mut n: Node<1> = Node::new(config(Law::Linear, 32_768, 0), Phase::ZERO, 0);
        n.advance_to(1_400);
        let sent = Phase::from_counts((1_000u64 * (1 << 32) / 1_000_000) as u32);
        n.observe(Observation {
            from: 1,
            phase: sent,
            rx_ticks: 1_400,
            delay_ticks: 400,
        })
        .unwrap();
        let r = n.update(1_400);
        assert!(r.largest_diff <= 1, "{r:?}");
    }

    #[test]
    fn old_observation_does_not_replace_a_newer_one() {
        let mut n: Node<1> = Node::new(config(Law::Linear, 32_768, 0), Phase::ZERO, 0);
        n.advance_to(1000);
        n.observe(obs(1, 0, 1000)).unwrap();
        n.observe(obs(1, 1 << 20, 900)).unwrap();
        let r = n.update(1000);
        // The held (newer) entry says the neighbour is 1000 ticks behind.
        assert!(r.largest_diff > 4_000_000);
    }

    #[test]
    fn slew_limit_bounds_the_step_and_freezes_the_integral() {
        let c = Config::builder(1_000_000, 100_000)
            .law(Law::Linear)
            .kp(Gain::from_q16(32_768))
            .ki(Gain::from_q16(1_000))
            .slew_limit(1_000)
            .build()
            .unwrap();
        let mut n: Node<1> = Node::new(c, Phase::ZERO, 0);
        n.observe(obs(1, 1 << 30, 0)).unwrap();
        let r = n.update(0);
        assert_eq!(r.correction, 1_000);
        assert!(r.slew_limited);
        assert_eq!(n.trim_raw(), 0);
    }

    #[test]
    fn backward_step_across_zero_keeps_one_pulse_per_turn() {
        let mut n: Node<1> = Node::new(config(Law::Linear, 32_768, 0), Phase::from_counts(10), 0);
        n.observe(obs(1, u32::MAX - 29, 0)).unwrap(); // 40 counts behind: a step of -20
        n.update(0);
        assert_eq!(n.cycles(), u32::MAX); // stepped back across zero
        n.advance_to(10);
        assert_eq!(n.cycles(), 0);
    }

    /// Two nodes in perfect step on ideal timers, over a link 700 ticks late one way and
    /// 300 the other, told nothing: after one exchange of echoes each measures the mean
    /// delay, 500 ticks, and sees the other off by half the asymmetry, 200 ticks of phase
    /// (two-way time transfer: Mills, RFC 5905 §8).
    #[test]
    fn two_way_timing_measures_the_mean_delay() {
        let c = config(Law::Linear, 16_384, 0);
        let rate = c.rate_nominal();
        let phase_at = |t: u64| Phase::from_counts(((t * rate) >> 32) as u32);
        let mut a: Node<1> = Node::new(c, Phase::ZERO, 0);
        let mut b: Node<1> = Node::new(c, Phase::ZERO, 0);
        let (ab, ba) = (700u32, 300u32);
        // a sends at 10_000; b hears it at 10_700 and sends at 20_000 with an echo; a hears
        // that at 20_300 and sends at 30_000 with its echo; b hears it at 30_700.
        let send = |n: &Node<1>, to: NodeId, t: u32| Timing {
            tx_ticks: t,
            trim_ppb: n.trim_ppb(),
            echo: n.echo_for(to, t),
        };
        a.advance_to(10_000);
        let ta = send(&a, 2, 10_000);
        assert_eq!(ta.echo, None);
        b.advance_to(10_000 + ab);
        let obs = |from, t: u32, late: u32| Observation {
            from,
            phase: phase_at(u64::from(t)),
            rx_ticks: t + late,
            delay_ticks: 0,
        };
        b.observe_timed(obs(1, 10_000, ab), Some(ta)).unwrap();
        b.advance_to(20_000);
        let tb = send(&b, 1, 20_000);
        assert_eq!(
            tb.echo,
            Some(Echo {
                tx_ticks: 10_000,
                held_ticks: 10_000 - ab
            })
        );
        a.advance_to(20_000 + ba);
        a.observe_timed(obs(2, 20_000, ba), Some(tb)).unwrap();
        let seen = a.links().next().unwrap();
        assert_eq!(seen.measured_delay_ticks, Some(500));
        // b is seen 500 − 300 = 200 ticks ahead: half the asymmetry.
        let want = (200 * rate) >> 32;
        assert!((i64::from(seen.diff) - want as i64).abs() <= 1, "{seen:?}");
        a.advance_to(30_000);
        let ta = send(&a, 2, 30_000);
        b.advance_to(30_000 + ab);
        b.observe_timed(obs(1, 30_000, ab), Some(ta)).unwrap();
        let seen = b.links().next().unwrap();
        assert_eq!(seen.measured_delay_ticks, Some(500));
        assert!((i64::from(seen.diff) + want as i64).abs() <= 1, "{seen:?}");
    }

    #[test]
    fn implausible_echoes_are_ignored() {
        let c = config(Law::Linear, 16_384, 0);
        let mut a: Node<1> = Node::new(c, Phase::ZERO, 0);
        a.advance_to(1_000);
        // An echo of a send "after" the reception, and one held longer than the trip.
        for echo in [
            Echo {
                tx_ticks: 2_000,
                held_ticks: 0,
            },
            Echo {
                tx_ticks: 500,
                held_ticks: 100_000,
            },
            Echo {
                tx_ticks: 0,
                held_ticks: u32::MAX,
            },
        ] {
            let t = Timing {
                tx_ticks: 0,
                trim_ppb: 0,
                echo: Some(echo),
            };
            a.observe_timed(obs(2, 0, 1_000), Some(t)).unwrap();
            assert_eq!(a.links().next().unwrap().measured_delay_ticks, None);
        }
    }

    #[test]
    fn leak_pulls_the_trim_toward_zero() {
        let c = Config::builder(1_000_000, 100_000)
            .law(Law::Linear)
            .kp(Gain::from_q16(16_384))
            .ki(Gain::from_q16(2_048))
            .leak(Gain::from_q16(64))
            .build()
            .unwrap();
        let mut n: Node<1> = Node::new(c, Phase::ZERO, 0);
        n.set_trim_ppb(50_000);
        // A neighbour exactly in step: only the leak moves the trim, by 64/65536 each
        // update (the new trim takes effect one update later).
        let mut t = 0u32;
        for _ in 0..101 {
            n.advance_to(t);
            n.observe(obs(1, n.phase().counts(), t)).unwrap();
            n.update(t);
            t += 100_000;
        }
        // The in-step neighbour is seen up to one count behind (the node's phase has a
        // fraction below a count), which the integral turns into about 0.07 ppb per
        // update: 7 ppb at most over the run.
        let want = 50_000.0 * (1.0 - 64.0 / 65_536.0f64).powi(100);
        assert!(
            (f64::from(n.trim_ppb()) - want).abs() < 8.0,
            "{} vs {want}",
            n.trim_ppb()
        );
        assert_eq!(
            Config::builder(1_000_000, 100_000)
                .ki(Gain::from_q16(64))
                .leak(Gain::from_q16(64))
                .build(),
            Err(ConfigError::LeakNotBelowIntegral)
        );
    }

    #[test]
    fn mul_q16_sym_is_odd_and_rounds() {
        assert_eq!(mul_q16_sym(3, 1 << 15), 2);
        assert_eq!(mul_q16_sym(-3, 1 << 15), -2);
        assert_eq!(mul_q16_sym(i64::MIN, i64::MAX), -i64::MAX);
        // What `step` relies on when it skips a zero leak.
        for x in [i64::MIN, -1, 0, 1, i64::MAX] {
            assert_eq!(mul_q16_sym(x, 0), 0);
        }
    }
}
