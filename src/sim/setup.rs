//! What is simulated: the links, the node law, the crystals, the update schedule, the
//! beacon path (latency, timestamp jitter, loss), the start phases and reboots.
//!
//! Everything random in a scenario is drawn per run from the run's own seeded generator
//! (see [`crate::sim::monte_carlo`]), so a scenario plus a seed fixes a run bit for bit.

use super::error::SimError;
use crate::Config;
use crate::graph::Graph;
use crate::plan::Topology;

/// Largest node count the simulator takes: node ids are `u16` (within the planner's
/// [`MAX_PLAN_NODES`](crate::plan::MAX_PLAN_NODES)).
pub const MAX_SIM_NODES: usize = 1 << 16;

/// Largest neighbour count of one node: the node table's capacity limit,
/// [`crate::MAX_NEIGHBOURS`].
pub const MAX_DEGREE: usize = crate::MAX_NEIGHBOURS;

const _: () = assert!(MAX_SIM_NODES <= crate::plan::MAX_PLAN_NODES);

/// The undirected links beacons travel along (each link carries beacons both ways),
/// built from the checker's shared graph types so the prediction and the simulation see
/// the same network.
#[derive(Clone, Debug, PartialEq)]
pub struct Links {
    graph: Graph,
    topology: Option<Topology>,
    pairs: Vec<(usize, usize)>,
}

impl Links {
    /// The links of a closed-form topology (node numbering as in [`Topology`]). A pinned
    /// chain gets its reference as the last node: it beacons at the nominal rate and never
    /// adjusts its phase.
    ///
    /// # Errors
    /// [`SimError::Graph`] for an invalid topology; [`SimError::TooManyNodes`] above
    /// [`MAX_SIM_NODES`]; [`SimError::DegreeTooHigh`] above [`MAX_DEGREE`] neighbours.
    pub fn from_topology(topology: &Topology) -> Result<Links, SimError> {
        let graph = Graph::from_topology(topology).map_err(SimError::Graph)?;
        Links::build(graph, Some(*topology))
    }

    /// The links of an arbitrary graph; its reference nodes ([`Graph::references`])
    /// beacon at the nominal rate and never adjust. An edge's weight reaches the node law
    /// as a Q16.16 neighbour weight ([`Node::observe_weighted`](crate::Node::observe_weighted)),
    /// rounded to the nearest 2^-16.
    ///
    /// # Errors
    /// [`SimError::InvalidParameter`] for an edge weight outside `[2^-16, 65535]` (no
    /// Q16.16 weight holds it); [`SimError::TooManyNodes`]; [`SimError::DegreeTooHigh`].
    pub fn from_graph(graph: &Graph) -> Result<Links, SimError> {
        if graph.edges().iter().any(|e| to_q16(e.weight).is_none()) {
            return Err(SimError::InvalidParameter {
                name: "edge weight",
                valid: "from 2^-16 to 65535 (a Q16.16 neighbour weight)",
            });
        }
        Links::build(graph.clone(), None)
    }

    /// The links of `nodes` nodes joined by `pairs` (each pair once).
    ///
    /// # Errors
    /// [`SimError::Graph`] for an index out of range, a self-link or a duplicate;
    /// [`SimError::TooManyNodes`]; [`SimError::DegreeTooHigh`].
    pub fn from_pairs(nodes: usize, pairs: &[(usize, usize)]) -> Result<Links, SimError> {
        let graph = Graph::from_edges(nodes, pairs).map_err(SimError::Graph)?;
        Links::build(graph, None)
    }

    /// An open chain of `nodes ≥ 2` (the checker's [`Topology::Chain`]).
    ///
    /// # Errors
    /// As [`Links::from_topology`].
    pub fn chain(nodes: usize) -> Result<Links, SimError> {
        Links::from_topology(&Topology::Chain { nodes })
    }

    /// A closed ring of `nodes ≥ 3` in node order (the checker's [`Topology::Ring`]); its
    /// runs report a winding number.
    ///
    /// # Errors
    /// As [`Links::from_topology`].
    pub fn ring(nodes: usize) -> Result<Links, SimError> {
        Links::from_topology(&Topology::Ring { nodes })
    }

