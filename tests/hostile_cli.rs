//! The hostile-input corpus (`tests/hostile/`, described in its README.md)
//! run through the `quarry` binary under both error policies.
//!
//! For every case the table pins the exact exit code, the exact error line
//! on stderr, and the exact `(event, status, reason)` of every output row of
//! the first hypothesis; every event appears once per hypothesis. Each case
//! runs four times: `--on-bad skip` and `--on-bad stop`, each writing to a
//! file (`-o`, atomic: present only after exit 0, no temporary left) and to
//! stdout (which receives the rows written before a failure).
//!
//! Large cases (10 000 jets in one event, a 10 MB line) are generated at run
//! time instead of being committed.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_quarry");
const HYPOTHESES: [&str; 2] = ["ttbar-ljets", "bwbw-ljets"];
const HEADER: &str = "event,kind,pt,eta,phi,mass,btag,charge,truth,weight";

fn corpus(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/hostile")
        .join(name)
}

/// One output row, as the test compares it.
#[derive(Clone, Debug, PartialEq)]
struct Row {
    ordinal: u64,
    event: String,
    hypothesis: String,
    status: String,
    reason: String,
}

/// What a run must produce.
struct Expect {
    code: i32,
    /// The exact `quarry: error: …` line (without the prefix), if any.
    error: Option<String>,
    /// `(event, status, reason)` of each row of the first hypothesis.
    rows: Vec<(&'static str, &'static str, String)>,
    /// A warning line that must appear on stderr.
    warning: Option<&'static str>,
}

fn parse_rows(csv_text: &[u8]) -> Vec<Row> {
    if csv_text.is_empty() {
        return Vec::new();
    }
    let mut r = csv::Reader::from_reader(csv_text);
    let headers = r.headers().expect("output header").clone();
    let col = |name: &str| {
        headers
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("output has no column '{name}': {headers:?}"))
    };
    let (o, e, h, s, re) = (
        col("ordinal"),
        col("event"),
        col("hypothesis"),
        col("status"),
        col("reason"),
    );
    r.records()
        .map(|rec| {
            let rec = rec.expect("output row parses as CSV");
            Row {
                ordinal: rec[o].parse().expect("ordinal is an integer"),
                event: rec[e].to_string(),
                hypothesis: rec[h].to_string(),
                status: rec[s].to_string(),
                reason: rec[re].to_string(),
            }
        })
        .collect()
}

/// Runs `quarry reco` with a hang guard: a run that has not finished in
/// `limit` is killed and fails the test (quarry bounds the work per event,
/// so every case here finishes in well under a second in a normal build).
fn run(args: &[&str], limit: Duration) -> Output {
    let mut child = Command::new(BIN)
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start quarry");
    // Drain the pipes on threads so a large output cannot block the child.
    let mut out = child.stdout.take().unwrap();
    let mut err = child.stderr.take().unwrap();
    let t_out = std::thread::spawn(move || {
        let mut v = Vec::new();
        std::io::Read::read_to_end(&mut out, &mut v).unwrap();
        v
    });
    let t_err = std::thread::spawn(move || {
        let mut v = Vec::new();
        std::io::Read::read_to_end(&mut err, &mut v).unwrap();
        v
    });
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("quarry {args:?} did not finish within {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    Output {
        status,
        stdout: t_out.join().unwrap(),
        stderr: t_err.join().unwrap(),
    }
}

fn error_line(stderr: &str) -> Option<String> {
    stderr
        .lines()
        .find_map(|l| l.strip_prefix("quarry: error: "))
        .map(str::to_string)
}

