//! `quarry reco` on Parquet inputs, with the built binary: the real
//! NanoAOD events of tests/fixtures/nanoaod-200ev.parquet under three
//! presets (every event accounted for; the same rows as from the same
//! events in quarry's long-form CSV), sharding, bad values as `bad_input`
//! rows naming file, row group, row and column, and structural errors
//! (exit 2, naming the column and what was expected).
//!
//! Data source: tests/fixtures/nanoaod-200ev.parquet is 200 simulated
//! events of CMS Open Data (2015) in NanoAOD format
//! (../shared/data/cms-open-data-nanoaod-200ev.root, see
//! ../shared/data/README.md), converted by scripts/root_to_parquet.py; the
//! long-form CSV of the same events is the `csv` text that
//! tests/reference/nanoaod_parquet.py writes from `uproot`'s reading of the
//! ROOT file into tests/reference/fixtures/nanoaod_parquet.json.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::Arc;

use arrow_array::builder::{Float32Builder, ListBuilder};
use arrow_array::{ArrayRef, RecordBatch, UInt32Array, UInt64Array};
use parquet::arrow::ArrowWriter;

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn fixture() -> PathBuf {
    repo().join("tests/fixtures/nanoaod-200ev.parquet")
}

fn map_2015() -> PathBuf {
    repo().join("tests/fixtures/nanoaod-2015.toml")
}

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

/// Output rows as column → value.
fn rows(path: &Path) -> Vec<BTreeMap<String, String>> {
    let mut r = csv::Reader::from_path(path).expect("open output");
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(header, quarry::output::COLUMNS);
    r.records()
        .map(|rec| {
            header
                .iter()
                .cloned()
                .zip(rec.unwrap().iter().map(String::from))
                .collect()
        })
        .collect()
}

/// The long-form CSV of the same 200 events, as the reference script wrote
/// it from uproot's reading of the ROOT file.
fn reference_csv(dir: &Path) -> PathBuf {
    let json: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(repo().join("tests/reference/fixtures/nanoaod_parquet.json"))
            .unwrap(),
    )
    .unwrap();
    let path = dir.join("nanoaod-200ev.csv");
    std::fs::write(&path, json["csv"].as_str().expect("csv text")).unwrap();
    path
}

const PRESETS: [&str; 3] = ["ttbar-ljets", "bwbw-ljets", "tz-3l"];

fn reco(input: &Path, extra: &[&str], output: &Path) -> Output {
    let mut args = vec!["reco", s(input), "-q", "--no-progress", "-j", "2"];
    for p in PRESETS {
        args.extend(["-H", p]);
    }
    args.extend(extra);
    args.extend(["-o", s(output)]);
    ok(&args)
}

#[test]
fn real_nanoaod_events_every_event_accounted_for_and_the_same_rows_as_from_csv() {
    let dir = tempfile::tempdir().unwrap();
    let from_parquet = dir.path().join("parquet.csv");
    let from_csv = dir.path().join("csv.csv");
    reco(&fixture(), &["--columns", s(&map_2015())], &from_parquet);
    reco(&reference_csv(dir.path()), &[], &from_csv);

    let table = rows(&from_parquet);
    assert_eq!(table.len(), 200 * PRESETS.len());
    for (i, chunk) in table.chunks(PRESETS.len()).enumerate() {
        for (row, preset) in chunk.iter().zip(PRESETS) {
            assert_eq!(row["ordinal"], i.to_string());
            assert_eq!(row["hypothesis"], preset);
            assert_ne!(row["event"], "", "every event id read");
        }
    }
    // Statuses per preset (W + jets simulation: few events pass a top-pair
    // or heavy-quark selection; what matters is that every event has one).
    let mut statuses: BTreeMap<(String, String), usize> = BTreeMap::new();
    for row in &table {
        *statuses
            .entry((row["hypothesis"].clone(), row["status"].clone()))
            .or_default() += 1;
    }
    eprintln!("statuses: {statuses:?}");
    for preset in PRESETS {
        let n: usize = statuses
            .iter()
            .filter(|((h, _), _)| h == preset)
            .map(|(_, n)| n)
            .sum();
        assert_eq!(n, 200, "{preset}");
    }
    assert!(
        !statuses.keys().any(|(_, st)| st == "bad_input"),
        "no event is bad under the 2015 map: {statuses:?}"
    );
    // W + jets: under the default selection nearly every event has too
    // few jets; several statuses still show up.
    assert!(statuses.len() >= 4, "{statuses:?}");
    // The same events from the long-form CSV give the same bytes.
    let a = std::fs::read(&from_parquet).unwrap();
    let b = std::fs::read(&from_csv).unwrap();
    assert!(a == b, "Parquet and CSV inputs gave different rows");

    // Without the object selection many events are reconstructed, so the
    // comparison covers masses, χ² and assignments too.
    let all_parquet = dir.path().join("all-parquet.csv");
    let all_csv = dir.path().join("all-csv.csv");
    let map = map_2015();
    let columns = ["--columns", s(&map), "--no-selection"];
    reco(&fixture(), &columns, &all_parquet);
    reco(&reference_csv(dir.path()), &["--no-selection"], &all_csv);
    let ok_rows = rows(&all_parquet)
        .iter()
        .filter(|r| r["status"] == "ok")
        .count();
    eprintln!("ok rows without selection: {ok_rows}");
    // 7 at the time of writing (W + jets events, few with four jets).
    assert!(ok_rows >= 5, "{ok_rows} rows reconstructed");
    assert!(
        std::fs::read(&all_parquet).unwrap() == std::fs::read(&all_csv).unwrap(),
        "Parquet and CSV inputs gave different rows without selection"
    );
}

