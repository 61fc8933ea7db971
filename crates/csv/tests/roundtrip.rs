//! Write events, read them back, compare.

use quarry_csv::{EventReader, EventWriter, ReadOptions, Record};
use quarry_event::{Event, FatJet, Flavour, Jet, Lepton, Met, Truth};
use quarry_lorentz::FourMomentum;

fn lepton(flavour: Flavour, p4: FourMomentum, charge: i8, index: u32) -> Lepton {
    Lepton {
        p4,
        flavour,
        charge,
        truth: None,
        index,
    }
}

/// A deterministic set of events covering every kind, optional values
/// present and absent, and an event with no objects.
fn sample_events() -> Vec<Event> {
    let mut out = Vec::new();
    for id in 0..40u64 {
        let x = id as f64;
        let mut e = Event::new(1000 + id * 7);
        e.weight = if id % 3 == 0 { 1.0 } else { -0.37 * x + 0.1 };
        if id % 5 != 4 {
            for k in 0..(id % 6) {
                let kf = k as f64;
                let mut j = Jet::new(
                    FourMomentum::from_pt_eta_phi_m(
                        25.0 + 13.7 * kf + x,
                        -2.4 + 0.31 * kf + 0.01 * x,
                        -3.1 + 0.9 * kf + 0.05 * x,
                        4.0 + kf * 1.3,
                    ),
                    ((kf + x) * 0.137) % 1.0,
                )
                .with_index(k as u32);
                if k == 1 {
                    j = j.with_truth(Truth::new("h.t.W.q").unwrap());
                }
                e.jets.push(j);
            }
            if id % 4 == 0 {
                e.fat_jets.push(FatJet {
                    p4: FourMomentum::from_pt_eta_phi_m(410.0 + x, 0.7, 2.0, 85.0),
                    truth: Some(Truth::new("h.W").unwrap()),
                    index: 0,
                });
            }
            if id % 2 == 0 {
                e.electrons.push(lepton(
                    Flavour::Electron,
                    FourMomentum::from_pt_eta_phi_m(35.5 + x, 1.1, -0.4, 0.000511),
                    if id % 4 == 0 { -1 } else { 1 },
                    0,
                ));
            } else {
                let mut mu = lepton(
                    Flavour::Muon,
                    FourMomentum::from_pt_eta_phi_m(52.25, -0.9, 3.0, 0.10566),
                    0,
                    0,
                );
                mu.truth = Some(Truth::new("l.W.mu").unwrap());
                e.muons.push(mu);
                e.muons.push(lepton(
                    Flavour::Muon,
                    FourMomentum::from_pt_eta_phi_m(0.0, 0.0, 0.0, 0.10566),
                    1,
                    1,
                ));
            }
            e.met = Met {
                px: 30.0 - x,
                py: 0.5 * x - 7.0,
                cov: if id % 3 == 1 {
                    Some([100.0 + x, -3.0, 80.0])
                } else {
                    None
                },
            };
        }
        out.push(e);
    }
    out
}

fn close(a: f64, b: f64, scale: f64) -> bool {
    // Writing pt, eta, phi, mass and rebuilding (px, py, pz, E) loses a few
    // ulps of the object's energy scale: 1e-12 relative to `scale` is ample.
    (a - b).abs() <= 1e-12 * scale.max(1.0)
}

fn same_p4(a: &FourMomentum, b: &FourMomentum) -> bool {
    let s = a.e().abs().max(b.e().abs());
    close(a.px(), b.px(), s)
        && close(a.py(), b.py(), s)
        && close(a.pz(), b.pz(), s)
        && close(a.e(), b.e(), s)
}

fn assert_same(a: &Event, b: &Event) {
    assert_eq!(a.id, b.id);
    assert_eq!(a.weight, b.weight, "weight written in round-trip format");
    assert_eq!(a.jets.len(), b.jets.len());
    for (x, y) in a.jets.iter().zip(&b.jets) {
        assert!(same_p4(&x.p4, &y.p4), "{x:?} vs {y:?}");
        assert_eq!((x.btag, x.truth, x.index), (y.btag, y.truth, y.index));
    }
    assert_eq!(a.fat_jets.len(), b.fat_jets.len());
    for (x, y) in a.fat_jets.iter().zip(&b.fat_jets) {
        assert!(same_p4(&x.p4, &y.p4));
        assert_eq!((x.truth, x.index), (y.truth, y.index));
    }
    for (xs, ys) in [(&a.electrons, &b.electrons), (&a.muons, &b.muons)] {
        assert_eq!(xs.len(), ys.len());
        for (x, y) in xs.iter().zip(ys.iter()) {
            assert!(same_p4(&x.p4, &y.p4), "{x:?} vs {y:?}");
            assert_eq!(
                (x.flavour, x.charge, x.truth, x.index),
                (y.flavour, y.charge, y.truth, y.index)
            );
        }
    }
    let s = a.met.pt();
    assert!(close(a.met.px, b.met.px, s) && close(a.met.py, b.met.py, s));
    assert_eq!(a.met.cov, b.met.cov);
}

fn round_trip(file_name: &str) {
    let events = sample_events();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join(file_name);
    let mut w = EventWriter::create(&path).unwrap();
    for e in &events {
        w.write(e).unwrap();
    }
    w.finish().unwrap();
    let reader = EventReader::open(&path, ReadOptions::default()).unwrap();
    assert_eq!(reader.is_gzip(), file_name.ends_with(".gz"));
    let mut n = 0;
    for (rec, want) in reader.zip(&events) {
        match rec.unwrap() {
            Record::Good(got) => assert_same(want, &got),
            Record::Bad(b) => panic!("{b}"),
        }
        n += 1;
    }
    assert_eq!(n, events.len());
}

#[test]
fn plain_round_trip() {
    round_trip("events.csv");
}

#[test]
fn gzip_round_trip() {
    round_trip("events.csv.gz");
}

#[test]
fn writer_refuses_non_finite_values() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.csv");
    let mut w = EventWriter::create(&path).unwrap();
    let mut e = Event::new(3);
    e.jets
        .push(Jet::new(FourMomentum::new(f64::NAN, 0.0, 1.0, 2.0), 0.5));
    let err = w.write(&e).unwrap_err().to_string();
    assert!(
        err.contains("event 3") && err.contains("non-finite"),
        "{err}"
    );
    let mut e = Event::new(4);
    e.met = Met::new(f64::INFINITY, 0.0);
    assert!(w.write(&e).is_err());
    // An unphysical vector (|p| > E beyond rounding) is refused too.
    let mut e = Event::new(5);
    e.jets
        .push(Jet::new(FourMomentum::new(10.0, 0.0, 0.0, 5.0), 0.5));
    assert!(w.write(&e).unwrap_err().to_string().contains("m²"));
    w.finish().unwrap();
    // Nothing of the refused events was written: header only.
    assert_eq!(std::fs::read_to_string(&path).unwrap().lines().count(), 1);
}
