//! End-to-end checks of `quarry reco` with the built binary: sums and masses
//! of a hand-built event, every input event accounted for once per
//! hypothesis, output independent of the thread count, sharding and merging.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use quarry::csv::{EventReader, ReadOptions};

fn quarry(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_quarry"))
        .args(args)
        .output()
        .expect("run quarry")
}

fn ok(args: &[&str]) -> Output {
    let out = quarry(args);
    assert!(
        out.status.success(),
        "quarry {args:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Parses an output CSV into header + rows of (column → value).
fn rows(path: &Path) -> Vec<BTreeMap<String, String>> {
    let mut r = csv::Reader::from_path(path).expect("open output");
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(header, quarry::output::COLUMNS, "documented column order");
    r.records()
        .map(|rec| {
            let rec = rec.expect("output row parses");
            header
                .iter()
                .cloned()
                .zip(rec.iter().map(String::from))
                .collect()
        })
        .collect()
}

fn num(row: &BTreeMap<String, String>, col: &str) -> f64 {
    row[col]
        .parse()
        .unwrap_or_else(|_| panic!("{col} = '{}' is not a number", row[col]))
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

/// Event ids of a CSV event file, in order (good and bad events).
fn input_ids(path: &Path) -> Vec<Option<u64>> {
    let reader = EventReader::open(
        path,
        ReadOptions::default().with_policy(quarry::csv::ErrorPolicy::Skip),
    )
    .unwrap();
    reader.map(|r| r.unwrap().id()).collect()
}

/// Writes the hand-built top-pair event of
/// `tests/reference/fixtures/cli_ttbar_event.json` (made by
/// `tests/reference/cli_ttbar_event.py` with scikit-hep `vector`, scipy and
/// the PDG masses of `particle`) as quarry CSV, plus one soft jet (pT 20 GeV)
/// that the default selection (jet pT > 25 GeV) removes.
fn hand_event(dir: &Path) -> (PathBuf, serde_json::Value) {
    let text = include_str!("reference/fixtures/cli_ttbar_event.json");
    let fx: serde_json::Value = serde_json::from_str(text).unwrap();
    let mut csv = String::from("event,kind,pt,eta,phi,mass,btag,charge,truth\n");
    for j in fx["jets"].as_array().unwrap() {
        csv.push_str(&format!(
            "77,jet,{},{},{},0,{},,{}\n",
            j["pt"],
            j["eta"],
            j["phi"],
            j["btag"],
            j["truth"].as_str().unwrap()
        ));
    }
    // Soft jet, ΔR ≈ 0.89 from the muon so overlap removal does not matter.
    csv.push_str("77,jet,20,0,3.0,0,0.1,,isr\n");
    let mu = &fx["muon"];
    csv.push_str(&format!(
        "77,muon,{},{},{},{},,{},{}\n",
        mu["pt"],
        mu["eta"],
        mu["phi"],
        fx["m_mu"],
        mu["charge"],
        mu["truth"].as_str().unwrap()
    ));
    csv.push_str(&format!(
        "77,met,{},,{},,,,\n",
        fx["met"]["pt"], fx["met"]["phi"]
    ));
    let path = dir.join("hand.csv");
    std::fs::write(&path, csv).unwrap();
    (path, fx)
}

#[test]
fn hand_built_event_sums_masses_and_assignment() {
    let dir = tempfile::tempdir().unwrap();
    let (input, fx) = hand_event(dir.path());
    let out = dir.path().join("out.csv");
    ok(&["reco", s(&input), "-o", s(&out), "--fit", "-q"]);
    let all = rows(&out);
    assert_eq!(all.len(), 1);
    let r = &all[0];
    assert_eq!(r["event"], "77");
    assert_eq!(r["hypothesis"], "ttbar-ljets");
    assert_eq!(r["status"], "ok", "reason: {}", r["reason"]);
    assert_eq!(
        (&r["n_jets"][..], &r["n_bjets"][..], &r["n_leptons"][..]),
        ("5", "2", "1"),
        "the 20 GeV jet fails the 25 GeV selection; b-tag 0.9 and 0.8 pass 0.5"
    );
    // Hand arithmetic with the round pTs of the fixture:
    // HT = 90 (b_had) + 60 (q1) + 50 (q2) + 70 (b_lep) + 30 (isr) = 300
    // ST = 300 + 45 (muon) + 40 (MET) = 385
    // unclaimed ST = 385 − (90 + 60 + 50 + 70 + 45 + 40) = 30, the radiation jet.
    assert!((num(r, "ht") - 300.0).abs() < 1e-3, "ht {}", r["ht"]);
    assert!((num(r, "st") - 385.0).abs() < 1e-3, "st {}", r["st"]);
    assert!((num(r, "st_unclaimed") - 30.0).abs() < 1e-3);
    assert!((num(r, "lead_jet_pt") - 90.0).abs() < 1e-3);
    // The exact top-pair partons are found: jets by input index.
    assert!(
        r["assignment"].starts_with("b_had=0;q1=1;q2=2;b_lep=3;lep=mu0;nu=nu"),
        "{}",
        r["assignment"]
    );
    assert!(num(r, "chi2") < 1e-4, "chi2 {}", r["chi2"]);
    assert_eq!(r["truth_match"], "1");
    assert_eq!(r["truth_composites"], "W_had=1;t_had=1;W_lep=1;t_lep=1");
    // Masses against scikit-hep `vector` (fixture), to the 3 decimals written.
    let masses: BTreeMap<&str, f64> = r["masses"]
        .split(';')
        .map(|kv| {
            let (k, v) = kv.split_once('=').unwrap();
            (k, v.parse().unwrap())
        })
        .collect();
    for name in ["W_had", "t_had", "W_lep", "t_lep"] {
        let want = fx["masses"][name].as_f64().unwrap();
        assert!(
            (masses[name] - want).abs() < 2e-3,
            "{name}: {}",
            masses[name]
        );
    }
    // mass_a/mass_b are t_had/t_lep (the two top-level composites).
    let m_top = fx["m_top"].as_f64().unwrap();
    assert!((num(r, "mass_a") - m_top).abs() < 1e-3);
    assert!((num(r, "mass_b") - m_top).abs() < 1e-3);
    assert!((num(r, "mass_avg") - m_top).abs() < 1e-3);
    // The neutrino root equals the generated pz (vector), measured MET kept.
    assert!((num(r, "nu_pz") - fx["neutrino_pz"].as_f64().unwrap()).abs() < 1e-3);
    assert!(r["nu_solution"].starts_with("real_"));
    // An exact event needs no correction: the fit converges at χ² ≈ 0.
    assert_eq!(r["fit_status"], "converged");
    assert!(num(r, "fit_chi2") < 1e-3, "fit_chi2 {}", r["fit_chi2"]);
    assert_eq!(
        r["fit_mass"], "",
        "ttbar-ljets has no equal-mass constraint"
    );

    // Without selection the 20 GeV jet counts:
    // HT = 300 + 20 = 320, ST = 385 + 20 = 405, unclaimed = 30 + 20 = 50.
    let out2 = dir.path().join("out2.csv");
    ok(&["reco", s(&input), "-o", s(&out2), "--no-selection", "-q"]);
    let r = &rows(&out2)[0];
    assert_eq!(r["n_jets"], "6");
    assert!((num(r, "ht") - 320.0).abs() < 1e-3);
    assert!((num(r, "st") - 405.0).abs() < 1e-3);
    assert!((num(r, "st_unclaimed") - 50.0).abs() < 1e-3);
}

/// Generates a toy file with the `generate` subcommand.
fn generate(dir: &Path, name: &str, args: &[&str]) -> PathBuf {
    let path = dir.join(name);
    let mut all = vec!["generate", "-o", s(&path)];
    all.extend_from_slice(args);
    ok(&all);
    path
}

#[test]
fn thread_count_does_not_change_output_and_every_event_appears_once() {
    let dir = tempfile::tempdir().unwrap();
    let input = generate(dir.path(), "tt.csv.gz", &["-n", "400", "--seed", "11"]);
    let ids = input_ids(&input);
    assert_eq!(ids.len(), 400);
    let mut outputs = Vec::new();
    for threads in ["1", "2"] {
        let out = dir.path().join(format!("out-{threads}.csv"));
        let args = [
            "reco",
            s(&input),
            "-H",
            "ttbar-ljets",
            "-H",
            "bwbw-ljets",
            "-j",
            threads,
            "--chunk-size",
            "37",
            "-o",
            s(&out),
            "-q",
        ];
        ok(&args);
        outputs.push(std::fs::read(&out).unwrap());
    }
    assert!(
        outputs[0] == outputs[1],
        "1 and 2 threads give different bytes"
    );
    let out = dir.path().join("out-1.csv");
    let rows = rows(&out);
    assert_eq!(rows.len(), 400 * 2);
    for (i, pair) in rows.chunks(2).enumerate() {
        assert_eq!(pair[0]["ordinal"], i.to_string());
        assert_eq!(pair[1]["ordinal"], i.to_string());
        assert_eq!(pair[0]["event"], ids[i].unwrap().to_string());
        assert_eq!(pair[0]["hypothesis"], "ttbar-ljets");
        assert_eq!(pair[1]["hypothesis"], "bwbw-ljets");
    }
    let some_ok = rows.iter().filter(|r| r["status"] == "ok").count();
    assert!(some_ok > 20, "only {some_ok} ok rows");
}

#[test]
fn demo_events_every_event_once_per_hypothesis() {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-events");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&demo)
        .map(|d| {
            d.filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.to_string_lossy().ends_with(".csv.gz"))
                .collect()
        })
        .unwrap_or_default();
    files.sort();
    let dir = tempfile::tempdir().unwrap();
    if files.is_empty() {
        // No demo files in this checkout: use a generated signal file.
        files.push(generate(
            dir.path(),
            "signal.csv.gz",
            &[
                "--process",
                "vlq-b",
                "--mass",
                "900",
                "-n",
                "300",
                "--seed",
                "3",
            ],
        ));
    }
    for file in &files {
        let ids = input_ids(file);
        let out = dir.path().join("demo-out.csv");
        ok(&[
            "reco",
            s(file),
            "-H",
            "twtw-ljets",
            "-H",
            "ttbar-ljets",
            "-o",
            s(&out),
            "-q",
        ]);
        let rows = rows(&out);
        assert_eq!(rows.len(), ids.len() * 2, "{}", file.display());
        let mut count: BTreeMap<(String, String), usize> = BTreeMap::new();
        for r in &rows {
            *count
                .entry((r["event"].clone(), r["hypothesis"].clone()))
                .or_default() += 1;
            let known = quarry::Status::ALL
                .iter()
                .any(|st| st.as_str() == r["status"]);
            assert!(known, "unknown status {}", r["status"]);
        }
        assert!(count.values().all(|&n| n == 1), "an event appears twice");
        for id in &ids {
            let id = id.unwrap().to_string();
            assert!(count.contains_key(&(id.clone(), "twtw-ljets".into())));
            assert!(count.contains_key(&(id, "ttbar-ljets".into())));
        }
    }
}

#[test]
fn shards_partition_the_input() {
    let dir = tempfile::tempdir().unwrap();
    let input = generate(dir.path(), "tt.csv", &["-n", "250", "--seed", "5"]);
    let full = dir.path().join("full.csv");
    ok(&["reco", s(&input), "-o", s(&full), "-q"]);
    for k in 0..3 {
        let part = dir.path().join(format!("part-{k}.csv"));
        let shard = format!("{k}/3");
        ok(&["reco", s(&input), "--shard", &shard, "-o", s(&part), "-q"]);
    }
    // Every event in exactly one shard (merging is tests/cli_merge.rs's).
    let mut ordinals: Vec<String> = (0..3)
        .flat_map(|k| rows(&dir.path().join(format!("part-{k}.csv"))))
        .map(|r| r["ordinal"].clone())
        .collect();
    ordinals.sort_by_key(|o| o.parse::<u64>().unwrap());
    let all: Vec<String> = rows(&full).iter().map(|r| r["ordinal"].clone()).collect();
    assert_eq!(ordinals, all);
    // Round-robin rule: shard 1 holds ordinals 1, 4, 7, …
    let part1 = rows(&dir.path().join("part-1.csv"));
    assert!(part1
        .iter()
        .enumerate()
        .all(|(i, r)| r["ordinal"] == (1 + 3 * i).to_string()));
}

#[test]
fn presets_show_round_trips_into_a_hypothesis_file() {
    let out = ok(&["presets", "list"]);
    let list = String::from_utf8(out.stdout).unwrap();
    for name in quarry::assign::presets::names() {
        assert!(list.contains(name), "{name} missing from the list");
    }
    let out = ok(&["presets", "show", "bwbw-ljets"]);
    let text = String::from_utf8(out.stdout).unwrap();
    let h = quarry::assign::Hypothesis::from_toml(&text).expect("shown TOML loads");
    assert_eq!(h.name(), "bwbw-ljets");
    // Edited copy under another name, used from a file next to the preset.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("mine.toml");
    std::fs::write(
        &file,
        text.replace("name = \"bwbw-ljets\"", "name = \"my-bw\""),
    )
    .unwrap();
    let input = generate(dir.path(), "tt.csv", &["-n", "30", "--seed", "2"]);
    let out = dir.path().join("o.csv");
    ok(&[
        "reco",
        s(&input),
        "-H",
        "bwbw-ljets",
        "-H",
        s(&file),
        "-o",
        s(&out),
        "-q",
    ]);
    let rows = rows(&out);
    assert_eq!(rows.len(), 60);
    // Same physics under two names: identical results column by column.
    for pair in rows.chunks(2) {
        assert_eq!(pair[1]["hypothesis"], "my-bw");
        assert_eq!(pair[0]["chi2"], pair[1]["chi2"]);
        assert_eq!(pair[0]["assignment"], pair[1]["assignment"]);
    }
}

#[test]
fn generate_is_deterministic() {
    let dir = tempfile::tempdir().unwrap();
    let a = generate(dir.path(), "a.csv", &["-n", "50", "--seed", "9", "-j", "1"]);
    let b = generate(dir.path(), "b.csv", &["-n", "50", "--seed", "9", "-j", "2"]);
    let c = generate(dir.path(), "c.csv", &["-n", "50", "--seed", "10"]);
    let (a, b, c) = (
        std::fs::read(a).unwrap(),
        std::fs::read(b).unwrap(),
        std::fs::read(c).unwrap(),
    );
    assert_eq!(a, b);
    assert_ne!(a, c);
    let sig = generate(
        dir.path(),
        "t.csv",
        &[
            "--process",
            "vlq-t",
            "--mass",
            "1100",
            "--decay",
            "bW",
            "-n",
            "20",
            "--first-id",
            "500",
        ],
    );
    let ids = input_ids(&sig);
    assert_eq!(ids.first(), Some(&Some(500)));
    assert_eq!(ids.len(), 20);
}

#[test]
fn several_inputs_form_one_stream_and_gzip_output_works() {
    let dir = tempfile::tempdir().unwrap();
    let (hand, _) = hand_event(dir.path());
    let bad = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/cli_bad_events.csv");
    let out = dir.path().join("o.csv.gz");
    ok(&["reco", s(&bad), s(&hand), "-o", s(&out), "-q"]);
    let bytes = std::fs::read(&out).unwrap();
    assert_eq!(&bytes[..2], [0x1f, 0x8b], "gzip magic");
    let mut text = String::new();
    use std::io::Read;
    flate2::read::GzDecoder::new(&bytes[..])
        .read_to_string(&mut text)
        .unwrap();
    let plain = dir.path().join("o.csv");
    std::fs::write(&plain, text).unwrap();
    let rows = rows(&plain);
    // 3 events from the first file, then 1 from the second: ordinals 0..4.
    let got: Vec<(String, String)> = rows
        .iter()
        .map(|r| (r["ordinal"].clone(), r["event"].clone()))
        .collect();
    let want: Vec<(String, String)> = [("0", "1"), ("1", "2"), ("2", "3"), ("3", "77")]
        .iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect();
    assert_eq!(got, want);
}

/// `--btag-mode`, `--best` and `--max-jets` reach the search.
#[test]
fn btag_mode_best_and_max_jets_options() {
    let dir = tempfile::tempdir().unwrap();
    let input = generate(
        dir.path(),
        "bw.csv",
        &[
            "-p", "vlq-t", "-m", "1000", "-d", "bW", "-n", "300", "--seed", "5",
        ],
    );
    let run = |name: &str, extra: &[&str]| {
        let out = dir.path().join(name);
        let mut args = vec!["reco", s(&input), "-H", "bwbw-ljets", "-o", s(&out), "-q"];
        args.extend_from_slice(extra);
        ok(&args);
        let rows = rows(&out);
        assert_eq!(rows.len(), 300);
        rows
    };
    let count_ok =
        |rows: &[BTreeMap<String, String>]| rows.iter().filter(|r| r["status"] == "ok").count();
    // Threshold mode needs two tagged jets for the two b roles; weighted
    // mode lets any jet fill them at a χ² cost, so more events reconstruct.
    let threshold = run("threshold.csv", &[]);
    let weighted = run("weighted.csv", &["--btag-mode", "weighted"]);
    let ignore = run("ignore.csv", &["--btag-mode", "ignore"]);
    assert!(
        count_ok(&weighted) > count_ok(&threshold),
        "weighted {} vs threshold {}",
        count_ok(&weighted),
        count_ok(&threshold)
    );
    assert!(count_ok(&ignore) >= count_ok(&weighted));
    // Without b-tag terms the χ² can only be lower or equal: the weighted
    // search's best assignment is also a candidate of the ignoring search.
    for (w, i) in weighted.iter().zip(&ignore) {
        if w["status"] == "ok" && i["status"] == "ok" {
            assert!(num(i, "chi2") <= num(w, "chi2") * (1.0 + 1e-12) + 1e-12);
        }
    }
    // Fitting the 3 best assignments and keeping the best fit never ends
    // with a worse fit χ² than fitting only the first one.
    let best1 = run("best1.csv", &["--best", "1", "--fit"]);
    let best3 = run("best3.csv", &["--best", "3", "--fit"]);
    let mut better = 0;
    for (a, b) in best1.iter().zip(&best3) {
        if a["status"] == "ok" && b["status"] == "ok" {
            assert!(num(b, "fit_chi2") <= num(a, "fit_chi2") * (1.0 + 1e-9) + 1e-9);
            better += usize::from(num(b, "fit_chi2") < num(a, "fit_chi2") * (1.0 - 1e-6));
        }
    }
    assert!(better > 0, "the 2nd/3rd assignments never fitted better");
    // Fewer jets entering: at most as many assignments evaluated.
    let four = run("four.csv", &["--max-jets", "4"]);
    for (a, b) in threshold.iter().zip(&four) {
        if a["status"] == "ok" && b["status"] == "ok" {
            assert!(num(b, "n_evaluated") <= num(a, "n_evaluated"));
        }
    }
    // Bad values are usage errors naming the option.
    for (args, needle) in [
        (vec!["--best", "0"], "--best"),
        (
            vec!["--btag-mode", "weighted", "--mistag-rate", "0.9"],
            "--mistag-rate",
        ),
        (vec!["--max-jets", "2"], "--max-jets"),
    ] {
        let mut all = vec!["reco", s(&input), "-H", "bwbw-ljets", "-o", "-", "-q"];
        all.extend_from_slice(&args);
        let out = quarry(&all);
        assert_eq!(out.status.code(), Some(1), "{args:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(needle), "{args:?}: {err}");
    }
}