/// Runs one case under one policy, to a file and to stdout, and checks
/// everything `expect` says (rows: all of them after exit 0; under a
/// failure, stdout holds the rows before it and the file does not exist).
fn check_case(input: &Path, policy: &str, expect: &Expect) {
    let name = input.file_name().unwrap().to_string_lossy().into_owned();
    let dir = tempfile::tempdir().unwrap();
    let out_path = dir.path().join("out.csv");
    let input_s = input.to_str().unwrap();
    let mut args = vec!["reco", input_s, "--on-bad", policy, "--no-progress"];
    for h in HYPOTHESES {
        args.extend(["-H", h]);
    }
    let ctx = format!("{name} --on-bad {policy}");
    for to_file in [true, false] {
        let mut a = args.clone();
        let out_s = out_path.to_str().unwrap().to_string();
        a.extend(["-o", if to_file { &out_s } else { "-" }]);
        let limit = Duration::from_secs(120);
        let out = run(&a, limit);
        let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
        assert_eq!(
            out.status.code(),
            Some(expect.code),
            "{ctx}: exit code; stderr:\n{stderr}"
        );
        let want_error = expect
            .error
            .as_ref()
            .map(|e| e.replace("{DIR}", &dir_of(input)));
        assert_eq!(error_line(&stderr), want_error, "{ctx}: error line");
        if let Some(w) = expect.warning {
            assert!(
                stderr
                    .lines()
                    .any(|l| l == format!("quarry: warning: {}{w}", dir_of(input))),
                "{ctx}: missing warning '{w}' in\n{stderr}"
            );
        }
        assert!(!stderr.contains("panicked"), "{ctx}: panic:\n{stderr}");
        let rows = if to_file {
            let leftovers: Vec<String> = std::fs::read_dir(dir.path())
                .unwrap()
                .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
                // The manifest is written beside a complete output (docs/manifest.md).
                .filter(|n| n != "out.csv" && n != "out.csv.manifest.json")
                .collect();
            assert!(
                leftovers.is_empty(),
                "{ctx}: temporary files left: {leftovers:?}"
            );
            // Exit 6 (no event could be read) still writes the output:
            // every event is accounted for.
            if expect.code != 0 && expect.code != 6 {
                assert!(
                    !out_path.exists(),
                    "{ctx}: a failed run left output under the final name"
                );
                continue;
            }
            let rows = parse_rows(&std::fs::read(&out_path).unwrap());
            std::fs::remove_file(&out_path).unwrap();
            std::fs::remove_file(dir.path().join("out.csv.manifest.json")).unwrap();
            rows
        } else {
            parse_rows(&out.stdout)
        };
        check_rows(&ctx, &rows, &expect.rows, &dir_of(input));
    }
}

fn dir_of(input: &Path) -> String {
    format!("{}/", input.parent().unwrap().display())
}

/// Every event appears once per hypothesis, in hypothesis order, ordinals
/// 0, 1, 2, …; the first hypothesis's rows are exactly `want`; bad input is
/// bad for every hypothesis, with the same reason.
fn check_rows(ctx: &str, rows: &[Row], want: &[(&str, &str, String)], dir: &str) {
    assert_eq!(
        rows.len(),
        want.len() * HYPOTHESES.len(),
        "{ctx}: rows = events × hypotheses; got {rows:#?}"
    );
    for (i, chunk) in rows.chunks(HYPOTHESES.len()).enumerate() {
        let (event, status, reason) = &want[i];
        let reason = reason.replace("{DIR}", dir);
        for (row, h) in chunk.iter().zip(HYPOTHESES) {
            assert_eq!(row.ordinal, i as u64, "{ctx}: ordinal");
            assert_eq!(row.hypothesis, h, "{ctx}: hypothesis order");
            assert_eq!(&row.event, event, "{ctx}: event id of row {i}");
            assert!(!row.status.is_empty(), "{ctx}: row without status");
            if *status == "bad_input" {
                assert_eq!(row.status, "bad_input", "{ctx}: row {i}");
                assert_eq!(row.reason, reason, "{ctx}: reason of row {i}");
            } else {
                assert_ne!(row.status, "bad_input", "{ctx}: row {i}");
            }
        }
        let first = &chunk[0];
        assert_eq!(
            (first.status.as_str(), first.reason.as_str()),
            (*status, reason.as_str()),
            "{ctx}: status of event {event} (row {i})"
        );
    }
}

/// The rows of `want` before the first bad one: what stdout holds when
/// `--on-bad stop` ends the run.
fn before_first_bad(
    want: &[(&'static str, &'static str, String)],
) -> Vec<(&'static str, &'static str, String)> {
    want.iter()
        .take_while(|(_, s, _)| *s != "bad_input")
        .cloned()
        .collect()
}

