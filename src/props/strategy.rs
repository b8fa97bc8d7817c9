//! Strategies: layouts, crystal patterns, reboots, and whole deployments.

use crate::plan::{Topology, worst_chain_pattern};
use crate::scenario::{Layout, MAX_DENSE_NODES, Reboot, Scenario};
use proptest::prelude::*;
use std::ops::RangeInclusive;
use std::path::Path;

/// A family of closed-form topologies.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Family {
    /// Open chain (at least 2 nodes).
    Chain,
    /// Closed ring (at least 3 nodes).
    Ring,
    /// Star, hub node 0 (2 to 256 nodes).
    Star,
    /// Complete graph (2 to 256 nodes).
    Complete,
    /// Rectangular grid, rows × cols nodes (at least 2).
    Grid,
    /// Torus, rows × cols nodes, each side at least 3.
    Torus,
    /// Chain pinned to a reference (at least 1 node that adjusts).
    PinnedChain,
}

fn clamp_range(nodes: &RangeInclusive<usize>, lo: usize, hi: usize) -> RangeInclusive<usize> {
    let a = (*nodes.start()).max(lo);
    let b = (*nodes.end()).min(hi);
    assert!(
        a <= b,
        "node range {nodes:?} is empty for this family (it allows {lo} to {hi})"
    );
    a..=b
}

/// Layouts of `family` whose node count lies in `nodes` (a grid or torus: rows × cols in
/// `nodes`). Shrinks toward fewer nodes.
///
/// # Panics
/// When no layout of the family has a node count in `nodes`.
pub fn topology(family: Family, nodes: RangeInclusive<usize>) -> BoxedStrategy<Layout> {
    let wrap = |t: Topology| Layout::Topology(t);
    match family {
        Family::Chain => clamp_range(&nodes, 2, usize::MAX)
            .prop_map(move |nodes| wrap(Topology::Chain { nodes }))
            .boxed(),
        Family::Ring => clamp_range(&nodes, 3, usize::MAX)
            .prop_map(move |nodes| wrap(Topology::Ring { nodes }))
            .boxed(),
        Family::Star => clamp_range(&nodes, 2, MAX_DENSE_NODES)
            .prop_map(move |nodes| wrap(Topology::Star { nodes }))
            .boxed(),
        Family::Complete => clamp_range(&nodes, 2, MAX_DENSE_NODES)
            .prop_map(move |nodes| wrap(Topology::Complete { nodes }))
            .boxed(),
        Family::PinnedChain => clamp_range(&nodes, 1, usize::MAX)
            .prop_map(move |nodes| wrap(Topology::PinnedChain { nodes }))
            .boxed(),
        Family::Grid | Family::Torus => {
            let torus = family == Family::Torus;
            let side = if torus { 3 } else { 1 };
            let range = clamp_range(&nodes, if torus { 9 } else { 2 }, usize::MAX);
            let (lo, hi) = (*range.start(), *range.end());
            // Rows from the smallest side up to √hi; cols so that rows × cols is in range.
            let max_rows = (side..=hi)
                .take_while(|r| r * r <= hi)
                .last()
                .unwrap_or(side);
            let shapes: Vec<(usize, usize)> = (side..=max_rows)
                .flat_map(|r| {
                    let c_lo = lo.div_ceil(r).max(side).max(r);
                    let c_hi = hi / r;
                    (c_lo <= c_hi).then_some((r, c_lo))
                })
                .collect();
            assert!(
                !shapes.is_empty(),
                "no {family:?} has a node count in {nodes:?}"
            );
            proptest::sample::select(shapes)
                .prop_flat_map(move |(r, c_lo)| (Just(r), c_lo..=hi / r))
                .prop_map(move |(rows, cols)| {
                    if torus {
                        wrap(Topology::Torus { rows, cols })
                    } else {
                        wrap(Topology::Grid { rows, cols })
                    }
                })
                .boxed()
        }
    }
}

