//! Unknown input columns cannot go unnoticed (docs/cli.md,
//! `--unknown-columns`): a misspelt `btag` column (`btagScore`) would leave
//! every jet untagged, so its warning survives `--quiet`, and
//! `--unknown-columns error` refuses the file with exit code 2 naming the
//! file and the column.

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

/// The README's example event, with the b-tag column misspelt.
fn write_input(path: &Path) {
    let mut w = std::fs::File::create(path).unwrap();
    write!(
        w,
        "event,kind,pt,eta,phi,mass,btagScore,charge\n\
         1001,jet,212.4,0.41,-2.71,14.2,0.93,\n\
         1001,jet,96.3,-0.88,0.35,9.1,0.08,\n\
         1001,jet,74.9,1.62,0.97,7.7,0.12,\n\
         1001,jet,151.0,-0.23,1.92,11.8,0.88,\n\
         1001,muon,88.2,0.12,2.44,0.10566,,-1\n\
         1001,met,120.7,,-0.56,,,\n"
    )
    .unwrap();
}

#[test]
fn a_misspelt_btag_column_warns_even_under_quiet() {
    let dir = tempfile::tempdir().unwrap();
    write_input(&dir.path().join("in.csv"));
    let out = quarry(
        dir.path(),
        &["reco", "in.csv", "-q", "--no-progress", "-o", "out.csv"],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(
        err.contains("quarry: warning: in.csv:1: ignoring unknown column(s) 'btagScore'"),
        "-q hid the unknown-column warning: {err:?}"
    );
    assert!(dir.path().join("out.csv").exists());
}

#[test]
fn unknown_columns_error_stops_with_exit_2_naming_file_and_column() {
    let dir = tempfile::tempdir().unwrap();
    write_input(&dir.path().join("in.csv"));
    let out = quarry(
        dir.path(),
        &[
            "reco",
            "in.csv",
            "-q",
            "--unknown-columns",
            "error",
            "-o",
            "out.csv",
        ],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains(
            "in.csv:1: header: unknown column(s) 'btagScore' (known columns: event, kind,"
        ),
        "{err}"
    );
    assert!(!dir.path().join("out.csv").exists(), "nothing written");
    // The rule is recorded in the manifest of a run that passes it.
    std::fs::write(
        dir.path().join("ok.csv"),
        "event,kind,pt,eta,phi,mass,btag\n1,jet,50,0.1,0.2,5,0.9\n",
    )
    .unwrap();
    let out = quarry(
        dir.path(),
        &[
            "reco",
            "ok.csv",
            "-q",
            "--unknown-columns",
            "error",
            "-o",
            "out.csv",
        ],
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let m: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("out.csv.manifest.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(m["options"]["unknown_columns"], "error");
}
