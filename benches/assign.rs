//! Throughput of the assignment search, branch-and-bound against the same
//! search with pruning disabled (`SearchConfig::prune = false`, which scores
//! every assignment).
//!
//! Run: `cargo bench --bench assign -- --warm-up-time 1 --measurement-time 3`
//!
//! Events are built (not with the toy generator) by
//! `crates/assign/examples/support/bench_events.rs` from exact two-body
//! decays of pair-produced heavy quarks, with jet energies smeared by 10 %,
//! MET from the neutrino smeared by 15 GeV, and extra radiation jets, so that
//! the right assignment has a small but non-zero χ² as in real events.
//! The average number of complete and partial assignments evaluated per
//! event is printed once per case.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::assign::{presets, BtagPolicy, SearchConfig, Searcher};
use quarry::event::Event;
use quarry::toy::{Branching, DecayMode, Generator, HeavyQuark, Partner, ToyConfig};
use std::hint::black_box;

/// Toy T T̄ events at 1200 GeV with the given branching fractions (H → b b̄
/// and the rest as the toy generates them), with at least one lepton and
/// `n_jets` or more jets, cut to their leading `n_jets` jets (the toy sorts
/// jets by pt): a search workload with exactly that many jets.
fn higgs_events(branching: Branching, n_jets: usize, n_events: usize) -> Vec<Event> {
    let quark = HeavyQuark::new(Partner::UpType, 1200.0).with_branching(branching);
    Generator::new(ToyConfig::heavy_pair(quark), 17)
        .expect("toy config")
        .filter(|e| e.jets.len() >= n_jets && e.electrons.len() + e.muons.len() >= 1)
        .map(|mut e| {
            e.jets.truncate(n_jets);
            e
        })
        .take(n_events)
        .collect()
}

// The event generator is shared with the instruction-count workload
// (`cargo run --release -p quarry-assign --example search_workload`).
#[path = "../crates/assign/examples/support/bench_events.rs"]
mod bench_events;

fn bench_case(
    c: &mut Criterion,
    label: &str,
    preset: &str,
    btag: BtagPolicy,
    events: &[Event],
    time_exhaustive: bool,
) {
    let h = presets::get(preset).expect("preset");
    let mut group = c.benchmark_group(format!("assign/{label}"));
    group.throughput(Throughput::Elements(events.len() as u64));
    for prune in [true, false] {
        let cfg = SearchConfig {
            btag,
            prune,
            ..SearchConfig::default()
        };
        let mut s = Searcher::new(&h, cfg).expect("config");
        let (mut complete, mut partial, mut found) = (0u64, 0u64, 0usize);
        for e in events {
            let out = s.search(e);
            complete += out.evaluated.complete;
            partial += out.evaluated.partial;
            found += usize::from(out.best().is_some());
        }
        let n = events.len() as f64;
        if !prune && !time_exhaustive {
            // Counted above, too slow to time: only the counts are reported.
            eprintln!(
                "{label} exhaustive: {:.0} complete assignments per event (not timed)",
                complete as f64 / n
            );
            continue;
        }
        eprintln!(
            "{label} {}: {:.0} complete + {:.0} partial assignments evaluated per event ({found}/{} events found)",
            if prune { "branch-and-bound" } else { "exhaustive" },
            complete as f64 / n,
            partial as f64 / n,
            events.len()
        );
        group.bench_function(
            if prune {
                "branch_and_bound"
            } else {
                "exhaustive"
            },
            |b| {
                b.iter(|| {
                    for e in events {
                        black_box(s.search(black_box(e)));
                    }
                })
            },
        );
    }
    group.finish();
}

fn benches(c: &mut Criterion) {
    let (bw, tw8, tw10) = bench_events::bench_events();
    bench_case(
        c,
        "bwbw_6jets_no_btag",
        "bwbw-ljets",
        BtagPolicy::Ignore,
        &bw,
        true,
    );
    bench_case(
        c,
        "twtw_8jets",
        "twtw-ljets",
        BtagPolicy::default(),
        &tw8,
        true,
    );
    bench_case(
        c,
        "twtw_10jets",
        "twtw-ljets",
        BtagPolicy::default(),
        &tw10,
        true,
    );
    bench_case(
        c,
        "twtw_10jets_no_btag",
        "twtw-ljets",
        BtagPolicy::Ignore,
        &tw10,
        false,
    );
    let only_th = Branching::only(DecayMode::TopHiggs);
    let (th8, th10) = (
        higgs_events(only_th, 8, 512),
        higgs_events(only_th, 10, 512),
    );
    let mixed = Branching {
        b_w: 0.5,
        t_h: 0.5,
        ..Branching::default()
    };
    let (bwth8, bwth10) = (higgs_events(mixed, 8, 512), higgs_events(mixed, 10, 512));
    bench_case(
        c,
        "thth_8jets",
        "thth-ljets",
        BtagPolicy::default(),
        &th8,
        true,
    );
    bench_case(
        c,
        "thth_10jets",
        "thth-ljets",
        BtagPolicy::default(),
        &th10,
        false,
    );
    bench_case(
        c,
        "bwth_8jets",
        "bwth-ljets",
        BtagPolicy::default(),
        &bwth8,
        true,
    );
    bench_case(
        c,
        "bwth_10jets",
        "bwth-ljets",
        BtagPolicy::default(),
        &bwth10,
        false,
    );
}

criterion_group!(assign, benches);
criterion_main!(assign);
