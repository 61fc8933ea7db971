//! What the Parquet event reader promises on *any* bytes, checked after
//! reading them: no panic; at most one fatal error, then the end; every
//! event of every row group either yielded (good or bad record, in file
//! order) or behind a fatal error that names the file and a row group, a
//! row or a column; the same records whatever the batch size and the
//! number of row groups decoded at once; good events within the format's
//! limits.
//!
//! **Design decision:** this one file is compiled twice: by the
//! `parquet_reader` fuzz target (as a module of the fuzz library) and by
//! the stable test `crates/parquet/tests/mutated.rs` (with `#[path]`), so
//! libFuzzer on nightly and `cargo test` on stable assert the same
//! promises. It therefore names only crates both builds have:
//! `quarry_parquet`, `quarry_event`, `quarry_lorentz`, `bytes`.

use bytes::Bytes;
use quarry_event::Event;
use quarry_lorentz::FourMomentum;
use quarry_parquet::{ColumnMap, Layout, ParquetError, ParquetReader, ReadOptions, Record};

/// The name every message must carry.
pub const NAME: &str = "fuzz.parquet";

/// The layout a fuzz input is read with, from its first byte: even → one
/// row per event through the shipped `nanoaod` map, odd → the long form.
pub fn layout_of(selector: u8) -> Layout {
    if selector & 1 == 0 {
        Layout::PerEvent(Box::new(
            ColumnMap::named("nanoaod").expect("the shipped map loads"),
        ))
    } else {
        Layout::LongForm
    }
}

/// One complete read of a file.
#[derive(Debug)]
pub struct ParquetOutcome {
    /// Rows and row groups in the footer, or the error that refused the file.
    pub opened: Result<(u64, usize), String>,
    /// Records in the order yielded.
    pub records: Vec<Record>,
    /// The fatal error that ended the iteration, if one did.
    pub fatal: Option<String>,
}

/// Reads `bytes` to the end, checking the iterator protocol and the form
/// of every error on the way.
pub fn read_parquet(bytes: &Bytes, layout: &Layout, options: ReadOptions) -> ParquetOutcome {
    let reader = match ParquetReader::from_bytes(bytes.clone(), NAME, Some(layout.clone()), options)
    {
        Ok(r) => r,
        Err(e) => {
            check_open_error(&e);
            return ParquetOutcome {
                opened: Err(e.to_string()),
                records: Vec::new(),
                fatal: None,
            };
        }
    };
    assert_eq!(reader.name(), NAME);
    let groups = reader.num_row_groups();
    let rows = reader.num_rows();
    let mut reader = reader;
    let mut records = Vec::new();
    let mut fatal = None;
    for item in reader.by_ref() {
        assert!(
            fatal.is_none(),
            "the reader yielded an item after a fatal error"
        );
        match item {
            Ok(r) => records.push(r),
            Err(e) => {
                check_stream_error(&e, groups, rows);
                fatal = Some(e.to_string());
            }
        }
    }
    assert!(reader.next().is_none(), "the reader resumed after None");
    ParquetOutcome {
        opened: Ok((rows, groups)),
        records,
        fatal,
    }
}

fn check_one_line(text: &str) {
    assert!(
        text.starts_with(&format!("{NAME}: ")),
        "error does not name the file: {text}"
    );
    assert!(!text.contains('\n'), "error spans lines: {text:?}");
}

/// An error from opening names the file and what is wrong where: the
/// magic bytes, the footer, or a column.
fn check_open_error(e: &ParquetError) {
    check_one_line(&e.to_string());
    match e {
        ParquetError::NotParquet { .. } => {}
        ParquetError::Decode { context, .. } => assert_eq!(context, "footer", "{e}"),
        ParquetError::Schema { message, .. } => {
            assert!(
                message.contains("column"),
                "schema error names no column: {e}"
            )
        }
        other => panic!("unexpected error when opening bytes in memory: {other}"),
    }
}

/// An error while streaming names a row group of the file (and for a
/// structural one, a row in it).
fn check_stream_error(e: &ParquetError, groups: usize, rows: u64) {
    check_one_line(&e.to_string());
    match e {
        ParquetError::Decode { context, .. } => {
            let g: usize = context
                .strip_prefix("row group ")
                .and_then(|g| g.parse().ok())
                .unwrap_or_else(|| panic!("decode error without a row group: {e}"));
            assert!(g < groups, "row group {g} of {groups}: {e}");
        }
        ParquetError::Structure {
            row_group,
            row,
            message,
            ..
        } => {
            assert!(
                *row_group < groups,
                "row group {row_group} of {groups}: {e}"
            );
            assert!(*row < rows, "row {row} of {rows}: {e}");
            assert!(message.contains("column"), "names no column: {e}");
        }
        other => panic!("unexpected error while streaming: {other}"),
    }
}