    fn build(graph: Graph, topology: Option<Topology>) -> Result<Links, SimError> {
        let nodes = graph.node_count();
        if nodes > MAX_SIM_NODES {
            return Err(SimError::TooManyNodes {
                max: MAX_SIM_NODES,
                got: nodes,
            });
        }
        for node in 0..nodes {
            let degree = graph.neighbours(node).len();
            if degree > MAX_DEGREE {
                return Err(SimError::DegreeTooHigh {
                    node,
                    degree,
                    max: MAX_DEGREE,
                });
            }
        }
        let mut pairs: Vec<(usize, usize)> = graph
            .edges()
            .iter()
            .map(|e| (e.a.min(e.b), e.a.max(e.b)))
            .collect();
        pairs.sort_unstable();
        Ok(Links {
            graph,
            topology,
            pairs,
        })
    }

    /// Number of nodes (with a pinned chain's reference).
    #[must_use]
    pub fn nodes(&self) -> usize {
        self.graph.node_count()
    }

    /// The links, each as `(smaller index, larger index)`, sorted.
    #[must_use]
    pub fn pairs(&self) -> &[(usize, usize)] {
        &self.pairs
    }

    /// The graph, for the checker's numeric spectrum.
    #[must_use]
    pub fn graph(&self) -> &Graph {
        &self.graph
    }

    /// The closed-form topology these links were built from, if any.
    #[must_use]
    pub fn topology(&self) -> Option<Topology> {
        self.topology
    }

    /// The reference nodes, ascending (a pinned chain's is its last node): they beacon
    /// the reference phase at the nominal rate and never adjust.
    #[must_use]
    pub fn references(&self) -> &[usize] {
        self.graph.references()
    }

    /// Whether `node` is a reference node.
    #[must_use]
    pub fn is_reference(&self, node: usize) -> bool {
        self.graph.is_reference(node)
    }

    /// The coupling weight of the link between `a` and `b` as the node law applies it,
    /// Q16.16 ([`crate::WEIGHT_ONE`] for a plain link, and for a pair that is no link).
    #[must_use]
    pub fn weight_q16(&self, a: usize, b: usize) -> u32 {
        self.graph
            .neighbours(a)
            .iter()
            .find(|&&(j, _)| j == b)
            .and_then(|&(_, w)| to_q16(w))
            .unwrap_or(crate::WEIGHT_ONE)
    }

    /// [`Links::weight_q16`] as a number (1 for a plain link): the weight exactly as the
    /// node law applies it, for models of the law.
    #[must_use]
    pub fn weight(&self, a: usize, b: usize) -> f64 {
        f64::from(self.weight_q16(a, b)) / f64::from(crate::WEIGHT_ONE)
    }

    /// True for a ring (nodes in cyclic order), whose runs report a winding number.
    #[must_use]
    pub fn is_ring(&self) -> bool {
        matches!(self.topology, Some(Topology::Ring { .. }))
    }

    /// The largest number of neighbours of any node.
    #[must_use]
    pub fn max_degree(&self) -> usize {
        (0..self.nodes())
            .map(|i| self.graph.neighbours(i).len())
            .max()
            .unwrap_or(0)
    }

    /// Neighbour lists in compressed form: node i's neighbours are
    /// `targets[row_start[i]..row_start[i+1]]`, ascending.
    pub(crate) fn adjacency(&self) -> (Vec<usize>, Vec<u16>) {
        let n = self.nodes();
        let mut row_start = Vec::with_capacity(n + 1);
        let mut targets = Vec::with_capacity(2 * self.pairs.len());
        row_start.push(0);
        for i in 0..n {
            let mut l: Vec<u16> = self
                .graph
                .neighbours(i)
                .iter()
                // Node indices are below MAX_SIM_NODES = 2^16 (checked at construction).
                .map(|&(j, _)| j as u16)
                .collect();
            l.sort_unstable();
            targets.extend_from_slice(&l);
            row_start.push(targets.len());
        }
        (row_start, targets)
    }
}

/// A weight as a Q16.16 neighbour weight, nearest; `None` outside `[2^-16, 65535]`.
fn to_q16(weight: f64) -> Option<u32> {
    let q = (weight * 65_536.0).round();
    (q >= 1.0 && q <= f64::from(u32::MAX)).then_some(q as u32)
}

