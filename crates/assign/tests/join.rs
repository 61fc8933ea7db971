//! The join that completes a small side of an equal-mass constraint from a
//! per-event list (bW pair: the leptonic heavy quark) must give exactly the
//! K best of plain enumeration, ties included, under every b-tag policy.
//! Checked on the benchmark's physical events (exact two-body decays, shared
//! with `benches/assign.rs`) and against the independent enumeration of
//! `common/mod.rs`.

#[path = "../examples/support/bench_events.rs"]
mod bench_events;
mod common;

use common::{exhaustive, lib_objs, normalise};
use quarry_assign::{presets, BtagPolicy, SearchConfig, Searcher};
use quarry_event::{Event, Jet};

fn policies() -> [BtagPolicy; 3] {
    [
        BtagPolicy::Ignore,
        BtagPolicy::default(),
        BtagPolicy::weighted_default(),
    ]
}

/// Pruned search (with the join) against the same search without pruning
/// (every assignment scored): identical ranked lists, bit for bit.
fn same_as_plain(name: &str, e: &Event, cfg: SearchConfig) -> (u64, u64) {
    same_as_plain_for(&presets::get(name).unwrap(), e, cfg).0
}

/// As [`same_as_plain`] for any hypothesis; also returns the pruned result.
fn same_as_plain_for(
    h: &quarry_assign::Hypothesis,
    e: &Event,
    cfg: SearchConfig,
) -> ((u64, u64), quarry_assign::SearchOutcome) {
    let out = Searcher::new(h, cfg).unwrap().search(e);
    let plain = Searcher::new(
        h,
        SearchConfig {
            prune: false,
            ..cfg
        },
    )
    .unwrap()
    .search(e);
    assert_eq!(out.status, plain.status, "event {}", e.id);
    assert_eq!(out.ranked, plain.ranked, "event {} {cfg:?}", e.id);
    ((out.evaluated.complete, plain.evaluated.complete), out)
}

#[test]
fn bw_bench_events_match_plain_enumeration() {
    let (bw, _, _) = bench_events::bench_events();
    for e in bw.iter().take(96) {
        for btag in policies() {
            for k_best in [1, 3, 5] {
                same_as_plain(
                    "bwbw-ljets",
                    e,
                    SearchConfig {
                        btag,
                        k_best,
                        ..SearchConfig::default()
                    },
                );
            }
        }
    }
}

/// The search's K best against the independent enumeration of
/// `common/mod.rs`: same χ² (within 1e-9) rank by rank, and the same best
/// assignment unless the two leading ones tie. Returns whether any
/// assignment exists.
fn same_as_independent(
    h: &quarry_assign::Hypothesis,
    e: &Event,
    cfg: &SearchConfig,
    out: &quarry_assign::SearchOutcome,
) -> bool {
    let exh = exhaustive(h, e, cfg);
    assert_eq!(
        out.ranked.len(),
        exh.len().min(cfg.k_best),
        "event {}",
        e.id
    );
    for (a, s) in out.ranked.iter().zip(&exh) {
        assert!(
            (a.chi2() - s.chi2).abs() <= 1e-9 * s.chi2.max(1.0),
            "event {}: {} vs {}",
            e.id,
            a.chi2(),
            s.chi2
        );
    }
    if exh.len() > 1 && (exh[0].chi2 - exh[1].chi2).abs() > 1e-9 * exh[0].chi2.max(1.0) {
        assert_eq!(lib_objs(h, &out.ranked[0]), normalise(h, &exh[0].objs));
    }
    !exh.is_empty()
}

#[test]
fn bw_bench_events_match_independent_enumeration() {
    let h = presets::get("bwbw-ljets").unwrap();
    let (bw, _, _) = bench_events::bench_events();
    for e in bw.iter().step_by(16) {
        for btag in policies() {
            let cfg = SearchConfig {
                btag,
                k_best: 4,
                ..SearchConfig::default()
            };
            let out = Searcher::new(&h, cfg).unwrap().search(e);
            same_as_independent(&h, e, &cfg, &out);
        }
    }
}

/// Identical jets make assignments with identical χ²: the tie-break (objects
/// in role order) must still be that of plain enumeration.
#[test]
fn ties_from_identical_jets_break_as_in_plain_enumeration() {
    let (bw, _, _) = bench_events::bench_events();
    for (i, e) in bw.iter().take(48).enumerate() {
        let mut e = e.clone();
        let copy: Jet = e.jets[i % e.jets.len()];
        e.jets.push(copy.with_index(99));
        for btag in policies() {
            same_as_plain(
                "bwbw-ljets",
                &e,
                SearchConfig {
                    btag,
                    k_best: 5,
                    max_jets_override: Some(7),
                    ..SearchConfig::default()
                },
            );
        }
    }
}

