//! The scenario file: a TOML description of one deployment, read and checked in one place.
//!
//! The file is parsed into a raw form that mirrors the TOML exactly (every key spanned,
//! unknown keys refused), then [`Scenario::from_toml`] checks every value against its
//! range and returns a [`Scenario`] in plain SI units. Every refusal is a
//! [`ScenarioError`] naming the file, line and column, what is wrong and the valid range.
//!
//! Versioning: the file's `version` key must be [`SCENARIO_VERSION`]. A reader of this
//! version refuses a newer file outright (with a message saying which version it reads)
//! rather than guessing at keys it does not know.

use crate::Law;
pub use crate::plan::Margins;
use crate::plan::Topology;
use serde::Deserialize;
use serde::de::{self, Deserializer, Visitor};
use std::fmt;
use std::io::{BufRead, BufReader, Read};
use std::ops::Range;
use std::path::{Path, PathBuf};
use toml::Spanned;

mod write;

/// The scenario-file version this build reads.
pub const SCENARIO_VERSION: i64 = 1;

/// Largest node count a scenario file may give a chain, ring, pinned chain, grid, torus
/// or edge list: what the planner handles (`check --no-simulate`, `tune`, `spectrum`;
/// the sparse eigensolver above [`DENSE_AUTO_MAX_NODES`](crate::graph::DENSE_AUTO_MAX_NODES)
/// nodes). Within the planner's [`MAX_PLAN_NODES`](crate::plan::MAX_PLAN_NODES) and the
/// graph's [`MAX_GRAPH_NODES`](crate::graph::MAX_GRAPH_NODES).
pub const MAX_SCENARIO_NODES: usize = 1_000_000;

/// Largest node count a scenario may simulate (the Monte Carlo, the forecast's sampled
/// model): keeps one scenario's simulation bounded. Within the simulator's
/// [`MAX_SIM_NODES`](crate::sim::MAX_SIM_NODES) and [`MAX_SCENARIO_NODES`].
pub const MAX_SIMULATED_NODES: usize = 10_000;

/// Largest node count of a star or complete graph: one hub (or every node) neighbours all
/// the others, and a node's table holds at most [`crate::MAX_NEIGHBOURS`].
pub const MAX_DENSE_NODES: usize = crate::MAX_NEIGHBOURS + 1;

const _: () = assert!(MAX_SCENARIO_NODES <= crate::plan::MAX_PLAN_NODES);
const _: () = assert!(MAX_SCENARIO_NODES <= crate::graph::MAX_GRAPH_NODES);
const _: () = assert!(MAX_SIMULATED_NODES <= crate::sim::MAX_SIM_NODES);
const _: () = assert!(MAX_SIMULATED_NODES <= MAX_SCENARIO_NODES);

/// Largest number of Monte-Carlo runs.
pub const MAX_RUNS: u32 = 10_000;

/// Largest simulated duration in updates (`duration_s × update_rate_hz`).
pub const MAX_SIM_UPDATES: f64 = 1.0e6;

/// Longest link latency, in whole update intervals, the planner handles.
pub const MAX_LATENCY_UPDATES: f64 = 30.0;

/// The default trim leak is the integral gain divided by this (see
/// [`Scenario::trim_leak`]).
pub const DEFAULT_LEAK_DIVISOR: f64 = 64.0;

/// A scenario that could not be read: where and why.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ScenarioError {
    /// The file the problem is in.
    pub file: PathBuf,
    /// 1-based line, when the problem has a place in the file.
    pub line: Option<usize>,
    /// 1-based column (in characters), when the problem has a place in the file.
    pub column: Option<usize>,
    /// What is wrong and what is valid.
    pub message: String,
}

impl fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let (Some(line), Some(column)) = (self.line, self.column) {
            write!(f, ":{line}:{column}")?;
        }
        write!(f, ": {}", self.message)
    }
}

impl std::error::Error for ScenarioError {}

/// 1-based line and column (in characters) of byte `byte_offset` in `text`.
#[must_use]
pub fn line_column(text: &str, byte_offset: usize) -> (usize, usize) {
    let mut line = 1;
    let mut column = 1;
    for (at, ch) in text.char_indices() {
        if at >= byte_offset {
            break;
        }
        if ch == '\n' {
            line += 1;
            column = 1;
        } else {
            column += 1;
        }
    }
    (line, column)
}

/// Builds errors that point into one file's text.
struct Locator<'a> {
    file: &'a Path,
    text: &'a str,
}

impl Locator<'_> {
    fn at(&self, span: Option<Range<usize>>, message: impl Into<String>) -> ScenarioError {
        let (line, column) = match span {
            Some(span) => {
                let (l, c) = line_column(self.text, span.start);
                (Some(l), Some(c))
            }
            None => (None, None),
        };
        ScenarioError {
            file: self.file.to_path_buf(),
            line,
            column,
            message: message.into(),
        }
    }
}

/// A gain as written: a number, or the word `"tune"`.
#[derive(Clone, Copy, Debug, PartialEq)]
enum RawGain {
    Value(f64),
    Tune,
}

