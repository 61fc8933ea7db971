//! A fixed, deterministic search workload for instruction-count profiling
//! (e.g. `valgrind --tool=callgrind`), which counts the same on a loaded
//! machine where wall-clock benchmarks are noisy. Events are those of the
//! criterion bench `benches/assign.rs` (same generator and seed, in
//! `examples/support/bench_events.rs`).
//!
//! Run: `cargo run --release -p quarry-assign --example search_workload -- bw`
//! (cases: `bw`, `tw8`, `tw10`, `tw10-no-btag`; add `exhaustive` to disable
//! pruning; add `gen` to only generate the events, for subtracting).

#[path = "support/bench_events.rs"]
mod bench_events;

use bench_events::bench_events;
use quarry_assign::{presets, BtagPolicy, SearchConfig, Searcher};
use std::hint::black_box;

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let case = args.first().map(String::as_str).unwrap_or("bw");
    let prune = !args.iter().any(|a| a == "exhaustive");
    let gen_only = args.iter().any(|a| a == "gen");
    if case == "orders" {
        print_orders();
        return;
    }
    let (bw, tw8, tw10) = bench_events();
    let (preset, btag, events) = match case {
        "bw" => ("bwbw-ljets", BtagPolicy::Ignore, &bw),
        "tw8" => ("twtw-ljets", BtagPolicy::default(), &tw8),
        "tw10" => ("twtw-ljets", BtagPolicy::default(), &tw10),
        "tw10-no-btag" => ("twtw-ljets", BtagPolicy::Ignore, &tw10),
        other => {
            eprintln!("unknown case {other}");
            std::process::exit(2);
        }
    };
    if gen_only {
        return;
    }
    let h = presets::get(preset).expect("preset");
    let cfg = SearchConfig {
        btag,
        prune,
        ..SearchConfig::default()
    };
    let mut s = Searcher::new(&h, cfg).expect("config");
    let (mut complete, mut partial, mut chi2_sum) = (0u64, 0u64, 0.0);
    for e in events {
        let out = s.search(black_box(e));
        complete += out.evaluated.complete;
        partial += out.evaluated.partial;
        chi2_sum += out.ranked.iter().map(|a| a.chi2()).sum::<f64>();
    }
    let n = events.len() as f64;
    println!(
        "{case} prune={prune}: {} events, {:.1} complete + {:.1} partial per event, Σχ² of K best = {chi2_sum:.9}",
        events.len(),
        complete as f64 / n,
        partial as f64 / n
    );
}

#[allow(dead_code)]
fn print_orders() {
    for name in presets::names() {
        let h = presets::get(name).unwrap();
        let s = Searcher::new(&h, SearchConfig::default()).unwrap();
        let names: Vec<&str> = s
            .fill_order()
            .iter()
            .map(|&r| h.roles()[r].name.as_str())
            .collect();
        println!("{name}: {names:?}");
    }
}
