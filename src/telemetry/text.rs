//! The one-line text form of a record.

use super::record::{Head, Neighbour, Record, check_value, neighbours_of};
use crate::{MAX_NEIGHBOURS, Node, NodeId, UpdateReport};
use core::fmt::{self, Write};

/// The first word of every telemetry line (version 1).
pub const LINE_PREFIX: &str = "ET1";

/// Longest line (255 neighbours, every number at its widest), bytes, without the line
/// end.
pub const MAX_LINE_LEN: usize = 50 + 30 * MAX_NEIGHBOURS + 9;

/// Write the line of `head` and `neighbours` (no line end).
///
/// # Errors
/// The writer's error; [`fmt::Error`] too for more than [`MAX_NEIGHBOURS`] neighbours.
pub fn write_line_parts<W, I>(w: &mut W, head: &Head, neighbours: I) -> fmt::Result
where
    W: Write,
    I: IntoIterator<Item = Neighbour>,
    I::IntoIter: Clone,
{
    let neighbours = neighbours.into_iter();
    let n = neighbours.clone().count();
    let Ok(n) = u8::try_from(n) else {
        return Err(fmt::Error);
    };
    let crc = check_value(head, n, neighbours.clone());
    write!(
        w,
        "{LINE_PREFIX} {} {} {} {} {} {}",
        head.node,
        head.update,
        head.correction,
        head.trim_ppb,
        u8::from(head.slew_limited),
        n
    )?;
    for nb in neighbours {
        write!(w, " {}:{}:{}", nb.id, nb.diff, nb.age_ticks)?;
    }
    write!(w, " {crc:08x}")
}

/// Write the line of `node`'s update number `update` (the firmware's own count), which
/// returned `report`; call right after [`Node::update`]. No line end is written.
///
/// # Errors
/// The writer's error (for example a full `heapless::String`).
pub fn write_line<W: Write, const N: usize>(
    w: &mut W,
    id: NodeId,
    update: u32,
    report: &UpdateReport,
    node: &Node<N>,
) -> fmt::Result {
    let head = Head::after_update(id, update, report, node);
    write_line_parts(w, &head, neighbours_of(node, report.correction))
}

/// What is wrong with a line.
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LineProblem {
    /// The line does not start with [`LINE_PREFIX`] (not a telemetry line).
    NotTelemetry,
    /// A field is missing (the line ends early).
    Missing(&'static str),
    /// A field is not a number in its range.
    Bad(&'static str),
    /// Words after the check value.
    Extra,
    /// The check value does not match the fields.
    Check,
    /// Longer than [`MAX_LINE_LEN`].
    TooLong,
}

/// Why a line was refused: the problem and the 1-based column (byte) where it is.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LineError {
    /// Column of the offending word, counted in bytes from 1.
    pub column: usize,
    /// What is wrong.
    pub problem: LineProblem,
}

impl fmt::Display for LineError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "column {}: ", self.column)?;
        match self.problem {
            LineProblem::NotTelemetry => {
                write!(f, "not a telemetry line (no {LINE_PREFIX} prefix)")
            }
            LineProblem::Missing(what) => write!(f, "{what} missing"),
            LineProblem::Bad(what) => write!(f, "{what} is not a number in its range"),
            LineProblem::Extra => write!(f, "words after the check value"),
            LineProblem::Check => write!(f, "check value does not match the fields"),
            LineProblem::TooLong => write!(f, "longer than {MAX_LINE_LEN} bytes"),
        }
    }
}

impl core::error::Error for LineError {}

/// Words of a line with their 1-based columns.
struct Words<'a> {
    line: &'a str,
    at: usize,
}

