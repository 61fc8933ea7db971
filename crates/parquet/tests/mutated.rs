//! The `parquet_reader` fuzz target's checks on the stable toolchain, in
//! every `cargo test`: the committed corpus (`fuzz/corpus/parquet_reader/`),
//! every reproducer (`fuzz/regressions/parquet_reader/`), and deterministic
//! mutations of the seed files (bit flips, truncations, byte splices), all
//! read from memory with `ParquetReader::from_bytes`.
//!
//! The seeds are small valid files of both layouts: a slice of the real
//! CMS Open Data events of tests/fixtures/nanoaod-200ev.parquet (the
//! shipped `nanoaod` map's columns only) and a hand-made long-form file.
//! `cargo test -p quarry-parquet --test mutated -- --ignored` rewrites them.

#[path = "../../../fuzz/src/parquet_checks.rs"]
#[allow(dead_code)]
mod parquet_checks;

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Arc;

use arrow_array::builder::{Float32Builder, ListBuilder};
use arrow_array::{ArrayRef, Float64Array, RecordBatch, StringArray, UInt64Array};
use bytes::Bytes;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use parquet::arrow::{ArrowWriter, ProjectionMask};
use parquet::basic::{Compression, ZstdLevel};
use parquet::file::properties::WriterProperties;
use quarry_parquet::{ColumnMap, Record};

use parquet_checks::{check_parquet, layout_of, read_parquet};

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn corpus_dir() -> PathBuf {
    repo().join("fuzz/corpus/parquet_reader")
}

/// Selector bytes of the fuzz input (see `parquet_checks::layout_of`).
const PER_EVENT: u8 = 0;
const LONG_FORM: u8 = 1;

fn write(batch: &RecordBatch, compression: Compression, group: usize) -> Vec<u8> {
    let props = WriterProperties::builder()
        .set_compression(compression)
        .set_max_row_group_row_count(Some(group))
        .build();
    let mut out = Vec::new();
    let mut w = ArrowWriter::try_new(&mut out, batch.schema(), Some(props)).unwrap();
    w.write(batch).unwrap();
    w.close().unwrap();
    out
}

/// The columns the shipped `nanoaod` map reads.
fn nanoaod_columns() -> Vec<String> {
    let map = ColumnMap::named("nanoaod").unwrap();
    let mut names: Vec<String> = map.event.iter().chain(&map.weight).cloned().collect();
    for (_, c) in map.collections() {
        names.extend([&c.pt, &c.eta, &c.phi].into_iter().cloned());
        for n in [&c.count, &c.mass, &c.energy, &c.btag, &c.charge, &c.truth] {
            names.extend(n.iter().cloned());
        }
    }
    if let Some(m) = &map.met {
        for n in [&m.pt, &m.phi, &m.px, &m.py, &m.cov_xx, &m.cov_xy, &m.cov_yy] {
            names.extend(n.iter().cloned());
        }
    }
    names
}

/// The first `rows` real events, the mapped columns only.
fn nanoaod_slice(rows: usize) -> RecordBatch {
    let bytes =
        Bytes::from(std::fs::read(repo().join("tests/fixtures/nanoaod-200ev.parquet")).unwrap());
    let builder = ParquetRecordBatchReaderBuilder::try_new(bytes).unwrap();
    let wanted = nanoaod_columns();
    let roots: Vec<usize> = builder
        .schema()
        .fields()
        .iter()
        .enumerate()
        .filter(|(_, f)| wanted.contains(f.name()))
        .map(|(i, _)| i)
        .collect();
    assert_eq!(
        roots.len(),
        wanted.len(),
        "the fixture has every mapped column"
    );
    let mask = ProjectionMask::roots(builder.parquet_schema(), roots);
    let mut reader = builder
        .with_projection(mask)
        .with_batch_size(rows)
        .build()
        .unwrap();
    reader.next().unwrap().unwrap()
}

/// One long-form row: event, kind, pt, eta, phi, mass, btag, charge, truth.
type LongRow = (
    u64,
    &'static str,
    f64,
    f64,
    f64,
    f64,
    Option<f64>,
    Option<f64>,
    Option<&'static str>,
);