#[test]
fn the_input_format_is_chosen_by_content_not_by_suffix() {
    let dir = tempfile::tempdir().unwrap();
    let renamed = dir.path().join("events.csv");
    std::fs::copy(fixture(), &renamed).unwrap();
    let a = dir.path().join("a.csv");
    let b = dir.path().join("b.csv");
    reco(&renamed, &["--columns", "nanoaod"], &a);
    reco(&fixture(), &["--columns", "nanoaod"], &b);
    assert_eq!(std::fs::read(&a).unwrap(), std::fs::read(&b).unwrap());
    assert_eq!(rows(&a).len(), 600);
    // A CSV named .parquet is read as CSV.
    let csv_named = dir.path().join("events.parquet");
    std::fs::copy(reference_csv(dir.path()), &csv_named).unwrap();
    let c = dir.path().join("c.csv");
    reco(&csv_named, &[], &c);
    assert_eq!(rows(&c).len(), 600);
}

#[test]
fn shards_of_a_parquet_input_partition_its_events() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole.csv");
    reco(&fixture(), &["--columns", "nanoaod"], &whole);
    let whole = rows(&whole);
    let mut joined = Vec::new();
    for k in 0..3 {
        let out = dir.path().join(format!("part{k}.csv"));
        let shard = format!("{k}/3");
        reco(
            &fixture(),
            &["--columns", "nanoaod", "--shard", &shard],
            &out,
        );
        let part = rows(&out);
        for row in &part {
            assert_eq!(row["ordinal"].parse::<u64>().unwrap() % 3, k);
        }
        joined.extend(part);
    }
    joined.sort_by_key(|r| r["ordinal"].parse::<u64>().unwrap());
    assert_eq!(joined, whole);
}

#[test]
fn without_a_column_map_a_per_event_file_is_refused_with_a_hint() {
    let dir = tempfile::tempdir().unwrap();
    let out = quarry(&[
        "reco",
        s(&fixture()),
        "-q",
        "-o",
        s(&dir.path().join("o.csv")),
    ]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("--columns"), "{err}");
    assert!(!dir.path().join("o.csv").exists());
}

#[test]
fn the_manifest_lists_the_column_map_and_fingerprints_the_input() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("o.csv");
    reco(&fixture(), &["--columns", s(&map_2015())], &out);
    let manifest_path = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.to_string_lossy().contains("manifest"))
        .expect("manifest beside the output");
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(manifest_path).unwrap()).unwrap();
    assert_eq!(m["options"]["columns"]["source"], s(&map_2015()));
    let digest = m["options"]["columns"]["toml_digest"].as_str().unwrap();
    assert_eq!(
        digest,
        quarry::manifest::digest(&std::fs::read(map_2015()).unwrap())
    );
    let input = &m["inputs"][0];
    assert_eq!(
        input["size"].as_u64(),
        Some(std::fs::metadata(fixture()).unwrap().len())
    );
    assert!(input["fingerprint"].as_str().is_some_and(|f| !f.is_empty()));
}

fn list(rows: &[&[f32]]) -> ArrayRef {
    let mut b = ListBuilder::new(Float32Builder::new());
    for r in rows {
        for &x in *r {
            b.values().append_value(x);
        }
        b.append(true);
    }
    Arc::new(b.finish())
}

