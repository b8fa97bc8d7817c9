//! The telemetry record: binary and text forms read back to what was written, both carry
//! the same fields, damage is refused, and a record taken from a real node says what the
//! node's own update report says.
#![cfg(feature = "telemetry")]

use entrain::telemetry::{
    DecodeError, Head, LineProblem, MAX_RECORD_LEN, Neighbour, Record, decode, encode,
    encode_parts, parse_line, record_len, write_line, write_line_parts,
};
use entrain::{Config, Gain, Law, Node, Observation, Phase};
use proptest::prelude::*;

fn head() -> impl Strategy<Value = Head> {
    (
        any::<u16>(),
        any::<u32>(),
        any::<i32>(),
        any::<i32>(),
        any::<bool>(),
    )
        .prop_map(|(node, update, correction, trim_ppb, slew_limited)| Head {
            node,
            update,
            correction,
            trim_ppb,
            slew_limited,
        })
}

fn neighbours() -> impl Strategy<Value = Vec<Neighbour>> {
    prop::collection::vec(
        (any::<u16>(), any::<i32>(), any::<i32>()).prop_map(|(id, diff, age_ticks)| Neighbour {
            id,
            diff,
            age_ticks,
        }),
        0..=255,
    )
}

/// The layout written again from the table in the module docs (a second implementation):
/// little-endian fields at their offsets, CRC-32C over everything before it. The CRC
/// here is the bitwise reflected form with polynomial 0x82F63B78 (Castagnoli), from
/// memory of the common table-free algorithm, not the crate's `crc` dependency.
fn by_the_table(h: &Head, nbs: &[Neighbour]) -> Vec<u8> {
    let mut b = vec![0xE7, 1];
    b.extend(h.node.to_le_bytes());
    b.extend(h.update.to_le_bytes());
    b.extend(h.correction.to_le_bytes());
    b.extend(h.trim_ppb.to_le_bytes());
    b.push(u8::from(h.slew_limited));
    b.push(nbs.len() as u8);
    for n in nbs {
        b.extend(n.id.to_le_bytes());
        b.extend(n.diff.to_le_bytes());
        b.extend(n.age_ticks.to_le_bytes());
    }
    let mut crc = !0u32;
    for &byte in &b {
        crc ^= u32::from(byte);
        for _ in 0..8 {
            crc = if crc & 1 == 1 {
                (crc >> 1) ^ 0x82F6_3B78
            } else {
                crc >> 1
            };
        }
    }
    b.extend((!crc).to_le_bytes());
    b
}