/// A hand-made long-form file: five events (jets, a fat jet, leptons, MET
/// with covariance, weights, truth labels); with row groups of 4 rows,
/// events straddle row groups.
fn long_form() -> RecordBatch {
    #[rustfmt::skip]
    let rows: [LongRow; 15] = [
        (7, "jet", 61.5, 0.4, 1.2, 8.1, Some(0.91), None, Some("b_had")),
        (7, "jet", 45.0, -1.1, -2.0, 6.3, Some(0.05), None, Some("q1")),
        (7, "electron", 38.2, 0.7, 0.1, 0.000511, None, Some(-1.0), None),
        (7, "met", 41.0, 0.0, -2.9, 0.0, None, None, None),
        (8, "jet", 120.0, 2.1, 3.0, 14.0, Some(0.6), None, None),
        (8, "fatjet", 310.0, 0.2, -0.5, 172.0, None, None, None),
        (8, "muon", 27.0, -2.3, 2.2, 0.10566, None, Some(1.0), None),
        (8, "met", 12.0, 0.0, 0.3, 0.0, None, None, None),
        (9, "jet", 33.0, 0.0, 0.0, 4.0, Some(0.0), None, None),
        (9, "met", 5.0, 0.0, 1.0, 0.0, None, None, None),
        (12, "jet", 80.0, -0.3, -3.1, 10.0, Some(1.0), None, Some("b_lep")),
        (12, "jet", 70.0, 0.3, 3.1, 9.0, Some(0.2), None, Some("q2")),
        (12, "muon", 50.0, 1.0, 0.0, 0.10566, None, Some(-1.0), None),
        (12, "met", 60.0, 0.0, 1.5, 0.0, None, None, None),
        (13, "electron", 20.0, 2.4, -1.0, 0.000511, None, Some(1.0), None),
    ];
    let weight = |e: u64| if e == 8 { 0.5 } else { 1.0 };
    let cov = |k: &str, v: f64| (k == "met").then_some(v);
    RecordBatch::try_from_iter([
        (
            "event",
            Arc::new(UInt64Array::from_iter_values(rows.iter().map(|r| r.0))) as ArrayRef,
        ),
        (
            "kind",
            Arc::new(StringArray::from_iter_values(rows.iter().map(|r| r.1))),
        ),
        (
            "pt",
            Arc::new(Float64Array::from_iter_values(rows.iter().map(|r| r.2))),
        ),
        (
            "eta",
            Arc::new(Float64Array::from_iter_values(rows.iter().map(|r| r.3))),
        ),
        (
            "phi",
            Arc::new(Float64Array::from_iter_values(rows.iter().map(|r| r.4))),
        ),
        (
            "mass",
            Arc::new(Float64Array::from_iter_values(rows.iter().map(|r| r.5))),
        ),
        (
            "btag",
            Arc::new(Float64Array::from_iter(rows.iter().map(|r| r.6))),
        ),
        (
            "charge",
            Arc::new(Float64Array::from_iter(rows.iter().map(|r| r.7))),
        ),
        (
            "truth",
            Arc::new(StringArray::from_iter(rows.iter().map(|r| r.8))),
        ),
        (
            "weight",
            Arc::new(Float64Array::from_iter_values(
                rows.iter().map(|r| weight(r.0)),
            )),
        ),
        (
            "met_cov_xx",
            Arc::new(Float64Array::from_iter(rows.iter().map(|r| cov(r.1, 90.0)))),
        ),
        (
            "met_cov_xy",
            Arc::new(Float64Array::from_iter(rows.iter().map(|r| cov(r.1, -4.5)))),
        ),
        (
            "met_cov_yy",
            Arc::new(Float64Array::from_iter(rows.iter().map(|r| cov(r.1, 85.0)))),
        ),
    ])
    .unwrap()
}