/// A per-event file of jets, two rows per row group.
fn write_jets(path: &Path, counts: &[u32], pt: &[&[f32]], eta_column: ArrayRef) {
    let n = counts.len() as u64;
    let batch = RecordBatch::try_from_iter([
        (
            "event",
            Arc::new(UInt64Array::from_iter_values(100..100 + n)) as ArrayRef,
        ),
        (
            "nJet",
            Arc::new(UInt32Array::from(counts.to_vec())) as ArrayRef,
        ),
        ("Jet_pt", list(pt)),
        ("Jet_eta", eta_column),
        ("Jet_phi", {
            let phi: Vec<Vec<f32>> = pt.iter().map(|r| vec![0.5; r.len()]).collect();
            list(&phi.iter().map(Vec::as_slice).collect::<Vec<_>>())
        }),
        ("Jet_mass", list(pt)),
    ])
    .unwrap();
    let props = parquet::file::properties::WriterProperties::builder()
        .set_max_row_group_row_count(Some(2))
        .build();
    let mut w = ArrowWriter::try_new(
        std::fs::File::create(path).unwrap(),
        batch.schema(),
        Some(props),
    )
    .unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
}

const JET_MAP: &str = "event = 'event'\n[jets]\ncount = 'nJet'\npt = 'Jet_pt'\neta = 'Jet_eta'\nphi = 'Jet_phi'\nmass = 'Jet_mass'\n";

#[test]
fn a_bad_value_is_a_bad_input_row_naming_file_row_group_row_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("jets.parquet");
    let map = dir.path().join("map.toml");
    std::fs::write(&map, JET_MAP).unwrap();
    let pt: [&[f32]; 4] = [&[50.0], &[60.0, 1.0], &[70.0], &[80.0]];
    let eta: [&[f32]; 4] = [&[0.1], &[0.2, 0.3], &[f32::NAN], &[0.4]];
    write_jets(&input, &[1, 2, 1, 1], &pt, list(&eta));
    let out = dir.path().join("o.csv");
    ok(&["reco", s(&input), "--columns", s(&map), "-q", "-o", s(&out)]);
    let table = rows(&out);
    assert_eq!(table.len(), 4, "every event accounted for");
    let bad: Vec<_> = table
        .iter()
        .filter(|r| r["status"] == "bad_input")
        .collect();
    assert_eq!(bad.len(), 1);
    assert_eq!(bad[0]["event"], "102");
    assert_eq!(bad[0]["ordinal"], "2");
    let reason = &bad[0]["reason"];
    for part in ["jets.parquet", "row group 1", "row 2", "'Jet_eta'[0]"] {
        assert!(reason.contains(part), "{part} missing from: {reason}");
    }
    // Under --on-bad stop the run ends at it with exit 2 and writes nothing.
    let stopped = dir.path().join("stopped.csv");
    let run = quarry(&[
        "reco",
        s(&input),
        "--columns",
        s(&map),
        "-q",
        "--on-bad",
        "stop",
        "-o",
        s(&stopped),
    ]);
    assert_eq!(run.status.code(), Some(2));
    let err = String::from_utf8_lossy(&run.stderr);
    assert!(
        err.contains("row group 1, row 2") && err.contains("Jet_eta"),
        "{err}"
    );
    assert!(!stopped.exists());
}

#[test]
fn structural_errors_exit_2_naming_the_column_and_what_was_expected() {
    let dir = tempfile::tempdir().unwrap();
    let map = dir.path().join("map.toml");
    std::fs::write(&map, JET_MAP).unwrap();
    let run = |input: &Path| {
        let out = dir.path().join("o.csv");
        let r = quarry(&["reco", s(input), "--columns", s(&map), "-q", "-o", s(&out)]);
        assert!(!out.exists(), "no output on a structural error");
        assert_eq!(r.status.code(), Some(2), "{input:?}");
        String::from_utf8_lossy(&r.stderr).into_owned()
    };
    // A list longer than its count.
    let lengths = dir.path().join("lengths.parquet");
    let pt: [&[f32]; 2] = [&[50.0], &[60.0, 1.0]];
    write_jets(&lengths, &[1, 1], &pt, list(&pt));
    let err = run(&lengths);
    assert!(err.contains("nJet") && err.contains("Jet_pt"), "{err}");
    // A mapped column of the wrong type (integers, not a list of numbers).
    let typed = dir.path().join("typed.parquet");
    write_jets(
        &typed,
        &[1, 1],
        &[&[50.0], &[60.0]],
        Arc::new(UInt32Array::from(vec![1, 2])),
    );
    let err = run(&typed);
    assert!(err.contains("Jet_eta") && err.contains("expected"), "{err}");
    // A missing mapped column.
    let missing_map = dir.path().join("missing.toml");
    std::fs::write(&missing_map, JET_MAP.replace("Jet_mass", "Jet_m")).unwrap();
    let out = dir.path().join("o.csv");
    let r = quarry(&[
        "reco",
        s(&lengths),
        "--columns",
        s(&missing_map),
        "-q",
        "-o",
        s(&out),
    ]);
    assert_eq!(r.status.code(), Some(2));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(err.contains("Jet_m'") || err.contains("'Jet_m"), "{err}");
    // Not Parquet: the magic bytes, then garbage.
    let fake = dir.path().join("fake.parquet");
    std::fs::write(&fake, b"PAR1 not really").unwrap();
    let err = run(&fake);
    assert!(err.contains("fake.parquet"), "{err}");
}

