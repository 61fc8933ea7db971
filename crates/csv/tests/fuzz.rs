//! Property tests: arbitrary or mutated input never panics, and every
//! contiguous block of rows comes out as exactly one record.

use std::collections::HashSet;

use proptest::prelude::*;
use quarry_csv::{BadReason, ErrorPolicy, EventReader, ReadOptions, Record};

fn skip() -> ReadOptions {
    ReadOptions::default().with_policy(ErrorPolicy::Skip)
}

const HEADER: &str =
    "event,kind,pt,eta,phi,mass,btag,charge,truth,weight,met_cov_xx,met_cov_xy,met_cov_yy";

fn valid_lines(n_events: usize) -> Vec<String> {
    let mut lines = Vec::new();
    for id in 0..n_events {
        lines.push(format!("{id},jet,45.5,0.3,1.2,6.1,0.7,,h.b,1.5,,,"));
        lines.push(format!("{id},jet,31,-1.3,-2.2,4,0.1,,,1.5,,,"));
        lines.push(format!(
            "{id},electron,28,0.9,0.1,0.000511,,-1,l.W.e,1.5,,,"
        ));
        lines.push(format!("{id},met,40,,2.9,,,,,1.5,90,5,70"));
    }
    lines
}

#[derive(Clone, Debug)]
enum Mutation {
    /// Replace field `f` of line `l` with `text`.
    Field(usize, usize, String),
    /// Delete line `l`.
    Delete(usize),
    /// Duplicate line `l` to position `to`.
    Move(usize, usize),
    /// Insert raw bytes into line `l` at `at`.
    Bytes(usize, usize, Vec<u8>),
}

fn mutation() -> impl Strategy<Value = Mutation> {
    let text = proptest::string::string_regex("[0-9a-z.+\\-eé ,#]{0,6}|NaN|inf|-1|2|1e400|tau|met")
        .unwrap();
    prop_oneof![
        (any::<usize>(), 0usize..14, text).prop_map(|(l, f, t)| Mutation::Field(l, f, t)),
        any::<usize>().prop_map(Mutation::Delete),
        (any::<usize>(), any::<usize>()).prop_map(|(l, t)| Mutation::Move(l, t)),
        (
            any::<usize>(),
            any::<usize>(),
            proptest::collection::vec(any::<u8>(), 1..4)
        )
            .prop_map(|(l, a, b)| Mutation::Bytes(l, a, b)),
    ]
}

fn apply(lines: &mut Vec<Vec<u8>>, m: &Mutation) {
    if lines.is_empty() {
        return;
    }
    let n = lines.len();
    match m {
        Mutation::Field(l, f, t) => {
            let line = String::from_utf8_lossy(&lines[l % n]).into_owned();
            let mut fields: Vec<String> = line.split(',').map(str::to_string).collect();
            if *f < fields.len() {
                fields[*f] = t.clone();
            }
            lines[l % n] = fields.join(",").into_bytes();
        }
        Mutation::Delete(l) => {
            lines.remove(l % n);
        }
        Mutation::Move(l, to) => {
            let line = lines[l % n].clone();
            lines.insert(to % (n + 1), line);
        }
        Mutation::Bytes(l, at, bytes) => {
            let line = &mut lines[l % n];
            let at = at % (line.len() + 1);
            for (k, b) in bytes.iter().enumerate() {
                line.insert(at + k, *b);
            }
        }
    }
}

