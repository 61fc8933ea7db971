//! Every input event is accounted for: `quarry reco` writes exactly one row
//! per input event per hypothesis, each with a status — over the whole
//! hostile corpus (`tests/hostile/`) and over random mixtures of good and
//! malformed events (proptest), plain or gzipped, LF or CRLF.

use std::io::Write;
use std::path::Path;
use std::process::{Command, Output, Stdio};

use proptest::prelude::*;
use quarry::csv::{ErrorPolicy, EventReader, ReadOptions};

const BIN: &str = env!("CARGO_BIN_EXE_quarry");
const HYPOTHESES: [&str; 3] = ["ttbar-ljets", "bwbw-ljets", "tz-3l"];
const HEADER: &str = "event,kind,pt,eta,phi,mass,btag,charge,truth,weight";

/// Every status name the output may carry (quarry::Status::ALL).
fn known_statuses() -> Vec<&'static str> {
    quarry::Status::ALL.iter().map(|s| s.as_str()).collect()
}

fn reco(input: &Path, policy: &str) -> Output {
    let mut cmd = Command::new(BIN);
    cmd.args(["reco", input.to_str().unwrap(), "--on-bad", policy])
        .args(["--no-progress", "-o", "-", "-j", "1"]);
    for h in HYPOTHESES {
        cmd.args(["-H", h]);
    }
    cmd.stdin(Stdio::null()).output().expect("run quarry")
}

/// (ordinal, event, hypothesis, status, reason) of every row.
fn rows(stdout: &[u8]) -> Vec<(u64, String, String, String, String)> {
    if stdout.is_empty() {
        return Vec::new();
    }
    let mut r = csv::Reader::from_reader(stdout);
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (o, e, hy, s, re) = (
        col("ordinal"),
        col("event"),
        col("hypothesis"),
        col("status"),
        col("reason"),
    );
    r.records()
        .map(|x| {
            let x = x.unwrap();
            (
                x[o].parse().unwrap(),
                x[e].to_string(),
                x[hy].to_string(),
                x[s].to_string(),
                x[re].to_string(),
            )
        })
        .collect()
}

/// Checks the row structure: events in input order, each with one row per
/// hypothesis in order, every status known; returns the number of events.
fn check_structure(ctx: &str, rows: &[(u64, String, String, String, String)]) -> usize {
    let known = known_statuses();
    assert_eq!(
        rows.len() % HYPOTHESES.len(),
        0,
        "{ctx}: partial event in {rows:?}"
    );
    for (i, chunk) in rows.chunks(HYPOTHESES.len()).enumerate() {
        for (row, h) in chunk.iter().zip(HYPOTHESES) {
            assert_eq!(row.0, i as u64, "{ctx}: ordinal");
            assert_eq!(row.2, h, "{ctx}: hypothesis order");
            assert_eq!(row.1, chunk[0].1, "{ctx}: event id within one event");
            assert!(
                known.contains(&row.3.as_str()),
                "{ctx}: unknown status '{}'",
                row.3
            );
            if row.3 != "ok" && row.3 != "no_valid_assignment" {
                assert!(
                    !row.4.is_empty(),
                    "{ctx}: status {} without a reason",
                    row.3
                );
            }
        }
        // Bad input is bad for every hypothesis, for the same reason.
        let bad = chunk.iter().filter(|r| r.3 == "bad_input").count();
        assert!(
            bad == 0 || bad == HYPOTHESES.len(),
            "{ctx}: mixed bad_input"
        );
    }
    rows.len() / HYPOTHESES.len()
}

/// Records the library reader yields for a file under a policy (including
/// the bad event that ends a stop run), and whether the stream broke.
fn reader_count(path: &Path, policy: ErrorPolicy) -> Option<(usize, bool)> {
    reader_counts(path, policy).map(|(n, _, broke)| (n, broke))
}

/// As [`reader_count`], with the number of good (parsed) events too.
fn reader_counts(path: &Path, policy: ErrorPolicy) -> Option<(usize, usize, bool)> {
    let reader = EventReader::open(path, ReadOptions::default().with_policy(policy)).ok()?;
    let mut n = 0;
    let mut good = 0;
    let mut broke = false;
    for r in reader {
        match r {
            Ok(record) => {
                n += 1;
                good += usize::from(matches!(record, quarry::csv::Record::Good(_)));
            }
            Err(_) => broke = true,
        }
    }
    Some((n, good, broke))
}

/// The exit code of a skip run that did not break: 6 when no event could
/// be read (docs/cli.md, exit codes), else 0.
fn skip_code(good: usize) -> i32 {
    if good == 0 {
        6
    } else {
        0
    }
}

