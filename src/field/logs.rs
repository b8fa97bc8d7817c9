//! Reading telemetry logs: lines in, records out, every refused line counted with its
//! file and line; then each node's records merged onto one time axis.

use std::collections::{BTreeMap, HashMap};
use std::io::BufRead;
use std::path::{Path, PathBuf};

use crate::NodeId;
use crate::telemetry::{self, LINE_PREFIX, Neighbour};

/// Largest log file read, bytes (a day of a node at 10 updates a second with two
/// neighbours is about 100 MB of lines).
pub const MAX_LOG_BYTES: u64 = 1 << 30;

/// Refused lines kept with their message (all are counted).
pub const MAX_MALFORMED_KEPT: usize = 1000;

/// A log that could not be read at all.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LogError {
    /// The file.
    pub file: PathBuf,
    /// What went wrong.
    pub message: String,
}

impl std::fmt::Display for LogError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for LogError {}

/// A refused line.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Malformed {
    /// The file.
    pub file: PathBuf,
    /// Line number, from 1.
    pub line: usize,
    /// What is wrong (column and problem).
    pub message: String,
}

/// One record as read, with where it came from.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LogRecord {
    /// The record's head.
    pub head: telemetry::Head,
    /// Its neighbours.
    pub neighbours: Vec<Neighbour>,
    /// Index of the file in [`LogSet::files`].
    pub file: usize,
    /// Line number in that file, from 1.
    pub line: usize,
}

/// The records of any number of log files, in the order read.
#[derive(Clone, Debug, Default)]
pub struct LogSet {
    /// The files read, in order.
    pub files: Vec<PathBuf>,
    /// Every record read.
    pub records: Vec<LogRecord>,
    /// Lines read.
    pub lines: usize,
    /// Lines without the telemetry prefix ([`LINE_PREFIX`]): other output of the firmware,
    /// skipped.
    pub other_lines: usize,
    /// Lines with the prefix that were refused, counted.
    pub malformed_count: usize,
    /// The first [`MAX_MALFORMED_KEPT`] refused lines with their messages.
    pub malformed: Vec<Malformed>,
}

impl LogSet {
    /// No logs yet.
    #[must_use]
    pub fn new() -> LogSet {
        LogSet::default()
    }

    /// Read the log file `path`: a regular file of at most [`MAX_LOG_BYTES`], read a line
    /// at a time.
    ///
    /// # Errors
    /// A [`LogError`] for a file that is not a regular file, is larger than the limit, or
    /// cannot be read. Malformed lines are not errors: they are counted.
    pub fn load(&mut self, path: &Path) -> Result<(), LogError> {
        let file = crate::scenario::open_regular(path, MAX_LOG_BYTES, "log file").map_err(|e| {
            LogError {
                file: path.to_path_buf(),
                message: e.message,
            }
        })?;
        let reader = std::io::BufReader::new(std::io::Read::take(file, MAX_LOG_BYTES + 1));
        self.read(path, reader)
    }

    /// Read a log from `reader`, reported as file `name`.
    ///
    /// # Errors
    /// A [`LogError`] when reading fails or passes [`MAX_LOG_BYTES`].
    pub fn read(&mut self, name: &Path, mut reader: impl BufRead) -> Result<(), LogError> {
        let file = self.files.len();
        self.files.push(name.to_path_buf());
        let mut buf = Vec::new();
        let mut total = 0u64;
        let mut line_no = 0usize;
        loop {
            buf.clear();
            let got = reader.read_until(b'\n', &mut buf).map_err(|e| LogError {
                file: name.to_path_buf(),
                message: format!("cannot read the log file {}: {e}", name.display()),
            })?;
            if got == 0 {
                break;
            }
            total += got as u64;
            if total > MAX_LOG_BYTES {
                return Err(LogError {
                    file: name.to_path_buf(),
                    message: format!(
                        "the log file {} is larger than the {MAX_LOG_BYTES}-byte limit for a log file",
                        name.display()
                    ),
                });
            }
            line_no += 1;
            match std::str::from_utf8(&buf) {
                Ok(text) => self.line(file, line_no, text),
                Err(_) => self.refuse(file, line_no, "not UTF-8 text".to_owned()),
            }
        }
        Ok(())
    }