fn ok(id: &'static str) -> (&'static str, &'static str, String) {
    (id, "ok", String::new())
}

fn bad(id: &'static str, reason: &str) -> (&'static str, &'static str, String) {
    (id, "bad_input", reason.to_string())
}

/// A case where both policies give the same result.
fn same(
    code: i32,
    error: Option<String>,
    rows: Vec<(&'static str, &'static str, String)>,
) -> [Expect; 2] {
    [
        Expect {
            code,
            error: error.clone(),
            rows: rows.clone(),
            warning: None,
        },
        Expect {
            code,
            error,
            rows,
            warning: None,
        },
    ]
}

/// A case with one bad event: skip → exit 0 with a bad_input row; stop →
/// exit 2 with the reader's message and the rows before it.
fn one_bad(file: &str, rows: Vec<(&'static str, &'static str, String)>) -> [Expect; 2] {
    let (id, _, reason) = rows.iter().find(|r| r.1 == "bad_input").unwrap().clone();
    let id_text = if id.is_empty() {
        // An unparseable id is quoted in the message.
        "event 'x7'".to_string()
    } else {
        format!("event {id}")
    };
    let _ = file;
    let stop_error =
        format!("{reason} ({id_text}; stopped at the first bad event, use --on-bad skip to go on)");
    [
        Expect {
            code: 0,
            error: None,
            rows: rows.clone(),
            warning: None,
        },
        Expect {
            code: 2,
            error: Some(stop_error),
            rows: before_first_bad(&rows),
            warning: None,
        },
    ]
}

