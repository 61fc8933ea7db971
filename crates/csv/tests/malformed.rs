//! Every malformed input gives a precise, typed error and never a panic.

use std::io::Write;

use quarry_csv::{
    BadEvent, BadReason, CsvError, ErrorPolicy, EventReader, ReadOptions, ReadSummary, Record,
};

const HEADER: &str = "event,kind,pt,eta,phi,mass,energy,btag,charge,truth,weight";

fn skip() -> ReadOptions {
    ReadOptions::default().with_policy(ErrorPolicy::Skip)
}

/// Reads all records of `text` under Skip; panics on a fatal error.
fn read_all(text: &str) -> (Vec<Record>, ReadSummary, Vec<String>) {
    let mut r = EventReader::from_reader(
        std::io::Cursor::new(text.as_bytes().to_vec()),
        "events.csv",
        skip(),
    )
    .unwrap();
    let recs: Vec<Record> = r.by_ref().map(|x| x.unwrap()).collect();
    (recs, r.summary().clone(), r.warnings().to_vec())
}

/// The only bad event of `body` (after the standard header).
fn only_bad(body: &str) -> BadEvent {
    let (recs, _, _) = read_all(&format!("{HEADER}\n{body}"));
    let bad: Vec<BadEvent> = recs
        .into_iter()
        .filter_map(|r| match r {
            Record::Bad(b) => Some(b),
            Record::Good(_) => None,
        })
        .collect();
    assert_eq!(bad.len(), 1, "{bad:?}");
    bad.into_iter().next().unwrap()
}

fn open_err(text: &[u8]) -> CsvError {
    match EventReader::from_reader(std::io::Cursor::new(text.to_vec()), "events.csv", skip()) {
        Ok(_) => panic!("expected an error"),
        Err(e) => e,
    }
}

#[test]
fn non_numeric_field() {
    let b = only_bad("1,jet,50,0.1,0.2,5,,0.5,,,\n1,jet,40,abc,0.2,5,,0.5,,,\n");
    assert_eq!(b.id, Some(1));
    assert_eq!(b.first_line, 2);
    assert_eq!(b.rows, 2);
    assert_eq!(b.reason(), BadReason::NotANumber);
    assert_eq!(
        b.error.to_string(),
        "events.csv:3: column 'eta': 'abc' is not a number"
    );
    assert_eq!(
        b.to_string(),
        "event 1 (from line 2): events.csv:3: column 'eta': 'abc' is not a number"
    );
}

#[test]
fn nan_and_infinite_values() {
    for (text, col) in [("NaN", "pt"), ("inf", "pt"), ("1e999", "pt")] {
        let b = only_bad(&format!("7,jet,{text},0.1,0.2,5,,0.5,,,\n"));
        assert_eq!(b.reason(), BadReason::NotFinite);
        assert_eq!(
            b.error.to_string(),
            format!("events.csv:2: column '{col}': '{text}' is not a finite number")
        );
    }
    let b = only_bad("7,met,30,,-inf,,,,,,\n");
    assert_eq!(
        b.error.to_string(),
        "events.csv:2: column 'phi': '-inf' is not a finite number"
    );
}

#[test]
fn missing_required_column() {
    let e = open_err(b"event,kind,eta,phi,mass\n1,jet,0,0,1\n");
    assert!(matches!(e, CsvError::Header { line: 1, .. }));
    assert_eq!(
        e.to_string(),
        "events.csv:1: header: missing required column 'pt' (required: event, kind, pt, eta, phi, and mass or energy)"
    );
    let e = open_err(b"event,kind,pt,eta,phi\n1,jet,1,0,0\n");
    assert_eq!(
        e.to_string(),
        "events.csv:1: header: missing column 'mass' or 'energy' (at least one is required)"
    );
    let e = open_err(b"event,kind,pt,eta,phi,mass,pt\n");
    assert_eq!(
        e.to_string(),
        "events.csv:1: header: column 'pt' appears twice (columns 3 and 7)"
    );
    let e = open_err(b"event,kind,pt,eta,phi,mass,met_cov_xx\n");
    assert!(e.to_string().contains("needs all three columns"), "{e}");
}

#[test]
fn empty_file_and_header_only() {
    let e = open_err(b"");
    assert!(matches!(e, CsvError::Empty { .. }));
    assert_eq!(
        e.to_string(),
        "events.csv: empty file: expected a header line naming the columns"
    );
    // Comment lines and blank lines alone are still empty.
    assert!(matches!(open_err(b"# nothing\n\n"), CsvError::Empty { .. }));
    let (recs, summary, warnings) = read_all(&format!("{HEADER}\n"));
    assert!(recs.is_empty());
    assert_eq!(summary.events, 0);
    assert_eq!(
        warnings,
        vec!["events.csv: no events (header only)".to_string()]
    );
}