/// A tiny per-event file with a jet list only where the map wants all
/// collections: it must be refused with a missing column named.
fn jets_only() -> RecordBatch {
    let mut b = ListBuilder::new(Float32Builder::new());
    b.values().append_value(30.0);
    b.append(true);
    RecordBatch::try_from_iter([("Jet_pt", Arc::new(b.finish()) as ArrayRef)]).unwrap()
}

/// The seed files: (name, selector, file bytes, events it holds).
fn seeds() -> Vec<(&'static str, u8, Vec<u8>, usize)> {
    let zstd = Compression::ZSTD(ZstdLevel::default());
    let nano = nanoaod_slice(8);
    let long = long_form();
    vec![
        ("seed-nanoaod-zstd", PER_EVENT, write(&nano, zstd, 3), 8),
        (
            "seed-nanoaod-snappy",
            PER_EVENT,
            write(&nano, Compression::SNAPPY, 5),
            8,
        ),
        (
            "seed-nanoaod-plain",
            PER_EVENT,
            write(&nanoaod_slice(3), Compression::UNCOMPRESSED, 2),
            3,
        ),
        ("seed-long-zstd", LONG_FORM, write(&long, zstd, 4), 5),
        (
            "seed-long-plain",
            LONG_FORM,
            write(&long, Compression::UNCOMPRESSED, 6),
            5,
        ),
        (
            "seed-jets-only",
            PER_EVENT,
            write(&jets_only(), Compression::UNCOMPRESSED, 1),
            0,
        ),
    ]
}

fn with_selector(selector: u8, file: &[u8]) -> Vec<u8> {
    let mut v = vec![selector];
    v.extend_from_slice(file);
    v
}

/// Panics outside the parquet crate, on any thread (the reader decodes
/// row groups on its own threads, whose panics would otherwise only
/// print). The parquet crate (60.1) panics on some corrupt pages; the
/// reader turns those into errors naming the row group (which the checks
/// verify), so they are contained and not printed here.
static PANICS: AtomicUsize = AtomicUsize::new(0);

fn count_panics() {
    let previous = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        let upstream = info
            .location()
            .is_some_and(|l| l.file().contains("/parquet-") || l.file().contains("/arrow-"));
        if !upstream {
            PANICS.fetch_add(1, Ordering::SeqCst);
            previous(info);
        }
    }));
}

#[test]
#[ignore = "rewrites the seed corpus; run by hand after changing seeds()"]
fn write_seed_corpus() {
    std::fs::create_dir_all(corpus_dir()).unwrap();
    for (name, selector, file, _) in seeds() {
        std::fs::write(corpus_dir().join(name), with_selector(selector, &file)).unwrap();
    }
}

#[test]
fn the_seeds_read_in_full_and_are_committed() {
    for (name, selector, file, events) in seeds() {
        let out = read_parquet(&Bytes::from(file), &layout_of(selector), Default::default());
        if events == 0 {
            let err = out.opened.unwrap_err();
            assert!(err.contains("missing column 'event'"), "{name}: {err}");
            continue;
        }
        assert!(out.fatal.is_none(), "{name}: {:?}", out.fatal);
        assert_eq!(out.records.len(), events, "{name}");
        for r in &out.records {
            assert!(matches!(r, Record::Good(_)), "{name}: {r:?}");
        }
        let committed = corpus_dir().join(name);
        let bytes = std::fs::read(&committed).unwrap_or_else(|e| {
            panic!(
                "{}: {e} (run the ignored write_seed_corpus)",
                committed.display()
            )
        });
        assert_eq!(bytes[0], selector, "{name}");
        assert_eq!(
            check_parquet(&bytes[1..], bytes[0]),
            events,
            "{name} as committed"
        );
    }
}

/// Files in a corpus directory, sorted (a missing directory is empty).
fn files_in(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Vec::new();
    };
    let mut files: Vec<(String, Vec<u8>)> = entries
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_file())
        .map(|p| {
            (
                p.file_name().unwrap().to_string_lossy().into_owned(),
                std::fs::read(&p).unwrap(),
            )
        })
        .collect();
    files.sort();
    files
}

