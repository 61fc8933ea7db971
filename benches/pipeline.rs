//! End-to-end throughput of `quarry reco` without the fit: CSV parsing,
//! selection, event variables, the `ttbar-ljets` search and output rows,
//! exactly as the command line chains them (reading overlapped with
//! processing, rayon on 2 threads, rows serialised as CSV — through
//! `quarry::stream`, the code the command line runs), on toy top-pair
//! events held in memory so disk speed does not enter.
//!
//! Run: `cargo bench --bench pipeline -- --warm-up-time 1 --measurement-time 3`
//! (the figure is "thrpt", events per second). Sub-benchmarks time the
//! parsing alone (one thread), the sequential grouping pass that the CLI's
//! reader thread does (`next_raw`, one thread), and the reconstruction
//! alone.

use std::io::Read;
use std::sync::Arc;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::csv::{ErrorPolicy, EventReader, EventWriter, ReadOptions, Record};
use quarry::output::CsvSink;
use quarry::stream::{ordered_chunked_map, outcome_of, Outcome, RawEvents};
use quarry::toy::{Generator, ToyConfig};
use quarry::Pipeline;
use rayon::prelude::*;

// The allocator of the `quarry` binary (see src/main.rs), so the figure is
// the command line's.
#[cfg(feature = "mimalloc")]
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

const EVENTS: usize = 20_000;

/// A `Read` over shared bytes, so every iteration reads the same buffer
/// without copying it.
struct Shared {
    data: Arc<Vec<u8>>,
    pos: usize,
}

impl Read for Shared {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let rest = &self.data[self.pos..];
        let n = rest.len().min(buf.len());
        buf[..n].copy_from_slice(&rest[..n]);
        self.pos += n;
        Ok(n)
    }
}

fn csv_bytes() -> Arc<Vec<u8>> {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("bench.csv");
    let mut w = EventWriter::create(&path).expect("create");
    for e in Generator::new(ToyConfig::top_pair(), 99)
        .expect("toy")
        .take(EVENTS)
    {
        w.write(&e).expect("write");
    }
    w.finish().expect("finish");
    Arc::new(std::fs::read(&path).expect("read back"))
}

fn reader(data: &Arc<Vec<u8>>) -> EventReader {
    let src = Shared {
        data: Arc::clone(data),
        pos: 0,
    };
    EventReader::from_reader(
        src,
        "bench.csv",
        ReadOptions::default().with_policy(ErrorPolicy::Skip),
    )
    .expect("header")
}

fn bench(c: &mut Criterion) {
    let data = csv_bytes();
    let pipeline = Pipeline::builder()
        .preset("ttbar-ljets")
        .build()
        .expect("pipeline");
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .expect("pool");
    let mut g = c.benchmark_group("pipeline");
    g.sample_size(10);
    g.throughput(Throughput::Elements(EVENTS as u64));

    g.bench_function("csv_to_rows_2_threads", |b| {
        b.iter(|| {
            let mut out: Vec<u8> = Vec::with_capacity(8 << 20);
            // The CLI's own streaming code: the reader thread only groups
            // rows into raw events, the workers parse, reconstruct and
            // format them as CSV text, the calling thread only copies bytes.
            let events = RawEvents::from_readers([Ok(reader(&data))]).on_warning(|_| {});
            pool.install(|| {
                ordered_chunked_map(
                    events.map(|r| r.map_err(|e| e.to_string())),
                    quarry::stream::DEFAULT_CHUNK,
                    || pipeline.worker(),
                    |w, event| outcome_of::<CsvSink>(w, ErrorPolicy::Skip, event),
                    |outcome| match outcome {
                        Outcome::Rows(rows) => {
                            out.extend_from_slice(&rows.prepared);
                            Ok(())
                        }
                        Outcome::OtherShard => Ok(()),
                        Outcome::Stop(message) => Err(message),
                    },
                )
            })
            .expect("run");
            out.len()
        })
    });

    g.bench_function("csv_parse_only", |b| {
        b.iter(|| {
            reader(&data)
                .filter(|r| matches!(r, Ok(Record::Good(_))))
                .count()
        })
    });

    g.bench_function("csv_group_only", |b| {
        b.iter(|| {
            let mut r = reader(&data);
            std::iter::from_fn(move || r.next_raw())
                .filter(|r| r.is_ok())
                .count()
        })
    });

    let events: Vec<_> = reader(&data).filter_map(|r| r.ok()?.good()).collect();
    g.bench_function("reconstruct_only_2_threads", |b| {
        b.iter(|| {
            pool.install(|| {
                events
                    .par_iter()
                    .map_init(|| pipeline.worker(), |w, e| w.reconstruct(e.clone()).len())
                    .sum::<usize>()
            })
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
