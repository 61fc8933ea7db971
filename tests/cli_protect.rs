//! What the `quarry` binary refuses before it runs, and how it reports runs
//! that produced nothing usable (docs/cli.md, "Exit codes" and "Outputs").

use std::path::{Path, PathBuf};
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

/// One good lepton+jets event (the README's example event).
const GOOD: &str = "event,kind,pt,eta,phi,mass,btag,charge
1001,jet,212.4,0.41,-2.71,14.2,0.93,
1001,jet,96.3,-0.88,0.35,9.1,0.08,
1001,jet,74.9,1.62,0.97,7.7,0.12,
1001,jet,151.0,-0.23,1.92,11.8,0.88,
1001,muon,88.2,0.12,2.44,0.10566,,-1
1001,met,120.7,,-0.56,,,
";

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

#[test]
fn an_output_that_is_an_input_is_refused_also_through_links() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "events.csv", GOOD);
    let soft = dir.path().join("soft.csv");
    let hard = dir.path().join("hard.csv");
    #[cfg(unix)]
    std::os::unix::fs::symlink(&input, &soft).unwrap();
    std::fs::hard_link(&input, &hard).unwrap();
    let other_spelling = dir.path().join(".").join("events.csv");
    let mut outputs = vec![input.clone(), hard.clone(), other_spelling];
    if cfg!(unix) {
        outputs.push(soft.clone());
    }
    for out in &outputs {
        let o = quarry(&["reco", s(&input), "-o", s(out), "--no-progress"]);
        assert_eq!(code(&o), 1, "{}: {}", out.display(), stderr(&o));
        assert!(
            stderr(&o).contains("refusing to overwrite an input"),
            "{}",
            stderr(&o)
        );
        assert_eq!(
            std::fs::read_to_string(&input).unwrap(),
            GOOD,
            "input changed"
        );
    }
    // The same for eval's summary and table.
    let reco_out = dir.path().join("reco.csv");
    let o = quarry(&["reco", s(&input), "-o", s(&reco_out), "-q"]);
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    let spec = format!("tt={}", reco_out.display());
    for opt in ["-o", "--table"] {
        let before = std::fs::read(&reco_out).unwrap();
        let o = quarry(&["eval", "-s", &spec, opt, s(&reco_out), "-q"]);
        assert_eq!(code(&o), 1, "eval {opt}: {}", stderr(&o));
        assert_eq!(std::fs::read(&reco_out).unwrap(), before);
    }
}

#[test]
fn extreme_option_values_are_refused_naming_the_option() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "events.csv", GOOD);
    let out = dir.path().join("out.csv");
    for (args, option) in [
        (
            &["--chunk-size", "18446744073709551615"][..],
            "--chunk-size",
        ),
        (&["--chunk-size", "1000000000000"], "--chunk-size"),
        (&["--chunk-size", "0"], "--chunk-size"),
        (&["-j", "20000"], "--threads"),
        (&["-j", "0"], "--threads"),
        (&["--best", "18446744073709551615"], "--best"),
        (&["--best", "0"], "--best"),
        (&["--max-jets", "1000"], "--max-jets"),
        (&["--max-jets", "2"], "--max-jets"),
    ] {
        let mut all = vec!["reco", s(&input), "-o", s(&out), "--no-progress"];
        all.extend_from_slice(args);
        let o = quarry(&all);
        let err = stderr(&o);
        assert_eq!(code(&o), 1, "{args:?}: {err}");
        assert!(
            err.contains(option),
            "{args:?} does not name {option}: {err}"
        );
        assert!(
            !err.contains("max_jets_override") && !err.contains("k_best"),
            "{err}"
        );
        assert!(!out.exists(), "{args:?} wrote an output");
        let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(left.len(), 1, "{args:?} left a file behind");
    }
}