#[test]
fn corpus_and_reproducers_keep_the_readers_promises() {
    count_panics();
    let mut inputs = files_in(&corpus_dir());
    assert!(inputs.len() >= seeds().len(), "the corpus holds the seeds");
    inputs.extend(files_in(&repo().join("fuzz/regressions/parquet_reader")));
    for (name, bytes) in &inputs {
        if let Some((&selector, file)) = bytes.split_first() {
            let result = std::panic::catch_unwind(|| check_parquet(file, selector));
            assert!(result.is_ok(), "{name}: a promise failed (message above)");
        }
    }
    assert_eq!(PANICS.load(Ordering::SeqCst), 0, "a reader thread panicked");
}

/// A small deterministic generator (64-bit LCG, Knuth's MMIX constants,
/// from memory) so the mutations are the same in every run.
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        self.0 >> 33
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

/// Bit flips at spread-out and random positions, truncations, and splices
/// (a stretch of one seed copied over another place, of the same or the
/// other seed), each checked against every promise.
#[test]
fn mutated_seeds_keep_the_readers_promises() {
    count_panics();
    let seeds = seeds();
    let mut rng = Lcg(0x5eed);
    let mut checked = 0usize;
    let mut outcomes = [0usize; 3]; // refused, read in full, ended by an error
    let mut check = |name: &str, what: String, file: &[u8], selector: u8| {
        let result = std::panic::catch_unwind(|| check_parquet(file, selector));
        if result.is_err() {
            panic!("{name}, {what}: a promise failed (message above)");
        }
        let out = read_parquet(
            &Bytes::copy_from_slice(file),
            &layout_of(selector),
            Default::default(),
        );
        outcomes[match (&out.opened, &out.fatal) {
            (Err(_), _) => 0,
            (Ok(_), None) => 1,
            (Ok(_), Some(_)) => 2,
        }] += 1;
        checked += 1;
    };
    for (name, selector, file, _) in &seeds {
        let n = file.len();
        // Every 13th byte gets one bit flipped, a different bit each time.
        for (k, pos) in (0..n).step_by(13).enumerate() {
            let mut m = file.clone();
            m[pos] ^= 1 << (k % 8);
            check(
                name,
                format!("bit {} of byte {pos} flipped", k % 8),
                &m,
                *selector,
            );
        }
        // Random bytes set to random values, a few at a time.
        for _ in 0..30 {
            let mut m = file.clone();
            let count = 1 + rng.below(4);
            for _ in 0..count {
                let pos = rng.below(n);
                m[pos] = rng.next() as u8;
            }
            check(name, format!("{count} random bytes"), &m, *selector);
        }
        // Truncations, keeping the trailing magic so that the footer is
        // read from the wrong place, and plain cuts.
        for cut in (0..n).step_by(n / 25 + 1) {
            check(name, format!("cut at {cut}"), &file[..cut], *selector);
            let mut m = file[..cut].to_vec();
            m.extend_from_slice(&file[n - 8..]);
            check(name, format!("cut at {cut}, footer kept"), &m, *selector);
        }
        // Splices from any seed into this one.
        for _ in 0..30 {
            let (_, _, other, _) = &seeds[rng.below(seeds.len())];
            let len = 1 + rng.below(64);
            let from = rng.below(other.len().saturating_sub(len));
            let to = rng.below(n.saturating_sub(len));
            let mut m = file.clone();
            let end = (from + len).min(other.len());
            let stretch = &other[from..end];
            m[to..to + stretch.len()].copy_from_slice(stretch);
            check(
                name,
                format!("{len} bytes from {from} spliced at {to}"),
                &m,
                *selector,
            );
        }
        // The other layout read from the same bytes.
        check(name, "read as the other layout".into(), file, *selector ^ 1);
    }
    assert_eq!(PANICS.load(Ordering::SeqCst), 0, "a reader thread panicked");
    // The mutations reach all three outcomes, so the check is not idle.
    assert!(
        outcomes.iter().all(|&c| c > 0),
        "outcomes {outcomes:?} of {checked}"
    );
    eprintln!("{checked} mutated files: refused, read in full, ended by an error = {outcomes:?}");
}