impl<'a> Iterator for Words<'a> {
    type Item = (usize, &'a str);
    fn next(&mut self) -> Option<(usize, &'a str)> {
        let rest = self.line.get(self.at..)?;
        let skip = rest.len() - rest.trim_start().len();
        let start = self.at + skip;
        let word_rest = self.line.get(start..)?;
        if word_rest.is_empty() {
            self.at = self.line.len();
            return None;
        }
        let len = word_rest
            .find(|c: char| c.is_ascii_whitespace())
            .unwrap_or(word_rest.len());
        self.at = start + len;
        Some((start + 1, word_rest.get(..len)?))
    }
}

/// Read one line (without or with its line end) back into a record.
///
/// # Errors
/// A [`LineError`] naming the column and the problem: not a telemetry line, a missing
/// or malformed field, words after the check value, a wrong check value, or a line
/// longer than [`MAX_LINE_LEN`].
pub fn parse_line(line: &str) -> Result<Record, LineError> {
    let line = line.trim_end();
    if line.len() > MAX_LINE_LEN {
        return Err(LineError {
            column: MAX_LINE_LEN + 1,
            problem: LineProblem::TooLong,
        });
    }
    let mut words = Words { line, at: 0 };
    let end = line.len() + 1;
    match words.next() {
        Some((_, LINE_PREFIX)) => {}
        Some((column, _)) => {
            return Err(LineError {
                column,
                problem: LineProblem::NotTelemetry,
            });
        }
        None => {
            return Err(LineError {
                column: 1,
                problem: LineProblem::NotTelemetry,
            });
        }
    }
    fn field<'a, T: core::str::FromStr>(
        words: &mut Words<'a>,
        end: usize,
        what: &'static str,
    ) -> Result<(usize, T), LineError> {
        let (column, word) = words.next().ok_or(LineError {
            column: end,
            problem: LineProblem::Missing(what),
        })?;
        word.parse().map(|v| (column, v)).map_err(|_| LineError {
            column,
            problem: LineProblem::Bad(what),
        })
    }
    let (_, node) = field::<NodeId>(&mut words, end, "node id")?;
    let (_, update) = field::<u32>(&mut words, end, "update count")?;
    let (_, correction) = field::<i32>(&mut words, end, "correction")?;
    let (_, trim_ppb) = field::<i32>(&mut words, end, "trim")?;
    let (flags_column, flags) = field::<u8>(&mut words, end, "flags")?;
    let slew_limited = match flags {
        0 => false,
        1 => true,
        _ => {
            return Err(LineError {
                column: flags_column,
                problem: LineProblem::Bad("flags"),
            });
        }
    };
    let (_, n) = field::<u8>(&mut words, end, "neighbour count")?;
    let head = Head {
        node,
        update,
        correction,
        trim_ppb,
        slew_limited,
    };
    let mut neighbours = heapless::Vec::<Neighbour, MAX_NEIGHBOURS>::new();
    for _ in 0..n {
        let (column, word) = words.next().ok_or(LineError {
            column: end,
            problem: LineProblem::Missing("neighbour"),
        })?;
        let bad = LineError {
            column,
            problem: LineProblem::Bad("neighbour"),
        };
        let mut parts = word.split(':');
        let (Some(id), Some(diff), Some(age), None) =
            (parts.next(), parts.next(), parts.next(), parts.next())
        else {
            return Err(bad);
        };
        let (Ok(id), Ok(diff), Ok(age_ticks)) = (id.parse(), diff.parse(), age.parse()) else {
            return Err(bad);
        };
        // n ≤ 255 = the capacity.
        let _ = neighbours.push(Neighbour {
            id,
            diff,
            age_ticks,
        });
    }
    let (check_column, check) = words.next().ok_or(LineError {
        column: end,
        problem: LineProblem::Missing("check value"),
    })?;
    let check_ok = check.len() == 8 && check.bytes().all(|b| b.is_ascii_hexdigit());
    let check = match u32::from_str_radix(check, 16) {
        Ok(c) if check_ok => c,
        _ => {
            return Err(LineError {
                column: check_column,
                problem: LineProblem::Bad("check value"),
            });
        }
    };
    if let Some((column, _)) = words.next() {
        return Err(LineError {
            column,
            problem: LineProblem::Extra,
        });
    }
    if check_value(&head, n, neighbours.iter().copied()) != check {
        return Err(LineError {
            column: check_column,
            problem: LineProblem::Check,
        });
    }
    Ok(Record { head, neighbours })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn longest_line_fits_the_stated_limit() {
        let nb = Neighbour {
            id: u16::MAX,
            diff: i32::MIN,
            age_ticks: i32::MIN,
        };
        let head = Head {
            node: u16::MAX,
            update: u32::MAX,
            correction: i32::MIN,
            trim_ppb: i32::MIN,
            slew_limited: true,
        };
        let mut s = heapless::String::<8192>::new();
        write_line_parts(&mut s, &head, [nb; MAX_NEIGHBOURS]).unwrap();
        assert_eq!(s.len(), MAX_LINE_LEN);
        assert!(parse_line(&s).is_ok());
    }
}