    /// Read log text held in memory, reported as file `name`.
    pub fn add_text(&mut self, name: &Path, text: &str) {
        let file = self.files.len();
        self.files.push(name.to_path_buf());
        for (i, line) in text.lines().enumerate() {
            self.line(file, i + 1, line);
        }
    }

    fn refuse(&mut self, file: usize, line: usize, message: String) {
        self.malformed_count += 1;
        if self.malformed.len() < MAX_MALFORMED_KEPT {
            self.malformed.push(Malformed {
                file: self.files.get(file).cloned().unwrap_or_default(),
                line,
                message,
            });
        }
    }

    /// One line: a telemetry line anywhere after a logger's own prefix (a timestamp, a
    /// level), or another line.
    fn line(&mut self, file: usize, line_no: usize, text: &str) {
        self.lines += 1;
        let text = text.trim_end();
        // The prefix as a word of its own: at the start, or after a space.
        let at = if text.starts_with(LINE_PREFIX) {
            Some(0)
        } else {
            text.find(&format!(" {LINE_PREFIX} ")).map(|i| i + 1)
        };
        let Some(at) = at else {
            self.other_lines += 1;
            return;
        };
        let body = &text[at..];
        match telemetry::parse_line(body) {
            Ok(r) => self.records.push(LogRecord {
                head: r.head,
                neighbours: r.neighbours.to_vec(),
                file,
                line: line_no,
            }),
            Err(e) => {
                let e = telemetry::LineError {
                    column: e.column + at,
                    problem: e.problem,
                };
                self.refuse(file, line_no, e.to_string());
            }
        }
    }
}

/// What merging a node's records found.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct MergeCounts {
    /// Records kept.
    pub records: usize,
    /// Records that repeat an earlier one field for field (a log captured twice, a line
    /// repeated), dropped.
    pub duplicates: usize,
    /// Records with an update count already taken by a different record in the same
    /// power-up, dropped (the first is kept).
    pub conflicts: usize,
    /// Update counts missing between records (lost log lines).
    pub missing: u64,
    /// Power-ups after the first: the update count went back.
    pub reboots: usize,
    /// Reboots placed on the time axis by the node's neighbours' logs (the rest follow
    /// the previous power-up directly).
    pub reboots_aligned: usize,
    /// Update-counter wraps (2³² updates).
    pub wraps: usize,
}

/// One node's records on the common time axis.
#[derive(Clone, Debug, Default)]
pub struct NodeSeries {
    /// Time (update intervals on the common axis) → index into [`LogSet::records`].
    pub at: BTreeMap<i64, usize>,
    /// What the merge found.
    pub counts: MergeCounts,
    /// Power-up segments: (first time, last time) on the axis.
    pub segments: Vec<(i64, i64)>,
}

/// A node's records cut into power-up segments, each with its unwrapped counts.
struct Segments {
    /// Per segment: (unwrapped count, record index), ascending.
    segs: Vec<Vec<(i64, usize)>>,
    counts: MergeCounts,
}

fn split<'a>(logs: &LogSet, idx: impl Iterator<Item = &'a usize>) -> Segments {
    let mut counts = MergeCounts::default();
    let mut segs: Vec<Vec<(i64, usize)>> = Vec::new();
    let mut seen: HashMap<u32, Vec<usize>> = HashMap::new();
    let mut last: Option<(u32, i64)> = None;
    for &i in idx {
        let r = &logs.records[i];
        let count = r.head.update;
        // Field-for-field repeats of an earlier record anywhere in the node's logs.
        let same = |j: &usize| {
            let o = &logs.records[*j];
            o.head == r.head && o.neighbours == r.neighbours
        };
        if seen.get(&count).is_some_and(|v| v.iter().any(same)) {
            counts.duplicates += 1;
            continue;
        }
        let unwrapped = match last {
            None => {
                segs.push(Vec::new());
                i64::from(count)
            }
            Some((prev, prev_u)) => {
                let d = count.wrapping_sub(prev);
                if d == 0 {
                    counts.conflicts += 1;
                    continue;
                } else if d < 1 << 31 {
                    counts.missing += u64::from(d - 1);
                    if count < prev {
                        counts.wraps += 1;
                    }
                    prev_u + i64::from(d)
                } else {
                    counts.reboots += 1;
                    segs.push(Vec::new());
                    i64::from(count)
                }
            }
        };
        seen.entry(count).or_default().push(i);
        last = Some((count, unwrapped));
        if let Some(s) = segs.last_mut() {
            s.push((unwrapped, i));
        }
    }
    counts.records = segs.iter().map(Vec::len).sum();
    Segments { segs, counts }
}