#[test]
fn unknown_kind_and_empty_kind() {
    let b = only_bad("3,tau,50,0.1,0.2,5,,,,,\n");
    assert_eq!(b.reason(), BadReason::UnknownKind);
    assert_eq!(
        b.error.to_string(),
        "events.csv:2: column 'kind': 'tau' is not a known kind (expected jet, fatjet, electron, muon or met)"
    );
    let b = only_bad("3,,50,0.1,0.2,5,,,,,\n");
    assert_eq!(b.reason(), BadReason::MissingValue);
}

#[test]
fn split_event_is_an_error_not_a_merge() {
    let (recs, summary, _) = read_all(&format!(
        "{HEADER}\n1,jet,50,0.1,0.2,5,,0.5,,,\n2,jet,50,0.1,0.2,5,,0.5,,,\n1,jet,30,0.1,0.2,5,,0.5,,,\n"
    ));
    assert_eq!(recs.len(), 3);
    assert!(matches!(&recs[0], Record::Good(e) if e.id == 1 && e.jets.len() == 1));
    assert!(matches!(&recs[1], Record::Good(e) if e.id == 2));
    match &recs[2] {
        Record::Bad(b) => {
            assert_eq!(b.id, Some(1));
            assert_eq!(b.reason(), BadReason::SplitEvent);
            assert_eq!(
                b.error.to_string(),
                "events.csv:4: column 'event': '1' appeared earlier in the file: rows of one event must be contiguous"
            );
        }
        Record::Good(_) => panic!("split event merged"),
    }
    assert_eq!(summary.bad_by_reason.get(&BadReason::SplitEvent), Some(&1));
}

#[test]
fn bad_utf8_is_a_bad_event_with_its_line() {
    let mut text = format!("{HEADER}\n1,jet,50,0.1,0.2,5,,0.5,,,\n").into_bytes();
    text.extend_from_slice(b"2,jet,50,0.1,0.2,5,,0.5,,h.\xff\xfe,\n");
    text.extend_from_slice(b"3,jet,50,0.1,0.2,5,,0.5,,,\n");
    let mut r = EventReader::from_reader(std::io::Cursor::new(text), "events.csv", skip()).unwrap();
    let recs: Vec<Record> = r.by_ref().map(|x| x.unwrap()).collect();
    assert_eq!(recs.len(), 3);
    match &recs[1] {
        Record::Bad(b) => {
            assert_eq!(b.reason(), BadReason::BadUtf8);
            assert_eq!(
                b.error.to_string(),
                "events.csv:3: column 'truth': 'h.\u{fffd}\u{fffd}' is not valid UTF-8"
            );
        }
        Record::Good(_) => panic!("bad UTF-8 accepted"),
    }
    assert!(matches!(&recs[2], Record::Good(e) if e.id == 3));
    // Bad UTF-8 in the header is fatal.
    let e = open_err(b"event,kind,pt,eta,phi,mass,\xff\n");
    assert_eq!(
        e.to_string(),
        "events.csv:1: header: column 7 name is not valid UTF-8"
    );
}

#[test]
fn crlf_line_ends() {
    let text = format!("{HEADER}\r\n1,jet,50,0.1,0.2,5,,0.5,1,h.b,2\r\n1,met,30,,1.0,,,,,,2\r\n2,muon,40,0.3,abc,0.1,,,,,\r\n");
    assert!(
        !text.replace("\r\n", "").contains('\n'),
        "CRLF line ends only"
    );
    let (recs, _, _) = read_all(&text);
    match &recs[0] {
        Record::Good(e) => {
            assert_eq!(e.jets[0].truth.unwrap().as_str(), "h.b");
            assert_eq!(e.weight, 2.0);
            assert!((e.met.pt() - 30.0).abs() < 1e-12);
        }
        Record::Bad(b) => panic!("{b}"),
    }
    match &recs[1] {
        Record::Bad(b) => assert_eq!(
            b.error.to_string(),
            "events.csv:4: column 'phi': 'abc' is not a number"
        ),
        Record::Good(_) => panic!(),
    }
}

