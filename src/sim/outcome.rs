//! What one run produced.

use super::lock::Lock;

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

/// The result of one run.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RunOutcome {
    /// The confirmed lock (after the last reboot, if any), or `None` if the run never
    /// locked within the horizon.
    pub lock: Option<Lock>,
    /// Samples taken (one per nominal update interval).
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
