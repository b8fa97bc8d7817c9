//! Telemetry: what a node did at one update, as a versioned binary record and as one
//! line of text (feature `telemetry`, `no_std`, no heap, no panics).
//!
//! A node that logs one [`Record`] per update lets the desk compare the running network
//! with its prediction (`entrain field`; the analysis is the host module `field`). A record
//! holds the node's id, its update count, the correction it applied, its rate trim, and
//! per neighbour in its table the phase difference it measured and the age of the
//! observation behind it.
//!
//! # Binary record, version 1
//!
//! Little-endian; `n` neighbours; `22 + 10·n` bytes ([`record_len`]), at most
//! [`MAX_RECORD_LEN`].
//!
//! | offset | size | field |
//! |---:|---:|---|
//! | 0 | 1 | tag `0xE7` ([`TAG`]) |
//! | 1 | 1 | version, `1` ([`VERSION`]) |
//! | 2 | 2 | node id (`u16`) |
//! | 4 | 4 | update count since power-up (`u32`, wraps) |
//! | 8 | 4 | correction applied, counts of 2⁻³² turn (`i32`) |
//! | 12 | 4 | rate trim in effect after the update, ppb (`i32`) |
//! | 16 | 1 | flags: bit 0 the step was slew-limited; other bits zero |
//! | 17 | 1 | `n`, neighbours in the table |
//! | 18 + 10·k | 2 | neighbour k's id (`u16`) |
//! | 20 + 10·k | 4 | neighbour k's phase minus this node's at the update, before the step, counts (`i32`) |
//! | 24 + 10·k | 4 | age of neighbour k's observation at the update, this node's timer ticks (`i32`) |
//! | 18 + 10·n | 4 | CRC-32C (Castagnoli) of bytes `0 .. 18 + 10·n` |
//!
//! A reader of version 1 refuses any other tag or version, unknown flag bits, fewer than
//! `22 + 10·n` bytes, and a wrong check value; records may follow each other back to
//! back ([`decode`] returns each one's length).
//!
//! # Text line, version 1
//!
//! The same fields as decimal numbers separated by single spaces, then the record's
//! CRC-32C as eight lower-case hex digits, so a line garbled on a serial link is refused
//! rather than believed:
//!
//! ```text
//! ET1 <node> <update> <correction> <trim_ppb> <flags> <n> <id>:<diff>:<age> … <crc>
//! ET1 3 1042 -120 -15320 0 2 2:-4521:100000 4:883:99998 26fb1afa
//! ```
//!
//! A line is at most [`MAX_LINE_LEN`] bytes plus the line end; with two neighbours it is
//! under 130, short enough for a UART console or a `defmt` log.
//!
//! ```
//! use entrain::telemetry::{write_line, parse_line, encode, decode};
//! use entrain::{Config, Node, Observation, Phase};
//!
//! let config = Config::builder(1_000_000, 100_000).build()?;
//! let mut node: Node<2> = Node::new(config, Phase::ZERO, 0);
//! node.observe(Observation { from: 7, phase: Phase::from_turns(0.01), rx_ticks: 0, delay_ticks: 50 })?;
//! let report = node.update(0);
//!
//! // On the node: into a byte buffer, or as one line of text.
//! let mut buf = [0u8; 64];
//! let len = encode(&mut buf, 3, 41, &report, &node)?;
//! let mut line: heapless::String<128> = heapless::String::new();
//! write_line(&mut line, 3, 41, &report, &node)?;
//!
//! // On the desk: both read back to the same record.
//! let (from_bytes, used) = decode(&buf[..len])?;
//! assert_eq!(used, len);
//! assert_eq!(parse_line(&line)?, from_bytes);
//! assert_eq!(from_bytes.neighbours[0].id, 7);
//! # Ok::<(), Box<dyn core::error::Error>>(())
//! ```

mod record;
mod text;

pub use record::{
    DecodeError, EncodeError, Head, MAX_RECORD_LEN, Neighbour, Record, TAG, VERSION, decode,
    encode, encode_parts, record_len,
};
pub use text::{
    LINE_PREFIX, LineError, LineProblem, MAX_LINE_LEN, parse_line, write_line, write_line_parts,
};