/// The join must actually cut the work: on the bench's bW events without
/// b-tags, under a tenth of the assignments is scored in full.
#[test]
fn join_scores_few_complete_assignments() {
    let (bw, _, _) = bench_events::bench_events();
    let (mut pruned, mut all) = (0, 0);
    for e in bw.iter().take(128) {
        let (p, a) = same_as_plain(
            "bwbw-ljets",
            e,
            SearchConfig {
                btag: BtagPolicy::Ignore,
                ..SearchConfig::default()
            },
        );
        pruned += p;
        all += a;
    }
    assert!(
        pruned * 10 < all,
        "{pruned} of {all} complete assignments scored"
    );
}

/// bwbw-ljets with extra plain mass constraints on both sides: the dedicated
/// paths for this shape (the W pair + b searched, the lepton + neutrino + b
/// listed) then add those terms themselves. Checked bit for bit against the
/// search without pruning, and against the independent enumeration. The
/// W_lep target is deliberately off the W mass: the neutrino is solved so
/// that m(ℓν) = m_W, so a target of m_W would give a term of zero and check
/// nothing.
#[test]
fn bw_with_extra_mass_constraints_matches_plain_and_independent_enumeration() {
    let base = quarry_assign::presets::toml("bwbw-ljets").unwrap();
    let text = format!(
        "{base}\n[[constraint]]\nmass = \"Q_had\"\ntarget = 900.0\nwidth = 80.0\n\n\
         [[constraint]]\nmass = \"W_lep\"\ntarget = 70.0\nwidth = 12.0\n\n\
         [[constraint]]\nmass = \"Q_lep\"\ntarget = 900.0\nwidth = 90.0\n"
    );
    let h = quarry_assign::Hypothesis::from_toml(&text).unwrap();
    let (bw, _, _) = bench_events::bench_events();
    let random = (0..64u64).map(|s| common::random_event_with(0xb0b0 + s, 4, 8, 3, 2));
    let events: Vec<Event> = bw.iter().take(48).cloned().chain(random).collect();
    let mut compared = 0;
    for e in &events {
        for btag in policies() {
            for k_best in [1, 3] {
                let cfg = SearchConfig {
                    btag,
                    k_best,
                    ..SearchConfig::default()
                };
                let (_, out) = same_as_plain_for(&h, e, cfg);
                compared += usize::from(same_as_independent(&h, e, &cfg, &out));
            }
        }
    }
    // The check must not pass vacuously on events with no assignment.
    assert!(compared > 200, "only {compared} searches found assignments");
}

/// With many jets and a long K-best list, the bound stays open for many
/// pairs, so the dedicated path goes on from picking pairs one by one to
/// sorting the rest: both orders must give the plain search's result.
#[test]
fn long_k_best_lists_with_many_jets_match_plain_enumeration() {
    let (_, tw8, tw10) = bench_events::bench_events();
    for e in tw8.iter().take(12).chain(tw10.iter().take(12)) {
        for btag in policies() {
            for (k_best, max_jets) in [(64, 8), (40, 10), (12, 10)] {
                same_as_plain(
                    "bwbw-ljets",
                    e,
                    SearchConfig {
                        btag,
                        k_best,
                        max_jets_override: Some(max_jets),
                        ..SearchConfig::default()
                    },
                );
            }
        }
    }
}

/// Without the `[[interchangeable]]` block the W pair path does not apply,
/// but the lepton side is still listed by its dedicated builder and joined
/// by the general walk: that combination must match the plain search too
/// (here with an extra W_lep term, so the builder's own terms matter).
#[test]
fn lepton_side_builder_under_the_general_walk_matches_plain_enumeration() {
    let base = quarry_assign::presets::toml("bwbw-ljets").unwrap();
    let text = base
        .replace("[[interchangeable]]\nroles = [\"q1\", \"q2\"]\n", "")
        .replace(
            "[[constraint]]\nequal",
            "[[constraint]]\nmass = \"W_lep\"\ntarget = 70.0\nwidth = 12.0\n\n[[constraint]]\nequal",
        );
    assert!(!text.contains("[[interchangeable]]") && text.contains("target = 70.0"));
    let h = quarry_assign::Hypothesis::from_toml(&text).unwrap();
    let (bw, _, _) = bench_events::bench_events();
    for e in bw.iter().take(64) {
        for btag in policies() {
            let cfg = SearchConfig {
                btag,
                k_best: 3,
                ..SearchConfig::default()
            };
            same_as_plain_for(&h, e, cfg);
        }
    }
}
