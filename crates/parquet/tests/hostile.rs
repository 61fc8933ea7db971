//! Hostile and structural inputs: every bad event is kept as a bad record
//! naming file, row group, row and column; every structural problem is an
//! error naming the column and what was expected. The long form is checked
//! against quarry's CSV reader on the same content.

use std::path::Path;
use std::sync::Arc;

use arrow_array::builder::{Float32Builder, ListBuilder};
use arrow_array::{ArrayRef, RecordBatch, UInt32Array, UInt64Array};
use parquet::arrow::ArrowWriter;
use quarry_csv::{BadReason, EventReader};
use quarry_parquet::{
    Cell, Column, ColumnMap, ColumnType, Layout, ParquetError, ParquetReader, ReadOptions, Record,
    TableWriter,
};

const MAP: &str = "event = 'event'\n[jets]\ncount = 'nJet'\npt = 'Jet_pt'\neta = 'Jet_eta'\nphi = 'Jet_phi'\nmass = 'Jet_mass'\n";

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

/// A per-event file with `nJet` and four jet lists, one row group per
/// `group` rows.
fn write_jets(path: &Path, counts: &[u32], jets: &[&[f32]], eta: &[&[f32]], group: usize) {
    let phi_rows: Vec<Vec<f32>> = jets.iter().map(|r| vec![0.5; r.len()]).collect();
    let phi: Vec<&[f32]> = phi_rows.iter().map(Vec::as_slice).collect();
    let batch = RecordBatch::try_from_iter([
        (
            "event",
            Arc::new(UInt64Array::from_iter_values(
                (0..counts.len() as u64).map(|i| 100 + i),
            )) as ArrayRef,
        ),
        (
            "nJet",
            Arc::new(UInt32Array::from(counts.to_vec())) as ArrayRef,
        ),
        ("Jet_pt", list(jets)),
        ("Jet_eta", list(eta)),
        ("Jet_phi", list(&phi)),
        ("Jet_mass", list(jets)),
    ])
    .unwrap();
    let props = parquet::file::properties::WriterProperties::builder()
        .set_max_row_group_row_count(Some(group))
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

fn open(path: &Path, map: &str) -> Result<ParquetReader, ParquetError> {
    let map = ColumnMap::from_toml(map, "test.toml").unwrap();
    ParquetReader::open(
        path,
        Some(Layout::PerEvent(Box::new(map))),
        ReadOptions::default(),
    )
}

#[test]
fn a_bad_value_is_a_bad_record_that_says_where_and_the_run_goes_on() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("jets.parquet");
    write_jets(
        &path,
        &[1, 2, 1],
        &[&[30.0], &[40.0, 35.0], &[50.0]],
        &[&[0.1], &[0.2, f32::NAN], &[0.3]],
        2,
    );
    let records: Vec<Record> = open(&path, MAP).unwrap().map(Result::unwrap).collect();
    assert_eq!(records.len(), 3);
    assert!(matches!(&records[0], Record::Good(e) if e.id == 100 && e.jets.len() == 1));
    assert!(matches!(&records[2], Record::Good(e) if e.id == 102));
    let Record::Bad(bad) = &records[1] else {
        panic!("row 1 is bad")
    };
    assert_eq!(bad.id, Some(101));
    assert_eq!(bad.reason, BadReason::NotFinite);
    assert_eq!(
        bad.to_string(),
        format!(
            "{}: row group 0, row 1: column 'Jet_eta'[1]: 'NaN' is not a finite number",
            path.display()
        )
    );
}

