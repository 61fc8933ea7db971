//! `quarry reco --shard` manifests and `quarry merge`, end to end with the
//! built binary: the merge of N shards equals the unsharded run byte for
//! byte (N = 1, 2, 3, 7; three hypotheses in non-alphabetical order; with
//! and without the fit), and every way a set of shards can be wrong is
//! refused with exit code 5, naming the shard, writing nothing.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use quarry::manifest::{self, FileStamp, Manifest};

/// Not alphabetical (that would be bz-2l, ttbar-ljets, twtw-ljets-boosted):
/// a merge that sorted one event's rows would fail.
const HYPOTHESES: [&str; 6] = [
    "-H",
    "twtw-ljets-boosted",
    "-H",
    "ttbar-ljets",
    "-H",
    "bz-2l",
];

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

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("demo-events")
        .join(name)
}

/// `quarry reco INPUT -H … [extra] --shard K/N -o DIR/NAME -q`.
fn reco(input: &Path, out: &Path, shard: Option<(u64, u64)>, extra: &[&str]) {
    let mut args = vec!["reco", s(input)];
    args.extend(HYPOTHESES);
    args.extend(extra);
    let shard = shard.map(|(k, n)| format!("{k}/{n}"));
    if let Some(shard) = &shard {
        args.extend(["--shard", shard]);
    }
    args.extend(["-o", s(out), "-q"]);
    ok(&args);
}

/// Runs shards 0..n of `input` into `dir/part-K.csv`; returns their paths.
fn shards(input: &Path, dir: &Path, n: u64, extra: &[&str]) -> Vec<PathBuf> {
    (0..n)
        .map(|k| {
            let part = dir.join(format!("part-{k}.csv"));
            reco(input, &part, Some((k, n)), extra);
            part
        })
        .collect()
}

fn merge(parts: &[PathBuf], out: &Path) -> Output {
    let mut args = vec!["merge"];
    args.extend(parts.iter().map(|p| s(p)));
    args.extend(["-o", s(out)]);
    quarry(&args)
}

/// A refused merge: exit 5, nothing written under `out`, and stderr names
/// every expected fragment.
fn refused(parts: &[PathBuf], out: &Path, expect: &[&str]) {
    let r = merge(parts, out);
    let err = String::from_utf8_lossy(&r.stderr);
    assert_eq!(r.status.code(), Some(5), "{err}");
    for e in expect {
        assert!(err.contains(e), "'{e}' not in: {err}");
    }
    assert!(!out.exists(), "a refused merge wrote {}", out.display());
    assert!(!manifest::manifest_path(out).exists());
    let leftovers: Vec<_> = std::fs::read_dir(out.parent().unwrap())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().contains(".tmp-"))
        .collect();
    assert!(leftovers.is_empty(), "temporary files left: {leftovers:?}");
}

#[test]
fn merged_shards_equal_the_unsharded_run_byte_for_byte() {
    let input = demo("q7_bquark_900.csv.gz");
    for extra in [&[][..], &["--fit"][..]] {
        let dir = tempfile::tempdir().unwrap();
        let full = dir.path().join("full.csv");
        reco(&input, &full, None, extra);
        let full_bytes = std::fs::read(&full).unwrap();
        for n in [1, 2, 3, 7] {
            let sub = dir.path().join(format!("n{n}"));
            std::fs::create_dir(&sub).unwrap();
            let parts = shards(&input, &sub, n, extra);
            // Any order on the command line.
            let mut given = parts.clone();
            given.reverse();
            let merged = sub.join("merged.csv");
            let r = merge(&given, &merged);
            assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
            assert!(
                std::fs::read(&merged).unwrap() == full_bytes,
                "N = {n} {extra:?}: merge differs from the unsharded run"
            );
            // Its manifest sums the shards' and matches the unsharded one's
            // counts, options and inputs.
            let m = Manifest::read(&manifest::manifest_path(&merged)).unwrap();
            let u = Manifest::read(&manifest::manifest_path(&full)).unwrap();
            assert_eq!(m.command, "merge");
            assert_eq!(
                (m.events_read, m.events_processed, m.rows_written),
                (u.events_read, u.events_processed, u.rows_written)
            );
            assert_eq!(m.rows_by_status, u.rows_by_status);
            assert_eq!(
                (&m.inputs, &m.hypotheses, &m.options),
                (&u.inputs, &u.hypotheses, &u.options)
            );
            assert_eq!(m.output, FileStamp::of(&merged).unwrap());
            assert_eq!(m.merged_from.len() as u64, n);
            assert!(m
                .merged_from
                .iter()
                .enumerate()
                .all(|(k, s)| s.index == k as u64));
        }
        // Read back with the csv crate (an independent CSV parser): events
        // in input order, each event's rows in -H order.
        let mut reader = csv::Reader::from_path(&full).unwrap();
        let rows: Vec<(u64, String)> = reader
            .records()
            .map(|r| {
                let r = r.unwrap();
                (r[0].parse().unwrap(), r[2].to_string())
            })
            .collect();
        assert_eq!(rows.len(), 3 * 2000);
        for (i, (ordinal, hyp)) in rows.iter().enumerate() {
            assert_eq!(*ordinal, i as u64 / 3);
            assert_eq!(hyp, HYPOTHESES[2 * (i % 3) + 1]);
        }
    }
}