/// The nodes' crystal errors, parts per million (positive: the timer runs fast). A node
/// with error `e` advances `1 + e·10⁻⁶` timer ticks per nominal tick.
#[derive(Clone, Debug, PartialEq)]
pub enum Crystals {
    /// Every node has the same error (0 for ideal crystals).
    Identical {
        /// The common error, ppm.
        ppm: f64,
    },
    /// Each node's error drawn uniformly from `[−tolerance_ppm, +tolerance_ppm]` per run.
    Uniform {
        /// The tolerance, ppm (`0 ≤ tolerance_ppm ≤ 10⁵`).
        tolerance_ppm: f64,
    },
    /// Given errors, one per node, ppm.
    Fixed(Vec<f64>),
}

/// When the nodes update.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Schedule {
    /// Each node's first update falls at a uniformly random point within its first
    /// update interval; `false` starts every node at once (lock-step with identical
    /// crystals and no jitter).
    pub random_start: bool,
    /// Each update interval is lengthened or shortened by a uniform draw from
    /// `[−jitter_ticks, +jitter_ticks]` local ticks (below half the update interval).
    pub jitter_ticks: u32,
}

impl Schedule {
    /// All nodes update at the same instants (with identical crystals).
    pub const LOCK_STEP: Schedule = Schedule {
        random_start: false,
        jitter_ticks: 0,
    };
}

/// How a receiver's timer stamps a beacon's arrival.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Stamping {
    /// The count of completed ticks at the arrival instant, as a hardware timer's
    /// capture register reads: on average half a tick early.
    #[default]
    CompletedTicks,
    /// The nearest tick: unbiased (an idealised timer).
    Nearest,
}

/// The beacon path between neighbours. Each node beacons its phase right after each of
/// its updates.
///
/// Each link's latency is drawn once per run, uniformly from
/// `[latency_ticks, latency_ticks + latency_spread_ticks]` (in sub-tick steps); its two
/// directions then differ by a uniform draw from `[−asymmetry_ticks, +asymmetry_ticks]`
/// (half each way). With `latency_known` the receiver is told the link's drawn latency
/// (the mean of its two directions, in whole ticks of its own timer, as firmware
/// configured per link would be); without, it is told nothing and relies on two-way
/// timing.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Beacons {
    /// Shortest link latency from send to reception, nominal ticks.
    pub latency_ticks: u32,
    /// Width of the per-link latency draw, nominal ticks (0: every link `latency_ticks`).
    pub latency_spread_ticks: u32,
    /// Largest difference between a link's two directions, nominal ticks.
    pub asymmetry_ticks: u32,
    /// Whether the receiver is told each link's latency.
    pub latency_known: bool,
    /// Whether beacons carry two-way timing (version-2 frames) and nodes measure each
    /// link's delay from it; false models version-1 frames.
    pub two_way: bool,
    /// How receptions are stamped.
    pub stamping: Stamping,
    /// The receiver's reception timestamp is off by a uniform draw from
    /// `[−timestamp_jitter_ticks, +timestamp_jitter_ticks]` ticks, unknown to it.
    pub timestamp_jitter_ticks: u32,
    /// Probability that a reception is taken late by a stall at the receiver (an
    /// interrupt held off, a busy bus, a descheduled emulator), `0 ≤ p < 1`,
    /// independent per reception: the frame is taken, and stamped, that much later, and
    /// serves the first update after it.
    pub late_stamp_fraction: f64,
    /// How late such a reception is: a uniform draw from `[0, late_stamp_max_ticks]`
    /// nominal ticks, at most a quarter of the update interval (so a late frame never
    /// overtakes the link's next one).
    pub late_stamp_max_ticks: u32,
    /// Probability that one beacon reaches one neighbour, `0 < p ≤ 1`, independent per
    /// beacon and neighbour.
    pub success_prob: f64,
}

impl Beacons {
    /// Instant, exact, lossless beacons stamped to the nearest tick, version 1.
    pub const IDEAL: Beacons = Beacons {
        latency_ticks: 0,
        latency_spread_ticks: 0,
        asymmetry_ticks: 0,
        latency_known: true,
        two_way: false,
        stamping: Stamping::Nearest,
        timestamp_jitter_ticks: 0,
        late_stamp_fraction: 0.0,
        late_stamp_max_ticks: 0,
        success_prob: 1.0,
    };

