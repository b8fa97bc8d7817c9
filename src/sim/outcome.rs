//! What one run produced.

use super::settle::Settle;

/// Counters of one run.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct RunStats {
    /// Calls of [`crate::Node::update`].
    pub node_updates: u64,
    /// Neighbour terms summed by those updates (the `used` of each update report).
    pub neighbour_updates: u64,
    /// Updates whose step the slew limit cut.
    pub slew_limited: u64,
    /// Beacons sent to live neighbours.
    pub beacons_sent: u64,
    /// Beacons lost on the way.
    pub beacons_lost: u64,
    /// Observations a full neighbour table rejected (0 unless the capacity is too small).
    pub table_full: u64,
    /// Nodes that went down.
    pub reboots: u64,
}

/// The result of one run (always run to its horizon).
#[derive(Clone, Debug, PartialEq)]
pub struct RunOutcome {
    /// The settling instant and steady-window figures (after the last reboot, if any), or
    /// `None` if the run never settled: its last exit from the tolerance band fell in the
    /// final fifth of the horizon (see [`crate::sim::SettleTracker`]).
    pub settle: Option<Settle>,
    /// First entry: the first sample within the band since power-up, nominal update
    /// intervals from the start, whether or not the run settled (`None`: never inside).
    pub first_entry_updates: Option<u64>,
    /// The steady window's largest pairwise differences across the network, counts
    /// (2^32 a turn), one every [`RunOutcome::steady_stride`] samples: from
    /// `max(settling instant, horizon/2)` to the end for a settled run, the final fifth
    /// of the horizon for one that never settled. Pooled over runs for the noise floor.
    pub steady_counts: Vec<u32>,
    /// Samples between two entries of [`RunOutcome::steady_counts`] (see
    /// [`crate::sim::steady_stride`]).
    pub steady_stride: u64,
    /// Samples taken (one per nominal update interval; the horizon).
    pub samples: u64,
    /// Largest pairwise phase difference across the network at the last sample, turns.
    pub final_network_turns: f64,
    /// Largest phase difference across a link at the last sample, turns.
    pub final_link_turns: f64,
    /// Rings only: the winding number at the last sample (0 locked; `q ≠ 0` a
    /// `q`-twisted state). `None` for other topologies or with a node down.
    pub winding: Option<i64>,
    /// When the last rebooted node rejoined, nominal update intervals from the start.
    pub last_rejoin_updates: Option<u64>,
    /// The network's common rate at the end: the mean over the adjusting nodes (not a
    /// reference) of crystal error plus rate trim, ppm from nominal. With the PI law the
    /// trims cancel the crystals' differences; this is what is left in common.
    pub common_rate_ppm: f64,
    /// Adjusting nodes whose rate trim ended at its limit.
    pub trims_at_limit: usize,
    /// PI law only (empty for the P law): each adjusting node's |trim − ideal trim| at
    /// the end, ppm, in node order, where the ideal trim brings its crystal to the
    /// network's rate: the mean of the adjusting nodes' crystals, or a pinned chain's
    /// reference (nominal). `(1 + ω)/(1 + e_i) − 1`, ω that rate and e_i the crystal
    /// error.
    pub trim_errors_ppm: Vec<f64>,
    /// PI law only (empty for the P law): the same errors with the common rate taken
    /// out, `|(t_i − t̄) − (ideal_i − ideal̄)|` in ppm, node order, `t̄` the mean trim
    /// over the adjusting nodes: how far each trim is from cancelling its crystal's
    /// offset from the others', which is what a bench that compares trims relative to
    /// their mean sees. The common rate, which the trim leak holds only loosely, is in
    /// [`Self::trim_errors_ppm`] and [`Self::common_rate_ppm`], not here.
    pub trim_spread_errors_ppm: Vec<f64>,
    /// Counters.
    pub stats: RunStats,
}

impl RunOutcome {
    /// True for a ring that ended wound up (winding number not 0).
    #[must_use]
    pub fn twisted(&self) -> bool {
        self.winding.is_some_and(|q| q != 0)
    }
}
