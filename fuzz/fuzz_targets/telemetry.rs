//! Arbitrary bytes into the telemetry decoders: the binary record and the text line.
//!
//! Besides "never panics", checks what must hold whenever a decode succeeds: the record
//! re-encodes to exactly the bytes it was read from, and its text line reads back to the
//! same record; a line that reads re-writes to a line that reads to the same record.
#![no_main]

use entrain::telemetry::{
    MAX_RECORD_LEN, decode, encode_parts, parse_line, record_len, write_line_parts,
};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|bytes: &[u8]| {
    if let Ok((record, len)) = decode(bytes) {
        assert_eq!(len, record_len(record.neighbours.len()));
        let mut buf = [0u8; MAX_RECORD_LEN];
        let again = encode_parts(&mut buf, &record.head, record.neighbours.iter().copied())
            .expect("a decoded record encodes");
        assert_eq!(&buf[..again], &bytes[..len]);
        let mut line = String::new();
        write_line_parts(&mut line, &record.head, record.neighbours.iter().copied())
            .expect("writing to a String");
        assert_eq!(parse_line(&line), Ok(record));
    }
    if let Ok(text) = std::str::from_utf8(bytes) {
        if let Ok(record) = parse_line(text) {
            let mut line = String::new();
            write_line_parts(&mut line, &record.head, record.neighbours.iter().copied())
                .expect("writing to a String");
            assert_eq!(parse_line(&line), Ok(record));
        }
    }
});
