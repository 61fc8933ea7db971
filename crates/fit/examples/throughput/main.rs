//! Fit throughput in events per CPU-second on the bW-pair hypothesis
//! (3 assignments = 3 fits per event), hard and soft mode, plus iteration
//! and status counts. CPU time, not wall time, because the machines this
//! runs on are often shared: it reads the thread's own run time from
//! `/proc/thread-self/schedstat` (Linux) and falls back to wall time
//! elsewhere (says so in the output).
//!
//! `cargo run --release -p quarry-fit --example throughput [events] [repeats] [hard|soft]`

mod events;

use std::time::Instant;

use quarry_fit::{rank_by_chi2, ConstraintMode, FitConfig, FitStatus, KinematicFitter};
use quarry_resolution::ResolutionModel;

/// This thread's CPU time in seconds, if the kernel reports it.
fn thread_cpu_seconds() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: f64 = text.split_whitespace().next()?.parse().ok()?;
    Some(ns * 1e-9)
}

fn main() {
    let mut args = std::env::args().skip(1);
    let n_events: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(2000);
    let repeats: usize = args.next().and_then(|a| a.parse().ok()).unwrap_or(5);
    let only = args.next();
    let model = ResolutionModel::default();
    let events = events::events(&model, n_events);
    for (name, mode) in [
        ("hard", ConstraintMode::Hard),
        ("soft", ConstraintMode::Soft),
    ] {
        if only.as_deref().is_some_and(|o| o != name) {
            continue;
        }
        let mut fitter = KinematicFitter::new(
            model.clone(),
            FitConfig {
                mode,
                ..FitConfig::default()
            },
        );
        // Statistics from one pass (the fit is deterministic).
        let mut iterations = [0u64; 3];
        let mut not_converged = 0;
        let mut right_best = 0;
        let mut chi2_sum = 0.0;
        for inputs in &events {
            let results = inputs.each_ref().map(|i| fitter.fit(i));
            for (k, r) in results.iter().enumerate() {
                iterations[k] += u64::from(r.iterations);
                if r.status != FitStatus::Converged {
                    not_converged += 1;
                } else if k == 0 {
                    chi2_sum += r.chi2;
                }
            }
            right_best += usize::from(rank_by_chi2(&results)[0] == 0);
        }
        let mut best_rate: f64 = 0.0;
        let mut source = "thread CPU time";
        for _ in 0..repeats {
            let (cpu0, wall0) = (thread_cpu_seconds(), Instant::now());
            let mut sink = 0usize;
            for inputs in &events {
                let results = inputs.each_ref().map(|i| fitter.fit(i));
                sink += rank_by_chi2(&results)[0];
            }
            std::hint::black_box(sink);
            let seconds = match (cpu0, thread_cpu_seconds()) {
                (Some(a), Some(b)) => b - a,
                _ => {
                    source = "wall time (no CPU clock)";
                    wall0.elapsed().as_secs_f64()
                }
            };
            best_rate = best_rate.max(n_events as f64 / seconds);
        }
        let n = n_events as f64;
        println!(
            "{name}: {:.0} events/s ({source}, best of {repeats} × {n_events} events), {:.1} µs/event; \
             mean iterations right/swap-b/swap-bq {:.1}/{:.1}/{:.1}; not converged {not_converged}/{}; \
             right assignment best {:.1} %; mean χ² (right) {:.3}",
            best_rate,
            1e6 / best_rate,
            iterations[0] as f64 / n,
            iterations[1] as f64 / n,
            iterations[2] as f64 / n,
            3 * n_events,
            100.0 * right_best as f64 / n,
            chi2_sum / n,
        );
    }
}
