//! The two-pass reading path (`next_raw` groups rows on one thread,
//! `RawEvent::parse` parses them anywhere) gives exactly the records of the
//! plain iterator: same events, errors, line numbers and row counts.

use proptest::prelude::*;
use quarry_csv::{ErrorPolicy, EventReader, ReadOptions, Record};

const HEADER: &str =
    "event,kind,pt,eta,phi,mass,btag,charge,truth,weight,met_cov_xx,met_cov_xy,met_cov_yy";

/// Records and the final error text through the iterator.
fn via_iterator(bytes: &[u8], options: ReadOptions) -> (Vec<Record>, Option<String>) {
    let reader = EventReader::from_reader(std::io::Cursor::new(bytes.to_vec()), "in.csv", options)
        .expect("header");
    let mut records = Vec::new();
    let mut fatal = None;
    for r in reader {
        match r {
            Ok(rec) => records.push(rec),
            Err(e) => fatal = Some(e.to_string()),
        }
    }
    (records, fatal)
}

/// The same through `next_raw`, parsed in reverse order (parsing must not
/// depend on the reader's state), with the Stop policy applied here.
fn via_raw(bytes: &[u8], options: ReadOptions) -> (Vec<Record>, Option<String>) {
    let mut reader =
        EventReader::from_reader(std::io::Cursor::new(bytes.to_vec()), "in.csv", options)
            .expect("header");
    let mut raw = Vec::new();
    let mut fatal = None;
    while let Some(r) = reader.next_raw() {
        match r {
            Ok(ev) => raw.push(ev),
            Err(e) => fatal = Some(e.to_string()),
        }
    }
    let mut records: Vec<Record> = raw.into_iter().rev().map(|r| r.parse()).collect();
    records.reverse();
    if options.policy == ErrorPolicy::Stop {
        if let Some(k) = records.iter().position(|r| matches!(r, Record::Bad(_))) {
            // The iterator stops after the first bad event; its fatal error
            // is still reported only if that event was the truncated one.
            let last_is_final = k + 1 == records.len();
            records.truncate(k + 1);
            if !last_is_final {
                fatal = None;
            }
        }
    }
    (records, fatal)
}

fn check(text: &[u8], options: ReadOptions) {
    let a = via_iterator(text, options);
    let b = via_raw(text, options);
    assert_eq!(a, b, "input:\n{}", String::from_utf8_lossy(text));
}

fn both_policies(text: &[u8]) {
    check(text, ReadOptions::default().with_policy(ErrorPolicy::Skip));
    check(text, ReadOptions::default());
    let small = ReadOptions {
        policy: ErrorPolicy::Skip,
        max_objects_per_event: 2,
        ..ReadOptions::default()
    };
    check(text, small);
}

#[test]
fn hand_made_cases_agree() {
    let long_field = "9".repeat(quarry_csv::MAX_LINE_BYTES + 10);
    let cases: Vec<String> = vec![
        // Good events, quotes, blanks, comments, CRLF.
        format!("{HEADER}\n1,jet,45.5,0.3,1.2,6.1,0.7,,h.b,1.5,,,\n1,met,40,,2.9,,,,,1.5,90,5,70\n2, \"jet\" ,30,0,0,5,,,,,,,\n"),
        format!("{HEADER}\r\n# note\r\n\r\n3,jet,45.5,0.3,1.2,6.1,0.7,,,,,,\r\n3,muon,20,0,1,0.1,,1,,,,,\r\n"),
        // Syntax error in the middle of an event, after a good row and before a bad one.
        format!("{HEADER}\n4,jet,45,0.3,1.2,6,0.7,,,,,,\n4,jet,\"45,0.3,1.2,6,0.7,,,,,,\n4,jet,x,0,0,0,,,,,,,\n5,met,1,,0,,,,,,,,\n"),
        // A bad value before a syntax error: the first error wins.
        format!("{HEADER}\n4,jet,x,0.3,1.2,6,0.7,,,,,,\n4,jet,\"a\"b,0,0,0,,,,,,,\n"),
        // Split event, bad ids (empty, text, quoted), field counts.
        format!("{HEADER}\n1,met,1,,0,,,,,,,,\n2,met,1,,0,,,,,,,,\n1,met,1,,0,,,,,,,,\n,jet,1,0,0,0,,,,,,,\nab,jet,1,0,0,0,,,,,,,\nab,jet,1,0,0,0,,,,,,,\n\"7\",jet,1,0,0,0,,,,,,,\n7,jet,1,0\n"),
        // Too many objects (limit 2 in one of the option sets), duplicate met.
        format!("{HEADER}\n8,jet,1,0,0,0,,,,,,,\n8,jet,1,0,0,0,,,,,,,\n8,jet,1,0,0,0,,,,,,,\n8,jet,1,0,0,0,,,,,,,\n8,met,1,,0,,,,,,,,\n8,met,1,,0,,,,,,,,\n9,met,1,,0,,,,,,,,\n"),
        // A line over the length limit.
        format!("{HEADER}\n10,jet,{long_field},0,0,0,,,,,,,\n10,met,1,,0,,,,,,,,\n11,met,1,,0,,,,,,,,\n"),
        // Invalid UTF-8 in a field.
        format!("{HEADER}\n12,jet,1,0,0,0,,,h\u{fffd}b,,,,\n"),
    ];
    for c in &cases {
        both_policies(c.as_bytes());
    }
    let mut bad_utf8 = format!("{HEADER}\n13,jet,1,0,0,0,,,").into_bytes();
    bad_utf8.extend_from_slice(b"\xff\xfe,,,,\n13,met,1,,0,,,,,,,,\n");
    both_policies(&bad_utf8);
}

#[test]
fn truncated_gzip_agrees() {
    use std::io::Write;
    let mut text = format!("{HEADER}\n");
    for id in 0..2000 {
        text.push_str(&format!(
            "{id},jet,45.5,0.3,1.2,6.1,0.7,,h.b,1.5,,,\n{id},met,40,,2.9,,,,,1.5,90,5,70\n"
        ));
    }
    let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
    gz.write_all(text.as_bytes()).unwrap();
    let full = gz.finish().unwrap();
    let cut = &full[..full.len() / 2];
    let (records, fatal) = via_iterator(cut, ReadOptions::default().with_policy(ErrorPolicy::Skip));
    assert!(fatal.is_some() && !records.is_empty());
    both_policies(cut);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]
    /// Random lines from a small vocabulary of good and broken rows.
    #[test]
    fn random_mixtures_agree(picks in proptest::collection::vec((0usize..12, 0u64..6), 0..40)) {
        let vocab = [
            "jet,45.5,0.3,1.2,6.1,0.7,,h.b,1.5,,,",
            "met,40,,2.9,,,,,1.5,90,5,70",
            "electron,28,0.9,0.1,0.000511,,-1,l.W.e,1.5,,,",
            "jet,abc,0.3,1.2,6.1,0.7,,,,,,",
            "jet,45,0.3,1.2,6.1,0.7,,,2.5,,,",
            "\"jet\",45,0.3,1.2,6.1,0.7,,,,,,",
            "jet,\"45,0.3",
            "muon,20,0,1,0.1,,2,,,,,",
            "jet,1,0",
            "met,40,,2.9,,,,,,1,5,1",
            "fatjet,300,0.1,0.2,170,,,,,,,",
            "",
        ];
        let mut text = format!("{HEADER}\n");
        for (k, id) in picks {
            if vocab[k].is_empty() {
                text.push_str("# comment\n");
            } else {
                text.push_str(&format!("{id},{}\n", vocab[k]));
            }
        }
        both_policies(text.as_bytes());
    }
}