/// Rows of one event are copied together from the one shard that holds
/// them, also for reasons with commas, quotes and line breaks (bad input
/// rows quote the reader's message), and gzip shards merge like plain ones.
#[test]
fn bad_input_rows_and_gzip_shards_merge_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let input = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/cli_bad_events.csv");
    let full = dir.path().join("full.csv");
    reco(&input, &full, None, &[]);
    let text = std::fs::read_to_string(&full).unwrap();
    assert!(text.contains("bad_input") && text.contains('"'), "{text}");
    let parts: Vec<PathBuf> = (0..2)
        .map(|k| {
            let part = dir.path().join(format!("part-{k}.csv.gz"));
            reco(&input, &part, Some((k, 2)), &[]);
            part
        })
        .collect();
    let merged = dir.path().join("merged.csv");
    assert!(merge(&parts, &merged).status.success());
    assert_eq!(std::fs::read_to_string(&merged).unwrap(), text);
}

#[test]
fn the_reco_manifest_records_inputs_hypotheses_options_and_counts() {
    let dir = tempfile::tempdir().unwrap();
    let input = demo("q7_ttbar.csv.gz");
    let hyp = dir.path().join("mine.toml");
    std::fs::write(&hyp, quarry::assign::presets::toml("bz-2l").unwrap()).unwrap();
    let out = dir.path().join("o.csv");
    ok(&[
        "reco",
        s(&input),
        "-H",
        "ttbar-ljets",
        "-H",
        s(&hyp),
        "--fit",
        "--shard",
        "1/3",
        "--best",
        "4",
        "-j",
        "1",
        "-o",
        s(&out),
        "-q",
    ]);
    let m = Manifest::read(&manifest::manifest_path(&out)).unwrap();
    assert_eq!(
        (m.format.as_str(), m.command.as_str()),
        (manifest::FORMAT, "reco")
    );
    assert_eq!(m.quarry_version, env!("CARGO_PKG_VERSION"));
    let size = std::fs::metadata(&input).unwrap().len();
    assert_eq!(m.inputs.len(), 1);
    assert_eq!(m.inputs[0].path, s(&input));
    assert_eq!(m.inputs[0].size, Some(size));
    assert_eq!(m.output, FileStamp::of(&out).unwrap());
    let names: Vec<_> = m
        .hypotheses
        .iter()
        .map(|h| (h.name.as_str(), h.source.as_str()))
        .collect();
    assert_eq!(names, [("ttbar-ljets", "ttbar-ljets"), ("bz-2l", s(&hyp))]);
    let preset = quarry::assign::presets::get("ttbar-ljets").unwrap();
    assert_eq!(
        m.hypotheses[0].toml_digest,
        manifest::digest(preset.to_toml().as_bytes())
    );
    assert_eq!(m.options["fit"], serde_json::json!(true));
    assert_eq!(m.options["best"], serde_json::json!(4));
    assert_eq!(m.options["btag_threshold"], serde_json::json!(0.5));
    assert_eq!(m.run["threads"], serde_json::json!(1));
    assert_eq!((m.shard.index, m.shard.count), (1, 3));
    // The demo file holds 2000 events (demo-events/README.md): ordinals
    // 1, 4, …, 1999 are shard 1's 667.
    assert_eq!(
        (m.events_read, m.events_processed, m.rows_written),
        (2000, 667, 1334)
    );
    assert_eq!(m.rows_by_status.values().sum::<u64>(), m.rows_written);
    let data_rows = std::fs::read_to_string(&out).unwrap().lines().count() as u64 - 1;
    assert_eq!(data_rows, m.rows_written);
    assert!(!m.host.is_empty() && m.wall_time_s > 0.0);
    assert!(m.started <= m.ended && m.started.ends_with('Z'));

    // Editing the hypothesis file changes its digest, not its name; a
    // comment does not (the digest is of the canonical TOML).
    let text = std::fs::read_to_string(&hyp).unwrap();
    let digest_after = |text: String| {
        std::fs::write(&hyp, text).unwrap();
        ok(&["reco", s(&input), "-H", s(&hyp), "-o", s(&out), "-q"]);
        let m = Manifest::read(&manifest::manifest_path(&out)).unwrap();
        assert_eq!(m.hypotheses[0].name, "bz-2l");
        m.hypotheses[0].toml_digest.clone()
    };
    let original = digest_after(text.clone());
    assert_eq!(digest_after(format!("# a comment\n{text}")), original);
    assert_ne!(
        digest_after(text.replace("leading_jets = 6", "leading_jets = 5")),
        original
    );
    // Writing to stdout writes no manifest; a failed run leaves the
    // previous output and manifest as they were.
    let r = quarry(&["reco", s(&input), "-q"]);
    assert!(r.status.success());
    let before = std::fs::read(manifest::manifest_path(&out)).unwrap();
    let r = quarry(&["reco", "/nonexistent.csv", "-o", s(&out), "-q"]);
    assert_eq!(r.status.code(), Some(2));
    assert_eq!(
        std::fs::read(manifest::manifest_path(&out)).unwrap(),
        before
    );
}

