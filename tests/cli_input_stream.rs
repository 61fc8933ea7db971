//! Input rules of `quarry reco` that span lines and files
//! (docs/csv-format.md, "Layout"): the inputs are one stream, so an event
//! id may not reappear in a later file; CR-only line ends stop the run with
//! an error naming the file instead of losing the events.

use std::path::Path;
use std::process::{Command, Output};

fn quarry(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_quarry"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("run quarry")
}

const EVENTS: &str = "event,kind,pt,eta,phi,mass,btag\n\
                      1,jet,50,0.1,0.2,5,0.9\n\
                      1,met,30,,1.5,,\n\
                      2,jet,40,0.3,0.2,5,0.1\n\
                      2,met,20,,1.0,,\n";

/// `(event, status, reason)` of each output row.
fn rows(csv_text: &str) -> Vec<(String, String, String)> {
    let mut r = csv::Reader::from_reader(csv_text.as_bytes());
    let h = r.headers().unwrap().clone();
    let at = |name: &str| h.iter().position(|c| c == name).unwrap();
    let (e, s, m) = (at("event"), at("status"), at("reason"));
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            (rec[e].to_string(), rec[s].to_string(), rec[m].to_string())
        })
        .collect()
}

#[test]
fn one_file_given_twice_repeats_every_id_and_each_repeat_is_split_event() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("a.csv"), EVENTS).unwrap();
    // Under --on-bad stop the first repeated id ends the run (exit 2).
    let out = quarry(
        dir.path(),
        &[
            "reco", "a.csv", "a.csv", "-q", "--on-bad", "stop", "-o", "out.csv",
        ],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains(
            "a.csv:2: column 'event': '1' appeared earlier in this file or an earlier input"
        ),
        "{err}"
    );
    assert!(!dir.path().join("out.csv").exists());
    // Under --on-bad skip every event is accounted for: the first reading
    // is reconstructed, each repeat is bad_input (split-event), never a
    // second reconstruction of the same event.
    let out = quarry(
        dir.path(),
        &["reco", "a.csv", "a.csv", "-q", "-o", "out.csv"],
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let got = rows(&std::fs::read_to_string(dir.path().join("out.csv")).unwrap());
    assert_eq!(got.len(), 4, "{got:?}");
    assert!(got[..2].iter().all(|(_, s, _)| s != "bad_input"), "{got:?}");
    for (i, (event, status, reason)) in got[2..].iter().enumerate() {
        assert_eq!(event, &(i + 1).to_string());
        assert_eq!(status, "bad_input");
        assert!(reason.contains("earlier input"), "{reason}");
    }
    // Different ids in different files are fine.
    std::fs::write(
        dir.path().join("b.csv"),
        EVENTS.replace("\n1,", "\n3,").replace("\n2,", "\n4,"),
    )
    .unwrap();
    let out = quarry(
        dir.path(),
        &["reco", "a.csv", "b.csv", "-q", "-o", "out.csv"],
    );
    assert_eq!(out.status.code(), Some(0));
    let got = rows(&std::fs::read_to_string(dir.path().join("out.csv")).unwrap());
    assert!(got.iter().all(|(_, s, _)| s != "bad_input"), "{got:?}");
}

#[test]
fn cr_only_line_ends_stop_with_an_error_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("mac.csv"), EVENTS.replace('\n', "\r")).unwrap();
    let out = quarry(dir.path(), &["reco", "mac.csv", "-q", "-o", "out.csv"]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("mac.csv:1: a carriage return (CR) inside a line"),
        "{err}"
    );
    assert!(!dir.path().join("out.csv").exists());
    // CR line ends that start after a few LF rows: the run stops there too
    // (exit 2), rather than reading the rest as one bad event.
    let mixed = format!(
        "{}3,jet,40,0.3,0.2,5,0.1\r3,met,20,,1.0,,\r4,jet,40,0.3,0.2,5,0.1\r",
        EVENTS
    );
    std::fs::write(dir.path().join("mixed.csv"), mixed).unwrap();
    let out = quarry(dir.path(), &["reco", "mixed.csv", "-q", "-o", "out.csv"]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("mixed.csv:6: a carriage return (CR) inside a line"),
        "{err}"
    );
    // CRLF stays fine.
    std::fs::write(dir.path().join("dos.csv"), EVENTS.replace('\n', "\r\n")).unwrap();
    let out = quarry(dir.path(), &["reco", "dos.csv", "-q", "-o", "out.csv"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(
        rows(&std::fs::read_to_string(dir.path().join("out.csv")).unwrap()).len(),
        2
    );
}