#[test]
fn truncated_gzip_is_fatal_with_file_and_line() {
    let mut text = String::from(HEADER);
    text.push('\n');
    for id in 0..2000 {
        text.push_str(&format!("{id},jet,50.{id},0.1,0.2,5,,0.5,,,\n"));
        text.push_str(&format!("{id},met,20,,1.2,,,,,,\n"));
    }
    let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    gz.write_all(text.as_bytes()).unwrap();
    let bytes = gz.finish().unwrap();
    let cut = bytes[..bytes.len() / 2].to_vec();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("cut.csv.gz");
    std::fs::write(&path, &cut).unwrap();
    let mut r = EventReader::open(&path, skip()).unwrap();
    assert!(r.is_gzip());
    let mut good = 0;
    let mut truncated = 0;
    let mut fatal = None;
    for rec in r.by_ref() {
        match rec {
            Ok(Record::Good(_)) => good += 1,
            Ok(Record::Bad(b)) => {
                assert_eq!(b.reason(), BadReason::Truncated);
                truncated += 1;
            }
            Err(e) => {
                assert!(fatal.is_none(), "only one fatal error");
                fatal = Some(e);
            }
        }
    }
    let fatal = fatal.expect("a truncated gzip must give an error");
    let msg = fatal.to_string();
    assert!(matches!(fatal, CsvError::Read { line, .. } if line > 2));
    assert!(
        msg.starts_with(&format!("{}:", path.display()))
            && msg.contains("read error (truncated or corrupt gzip stream)"),
        "{msg}"
    );
    assert!(good > 10, "events before the cut are read: {good}");
    assert_eq!(truncated, 1, "the event in progress is reported bad");
    assert_eq!(r.summary().fatal.as_deref(), Some(msg.as_str()));
    assert!(r.next().is_none(), "iteration ends after a fatal error");
}

#[test]
fn value_range_checks() {
    let cases: [(&str, BadReason, &str); 16] = [
        ("1,jet,-5,0.1,0.2,5,,,,,", BadReason::OutOfRange, "events.csv:2: column 'pt': '-5' is negative (expected pt ≥ 0)"),
        ("1,jet,5,0.1,0.2,-1,,,,,", BadReason::OutOfRange, "events.csv:2: column 'mass': '-1' is negative (expected mass ≥ 0)"),
        ("1,jet,5,0.1,0.2,,-3,,,,", BadReason::OutOfRange, "events.csv:2: column 'energy': '-3' is negative (expected energy ≥ 0)"),
        ("1,jet,5,0.0,0.2,,4,,,,", BadReason::OutOfRange, "events.csv:2: column 'energy': '4' is below the momentum |p| = 5 GeV (energy must be ≥ |p|)"),
        ("1,jet,5,0.1,0.2,5,,1.5,,,", BadReason::OutOfRange, "events.csv:2: column 'btag': '1.5' is outside [0, 1] (expected a b-tag score or 0/1)"),
        ("1,muon,5,0.1,0.2,0.1,,,0.5,,", BadReason::OutOfRange, "events.csv:2: column 'charge': '0.5' is not a charge of -1 or +1"),
        ("1,electron,5,0.1,0.2,0,,,2,,", BadReason::OutOfRange, "events.csv:2: column 'charge': '2' is not a charge of -1 or +1"),
        ("1,jet,5,25,0.2,5,,,,,", BadReason::OutOfRange, "events.csv:2: column 'eta': '25' is outside [-20, 20]"),
        ("1,jet,5,1,180,5,,,,,", BadReason::OutOfRange, "events.csv:2: column 'phi': '180' is outside [-2π, 2π] (phi is in radians)"),
        ("1,jet,5,1,0.1,,,,,,", BadReason::MissingValue, "events.csv:2: jet row needs a value in 'mass' or 'energy'"),
        ("1,jet,,1,0.1,5,,,,,", BadReason::MissingValue, "events.csv:2: column 'pt': is empty (expected pt in GeV)"),
        ("1,fatjet,300,,0.1,80,,,,,", BadReason::MissingValue, "events.csv:2: column 'eta': is empty (expected eta)"),
        ("1,jet,5,1,0.1,5,,,,has space,", BadReason::BadTruth, "events.csv:2: column 'truth': 'has space' is not a truth label (1–23 printable ASCII characters, no commas or spaces)"),
        ("x1,jet,5,1,0.1,5,,,,,", BadReason::BadEventId, "events.csv:2: column 'event': 'x1' is not an unsigned integer event id"),
        (",jet,5,1,0.1,5,,,,,", BadReason::BadEventId, "events.csv:2: column 'event': is empty (expected an unsigned integer event id)"),
        ("1,jet,5,1,0.1,5", BadReason::FieldCount, "events.csv:2: row has 6 fields, the header has 11"),
    ];
    for (row, reason, text) in cases {
        let b = only_bad(&format!("{row}\n"));
        assert_eq!(b.reason(), reason, "{row}");
        assert_eq!(b.error.to_string(), text, "{row}");
    }
    // A negative event id is not an unsigned integer either.
    assert_eq!(only_bad("-4,jet,5,1,0.1,5,,,,,\n").id, None);
}