/// Random connected graphs of a node count in `nodes` where no node has more than
/// `max_degree ≥ 2` neighbours: a random spanning tree (each node joins an earlier one
/// that still has room) plus up to `extra_edges` further edges that respect the cap.
/// Edges are inline (`[network] edges`), so a written scenario stands alone. Shrinks
/// toward fewer nodes, fewer extra edges and lower-numbered attachment points.
///
/// # Panics
/// When `max_degree < 2` or `nodes` starts below 2.
pub fn connected_edges(
    nodes: RangeInclusive<usize>,
    max_degree: usize,
    extra_edges: usize,
) -> BoxedStrategy<Layout> {
    assert!(
        max_degree >= 2,
        "a degree cap below 2 cannot join more than two nodes"
    );
    assert!(*nodes.start() >= 2, "an edge list joins at least 2 nodes");
    nodes
        .prop_flat_map(move |n| {
            (
                Just(n),
                proptest::collection::vec(any::<u32>(), n - 1),
                proptest::collection::vec((any::<u32>(), any::<u32>()), 0..=extra_edges),
            )
        })
        .prop_map(move |(n, parents, extra)| {
            let mut degree = vec![0usize; n];
            let mut edges = Vec::with_capacity(n - 1 + extra.len());
            let mut seen = std::collections::BTreeSet::new();
            for (i, raw) in (1..n).zip(&parents) {
                // Among nodes 0..i (a tree of i − 1 edges, degree sum 2i − 2 < 2i) some
                // node has degree below the cap ≥ 2: take the first from `raw % i` on.
                let start = *raw as usize % i;
                let p = (0..i)
                    .map(|k| (start + k) % i)
                    .find(|&p| degree[p] < max_degree)
                    .expect("a tree on i nodes has a node below any degree cap ≥ 2");
                degree[p] += 1;
                degree[i] += 1;
                seen.insert((p, i));
                edges.push((p, i));
            }
            for (ra, rb) in extra {
                let (a, b) = (ra as usize % n, rb as usize % n);
                let key = (a.min(b), a.max(b));
                if a != b && degree[a] < max_degree && degree[b] < max_degree && seen.insert(key) {
                    degree[a] += 1;
                    degree[b] += 1;
                    edges.push(key);
                }
            }
            Layout::EdgeList {
                path: Path::new("generated.toml").to_path_buf(),
                nodes: n,
                edges,
                weights: Vec::new(),
                references: Vec::new(),
            }
        })
        .boxed()
}

/// A crystal pattern: how the nodes' crystal errors are set within a tolerance.
#[derive(Clone, Debug, PartialEq)]
pub enum CrystalPattern {
    /// Each node's error drawn per simulated run within the tolerance (no
    /// `crystal_ppm` in the scenario).
    Drawn,
    /// The worst case for a chain, from the planner: the first half of the nodes at
    /// +tolerance, the rest at −tolerance (all fast for a pinned chain).
    WorstSplit,
    /// A linear gradient from +tolerance at node 0 to −tolerance at the last node.
    Gradient,
    /// Given errors, one per node, ppm.
    PerNode(Vec<f64>),
}

impl CrystalPattern {
    /// The scenario's `crystal_ppm` for `layout` within `tolerance_ppm` (`None` for
    /// [`CrystalPattern::Drawn`]).
    #[must_use]
    pub fn ppm(&self, layout: &Layout, tolerance_ppm: f64) -> Option<Vec<f64>> {
        let n = layout.node_count();
        match self {
            CrystalPattern::Drawn => None,
            CrystalPattern::WorstSplit => {
                let pinned = matches!(layout, Layout::Topology(Topology::PinnedChain { .. }));
                let mut out = vec![0.0; n];
                worst_chain_pattern(tolerance_ppm, pinned, &mut out).unwrap_or_else(|e| {
                    panic!("worst_chain_pattern refused a checked tolerance: {e}")
                });
                Some(out)
            }
            CrystalPattern::Gradient => Some(
                (0..n)
                    .map(|i| {
                        let t = if n > 1 {
                            i as f64 / (n - 1) as f64
                        } else {
                            0.0
                        };
                        tolerance_ppm * (1.0 - 2.0 * t)
                    })
                    .collect(),
            ),
            CrystalPattern::PerNode(v) => Some(v.clone()),
        }
    }
}

/// Crystal patterns for `nodes` nodes within `±tolerance_ppm`: drawn per run, the
/// worst-case split, the gradient, or arbitrary per-node errors. Shrinks toward drawn
/// errors, then the split, then the gradient.
pub fn crystal_patterns(nodes: usize, tolerance_ppm: f64) -> BoxedStrategy<CrystalPattern> {
    assert!(
        tolerance_ppm.is_finite() && (0.0..=1_000.0).contains(&tolerance_ppm),
        "crystal tolerance {tolerance_ppm} ppm is outside 0 to 1000 ppm"
    );
    prop_oneof![
        Just(CrystalPattern::Drawn),
        Just(CrystalPattern::WorstSplit),
        Just(CrystalPattern::Gradient),
        proptest::collection::vec(reals(Some(&(-tolerance_ppm..=tolerance_ppm)), 0.0), nodes)
            .prop_map(CrystalPattern::PerNode),
    ]
    .boxed()
}

