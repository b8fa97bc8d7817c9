//! Telemetry of a simulated run: every update of every node, encoded by the node-side
//! encoder ([`crate::telemetry::encode`]) exactly as a firmware would log it.

use crate::telemetry::{self, MAX_RECORD_LEN};
use crate::{Node, UpdateReport};

/// Per node, the binary records of its updates in order, and its update count since its
/// last power-up (a reboot restarts the count at 0, as a firmware's counter would).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Recorder {
    counts: Vec<u32>,
    logs: Vec<Vec<u8>>,
}

impl Recorder {
    /// A recorder for `nodes` nodes.
    #[must_use]
    pub fn new(nodes: usize) -> Recorder {
        Recorder {
            counts: vec![0; nodes],
            logs: vec![Vec::new(); nodes],
        }
    }

    /// Record node `i`'s update that returned `report`.
    pub(crate) fn record<const N: usize>(
        &mut self,
        i: usize,
        report: &UpdateReport,
        node: &Node<N>,
    ) {
        let (Some(count), Some(log)) = (self.counts.get_mut(i), self.logs.get_mut(i)) else {
            return;
        };
        let mut buf = [0u8; MAX_RECORD_LEN];
        // Node ids in the simulator are u16 (`sim::MAX_SIM_NODES`); the buffer holds the
        // longest record.
        let len = telemetry::encode(&mut buf, i as u16, *count, report, node)
            .expect("a buffer of MAX_RECORD_LEN holds any record");
        log.extend_from_slice(&buf[..len]);
        *count = count.wrapping_add(1);
    }

    /// Node `i` powered up again: its count restarts.
    pub(crate) fn reboot(&mut self, i: usize) {
        if let Some(c) = self.counts.get_mut(i) {
            *c = 0;
        }
    }

    /// Per node, its records back to back (binary form, version 1).
    #[must_use]
    pub fn into_logs(self) -> Vec<Vec<u8>> {
        self.logs
    }
}
