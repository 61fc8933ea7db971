//! The branch-and-bound search against an exhaustive enumeration written
//! independently in `common/mod.rs`, for every preset of the registry
//! (`presets::names()`, so a new preset is covered with no edit here), on
//! random events; and robustness on hostile input.

mod common;

use common::{exhaustive, lib_objs, normalise, random_event, random_event_with};
use proptest::prelude::*;
use quarry_assign::{
    presets, search_all, BtagPolicy, Hypothesis, RoleKind, SearchConfig, SearchStatus, Searcher,
};
use quarry_event::{Event, Jet};
use quarry_lorentz::FourMomentum;

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0)
}

fn check_preset(name: &str, seed: u64, policy: u8, k: usize) {
    let h = presets::get(name).unwrap();
    let Sizes {
        min_jets, max_jets, ..
    } = sizes(&h);
    let btag = match policy {
        0 => BtagPolicy::default(),
        1 => BtagPolicy::weighted_default(),
        _ => BtagPolicy::Ignore,
    };
    let cfg = SearchConfig {
        k_best: k,
        btag,
        ..SearchConfig::default()
    };
    let e = random_event_with(seed, min_jets, max_jets, 4, 3);
    let exh = exhaustive(&h, &e, &cfg);
    let out = Searcher::new(&h, cfg).unwrap().search(&e);
    if exh.is_empty() {
        assert_ne!(
            out.status,
            SearchStatus::Found,
            "{name} seed {seed}: found {:?}",
            out.ranked.first()
        );
        assert!(out.ranked.is_empty());
        return;
    }
    assert_eq!(
        out.status,
        SearchStatus::Found,
        "{name} seed {seed}: exhaustive found {}",
        exh.len()
    );
    assert_eq!(out.ranked.len(), k.min(exh.len()), "{name} seed {seed}");
    for (i, a) in out.ranked.iter().enumerate() {
        assert!(
            close(a.chi2(), exh[i].chi2),
            "{name} seed {seed} rank {i}: search {} vs exhaustive {}",
            a.chi2(),
            exh[i].chi2
        );
        // The reported objects really have the reported χ².
        let objs = lib_objs(&h, a);
        let found = exh.iter().find(|s| normalise(&h, &s.objs) == objs);
        let s =
            found.unwrap_or_else(|| panic!("{name} seed {seed}: {objs:?} not a valid assignment"));
        assert!(close(s.chi2, a.chi2()), "{name} seed {seed}: {objs:?}");
        // Sum of terms plus b-tag terms is the χ².
        let sum: f64 = a.terms().iter().sum::<f64>() + a.btag_chi2();
        assert!(
            close(sum, a.chi2()),
            "{name} seed {seed}: terms {sum} vs {}",
            a.chi2()
        );
    }
    // The best assignment is the exhaustive best unless the two lead tie.
    let tie = exh.len() > 1 && close(exh[0].chi2, exh[1].chi2);
    if !tie {
        assert_eq!(
            lib_objs(&h, &out.ranked[0]),
            normalise(&h, &exh[0].objs),
            "{name} seed {seed}"
        );
    }
    // Distinct assignments.
    for i in 0..out.ranked.len() {
        for j in 0..i {
            assert_ne!(lib_objs(&h, &out.ranked[i]), lib_objs(&h, &out.ranked[j]));
        }
    }
    // Without pruning the search scores every assignment: its count equals
    // the exhaustive count (only_closest rejections happen at different
    // stages, so those presets are skipped), and pruning never scores more.
    let full = Searcher::new(
        &h,
        SearchConfig {
            prune: false,
            ..cfg
        },
    )
    .unwrap()
    .search(&e);
    assert_eq!(
        full.ranked, out.ranked,
        "{name} seed {seed}: pruning changed the result"
    );
    if !h.constraints().iter().any(|c| c.only_closest) {
        assert_eq!(
            full.evaluated.complete,
            exh.len() as u64,
            "{name} seed {seed}"
        );
    }
    assert!(out.evaluated.complete <= full.evaluated.complete);
}

