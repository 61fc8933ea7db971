//! Four-vector arithmetic (quarry::lorentz): the sums and masses the
//! assignment search evaluates for every jet permutation, and construction
//! from (pt, η, φ, m) as the reader does for every object.
//!
//! Run with `cargo bench --bench lorentz -- --warm-up-time 1 --measurement-time 3`.

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::lorentz::FourMomentum;

fn objects() -> Vec<FourMomentum> {
    (0..8)
        .map(|i| {
            let x = i as f64;
            FourMomentum::from_pt_eta_phi_m(
                40.0 + 17.0 * x,
                -2.0 + 0.5 * x,
                -3.0 + 0.8 * x,
                5.0 + x,
            )
        })
        .collect()
}

fn bench_sum_and_mass(c: &mut Criterion) {
    let p = objects();
    let mut group = c.benchmark_group("lorentz");
    group.throughput(Throughput::Elements(1));
    // Three-object sum and its invariant mass (a top candidate b + q + q').
    group.bench_function("sum3_mass", |b| {
        b.iter(|| {
            let (a, x, y) = black_box((p[0], p[3], p[5]));
            (a + x + y).m()
        })
    });
    // Sum of all eight objects and its mass.
    group.bench_function("sum8_mass", |b| {
        b.iter(|| black_box(&p).iter().copied().sum::<FourMomentum>().m())
    });
    group.bench_function("from_pt_eta_phi_m", |b| {
        b.iter(|| {
            let (pt, eta, phi, m) = black_box((83.2, 1.13, -2.71, 9.4));
            FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m)
        })
    });
    group.finish();
}

criterion_group!(benches, bench_sum_and_mass);
criterion_main!(benches);
