//! The time series of one run, for plotting.

use std::io;

use super::network::Sample;
use super::settle::TURN;
use crate::Phase;

/// The sampled error of one run over its whole horizon (one sample per nominal update
/// interval), its settling instant and first entry and, if asked for, every node's phase.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Trace {
    /// Nominal update interval, seconds (the time step between samples).
    pub update_period_s: f64,
    /// Largest pairwise wrapped phase difference across the network per sample, turns.
    pub network_turns: Vec<f64>,
    /// Largest phase difference across a link per sample, turns.
    pub link_turns: Vec<f64>,
    /// Whether each sample was inside the tolerance band (both errors within the
    /// tolerance, every node up).
    pub inside: Vec<bool>,
    /// The run's settling instant, sample index (`None`: never settled).
    pub settle_updates: Option<u64>,
    /// The run's first entry into the band, sample index (`None`: never inside).
    pub first_entry_updates: Option<u64>,
    /// With [`Trace::with_phases`]: every node's phase per sample, turns in `[0, 1)`,
    /// row-major (`phases_turns[k·nodes + i]`), NaN for a node that is down.
    pub phases_turns: Vec<f64>,
    /// Nodes per row of [`Trace::phases_turns`] (0 when phases are not recorded).
    pub nodes: usize,
    keep_phases: bool,
}

impl Trace {
    /// A trace of the error only.
    #[must_use]
    pub fn new(update_period_s: f64) -> Trace {
        Trace {
            update_period_s,
            ..Trace::default()
        }
    }

    /// A trace of the error and of every node's phase.
    #[must_use]
    pub fn with_phases(update_period_s: f64) -> Trace {
        Trace {
            update_period_s,
            keep_phases: true,
            ..Trace::default()
        }
    }

    /// Number of samples.
    #[must_use]
    pub fn len(&self) -> usize {
        self.network_turns.len()
    }

    /// True when nothing was recorded.
    #[must_use]
    pub fn is_empty(&self) -> bool {
        self.network_turns.is_empty()
    }

    /// Record one sample and the phases then.
    pub fn record(&mut self, sample: &Sample, phases: &[Option<Phase>]) {
        self.network_turns
            .push(f64::from(sample.network_counts) / TURN);
        self.link_turns.push(f64::from(sample.link_counts) / TURN);
        self.inside.push(sample.inside);
        if self.keep_phases {
            self.nodes = phases.len();
            self.phases_turns.extend(
                phases
                    .iter()
                    .map(|p| p.map_or(f64::NAN, |p| f64::from(p.counts()) / TURN)),
            );
        }
    }

    /// Whether sample `k` is at or after the settling instant (false throughout for a
    /// run that never settled).
    #[must_use]
    pub fn settled_at(&self, k: usize) -> bool {
        self.settle_updates
            .is_some_and(|s| u64::try_from(k).is_ok_and(|k| k >= s))
    }

    /// Write the trace as CSV: a header line, then one line per sample with the time in
    /// seconds (of the sample index, as the errors), the network and link errors in
    /// turns, the inside-the-band flag (0/1), the settled flag (1 from the settling
    /// instant on) and, if recorded, one phase column per node (`phase_0`, `phase_1`, …;
    /// empty when down).
    ///
    /// # Errors
    /// Any error of the writer.
    pub fn write_csv(&self, out: &mut impl io::Write) -> io::Result<()> {
        write!(out, "time_s,network_turns,link_turns,inside,settled")?;
        for i in 0..self.nodes {
            write!(out, ",phase_{i}")?;
        }
        writeln!(out)?;
        for (k, ((net, link), inside)) in self
            .network_turns
            .iter()
            .zip(&self.link_turns)
            .zip(&self.inside)
            .enumerate()
        {
            write!(
                out,
                "{},{net:.9},{link:.9},{},{}",
                k as f64 * self.update_period_s,
                u8::from(*inside),
                u8::from(self.settled_at(k))
            )?;
            let row = self
                .phases_turns
                .get(k * self.nodes..(k + 1) * self.nodes)
                .unwrap_or(&[]);
            for p in row {
                if p.is_nan() {
                    write!(out, ",")?;
                } else {
                    write!(out, ",{p:.9}")?;
                }
            }
            writeln!(out)?;
        }
        Ok(())
    }
}
