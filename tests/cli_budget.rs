//! The per-event search budget on the command line (`--max-assignments`,
//! `--max-search-seconds`; docs/cli.md): an event that exceeds it gets its
//! own status with the budget in the reason, the run goes on, the options'
//! ranges are checked, and the manifest records them.

use std::io::Write;
use std::path::Path;
use std::process::{Command, Output};

fn quarry(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_quarry"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("run quarry")
}

/// Event 1: 40 jets in two identical back-to-back groups with b-tags
/// ignored, so every assignment has the same χ² and nothing can be pruned:
/// far more than 65 536 assignments (the budget check interval) under
/// `twtw-ljets` with 10 leading jets. Event 2: an ordinary lepton+jets
/// event (the README's example event), a few hundred assignments.
fn write_input(path: &Path) {
    let mut w = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    writeln!(w, "event,kind,pt,eta,phi,mass,btag,charge").unwrap();
    for j in 0..40 {
        let phi = if j % 2 == 0 { 0.0 } else { 3.0 };
        writeln!(w, "1,jet,100,0.0,{phi},10.0,0.5,").unwrap();
    }
    writeln!(w, "1,muon,80.0,0.3,1.0,0.10566,,-1").unwrap();
    writeln!(w, "1,met,60.0,,-2.0,,,").unwrap();
    for row in [
        "2,jet,212.4,0.41,-2.71,14.2,0.93,",
        "2,jet,96.3,-0.88,0.35,9.1,0.08,",
        "2,jet,74.9,1.62,0.97,7.7,0.12,",
        "2,jet,151.0,-0.23,1.92,11.8,0.88,",
        "2,jet,55.0,0.7,-1.2,6.5,0.10,",
        "2,jet,48.0,-1.4,2.9,6.1,0.05,",
        "2,muon,88.2,0.12,2.44,0.10566,,-1",
        "2,met,120.7,,-0.56,,,",
    ] {
        writeln!(w, "{row}").unwrap();
    }
}

/// `(status, reason)` of each output row, by the header's column names.
fn status_and_reason(csv_text: &str) -> Vec<(String, String)> {
    let mut r = csv::Reader::from_reader(csv_text.as_bytes());
    let h = r.headers().unwrap().clone();
    let at = |name: &str| h.iter().position(|c| c == name).unwrap();
    let (s, m) = (at("status"), at("reason"));
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            (rec[s].to_string(), rec[m].to_string())
        })
        .collect()
}

#[test]
fn an_event_over_a_small_budget_is_budget_exceeded_and_the_run_goes_on() {
    let dir = tempfile::tempdir().unwrap();
    write_input(&dir.path().join("in.csv"));
    let common = [
        "reco",
        "in.csv",
        "-H",
        "twtw-ljets",
        "--btag-mode",
        "ignore",
        "--max-jets",
        "10",
        "-j",
        "1",
        "--no-progress",
        "-q",
        "-o",
        "out.csv",
    ];
    let mut args = common.to_vec();
    args.extend(["--max-assignments", "1000"]);
    let out = quarry(dir.path(), &args);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rows = status_and_reason(&std::fs::read_to_string(dir.path().join("out.csv")).unwrap());
    assert_eq!(rows.len(), 2, "both events accounted for: {rows:?}");
    assert_eq!(rows[0].0, "budget_exceeded", "{rows:?}");
    assert_eq!(rows[0].1, "search budget of 1000 assignments exceeded");
    // The run went on: the ordinary event after it was searched to the end.
    assert_ne!(rows[1].0, "budget_exceeded", "{rows:?}");
    assert_ne!(rows[1].0, "bad_input", "{rows:?}");
    // The manifest records the budget (docs/manifest.md, `options`).
    let manifest: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("out.csv.manifest.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(manifest["options"]["max_assignments"], 1000);
    assert_eq!(
        manifest["options"]["max_search_seconds"],
        serde_json::Value::Null
    );

    // A wall-time budget far below what event 1 needs: the same status,
    // with the time in the reason.
    let mut args = common.to_vec();
    args.extend(["--max-search-seconds", "0.001"]);
    let out = quarry(dir.path(), &args);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rows = status_and_reason(&std::fs::read_to_string(dir.path().join("out.csv")).unwrap());
    assert_eq!(
        rows[0],
        (
            "budget_exceeded".into(),
            "search budget of 0.001 s exceeded".into()
        )
    );

    // The default budget (10^8) is far above this event: searched to the end.
    let out = quarry(dir.path(), &common);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rows = status_and_reason(&std::fs::read_to_string(dir.path().join("out.csv")).unwrap());
    assert!(rows.iter().all(|(s, _)| s != "budget_exceeded"), "{rows:?}");
}

#[test]
fn budget_options_out_of_range_are_usage_errors_naming_the_option() {
    let dir = tempfile::tempdir().unwrap();
    write_input(&dir.path().join("in.csv"));
    for (option, value) in [
        ("--max-assignments", "0"),
        ("--max-assignments", "1000000000000001"),
        ("--max-search-seconds", "0"),
        ("--max-search-seconds", "-1"),
        ("--max-search-seconds", "NaN"),
        ("--max-search-seconds", "inf"),
        ("--max-search-seconds", "86401"),
    ] {
        let arg = format!("{option}={value}");
        let out = quarry(dir.path(), &["reco", "in.csv", "-q", "-o", "out.csv", &arg]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{option} {value}: {err}");
        assert!(
            err.contains(&format!("{option} {value} is out of range")),
            "{option} {value}: {err}"
        );
        assert!(!dir.path().join("out.csv").exists());
    }
}