#[test]
fn a_list_that_disagrees_with_its_count_is_a_structural_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("count.parquet");
    write_jets(
        &path,
        &[1, 1, 3],
        &[&[30.0], &[40.0], &[50.0, 20.0]],
        &[&[0.1], &[0.2], &[0.3, 0.4]],
        2,
    );
    let mut reader = open(&path, MAP).unwrap();
    assert!(matches!(reader.next(), Some(Ok(Record::Good(_)))));
    assert!(matches!(reader.next(), Some(Ok(Record::Good(_)))));
    let err = reader.next().unwrap().unwrap_err().to_string();
    assert_eq!(
        err,
        format!("{}: row group 1, row 2: column 'Jet_pt' has 2 values, but the count column 'nJet' says 3", path.display())
    );
    assert!(reader.next().is_none(), "nothing after a fatal error");
    // Lists of one collection with different lengths, no count column.
    let path = dir.path().join("lengths.parquet");
    write_jets(&path, &[1], &[&[30.0]], &[&[0.1, 0.2]], 2);
    let no_count = MAP.replace("count = 'nJet'\n", "");
    let err = open(&path, &no_count)
        .unwrap()
        .next()
        .unwrap()
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("column 'Jet_eta' has 2 values, column 'Jet_pt' has 1"),
        "{err}"
    );
}

#[test]
fn missing_and_mistyped_columns_are_named_with_what_was_expected() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("jets.parquet");
    write_jets(&path, &[1], &[&[30.0]], &[&[0.1]], 2);
    let err = open(&path, &MAP.replace("'Jet_mass'", "'Jet_m'"))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("missing column 'Jet_m' (the column map's jets.mass)"),
        "{err}"
    );
    let err = open(&path, &MAP.replace("pt = 'Jet_pt'", "pt = 'nJet'"))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains(
            "column 'nJet' (the column map's jets.pt) is uint32, expected a list column of numbers"
        ),
        "{err}"
    );
    let err = open(&path, &MAP.replace("count = 'nJet'", "count = 'Jet_pt'"))
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("is list<float32>, expected an integer column"),
        "{err}"
    );
    // Without a map, a per-event file asks for one.
    let err = ParquetReader::open(&path, None, ReadOptions::default())
        .unwrap_err()
        .to_string();
    assert!(err.contains("needs a column map"), "{err}");
}

#[test]
fn files_that_are_not_parquet_or_are_cut_short_are_errors() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("events.parquet");
    std::fs::write(&csv, "event,kind,pt\n1,jet,30\n").unwrap();
    let err = open(&csv, MAP).unwrap_err();
    assert!(matches!(err, ParquetError::NotParquet { .. }), "{err}");
    assert!(err.to_string().contains("not a Parquet file"));
    let fixture =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("../../tests/fixtures/nanoaod-200ev.parquet");
    let bytes = std::fs::read(fixture).unwrap();
    let cut = dir.path().join("cut.parquet");
    std::fs::write(&cut, &bytes[..bytes.len() / 2]).unwrap();
    let err = open(&cut, MAP).unwrap_err().to_string();
    assert!(err.contains("cut.parquet: footer"), "{err}");
    let empty = dir.path().join("empty.parquet");
    std::fs::write(&empty, b"").unwrap();
    assert!(matches!(
        open(&empty, MAP).unwrap_err(),
        ParquetError::NotParquet { .. }
    ));
}

/// The long form's columns, typed.
const LONG: [Column; 8] = [
    Column {
        name: "event",
        ty: ColumnType::UInt64,
    },
    Column {
        name: "kind",
        ty: ColumnType::Text,
    },
    Column {
        name: "pt",
        ty: ColumnType::Float64,
    },
    Column {
        name: "eta",
        ty: ColumnType::Float64,
    },
    Column {
        name: "phi",
        ty: ColumnType::Float64,
    },
    Column {
        name: "mass",
        ty: ColumnType::Float64,
    },
    Column {
        name: "btag",
        ty: ColumnType::Float64,
    },
    Column {
        name: "charge",
        ty: ColumnType::Float64,
    },
];

type LongRow<'a> = (
    u64,
    &'a str,
    f64,
    Option<f64>,
    f64,
    Option<f64>,
    Option<f64>,
    Option<f64>,
);

fn write_long(path: &Path, rows: &[LongRow]) {
    let mut w = TableWriter::create(path, &LONG).unwrap();
    for &(e, k, pt, eta, phi, m, b, q) in rows {
        w.push(&[
            Cell::U64(Some(e)),
            Cell::Text(Some(k)),
            Cell::F64(Some(pt)),
            Cell::F64(eta),
            Cell::F64(Some(phi)),
            Cell::F64(m),
            Cell::F64(b),
            Cell::F64(q),
        ])
        .unwrap();
    }
    w.finish().unwrap();
}