#[test]
fn incomplete_or_inconsistent_shards_are_refused_naming_them() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let input = demo("q7_ttbar.csv.gz");
    let parts = shards(&input, d, 3, &[]);
    let out = d.join("merged.csv");
    let p = |k: usize| parts[k].clone();

    // Missing and duplicated shards.
    refused(&[p(0), p(2)], &out, &["shard 1/3 is missing"]);
    refused(
        &[p(0), p(1), p(2), p(1)],
        &out,
        &["shard 1/3 is given 2 times", s(&parts[1])],
    );
    // An output that exists must not be touched by a refused merge.
    std::fs::write(&out, "earlier\n").unwrap();
    let r = merge(&[p(0), p(2)], &out);
    assert_eq!(r.status.code(), Some(5));
    assert_eq!(std::fs::read_to_string(&out).unwrap(), "earlier\n");
    std::fs::remove_file(&out).unwrap();

    // Shards of other runs: other options, other hypothesis order, another
    // input, another shard count.
    let other = |name: &str, input: &Path, shard: (u64, u64), extra: &[&str], hyps: &[&str]| {
        let part = d.join(name);
        let shard = format!("{}/{}", shard.0, shard.1);
        let mut args = vec!["reco", s(input)];
        args.extend(hyps);
        args.extend(extra);
        args.extend(["--shard", &shard, "-o", s(&part), "-q"]);
        ok(&args);
        part
    };
    let fit = other("fit-1.csv", &input, (1, 3), &["--fit"], &HYPOTHESES);
    refused(
        &[p(0), fit.clone(), p(2)],
        &out,
        &[&format!(
            "{} (shard 1/3) differs from {} in option fit (true vs false)",
            s(&fit),
            s(&parts[0])
        )],
    );
    let reordered = [
        "-H",
        "ttbar-ljets",
        "-H",
        "twtw-ljets-boosted",
        "-H",
        "bz-2l",
    ];
    let swapped = other("swapped-2.csv", &input, (2, 3), &[], &reordered);
    refused(
        &[p(0), p(1), swapped.clone()],
        &out,
        &[s(&swapped), "hypotheses"],
    );
    let bquark = demo("q7_bquark_900.csv.gz");
    let elsewhere = other("b-0.csv", &bquark, (0, 3), &[], &HYPOTHESES);
    refused(
        &[elsewhere.clone(), p(1), p(2)],
        &out,
        &["inputs", "q7_bquark_900"],
    );
    let four = other("four-3.csv", &input, (3, 4), &[], &HYPOTHESES);
    refused(&[p(0), p(1), p(2), four], &out, &["shard count (4 vs 3)"]);

    // A shard whose run failed has no output and no manifest; an output
    // without its manifest (deleted, or left by a tool other than quarry)
    // and an output changed after its run are refused too.
    let lone = d.join("lone.csv");
    std::fs::copy(p(1), &lone).unwrap();
    refused(
        &[p(0), lone.clone(), p(2)],
        &out,
        &[&format!("{}: no usable manifest", s(&lone))],
    );
    let grown = d.join("grown.csv");
    std::fs::copy(p(2), &grown).unwrap();
    std::fs::copy(
        manifest::manifest_path(&p(2)),
        manifest::manifest_path(&grown),
    )
    .unwrap();
    let mut text = std::fs::read(&grown).unwrap();
    // (A copy with its manifest is still the same output.)
    let merged_ok = d.join("ok.csv");
    assert!(merge(&[p(0), p(1), grown.clone()], &merged_ok)
        .status
        .success());
    text.extend_from_slice(&text.clone()[text.len() - 200..]);
    std::fs::write(&grown, &text).unwrap();
    refused(
        &[p(0), p(1), grown.clone()],
        &out,
        &[s(&grown), "not the output its manifest describes"],
    );

    // Rows that contradict the sharding rule, even with a manifest that
    // matches the file (re-stamped by hand): caught while merging, and the
    // partial output is not committed.
    let forged = d.join("forged.csv");
    let body = std::fs::read_to_string(p(1)).unwrap();
    let mut lines: Vec<&str> = body.lines().collect();
    lines.swap(1, 10);
    std::fs::write(&forged, lines.join("\n") + "\n").unwrap();
    let mut m = Manifest::read(&manifest::manifest_path(&p(1))).unwrap();
    m.output = FileStamp::of(&forged).unwrap();
    m.write_beside(&forged).unwrap();
    refused(
        &[p(0), forged.clone(), p(2)],
        &out,
        &[s(&forged), "out of input order"],
    );

    // --check verifies without writing.
    let r = quarry(&["merge", "--check", s(&parts[0]), s(&parts[1]), s(&parts[2])]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    assert!(String::from_utf8_lossy(&r.stderr).contains("complete and consistent"));
    let r = quarry(&["merge", "--check", s(&parts[0]), s(&parts[2])]);
    assert_eq!(r.status.code(), Some(5));
    assert!(String::from_utf8_lossy(&r.stderr).contains("shard 1/3 is missing"));

    // Usage errors: no output and no --check; stdout; a shard as output.
    assert_eq!(quarry(&["merge", s(&parts[0])]).status.code(), Some(1));
    assert_eq!(
        quarry(&["merge", s(&parts[0]), "-o", "-"]).status.code(),
        Some(1)
    );
    let r = quarry(&[
        "merge",
        s(&parts[0]),
        s(&parts[1]),
        s(&parts[2]),
        "-o",
        s(&parts[1]),
    ]);
    assert_eq!(r.status.code(), Some(1));
}

