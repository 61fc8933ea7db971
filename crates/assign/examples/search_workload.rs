//! A fixed, deterministic search workload for instruction-count profiling
//! (e.g. `valgrind --tool=callgrind`), which counts the same on a loaded
//! machine where wall-clock benchmarks are noisy. Events are those of the
//! criterion bench `benches/assign.rs` (same generator and seed, in
//! `examples/support/bench_events.rs`).
//!
//! Run: `cargo run --release -p quarry-assign --example search_workload -- bw`
//! (cases: `bw`, `tw8`, `tw10`, `tw10-no-btag`; add `exhaustive` to disable
//! pruning; add `gen` to only generate the events, for subtracting; add
//! `repeat N` to also time N more passes by CPU time; `orders` prints each
//! preset's fill order).

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
    // `repeat N`: search the events N times more, timed by the CPU time
    // this process gets (its share on a loaded machine is irrelevant).
    let repeat: usize = args
        .iter()
        .position(|a| a == "repeat")
        .and_then(|i| args.get(i + 1))
        .and_then(|n| n.parse().ok())
        .unwrap_or(0);
    if repeat > 0 {
        let cpu0 = cpu_seconds();
        for _ in 0..repeat {
            for e in events {
                black_box(s.search(black_box(e)));
            }
        }
        let cpu = cpu_seconds() - cpu0;
        let n = (repeat * events.len()) as f64;
        println!(
            "{case} prune={prune}: {:.0} events per CPU second ({n} searches in {cpu:.3} s CPU)",
            n / cpu
        );
    }
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

/// User + system CPU time of this process, from `/proc/self/stat` (Linux;
/// clock ticks of 1/100 s there), or 0 where unavailable.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let after = stat.rsplit(')').next().unwrap_or("");
    let f: Vec<&str> = after.split_whitespace().collect();
    let tick = |i: usize| f.get(i).and_then(|x| x.parse::<f64>().ok()).unwrap_or(0.0);
    (tick(11) + tick(12)) / 100.0
}

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