    /// Whether every link has the same latency both ways.
    #[must_use]
    pub const fn uniform_latency(&self) -> bool {
        self.latency_spread_ticks == 0 && self.asymmetry_ticks == 0
    }
}

/// The nodes' phases at the start of a run, in turns.
#[derive(Clone, Debug, PartialEq)]
pub enum StartPhases {
    /// Each node's phase drawn uniformly from `[−spread_turns/2, +spread_turns/2]`
    /// (`0 ≤ spread_turns ≤ 1`; 1 is a uniform draw over the whole circle).
    Uniform {
        /// Width of the start interval, turns.
        spread_turns: f64,
    },
    /// Given phases, one per node, turns (any real value, wrapped onto the circle).
    Fixed(Vec<f64>),
}

/// A node that loses power mid-run: silent for `down_updates` update intervals from
/// `at_updates`, it then restarts from a random phase with zero trim and an empty
/// neighbour table, and rejoins.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Reboot {
    /// The node.
    pub node: usize,
    /// When it goes down, nominal update intervals from the start.
    pub at_updates: u64,
    /// How long it stays down, nominal update intervals (at least 1).
    pub down_updates: u64,
}

/// When the network counts as settled (see [`crate::sim::SettleTracker`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SettleCriterion {
    /// Half-width of the tolerance band: the largest pairwise wrapped phase difference
    /// (over neighbours and over the whole network) counted as inside, turns
    /// (`0 < tolerance_turns < 0.5`). A run has settled at the sample after its last
    /// sample outside the band, provided that lies before the final fifth of the horizon.
    pub tolerance_turns: f64,
}

/// One simulated deployment. Build with [`Setup::new`], then adjust the public fields.
#[derive(Clone, Debug, PartialEq)]
pub struct Setup {
    /// The links beacons travel along.
    pub links: Links,
    /// The node law every node runs (gains, law, update interval, clamps).
    pub config: Config,
    /// Nominal timer rate, ticks per second (used to express results in seconds).
    pub tick_hz: f64,
    /// Crystal errors.
    pub crystals: Crystals,
    /// Update schedule.
    pub schedule: Schedule,
    /// Beacon path.
    pub beacons: Beacons,
    /// Start phases.
    pub start: StartPhases,
    /// Reboots during a run.
    pub reboots: Vec<Reboot>,
    /// Settling criterion.
    pub settle: SettleCriterion,
    /// Length of every run, nominal update intervals (one sample each): a run always goes
    /// to its horizon. A run whose last exit from the tolerance band falls in the final
    /// fifth counts as never settled, so make it at least 5/4 of the slowest settling
    /// expected (twice that keeps the noise-floor window clear of the transient).
    /// Reboots at or after the horizon never happen.
    pub horizon_updates: u64,
}

impl Setup {
    /// A scenario with ideal crystals, lock-step updates, ideal beacons, start phases
    /// spread over a tenth of a turn, no reboots, a tolerance of 10⁻³ turn and a horizon
    /// of 10,000 updates.
    #[must_use]
    pub fn new(links: Links, config: Config, tick_hz: f64) -> Setup {
        Setup {
            links,
            config,
            tick_hz,
            crystals: Crystals::Identical { ppm: 0.0 },
            schedule: Schedule::LOCK_STEP,
            beacons: Beacons::IDEAL,
            start: StartPhases::Uniform { spread_turns: 0.1 },
            reboots: Vec::new(),
            settle: SettleCriterion {
                tolerance_turns: 1e-3,
            },
            horizon_updates: 10_000,
        }
    }

    /// Number of nodes.
    #[must_use]
    pub fn nodes(&self) -> usize {
        self.links.nodes()
    }

    /// Neighbour-updates one run performs: every node folds in each of its neighbours
    /// once per update, over the whole horizon (`horizon × Σ degree`). The unit of the
    /// simulator's work.
    #[must_use]
    pub fn neighbour_updates_per_run(&self) -> f64 {
        self.horizon_updates as f64 * 2.0 * self.links.pairs().len() as f64
    }

    /// Nominal update interval, seconds.
    #[must_use]
    pub fn update_period_s(&self) -> f64 {
        f64::from(self.config.update_ticks()) / self.tick_hz
    }