/// Up to `count` reboots among `nodes` nodes, each going down within the first
/// `within_s` seconds for 1 to `max_down_updates` update intervals at `update_rate_hz`.
/// Shrinks toward fewer reboots, node 0, earlier and shorter.
pub fn reboots(
    nodes: usize,
    count: RangeInclusive<usize>,
    within_s: f64,
    update_rate_hz: f64,
    max_down_updates: u32,
) -> BoxedStrategy<Vec<Reboot>> {
    assert!(nodes >= 1 && max_down_updates >= 1 && within_s >= 0.0);
    let one = (
        0..nodes,
        reals(Some(&(0.0..=within_s)), 0.0),
        1..=max_down_updates,
    )
        .prop_map(move |(node, at_s, down)| Reboot {
            node,
            at_s,
            down_s: f64::from(down) / update_rate_hz,
        });
    proptest::collection::vec(one, count).boxed()
}

/// How the layout of a deployment varies.
#[derive(Clone, Debug, PartialEq)]
enum Layouts {
    Family(Family, RangeInclusive<usize>),
    Connected {
        nodes: RangeInclusive<usize>,
        max_degree: usize,
        extra_edges: usize,
    },
}

/// The deployments a property ranges over: a base scenario (usually with the flashed
/// constants, see [`super::Firmware::fix`]) and the axes that vary. Every axis left
/// alone keeps the base scenario's value.
#[derive(Clone, Debug)]
pub struct Deployments {
    base: Scenario,
    layouts: Vec<Layouts>,
    crystal_tolerance_ppm: Option<f64>,
    loss: Option<RangeInclusive<f64>>,
    latency_s: Option<RangeInclusive<f64>>,
    initial_spread_s: Option<RangeInclusive<f64>>,
    reboots: Option<(RangeInclusive<usize>, f64, u32)>,
}

/// The reals in `range`, or just `fixed` without one (proptest refuses an empty-width
/// float range).
fn reals(range: Option<&RangeInclusive<f64>>, fixed: f64) -> BoxedStrategy<f64> {
    match range {
        Some(r) if r.start() < r.end() => r.clone().boxed(),
        Some(r) => Just(*r.start()).boxed(),
        None => Just(fixed).boxed(),
    }
}

fn check_range(name: &str, r: &RangeInclusive<f64>, ok: impl Fn(f64) -> bool, valid: &str) {
    assert!(
        r.start() <= r.end() && ok(*r.start()) && ok(*r.end()),
        "{name} range {r:?} is invalid: {valid}"
    );
}

impl Deployments {
    /// Deployments that are all `base` until axes are added.
    #[must_use]
    pub fn new(base: Scenario) -> Deployments {
        Deployments {
            base,
            layouts: Vec::new(),
            crystal_tolerance_ppm: None,
            loss: None,
            latency_s: None,
            initial_spread_s: None,
            reboots: None,
        }
    }

    /// The base scenario.
    #[must_use]
    pub fn base(&self) -> &Scenario {
        &self.base
    }

    /// Add a topology family with node counts in `nodes` (see [`topology`]); several
    /// layout axes are drawn from alike, shrinking toward the first added.
    #[must_use]
    pub fn family(mut self, family: Family, nodes: RangeInclusive<usize>) -> Deployments {
        // Fail here, at the call, rather than inside the strategy.
        let _ = topology(family, nodes.clone());
        self.layouts.push(Layouts::Family(family, nodes));
        self
    }

    /// Add random connected graphs (see [`connected_edges`]).
    #[must_use]
    pub fn connected(
        mut self,
        nodes: RangeInclusive<usize>,
        max_degree: usize,
        extra_edges: usize,
    ) -> Deployments {
        let _ = connected_edges(nodes.clone(), max_degree, extra_edges);
        self.layouts.push(Layouts::Connected {
            nodes,
            max_degree,
            extra_edges,
        });
        self
    }

    /// Every crystal pattern within `±tolerance_ppm` (see [`crystal_patterns`]),
    /// including the worst-case split; the scenario's tolerance becomes `tolerance_ppm`.
    #[must_use]
    pub fn crystals_within(mut self, tolerance_ppm: f64) -> Deployments {
        let _ = crystal_patterns(1, tolerance_ppm);
        self.crystal_tolerance_ppm = Some(tolerance_ppm);
        self
    }

    /// Beacon loss fractions in `loss` (within `0 ≤ loss < 0.95`).
    #[must_use]
    pub fn loss(mut self, loss: RangeInclusive<f64>) -> Deployments {
        check_range(
            "loss",
            &loss,
            |v| (0.0..0.95).contains(&v),
            "0 to below 0.95",
        );
        self.loss = Some(loss);
        self
    }