/// "N events read" from the run summary on stderr.
fn events_read(stderr: &str) -> u64 {
    let line = stderr
        .lines()
        .find(|l| l.starts_with("quarry reco: "))
        .unwrap_or_else(|| panic!("no summary in {stderr}"));
    line["quarry reco: ".len()..]
        .split(' ')
        .next()
        .unwrap()
        .parse()
        .unwrap()
}

#[test]
fn every_event_of_the_corpus_gets_one_row_per_hypothesis() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/hostile");
    let mut files = 0;
    for entry in std::fs::read_dir(&dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "md") {
            continue;
        }
        files += 1;
        let ctx = path.file_name().unwrap().to_string_lossy().into_owned();
        // Skip: every event the reader yields becomes rows, whatever it is.
        let out = reco(&path, "skip");
        let stderr = String::from_utf8_lossy(&out.stderr);
        let rs = rows(&out.stdout);
        let n = check_structure(&ctx, &rs);
        match reader_counts(&path, ErrorPolicy::Skip) {
            None => {
                // Unusable header: no events, exit 2.
                assert_eq!(out.status.code(), Some(2), "{ctx}");
                assert_eq!(n, 0, "{ctx}");
            }
            Some((records, good, broke)) => {
                assert_eq!(n, records, "{ctx}: rows/hypotheses vs records read");
                assert_eq!(events_read(&stderr), records as u64, "{ctx}: summary count");
                let want = if broke { 2 } else { skip_code(good) };
                assert_eq!(out.status.code(), Some(want), "{ctx}");
            }
        }
        // Stop: the rows before the first bad event, then exit 2.
        let out = reco(&path, "stop");
        let rs = rows(&out.stdout);
        let n_stop = check_structure(&ctx, &rs);
        assert!(
            rs.iter().all(|r| r.3 != "bad_input"),
            "{ctx}: stop wrote a bad_input row"
        );
        if let Some((records, broke)) = reader_count(&path, ErrorPolicy::Stop) {
            let reader = EventReader::open(&path, ReadOptions::default()).unwrap();
            let first_bad = reader
                .filter_map(Result::ok)
                .position(|r| matches!(r, quarry::csv::Record::Bad(_)));
            match first_bad {
                Some(i) => {
                    assert_eq!(n_stop, i, "{ctx}: rows before the first bad event");
                    assert_eq!(out.status.code(), Some(2), "{ctx}");
                }
                None => {
                    assert_eq!(n_stop, records, "{ctx}");
                    let want = if broke { 2 } else { skip_code(records) };
                    assert_eq!(out.status.code(), Some(want), "{ctx}");
                }
            }
        }
    }
    assert!(files >= 19, "only {files} corpus files found");
}

/// How one generated event is damaged (or not).
#[derive(Clone, Copy, Debug)]
enum Damage {
    None,
    NanEta,
    TextPt,
    NegativePt,
    UnknownKind,
    MissingField,
    BtagAboveOne,
    SecondMet,
    ChargeTwo,
    OpenQuote,
    BadId,
    EmptyKind,
}

impl Damage {
    /// The reader's reason category the damaged event must get.
    fn category(self) -> Option<&'static str> {
        Some(match self {
            Damage::None => return None,
            Damage::NanEta => "is not a finite number",
            Damage::TextPt => "is not a number",
            Damage::NegativePt => "is negative",
            Damage::UnknownKind => "is not a known kind",
            Damage::MissingField => "fields, the header has 10",
            Damage::BtagAboveOne => "is outside [0, 1]",
            Damage::SecondMet => "second met row",
            Damage::ChargeTwo => "is not a charge of -1 or +1",
            Damage::OpenQuote => "unterminated quoted field",
            Damage::BadId => "is not an unsigned integer event id",
            Damage::EmptyKind => "is empty",
        })
    }
}

fn damage() -> impl Strategy<Value = Damage> {
    prop_oneof![
        8 => Just(Damage::None),
        1 => Just(Damage::NanEta),
        1 => Just(Damage::TextPt),
        1 => Just(Damage::NegativePt),
        1 => Just(Damage::UnknownKind),
        1 => Just(Damage::MissingField),
        1 => Just(Damage::BtagAboveOne),
        1 => Just(Damage::SecondMet),
        1 => Just(Damage::ChargeTwo),
        1 => Just(Damage::OpenQuote),
        1 => Just(Damage::BadId),
        1 => Just(Damage::EmptyKind),
    ]
}

