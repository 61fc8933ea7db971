//! Throughput of the W-mass neutrino solver (quarry::neutrino) and of the
//! dilepton two-neutrino solver (quarry::neutrino::dilepton).
//!
//! Target: ≥ 50 M real-case solutions per second per core. Run with
//! `cargo bench --bench neutrino -- --warm-up-time 1 --measurement-time 3`.

use std::f64::consts::PI;
use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::lorentz::FourMomentum;
use quarry::neutrino::dilepton::{DileptonEvent, DileptonMasses, DileptonSolver};
use quarry::neutrino::{ComplexStrategy, SolutionCase, WMassSolver};
use quarry::pdg::MUON_MASS;

const BATCH: usize = 4096;

/// Small deterministic generator (xorshift64*) so the bench needs no extra
/// dependency; uniform in [lo, hi).
struct Xorshift(u64);

impl Xorshift {
    fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let bits = self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11;
        lo + (hi - lo) * (bits as f64 / (1u64 << 53) as f64)
    }
}

/// A batch of (lepton, met_px, met_py) inputs that all fall in `case`.
fn batch(case: SolutionCase) -> Vec<(FourMomentum, f64, f64)> {
    let mut rng = Xorshift(0x9e37_79b9_7f4a_7c15);
    let probe = WMassSolver::default();
    let mut out = Vec::with_capacity(BATCH);
    while out.len() < BATCH {
        let l = FourMomentum::from_pt_eta_phi_m(
            rng.uniform(20.0, 200.0),
            rng.uniform(-2.5, 2.5),
            rng.uniform(-PI, PI),
            MUON_MASS,
        );
        let (r, phi) = (rng.uniform(0.0, 200.0), rng.uniform(-PI, PI));
        let (mx, my) = (r * phi.cos(), r * phi.sin());
        if probe.solve(&l, mx, my).map(|s| s.case()) == Ok(case) {
            out.push((l, mx, my));
        }
    }
    out
}

fn run(c: &mut Criterion, name: &str, solver: WMassSolver, inputs: &[(FourMomentum, f64, f64)]) {
    let mut group = c.benchmark_group("neutrino");
    group.throughput(Throughput::Elements(inputs.len() as u64));
    group.bench_function(name, |b| {
        b.iter(|| {
            let mut acc = 0.0;
            for (l, mx, my) in black_box(inputs) {
                if let Ok(s) = solver.solve(l, *mx, *my) {
                    acc += s.smaller_abs_pz().p4.pz();
                }
            }
            black_box(acc)
        })
    });
    group.finish();
}

/// Exact dilepton configurations: random visible objects and neutrinos, the
/// MET their sum, and each input's four masses taken from its own sums.
fn dilepton_batch() -> Vec<(DileptonEvent, DileptonSolver)> {
    let mut rng = Xorshift(0x2545_f491_4f6c_dd1d);
    let mut obj = |lo: f64, hi: f64, m: f64| {
        FourMomentum::from_pt_eta_phi_m(
            rng.uniform(lo, hi),
            rng.uniform(-2.5, 2.5),
            rng.uniform(-PI, PI),
            m,
        )
    };
    (0..1024)
        .map(|_| {
            let (la, lb) = (obj(20.0, 200.0, MUON_MASS), obj(20.0, 200.0, MUON_MASS));
            let (ba, bb) = (obj(30.0, 300.0, 4.8), obj(30.0, 300.0, 4.8));
            let (na, nb) = (obj(10.0, 200.0, 0.0), obj(10.0, 200.0, 0.0));
            let solver = DileptonSolver {
                masses: DileptonMasses {
                    w_a: (la + na).m(),
                    w_b: (lb + nb).m(),
                    top_a: (la + na + ba).m(),
                    top_b: (lb + nb + bb).m(),
                },
            };
            let ev = DileptonEvent {
                lepton_a: la,
                lepton_b: lb,
                bjet_a: ba,
                bjet_b: bb,
                met: (na.px() + nb.px(), na.py() + nb.py()),
            };
            (ev, solver)
        })
        .collect()
}

fn bench_dilepton(c: &mut Criterion) {
    let inputs = dilepton_batch();
    let mut group = c.benchmark_group("neutrino");
    group.throughput(Throughput::Elements(inputs.len() as u64));
    group.bench_function("dilepton_solve", |b| {
        b.iter(|| {
            let mut n = 0;
            for (ev, solver) in black_box(&inputs) {
                if let Ok(s) = solver.solve(ev) {
                    n += s.len();
                }
            }
            black_box(n)
        })
    });
    group.finish();
}

fn bench(c: &mut Criterion) {
    bench_dilepton(c);
    let real = batch(SolutionCase::Real);
    let complex = batch(SolutionCase::AdjustedMet);
    run(c, "real_case", WMassSolver::default(), &real);
    run(c, "complex_adjust_met", WMassSolver::default(), &complex);
    let drop = WMassSolver {
        strategy: ComplexStrategy::DropImaginary,
        ..Default::default()
    };
    run(c, "complex_drop_imaginary", drop, &complex);
}

criterion_group!(benches, bench);
criterion_main!(benches);
