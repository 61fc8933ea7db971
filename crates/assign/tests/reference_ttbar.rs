//! The `ttbar-ljets` search against brute-force reference results computed
//! in Python with scikit-hep `vector` (invariant masses) and `numpy.roots`
//! (neutrino pz), masses from the `particle` package (PDG table):
//! tests/reference/assign_ttbar.py → tests/reference/fixtures/assign_ttbar.json.

use quarry_assign::{presets, ObjectRef, SearchConfig, SearchStatus, Searcher};
use quarry_event::{Event, Flavour, Jet, Lepton, Met};
use quarry_lorentz::FourMomentum;
use serde_json::Value;

const FIXTURE: &str = include_str!("../../../tests/reference/fixtures/assign_ttbar.json");

fn p4(v: &Value) -> FourMomentum {
    let a: Vec<f64> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect();
    FourMomentum::new(a[0], a[1], a[2], a[3])
}

#[test]
fn ttbar_best_assignments_match_python_brute_force() {
    let fx: Value = serde_json::from_str(FIXTURE).unwrap();
    // The reference used the PDG masses quarry-pdg carries.
    assert!((fx["masses"]["W"].as_f64().unwrap() - quarry_pdg::W_MASS).abs() < 1e-9);
    assert!((fx["masses"]["top"].as_f64().unwrap() - quarry_pdg::TOP_MASS).abs() < 1e-9);
    let h = presets::get("ttbar-ljets").unwrap();
    let mut s = Searcher::new(&h, SearchConfig::default()).unwrap();
    let events = fx["events"].as_array().unwrap();
    assert!(events.len() >= 5);
    for (i, ev) in events.iter().enumerate() {
        let mut e = Event::new(i as u64);
        for (k, j) in ev["jets"].as_array().unwrap().iter().enumerate() {
            let btag = j[4].as_f64().unwrap();
            e.jets.push(Jet::new(p4(j), btag).with_index(k as u32));
        }
        e.muons.push(Lepton {
            p4: p4(&ev["muon"]),
            flavour: Flavour::Muon,
            charge: 1,
            truth: None,
            index: 0,
        });
        e.met = Met::new(
            ev["met"][0].as_f64().unwrap(),
            ev["met"][1].as_f64().unwrap(),
        );
        let out = s.search(&e);
        assert_eq!(out.status, SearchStatus::Found, "event {i}");
        let want: Vec<f64> = ev["chi2"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        assert_eq!(out.ranked.len(), want.len().min(3), "event {i}");
        for (a, w) in out.ranked.iter().zip(&want) {
            assert!(
                (a.chi2() - w).abs() < 1e-7 * w.max(1.0),
                "event {i}: {} vs {w}",
                a.chi2()
            );
        }
        let best = out.best().unwrap();
        let jet = |role: &str| match best.object(h.role_index(role).unwrap()) {
            ObjectRef::Jet { pos, .. } => pos as u64,
            other => panic!("{other:?}"),
        };
        let b = &ev["best"];
        assert_eq!(jet("b_had"), b["b_had"].as_u64().unwrap(), "event {i}");
        assert_eq!(jet("b_lep"), b["b_lep"].as_u64().unwrap(), "event {i}");
        let mut q = [jet("q1"), jet("q2")];
        q.sort_unstable();
        assert_eq!(q[0], b["q"][0].as_u64().unwrap(), "event {i}");
        assert_eq!(q[1], b["q"][1].as_u64().unwrap(), "event {i}");
        assert_eq!(
            best.object(h.role_index("nu").unwrap()),
            ObjectRef::Neutrino {
                root: b["root"].as_u64().unwrap() as u8
            },
            "event {i}"
        );
    }
}
