//! Exit codes, error messages and the bad-event policies of the `quarry`
//! binary (see docs/cli.md, "Exit codes").

use std::path::Path;
use std::process::{Command, Output};

fn quarry(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_quarry"))
        .args(args)
        .output()
        .expect("run quarry")
}

fn code(out: &Output) -> i32 {
    out.status.code().expect("exited normally")
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn fixture(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(name)
        .to_string_lossy()
        .into_owned()
}

#[test]
fn help_on_every_subcommand_has_a_worked_example_and_exits_0() {
    for args in [
        &["--help"][..],
        &["reco", "--help"],
        &["presets", "list", "--help"],
        &["presets", "show", "--help"],
        &["generate", "--help"],
        &["eval", "--help"],
    ] {
        let out = quarry(args);
        assert_eq!(code(&out), 0, "{args:?}");
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(text.contains("Example"), "{args:?} has no example:\n{text}");
    }
    let reco = quarry(&["reco", "--help"]);
    let text = String::from_utf8_lossy(&reco.stdout);
    assert!(text.contains("Exit codes") && text.contains("3  output error"));
}

#[test]
fn usage_errors_exit_1() {
    let bad = fixture("cli_bad_events.csv");
    for args in [
        &["reco"][..],
        &["reco", &bad, "--no-such-option"],
        &["reco", &bad, "-H", "no-such-preset"],
        &["reco", &bad, "-H", "/nonexistent/hypothesis.toml"],
        &["reco", &bad, "--shard", "3/3"],
        &["reco", &bad, "--threads", "0"],
        &["reco", &bad, "--btag-threshold", "1.5"],
        &["reco", "-", "-"],
        &["presets", "show", "nope"],
        &["generate", "--process", "ttbar", "--mass", "900"],
        &["generate", "--process", "vlq-t", "--decay", "tW"],
        &["nonsense"],
    ] {
        let out = quarry(args);
        assert_eq!(code(&out), 1, "{args:?}: {}", stderr(&out));
    }
    let out = quarry(&["reco", &bad, "-H", "no-such-preset"]);
    assert!(stderr(&out).contains("unknown preset 'no-such-preset'"));
}

#[test]
fn skip_policy_accounts_for_bad_events() {
    let dir = tempfile::tempdir().unwrap();
    let out_path = dir.path().join("out.csv");
    let out = quarry(&[
        "reco",
        &fixture("cli_bad_events.csv"),
        "-H",
        "ttbar-ljets",
        "-H",
        "bwbw-ljets",
        "-o",
        out_path.to_str().unwrap(),
    ]);
    assert_eq!(code(&out), 0, "{}", stderr(&out));
    let mut r = csv::Reader::from_path(&out_path).unwrap();
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    // 3 input events × 2 hypotheses, in input order.
    assert_eq!(rows.len(), 6);
    let col = |name: &str| {
        quarry::output::COLUMNS
            .iter()
            .position(|c| *c == name)
            .unwrap()
    };
    let events: Vec<&str> = rows.iter().map(|r| &r[col("event")]).collect();
    assert_eq!(events, ["1", "1", "2", "2", "3", "3"]);
    for row in &rows[2..4] {
        assert_eq!(&row[col("status")], "bad_input");
        // The reason names file, line and column of the broken field.
        let reason = &row[col("reason")];
        assert!(
            reason.contains("cli_bad_events.csv:7: column 'pt': 'abc' is not a number"),
            "{reason}"
        );
        assert_eq!(&row[col("ht")], "");
    }
    for row in rows.iter().filter(|r| &r[col("event")] != "2") {
        assert_ne!(&row[col("status")], "bad_input");
    }
    let summary = stderr(&out);
    assert!(summary.contains("3 events read"), "{summary}");
    assert!(summary.contains("not-a-number 1"), "{summary}");
    assert!(summary.contains("events/s"), "{summary}");
}

#[test]
fn stop_policy_ends_at_the_first_bad_event_with_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let out_path = dir.path().join("out.csv");
    let out = quarry(&[
        "reco",
        &fixture("cli_bad_events.csv"),
        "--on-bad",
        "stop",
        "-o",
        out_path.to_str().unwrap(),
    ]);
    assert_eq!(code(&out), 2, "{}", stderr(&out));
    let err = stderr(&out);
    let line = err
        .lines()
        .find(|l| l.starts_with("quarry: error:"))
        .expect("one error line");
    assert!(
        line.contains("cli_bad_events.csv:7: column 'pt': 'abc' is not a number"),
        "{line}"
    );
    assert!(line.contains("event 2"), "{line}");
    // Atomic output: nothing under the final name after a failed run.
    assert!(!out_path.exists());
}

#[test]
fn input_errors_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("missing.csv");
    let out = quarry(&["reco", missing.to_str().unwrap(), "-q"]);
    assert_eq!(code(&out), 2);
    assert!(stderr(&out).contains("cannot open"), "{}", stderr(&out));

    let no_header = dir.path().join("noheader.csv");
    std::fs::write(&no_header, "event,kind,pt\n1,jet,30\n").unwrap();
    let out = quarry(&["reco", no_header.to_str().unwrap(), "-q"]);
    assert_eq!(code(&out), 2, "{}", stderr(&out));

    // A gzip stream cut in the middle: the stream is broken (exit 2 even
    // under skip), and the rows before the break were not committed.
    let gz = dir.path().join("t.csv.gz");
    let g = quarry(&["generate", "-n", "300", "-o", gz.to_str().unwrap()]);
    assert_eq!(code(&g), 0);
    let bytes = std::fs::read(&gz).unwrap();
    let cut = dir.path().join("cut.csv.gz");
    std::fs::write(&cut, &bytes[..bytes.len() / 2]).unwrap();
    let out_path = dir.path().join("o.csv");
    let out = quarry(&[
        "reco",
        cut.to_str().unwrap(),
        "-o",
        out_path.to_str().unwrap(),
    ]);
    assert_eq!(code(&out), 2, "{}", stderr(&out));
    assert!(stderr(&out).contains("cut.csv.gz"), "{}", stderr(&out));
    assert!(!out_path.exists());
}

#[test]
fn output_errors_exit_3() {
    let dir = tempfile::tempdir().unwrap();
    let out_path = dir.path().join("no-such-dir").join("out.csv");
    let out = quarry(&[
        "reco",
        &fixture("cli_bad_events.csv"),
        "-o",
        out_path.to_str().unwrap(),
    ]);
    assert_eq!(code(&out), 3, "{}", stderr(&out));
    let gen = quarry(&["generate", "-n", "5", "-o", out_path.to_str().unwrap()]);
    assert_eq!(code(&gen), 3);
}

#[test]
fn device_outputs_are_refused_not_replaced() {
    // Writing atomically means renaming a temporary file over the target:
    // over /dev/null that would replace the device, so it is refused.
    let out = quarry(&["reco", &fixture("cli_bad_events.csv"), "-o", "/dev/null"]);
    assert_eq!(code(&out), 1, "{}", stderr(&out));
    let meta = std::fs::metadata("/dev/null").unwrap();
    assert!(!meta.is_file());
}

#[test]
fn stdin_input_and_stdout_output() {
    let input = std::fs::read(fixture("cli_bad_events.csv")).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_quarry"))
        .args(["reco", "-", "-q"])
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    use std::io::Write;
    child.stdin.take().unwrap().write_all(&input).unwrap();
    let out = child.wait_with_output().unwrap();
    assert_eq!(code(&out), 0);
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(text.lines().count(), 1 + 3);
    assert!(text
        .lines()
        .nth(2)
        .unwrap()
        .contains("<stdin>:7: column 'pt'"));
}
