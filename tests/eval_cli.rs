//! `quarry eval` end to end: generate → reco → eval, and its exit codes.

use std::path::Path;
use std::process::Command;

fn quarry(args: &[&str], dir: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_quarry"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("quarry runs")
}

fn ok(args: &[&str], dir: &Path) -> std::process::Output {
    let out = quarry(args, dir);
    assert!(
        out.status.success(),
        "quarry {args:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

#[test]
fn generate_reco_eval_writes_summary_table_and_plots() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for (name, mass) in [("T800", "800"), ("T1200", "1200")] {
        let events = format!("{name}.csv");
        ok(
            &[
                "generate",
                "--process",
                "vlq-t",
                "--decay",
                "bW",
                "--mass",
                mass,
                "-n",
                "600",
                "-s",
                "5",
                "-o",
                &events,
            ],
            d,
        );
        ok(
            &[
                "reco",
                &events,
                "-H",
                "bwbw-ljets",
                "--fit",
                "-q",
                "-o",
                &format!("{name}-reco.csv"),
            ],
            d,
        );
    }
    ok(
        &[
            "generate",
            "--process",
            "ttbar",
            "-n",
            "600",
            "-s",
            "6",
            "-o",
            "tt.csv",
        ],
        d,
    );
    ok(
        &[
            "reco",
            "tt.csv",
            "-H",
            "bwbw-ljets",
            "--fit",
            "-q",
            "-o",
            "tt-reco.csv",
        ],
        d,
    );
    let out = ok(
        &[
            "eval",
            "-s",
            "T800@800=T800-reco.csv",
            "-s",
            "T1200@1200=T1200-reco.csv",
            "-s",
            "ttbar=tt-reco.csv",
            "-o",
            "summary.csv",
            "--table",
            "-",
            "--plots",
            "plots",
        ],
        d,
    );
    let table = String::from_utf8(out.stdout).unwrap();
    assert!(table.contains("| bwbw-ljets | 800 | 600 |"), "{table}");
    assert!(table.contains("| bwbw-ljets | 1200 | 600 |"), "{table}");
    // The mass column is named in every row and its choice explained, with
    // every candidate's closure side by side.
    assert!(table.contains("| mass column |"), "{table}");
    assert!(table.contains("Mass column per hypothesis"), "{table}");
    for column in ["fit_mass", "mass_avg", "mass_a", "mass_b"] {
        assert!(
            table.contains(&format!("| bwbw-ljets | {column} |")),
            "{column}: {table}"
        );
    }
    assert_eq!(table.matches("**yes**: smallest closure score").count(), 1);
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(stderr.contains("bwbw-ljets: mass column "), "{stderr}");

    let summary = std::fs::read_to_string(d.join("summary.csv")).unwrap();
    let mut lines = summary.lines();
    assert_eq!(
        lines.next().unwrap(),
        quarry::eval::SUMMARY_COLUMNS.join(",")
    );
    let samples: Vec<&str> = lines.map(|l| l.split(',').next().unwrap()).collect();
    assert_eq!(samples, ["T800", "T1200", "ttbar"]);
    let mass_plot = std::fs::read_to_string(d.join("plots/mass_bwbw-ljets.svg")).unwrap();
    assert!(
        mass_plot.contains("Reconstructed mass (fit_mass")
            || mass_plot.contains("Reconstructed mass (mass_")
    );
    for plot in [
        "mass_bwbw-ljets.svg",
        "chi2_bwbw-ljets.svg",
        "fit_prob_bwbw-ljets.svg",
        "right_fraction.svg",
    ] {
        let text = std::fs::read_to_string(d.join("plots").join(plot)).unwrap();
        assert!(text.starts_with("<svg"), "{plot}");
    }
}

#[test]
fn bad_sample_is_a_usage_error_and_missing_file_an_input_error() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let out = quarry(&["eval", "-s", "T1000@heavy=x.csv"], d);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not a number"));
    let out = quarry(&["eval", "-s", "T1000@1000=missing.csv"], d);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("missing.csv"));
    std::fs::write(d.join("no-status.csv"), "hypothesis,chi2\nh,1\n").unwrap();
    let out = quarry(&["eval", "-s", "S=no-status.csv"], d);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("missing column 'status'"));
}

/// A gzipped reconstruction output (`reco -o x.csv.gz`) evaluates exactly
/// like the plain one.
#[test]
fn gzip_reco_output_evaluates_like_plain() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(
        &[
            "generate", "-p", "vlq-t", "-d", "bW", "-m", "1000", "-n", "300", "-s", "9", "-o",
            "t.csv",
        ],
        d,
    );
    for out in ["t-reco.csv", "t-reco.csv.gz"] {
        ok(&["reco", "t.csv", "-H", "bwbw-ljets", "-q", "-o", out], d);
    }
    let gz = std::fs::read(d.join("t-reco.csv.gz")).unwrap();
    assert_eq!(&gz[..2], &[0x1f, 0x8b], "reco did not gzip");
    let mut summaries = Vec::new();
    for input in ["t-reco.csv", "t-reco.csv.gz"] {
        let out = ok(
            &["eval", "-s", &format!("T@1000={input}"), "-o", "-", "-q"],
            d,
        );
        summaries.push(String::from_utf8(out.stdout).unwrap());
    }
    assert!(summaries[0].lines().count() == 2, "{}", summaries[0]);
    assert_eq!(summaries[0], summaries[1]);
}