proptest! {
    #[test]
    fn binary_form_is_the_documented_layout_and_reads_back(h in head(), nbs in neighbours()) {
        let mut buf = vec![0u8; MAX_RECORD_LEN];
        let len = encode_parts(&mut buf, &h, nbs.iter().copied()).unwrap();
        prop_assert_eq!(len, record_len(nbs.len()));
        prop_assert_eq!(&buf[..len], &by_the_table(&h, &nbs)[..]);
        // Followed by other bytes, the record still reads back, with its own length.
        buf[len..].fill(0xAA);
        let (r, used) = decode(&buf).unwrap();
        prop_assert_eq!(used, len);
        prop_assert_eq!(r.head, h);
        prop_assert_eq!(&r.neighbours[..], &nbs[..]);
    }

    #[test]
    fn text_form_reads_back_to_the_same_record(h in head(), nbs in neighbours()) {
        let mut line = String::new();
        write_line_parts(&mut line, &h, nbs.iter().copied()).unwrap();
        prop_assert!(!line.contains('\n'));
        let r = parse_line(&line).unwrap();
        prop_assert_eq!(r.head, h);
        prop_assert_eq!(&r.neighbours[..], &nbs[..]);
        // With a Windows line end too.
        prop_assert_eq!(parse_line(&format!("{line}\r\n")).unwrap(), r.clone());
        // The text's check value is the binary record's.
        let bin = by_the_table(&h, &nbs);
        let crc = u32::from_le_bytes(bin[bin.len() - 4..].try_into().unwrap());
        let tail = format!(" {crc:08x}");
        prop_assert!(line.ends_with(&tail));
    }

    #[test]
    fn any_single_bit_flip_is_refused(h in head(), nbs in neighbours(), bit in any::<prop::sample::Index>()) {
        let good = by_the_table(&h, &nbs);
        let mut bad = good.clone();
        let at = bit.index(bad.len() * 8);
        bad[at / 8] ^= 1 << (at % 8);
        // A CRC whose polynomial has more than one term detects every single-bit error
        // (common knowledge of CRCs, no source); a flip in the tag, version, flags or
        // count is refused before the check, or as truncated.
        prop_assert!(decode(&bad).is_err());
    }

    #[test]
    fn a_changed_digit_in_a_line_is_refused(h in head(), nbs in neighbours(), pick in any::<prop::sample::Index>(), d in 0u8..10) {
        let mut line = String::new();
        write_line_parts(&mut line, &h, nbs.iter().copied()).unwrap();
        let digits: Vec<usize> = line.char_indices().filter(|(_, c)| c.is_ascii_digit()).map(|(i, _)| i).collect();
        let at = digits[pick.index(digits.len())];
        let mut bytes = line.clone().into_bytes();
        prop_assume!(bytes[at] != b'0' + d);
        bytes[at] = b'0' + d;
        let changed = String::from_utf8(bytes).unwrap();
        match parse_line(&changed) {
            // A changed digit changes one field's value (or the check value): within one
            // field of at most 32 bits, a burst the CRC-32C always detects (a CRC of
            // degree 32 detects every burst of 32 bits or fewer; common knowledge of
            // CRCs, no source). A changed count or flag breaks the line's shape.
            Ok(r) => prop_assert!(false, "accepted {:?} as {:?}", changed, r),
            Err(e) => prop_assert!(e.column >= 1 && e.column <= changed.len() + 1),
        }
    }

    #[test]
    fn arbitrary_bytes_and_text_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..600)) {
        let _ = decode(&bytes);
        let _ = parse_line(&String::from_utf8_lossy(&bytes));
    }
}

#[test]
fn truncated_and_foreign_records_are_refused_with_the_reason() {
    let h = Head {
        node: 2,
        update: 9,
        correction: -3,
        trim_ppb: 40,
        slew_limited: false,
    };
    let nb = Neighbour {
        id: 1,
        diff: 5,
        age_ticks: 100,
    };
    let good = by_the_table(&h, &[nb, nb]);
    for cut in 0..good.len() {
        match decode(&good[..cut]) {
            Err(DecodeError::Truncated { needed }) => assert!(needed > cut),
            other => panic!("cut at {cut}: {other:?}"),
        }
    }
    let mut v2 = good.clone();
    v2[1] = 2;
    assert_eq!(decode(&v2), Err(DecodeError::Version(2)));
    let mut tag = good.clone();
    tag[0] = 0;
    assert_eq!(decode(&tag), Err(DecodeError::NotARecord));
    let mut flags = good.clone();
    flags[16] = 0x80;
    assert_eq!(decode(&flags), Err(DecodeError::Flags(0x80)));
    let mut small = [0u8; 30];
    assert!(encode_parts(&mut small, &h, [nb, nb]).is_err());
}

#[test]
fn lines_name_the_column_of_what_is_wrong() {
    let cases: [(&str, usize, LineProblem); 6] = [
        ("hello", 1, LineProblem::NotTelemetry),
        ("ET1 3 x", 7, LineProblem::Bad("update count")),
        ("ET1 3 4 5 6 2 0 00000000", 13, LineProblem::Bad("flags")),
        ("ET1 3 4 5 6 0 1", 16, LineProblem::Missing("neighbour")),
        (
            "ET1 3 4 5 6 0 1 7:8 00000000",
            17,
            LineProblem::Bad("neighbour"),
        ),
        (
            "ET1 3 4 5 6 0 0 0000000g",
            17,
            LineProblem::Bad("check value"),
        ),
    ];
    for (line, column, problem) in cases {
        let e = parse_line(line).unwrap_err();
        assert_eq!((e.column, e.problem), (column, problem), "{line}");
    }
    let mut good = String::new();
    write_line_parts(&mut good, &Head::default(), []).unwrap();
    let e = parse_line(&format!("{good} extra")).unwrap_err();
    assert_eq!(e.problem, LineProblem::Extra);
}

