//! Throughput of the kinematic fit (quarry::fit) on the bW-pair hypothesis.
//!
//! Hypothesis: b_had, q1, q2 → W_had, B_had; b_lep, muon, ν → W_lep, B_lep;
//! constraints m(W_had) = m(W_lep) = m_W and m(B_had) = m(B_lep) with a
//! free common mass; hard mode. Each event fits its 3 "best" assignments
//! (the right one, b_had ↔ b_lep swapped, b_had ↔ q1 swapped), so one
//! element = one event = 3 fits. Target: ≥ 30 k events/s/core.
//!
//! Run with `cargo bench --bench fit -- --warm-up-time 1 --measurement-time 3`;
//! on a shared machine prefer the CPU-time figure of
//! `cargo run --release -p quarry-fit --example throughput`.

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::fit::{rank_by_chi2, ConstraintMode, FitConfig, KinematicFitter};
use quarry::resolution::ResolutionModel;

/// The toy events, shared with `crates/fit/examples/throughput` (which
/// measures CPU time rather than wall time).
#[path = "../crates/fit/examples/throughput/events.rs"]
mod events;

const EVENTS: usize = 256;

fn bench_fit(c: &mut Criterion) {
    let model = ResolutionModel::default();
    let events = events::events(&model, EVENTS);
    let mut group = c.benchmark_group("fit");
    group.throughput(Throughput::Elements(1));
    for (name, mode) in [
        ("bw_pair_3_assignments_hard", ConstraintMode::Hard),
        ("bw_pair_3_assignments_soft", ConstraintMode::Soft),
    ] {
        let mut fitter = KinematicFitter::new(
            model.clone(),
            FitConfig {
                mode,
                ..FitConfig::default()
            },
        );
        let mut next = 0;
        group.bench_function(name, |b| {
            b.iter(|| {
                let inputs = &events[next % EVENTS];
                next += 1;
                let results = inputs.each_ref().map(|i| fitter.fit(i));
                black_box(rank_by_chi2(&results))
            })
        });
    }
    group.finish();
}

criterion_group!(benches, bench_fit);
criterion_main!(benches);
