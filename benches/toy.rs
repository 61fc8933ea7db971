//! Throughput of the toy event generator (quarry::toy).
//!
//! Target: ≥ 100 k events per second on one core, parton level plus detector.
//! Run with `cargo bench --bench toy -- --warm-up-time 1 --measurement-time 3`.

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::toy::{Generator, HeavyQuark, Partner, ToyConfig};

const BATCH: u64 = 1000;

fn bench_generate(c: &mut Criterion) {
    let mut group = c.benchmark_group("toy");
    group.throughput(Throughput::Elements(BATCH));
    let samples = [
        ("top_pair", ToyConfig::top_pair()),
        (
            "down_type_900",
            ToyConfig::heavy_pair(HeavyQuark::new(Partner::DownType, 900.0)),
        ),
        (
            "up_type_1400",
            ToyConfig::heavy_pair(HeavyQuark::new(Partner::UpType, 1400.0)),
        ),
    ];
    for (name, cfg) in samples {
        let g = Generator::new(cfg, 2026).expect("valid configuration");
        let mut start = 0u64;
        group.bench_function(name, |b| {
            b.iter(|| {
                for i in start..start + BATCH {
                    black_box(g.generate(black_box(i)));
                }
                start += BATCH;
            })
        });
    }
    group.finish();
}

criterion_group!(benches, bench_generate);
criterion_main!(benches);
