//! Whole generated events: conservation in every decay, labels,
//! reproducibility, configuration errors.

use std::collections::BTreeSet;

use quarry_toy::{
    Branching, DecayMode, Generator, HeavyQuark, Partner, PartonKind, Process, ToyConfig, ToyError,
};

fn configs() -> Vec<ToyConfig> {
    let mut out = vec![ToyConfig::top_pair()];
    for partner in [
        Partner::UpType,
        Partner::DownType,
        Partner::ChargeFiveThirds,
        Partner::ExcitedTop,
    ] {
        for mass in [600.0, 1400.0] {
            out.push(ToyConfig::heavy_pair(HeavyQuark::new(partner, mass)));
        }
    }
    out
}

/// Energy and momentum are conserved to 1e-9 (relative to the parent's
/// energy) in every decay of full events; each entry's four-vector has the
/// mass recorded for it.
#[test]
fn every_decay_conserves_four_momentum() {
    let mut decays = 0;
    for cfg in configs() {
        let g = Generator::new(cfg, 5).unwrap();
        for i in 0..400 {
            let (_, rec) = g.generate_with_partons(i);
            for (k, p) in rec.partons.iter().enumerate() {
                let scale = p.p4.e();
                // m² = E² − p² cancels for fast particles: compare m² at the
                // scale of E².
                let dm2 = p.p4.m2() - p.mass * p.mass;
                assert!(dm2.abs() <= 1e-9 * scale * scale, "{p:?}");
                let kids: Vec<usize> = rec.children(k).collect();
                if !p.kind.decays() {
                    assert!(kids.is_empty());
                    continue;
                }
                assert_eq!(kids.len(), 2, "two-body decays only: {p:?}");
                let sum = rec.partons[kids[0]].p4 + rec.partons[kids[1]].p4;
                for (s, q) in [
                    (sum.px(), p.p4.px()),
                    (sum.py(), p.p4.py()),
                    (sum.pz(), p.p4.pz()),
                    (sum.e(), p.p4.e()),
                ] {
                    assert!((s - q).abs() <= 1e-9 * scale, "{p:?}: {sum:?}");
                }
                decays += 1;
            }
        }
    }
    assert!(decays > 10_000);
}

/// The pair system balances the radiation in the transverse plane.
#[test]
fn pair_recoils_against_radiation() {
    let g = Generator::new(ToyConfig::top_pair(), 8).unwrap();
    for i in 0..500 {
        let (_, rec) = g.generate_with_partons(i);
        let (mut px, mut py) = (0.0, 0.0);
        for p in rec.partons.iter().filter(|p| p.parent.is_none()) {
            px += p.p4.px();
            py += p.p4.py();
        }
        assert!(px.abs() < 1e-8 && py.abs() < 1e-8);
    }
}

fn vocabulary() -> BTreeSet<String> {
    // The table in the crate docs, expanded.
    let mut v = BTreeSet::new();
    v.insert("isr".to_string());
    for s in ["l", "h", "a", "b"] {
        for leaf in [
            "b", "g", "t.b", "t.W.q", "t.W.e", "t.W.mu", "t.W.nu", "W.q", "W.e", "W.mu", "W.nu",
            "Z.q", "Z.b", "Z.e", "Z.mu", "Z.nu", "H.b", "H.g",
        ] {
            v.insert(format!("{s}.{leaf}"));
        }
    }
    v
}