    /// Link latencies in `latency_s`, seconds (below 31 update intervals).
    #[must_use]
    pub fn latency_s(mut self, latency_s: RangeInclusive<f64>) -> Deployments {
        let most = 31.0 / self.base.update_rate_hz;
        check_range(
            "latency",
            &latency_s,
            |v| v >= 0.0 && v < most,
            &format!("from 0 to below {most} s"),
        );
        self.latency_s = Some(latency_s);
        self
    }

    /// Start spreads in `spread_s`, seconds (above the lock tolerance, below the phase
    /// period).
    #[must_use]
    pub fn initial_spread_s(mut self, spread_s: RangeInclusive<f64>) -> Deployments {
        let (tol, period) = (self.base.lock_tolerance_s, self.base.phase_period_s);
        check_range(
            "start spread",
            &spread_s,
            |v| v > tol && v < period,
            &format!("above the lock tolerance {tol} s and below the phase period {period} s"),
        );
        self.initial_spread_s = Some(spread_s);
        self
    }

    /// `count` reboots per deployment, each going down within the first `within_s`
    /// seconds for 1 to `max_down_updates` update intervals (see [`reboots`]). Settling
    /// counts from power-up, so keep `within_s` well inside the budget.
    #[must_use]
    pub fn reboots(
        mut self,
        count: RangeInclusive<usize>,
        within_s: f64,
        max_down_updates: u32,
    ) -> Deployments {
        assert!(
            within_s.is_finite() && within_s >= 0.0 && max_down_updates >= 1,
            "reboots need a time window from 0 s and at least one update interval down"
        );
        self.reboots = Some((count, within_s, max_down_updates));
        self
    }

    /// The strategy of whole scenarios.
    pub fn strategy(&self) -> BoxedStrategy<Scenario> {
        let base = self.base.clone();
        let layouts: Vec<BoxedStrategy<Layout>> = self
            .layouts
            .iter()
            .map(|l| match l {
                Layouts::Family(f, n) => topology(*f, n.clone()),
                Layouts::Connected {
                    nodes,
                    max_degree,
                    extra_edges,
                } => connected_edges(nodes.clone(), *max_degree, *extra_edges),
            })
            .collect();
        let layout = if layouts.is_empty() {
            Just(base.layout.clone()).boxed()
        } else {
            proptest::strategy::Union::new(layouts).boxed()
        };
        let loss = reals(self.loss.as_ref(), base.loss_fraction);
        let latency = reals(self.latency_s.as_ref(), base.latency_s);
        let spread = reals(self.initial_spread_s.as_ref(), base.initial_spread_s);
        let tolerance = self.crystal_tolerance_ppm;
        let reboot_axis = self.reboots.clone();
        let rate = base.update_rate_hz;
        layout
            .prop_flat_map(move |layout| {
                let n = layout.node_count();
                let crystals = match tolerance {
                    Some(t) => crystal_patterns(n, t),
                    None => Just(CrystalPattern::Drawn).boxed(),
                };
                let outages = match &reboot_axis {
                    Some((count, within, down)) => reboots(n, count.clone(), *within, rate, *down),
                    None => Just(Vec::new()).boxed(),
                };
                (
                    Just(layout),
                    crystals,
                    loss.clone(),
                    latency.clone(),
                    spread.clone(),
                    outages,
                )
            })
            .prop_map(move |(layout, crystals, loss, latency, spread, outages)| {
                let mut s = base.clone();
                let layout = match layout {
                    Layout::EdgeList {
                        nodes,
                        edges,
                        weights,
                        references,
                        ..
                    } => Layout::EdgeList {
                        path: s.path.clone(),
                        nodes,
                        edges,
                        weights,
                        references,
                    },
                    other => other,
                };
                if let Some(t) = tolerance {
                    s.crystal_tolerance_ppm = t;
                    s.crystal_ppm = crystals.ppm(&layout, t);
                } else if s
                    .crystal_ppm
                    .as_ref()
                    .is_some_and(|p| p.len() != layout.node_count())
                {
                    // The base pattern does not fit another layout: draw per run.
                    s.crystal_ppm = None;
                }
                if s.reboots.iter().any(|r| r.node >= layout.node_count()) {
                    s.reboots.clear();
                }
                s.layout = layout;
                s.loss_fraction = loss;
                s.latency_s = latency;
                s.latency_max_s = latency;
                s.initial_spread_s = spread;
                s.reboots.extend(outages);
                s
            })
            .boxed()
    }
}