fn csv_of(rows: &[LongRow]) -> String {
    let o = |x: Option<f64>| x.map_or(String::new(), |v| v.to_string());
    let mut s = "event,kind,pt,eta,phi,mass,btag,charge\n".to_string();
    for &(e, k, pt, eta, phi, m, b, q) in rows {
        s += &format!("{e},{k},{pt},{},{phi},{},{},{}\n", o(eta), o(m), o(b), o(q));
    }
    s
}

#[test]
fn the_long_form_reads_as_the_csv_reader_reads_the_same_rows() {
    let rows: Vec<LongRow> = vec![
        (7, "jet", 50.5, Some(0.1), 0.2, Some(5.0), Some(0.9), None),
        (7, "jet", 40.25, Some(-1.2), 2.0, Some(4.0), Some(0.1), None),
        (
            7,
            "muon",
            30.0,
            Some(0.5),
            -1.0,
            Some(0.105),
            None,
            Some(-1.0),
        ),
        (7, "met", 25.0, None, 1.5, None, None, None),
        (
            8,
            "electron",
            60.0,
            Some(1.0),
            0.5,
            Some(0.000511),
            None,
            Some(1.0),
        ),
        (8, "jet", 70.0, Some(0.3), 0.1, Some(-2.0), Some(0.5), None), // negative mass
        (9, "fatjet", 300.0, Some(0.0), 0.0, Some(80.0), None, None),
        (9, "tau", 10.0, Some(0.0), 0.0, Some(1.7), None, None), // unknown kind
        (10, "jet", 45.0, Some(0.0), 0.0, Some(4.0), Some(1.5), None), // btag > 1
        (11, "jet", 45.0, Some(0.0), 0.0, Some(4.0), None, None),
        (10, "jet", 45.0, Some(0.0), 0.0, Some(4.0), None, None), // split event
    ];
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("long.parquet");
    write_long(&path, &rows);
    let from_parquet: Vec<Record> = ParquetReader::open(&path, None, ReadOptions::default())
        .unwrap()
        .map(Result::unwrap)
        .collect();
    let opts = quarry_csv::ReadOptions::default().with_policy(quarry_csv::ErrorPolicy::Skip);
    let from_csv: Vec<quarry_csv::Record> =
        EventReader::from_reader(std::io::Cursor::new(csv_of(&rows)), "long.csv", opts)
            .unwrap()
            .map(Result::unwrap)
            .collect();
    assert_eq!(
        from_parquet.len(),
        from_csv.len(),
        "one record per event, as the CSV reader"
    );
    assert_eq!(from_parquet.len(), 6);
    for (p, c) in from_parquet.iter().zip(&from_csv) {
        match (p, c) {
            (Record::Good(a), quarry_csv::Record::Good(b)) => assert_eq!(a, b),
            (Record::Bad(a), quarry_csv::Record::Bad(b)) => {
                assert_eq!((a.id, a.reason), (b.id, b.reason()), "{a} / {}", b.error);
                assert_eq!(a.column, b.error.column, "{a}");
            }
            _ => panic!("{p:?} vs {c:?}"),
        }
    }
    let Record::Bad(negative) = &from_parquet[1] else {
        panic!()
    };
    assert_eq!(
        negative.to_string(),
        format!("{}: row group 0, row 5: column 'mass': '-2' is negative (expected mass ≥ 0; a column map may read small negative masses as 0 with negative_mass = \"zero\")", path.display())
    );
}

#[test]
fn an_unfinished_writer_leaves_nothing_behind() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("out.parquet");
    let mut w = TableWriter::create(&path, &LONG[..1]).unwrap();
    w.push(&[Cell::U64(Some(1))]).unwrap();
    assert!(
        w.push(&[Cell::F64(Some(1.0))]).is_err(),
        "a cell of the wrong type"
    );
    drop(w);
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
}