/// Reads `bytes` as the layout `selector` picks, twice (the default
/// options, and 3-row batches one row group at a time) and checks every
/// promise. Returns the number of records of the first read.
pub fn check_parquet(bytes: &[u8], selector: u8) -> usize {
    let bytes = Bytes::copy_from_slice(bytes);
    let layout = layout_of(selector);
    let default = ReadOptions::default();
    let max_objects = default.max_objects_per_event;
    let wide = read_parquet(&bytes, &layout, default);
    let narrow = read_parquet(
        &bytes,
        &layout,
        ReadOptions {
            batch_rows: 3,
            decode_ahead: 1,
            ..default
        },
    );
    assert_eq!(wide.opened, narrow.opened, "opening depends on the options");
    let Ok((rows, _)) = &wide.opened else {
        return 0;
    };
    for out in [&wide, &narrow] {
        check_records(out, &layout, *rows, max_objects);
    }
    // A fatal error can end a batch-sized stretch of records earlier or
    // later, but what both reads yielded agrees, and without a fatal
    // error everything agrees.
    let common = wide.records.len().min(narrow.records.len());
    assert_eq!(
        wide.records[..common],
        narrow.records[..common],
        "records depend on the batch size"
    );
    if wide.fatal.is_none() && narrow.fatal.is_none() {
        assert_eq!(wide.records.len(), narrow.records.len());
    }
    wide.records.len()
}

/// Accounting: every row is yielded unless a fatal error ended the read.
fn check_records(out: &ParquetOutcome, layout: &Layout, rows: u64, max_objects: usize) {
    let n = out.records.len() as u64;
    assert!(n <= rows, "{n} records from {rows} rows");
    if out.fatal.is_none() && rows > 0 {
        assert!(n >= 1, "{rows} rows and no record, no error");
    }
    let mut last_row = None;
    let mut last_id: Option<u64> = None;
    for (i, r) in out.records.iter().enumerate() {
        match r {
            Record::Good(e) => check_good_event(e, max_objects),
            Record::Bad(b) => {
                let text = b.to_string();
                assert!(
                    text.starts_with(&format!(
                        "{NAME}: row group {}, row {}: ",
                        b.location.row_group, b.location.row
                    )),
                    "bad record does not say where: {text}"
                );
                assert!(!text.contains('\n'), "bad record spans lines: {text:?}");
                assert!(
                    b.location.row < rows,
                    "bad record at row {} of {rows}",
                    b.location.row
                );
                if let Layout::PerEvent(_) = layout {
                    assert_eq!(b.location.row, i as u64, "per event: record i is row i");
                }
                assert!(
                    last_row.is_none_or(|l| b.location.row >= l),
                    "bad records out of row order"
                );
                last_row = Some(b.location.row);
            }
        }
        if let Layout::LongForm = layout {
            // Contiguous rows of one id are one event.
            if let (Some(a), Some(b)) = (last_id, r.id()) {
                assert_ne!(a, b, "two consecutive records of event {a}");
            }
            last_id = r.id();
        }
    }
    if let (Layout::PerEvent(_), None) = (layout, &out.fatal) {
        assert_eq!(n, rows, "per event: one record per row");
    }
}

fn finite(p: &FourMomentum) -> bool {
    p.px().is_finite() && p.py().is_finite() && p.pz().is_finite() && p.e().is_finite()
}

/// What a reader promises about a good event, whatever its input format
/// (docs/csv-format.md): finite weight, MET and covariance, at most
/// `max_objects` objects, physical four-vectors, b-tag in [0, 1], charge
/// −1, 0 or 1, object indices 0, 1, 2, … The CSV fuzz targets use it too.
pub fn check_good_event(e: &Event, max_objects: usize) {
    assert!(e.weight.is_finite(), "weight {}", e.weight);
    assert!(
        e.met.px.is_finite() && e.met.py.is_finite(),
        "met {:?}",
        e.met
    );
    if let Some([xx, xy, yy]) = e.met.cov {
        assert!(xx >= 0.0 && yy >= 0.0 && xx.is_finite() && xy.is_finite() && yy.is_finite());
    }
    let n = e.jets.len() + e.fat_jets.len() + e.electrons.len() + e.muons.len();
    assert!(n <= max_objects, "{n} objects > limit {max_objects}");
    let check_p4 = |p: &FourMomentum, what: &str| {
        assert!(finite(p), "{what} has a non-finite four-vector {p:?}");
        assert!(p.e() >= 0.0, "{what} has negative energy {p:?}");
        let pabs = (p.px() * p.px() + p.py() * p.py() + p.pz() * p.pz()).sqrt();
        // E ≥ |p| up to rounding in the conversion from (pt, η, φ, m).
        assert!(p.e() >= pabs * (1.0 - 1e-9) - 1e-9, "{what}: E < |p| {p:?}");
    };
    for (i, j) in e.jets.iter().enumerate() {
        check_p4(&j.p4, "jet");
        assert!((0.0..=1.0).contains(&j.btag), "btag {}", j.btag);
        assert_eq!(j.index as usize, i, "jet index");
    }
    for (i, j) in e.fat_jets.iter().enumerate() {
        check_p4(&j.p4, "fat jet");
        assert_eq!(j.index as usize, i, "fat jet index");
    }
    for list in [&e.electrons, &e.muons] {
        for (i, l) in list.iter().enumerate() {
            check_p4(&l.p4, "lepton");
            assert!(matches!(l.charge, -1..=1), "charge {}", l.charge);
            assert_eq!(l.index as usize, i, "lepton index");
        }
    }
}