    /// Nominal phase period (one turn), seconds.
    #[must_use]
    pub fn phase_period_s(&self) -> f64 {
        f64::from(self.config.ticks_per_period()) / self.tick_hz
    }

    /// Check every field against its documented range.
    ///
    /// # Errors
    /// The first bad field as a [`SimError`].
    pub fn validate(&self) -> Result<(), SimError> {
        let n = self.nodes();
        if !(self.tick_hz.is_finite() && self.tick_hz > 0.0) {
            return Err(invalid("tick_hz", "finite and above 0"));
        }
        let ppm_ok = |e: f64| e.is_finite() && e.abs() <= 1e5;
        match &self.crystals {
            Crystals::Identical { ppm } if !ppm_ok(*ppm) => {
                return Err(invalid("crystal ppm", "finite, within ±100000"));
            }
            Crystals::Uniform { tolerance_ppm }
                if !(ppm_ok(*tolerance_ppm) && *tolerance_ppm >= 0.0) =>
            {
                return Err(invalid("tolerance_ppm", "from 0 to 100000"));
            }
            Crystals::Fixed(v) => {
                if v.len() != n {
                    return Err(SimError::WrongLength {
                        name: "crystal ppm list",
                        needed: n,
                        got: v.len(),
                    });
                }
                if !v.iter().all(|e| ppm_ok(*e)) {
                    return Err(invalid("crystal ppm", "finite, within ±100000"));
                }
            }
            _ => {}
        }
        let update = self.config.update_ticks();
        if u64::from(self.schedule.jitter_ticks) * 2 >= u64::from(update) {
            return Err(invalid("jitter_ticks", "below half the update interval"));
        }
        if !(self.beacons.success_prob > 0.0 && self.beacons.success_prob <= 1.0) {
            return Err(invalid("success_prob", "above 0 and at most 1"));
        }
        if self.beacons.timestamp_jitter_ticks > i32::MAX as u32 / 2 {
            return Err(invalid("timestamp_jitter_ticks", "at most 1073741823"));
        }
        if !(self.beacons.late_stamp_fraction >= 0.0 && self.beacons.late_stamp_fraction < 1.0) {
            return Err(invalid("late_stamp_fraction", "at least 0 and below 1"));
        }
        if u64::from(self.beacons.late_stamp_max_ticks) * 4 > u64::from(update) {
            return Err(invalid(
                "late_stamp_max_ticks",
                "at most a quarter of the update interval",
            ));
        }
        if self.beacons.latency_ticks > i32::MAX as u32 / 2 {
            return Err(invalid("latency_ticks", "at most 1073741823"));
        }
        let b = &self.beacons;
        if u64::from(b.latency_ticks)
            + u64::from(b.latency_spread_ticks)
            + u64::from(b.asymmetry_ticks)
            > u64::from(i32::MAX as u32 / 2)
        {
            return Err(invalid(
                "latency_spread_ticks",
                "latency, spread and asymmetry together at most 1073741823 ticks",
            ));
        }
        match &self.start {
            StartPhases::Uniform { spread_turns }
                if !(spread_turns.is_finite() && (0.0..=1.0).contains(spread_turns)) =>
            {
                return Err(invalid("spread_turns", "from 0 to 1"));
            }
            StartPhases::Fixed(v) => {
                if v.len() != n {
                    return Err(SimError::WrongLength {
                        name: "start phase list",
                        needed: n,
                        got: v.len(),
                    });
                }
                if !v.iter().all(|p| p.is_finite()) {
                    return Err(invalid("start phase", "finite"));
                }
            }
            _ => {}
        }
        for r in &self.reboots {
            if r.node >= n {
                return Err(invalid("reboot node", "a node index below the node count"));
            }
            if r.down_updates < 1 {
                return Err(invalid("reboot down_updates", "at least 1"));
            }
        }
        let tol = self.settle.tolerance_turns;
        if !(tol.is_finite() && tol > 0.0 && tol < 0.5) {
            return Err(invalid("tolerance_turns", "above 0 and below 0.5"));
        }
        if self.horizon_updates < 1 {
            return Err(invalid("horizon_updates", "at least 1"));
        }
        // Real time runs in sub-ticks of 2^-16 nominal tick, held below 2^62; leave room
        // for the slowest crystal (10 % slow) and a reboot's restart offset.
        let max_updates = (1u64 << 45) / u64::from(update);
        let last_reboot = self
            .reboots
            .iter()
            .map(|r| r.at_updates.saturating_add(r.down_updates))
            .max()
            .unwrap_or(0);
        let needed = self.horizon_updates.max(last_reboot).saturating_add(2);
        if needed > max_updates {
            return Err(SimError::HorizonTooLong { max_updates });
        }
        Ok(())
    }
}