impl<'de> Deserialize<'de> for RawGain {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct GainVisitor;
        impl Visitor<'_> for GainVisitor {
            type Value = RawGain;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a gain (a number) or the string \"tune\"")
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<RawGain, E> {
                Ok(RawGain::Value(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<RawGain, E> {
                Ok(RawGain::Value(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<RawGain, E> {
                Ok(RawGain::Value(v as f64))
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<RawGain, E> {
                if v == "tune" {
                    Ok(RawGain::Tune)
                } else {
                    Err(E::invalid_value(de::Unexpected::Str(v), &self))
                }
            }
        }
        deserializer.deserialize_any(GainVisitor)
    }
}

/// A real number as written; TOML integers are accepted where a real is expected.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Real(f64);

impl<'de> Deserialize<'de> for Real {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct RealVisitor;
        impl Visitor<'_> for RealVisitor {
            type Value = Real;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a number")
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Real, E> {
                Ok(Real(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Real, E> {
                Ok(Real(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Real, E> {
                Ok(Real(v as f64))
            }
        }
        deserializer.deserialize_any(RealVisitor)
    }
}

type S<T> = Spanned<T>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawScenario {
    version: S<i64>,
    name: Option<S<String>>,
    network: S<RawNetwork>,
    timing: S<RawTiming>,
    law: S<RawLaw>,
    clock: Option<S<RawClock>>,
    link: Option<S<RawLink>>,
    lock: S<RawLock>,
    margins: Option<S<RawMargins>>,
    monte_carlo: Option<S<RawMonteCarlo>>,
    reboot: Option<Vec<S<RawReboot>>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawReboot {
    node: S<i64>,
    at_s: S<Real>,
    down_s: S<Real>,
}

/// An inline edge: `[a, b]`, or `[a, b, weight]`.
enum RawEdge {
    Plain(i64, i64),
    Weighted(i64, i64, Real),
}

impl<'de> Deserialize<'de> for RawEdge {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct EdgeVisitor;
        impl<'de> Visitor<'de> for EdgeVisitor {
            type Value = RawEdge;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("an edge [a, b] or [a, b, weight] with whole node numbers")
            }
            fn visit_seq<A: de::SeqAccess<'de>>(self, mut seq: A) -> Result<RawEdge, A::Error> {
                let shape = || de::Error::custom("an edge is [a, b] or [a, b, weight]");
                let a: i64 = seq.next_element()?.ok_or_else(shape)?;
                let b: i64 = seq.next_element()?.ok_or_else(shape)?;
                let edge = match seq.next_element::<Real>()? {
                    None => RawEdge::Plain(a, b),
                    Some(w) => RawEdge::Weighted(a, b, w),
                };
                if seq.next_element::<de::IgnoredAny>()?.is_some() {
                    return Err(shape());
                }
                Ok(edge)
            }
        }
        deserializer.deserialize_seq(EdgeVisitor)
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawNetwork {
    topology: S<String>,
    nodes: Option<S<i64>>,
    rows: Option<S<i64>>,
    cols: Option<S<i64>>,
    edge_list_file: Option<S<String>>,
    edges: Option<S<Vec<RawEdge>>>,
    reference_nodes: Option<S<Vec<i64>>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTiming {
    update_rate_hz: S<Real>,
    phase_period_s: S<Real>,
    timer_hz: Option<S<i64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLaw {
    coupling: S<String>,
    kp: S<RawGain>,
    ki: Option<S<RawGain>>,
    slew_limit_turns: Option<S<Real>>,
    trim_limit_ppm: Option<S<Real>>,
    neighbour_timeout_updates: Option<S<i64>>,
    trim_leak: Option<S<Real>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawClock {
    crystal_tolerance_ppm: Option<S<Real>>,
    crystal_ppm: Option<S<Vec<Real>>>,
    timestamp_jitter_s: Option<S<Real>>,
    stamping: Option<S<String>>,
    late_stamp_fraction: Option<S<Real>>,
    late_stamp_max_s: Option<S<Real>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLink {
    latency_s: Option<S<Real>>,
    latency_range_s: Option<S<(Real, Real)>>,
    asymmetry_s: Option<S<Real>>,
    latency_known: Option<S<bool>>,
    beacon_version: Option<S<i64>>,
    loss_fraction: Option<S<Real>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLock {
    initial_spread_s: S<Real>,
    tolerance_s: S<Real>,
    budget_s: S<Real>,
    quantile: Option<S<RawQuantile>>,
}

/// The `[lock] quantile` as written: a fraction, or the word `"bound"`.
#[derive(Clone, Copy, Debug, PartialEq)]
enum RawQuantile {
    Fraction(f64),
    Bound,
}

impl<'de> Deserialize<'de> for RawQuantile {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct QuantileVisitor;
        impl Visitor<'_> for QuantileVisitor {
            type Value = RawQuantile;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a quantile (a number such as 0.9) or the string \"bound\"")
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<RawQuantile, E> {
                Ok(RawQuantile::Fraction(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<RawQuantile, E> {
                Ok(RawQuantile::Fraction(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<RawQuantile, E> {
                Ok(RawQuantile::Fraction(v as f64))
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<RawQuantile, E> {
                if v == "bound" {
                    Ok(RawQuantile::Bound)
                } else {
                    Err(E::invalid_value(de::Unexpected::Str(v), &self))
                }
            }
        }
        deserializer.deserialize_any(QuantileVisitor)
    }
}

/// Which settling time the verdict compares with the budget (`[lock] quantile`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum LockQuantile {
    /// This quantile of the settling times from random power-up phases, `0.5 ≤ q ≤ 0.99`,
    /// on the forecast and on the simulated runs alike (runs that never settle count as
    /// infinitely slow). Default 0.9.
    Fraction(f64),
    /// The worst case: the planner's bound on the prediction side, the slowest run on the
    /// simulation side, and every run must settle.
    Bound,
}

impl Default for LockQuantile {
    fn default() -> LockQuantile {
        LockQuantile::Fraction(0.9)
    }
}

impl LockQuantile {
    /// The fraction of runs that may fail to settle by the budget (0 for the bound).
    #[must_use]
    pub fn allowed_misses(self) -> f64 {
        match self {
            LockQuantile::Fraction(q) => 1.0 - q,
            LockQuantile::Bound => 0.0,
        }
    }

    /// A short label such as `p90` or `bound`.
    #[must_use]
    pub fn label(self) -> String {
        match self {
            LockQuantile::Fraction(q) => format!("p{}", (q * 100.0).round()),
            LockQuantile::Bound => "bound".to_owned(),
        }
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMargins {
    gain: Option<S<Real>>,
    delay_updates: Option<S<i64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMonteCarlo {
    runs: Option<S<i64>>,
    seed: Option<S<i64>>,
    duration_s: Option<S<Real>>,
}

/// The coupling graph a scenario describes: which node beacons to which.
#[derive(Clone, Debug, PartialEq)]
pub enum Layout {
    /// One of the planner's closed-form topologies (node numbering as documented there).
    Topology(Topology),
    /// An arbitrary undirected graph, read from an edge-list file or given inline in the
    /// scenario (`[network] edges`).
    EdgeList {
        /// The edge-list file (resolved against the scenario's folder), or the scenario
        /// file itself when the edges are given inline.
        path: PathBuf,
        /// Number of nodes (`0..nodes`).
        nodes: usize,
        /// Undirected edges `(a, b)`, `a ≠ b`, each listed once.
        edges: Vec<(usize, usize)>,
        /// Coupling weight of each edge (the edge-list file's third column, from
        /// [`WEIGHT_MIN`] to [`WEIGHT_MAX`]); empty when every edge weighs 1.
        weights: Vec<f64>,
        /// Reference nodes (`[network] reference_nodes`), ascending: they beacon the
        /// reference phase at the nominal rate and never adjust. Empty: a free network.
        references: Vec<usize>,
    },
}

impl Layout {
    /// Number of nodes the scenario numbers (`0..node_count`): a pinned chain's reference
    /// is not counted, an edge list's reference nodes are.
    #[must_use]
    pub fn node_count(&self) -> usize {
        match self {
            Layout::Topology(t) => t.node_count(),
            Layout::EdgeList { nodes, .. } => *nodes,
        }
    }

    /// The topology's keyword in the scenario file.
    #[must_use]
    pub fn keyword(&self) -> &'static str {
        match self {
            Layout::Topology(Topology::Chain { .. }) => "chain",
            Layout::Topology(Topology::Ring { .. }) => "ring",
            Layout::Topology(Topology::Star { .. }) => "star",
            Layout::Topology(Topology::Complete { .. }) => "complete",
            Layout::Topology(Topology::Grid { .. }) => "grid",
            Layout::Topology(Topology::Torus { .. }) => "torus",
            Layout::Topology(Topology::PinnedChain { .. }) => "pinned_chain",
            Layout::EdgeList { .. } => "edge_list",
        }
    }

    /// A short description, e.g. `chain of 24 nodes` or `grid 10 × 10`.
    #[must_use]
    pub fn describe(&self) -> String {
        match self {
            Layout::Topology(t) => match *t {
                Topology::Chain { nodes } => format!("chain of {nodes} nodes"),
                Topology::Ring { nodes } => format!("ring of {nodes} nodes"),
                Topology::Star { nodes } => format!("star of {nodes} nodes (hub is node 0)"),
                Topology::Complete { nodes } => format!("complete graph of {nodes} nodes"),
                Topology::Grid { rows, cols } => format!("grid {rows} × {cols}"),
                Topology::Torus { rows, cols } => format!("torus {rows} × {cols}"),
                Topology::PinnedChain { nodes } => {
                    format!("chain of {nodes} nodes pinned to a reference at node 0")
                }
            },
            Layout::EdgeList {
                path,
                nodes,
                edges,
                references,
                ..
            } => {
                let file = path.file_name().map_or_else(
                    || path.display().to_string(),
                    |n| n.to_string_lossy().into_owned(),
                );
                let pinned = match references.as_slice() {
                    [] => String::new(),
                    [one] => format!(", reference at node {one}"),
                    many => format!(
                        ", references at nodes {}",
                        many.iter()
                            .map(ToString::to_string)
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                };
                format!("{nodes} nodes, {} edges from {file}{pinned}", edges.len())
            }
        }
    }
}

/// The scenario-file keyword of a node law: `"sine"` for every sine law, `"linear"` for
/// the linear law.
#[must_use]
pub fn law_keyword(law: Law) -> &'static str {
    match law {
        Law::Linear => "linear",
        _ => "sine",
    }
}

/// One gain as the scenario gives it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum GainSetting {
    /// A fixed per-update gain: the tuner never changes it.
    Fixed(f64),
    /// The word `"tune"`: the tuner chooses it.
    Tune,
}

impl GainSetting {
    /// The fixed value, if the gain is fixed.
    #[must_use]
    pub fn fixed(self) -> Option<f64> {
        match self {
            GainSetting::Fixed(v) => Some(v),
            GainSetting::Tune => None,
        }
    }
}

/// The two gains as the scenario gives them. A left-out `ki` is `Fixed(0.0)`: the P law.
///
/// Fixed values satisfy `0 < kp < 2` and `0 ≤ ki < kp` (when both are fixed).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Gains {
    /// Proportional gain per update.
    pub kp: GainSetting,
    /// Integral (rate-trim) gain per update.
    pub ki: GainSetting,
}

impl Gains {
    /// Both gains fixed.
    #[must_use]
    pub const fn fixed(kp: f64, ki: f64) -> Gains {
        Gains {
            kp: GainSetting::Fixed(kp),
            ki: GainSetting::Fixed(ki),
        }
    }

    /// Both gains fixed: `Some((kp, ki))`; `None` when one is to be tuned.
    #[must_use]
    pub fn both_fixed(&self) -> Option<(f64, f64)> {
        Some((self.kp.fixed()?, self.ki.fixed()?))
    }

    /// The integral path is on: `ki` is tuned or fixed above 0.
    #[must_use]
    pub fn is_pi(&self) -> bool {
        self.ki.fixed().is_none_or(|ki| ki > 0.0)
    }
}

/// A checked scenario, every quantity in SI units (seconds, hertz, ppm, turns).
#[derive(Clone, Debug, PartialEq)]
pub struct Scenario {
    /// The file it was read from.
    pub path: PathBuf,
    /// Free-text name (the file stem when not given).
    pub name: String,
    /// The coupling graph (the `[network]` section).
    pub layout: Layout,
    /// Updates per second of every node.
    pub update_rate_hz: f64,
    /// Duration of one phase turn, seconds.
    pub phase_period_s: f64,
    /// Node timer frequency, ticks per second.
    pub timer_hz: u32,
    /// Timer ticks per phase turn (`timer_hz × phase_period_s`, rounded).
    pub ticks_per_period: u32,
    /// Timer ticks per update (`timer_hz / update_rate_hz`, rounded).
    pub update_ticks: u32,
    /// The node law's coupling function: [`Law::Sine`] or [`Law::Linear`].
    pub law: Law,
    /// Gains, fixed or to be tuned, each on its own.
    pub gains: Gains,
    /// Required margins of the gains (the `[margins]` section; defaults: gain 2,
    /// delay 1 update).
    pub margins: Margins,
    /// Largest phase step per update, turns.
    pub slew_limit_turns: f64,
    /// Largest rate trim either way, ppm.
    pub trim_limit_ppm: f64,
    /// Silence, in update intervals, after which a neighbour is dropped.
    pub neighbour_timeout_updates: u32,
    /// Crystal tolerance, ± ppm.
    pub crystal_tolerance_ppm: f64,
    /// Standard deviation of one timestamp, seconds.
    pub timestamp_jitter_s: f64,
    /// Link latency from send to receive, seconds: the shortest link's (`[link]
    /// latency_s`, or the low end of `latency_range_s`).
    pub latency_s: f64,
    /// The longest link's latency, seconds (`latency_s` unless `[link] latency_range_s`
    /// gives a range: each link's latency is then drawn once per run in
    /// `[latency_s, latency_max_s]`).
    pub latency_max_s: f64,
    /// Largest difference between a link's two directions, seconds (`[link]
    /// asymmetry_s`; drawn per link). Two-way timing cannot see it: a node sees its
    /// neighbour off by half of it.
    pub asymmetry_s: f64,
    /// Whether the firmware is told each link's latency (`[link] latency_known`,
    /// default true); false: it is told nothing and measures it by two-way timing.
    pub latency_known: bool,
    /// Beacon frame version the nodes send (`[link] beacon_version`, default 2): 2
    /// carries two-way timing, 1 does not.
    pub beacon_version: u8,
    /// How the nodes' timers stamp receptions (`[clock] stamping`, default completed
    /// ticks, as hardware capture registers do).
    pub stamping: crate::sim::Stamping,
    /// Trim leak per update as written (`[law] trim_leak`); `None`: the default,
    /// `ki/64` (see [`Scenario::trim_leak`]).
    pub trim_leak: Option<f64>,
    /// Fraction of receptions stamped late by a stall (`[clock] late_stamp_fraction`,
    /// default 0), on top of the jitter.
    pub late_stamp_fraction: f64,
    /// How late such a stamp can be, seconds (`[clock] late_stamp_max_s`): each late
    /// stamp is a uniform draw from zero to this.
    pub late_stamp_max_s: f64,
    /// Fraction of beacons lost, `0 ≤ loss < 1`.
    pub loss_fraction: f64,
    /// Largest pairwise phase difference at power-up, seconds.
    pub initial_spread_s: f64,
    /// Largest pairwise phase difference counted as locked, seconds.
    pub lock_tolerance_s: f64,
    /// Longest acceptable time from power-up to lock, seconds.
    pub lock_budget_s: f64,
    /// Which settling time is compared with the budget.
    pub quantile: LockQuantile,
    /// Monte-Carlo runs.
    pub runs: u32,
    /// Seed of the first run (run `i` uses `seed + i`).
    pub seed: u64,
    /// Shortest simulated time per run the file asks for, seconds (`None`: let the
    /// assessment choose; it extends any value to a horizon long enough to tell settling
    /// from a passing entry).
    pub duration_s: Option<f64>,
    /// Each node's crystal error, ppm, in node order (`[clock] crystal_ppm`), when the
    /// file fixes the pattern; `None` draws every node's error per run within
    /// [`Scenario::crystal_tolerance_ppm`]. One value per node that adjusts its phase (a
    /// pinned chain's reference always runs at the nominal rate), each within the
    /// tolerance.
    pub crystal_ppm: Option<Vec<f64>>,
    /// Nodes that lose power during every simulated run (`[[reboot]]` tables), in file
    /// order. Settling counts from power-up, so a reboot's rejoin delays it.
    pub reboots: Vec<Reboot>,
}

/// A node that loses power during a run (a `[[reboot]]` table): silent from `at_s` for
/// `down_s`, then back from a random phase with an empty neighbour table and zero trim.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Reboot {
    /// The node (`0..nodes`; never a pinned chain's reference).
    pub node: usize,
    /// When it goes down, seconds from power-up (`≥ 0`).
    pub at_s: f64,
    /// How long it stays down, seconds (`> 0`; at least one update interval is simulated).
    pub down_s: f64,
}

impl Reboot {
    /// When it goes down, whole update intervals from power-up at `update_rate_hz`.
    #[must_use]
    pub fn at_updates(&self, update_rate_hz: f64) -> u64 {
        (self.at_s * update_rate_hz).round() as u64
    }

    /// How long it stays down, whole update intervals (at least 1) at `update_rate_hz`.
    #[must_use]
    pub fn down_updates(&self, update_rate_hz: f64) -> u64 {
        ((self.down_s * update_rate_hz).round() as u64).max(1)
    }

    /// When it is back, seconds from power-up.
    #[must_use]
    pub fn back_s(&self) -> f64 {
        self.at_s + self.down_s
    }
}

impl Scenario {
    /// Read and check the scenario file at `path`.
    ///
    /// # Errors
    /// A [`ScenarioError`] when the file cannot be read, is not valid TOML, has an unknown
    /// or missing key, a value of the wrong type or out of range, or names an edge list
    /// that cannot be read.
    pub fn load(path: &Path) -> Result<Scenario, ScenarioError> {
        let file = open_regular(path, MAX_SCENARIO_BYTES, "scenario file")?;
        let mut text = String::new();
        file.take(MAX_SCENARIO_BYTES + 1)
            .read_to_string(&mut text)
            .map_err(|e| whole_file_error(path, format!("cannot read the scenario file: {e}")))?;
        if text.len() as u64 > MAX_SCENARIO_BYTES {
            return Err(too_large(path, "scenario file", MAX_SCENARIO_BYTES));
        }
        Scenario::from_toml(path, &text)
    }

    /// Check scenario `text`, read from `path` (used in messages and to resolve the edge
    /// list file).
    ///
    /// # Errors
    /// As [`Scenario::load`].
    pub fn from_toml(path: &Path, text: &str) -> Result<Scenario, ScenarioError> {
        let loc = Locator { file: path, text };
        let raw: RawScenario = toml::from_str(text).map_err(|e| {
            let message = e.message().trim_end().replace('\n', " ");
            loc.at(e.span(), tidy_parse_message(&message))
        })?;
        check(&loc, raw)
    }

    /// Time between updates, seconds.
    #[must_use]
    pub fn update_period_s(&self) -> f64 {
        1.0 / self.update_rate_hz
    }

    /// The longest link latency in whole update intervals (the age of a neighbour's
    /// value when it is used, beyond the update it was sent in).
    #[must_use]
    pub fn delay_updates(&self) -> u32 {
        // Bounded by MAX_LATENCY_UPDATES at validation.
        (self.latency_max_s * self.update_rate_hz).floor() as u32
    }

    /// The trim leak per update the nodes run with integral gain `ki`: `[law]
    /// trim_leak` if written, else `ki/64` (zero for the P law). At `ki/64` the trims
    /// carry `1/(1 + kp/64)` of each crystal's offset from the network mean (99.5 % at
    /// kp = 0.3) and the network's common rate returns to the crystals' mean with a
    /// time constant of `64/ki` updates (docs/design.md, "Two-way timing and the leak").
    #[must_use]
    pub fn trim_leak(&self, ki: f64) -> f64 {
        self.trim_leak.unwrap_or(ki / DEFAULT_LEAK_DIVISOR)
    }
}

/// Make serde's wording a little plainer for people who write TOML, not Rust.
fn tidy_parse_message(message: &str) -> String {
    message
        .replace("invalid type: floating point", "wrong type: a number")
        .replace("invalid type: integer", "wrong type: an integer")
        .replace("invalid type: string", "wrong type: a string")
        .replace("invalid type: boolean", "wrong type: a boolean")
        .replace("invalid type: sequence", "wrong type: an array")
        .replace("invalid type: map", "wrong type: a table")
        .replace("i64", "an integer")
}

/// Range checks with messages that name the key and the valid range.
fn real_in(
    loc: &Locator<'_>,
    value: &S<Real>,
    key: &str,
    ok: impl Fn(f64) -> bool,
    range: &str,
) -> Result<f64, ScenarioError> {
    let v = value.get_ref().0;
    if v.is_finite() && ok(v) {
        Ok(v)
    } else {
        Err(loc.at(
            Some(value.span()),
            format!("{key} = {v} is out of range: it must be {range}"),
        ))
    }
}

fn int_in(
    loc: &Locator<'_>,
    value: &S<i64>,
    key: &str,
    min: i64,
    max: i64,
    unit: &str,
) -> Result<i64, ScenarioError> {
    let v = *value.get_ref();
    if (min..=max).contains(&v) {
        Ok(v)
    } else {
        Err(loc.at(
            Some(value.span()),
            format!("{key} = {v} is out of range: it must be from {min} to {max}{unit}"),
        ))
    }
}

fn missing(loc: &Locator<'_>, table: Range<usize>, key: &str, why: &str) -> ScenarioError {
    loc.at(Some(table), format!("missing key {key}: {why}"))
}

fn refuse(loc: &Locator<'_>, span: Range<usize>, message: String) -> ScenarioError {
    loc.at(Some(span), message)
}

fn check(loc: &Locator<'_>, raw: RawScenario) -> Result<Scenario, ScenarioError> {
    let version = *raw.version.get_ref();
    if version != SCENARIO_VERSION {
        return Err(refuse(
            loc,
            raw.version.span(),
            format!(
                "version = {version} is not supported: this build reads scenario version {SCENARIO_VERSION}"
            ),
        ));
    }
    let name = match &raw.name {
        Some(n) => n.get_ref().clone(),
        None => loc.file.file_stem().map_or_else(
            || "scenario".to_owned(),
            |s| s.to_string_lossy().into_owned(),
        ),
    };

    let layout = check_network(loc, &raw.network)?;

    // Timing.
    let timing = raw.timing.get_ref();
    let update_rate_hz = real_in(
        loc,
        &timing.update_rate_hz,
        "timing.update_rate_hz",
        |v| v > 0.0 && v <= 10_000.0,
        "above 0 and at most 10000 Hz",
    )?;
    let phase_period_s = real_in(
        loc,
        &timing.phase_period_s,
        "timing.phase_period_s",
        |v| v > 0.0 && v <= 3_600.0,
        "above 0 and at most 3600 s",
    )?;
    let timer_hz = match &timing.timer_hz {
        Some(t) => int_in(loc, t, "timing.timer_hz", 1_000, i64::from(u32::MAX), " Hz")?,
        None => 1_000_000,
    };
    let timer_span = timing
        .timer_hz
        .as_ref()
        .map_or_else(|| raw.timing.span(), Spanned::span);
    let ticks_per_period = (timer_hz as f64 * phase_period_s).round();
    if !(2.0..=f64::from(u32::MAX)).contains(&ticks_per_period) {
        return Err(refuse(
            loc,
            timer_span,
            format!(
                "timing.timer_hz × timing.phase_period_s = {ticks_per_period} ticks per phase turn is out of range: it must be from 2 to {}",
                u32::MAX
            ),
        ));
    }
    let update_ticks = (timer_hz as f64 / update_rate_hz).round();
    if !(1.0..=f64::from(i32::MAX as u32)).contains(&update_ticks) {
        return Err(refuse(
            loc,
            timer_span,
            format!(
                "timing.timer_hz / timing.update_rate_hz = {update_ticks} ticks per update is out of range: it must be from 1 to {}",
                i32::MAX
            ),
        ));
    }

    // Law.
    let law = raw.law.get_ref();
    let law_kind = match law.coupling.get_ref().as_str() {
        "sine" => Law::Sine,
        "linear" => Law::Linear,
        other => {
            return Err(refuse(
                loc,
                law.coupling.span(),
                format!(
                    "law.coupling = \"{other}\" is not known: it must be \"sine\" or \"linear\""
                ),
            ));
        }
    };
    let gains = check_gains(loc, law)?;
    let slew_limit_turns = match &law.slew_limit_turns {
        Some(v) => real_in(
            loc,
            v,
            "law.slew_limit_turns",
            |v| v > 0.0 && v < 0.5,
            "above 0 and below 0.5 turn",
        )?,
        None => 1.0 / 16.0,
    };
    let trim_limit_ppm = match &law.trim_limit_ppm {
        Some(v) => real_in(
            loc,
            v,
            "law.trim_limit_ppm",
            |v| v > 0.0 && v <= 100_000.0,
            "above 0 and at most 100000 ppm",
        )?,
        None => 200.0,
    };
    let neighbour_timeout_updates = match &law.neighbour_timeout_updates {
        Some(v) => int_in(
            loc,
            v,
            "law.neighbour_timeout_updates",
            1,
            1_000,
            " updates",
        )?,
        None => 5,
    };
    if update_ticks * neighbour_timeout_updates as f64 > f64::from(i32::MAX as u32) {
        return Err(refuse(
            loc,
            raw.law.span(),
            format!(
                "law.neighbour_timeout_updates × ticks per update = {} timer ticks is out of range: it must be at most {}",
                update_ticks * neighbour_timeout_updates as f64,
                i32::MAX
            ),
        ));
    }

    let trim_leak = match &law.trim_leak {
        Some(v) => Some(real_in(
            loc,
            v,
            "law.trim_leak",
            |v| (0.0..0.1).contains(&v),
            "from 0 to below 0.1 per update (and below ki)",
        )?),
        None => None,
    };

    // Clock.
    let stamping = match raw
        .clock
        .as_ref()
        .and_then(|c| c.get_ref().stamping.as_ref())
    {
        Some(v) => match v.get_ref().as_str() {
            "completed_ticks" => crate::sim::Stamping::CompletedTicks,
            "nearest" => crate::sim::Stamping::Nearest,
            other => {
                return Err(refuse(
                    loc,
                    v.span(),
                    format!(
                        "clock.stamping = \"{other}\" is not known: it must be \"completed_ticks\" (a timer's capture register) or \"nearest\""
                    ),
                ));
            }
        },
        None => crate::sim::Stamping::CompletedTicks,
    };
    let (crystal_tolerance_ppm, crystal_ppm, timestamp_jitter_s) = match &raw.clock {
        Some(c) => {
            let c = c.get_ref();
            let pattern = match &c.crystal_ppm {
                Some(v) => Some(check_crystal_pattern(loc, v, layout.node_count())?),
                None => None,
            };
            let ppm = match &c.crystal_tolerance_ppm {
                Some(v) => real_in(
                    loc,
                    v,
                    "clock.crystal_tolerance_ppm",
                    |v| (0.0..=1_000.0).contains(&v),
                    "from 0 to 1000 ppm",
                )?,
                // A fixed pattern's tolerance is its largest error.
                None => pattern
                    .as_deref()
                    .map_or(0.0, |p| p.iter().fold(0.0_f64, |m, e| m.max(e.abs()))),
            };
            if let (Some(p), Some(span)) = (&pattern, c.crystal_ppm.as_ref().map(Spanned::span)) {
                if let Some((node, e)) = p.iter().enumerate().find(|(_, e)| e.abs() > ppm) {
                    return Err(refuse(
                        loc,
                        span,
                        format!(
                            "clock.crystal_ppm: node {node} has {e} ppm, outside clock.crystal_tolerance_ppm (±{ppm} ppm): the planner's worst case must cover the pattern"
                        ),
                    ));
                }
            }
            let jitter = match &c.timestamp_jitter_s {
                Some(v) => real_in(
                    loc,
                    v,
                    "clock.timestamp_jitter_s",
                    |v| v >= 0.0 && v <= phase_period_s / 4.0,
                    &format!(
                        "from 0 to a quarter of timing.phase_period_s ({} s)",
                        phase_period_s / 4.0
                    ),
                )?,
                None => 0.0,
            };
            (ppm, pattern, jitter)
        }
        None => (0.0, None, 0.0),
    };
    let clock = raw.clock.as_ref().map(|c| c.get_ref());
    let late_stamp_fraction = match clock.and_then(|c| c.late_stamp_fraction.as_ref()) {
        Some(v) => real_in(
            loc,
            v,
            "clock.late_stamp_fraction",
            |v| (0.0..0.5).contains(&v),
            "from 0 to below 0.5",
        )?,
        None => 0.0,
    };
    let late_stamp_max_s = match clock.and_then(|c| c.late_stamp_max_s.as_ref()) {
        Some(v) => real_in(
            loc,
            v,
            "clock.late_stamp_max_s",
            |v| v >= 0.0 && v * update_rate_hz <= 0.25,
            &format!(
                "from 0 to a quarter of the update interval ({} s)",
                0.25 / update_rate_hz
            ),
        )?,
        None => 0.0,
    };
    // Link.
    let latency_ok = |v: f64| v >= 0.0 && v * update_rate_hz < MAX_LATENCY_UPDATES + 1.0;
    let latency_valid = format!(
        "from 0 to below {} s ({} update intervals)",
        (MAX_LATENCY_UPDATES + 1.0) / update_rate_hz,
        MAX_LATENCY_UPDATES + 1.0
    );
    let mut latency_max_s = 0.0;
    let mut asymmetry_s = 0.0;
    let mut latency_known = true;
    let mut beacon_version = 2u8;
    let (latency_s, loss_fraction) = match &raw.link {
        Some(l) => {
            let l = l.get_ref();
            let latency = match (&l.latency_s, &l.latency_range_s) {
                (Some(_), Some(r)) => {
                    return Err(refuse(
                        loc,
                        r.span(),
                        "link.latency_s and link.latency_range_s are both given: write one (a single latency, or a range drawn per link)".to_owned(),
                    ));
                }
                (Some(v), None) => {
                    let v = real_in(loc, v, "link.latency_s", latency_ok, &latency_valid)?;
                    latency_max_s = v;
                    v
                }
                (None, Some(r)) => {
                    let (lo, hi) = (r.get_ref().0.0, r.get_ref().1.0);
                    if !(latency_ok(lo) && latency_ok(hi) && lo <= hi) {
                        return Err(refuse(
                            loc,
                            r.span(),
                            format!(
                                "link.latency_range_s = [{lo}, {hi}] is out of range: both ends {latency_valid}, low end first"
                            ),
                        ));
                    }
                    latency_max_s = hi;
                    lo
                }
                (None, None) => 0.0,
            };
            if let Some(v) = &l.asymmetry_s {
                asymmetry_s = real_in(
                    loc,
                    v,
                    "link.asymmetry_s",
                    |v| v >= 0.0 && v <= 2.0 * latency.max(f64::MIN_POSITIVE),
                    "from 0 to twice the shortest link latency (a direction cannot arrive before it is sent)",
                )?;
            }
            if let Some(v) = &l.latency_known {
                latency_known = *v.get_ref();
            }
            if let Some(v) = &l.beacon_version {
                beacon_version = int_in(loc, v, "link.beacon_version", 1, 2, "")? as u8;
            }
            let loss = match &l.loss_fraction {
                Some(v) => real_in(
                    loc,
                    v,
                    "link.loss_fraction",
                    |v| (0.0..0.95).contains(&v),
                    "from 0 to below 0.95",
                )?,
                None => 0.0,
            };
            (latency, loss)
        }
        None => (0.0, 0.0),
    };

    // Lock.
    let lock = raw.lock.get_ref();
    let initial_spread_s = real_in(
        loc,
        &lock.initial_spread_s,
        "lock.initial_spread_s",
        |v| v > 0.0 && v < phase_period_s,
        &format!("above 0 and below timing.phase_period_s ({phase_period_s} s)"),
    )?;
    let lock_tolerance_s = real_in(
        loc,
        &lock.tolerance_s,
        "lock.tolerance_s",
        |v| v > 0.0 && v < initial_spread_s,
        &format!("above 0 and below lock.initial_spread_s ({initial_spread_s} s)"),
    )?;
    let lock_budget_s = real_in(
        loc,
        &lock.budget_s,
        "lock.budget_s",
        |v| v > 0.0 && v <= 1.0e6,
        "above 0 and at most 1000000 s",
    )?;

    let quantile = match &lock.quantile {
        None => LockQuantile::default(),
        Some(q) => match *q.get_ref() {
            RawQuantile::Bound => LockQuantile::Bound,
            RawQuantile::Fraction(v) => {
                if !(0.5..=0.99).contains(&v) {
                    return Err(refuse(
                        loc,
                        q.span(),
                        format!(
                            "lock.quantile = {v} is out of range: it must be from 0.5 to 0.99, or \"bound\""
                        ),
                    ));
                }
                LockQuantile::Fraction(v)
            }
        },
    };

    // Margins.
    let mut margins = Margins::default();
    if let Some(m) = &raw.margins {
        let m = m.get_ref();
        if let Some(v) = &m.gain {
            margins.gain = real_in(
                loc,
                v,
                "margins.gain",
                |v| (1.0..=100.0).contains(&v),
                "from 1 (no margin) to 100 (a factor both gains may grow by)",
            )?;
        }
        if let Some(v) = &m.delay_updates {
            margins.delay_updates = int_in(
                loc,
                v,
                "margins.delay_updates",
                0,
                i64::from(crate::plan::MAX_DELAY_UPDATES),
                " update intervals",
            )? as u32;
        }
    }

    let reboots = check_reboots(loc, raw.reboot.as_ref(), &layout, update_rate_hz)?;

    // Monte Carlo.
    let (runs, seed, duration_s) = match &raw.monte_carlo {
        Some(m) => {
            let m = m.get_ref();
            let runs = match &m.runs {
                Some(v) => int_in(loc, v, "monte_carlo.runs", 1, i64::from(MAX_RUNS), "")? as u32,
                None => 32,
            };
            let seed = match &m.seed {
                Some(v) => int_in(loc, v, "monte_carlo.seed", 0, i64::MAX, "")? as u64,
                None => 1,
            };
            let duration = match &m.duration_s {
                Some(v) => real_in(
                    loc,
                    v,
                    "monte_carlo.duration_s",
                    |v| v > 0.0 && v * update_rate_hz <= MAX_SIM_UPDATES,
                    &format!(
                        "above 0 and at most {} s ({MAX_SIM_UPDATES} updates at timing.update_rate_hz)",
                        MAX_SIM_UPDATES / update_rate_hz
                    ),
                )
                .map(Some)?,
                None => None,
            };
            (runs, seed, duration)
        }
        None => (32, 1, None),
    };

    Ok(Scenario {
        path: loc.file.to_path_buf(),
        name,
        layout,
        update_rate_hz,
        phase_period_s,
        timer_hz: timer_hz as u32,
        ticks_per_period: ticks_per_period as u32,
        update_ticks: update_ticks as u32,
        law: law_kind,
        gains,
        margins,
        slew_limit_turns,
        trim_limit_ppm,
        neighbour_timeout_updates: neighbour_timeout_updates as u32,
        crystal_tolerance_ppm,
        timestamp_jitter_s,
        latency_s,
        latency_max_s,
        asymmetry_s,
        latency_known,
        beacon_version,
        stamping,
        trim_leak,
        late_stamp_fraction,
        late_stamp_max_s,
        loss_fraction,
        initial_spread_s,
        lock_tolerance_s,
        lock_budget_s,
        quantile,
        runs,
        seed,
        duration_s,
        crystal_ppm,
        reboots,
    })
}

/// `[clock] crystal_ppm`: one finite value within ±1000 ppm per node.
fn check_crystal_pattern(
    loc: &Locator<'_>,
    value: &S<Vec<Real>>,
    nodes: usize,
) -> Result<Vec<f64>, ScenarioError> {
    let pattern: Vec<f64> = value.get_ref().iter().map(|r| r.0).collect();
    if pattern.len() != nodes {
        return Err(refuse(
            loc,
            value.span(),
            format!(
                "clock.crystal_ppm holds {} values: it needs one per node ({nodes}), in node order",
                pattern.len()
            ),
        ));
    }
    if let Some((node, e)) = pattern
        .iter()
        .enumerate()
        .find(|(_, e)| !(e.is_finite() && e.abs() <= 1_000.0))
    {
        return Err(refuse(
            loc,
            value.span(),
            format!("clock.crystal_ppm: node {node} has {e} ppm: each must be within ±1000 ppm"),
        ));
    }
    Ok(pattern)
}

/// The `[[reboot]]` tables, checked against the layout and the budget of simulated time.
fn check_reboots(
    loc: &Locator<'_>,
    raw: Option<&Vec<S<RawReboot>>>,
    layout: &Layout,
    update_rate_hz: f64,
) -> Result<Vec<Reboot>, ScenarioError> {
    let Some(raw) = raw else {
        return Ok(Vec::new());
    };
    let nodes = layout.node_count() as i64;
    let longest = MAX_SIM_UPDATES / update_rate_hz;
    raw.iter()
        .map(|r| {
            let r = r.get_ref();
            let node = int_in(loc, &r.node, "reboot.node", 0, nodes - 1, "")? as usize;
            if let Layout::EdgeList { references, .. } = layout {
                if references.contains(&node) {
                    return Err(refuse(
                        loc,
                        r.node.span(),
                        format!(
                            "reboot.node = {node} is a reference node: a reference holds the reference phase and never reboots here"
                        ),
                    ));
                }
            }
            let within = |v: f64| v * update_rate_hz <= MAX_SIM_UPDATES;
            let at_s = real_in(
                loc,
                &r.at_s,
                "reboot.at_s",
                |v| v >= 0.0 && within(v),
                &format!("from 0 to {longest} s"),
            )?;
            let down_s = real_in(
                loc,
                &r.down_s,
                "reboot.down_s",
                |v| v > 0.0 && within(v),
                &format!("above 0 and at most {longest} s"),
            )?;
            Ok(Reboot { node, at_s, down_s })
        })
        .collect()
}

fn check_gains(loc: &Locator<'_>, law: &RawLaw) -> Result<Gains, ScenarioError> {
    let kp = match *law.kp.get_ref() {
        RawGain::Tune => GainSetting::Tune,
        RawGain::Value(kp) => {
            if !(kp.is_finite() && kp > 0.0 && kp < 2.0) {
                return Err(refuse(
                    loc,
                    law.kp.span(),
                    format!(
                        "law.kp = {kp} is out of range: it must be above 0 and below 2, or \"tune\""
                    ),
                ));
            }
            GainSetting::Fixed(kp)
        }
    };
    let ki = match law.ki.as_ref().map(|k| (*k.get_ref(), k.span())) {
        None => GainSetting::Fixed(0.0),
        Some((RawGain::Tune, _)) => GainSetting::Tune,
        Some((RawGain::Value(ki), span)) => {
            let below = kp.fixed().unwrap_or(2.0);
            if !(ki.is_finite() && ki >= 0.0 && ki < below) {
                let limit = match kp {
                    GainSetting::Fixed(kp) => format!("below law.kp ({kp})"),
                    GainSetting::Tune => "below 2 (and below the tuned kp)".to_owned(),
                };
                return Err(refuse(
                    loc,
                    span,
                    format!(
                        "law.ki = {ki} is out of range: it must be at least 0 and {limit}, or \"tune\""
                    ),
                ));
            }
            GainSetting::Fixed(ki)
        }
    };
    Ok(Gains { kp, ki })
}

fn count_key(
    loc: &Locator<'_>,
    net: &S<RawNetwork>,
    key: &str,
    value: Option<&S<i64>>,
    min: i64,
    max: i64,
    kind: &str,
) -> Result<usize, ScenarioError> {
    match value {
        Some(v) => {
            let n = *v.get_ref();
            if (min..=max).contains(&n) {
                Ok(n as usize)
            } else {
                Err(refuse(
                    loc,
                    v.span(),
                    format!(
                        "network.{key} = {n} is out of range: a {kind} needs from {min} to {max}"
                    ),
                ))
            }
        }
        None => Err(missing(
            loc,
            net.span(),
            &format!("network.{key}"),
            &format!("a {kind} needs it ({min} to {max})"),
        )),
    }
}

fn refuse_extra(
    loc: &Locator<'_>,
    value: Option<&S<impl Sized>>,
    key: &str,
    topology: &str,
) -> Result<(), ScenarioError> {
    match value {
        Some(v) => Err(refuse(
            loc,
            v.span(),
            format!("network.{key} does not apply to topology \"{topology}\": remove it"),
        )),
        None => Ok(()),
    }
}

fn check_network(loc: &Locator<'_>, net: &S<RawNetwork>) -> Result<Layout, ScenarioError> {
    let n = net.get_ref();
    let topology = n.topology.get_ref().as_str();
    let max = MAX_SCENARIO_NODES as i64;
    let dense = MAX_DENSE_NODES as i64;
    // Each side may be as long as the product allows (a 10 × 100,000 strip is a grid);
    // rows × cols is held to MAX_SCENARIO_NODES below.
    let side = max;
    if topology != "edge_list" {
        refuse_extra(loc, n.edges.as_ref(), "edges", topology)?;
        refuse_extra(loc, n.reference_nodes.as_ref(), "reference_nodes", topology)?;
    }
    let references = |nodes: usize| -> Result<Vec<usize>, ScenarioError> {
        match &n.reference_nodes {
            None => Ok(Vec::new()),
            Some(list) => check_references(list.get_ref(), nodes).map_err(|message| {
                refuse(
                    loc,
                    list.span(),
                    format!("network.reference_nodes: {message}"),
                )
            }),
        }
    };
    let linear = |kind: &str, min: i64, max: i64| -> Result<usize, ScenarioError> {
        refuse_extra(loc, n.rows.as_ref(), "rows", topology)?;
        refuse_extra(loc, n.cols.as_ref(), "cols", topology)?;
        refuse_extra(loc, n.edge_list_file.as_ref(), "edge_list_file", topology)?;
        count_key(loc, net, "nodes", n.nodes.as_ref(), min, max, kind)
    };
    let mesh = |kind: &str, min: i64| -> Result<(usize, usize), ScenarioError> {
        refuse_extra(loc, n.nodes.as_ref(), "nodes", topology)?;
        refuse_extra(loc, n.edge_list_file.as_ref(), "edge_list_file", topology)?;
        let rows = count_key(loc, net, "rows", n.rows.as_ref(), min, side, kind)?;
        let cols = count_key(loc, net, "cols", n.cols.as_ref(), min, side, kind)?;
        let total = rows.saturating_mul(cols);
        if !(2..=MAX_SCENARIO_NODES).contains(&total) {
            return Err(refuse(
                loc,
                net.span(),
                format!(
                    "network.rows × network.cols = {total} nodes is out of range: a {kind} needs from 2 to {MAX_SCENARIO_NODES}"
                ),
            ));
        }
        Ok((rows, cols))
    };
    Ok(match topology {
        "chain" => Layout::Topology(Topology::Chain {
            nodes: linear("chain", 2, max)?,
        }),
        "ring" => Layout::Topology(Topology::Ring {
            nodes: linear("ring", 3, max)?,
        }),
        "star" => Layout::Topology(Topology::Star {
            nodes: linear("star", 2, dense)?,
        }),
        "complete" => Layout::Topology(Topology::Complete {
            nodes: linear("complete graph", 2, dense)?,
        }),
        "pinned_chain" => Layout::Topology(Topology::PinnedChain {
            nodes: linear("pinned chain", 1, max)?,
        }),
        "grid" => {
            let (rows, cols) = mesh("grid", 1)?;
            Layout::Topology(Topology::Grid { rows, cols })
        }
        "torus" => {
            let (rows, cols) = mesh("torus", 3)?;
            Layout::Topology(Topology::Torus { rows, cols })
        }
        "edge_list" => {
            refuse_extra(loc, n.rows.as_ref(), "rows", topology)?;
            refuse_extra(loc, n.cols.as_ref(), "cols", topology)?;
            let nodes = match &n.nodes {
                Some(v) => Some(count_key(
                    loc,
                    net,
                    "nodes",
                    Some(v),
                    2,
                    max,
                    "edge-list graph",
                )?),
                None => None,
            };
            if let Some(inline) = &n.edges {
                refuse_extra(
                    loc,
                    n.edge_list_file.as_ref(),
                    "edge_list_file",
                    "edge_list with inline edges",
                )?;
                let (count, edges, weights) =
                    check_inline_edges(inline.get_ref(), nodes).map_err(|message| {
                        refuse(loc, inline.span(), format!("network.edges: {message}"))
                    })?;
                return Ok(Layout::EdgeList {
                    path: loc.file.to_path_buf(),
                    nodes: count,
                    edges,
                    weights,
                    references: references(count)?,
                });
            }
            let Some(file) = &n.edge_list_file else {
                return Err(missing(
                    loc,
                    net.span(),
                    "network.edge_list_file",
                    "topology \"edge_list\" needs the path of its edge-list file, or the edges inline as network.edges = [[0, 1], [1, 2]]",
                ));
            };
            let base = loc.file.parent().unwrap_or_else(|| Path::new(""));
            let path = base.join(file.get_ref());
            let file_edges = read_weighted_edge_list(&path, nodes).map_err(|mut e| {
                if e.line.is_none() {
                    // Point at the key when the file itself is the problem.
                    let at = loc.at(Some(file.span()), String::new());
                    e = ScenarioError {
                        message: format!("network.edge_list_file: {}", e.message),
                        ..at
                    };
                }
                e
            })?;
            Layout::EdgeList {
                path,
                nodes: file_edges.nodes,
                edges: file_edges.edges,
                weights: file_edges.weights,
                references: references(file_edges.nodes)?,
            }
        }
        other => {
            return Err(refuse(
                loc,
                n.topology.span(),
                format!(
                    "network.topology = \"{other}\" is not known: it must be one of \"chain\", \"ring\", \"star\", \"complete\", \"grid\", \"torus\", \"pinned_chain\", \"edge_list\""
                ),
            ));
        }
    })
}

/// Largest scenario file read, bytes (a scenario is a few hundred bytes; the cap keeps a
/// wrong path, such as a disk image, from being read into memory).
pub const MAX_SCENARIO_BYTES: u64 = 1 << 20;

/// Largest edge-list file read, bytes: room for every edge of
/// [`MAX_SCENARIO_NODES`] nodes with up to 255 neighbours each, written out with comments.
pub const MAX_EDGE_LIST_BYTES: u64 = 64 << 20;

fn whole_file_error(path: &Path, message: String) -> ScenarioError {
    ScenarioError {
        file: path.to_path_buf(),
        line: None,
        column: None,
        message,
    }
}

fn too_large(path: &Path, what: &str, cap: u64) -> ScenarioError {
    whole_file_error(
        path,
        format!(
            "the {what} {} is larger than the {cap}-byte limit for a {what}",
            path.display()
        ),
    )
}

/// Open `path` for reading only if it is a regular file no larger than `cap` bytes.
/// The type is checked before opening (opening a pipe would wait for a writer) and again
/// on the opened file.
pub(crate) fn open_regular(
    path: &Path,
    cap: u64,
    what: &str,
) -> Result<std::fs::File, ScenarioError> {
    let refuse = |message: String| whole_file_error(path, message);
    let kind = |m: &std::fs::Metadata| {
        if m.is_dir() {
            "a directory"
        } else {
            "a device, pipe or socket"
        }
    };
    let unreadable =
        |e: std::io::Error| refuse(format!("cannot read the {what} {}: {e}", path.display()));
    let regular = |meta: &std::fs::Metadata| {
        if meta.is_file() {
            Ok(())
        } else {
            Err(refuse(format!(
                "the {what} {} is {}, not a regular file",
                path.display(),
                kind(meta)
            )))
        }
    };
    let meta = std::fs::metadata(path).map_err(unreadable)?;
    regular(&meta)?;
    if meta.len() > cap {
        return Err(too_large(path, what, cap));
    }
    let file = std::fs::File::open(path).map_err(unreadable)?;
    regular(&file.metadata().map_err(unreadable)?)?;
    Ok(file)
}

/// Check `[network] reference_nodes` against a graph of `nodes` nodes: each a node
/// number, none twice, and at least one node left to adjust. Ascending on return.
fn check_references(list: &[i64], nodes: usize) -> Result<Vec<usize>, String> {
    let mut out = Vec::with_capacity(list.len());
    for &r in list {
        let Some(node) = usize::try_from(r).ok().filter(|&v| v < nodes) else {
            return Err(format!(
                "node {r} is out of range: node numbers are from 0 to {}",
                nodes - 1
            ));
        };
        if out.contains(&node) {
            return Err(format!("node {node} is listed twice"));
        }
        out.push(node);
    }
    if out.len() >= nodes {
        return Err(format!(
            "all {nodes} nodes are references: at least one node must adjust its phase"
        ));
    }
    out.sort_unstable();
    Ok(out)
}

/// Inline edges as checked: node count, edges, weights (empty when none is given).
type InlineEdges = (usize, Vec<(usize, usize)>, Vec<f64>);

/// Check inline edges (`[network] edges`): node numbers from 0, no self-loop, no edge
/// twice, at most [`crate::MAX_NEIGHBOURS`] neighbours per node, the node count `nodes` when
/// given, else one more than the largest number; an optional third entry, the weight,
/// from [`WEIGHT_MIN`] to [`WEIGHT_MAX`] (1 when left out).
fn check_inline_edges(pairs: &[RawEdge], nodes: Option<usize>) -> Result<InlineEdges, String> {
    if pairs.is_empty() {
        return Err("no edges".to_owned());
    }
    let limit = nodes.unwrap_or(MAX_SCENARIO_NODES);
    let mut seen = std::collections::BTreeSet::new();
    let mut edges = Vec::with_capacity(pairs.len());
    let mut weights = Vec::with_capacity(pairs.len());
    let mut weighted = false;
    for pair in pairs {
        let (a, b, weight) = match *pair {
            RawEdge::Plain(a, b) => (a, b, 1.0),
            RawEdge::Weighted(a, b, Real(w)) => {
                weighted = true;
                if !(w.is_finite() && (WEIGHT_MIN..=WEIGHT_MAX).contains(&w)) {
                    return Err(format!(
                        "edge [{a}, {b}, {w}] has weight {w}: a weight is a number from {WEIGHT_MIN} to {WEIGHT_MAX}"
                    ));
                }
                (a, b, w)
            }
        };
        weights.push(weight);
        let ok = |v: i64| usize::try_from(v).ok().filter(|&v| v < limit);
        let (Some(a), Some(b)) = (ok(a), ok(b)) else {
            return Err(format!(
                "edge [{a}, {b}] names a node out of range: node numbers must be from 0 to {}",
                limit - 1
            ));
        };
        if a == b {
            return Err(format!("edge [{a}, {b}] joins a node to itself"));
        }
        if !seen.insert((a.min(b), a.max(b))) {
            return Err(format!("edge [{a}, {b}] is listed twice"));
        }
        edges.push((a, b));
    }
    let count = nodes.unwrap_or_else(|| {
        edges
            .iter()
            .map(|&(a, b)| a.max(b))
            .max()
            .map_or(0, |m| m + 1)
    });
    let mut degree = vec![0usize; count];
    for &(a, b) in &edges {
        for end in [a, b] {
            degree[end] += 1;
            if degree[end] > crate::MAX_NEIGHBOURS {
                return Err(format!(
                    "node {end} has more than {} neighbours: a node's neighbour table holds at most {}",
                    crate::MAX_NEIGHBOURS,
                    crate::MAX_NEIGHBOURS
                ));
            }
        }
    }
    if !weighted {
        weights.clear();
    }
    Ok((count, edges, weights))
}

/// Read an edge-list file: one undirected edge `a b` per line (0-based node numbers,
/// separated by spaces, tabs or a comma), `#` starts a comment, blank lines are skipped.
/// The node count is `nodes` when given, else one more than the largest number seen.
///
/// # Errors
/// A [`ScenarioError`] naming the edge-list file, line and column of a malformed line, a
/// self-loop, a repeated edge, a node number out of range, a node with more than 255
/// neighbours, or an empty file; or, without a line, a file that cannot be read.
pub fn read_edge_list(
    path: &Path,
    nodes: Option<usize>,
) -> Result<(usize, Vec<(usize, usize)>), ScenarioError> {
    read_weighted_edge_list(path, nodes).map(|e| (e.nodes, e.edges))
}

/// Smallest coupling weight an edge-list line may give (`[WEIGHT_MIN, WEIGHT_MAX]`).
pub const WEIGHT_MIN: f64 = 0.01;

/// Largest coupling weight an edge-list line may give.
pub const WEIGHT_MAX: f64 = 100.0;

/// An edge-list file as read by [`read_weighted_edge_list`].
#[derive(Clone, Debug, PartialEq)]
pub struct EdgeListFile {
    /// Number of nodes.
    pub nodes: usize,
    /// The edges, in file order.
    pub edges: Vec<(usize, usize)>,
    /// One coupling weight per edge when any line gives a third column (lines without
    /// one weigh 1); empty when none does.
    pub weights: Vec<f64>,
}

/// As [`read_edge_list`], with an optional third column on each line: the edge's
/// coupling weight relative to a plain link, a number from [`WEIGHT_MIN`] to
/// [`WEIGHT_MAX`] (a line without it weighs 1).
///
/// # Errors
/// As [`read_edge_list`]; also a weight that is not a number or out of range.
pub fn read_weighted_edge_list(
    path: &Path,
    nodes: Option<usize>,
) -> Result<EdgeListFile, ScenarioError> {
    let file = open_regular(path, MAX_EDGE_LIST_BYTES, "edge-list file")?;
    // Read as a stream, a line at a time, never more than the cap.
    let reader = BufReader::new(file.take(MAX_EDGE_LIST_BYTES + 1));
    let mut read_bytes = 0u64;
    let here = |line: usize, column: usize, message: String| ScenarioError {
        file: path.to_path_buf(),
        line: Some(line),
        column: Some(column),
        message,
    };
    let mut edges = Vec::new();
    let mut weights = Vec::new();
    let mut weighted = false;
    let mut seen = std::collections::BTreeSet::new();
    let mut largest = 0usize;
    for (index, raw_line) in reader.lines().enumerate() {
        let line_no = index + 1;
        let raw_line = raw_line.map_err(|e| {
            if e.kind() == std::io::ErrorKind::InvalidData {
                here(line_no, 1, "this line is not UTF-8 text".to_owned())
            } else {
                whole_file_error(path, format!("cannot read the edge-list file: {e}"))
            }
        })?;
        read_bytes += raw_line.len() as u64 + 1;
        if read_bytes > MAX_EDGE_LIST_BYTES + 1 {
            return Err(too_large(path, "edge-list file", MAX_EDGE_LIST_BYTES));
        }
        let body = raw_line.split('#').next().unwrap_or("");
        let mut fields = Vec::new();
        let mut start = None;
        for (at, ch) in body
            .char_indices()
            .chain(std::iter::once((body.len(), ' ')))
        {
            let sep = ch.is_whitespace() || ch == ',';
            match (start, sep) {
                (None, false) => start = Some(at),
                (Some(s), true) => {
                    fields.push((s, body.get(s..at).unwrap_or("")));
                    start = None;
                }
                _ => {}
            }
        }
        if fields.is_empty() {
            continue;
        }
        let column_of = |byte: usize| body.get(..byte).map_or(1, |s| s.chars().count() + 1);
        if !(2..=3).contains(&fields.len()) {
            let col = fields
                .get(3)
                .or(fields.get(2))
                .map_or(1, |f| column_of(f.0));
            return Err(here(
                line_no,
                col,
                format!(
                    "an edge line holds two node numbers and an optional weight, found {} fields",
                    fields.len()
                ),
            ));
        }
        let weight = match fields.get(2) {
            None => 1.0,
            Some(&(at, field)) => match field.parse::<f64>() {
                Ok(w) if w.is_finite() && (WEIGHT_MIN..=WEIGHT_MAX).contains(&w) => w,
                _ => {
                    return Err(here(
                        line_no,
                        column_of(at),
                        format!(
                            "\"{field}\" is not a coupling weight: a weight is a number from {WEIGHT_MIN} to {WEIGHT_MAX}"
                        ),
                    ));
                }
            },
        };
        weighted |= fields.len() == 3;
        weights.push(weight);
        let mut ends = [0usize; 2];
        for (slot, (at, field)) in ends.iter_mut().zip(fields.iter().take(2)) {
            *slot = field.parse::<usize>().map_err(|_| {
                here(
                    line_no,
                    column_of(*at),
                    format!(
                        "\"{field}\" is not a node number: node numbers are whole numbers from 0"
                    ),
                )
            })?;
            let limit = nodes.unwrap_or(MAX_SCENARIO_NODES);
            if *slot >= limit {
                return Err(here(
                    line_no,
                    column_of(*at),
                    format!(
                        "node {} is out of range: node numbers must be from 0 to {}",
                        *slot,
                        limit - 1
                    ),
                ));
            }
        }
        let [a, b] = ends;
        if a == b {
            return Err(here(
                line_no,
                1,
                format!("edge {a} {b} joins a node to itself"),
            ));
        }
        if !seen.insert((a.min(b), a.max(b))) {
            return Err(here(line_no, 1, format!("edge {a} {b} is listed twice")));
        }
        largest = largest.max(a).max(b);
        edges.push((a, b));
    }
    if edges.is_empty() {
        return Err(ScenarioError {
            file: path.to_path_buf(),
            line: None,
            column: None,
            message: "the edge-list file holds no edges".to_owned(),
        });
    }
    let count = nodes.unwrap_or(largest + 1);
    let mut degree = vec![0usize; count];
    for &(a, b) in &edges {
        for end in [a, b] {
            if let Some(d) = degree.get_mut(end) {
                *d += 1;
                if *d > crate::MAX_NEIGHBOURS {
                    return Err(ScenarioError {
                        file: path.to_path_buf(),
                        line: None,
                        column: None,
                        message: format!(
                            "node {end} has more than {} neighbours: a node's neighbour table holds at most {}",
                            crate::MAX_NEIGHBOURS,
                            crate::MAX_NEIGHBOURS
                        ),
                    });
                }
            }
        }
    }
    if !weighted {
        weights.clear();
    }
    Ok(EdgeListFile {
        nodes: count,
        edges,
        weights,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
version = 1
name = "test string"

[network]
topology = "chain"
nodes = 5

[timing]
update_rate_hz = 10
phase_period_s = 0.001

[law]
coupling = "sine"
kp = 0.4
ki = 0.05

[clock]
crystal_tolerance_ppm = 20

[lock]
initial_spread_s = 0.0004
tolerance_s = 0.000001
budget_s = 30
"#;

    fn parse(text: &str) -> Result<Scenario, ScenarioError> {
        Scenario::from_toml(Path::new("t.toml"), text)
    }

    #[test]
    fn good_file_reads() {
        let s = parse(GOOD).unwrap();
        assert_eq!(s.layout, Layout::Topology(Topology::Chain { nodes: 5 }));
        assert_eq!(s.gains, Gains::fixed(0.4, 0.05));
        assert_eq!(s.margins, Margins::default());
        // 1 MHz default timer: 1 ms is 1000 ticks, 10 Hz is 100000 ticks.
        assert_eq!(s.ticks_per_period, 1_000);
        assert_eq!(s.update_ticks, 100_000);
        assert_eq!(s.duration_s, None);
        assert_eq!(s.quantile, LockQuantile::Fraction(0.9));
        assert_eq!(s.runs, 32);
    }

    #[test]
    fn line_and_column_count_characters() {
        assert_eq!(line_column("ab\ncd", 4), (2, 2));
        assert_eq!(line_column("é = 1\nx", 7), (2, 1));
        assert_eq!(line_column("", 0), (1, 1));
    }

    #[test]
    fn out_of_range_names_place_and_range() {
        let bad = GOOD.replace("kp = 0.4", "kp = 2.5");
        let e = parse(&bad).unwrap_err();
        assert_eq!(e.line, Some(15));
        assert_eq!(e.column, Some(6));
        assert!(e.message.contains("below 2"), "{}", e.message);
    }

    #[test]
    fn tune_words() {
        let s = parse(
            &GOOD
                .replace("kp = 0.4", "kp = \"tune\"")
                .replace("ki = 0.05", "ki = \"tune\""),
        )
        .unwrap();
        assert_eq!(
            s.gains,
            Gains {
                kp: GainSetting::Tune,
                ki: GainSetting::Tune
            }
        );
        // Each gain on its own: a fixed ki stays fixed while kp is tuned.
        let s = parse(&GOOD.replace("kp = 0.4", "kp = \"tune\"")).unwrap();
        assert_eq!(s.gains.kp, GainSetting::Tune);
        assert_eq!(s.gains.ki, GainSetting::Fixed(0.05));
        let s = parse(&GOOD.replace("ki = 0.05", "ki = \"tune\"")).unwrap();
        assert_eq!(s.gains.kp, GainSetting::Fixed(0.4));
        assert!(s.gains.is_pi());
        let e = parse(&GOOD.replace("kp = 0.4", "kp = \"fast\"")).unwrap_err();
        assert!(e.message.contains("\"tune\""), "{}", e.message);
    }

    #[test]
    fn margins_read_with_ranges() {
        let s = parse(&format!(
            "{GOOD}\n[margins]\ngain = 1.5\ndelay_updates = 0\n"
        ))
        .unwrap();
        assert_eq!(
            s.margins,
            Margins {
                gain: 1.5,
                delay_updates: 0
            }
        );
        let e = parse(&format!("{GOOD}\n[margins]\ngain = 0.5\n")).unwrap_err();
        assert!(e.message.contains("margins.gain"), "{}", e.message);
        assert!(e.message.contains("from 1"), "{}", e.message);
        let e = parse(&format!("{GOOD}\n[margins]\ndelay_updates = 31\n")).unwrap_err();
        assert!(e.message.contains("0 to 30"), "{}", e.message);
    }

    #[test]
    fn delay_is_whole_update_intervals() {
        let s = parse(&format!("{GOOD}\n[link]\nlatency_s = 0.25\n")).unwrap();
        assert_eq!(s.delay_updates(), 2);
    }
}