#[test]
fn event_level_checks() {
    let b = only_bad("5,met,30,,1,,,,,,\n5,jet,50,0.1,0.2,5,,,,,\n5,met,31,,1,,,,,,\n");
    assert_eq!(b.reason(), BadReason::DuplicateMet);
    assert_eq!(
        b.error.to_string(),
        "events.csv:4: second met row in this event (the first is on line 2)"
    );
    let b = only_bad("5,jet,50,0.1,0.2,5,,,,,2\n5,jet,50,0.1,0.2,5,,,,,\n5,met,31,,1,,,,,,3\n");
    assert_eq!(b.reason(), BadReason::InconsistentWeight);
    assert_eq!(
        b.error.to_string(),
        "events.csv:4: column 'weight': '3' differs from this event's weight 2 on line 2 (weight must be equal on all rows that give it)"
    );
}

#[test]
fn met_covariance_checks() {
    let h = "event,kind,pt,eta,phi,mass,met_cov_xx,met_cov_xy,met_cov_yy";
    let (recs, _, _) = read_all(&format!(
        "{h}\n1,met,30,,1,,100,-20,50\n2,met,30,,1,,100,80,50\n3,met,30,,1,,100,,50\n4,met,30,,1,,,,\n"
    ));
    assert!(matches!(&recs[0], Record::Good(e) if e.met.cov == Some([100.0, -20.0, 50.0])));
    match &recs[1] {
        Record::Bad(b) => assert_eq!(
            b.error.to_string(),
            "events.csv:3: MET covariance [xx=100, xy=80, yy=50] is not positive semi-definite (need xx ≥ 0, yy ≥ 0, xy² ≤ xx·yy)"
        ),
        Record::Good(_) => panic!("non-PSD covariance accepted"),
    }
    assert!(
        matches!(&recs[2], Record::Bad(b) if b.reason() == BadReason::BadCovariance),
        "partial covariance"
    );
    assert!(matches!(&recs[3], Record::Good(e) if e.met.cov.is_none()));
}

#[test]
fn too_many_objects() {
    let mut body = String::new();
    for _ in 0..5 {
        body.push_str("9,jet,50,0.1,0.2,5,,,,,\n");
    }
    body.push_str("10,jet,50,0.1,0.2,5,,,,,\n");
    let opts = ReadOptions {
        policy: ErrorPolicy::Skip,
        max_objects_per_event: 4,
        ..ReadOptions::default()
    };
    let r = EventReader::from_reader(
        std::io::Cursor::new(format!("{HEADER}\n{body}").into_bytes()),
        "events.csv",
        opts,
    )
    .unwrap();
    let recs: Vec<Record> = r.map(Result::unwrap).collect();
    match &recs[0] {
        Record::Bad(b) => {
            assert_eq!(b.rows, 5);
            assert_eq!(
                b.error.to_string(),
                "events.csv:6: event has more than 4 rows (the max_objects_per_event limit)"
            );
        }
        Record::Good(_) => panic!("limit not enforced"),
    }
    assert!(matches!(&recs[1], Record::Good(e) if e.id == 10));
}

#[test]
fn stop_policy_ends_at_first_bad_event_and_summarises() {
    let text = format!(
        "{HEADER}\n1,jet,50,0.1,0.2,5,,,,,\n2,jet,abc,0.1,0.2,5,,,,,\n3,jet,50,0.1,0.2,5,,,,,\n"
    );
    let mut r = EventReader::from_reader(
        std::io::Cursor::new(text.clone().into_bytes()),
        "events.csv",
        ReadOptions::default(),
    )
    .unwrap();
    let recs: Vec<Record> = r.by_ref().map(Result::unwrap).collect();
    assert_eq!(recs.len(), 2);
    assert_eq!(recs[1].id(), Some(2));
    let s = r.summary();
    assert_eq!((s.events, s.good, s.bad), (2, 1, 1));
    assert!(s.stopped_at_bad_event);
    assert_eq!(
        s.to_string(),
        "2 events read: 1 good, 1 bad (not-a-number: 1); stopped at the first bad event"
    );
    let (recs, s, _) = read_all(&text);
    assert_eq!(recs.len(), 3);
    assert_eq!(
        s.to_string(),
        "3 events read: 2 good, 1 bad (not-a-number: 1)"
    );
}