/// Every label on every object is in the documented vocabulary; the side
/// rule holds: a single-lepton event's lepton is on side `l`, its other
/// parent `h`; otherwise `a`/`b`.
#[test]
fn labels_follow_the_documented_vocabulary_and_side_rule() {
    let vocab = vocabulary();
    let fat_vocab: BTreeSet<String> = ["l", "h", "a", "b"]
        .iter()
        .flat_map(|s| ["t", "t.W", "W", "Z", "H"].map(|m| format!("{s}.{m}")))
        .chain(["l", "h", "a", "b"].map(String::from)) // a top of a top pair
        .collect();
    let mut seen = BTreeSet::new();
    for cfg in configs() {
        let g = Generator::new(cfg, 17).unwrap();
        for i in 0..1500 {
            let (event, rec) = g.generate_with_partons(i);
            for j in &event.jets {
                let t = j.truth.unwrap().to_string();
                assert!(vocab.contains(&t), "jet label {t}");
                seen.insert(t);
            }
            for l in event.leptons() {
                let t = l.truth.unwrap().to_string();
                assert!(vocab.contains(&t), "lepton label {t}");
                assert!(t.ends_with(".e") || t.ends_with(".mu"));
                seen.insert(t);
            }
            for f in &event.fat_jets {
                let t = f.truth.unwrap().to_string();
                assert!(fat_vocab.contains(&t), "fat-jet label {t}");
            }
            let w_leptons: Vec<_> = rec
                .partons
                .iter()
                .filter(|p| {
                    matches!(p.kind, PartonKind::Electron | PartonKind::Muon)
                        && rec.partons[p.parent.unwrap()].kind == PartonKind::W
                })
                .collect();
            let sides: BTreeSet<&str> = rec.partons[..2].iter().map(|p| p.truth.as_str()).collect();
            let leptonic_sides: BTreeSet<&str> =
                w_leptons.iter().map(|p| &p.truth.as_str()[..1]).collect();
            if leptonic_sides.len() == 1 {
                assert_eq!(sides, BTreeSet::from(["l", "h"]));
                assert_eq!(leptonic_sides, BTreeSet::from(["l"]));
            } else {
                assert_eq!(sides, BTreeSet::from(["a", "b"]));
            }
        }
    }
    // The documented examples do occur.
    for t in [
        "h.b", "h.W.q", "l.b", "l.W.mu", "h.t.b", "h.t.W.q", "l.t.W.e", "h.g", "isr",
    ] {
        assert!(seen.contains(t), "never saw {t}");
    }
}

#[test]
fn same_seed_same_events_in_any_order_and_thread() {
    let cfg = ToyConfig::heavy_pair(HeavyQuark::new(Partner::UpType, 1000.0));
    let a: Vec<_> = Generator::new(cfg.clone(), 123)
        .unwrap()
        .take(200)
        .collect();
    let b: Vec<_> = Generator::new(cfg.clone(), 123)
        .unwrap()
        .take(200)
        .collect();
    assert_eq!(a, b);
    let g = Generator::new(cfg.clone(), 123).unwrap();
    // Reverse order, and split over threads.
    for i in (0..200).rev() {
        assert_eq!(g.generate(i as u64), a[i]);
    }
    let halves: Vec<Vec<_>> = std::thread::scope(|s| {
        let hs: Vec<_> = [0u64, 100]
            .into_iter()
            .map(|start| {
                let g = &g;
                s.spawn(move || (start..start + 100).map(|i| g.generate(i)).collect())
            })
            .collect();
        hs.into_iter().map(|h| h.join().unwrap()).collect()
    });
    assert_eq!(halves.concat(), a);
    let c: Vec<_> = Generator::new(cfg, 124).unwrap().take(200).collect();
    let same = a.iter().zip(&c).filter(|(x, y)| x == y).count();
    assert_eq!(same, 0, "a different seed gives different events");
}

#[test]
fn event_ids_use_the_offset() {
    let mut cfg = ToyConfig::top_pair();
    cfg.event_id_offset = 1_000_000;
    let ids: Vec<u64> = Generator::new(cfg, 1)
        .unwrap()
        .take(3)
        .map(|e| e.id)
        .collect();
    assert_eq!(ids, [1_000_000, 1_000_001, 1_000_002]);
}

/// No NaN or infinity anywhere, b-tag scores in [0, 1], objects inside the
/// acceptance and sorted by pt.
#[test]
fn events_are_finite_and_inside_acceptance() {
    for cfg in configs() {
        let acc = cfg.acceptance;
        let g = Generator::new(cfg, 3).unwrap();
        for i in 0..500 {
            let e = g.generate(i);
            for (k, j) in e.jets.iter().enumerate() {
                assert!(j.p4.is_finite() && (0.0..=1.0).contains(&j.btag));
                assert!(j.p4.pt() > acc.jet_pt_min && j.p4.eta().abs() < acc.jet_abs_eta_max);
                assert_eq!(j.index as usize, k);
                if k > 0 {
                    assert!(e.jets[k - 1].p4.pt() >= j.p4.pt());
                }
            }
            for l in &e.electrons {
                assert!(l.p4.is_finite() && l.p4.pt() > acc.electron_pt_min);
                assert!(l.p4.eta().abs() < acc.electron_abs_eta_max);
                assert!(l.charge == 1 || l.charge == -1);
            }
            for l in &e.muons {
                assert!(l.p4.is_finite() && l.p4.pt() > acc.muon_pt_min);
                assert!(l.charge == 1 || l.charge == -1);
            }
            for f in &e.fat_jets {
                assert!(f.p4.is_finite() && f.p4.pt() > acc.fat_jet_pt_min);
            }
            assert!(e.met.px.is_finite() && e.met.py.is_finite());
            assert_eq!(e.weight, 1.0);
        }
    }
}