/// One event's rows: `n_jets` jets, a muon, MET; the damage goes on the
/// row `at` (modulo the row count).
fn event_rows(id: u64, n_jets: usize, d: Damage, at: usize) -> Vec<String> {
    let mut rows: Vec<String> = (0..n_jets)
        .map(|j| {
            format!(
                "{id},jet,{},{},{},{},{},,,1",
                30.0 + 17.0 * j as f64,
                -2.0 + 0.6 * j as f64,
                -3.0 + 0.9 * j as f64,
                4.0 + j as f64,
                if j % 3 == 0 { 0.9 } else { 0.1 }
            )
        })
        .collect();
    rows.push(format!("{id},muon,45,0.3,1.1,0.10566,,-1,,1"));
    rows.push(format!("{id},met,60,,-2.0,,,,,1"));
    let k = at % rows.len();
    let is_met = k == rows.len() - 1;
    let mut f: Vec<String> = rows[k].split(',').map(str::to_string).collect();
    match d {
        Damage::None => {}
        Damage::NanEta if !is_met => f[3] = "NaN".into(),
        Damage::NanEta => f[4] = "nan".into(),
        Damage::TextPt => f[2] = "12.5GeV".into(),
        Damage::NegativePt => f[2] = "-3".into(),
        Damage::UnknownKind => f[1] = "photon".into(),
        Damage::MissingField => {
            f.pop();
        }
        Damage::BtagAboveOne => {
            f[1] = "jet".into();
            f[3] = "0.5".into();
            f[5] = "5".into();
            f[6] = "1.5".into();
            f[7] = String::new();
        }
        Damage::SecondMet => {}
        Damage::ChargeTwo => {
            f[1] = "muon".into();
            f[3] = "0.5".into();
            f[5] = "0.1".into();
            f[6] = String::new();
            f[7] = "2".into();
        }
        Damage::OpenQuote => f[8] = "\"h.b".into(),
        Damage::BadId => {}
        Damage::EmptyKind => f[1] = String::new(),
    }
    rows[k] = f.join(",");
    if let Damage::SecondMet = d {
        rows.push(format!("{id},met,10,,1.0,,,,,1"));
    }
    if let Damage::BadId = d {
        for r in &mut rows {
            *r = format!("e{r}");
        }
    }
    rows
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, .. ProptestConfig::default() })]

    /// A random mixture of good and malformed events: under skip, one row
    /// per event per hypothesis, `bad_input` exactly for the damaged events
    /// (with the matching reason), never for the good ones; under stop, the
    /// rows of the events before the first damaged one, then exit 2.
    #[test]
    fn random_mixtures_account_for_every_event(
        events in proptest::collection::vec((damage(), 0usize..8, any::<usize>()), 1..25),
        gzip in any::<bool>(),
        crlf in any::<bool>(),
    ) {
        let end = if crlf { "\r\n" } else { "\n" };
        let mut text = format!("{HEADER}{end}");
        for (i, (d, n_jets, at)) in events.iter().enumerate() {
            for r in event_rows(100 + i as u64, *n_jets, *d, *at) {
                text += &r;
                text += end;
            }
        }
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join(if gzip { "mix.csv.gz" } else { "mix.csv" });
        if gzip {
            let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
            gz.write_all(text.as_bytes()).unwrap();
            std::fs::write(&path, gz.finish().unwrap()).unwrap();
        } else {
            std::fs::write(&path, &text).unwrap();
        }

        let out = reco(&path, "skip");
        let good = events.iter().filter(|(d, _, _)| d.category().is_none()).count();
        prop_assert_eq!(out.status.code(), Some(skip_code(good)), "{}", String::from_utf8_lossy(&out.stderr));
        let rs = rows(&out.stdout);
        let n = check_structure("mix/skip", &rs);
        prop_assert_eq!(n, events.len(), "rows = events × hypotheses");
        for (i, (d, _, _)) in events.iter().enumerate() {
            let row = &rs[i * HYPOTHESES.len()];
            match d.category() {
                None => {
                    prop_assert_ne!(&row.3, "bad_input", "good event {} rejected: {}", i, row.4);
                    prop_assert_eq!(&row.1, &(100 + i).to_string());
                }
                Some(what) => {
                    prop_assert_eq!(&row.3, "bad_input", "damaged event {} ({:?}) accepted", i, d);
                    prop_assert!(row.4.contains(what), "event {} ({:?}): reason '{}'", i, d, row.4);
                    let id = if matches!(d, Damage::BadId) { String::new() } else { (100 + i).to_string() };
                    prop_assert_eq!(&row.1, &id);
                }
            }
        }

        let out = reco(&path, "stop");
        let first_bad = events.iter().position(|(d, _, _)| d.category().is_some());
        let rs = rows(&out.stdout);
        let n = check_structure("mix/stop", &rs);
        prop_assert_eq!(n, first_bad.unwrap_or(events.len()));
        prop_assert_eq!(out.status.code(), Some(if first_bad.is_some() { 2 } else { 0 }));
    }
}