#[test]
fn indices_kinds_and_optional_values() {
    let text = "# a comment line\n\u{feff}kind,event,phi,eta,pt,energy,mass,charge,extra,btag\n\
        1,jet,0.1,0.5,40,,5,,x,\n\
        1,muon,0.2,0.4,30,,0.1,-1,y,\n\
        1,jet,0.3,0.3,60,100,,,z,1\n\
        1,electron,0.4,0.2,25,26,,+1,,\n\
        1,fatjet,0.5,0.1,300,,90,,,\n\
        1,jet,0.6,0.0,20,,0,,,0.3\n\
        \n\
        1,met,1.0,,35,,,,,\n";
    // Column order is free; rows given as kind first, event second.
    let text = text
        .lines()
        .map(|l| {
            let mut f: Vec<&str> = l.split(',').collect();
            if f.len() > 1 && !l.starts_with('\u{feff}') {
                f.swap(0, 1);
            }
            f.join(",")
        })
        .collect::<Vec<_>>()
        .join("\n");
    let (recs, _, warnings) = read_all(&text);
    assert_eq!(
        warnings,
        vec!["events.csv:2: ignoring unknown column(s) 'extra'".to_string()]
    );
    let Record::Good(e) = &recs[0] else {
        panic!("{recs:?}")
    };
    assert_eq!(
        e.jets.iter().map(|j| j.index).collect::<Vec<_>>(),
        [0, 1, 2]
    );
    assert_eq!(
        e.jets.iter().map(|j| j.btag).collect::<Vec<_>>(),
        [0.0, 1.0, 0.3]
    );
    assert_eq!((e.muons[0].charge, e.muons[0].index), (-1, 0));
    assert_eq!((e.electrons[0].charge, e.electrons[0].index), (1, 0));
    assert_eq!(e.fat_jets[0].index, 0);
    // Energy given: E kept exactly, mass derived.
    assert_eq!(e.jets[1].p4.e(), 100.0);
    // Mass given: mass kept.
    assert!((e.jets[0].p4.m() - 5.0).abs() < 1e-12);
    assert!((e.met.pt() - 35.0).abs() < 1e-12 && (e.met.phi() - 1.0).abs() < 1e-12);
    assert_eq!(e.weight, 1.0);
}

#[test]
fn gz_name_on_plain_text_is_read_with_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plain.csv.gz");
    std::fs::write(&path, format!("{HEADER}\n1,met,3,,0,,,,,,\n")).unwrap();
    let mut r = EventReader::open(&path, skip()).unwrap();
    assert!(matches!(r.next(), Some(Ok(Record::Good(_)))));
    assert!(r.warnings()[0].contains("named .gz but not gzip data"));
    let missing = dir.path().join("missing.csv");
    let e = EventReader::open(&missing, skip()).err().unwrap();
    assert!(matches!(e, CsvError::Open { .. }));
    assert!(e
        .to_string()
        .starts_with(&format!("{}: cannot open: ", missing.display())));
}

#[test]
fn quoting_syntax_and_long_lines() {
    let (recs, _, _) = read_all(&format!(
        "{HEADER}\n\"1\", jet ,\"50\",0.1,0.2,5,,0.5,,\"h.b\",\n2,jet,50,0.1,0.2,5,,0.5,,\"h.b,\n3,jet,50,0.1,\"0.2\"x,5,,0.5,,,\n"
    ));
    assert!(matches!(&recs[0], Record::Good(e) if e.jets[0].truth.unwrap().as_str() == "h.b"));
    match (&recs[1], &recs[2]) {
        (Record::Bad(a), Record::Bad(b)) => {
            assert_eq!(a.reason(), BadReason::Syntax);
            assert_eq!(
                a.error.to_string(),
                "events.csv:3: unterminated quoted field"
            );
            assert_eq!(
                b.error.to_string(),
                "events.csv:4: text after the closing quote of a field"
            );
            assert_eq!((a.id, b.id), (Some(2), Some(3)), "the id still parses");
        }
        other => panic!("{other:?}"),
    }
    // A line over the limit is a bad event; the following line is read.
    let long = format!(
        "{HEADER}\n4,jet,50,0.1,0.2,5,,0.5,,{},\n5,met,1,,0,,,,,,\n",
        "x".repeat(quarry_csv::MAX_LINE_BYTES + 10)
    );
    let (recs, _, _) = read_all(&long);
    assert_eq!(recs.len(), 2);
    match &recs[0] {
        Record::Bad(b) => assert_eq!(
            b.error.to_string(),
            format!(
                "events.csv:2: line longer than {} bytes",
                quarry_csv::MAX_LINE_BYTES
            )
        ),
        Record::Good(_) => panic!("overlong line accepted"),
    }
    assert!(matches!(&recs[1], Record::Good(e) if e.id == 5));
}