/// The committed corpus: file → [skip, stop] expectations. Reasons are
/// the reader's messages (docs/csv-format.md, "Errors"); `{DIR}` stands for
/// the corpus directory, which the messages name.
fn table() -> Vec<(&'static str, [Expect; 2])> {
    let d = |s: &str| format!("{{DIR}}{s}");
    vec![
        (
            "empty.csv",
            same(2, Some(d("empty.csv: empty file: expected a header line naming the columns")), vec![]),
        ),
        (
            "header_only.csv",
            {
                // docs/cli.md, exit codes: 6 = no event could be read.
                let mut e = same(6, Some("the inputs hold no event".into()), vec![]);
                for x in &mut e {
                    x.warning = Some("header_only.csv: no events (header only)");
                }
                e
            },
        ),
        (
            "missing_column.csv",
            same(2, Some(d("missing_column.csv:1: header: missing required column 'eta' (required: event, kind, pt, eta, phi, and mass or energy)")), vec![]),
        ),
        (
            "bad_utf8_header.csv",
            same(2, Some(d("bad_utf8_header.csv:1: header: column 7 name is not valid UTF-8")), vec![]),
        ),
        (
            "non_numeric.csv",
            one_bad("non_numeric.csv", vec![ok("1"), bad("2", &d("non_numeric.csv:9: column 'pt': 'abc' is not a number")), ok("3")]),
        ),
        (
            "nan_field.csv",
            one_bad("nan_field.csv", vec![ok("1"), bad("2", &d("nan_field.csv:10: column 'eta': 'NaN' is not a finite number")), ok("3")]),
        ),
        (
            "inf_field.csv",
            one_bad("inf_field.csv", vec![
                ok("1"),
                bad("2", &d("inf_field.csv:8: column 'pt': 'inf' is not a finite number")),
                bad("3", &d("inf_field.csv:17: column 'mass': '1e999' is not a finite number")),
                ok("4"),
            ]),
        ),
        (
            // Finite values whose four-momentum overflows f64 (found by the
            // pipeline fuzz target; fuzz/regressions/pipeline/overflow-mass).
            "overflow.csv",
            one_bad(
                "overflow.csv",
                vec![
                    ok("1"),
                    bad("2", &d("overflow.csv:11: jet four-momentum overflows (px, py, pz, E) = (-51.66459732378563, 141.88646652648407, -35.03701376067386, inf): values too large")),
                    bad("3", &d("overflow.csv:15: jet four-momentum overflows (px, py, pz, E) = (9.393727128473789e299, 3.4289780745545135e299, inf, inf): values too large")),
                    ok("4"),
                ],
            ),
        ),
        (
            "negative_pt.csv",
            one_bad("negative_pt.csv", vec![ok("1"), bad("2", &d("negative_pt.csv:11: column 'pt': '-151' is negative (expected pt ≥ 0)")), ok("3")]),
        ),
        (
            "negative_energy.csv",
            one_bad("negative_energy.csv", vec![
                ("1", "too_few_jets", "needs 4 jet(s), has 1".to_string()),
                bad("2", &d("negative_energy.csv:4: column 'energy': '-60' is negative (expected energy ≥ 0)")),
                bad("3", &d("negative_energy.csv:6: column 'energy': '40' is below the momentum |p| = 50.25020840279018 GeV (energy must be ≥ |p|)")),
            ]),
        ),
        (
            "unknown_kind.csv",
            one_bad("unknown_kind.csv", vec![ok("1"), bad("2", &d("unknown_kind.csv:12: column 'kind': 'tau' is not a known kind (expected jet, fatjet, electron, muon or met)")), ok("3")]),
        ),
        (
            "split_event.csv",
            one_bad("split_event.csv", vec![
                ("1", "too_few_jets", "needs 4 jet(s), has 3".to_string()),
                ok("2"),
                bad("1", &d("split_event.csv:11: column 'event': '1' appeared earlier in the file: rows of one event must be contiguous")),
            ]),
        ),
        (
            "duplicate_id.csv",
            one_bad("duplicate_id.csv", vec![
                bad("4", &d("duplicate_id.csv:13: second met row in this event (the first is on line 7)")),
                ok("5"),
            ]),
        ),
        (
            "bad_event_id.csv",
            one_bad("bad_event_id.csv", vec![ok("1"), bad("", &d("bad_event_id.csv:8: column 'event': 'x7' is not an unsigned integer event id")), ok("3")]),
        ),
        (
            "bad_utf8_field.csv",
            one_bad("bad_utf8_field.csv", vec![ok("1"), bad("2", &d("bad_utf8_field.csv:8: column 'truth': 'h.\u{FFFD}\u{FFFD}b' is not valid UTF-8")), ok("3")]),
        ),
        (
            "field_count.csv",
            one_bad("field_count.csv", vec![ok("1"), bad("2", &d("field_count.csv:9: row has 9 fields, the header has 10")), ok("3")]),
        ),
        (
            "unterminated_quote.csv",
            one_bad("unterminated_quote.csv", vec![ok("1"), bad("2", &d("unterminated_quote.csv:12: unterminated quoted field")), ok("3")]),
        ),
        ("crlf.csv", same(0, None, vec![ok("1"), ok("2")])),
        ("bom_comments.csv", same(0, None, vec![ok("1"), ok("2")])),
        (
            "truncated.csv.gz",
            {
                // 40 events were compressed; the file keeps 60 % of the
                // bytes. Events 1–18 decode fully, event 19 breaks off:
                // skip reports it (truncated) and then fails on the broken
                // stream (exit 2, no output file); stop fails at event 19.
                let mut rows: Vec<_> = ["1", "2", "3", "4", "5", "6", "7", "8", "9", "10", "11", "12", "13", "14", "15", "16", "17", "18"]
                    .into_iter()
                    .map(ok)
                    .collect();
                let stop_rows = rows.clone();
                rows.push(bad("19", &d("truncated.csv.gz:116: the input broke off while this event was being read")));
                [
                    Expect {
                        code: 2,
                        error: Some(d("truncated.csv.gz:116: read error (truncated or corrupt gzip stream): incomplete deflate stream")),
                        rows,
                        warning: None,
                    },
                    Expect {
                        code: 2,
                        error: Some(d("truncated.csv.gz:116: the input broke off while this event was being read (event 19; stopped at the first bad event, use --on-bad skip to go on)")),
                        rows: stop_rows,
                        warning: None,
                    },
                ]
            },
        ),
    ]
}

#[test]
fn every_corpus_case_gives_its_exact_result_under_both_policies() {
    for (file, [skip, stop]) in table() {
        let path = corpus(file);
        assert!(path.exists(), "corpus file {file} is missing");
        check_case(&path, "skip", &skip);
        check_case(&path, "stop", &stop);
    }
}