#[test]
fn columns_template_drafts_a_map_that_reads_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let out = ok(&["columns", "template", s(&fixture())]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("pt = \"Jet_pt\""), "{text}");
    let map = dir.path().join("drafted.toml");
    std::fs::write(&map, &text).unwrap();
    let o = dir.path().join("o.csv");
    reco(&fixture(), &["--columns", s(&map)], &o);
    assert_eq!(rows(&o).len(), 600);
    let listed = String::from_utf8(ok(&["columns", "list"]).stdout).unwrap();
    assert!(listed.starts_with("nanoaod "), "{listed}");
    let shown = String::from_utf8(ok(&["columns", "show", "nanoaod"]).stdout).unwrap();
    assert_eq!(shown, quarry::parquet::SHIPPED_MAPS[0].2);
    assert_eq!(quarry(&["columns", "show", "nope"]).status.code(), Some(1));
    let not_parquet = quarry(&["columns", "template", s(&map)]);
    assert_eq!(not_parquet.status.code(), Some(2));
}

#[test]
fn parquet_output_has_the_csv_columns_typed_and_merge_refuses_parquet_shards() {
    use arrow_array::cast::AsArray;
    use arrow_array::Array;
    let dir = tempfile::tempdir().unwrap();
    let csv_out = dir.path().join("o.csv");
    let pq_out = dir.path().join("o.parquet");
    let map = map_2015();
    let extra = ["--columns", s(&map), "--no-selection", "--fit"];
    reco(&fixture(), &extra, &csv_out);
    reco(&fixture(), &extra, &pq_out);
    assert!(dir.path().join("o.parquet.manifest.json").exists());
    // Every cell of the Parquet output, written as the CSV output writes
    // it, gives the CSV output's cells (the Rust side of the check that
    // tests/reference would make with pyarrow).
    let want = rows(&csv_out);
    let file = std::fs::File::open(&pq_out).unwrap();
    let reader = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap();
    let mut got: Vec<BTreeMap<String, String>> = Vec::new();
    for batch in reader {
        let batch = batch.unwrap();
        let schema = batch.schema();
        let names: Vec<&String> = schema.fields().iter().map(|f| f.name()).collect();
        assert_eq!(names, quarry::output::COLUMNS);
        for i in 0..batch.num_rows() {
            let mut row = BTreeMap::new();
            for (c, name) in names.iter().enumerate() {
                let col = batch.column(c);
                let text = if col.is_null(i) {
                    String::new()
                } else if let Some(a) = col.as_primitive_opt::<arrow_array::types::UInt64Type>() {
                    a.value(i).to_string()
                } else if let Some(a) = col.as_primitive_opt::<arrow_array::types::Float64Type>() {
                    format!("{:?}", a.value(i))
                } else if let Some(a) = col.as_boolean_opt() {
                    u8::from(a.value(i)).to_string()
                } else if let Some(d) = col.as_dictionary_opt::<arrow_array::types::Int32Type>() {
                    let values = d.values().as_string::<i32>();
                    values.value(d.keys().value(i) as usize).to_string()
                } else {
                    panic!("column {name}: unexpected type {:?}", col.data_type());
                };
                row.insert(name.to_string(), text);
            }
            got.push(row);
        }
    }
    assert_eq!(got.len(), 600);
    assert!(
        got.iter().any(|r| !r["fit_status"].is_empty()),
        "the fit ran"
    );
    // Numbers compared as numbers (the CSV writes the shortest text that
    // reads back to the same f64), everything else as text.
    let norm = |row: &BTreeMap<String, String>| -> BTreeMap<String, String> {
        row.iter()
            .map(|(k, v)| {
                let v = v
                    .parse::<f64>()
                    .map_or_else(|_| v.clone(), |x| format!("{x:?}"));
                (k.clone(), v)
            })
            .collect()
    };
    for (g, w) in got.iter().zip(&want) {
        assert_eq!(norm(g), norm(w));
    }
    // quarry merge refuses Parquet shards, naming the file.
    let merged = dir.path().join("merged.csv");
    let r = quarry(&["merge", s(&pq_out), "-o", s(&merged)]);
    assert_eq!(r.status.code(), Some(5));
    let err = String::from_utf8_lossy(&r.stderr);
    assert!(
        err.contains("o.parquet") && err.contains("Parquet shard"),
        "{err}"
    );
}