/// Charge-5/3 pairs give same-sign leptons whenever both W of one side decay
/// leptonically; down-type B → tW⁻ gives opposite-sign W on one side.
#[test]
fn lepton_charges_follow_the_partner() {
    let charges = |partner| {
        let g = Generator::new(ToyConfig::heavy_pair(HeavyQuark::new(partner, 1000.0)), 9).unwrap();
        let mut same_side = Vec::new();
        for i in 0..4000 {
            let (_, rec) = g.generate_with_partons(i);
            for side in 0..2 {
                let ws: Vec<i8> = rec
                    .partons
                    .iter()
                    .enumerate()
                    .filter(|(k, p)| {
                        p.kind == PartonKind::W && {
                            let mut j = *k;
                            while let Some(par) = rec.partons[j].parent {
                                j = par;
                            }
                            j == side
                        }
                    })
                    .map(|(_, p)| p.charge)
                    .collect();
                same_side.push(ws);
            }
        }
        same_side
    };
    for ws in charges(Partner::ChargeFiveThirds) {
        assert_eq!(ws.len(), 2);
        assert_eq!(ws[0], ws[1], "X5/3 → t W: both W of a side share the sign");
    }
    for ws in charges(Partner::DownType).iter().filter(|w| w.len() == 2) {
        assert_eq!(ws[0], -ws[1], "B → t W⁻: opposite signs");
    }
}

#[test]
fn configuration_round_trips_and_bad_input_is_a_typed_error() {
    for cfg in configs() {
        assert_eq!(ToyConfig::from_toml(&cfg.to_toml()).unwrap(), cfg);
    }
    let text = r#"
        sqrt_s = 14000.0
        [process]
        kind = "heavy-pair"
        partner = "down-type"
        mass = 1400.0
        [process.branching]
        tW = 0.6
        bZ = 0.4
    "#;
    let cfg = ToyConfig::from_toml(text).unwrap();
    match cfg.process {
        Process::HeavyPair(q) => {
            assert_eq!(q.branching.get(DecayMode::TopW), 0.6);
            assert_eq!(q.width_fraction, 0.01);
        }
        Process::TopPair => panic!("wrong process"),
    }
    let bad = |text: &str| match ToyConfig::from_toml(text) {
        Err(ToyError::Invalid(m)) => m,
        other => panic!("expected Invalid, got {other:?}"),
    };
    let head = "[process]\nkind = \"heavy-pair\"\npartner = \"up-type\"\n";
    assert!(bad(&format!(
        "{head}mass = 900.0\n[process.branching]\nbW = 0.5\n"
    ))
    .contains("sum"));
    assert!(bad(&format!(
        "{head}mass = 900.0\n[process.branching]\ntW = 1.0\n"
    ))
    .contains("not allowed"));
    assert!(bad(&format!(
        "{head}mass = 200.0\n[process.branching]\ntZ = 1.0\n"
    ))
    .contains("threshold"));
    assert!(bad(&format!(
        "{head}mass = 900.0\n[process.branching]\nbW = 1.5\ntZ = -0.5\n"
    ))
    .contains(">= 0"));
    assert!(bad(&format!(
        "{head}mass = 8000.0\n[process.branching]\nbW = 1.0\n"
    ))
    .contains("sqrt_s"));
    assert!(bad("[btag]\nb_efficiency = 1.0").contains("btag"));
    assert!(bad("[radiation]\nmean = -1.0").contains("radiation"));
    assert!(matches!(
        ToyConfig::from_toml("sqrt_s = \"big\""),
        Err(ToyError::Toml(_))
    ));
    assert!(matches!(
        ToyConfig::from_toml("no_such_key = 1"),
        Err(ToyError::Toml(_))
    ));
    let mut cfg = ToyConfig::top_pair();
    cfg.resolution.jet.clear();
    assert!(matches!(
        Generator::new(cfg, 1),
        Err(ToyError::Resolution(_))
    ));
    let q = HeavyQuark::new(Partner::UpType, f64::NAN)
        .with_branching(Branching::only(DecayMode::BottomW));
    assert!(Generator::new(ToyConfig::heavy_pair(q), 1).is_err());
}