#[test]
fn a_run_that_reads_no_event_has_its_own_exit_code() {
    let dir = tempfile::tempdir().unwrap();
    let empty = write(dir.path(), "empty.csv", "event,kind,pt,eta,phi,mass\n");
    let all_bad = write(
        dir.path(),
        "bad.csv",
        "event,kind,pt,eta,phi,mass\n1,jet,abc,0,0,5\n2,jet,40,0,0,nan\n",
    );
    let good = write(dir.path(), "good.csv", GOOD);
    let out = dir.path().join("out.csv");
    let o = quarry(&["reco", s(&empty), "-o", s(&out), "--no-progress"]);
    assert_eq!(code(&o), 6, "{}", stderr(&o));
    assert!(stderr(&o).contains("no event"), "{}", stderr(&o));
    let o = quarry(&["reco", s(&all_bad), "-o", s(&out), "-q"]);
    assert_eq!(code(&o), 6, "{}", stderr(&o));
    assert!(stderr(&o).contains("all 2 events are bad_input"));
    // The output is still written, every event accounted for.
    let text = std::fs::read_to_string(&out).unwrap();
    assert_eq!(text.lines().filter(|l| l.contains("bad_input")).count(), 2);
    // One good event among bad ones is a success.
    let o = quarry(&["reco", s(&all_bad), s(&good), "-o", s(&out), "-q"]);
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    // A shard that received none of a non-empty stream's events is not a
    // failure (a job array with more shards than events).
    let o = quarry(&["reco", s(&good), "--shard", "1/2", "-o", s(&out), "-q"]);
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    // Nor is a shard whose events are all bad (it cannot see the others').
    let o = quarry(&[
        "reco",
        s(&all_bad),
        s(&good),
        "--shard",
        "0/3",
        "-o",
        s(&out),
        "-q",
    ]);
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    // But a sharded run over no event at all is.
    let o = quarry(&["reco", s(&empty), "--shard", "0/3", "-o", s(&out), "-q"]);
    assert_eq!(code(&o), 6, "{}", stderr(&o));
    let help = quarry(&["reco", "--help"]);
    assert!(String::from_utf8_lossy(&help.stdout).contains("6  no event could be read"));
}

#[test]
fn a_missing_output_directory_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "events.csv", GOOD);
    let out = dir.path().join("parts").join("out.csv");
    let o = quarry(&["reco", s(&input), "-o", s(&out), "-q"]);
    assert_eq!(code(&o), 3, "{}", stderr(&o));
    let expected = format!(
        "output directory '{}' does not exist",
        dir.path().join("parts").display()
    );
    assert!(stderr(&o).contains(&expected), "{}", stderr(&o));
}

#[test]
fn generate_prints_one_summary_line() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("tt.csv");
    let o = quarry(&["generate", "-n", "20", "--seed", "3", "-o", s(&out)]);
    assert_eq!(code(&o), 0, "{}", stderr(&o));
    let err = stderr(&o);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.starts_with("quarry generate: 20 events (top pair, seed 3, ids 0-19) written to "),
        "{err}"
    );
    let q = quarry(&["generate", "-n", "2", "-q", "-o", s(&out)]);
    assert!(q.stderr.is_empty());
}

#[test]
fn user_errors_use_physics_terms_and_keep_toml_line_breaks() {
    let o = quarry(&["generate", "--process", "vlq-t", "--decay", "tW", "-n", "1"]);
    let err = stderr(&o);
    assert_eq!(code(&o), 1);
    assert!(!err.contains("UpType"), "{err}");
    assert!(
        err.contains("up-type vector-like quark T") && err.contains("bW, tZ, tH"),
        "{err}"
    );

    let dir = tempfile::tempdir().unwrap();
    let input = write(dir.path(), "events.csv", GOOD);
    let hyp = write(dir.path(), "h.toml", "name = \"x\"\nroles = [\n");
    let o = quarry(&["reco", s(&input), "-H", s(&hyp), "-q"]);
    let err = stderr(&o);
    assert_eq!(code(&o), 1, "{err}");
    // The TOML reader's message spans lines: the location, the quoted line
    // and a caret under the column. They stay on separate lines.
    assert!(err.lines().count() >= 3, "{err}");
    assert!(
        err.lines().any(|l| l.trim_start().starts_with('|')),
        "{err}"
    );
}

#[test]
fn help_texts_say_what_the_options_do() {
    let reco = quarry(&["reco", "--help"]);
    let text = String::from_utf8_lossy(&reco.stdout).replace('\n', " ");
    let text = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        text.contains("fit on each of the --best assignments"),
        "{text}"
    );
    let presets = quarry(&["presets", "--help"]);
    assert_eq!(code(&presets), 0);
    let text = String::from_utf8_lossy(&presets.stdout);
    assert!(
        text.contains("Example") && text.contains("quarry presets show ttbar-ljets"),
        "{text}"
    );
}