/// How large the random events for one hypothesis are, read from the
/// hypothesis itself so that every entry of the preset registry is covered
/// without an edit here (a new preset is picked up by `presets::names()`).
#[derive(Clone, Copy, Debug)]
struct Sizes {
    /// At least this many jets in each random event.
    min_jets: usize,
    /// At most this many jets (the exhaustive enumeration grows as
    /// `max_jets! / (max_jets - jet roles)!`).
    max_jets: usize,
    /// Seven or more jet roles: the enumeration is large, so fewer cases
    /// and no `BtagPolicy::Ignore` (every jet in every role).
    large: bool,
}

fn sizes(h: &Hypothesis) -> Sizes {
    let jet_roles = h
        .roles()
        .iter()
        .filter(|r| matches!(r.kind, RoleKind::Jet { .. }))
        .count();
    if jet_roles >= 7 {
        // Eight roles among up to nine jets.
        Sizes {
            min_jets: 7,
            max_jets: 9,
            large: true,
        }
    } else if jet_roles >= 3 {
        Sizes {
            min_jets: 0,
            max_jets: 8,
            large: false,
        }
    } else {
        // One or two jet roles: the lepton roles make the enumeration.
        Sizes {
            min_jets: 0,
            max_jets: 6,
            large: false,
        }
    }
}

/// Every registered preset with `large` as given, by name.
fn presets_with(large: bool) -> Vec<&'static str> {
    presets::names()
        .iter()
        .copied()
        .filter(|n| sizes(&presets::get(n).unwrap()).large == large)
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    /// Every preset with fewer than seven jet roles, each case on all of them.
    #[test]
    fn every_smaller_preset_matches_exhaustive(seed in any::<u64>(), policy in 0u8..3, k in 1usize..6) {
        for name in presets_with(false) {
            check_preset(name, seed, policy, k);
        }
    }
}

proptest! {
    // Eight roles among up to nine jets: the enumeration is large, keep few cases.
    #![proptest_config(ProptestConfig { cases: 10, ..ProptestConfig::default() })]

    /// Every preset with seven or more jet roles, each case on all of them.
    #[test]
    fn every_larger_preset_matches_exhaustive(seed in any::<u64>(), policy in 0u8..2, k in 1usize..6) {
        for name in presets_with(true) {
            check_preset(name, seed, policy, k);
        }
    }
}

/// The two property tests above together cover the whole registry (a preset
/// lost between the two filters would go unchecked).
#[test]
fn exhaustive_comparison_covers_every_preset() {
    let mut covered = presets_with(false);
    covered.extend(presets_with(true));
    covered.sort_unstable();
    let mut all = presets::names().to_vec();
    all.sort_unstable();
    assert_eq!(covered, all);
    assert!(all.len() >= 10, "the registry shrank: {all:?}");
}

#[test]
fn twtw_without_btag_matches_exhaustive_on_fixed_seeds() {
    for seed in [3, 17] {
        check_preset("twtw-ljets", seed, 2, 3);
    }
}