/// Every file in tests/hostile/ has an entry in the table (a new corpus file
/// cannot go untested).
#[test]
fn every_corpus_file_is_in_the_table() {
    let names: Vec<&str> = table().iter().map(|(f, _)| *f).collect();
    for entry in std::fs::read_dir(corpus("")).unwrap() {
        let name = entry.unwrap().file_name().to_string_lossy().into_owned();
        if name == "README.md" {
            continue;
        }
        assert!(
            names.contains(&name.as_str()),
            "tests/hostile/{name} has no expected result"
        );
    }
}

fn good_event(id: u64) -> String {
    format!(
        "{id},jet,212.4,0.41,-2.71,14.2,0.93,,,1\n\
         {id},jet,96.3,-0.88,0.35,9.1,0.08,,,1\n\
         {id},jet,74.9,1.62,0.97,7.7,0.12,,,1\n\
         {id},jet,151.0,-0.23,1.92,11.8,0.88,,,1\n\
         {id},muon,88.2,0.12,2.44,0.10566,,-1,,1\n\
         {id},met,120.7,,-0.56,,,,,1\n"
    )
}

/// 10 000 jets in one event: a clear too-many-objects status (the reader
/// stops storing its rows), the events around it unaffected. An event just
/// under the limit (990 jets) gets an ordinary search status: the search
/// takes only the leading jets.
#[test]
fn ten_thousand_jets_in_one_event() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("many_jets.csv");
    let mut text = format!("{HEADER}\n");
    text += &good_event(1);
    for i in 0..10_000 {
        text += &format!(
            "2,jet,{},{},{},5,0.5,,,1\n",
            20.0 + (i % 500) as f64,
            (i % 50) as f64 / 10.0 - 2.5,
            (i % 63) as f64 / 10.0 - 3.1
        );
    }
    text += "2,muon,40,0.1,0.2,0.1,,1,,1\n2,met,30,,1,,,,,1\n";
    for i in 0..990 {
        text += &format!(
            "3,jet,{},{},{},5,{},,,1\n",
            20.0 + (i % 400) as f64,
            (i % 50) as f64 / 10.0 - 2.5,
            (i % 63) as f64 / 10.0 - 3.1,
            if i % 7 == 0 { 0.95 } else { 0.05 }
        );
    }
    text += "3,muon,40,0.1,0.2,0.1,,1,,1\n3,met,30,,1,,,,,1\n";
    text += &good_event(4);
    std::fs::write(&path, text).unwrap();
    // Line of event 2's 1001st row: header (1) + event 1 (6) + 1001.
    let reason =
        "many_jets.csv:1008: event has more than 1000 rows (the max_objects_per_event limit)";
    let [skip, stop] = one_bad(
        "many_jets.csv",
        vec![
            ok("1"),
            bad("2", &format!("{{DIR}}{reason}")),
            ok("3"),
            ok("4"),
        ],
    );
    check_case(&path, "skip", &skip);
    check_case(&path, "stop", &stop);
}

/// A 10 MB line: the event it belongs to is rejected as a syntax error
/// (lines are limited to 1 MiB and the rest is skipped unread into
/// memory); the next event reads normally.
#[test]
fn ten_megabyte_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("long_line.csv");
    let mut text = format!("{HEADER}\n");
    text += &good_event(1);
    text += "2,jet,50,0.1,0.2,5,0.5,,h.";
    text += &"b".repeat(10 << 20);
    text += ",1\n";
    text += &good_event(2)
        .lines()
        .skip(1)
        .map(|l| format!("{l}\n"))
        .collect::<String>();
    text += &good_event(3);
    std::fs::write(&path, text).unwrap();
    let reason = "long_line.csv:8: line longer than 1048576 bytes";
    let [skip, stop] = one_bad(
        "long_line.csv",
        vec![ok("1"), bad("2", &format!("{{DIR}}{reason}")), ok("3")],
    );
    check_case(&path, "skip", &skip);
    check_case(&path, "stop", &stop);
}