/// A record taken from a real node after its update says what the update report says:
/// the largest |difference| is the report's `largest_diff` (the difference before the
/// step), the correction and trim are the node's, and the ages are the update instant
/// minus the reception stamps handed in.
#[test]
fn a_record_from_a_node_agrees_with_its_update_report() {
    let config = Config::builder(1_000_000, 100_000)
        .law(Law::Sine)
        .kp(Gain::from_f32(0.3).unwrap())
        .ki(Gain::from_f32(0.03).unwrap())
        .build()
        .unwrap();
    let mut node: Node<4> = Node::new(config, Phase::ZERO, 1_000);
    // The firmware's counter, started near its wrap.
    let mut count = u32::MAX - 10;
    for round in 0..50u32 {
        let now = 100_000 + round * 100_000;
        node.advance_to(now - 30_000);
        for (from, turns, late) in [(4u16, 0.02f32, 30_000u32), (9, -0.013, 12_345)] {
            let rx = now - late;
            let obs = Observation {
                from,
                phase: Phase::from_turns(turns + round as f32 * 1e-3),
                rx_ticks: rx,
                delay_ticks: 77,
            };
            node.observe(obs).unwrap();
        }
        let report = node.update(now);
        let mut buf = [0u8; 64];
        let len = encode(&mut buf, 12, count, &report, &node).unwrap();
        let (r, _) = decode(&buf[..len]).unwrap();
        let mut line = String::new();
        write_line(&mut line, 12, count, &report, &node).unwrap();
        assert_eq!(parse_line(&line).unwrap(), r);
        assert_eq!(r.head.node, 12);
        assert_eq!(r.head.update, count);
        assert_eq!(r.head.correction, report.correction);
        assert_eq!(r.head.slew_limited, report.slew_limited);
        assert_eq!(r.head.trim_ppb, node.trim_ppb());
        let largest = r.neighbours.iter().map(|n| n.diff.unsigned_abs()).max();
        assert_eq!(largest, Some(report.largest_diff));
        let mut ages: Vec<(u16, i32)> = r.neighbours.iter().map(|n| (n.id, n.age_ticks)).collect();
        ages.sort();
        assert_eq!(ages, vec![(4, 30_000), (9, 12_345)]);
        count = count.wrapping_add(1);
    }
    // Record type round trip through its own encoder.
    let mut rec = Record::default();
    rec.neighbours.push(Neighbour::default()).unwrap();
    let mut buf = [0u8; 64];
    let len = rec.encode(&mut buf).unwrap();
    assert_eq!(len, rec.len());
    assert_eq!(decode(&buf).unwrap().0, rec);
}

/// The example line of the module docs (and the fuzz seed): its check value was computed
/// outside this crate, by a bitwise CRC-32C over the documented layout written
/// separately in Python.
#[test]
fn the_documented_example_line_reads() {
    let r = parse_line("ET1 3 1042 -120 -15320 0 2 2:-4521:100000 4:883:99998 26fb1afa").unwrap();
    assert_eq!(
        (
            r.head.node,
            r.head.update,
            r.head.correction,
            r.head.trim_ppb
        ),
        (3, 1042, -120, -15320)
    );
    assert_eq!(
        &r.neighbours[..],
        &[
            Neighbour {
                id: 2,
                diff: -4521,
                age_ticks: 100_000
            },
            Neighbour {
                id: 4,
                diff: 883,
                age_ticks: 99_998
            }
        ]
    );
    let seed = std::fs::read(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/fuzz/seeds/telemetry/record_two_neighbours"
    ))
    .unwrap();
    assert_eq!(decode(&seed).unwrap(), (r, seed.len()));
}