#[test]
fn hostile_events_give_statuses_not_panics() {
    let h = presets::get("ttbar-ljets").unwrap();
    let mut s = Searcher::new(&h, SearchConfig::default()).unwrap();
    // Empty event.
    let out = s.search(&Event::new(0));
    assert_eq!(
        out.status,
        SearchStatus::TooFewJets {
            needed: 4,
            available: 0
        }
    );
    // Jets but no lepton.
    let mut e = random_event(5, 0, 0, 0);
    for i in 0..6 {
        e.jets.push(Jet::new(
            FourMomentum::from_pt_eta_phi_m(50.0 + i as f64, 0.1 * i as f64, i as f64, 5.0),
            (i % 2) as f64,
        ));
    }
    let out = s.search(&e);
    assert_eq!(
        out.status,
        SearchStatus::TooFewLeptons {
            needed: 1,
            available: 0
        }
    );
    // NaN jets are dropped, so only the finite ones count.
    let mut nan = e.clone();
    for j in nan.jets.iter_mut().take(3) {
        j.p4 = FourMomentum::new(f64::NAN, 0.0, 0.0, 1.0);
    }
    let out = s.search(&nan);
    assert_eq!(
        out.status,
        SearchStatus::TooFewJets {
            needed: 4,
            available: 3
        }
    );
    // A lepton but NaN MET: the neutrino solver fails for every lepton.
    let mut bad_met = random_event(11, 0, 0, 0);
    bad_met.jets = e.jets.clone();
    bad_met.muons.push(quarry_event::Lepton {
        p4: FourMomentum::from_pt_eta_phi_m(40.0, 0.0, 0.0, quarry_pdg::MUON_MASS),
        flavour: quarry_event::Flavour::Muon,
        charge: -1,
        truth: None,
        index: 0,
    });
    bad_met.met = quarry_event::Met::new(f64::NAN, 1.0);
    let out = s.search(&bad_met);
    assert!(
        matches!(out.status, SearchStatus::NeutrinoFailed(_)),
        "{:?}",
        out.status
    );
    // b-tag requirements that no jet meets.
    let mut no_b = bad_met.clone();
    no_b.met = quarry_event::Met::new(20.0, 10.0);
    for j in &mut no_b.jets {
        j.btag = 0.0;
    }
    assert_eq!(s.search(&no_b).status, SearchStatus::NoValidAssignment);
    // Zero-pt and identical jets, and 10 000 jets capped by leading-N.
    let mut many = no_b.clone();
    many.jets.clear();
    for i in 0..10_000u32 {
        let pt = if i % 7 == 0 {
            0.0
        } else {
            30.0 + f64::from(i % 50)
        };
        many.jets.push(
            Jet::new(
                FourMomentum::from_pt_eta_phi_m(pt, 0.3, 1.0, 5.0),
                f64::from((i / 50) % 2),
            )
            .with_index(i),
        );
    }
    let out = s.search(&many);
    assert_eq!(out.status, SearchStatus::Found);
    // Only the six leading jets (pt 79, ties by input order) may be used.
    for a in &out.ranked {
        for pos in a.used_jets() {
            assert_eq!(many.jets[pos as usize].p4.pt().round(), 79.0);
            assert!(a.chi2().is_finite());
        }
    }
}

#[test]
fn search_all_keeps_input_order() {
    let h = presets::get("bwbw-ljets").unwrap();
    let events: Vec<Event> = (0..40).map(|i| random_event(1000 + i, 7, 2, 0)).collect();
    let cfg = SearchConfig::default();
    let par = search_all(&h, &events, &cfg).unwrap();
    let mut s = Searcher::new(&h, cfg).unwrap();
    for (e, p) in events.iter().zip(&par) {
        assert_eq!(&s.search(e), p);
    }
    assert!(par.iter().any(|o| o.status == SearchStatus::Found));
}

#[test]
fn bad_configs_are_rejected() {
    let h = presets::get("ttbar-ljets").unwrap();
    for cfg in [
        SearchConfig {
            k_best: 0,
            ..SearchConfig::default()
        },
        SearchConfig {
            max_jets_override: Some(2),
            ..SearchConfig::default()
        },
        SearchConfig {
            max_jets_override: Some(33),
            ..SearchConfig::default()
        },
        SearchConfig {
            btag: BtagPolicy::Threshold(f64::NAN),
            ..SearchConfig::default()
        },
        SearchConfig {
            btag: BtagPolicy::Weighted {
                b_efficiency: 0.01,
                light_mistag: 0.7,
            },
            ..SearchConfig::default()
        },
    ] {
        assert!(Searcher::new(&h, cfg).is_err(), "{cfg:?} accepted");
    }
}

/// The random events above must often admit an assignment, or the
/// comparison would mostly check empty results.
#[test]
fn random_events_often_have_assignments() {
    for name in presets::names() {
        let h = presets::get(name).unwrap();
        let mut s = Searcher::new(
            &h,
            SearchConfig {
                btag: BtagPolicy::weighted_default(),
                ..SearchConfig::default()
            },
        )
        .unwrap();
        let found = (0..60)
            .filter(|&i| {
                let Sizes {
                    min_jets, max_jets, ..
                } = sizes(&h);
                let e = random_event_with(7000 + i, min_jets, max_jets, 4, 3);
                s.search(&e).status == SearchStatus::Found
            })
            .count();
        assert!(
            found >= 12,
            "{name}: only {found} of 60 random events have an assignment"
        );
    }
}