/// Merge every node's records onto one time axis of update intervals.
///
/// Each node's records are taken in the order read (files in the order given). The
/// update count is unwrapped across its 2³² wrap (a step forward by less than 2³¹ is
/// progress, missing counts are a gap); a count that goes back starts a new power-up.
/// The first power-up of every node counts from the common start (nodes powered up
/// together, as the simulator and a bench do): its update count is its time. A later
/// power-up is placed by its neighbours' logs: its first update one interval before the
/// first record of any neighbour that holds it fresh again (age within
/// `fresh_age_ticks`) after its previous power-up ended; without such a record it
/// follows its previous power-up directly.
#[must_use]
pub fn merge(logs: &LogSet, fresh_age_ticks: i64) -> BTreeMap<NodeId, NodeSeries> {
    let mut by_node: BTreeMap<NodeId, Vec<usize>> = BTreeMap::new();
    let mut order: Vec<usize> = (0..logs.records.len()).collect();
    // Files in the order given, lines in file order.
    order.sort_by_key(|&i| (logs.records[i].file, logs.records[i].line));
    for i in order {
        by_node
            .entry(logs.records[i].head.node)
            .or_default()
            .push(i);
    }
    let split: BTreeMap<NodeId, Segments> = by_node
        .iter()
        .map(|(&id, idx)| (id, split(logs, idx.iter())))
        .collect();
    let mut out: BTreeMap<NodeId, NodeSeries> = BTreeMap::new();
    // First power-ups: the count is the time.
    for (&id, s) in &split {
        let mut series = NodeSeries {
            counts: s.counts.clone(),
            ..NodeSeries::default()
        };
        if let Some(first) = s.segs.first() {
            place(&mut series, first, 0);
        }
        out.insert(id, series);
    }
    // Later power-ups, in order of their node's previous end, placed by neighbours.
    let mut pending: Vec<(NodeId, usize)> = split
        .iter()
        .flat_map(|(&id, s)| (1..s.segs.len()).map(move |k| (id, k)))
        .collect();
    pending.sort_by_key(|&(id, k)| (k, id));
    for (id, k) in pending {
        let seg = &split[&id].segs[k];
        let Some(&(first_u, _)) = seg.first() else {
            continue;
        };
        let prev_end = out[&id].segments.last().map_or(0, |s| s.1);
        let heard_again = out
            .iter()
            .filter(|(other, _)| **other != id)
            .filter_map(|(_, series)| {
                series.at.range(prev_end + 2..).find_map(|(&t, &i)| {
                    logs.records[i]
                        .neighbours
                        .iter()
                        .any(|n| n.id == id && i64::from(n.age_ticks) <= fresh_age_ticks)
                        .then_some(t)
                })
            })
            .min();
        let series = out
            .get_mut(&id)
            .expect("every node with records has a series");
        let start = match heard_again {
            Some(t) => {
                series.counts.reboots_aligned += 1;
                (t - 1).max(prev_end + 1)
            }
            None => prev_end + 1,
        };
        place(series, seg, start - first_u);
    }
    out
}

/// Put segment `seg` on the axis at `offset`; a time already taken keeps its record.
fn place(series: &mut NodeSeries, seg: &[(i64, usize)], offset: i64) {
    let (Some(&(a, _)), Some(&(b, _))) = (seg.first(), seg.last()) else {
        return;
    };
    for &(u, i) in seg {
        match series.at.entry(u + offset) {
            std::collections::btree_map::Entry::Vacant(v) => {
                v.insert(i);
            }
            std::collections::btree_map::Entry::Occupied(_) => series.counts.conflicts += 1,
        }
    }
    series.segments.push((a + offset, b + offset));
}
