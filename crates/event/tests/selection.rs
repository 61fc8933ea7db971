//! quarry_event::Selection: thresholds, lepton–jet overlap removal, pt
//! ordering, and input indices surviving selection. Expected outcomes are
//! worked out by hand from the documented defaults.

use std::f64::consts::PI;

use quarry_event::{Event, FatJet, Flavour, FourMomentum, Jet, Lepton, Selection};

fn jet(pt: f64, eta: f64, phi: f64, index: u32) -> Jet {
    Jet::new(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 5.0), 0.0).with_index(index)
}

fn lepton(flavour: Flavour, pt: f64, eta: f64, phi: f64, index: u32) -> Lepton {
    Lepton {
        p4: FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 0.0),
        flavour,
        charge: -1,
        truth: None,
        index,
    }
}

fn fat_jet(pt: f64, eta: f64, index: u32) -> FatJet {
    FatJet {
        p4: FourMomentum::from_pt_eta_phi_m(pt, eta, 0.0, 80.0),
        truth: None,
        index,
    }
}

fn jet_indices(e: &Event) -> Vec<u32> {
    e.jets.iter().map(|j| j.index).collect()
}

#[test]
fn jet_thresholds_are_strict() {
    let mut e = Event::new(1);
    e.jets = vec![
        jet(25.0, 0.0, 0.0, 0),  // pt not > 25: removed
        jet(25.01, 0.0, 1.0, 1), // kept
        jet(80.0, 2.5, 2.0, 2),  // |eta| not < 2.5: removed
        jet(80.0, -2.49, -2.0, 3),
    ];
    Selection::default().apply(&mut e);
    assert_eq!(jet_indices(&e), [3, 1]);
}

#[test]
fn leptons_and_fat_jets_have_their_own_thresholds() {
    let mut e = Event::new(2);
    e.electrons = vec![
        lepton(Flavour::Electron, 24.0, 0.0, 0.0, 0),
        lepton(Flavour::Electron, 30.0, 2.6, 0.0, 1),
        lepton(Flavour::Electron, 30.0, 1.0, 0.0, 2),
    ];
    e.muons = vec![lepton(Flavour::Muon, 26.0, -2.4, 1.0, 0)];
    e.fat_jets = vec![
        fat_jet(199.0, 0.0, 0),
        fat_jet(350.0, 1.9, 1),
        fat_jet(350.0, 2.1, 2),
    ];
    Selection::default().apply(&mut e);
    assert_eq!(e.electrons.iter().map(|l| l.index).collect::<Vec<_>>(), [2]);
    assert_eq!(e.muons.len(), 1);
    assert_eq!(e.fat_jets.iter().map(|j| j.index).collect::<Vec<_>>(), [1]);
}

#[test]
fn overlap_removal_uses_delta_r_to_selected_leptons() {
    let mut e = Event::new(3);
    // Lepton at eta 0, phi 3.1. Jets: ΔR = 0.3 (removed), ΔR = 0.5 (kept),
    // and one across the φ = ±π seam at Δφ = 2π − 6.2 ≈ 0.083 (removed).
    e.muons = vec![lepton(Flavour::Muon, 40.0, 0.0, 3.1, 0)];
    e.jets = vec![
        jet(60.0, 0.3, 3.1, 0),
        jet(50.0, 0.0, 3.1 - 0.5, 1),
        jet(70.0, 0.0, -3.1, 2),
    ];
    let dphi = 2.0 * PI - 6.2;
    assert!((e.jets[2].p4.delta_r(&e.muons[0].p4) - dphi).abs() < 1e-12);
    // A lepton failing its own cuts removes no jet.
    e.electrons = vec![lepton(Flavour::Electron, 10.0, 0.0, 0.0, 0)];
    e.jets.push(jet(45.0, 0.1, 0.0, 3));
    Selection::default().apply(&mut e);
    assert_eq!(jet_indices(&e), [1, 3]);
    assert!(e.electrons.is_empty());

    // Disabled overlap removal keeps the close jet.
    let mut e2 = Event::new(4);
    e2.muons = vec![lepton(Flavour::Muon, 40.0, 0.0, 3.1, 0)];
    e2.jets = vec![jet(60.0, 0.3, 3.1, 0)];
    let sel = Selection {
        lepton_jet_overlap_dr: 0.0,
        ..Selection::default()
    };
    sel.apply(&mut e2);
    assert_eq!(e2.jets.len(), 1);
}

#[test]
fn sorted_by_decreasing_pt_with_ties_in_input_order_and_indices_kept() {
    let mut e = Event::new(5);
    e.jets = vec![
        jet(40.0, 0.0, 0.0, 0),
        jet(90.0, 0.5, 1.0, 1),
        jet(40.0, 1.0, 2.0, 2),
        jet(60.0, -1.0, -1.0, 3),
    ];
    e.jets[1].btag = 0.8;
    Selection::default().apply(&mut e);
    assert_eq!(jet_indices(&e), [1, 3, 0, 2]);
    // The object moved with its own properties.
    assert_eq!(e.jets[0].btag, 0.8);
    assert!((e.jets[0].p4.pt() - 90.0).abs() < 1e-12);
}

#[test]
fn keep_all_keeps_everything_and_btag_threshold_is_strict() {
    let mut e = Event::new(6);
    e.muons = vec![lepton(Flavour::Muon, 1.0, 0.0, 0.0, 0)];
    e.jets = vec![jet(1.0, 4.0, 0.0, 0), jet(2.0, 0.0, 0.0, 1)];
    Selection::keep_all().apply(&mut e);
    assert_eq!(jet_indices(&e), [1, 0]);
    assert_eq!(e.muons.len(), 1);
    let s = Selection::default();
    assert!(!s.is_btagged(&Jet::new(FourMomentum::ZERO, 0.5)));
    assert!(s.is_btagged(&Jet::new(FourMomentum::ZERO, 0.5000001)));
}