/// The library path a Rust caller would use: check, then merge into any
/// writer.
#[test]
fn the_library_merges_into_any_writer() {
    let dir = tempfile::tempdir().unwrap();
    let input = demo("q7_ttbar.csv.gz");
    let full = dir.path().join("full.csv");
    reco(&input, &full, None, &[]);
    let parts = shards(&input, dir.path(), 2, &[]);
    let set = quarry::merge::ShardSet::check(&parts).unwrap();
    let mut bytes = Vec::new();
    let counts = set.merge_into(&mut bytes).unwrap();
    assert_eq!((counts.events, counts.rows), (2000, 6000));
    assert_eq!(bytes, std::fs::read(&full).unwrap());
    match quarry::merge::ShardSet::check(&parts[..1]) {
        Err(quarry::merge::MergeError::Refused(p)) => {
            assert_eq!(p, [quarry::merge::Problem::Missing { index: 1, count: 2 }]);
        }
        other => panic!("expected a refusal, got {other:?}"),
    }
}

/// The recipe and the refusal example of docs/cli.md's "Batch jobs", run
/// as written (three hypotheses in non-alphabetical order).
#[test]
fn the_documented_merge_recipe_works_as_written() {
    let doc =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/cli.md")).unwrap();
    let after = |marker: &str, fence: &str| {
        let at = doc
            .find(marker)
            .unwrap_or_else(|| panic!("{marker} not in docs/cli.md"));
        let block = &doc[at..];
        let start = block.find(fence).unwrap() + fence.len();
        let len = block[start..].find("\n```").unwrap();
        block[start..start + len]
            .trim_start_matches('\n')
            .to_string()
    };
    let recipe = after("<!-- merge-recipe", "```sh\n");
    assert!(
        recipe.contains("-H twtw-ljets-boosted -H ttbar-ljets -H bz-2l"),
        "{recipe}"
    );
    let dir = tempfile::tempdir().unwrap();
    std::fs::copy(
        demo("q7_bquark_1400.csv.gz"),
        dir.path().join("events.csv.gz"),
    )
    .unwrap();
    let bin = Path::new(env!("CARGO_BIN_EXE_quarry")).parent().unwrap();
    let path = format!(
        "{}:{}",
        bin.display(),
        std::env::var("PATH").unwrap_or_default()
    );
    let run = |script: &str| {
        Command::new("bash")
            .args(["-euo", "pipefail", "-c", script])
            .current_dir(dir.path())
            .env("PATH", &path)
            .output()
            .unwrap()
    };
    let r = run(&recipe);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let full = dir.path().join("full.csv");
    reco(&dir.path().join("events.csv.gz"), &full, None, &[]);
    assert!(std::fs::read(dir.path().join("reco.csv")).unwrap() == std::fs::read(&full).unwrap());

    let example = after("When shards are\nmissing", "```text\n");
    let (command, expected) = example.split_once('\n').unwrap();
    std::fs::remove_file(dir.path().join("reco.csv")).unwrap();
    let r = run(command.trim_start_matches("$ "));
    assert_eq!(r.status.code(), Some(5));
    assert_eq!(
        String::from_utf8_lossy(&r.stderr).trim_end(),
        expected.trim_end()
    );
    assert!(!dir.path().join("reco.csv").exists());
}

