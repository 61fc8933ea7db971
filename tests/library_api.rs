//! Building events in code through the library's API: objects are numbered
//! when added, leptons land in their flavour's list, bad truth labels are
//! errors (issue 12, "Library ergonomics").

use quarry::event::{Event, FatJet, Flavour, Jet, Lepton, Met, Truth};
use quarry::lorentz::FourMomentum;
use quarry::{Pipeline, Status};

fn p4(pt: f64, eta: f64, phi: f64, m: f64) -> FourMomentum {
    FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m)
}

/// The README's input-format example event, built with the add_* methods.
fn readme_event() -> Event {
    let t = |s| Truth::new(s).unwrap();
    let mut e = Event::new(1001);
    e.add_jet(Jet::new(p4(212.4, 0.41, -2.71, 14.2), 0.93).with_truth(t("h.b")))
        .add_jet(Jet::new(p4(96.3, -0.88, 0.35, 9.1), 0.08).with_truth(t("h.W.q")))
        .add_jet(Jet::new(p4(74.9, 1.62, 0.97, 7.7), 0.12).with_truth(t("h.W.q")))
        .add_jet(Jet::new(p4(151.0, -0.23, 1.92, 11.8), 0.88).with_truth(t("l.b")))
        .add_lepton(Lepton::muon(p4(88.2, 0.12, 2.44, 0.10566), -1).with_truth(t("l.W.mu")));
    e.met = Met::from_pt_phi(120.7, -0.56);
    e
}

#[test]
fn added_objects_are_numbered_and_outputs_name_distinct_jets() {
    let event = readme_event();
    assert!(event.indices_are_positions());
    let indices: Vec<u32> = event.jets.iter().map(|j| j.index).collect();
    assert_eq!(indices, [0, 1, 2, 3]);
    let pipeline = Pipeline::builder().preset("ttbar-ljets").build().unwrap();
    let reco = &pipeline.reconstruct(&event)[0];
    assert_eq!(reco.status, Status::Ok);
    let text = reco.assignment_text();
    // Four different jets, not `b_had=0;q1=0;q2=0;b_lep=0`.
    let jets: Vec<&str> = text
        .split(';')
        .filter(|kv| {
            ["b_had", "q1", "q2", "b_lep"]
                .iter()
                .any(|r| kv.starts_with(&format!("{r}=")))
        })
        .map(|kv| kv.split_once('=').unwrap().1)
        .collect();
    assert_eq!(jets.len(), 4, "{text}");
    let mut distinct = jets.clone();
    distinct.sort();
    distinct.dedup();
    assert_eq!(distinct.len(), 4, "{text}");
    assert!(text.contains("lep=mu0"), "{text}");
}

#[test]
fn leptons_go_to_their_flavours_list_and_every_kind_has_a_constructor() {
    let mut e = Event::new(1);
    let p = p4(40.0, 0.1, 0.2, 0.000511);
    e.add_lepton(Lepton::electron(p, -1))
        .add_lepton(Lepton::muon(p, 1))
        .add_lepton(Lepton::electron(p, 1))
        .add_fat_jet(FatJet::new(p4(420.0, 0.3, 2.0, 81.0)));
    assert_eq!(e.electrons.len(), 2);
    assert_eq!(e.muons.len(), 1);
    assert_eq!(e.electrons[1].index, 1);
    assert_eq!(e.muons[0].index, 0);
    assert!(e.electrons.iter().all(|l| l.flavour == Flavour::Electron));
    assert_eq!(e.fat_jets[0].index, 0);
    assert!(e.indices_are_positions());
    // Pushing without numbering is detectable.
    e.jets.push(Jet::new(p, 0.0));
    e.jets.push(Jet::new(p, 0.0));
    assert!(!e.indices_are_positions());
}

/// MET from (pt, φ) against the Cartesian definition px = pt cos φ,
/// py = pt sin φ (common practice).
#[test]
fn met_from_pt_and_phi() {
    for (pt, phi) in [(120.7, -0.56), (30.0, 3.0), (0.0, 1.0)] {
        let m = Met::from_pt_phi(pt, phi);
        assert!((m.px - pt * f64::cos(phi)).abs() < 1e-12);
        assert!((m.py - pt * f64::sin(phi)).abs() < 1e-12);
        assert!((m.pt() - pt).abs() < 1e-9);
        if pt > 0.0 {
            assert!((m.phi() - phi).abs() < 1e-12);
        }
    }
}

#[test]
fn a_bad_truth_label_is_an_error_naming_the_text() {
    for bad in ["", "has space", "a,b", "x".repeat(24).as_str()] {
        let e = Truth::new(bad).unwrap_err();
        assert!(e.to_string().contains("is not a truth label"), "{e}");
        assert_eq!(e.text, bad);
    }
}