fn invalid(name: &'static str, valid: &'static str) -> SimError {
    SimError::InvalidParameter { name, valid }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn links_follow_the_shared_topologies() {
        // A rows×cols grid has rows(cols−1) + cols(rows−1) links; a torus 2·rows·cols.
        let grid = Links::from_topology(&Topology::Grid { rows: 3, cols: 4 }).unwrap();
        assert_eq!(grid.pairs().len(), 3 * 3 + 4 * 2);
        let torus = Links::from_topology(&Topology::Torus { rows: 3, cols: 4 }).unwrap();
        assert_eq!((torus.pairs().len(), torus.max_degree()), (24, 4));
        let pinned = Links::from_topology(&Topology::PinnedChain { nodes: 3 }).unwrap();
        assert_eq!((pinned.nodes(), pinned.references()), (4, &[3][..]));
        assert!(Links::ring(5).unwrap().is_ring());
        assert!(!Links::chain(5).unwrap().is_ring());
    }

    #[test]
    fn bad_links_are_named() {
        assert!(matches!(
            Links::from_pairs(3, &[(0, 1), (1, 3)]),
            Err(SimError::Graph(_))
        ));
        assert!(matches!(
            Links::from_topology(&Topology::Star { nodes: 300 }),
            Err(SimError::DegreeTooHigh { max: 255, .. })
        ));
        assert!(matches!(Links::ring(2), Err(SimError::Graph(_))));
        // A weight no Q16.16 neighbour weight holds (below 2^-16, above 65535).
        for w in [1e-6, 70_000.0] {
            let weighted = Graph::from_weighted_edges(2, &[(0, 1, w)]).unwrap();
            assert!(matches!(
                Links::from_graph(&weighted),
                Err(SimError::InvalidParameter { .. })
            ));
        }
        // Weights the node law takes, rounded to the nearest 2^-16: 2 → 131,072,
        // 0.01 → 655.36 → 655; a plain link and a non-link weigh one.
        let weighted = Graph::from_weighted_edges(3, &[(0, 1, 2.0), (1, 2, 0.01)]).unwrap();
        let links = Links::from_graph(&weighted).unwrap();
        assert_eq!(links.weight_q16(1, 0), 131_072);
        assert_eq!(links.weight_q16(2, 1), 655);
        assert_eq!(links.weight_q16(0, 2), crate::WEIGHT_ONE);
    }

    #[test]
    fn adjacency_lists_both_directions() {
        let (off, tgt) = Links::chain(3).unwrap().adjacency();
        assert_eq!(off, vec![0, 1, 3, 4]);
        assert_eq!(tgt, vec![1, 0, 2, 1]);
    }

    #[test]
    fn validation_names_the_bad_field() {
        let config = Config::builder(1000, 100).build().unwrap();
        let mut s = Setup::new(Links::chain(4).unwrap(), config, 1e6);
        assert_eq!(s.validate(), Ok(()));
        s.schedule.jitter_ticks = 50;
        assert!(matches!(
            s.validate(),
            Err(SimError::InvalidParameter {
                name: "jitter_ticks",
                ..
            })
        ));
        s.schedule.jitter_ticks = 0;
        s.crystals = Crystals::Fixed(vec![1.0; 3]);
        assert!(matches!(
            s.validate(),
            Err(SimError::WrongLength {
                needed: 4,
                got: 3,
                ..
            })
        ));
        s.crystals = Crystals::Identical { ppm: f64::NAN };
        assert!(s.validate().is_err());
        s.crystals = Crystals::Identical { ppm: 0.0 };
        s.horizon_updates = u64::MAX;
        assert!(matches!(s.validate(), Err(SimError::HorizonTooLong { .. })));
    }
}