/// The summary's statement of the README ("one row per hypothesis for
/// every event processed"), checked where it used to be false: under
/// --shard, and for a truncated gzip under --on-bad stop.
#[test]
fn summary_counts_agree_with_the_rows_written() {
    let dir = tempfile::tempdir().unwrap();
    let input = demo("q7_ttbar.csv.gz");
    let out = dir.path().join("o.csv");
    let r = ok(&[
        "reco",
        s(&input),
        "-H",
        "ttbar-ljets",
        "-H",
        "bz-2l",
        "--shard",
        "1/3",
        "-o",
        s(&out),
    ]);
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.starts_with("quarry reco: 2000 events read, 667 in shard 1/3; 1334 rows"),
        "{err}"
    );
    let rows = std::fs::read_to_string(&out).unwrap().lines().count() - 1;
    assert_eq!(rows, 667 * 2);

    // A gzip stream cut short: under --on-bad stop the event it breaks off
    // in is read but gets no rows, and the summary says so.
    let cut = dir.path().join("cut.csv.gz");
    std::fs::write(&cut, &std::fs::read(&input).unwrap()[..60_000]).unwrap();
    let r = quarry(&["reco", s(&cut), "--on-bad", "stop", "-o", s(&out)]);
    assert_eq!(r.status.code(), Some(2));
    let err = String::from_utf8_lossy(&r.stderr);
    let first = err.lines().next().unwrap();
    let read: u64 = first["quarry reco: ".len()..]
        .split(' ')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert!(
        first.contains(&format!(
            "{read} events read, the last one stopped the run (no rows for it); {} rows",
            read - 1
        )),
        "{err}"
    );
    // Under --on-bad skip the same event is a bad_input row: rows = read.
    let r = quarry(&["reco", s(&cut), "-o", s(&out)]);
    assert_eq!(r.status.code(), Some(2));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.starts_with(&format!("quarry reco: {read} events read; {read} rows")),
        "{err}"
    );
}