/// The block keys an independent, simple model of the format expects: data
/// lines (not blank, not `#` comments) grouped by their first field, the
/// `event` column. Valid only for inputs without double quotes.
fn model_blocks(text: &[u8]) -> Vec<Result<u64, Vec<u8>>> {
    let mut blocks: Vec<Result<u64, Vec<u8>>> = Vec::new();
    let mut header_seen = false;
    for line in text.split(|&b| b == b'\n') {
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        let first_visible = line.iter().find(|b| !b.is_ascii_whitespace());
        if first_visible.is_none() || first_visible == Some(&b'#') {
            continue;
        }
        if !header_seen {
            header_seen = true;
            continue;
        }
        let field = line.split(|&b| b == b',').next().unwrap_or(b"");
        let field = field
            .iter()
            .copied()
            .skip_while(|b| *b == b' ' || *b == b'\t')
            .collect::<Vec<u8>>();
        let trimmed_len = field.len()
            - field
                .iter()
                .rev()
                .take_while(|b| **b == b' ' || **b == b'\t')
                .count();
        let field = field[..trimmed_len].to_vec();
        let key = std::str::from_utf8(&field)
            .ok()
            .and_then(|s| s.parse::<u64>().ok())
            .ok_or(field);
        if blocks.last() != Some(&key) {
            blocks.push(key);
        }
    }
    blocks
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, .. ProptestConfig::default() })]

    #[test]
    fn random_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        let Ok(reader) = EventReader::from_reader(std::io::Cursor::new(bytes), "fuzz.csv", skip()) else {
            return Ok(());
        };
        let mut n_ok = 0u64;
        let mut reader = reader;
        let mut fatal = 0;
        for rec in reader.by_ref() {
            match rec {
                Ok(_) => n_ok += 1,
                Err(_) => fatal += 1,
            }
        }
        prop_assert!(fatal <= 1);
        let s = reader.summary();
        prop_assert_eq!(s.events, n_ok);
        prop_assert_eq!(s.good + s.bad, s.events);
    }

    #[test]
    fn mutated_csv_accounts_for_every_block(
        n_events in 1usize..8,
        mutations in proptest::collection::vec(mutation(), 0..8),
        crlf in any::<bool>(),
    ) {
        let mut lines: Vec<Vec<u8>> = valid_lines(n_events).into_iter().map(String::into_bytes).collect();
        for m in &mutations {
            apply(&mut lines, m);
        }
        let end: &[u8] = if crlf { b"\r\n" } else { b"\n" };
        let mut text = HEADER.as_bytes().to_vec();
        text.extend_from_slice(end);
        for l in &lines {
            text.extend_from_slice(l);
            text.extend_from_slice(end);
        }
        // Mutations never add a double quote or gzip magic, so the simple
        // model applies and the stream cannot break.
        prop_assume!(!text.contains(&b'"'));
        // A CR not followed by LF (a mutation that cut a CRLF line end) is
        // a fatal error by design (CR-only line ends, CsvError::LineEnds):
        // outside this model.
        prop_assume!(!text.windows(2).any(|w| w[0] == b'\r' && w[1] != b'\n')
            && text.last() != Some(&b'\r'));
        let expected = model_blocks(&text);
        let reader = EventReader::from_reader(std::io::Cursor::new(text), "fuzz.csv", skip()).unwrap();
        let records: Vec<Record> = reader.map(|r| r.unwrap()).collect();
        prop_assert_eq!(records.len(), expected.len());
        let mut seen = HashSet::new();
        for (rec, key) in records.iter().zip(&expected) {
            match key {
                Ok(id) => {
                    prop_assert_eq!(rec.id(), Some(*id));
                    let first = seen.insert(*id);
                    let split = matches!(rec, Record::Bad(b) if b.reason() == BadReason::SplitEvent);
                    // Each id is Good or Bad once at its first block; any
                    // later block of it is reported as a split event.
                    prop_assert_eq!(split, !first);
                }
                Err(raw) => match rec {
                    Record::Bad(b) => {
                        prop_assert_eq!(b.id, None);
                        let want = String::from_utf8_lossy(raw).into_owned();
                        prop_assert_eq!(&b.raw_id, &want);
                    }
                    Record::Good(_) => prop_assert!(false, "unparseable id accepted"),
                },
            }
        }
        // Unmutated input is all good.
        if mutations.is_empty() {
            prop_assert!(records.iter().all(|r| matches!(r, Record::Good(_))));
        }
    }
}
