//! A line of text built in a fixed buffer, so firmware can format a whole line (with
//! `write!`) and hand it to the console in one write.

use core::fmt;

/// Up to `N` bytes of UTF-8 text, no heap. A write that does not fit is refused whole
/// (the text already in the buffer stays), so the buffer never holds a cut-off piece.
#[derive(Clone, Debug)]
pub struct LineBuf<const N: usize> {
    bytes: [u8; N],
    len: usize,
}

impl<const N: usize> LineBuf<N> {
    /// An empty line.
    pub const fn new() -> Self {
        LineBuf {
            bytes: [0; N],
            len: 0,
        }
    }

    /// Forget the text.
    pub fn clear(&mut self) {
        self.len = 0;
    }

    /// The text's length, bytes.
    pub const fn len(&self) -> usize {
        self.len
    }

    /// No text.
    pub const fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// The text as bytes.
    pub fn as_bytes(&self) -> &[u8] {
        self.bytes.get(..self.len).unwrap_or(&[])
    }

    /// The text.
    pub fn as_str(&self) -> &str {
        // Only whole `&str`s are ever copied in, so the bytes are UTF-8.
        core::str::from_utf8(self.as_bytes()).unwrap_or("")
    }
}

impl<const N: usize> Default for LineBuf<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> fmt::Write for LineBuf<N> {
    fn write_str(&mut self, s: &str) -> fmt::Result {
        let end = self.len.checked_add(s.len()).ok_or(fmt::Error)?;
        let room = self.bytes.get_mut(self.len..end).ok_or(fmt::Error)?;
        room.copy_from_slice(s.as_bytes());
        self.len = end;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    extern crate std;

    use super::LineBuf;
    use core::fmt::Write;
    use std::string::String;

    #[test]
    fn holds_what_was_written() {
        let mut line: LineBuf<16> = LineBuf::new();
        assert!(line.is_empty());
        write!(line, "ab {} {:+}", 12, -3).unwrap();
        assert_eq!(line.as_str(), "ab 12 -3");
        assert_eq!(line.as_bytes(), b"ab 12 -3");
        assert_eq!(line.len(), 8);
        line.clear();
        assert!(line.is_empty());
        assert_eq!(line.as_str(), "");
    }

    #[test]
    fn full_buffer_refuses_the_whole_piece() {
        let mut line: LineBuf<5> = LineBuf::new();
        line.write_str("abc").unwrap();
        assert!(line.write_str("def").is_err());
        assert_eq!(line.as_str(), "abc");
        // Exactly filling it is fine.
        line.write_str("de").unwrap();
        assert_eq!(line.as_str(), "abcde");
        assert!(line.write_str("x").is_err());
        // A multi-byte character is refused whole, never split.
        let mut small: LineBuf<2> = LineBuf::new();
        small.write_str("a").unwrap();
        assert!(small.write_str("é").is_err());
        assert_eq!(small.as_str(), "a");
    }

    /// The chain firmware's use: a telemetry line of the crate's encoder, checked
    /// against the same line written into a `String` and against the crate's parser.
    #[cfg(feature = "chain")]
    #[test]
    fn telemetry_line_round_trips() {
        use entrain::telemetry::{MAX_LINE_LEN, parse_line, write_line};
        use entrain::{Config, Node, Observation, Phase};

        let config = Config::builder(1_000_000, 100_000).build().unwrap();
        let mut node: Node<2> = Node::new(config, Phase::ZERO, 0);
        node.observe(Observation {
            from: 2,
            phase: Phase::from_turns(-0.02),
            rx_ticks: 40_000,
            delay_ticks: 0,
        })
        .unwrap();
        node.observe(Observation {
            from: 4,
            phase: Phase::from_turns(0.01),
            rx_ticks: 60_000,
            delay_ticks: 0,
        })
        .unwrap();
        let report = node.update(100_000);
        let mut line: LineBuf<{ MAX_LINE_LEN }> = LineBuf::new();
        write_line(&mut line, 3, 7, &report, &node).unwrap();
        let mut expected = String::new();
        write_line(&mut expected, 3, 7, &report, &node).unwrap();
        assert_eq!(line.as_str(), expected);
        let record = parse_line(line.as_str()).unwrap();
        assert_eq!(record.head.node, 3);
        assert_eq!(record.head.update, 7);
        assert_eq!(record.neighbours.len(), 2);
        assert_eq!(record.neighbours[0].id, 2);
        assert_eq!(record.neighbours[1].id, 4);
        // Too small a buffer: an error, never a cut line.
        let mut short: LineBuf<40> = LineBuf::new();
        assert!(write_line(&mut short, 3, 7, &report, &node).is_err());
        assert!(short.len() <= 40);
    }
}
