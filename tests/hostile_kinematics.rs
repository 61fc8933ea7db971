//! Property tests for the assignment search and the kinematic fit on
//! random, extreme and degenerate kinematics (issue 8): zero-mass and
//! zero-pt jets, |η| > 10, φ outside (−π, π], energies of 10⁶ GeV,
//! identical jets, a lepton exactly along the beam, and raw NaN/∞ values.
//!
//! Every test asserts concrete properties, through the `quarry` facade:
//! - no panic, and exactly one result (with a status) per hypothesis;
//! - every number a result exposes is finite, or the result carries a typed
//!   status that says why (`bad_input`, a search status, a fit status, a
//!   fit χ² of +∞ with probability 0);
//! - the search never uses one object twice, ranks by χ², and its χ² does
//!   not depend on how φ is written (φ and φ + 2π) or on a rotation of the
//!   whole event about the beam (masses are rotation invariant: common
//!   practice);
//! - identical jets give identical χ² for every ranked assignment.

use proptest::prelude::*;
use quarry::assign::{presets, BtagPolicy, ObjectRef, SearchConfig, SearchStatus, Searcher};
use quarry::event::{Event, FatJet, Flavour, Jet, Lepton, Met};
use quarry::fit::{
    Composite, Constraint, FitInput, FitStatus, KinematicFitter, Measured, NeutrinoStart,
};
use quarry::lorentz::FourMomentum;
use quarry::{Pipeline, Reconstruction, Status};
use std::f64::consts::PI;

/// A (pt, η, φ, m) value from the hostile ranges: zero, tiny, typical,
/// 10⁶ GeV; |η| up to 15; φ in [−4π, 4π].
fn pt() -> impl Strategy<Value = f64> {
    prop_oneof![
        Just(0.0),
        Just(1e6),
        1e-9..1e-3f64,
        20.0..400.0f64,
        1e3..1e6f64,
    ]
}

fn eta() -> impl Strategy<Value = f64> {
    prop_oneof![3 => -2.5..2.5f64, 1 => -15.0..15.0f64, 1 => Just(10.5), 1 => Just(-12.0)]
}

fn phi() -> impl Strategy<Value = f64> {
    prop_oneof![3 => -PI..=PI, 1 => -4.0 * PI..4.0 * PI, 1 => Just(PI), 1 => Just(-PI), 1 => Just(3.0 * PI)]
}

fn mass() -> impl Strategy<Value = f64> {
    prop_oneof![Just(0.0), 0.0..30.0f64, Just(1e6)]
}

#[derive(Clone, Debug)]
struct Obj {
    pt: f64,
    eta: f64,
    phi: f64,
    m: f64,
    btag: f64,
}

fn obj() -> impl Strategy<Value = Obj> {
    (
        pt(),
        eta(),
        phi(),
        mass(),
        prop_oneof![Just(0.0), Just(1.0), 0.0..=1.0f64],
    )
        .prop_map(|(pt, eta, phi, m, btag)| Obj {
            pt,
            eta,
            phi,
            m,
            btag,
        })
}

#[derive(Clone, Debug)]
struct Kin {
    jets: Vec<Obj>,
    /// (is_muon, charge, object)
    leptons: Vec<(bool, i8, Obj)>,
    fat_jets: Vec<Obj>,
    /// Put the first lepton exactly along the beam (pt = 0, |pz| > 0).
    lepton_on_beam: bool,
    /// Replace every jet by a copy of the first.
    identical_jets: bool,
    met: (f64, f64),
}

fn kin() -> impl Strategy<Value = Kin> {
    (
        proptest::collection::vec(obj(), 0..9),
        proptest::collection::vec(
            (
                any::<bool>(),
                prop_oneof![Just(-1i8), Just(1), Just(0)],
                obj(),
            ),
            0..4,
        ),
        proptest::collection::vec(obj(), 0..3),
        any::<bool>(),
        prop_oneof![4 => Just(false), 1 => Just(true)],
        (pt(), phi()),
    )
        .prop_map(
            |(jets, leptons, fat_jets, lepton_on_beam, identical_jets, (met, met_phi))| Kin {
                jets,
                leptons,
                fat_jets,
                lepton_on_beam,
                identical_jets,
                met: (met * met_phi.cos(), met * met_phi.sin()),
            },
        )
}

/// Builds the event, rotating every azimuth by `dphi`.
fn build(k: &Kin, dphi: f64) -> Event {
    let p4 = |o: &Obj| FourMomentum::from_pt_eta_phi_m(o.pt, o.eta, o.phi + dphi, o.m);
    let mut e = Event::new(42);
    for (i, o) in k.jets.iter().enumerate() {
        let o = if k.identical_jets { &k.jets[0] } else { o };
        e.jets.push(Jet::new(p4(o), o.btag).with_index(i as u32));
    }
    for (i, o) in k.fat_jets.iter().enumerate() {
        e.fat_jets.push(FatJet {
            p4: p4(o),
            truth: None,
            index: i as u32,
        });
    }
    for (n, (muon, charge, o)) in k.leptons.iter().enumerate() {
        let p = if n == 0 && k.lepton_on_beam {
            // Exactly along the beam: no transverse momentum at all.
            let pz = if o.eta < 0.0 {
                -o.pt.max(1.0)
            } else {
                o.pt.max(1.0)
            };
            FourMomentum::new(0.0, 0.0, pz, pz.abs())
        } else {
            p4(o)
        };
        let list = if *muon {
            &mut e.muons
        } else {
            &mut e.electrons
        };
        list.push(Lepton {
            p4: p,
            flavour: if *muon {
                Flavour::Muon
            } else {
                Flavour::Electron
            },
            charge: *charge,
            truth: None,
            index: list.len() as u32,
        });
    }
    let (c, s) = (dphi.cos(), dphi.sin());
    e.met = Met::new(k.met.0 * c - k.met.1 * s, k.met.0 * s + k.met.1 * c);
    e
}

/// The pipelines under test, built once: no selection (so the extreme
/// objects reach the search and the fit), with and without the fit.
fn pipelines() -> &'static [Pipeline; 2] {
    use std::sync::OnceLock;
    static P: OnceLock<[Pipeline; 2]> = OnceLock::new();
    P.get_or_init(|| {
        let build = |fit: bool| {
            Pipeline::builder()
                .preset("ttbar-ljets")
                .preset("bwbw-ljets")
                .preset("tz-3l")
                .preset("twtw-ljets-boosted")
                .preset("bwth-ljets")
                .preset("thth-ljets")
                .preset("twbh-ljets")
                .preset("tzth-ljets")
                .preset("thth-ljets-boosted")
                .no_selection()
                .fit(fit)
                .build()
                .expect("presets build")
        };
        [build(false), build(true)]
    })
}

/// The checks every result must pass, whatever the input.
fn check_results(p: &Pipeline, e: &Event, results: &[Reconstruction]) -> Result<(), TestCaseError> {
    prop_assert_eq!(results.len(), p.hypotheses().len());
    for (r, h) in results.iter().zip(p.hypotheses()) {
        prop_assert_eq!(r.hypothesis.name(), h.name());
        prop_assert_eq!(r.event_id, e.id);
        prop_assert!(Status::ALL.contains(&r.status));
        if r.status == Status::BadInput {
            prop_assert!(!r.reason.is_empty());
            prop_assert!(r.best().is_none() && r.vars.is_none());
            continue;
        }
        let v = r.vars.as_ref().unwrap();
        prop_assert!(v.ht.is_finite() && v.ht >= 0.0, "ht {}", v.ht);
        prop_assert!(v.st.is_finite() && v.st >= 0.0, "st {}", v.st);
        for x in [v.lead_jet_pt, v.mll_z, r.st_unclaimed]
            .into_iter()
            .flatten()
        {
            prop_assert!(x.is_finite(), "variable {}", x);
        }
        let ranked = &r.search.ranked;
        prop_assert_eq!(ranked.is_empty(), r.search.status != SearchStatus::Found);
        prop_assert!(ranked.windows(2).all(|w| w[0].chi2() <= w[1].chi2()));
        for a in ranked {
            prop_assert!(a.chi2().is_finite() && a.chi2() >= 0.0, "χ² {}", a.chi2());
            for c in 0..r.hypothesis.composites().len() {
                prop_assert!(!a.composite_mass(c).is_nan(), "NaN composite mass");
            }
            // No object fills two roles.
            let mut used: Vec<ObjectRef> = a
                .objects()
                .iter()
                .copied()
                .filter(|o| !matches!(o, ObjectRef::Empty | ObjectRef::Neutrino { .. }))
                .collect();
            let n = used.len();
            used.sort_by_key(|o| format!("{o:?}"));
            used.dedup();
            prop_assert_eq!(used.len(), n, "an object fills two roles");
        }
        match r.status {
            Status::Ok => prop_assert!(r.best().is_some()),
            Status::FitNotConverged => {
                prop_assert!(r.best().is_some());
                prop_assert!(!r.reason.is_empty());
            }
            _ => prop_assert!(r.best().is_none()),
        }
        if let Some(Ok(f)) = &r.fit {
            match f.status {
                FitStatus::NumericalFailure | FitStatus::InvalidInput(_) => {
                    prop_assert_eq!(f.chi2, f64::INFINITY);
                    prop_assert_eq!(f.probability, 0.0);
                }
                _ => {
                    prop_assert!(f.chi2.is_finite() && f.chi2 >= 0.0, "fit χ² {}", f.chi2);
                    prop_assert!((0.0..=1.0).contains(&f.probability));
                }
            }
            for m in f.composite_masses() {
                prop_assert!(m.is_finite(), "fit mass {}", m);
            }
            for o in f.objects() {
                prop_assert!(
                    o.e().is_finite() && o.px().is_finite(),
                    "fitted object {:?}",
                    o
                );
            }
        }
        if p.fits() && r.best().is_some() {
            prop_assert!(r.fit.is_some());
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 96, .. ProptestConfig::default() })]

    #[test]
    fn extreme_kinematics_always_give_a_status(k in kin(), fit in any::<bool>()) {
        let p = &pipelines()[usize::from(fit)];
        let e = build(&k, 0.0);
        let results = p.reconstruct(&e);
        check_results(p, &e, &results)?;
    }

    /// φ written as φ + 2π, or the whole event rotated about the beam,
    /// leaves every mass and so the best χ² unchanged (up to rounding).
    #[test]
    fn search_chi2_is_invariant_under_azimuthal_rotation(
        k in kin(),
        dphi in prop_oneof![Just(2.0 * PI), Just(-2.0 * PI), -PI..PI],
    ) {
        // Keep to finite, moderate kinematics: rounding at 10⁶ GeV or at
        // |η| = 15 (E ≈ pt·cosh η ≈ 10⁶·pt) would swamp the comparison.
        let k = Kin {
            jets: k.jets.into_iter().filter(|o| o.pt >= 1.0 && o.pt <= 1e3 && o.eta.abs() < 5.0).collect(),
            leptons: k.leptons.into_iter().filter(|l| l.2.pt >= 1.0 && l.2.pt <= 1e3 && l.2.eta.abs() < 5.0).collect(),
            fat_jets: Vec::new(),
            lepton_on_beam: false,
            ..k
        };
        let h = presets::get("ttbar-ljets").unwrap();
        let mut s = Searcher::new(&h, SearchConfig::default()).unwrap();
        let a = s.search(&build(&k, 0.0));
        let b = s.search(&build(&k, dphi));
        prop_assert_eq!(a.status, b.status);
        if let (Some(x), Some(y)) = (a.best(), b.best()) {
            let tol = 1e-6 * (1.0 + x.chi2().abs());
            prop_assert!((x.chi2() - y.chi2()).abs() <= tol, "χ² {} vs {} after Δφ = {}", x.chi2(), y.chi2(), dphi);
        }
    }

    /// Identical jets: every assignment with the same lepton and neutrino
    /// root has the same masses, so every ranked χ² equals the best one.
    /// Under the default hard b-tag threshold identical jets are all tagged
    /// or all untagged, while `ttbar-ljets` needs both kinds, so no
    /// assignment would exist; the search runs without b-tags (`Ignore`) or
    /// score-weighted (identical scores give each role the same term). With
    /// n ≥ 4 jets there are at least 4!/2 = 12 tied jet assignments per
    /// lepton and root, so the search must find and rank 12 ties (every
    /// placement of every jet in every role of the best lepton and root). The lepton is kept moderate (hostile leptons are covered
    /// above): here the jets are the point, and the neutrino must solve.
    #[test]
    fn identical_jets_give_equal_chi2(
        j in obj(),
        n in 4usize..9,
        lep in (20.0..400.0f64, -2.5..2.5f64, phi()),
        weighted in any::<bool>(),
    ) {
        let lep = Obj { pt: lep.0, eta: lep.1, phi: lep.2, m: quarry::pdg::MUON_MASS, btag: 0.0 };
        let k = Kin {
            jets: vec![Obj { pt: j.pt.clamp(1.0, 1e3), ..j }; n],
            leptons: vec![(true, -1, lep)],
            fat_jets: Vec::new(),
            lepton_on_beam: false,
            identical_jets: true,
            met: (35.0, -20.0),
        };
        let e = build(&k, 0.0);
        let h = presets::get("ttbar-ljets").unwrap();
        let cfg = SearchConfig {
            btag: if weighted { BtagPolicy::weighted_default() } else { BtagPolicy::Ignore },
            k_best: 12,
            ..SearchConfig::default()
        };
        let mut s = Searcher::new(&h, cfg).unwrap();
        let out = s.search(&e);
        // The assertion below is reached: an assignment exists and twelve are ranked.
        prop_assert_eq!(out.status, SearchStatus::Found);
        prop_assert_eq!(out.ranked.len(), cfg.k_best);
        let best = out.best().unwrap().chi2();
        prop_assert!(best.is_finite(), "best χ² {}", best);
        for a in &out.ranked {
            let tol = 1e-9 * (1.0 + best);
            prop_assert!((a.chi2() - best).abs() <= tol, "{} vs {}", a.chi2(), best);
        }
    }

    /// Raw hostile floats (NaN, ±∞, 1e308, negative energies) in events
    /// built in code: still one typed status per hypothesis; a non-finite
    /// momentum never reaches an output number.
    #[test]
    fn raw_non_finite_values_get_a_typed_status(
        vals in proptest::collection::vec(prop_oneof![
            Just(f64::NAN), Just(f64::INFINITY), Just(f64::NEG_INFINITY), Just(1e308),
            Just(-1e6), Just(0.0), -500.0..500.0f64], 4 * 7),
        met in (prop_oneof![Just(f64::NAN), Just(1e308), -100.0..100.0f64], -100.0..100.0f64),
        fit in any::<bool>(),
    ) {
        let p = &pipelines()[usize::from(fit)];
        let mut e = Event::new(7);
        for (i, c) in vals.chunks(4).enumerate().take(6) {
            e.jets.push(Jet::new(FourMomentum::new(c[0], c[1], c[2], c[3]), 0.5).with_index(i as u32));
        }
        let c = &vals[24..28];
        e.muons.push(Lepton { p4: FourMomentum::new(c[0], c[1], c[2], c[3]), flavour: Flavour::Muon,
            charge: -1, truth: None, index: 0 });
        e.met = Met::new(met.0, met.1);
        let results = p.reconstruct(&e);
        check_results(p, &e, &results)?;
    }
}

/// A W → ℓν fit whose lepton and MET take hostile values: the result is
/// converged with finite numbers, or a failure status with χ² = +∞ — never
/// a NaN.
#[test]
fn fit_of_hostile_lepton_and_met_is_finite_or_failed() {
    let leptons = [
        FourMomentum::from_pt_eta_phi_m(40.0, 0.3, 0.0, 0.0),
        FourMomentum::from_pt_eta_phi_m(1e6, 12.0, 7.0, 0.0),
        FourMomentum::from_pt_eta_phi_m(0.0, 0.0, 0.0, 0.0),
        FourMomentum::new(0.0, 0.0, 50.0, 50.0), // along the beam
        FourMomentum::new(f64::NAN, 0.0, 1.0, 2.0),
        FourMomentum::new(1.0, 0.0, 0.0, -5.0),
    ];
    let mets = [[-35.0, 5.0], [0.0, 0.0], [1e6, -1e6], [f64::INFINITY, 0.0]];
    let mut fitter = KinematicFitter::default();
    let mut runs = 0;
    let mut refused = 0;
    for (li, lep) in leptons.into_iter().enumerate() {
        for (mi, met) in mets.into_iter().enumerate() {
            let mut input = FitInput::new();
            // Refusing hostile input with a typed error is a valid outcome.
            let Ok(l) = input.add_object(Measured::muon(lep)) else {
                refused += 1;
                continue;
            };
            if input
                .set_neutrino(NeutrinoStart {
                    p3: [met[0], met[1], 0.0],
                    met,
                    met_cov: [100.0, 0.0, 100.0],
                })
                .is_err()
            {
                refused += 1;
                continue;
            }
            let w = input.add_composite(Composite::of(&[l], true)).unwrap();
            input.add_constraint(Constraint::w_mass(w)).unwrap();
            let r = fitter.fit(&input);
            runs += 1;
            match r.status {
                FitStatus::NumericalFailure | FitStatus::InvalidInput(_) => {
                    assert_eq!(r.chi2, f64::INFINITY, "{lep:?} {met:?}");
                    assert_eq!(r.probability, 0.0);
                }
                _ => {
                    assert!(
                        r.chi2.is_finite() && r.chi2 >= 0.0,
                        "{lep:?} {met:?}: {r:?}"
                    );
                    for m in r.composite_masses() {
                        assert!(m.is_finite());
                    }
                }
            }
            let finite_input =
                lep.e().is_finite() && lep.px().is_finite() && met.iter().all(|x| x.is_finite());
            if !finite_input {
                assert!(
                    !matches!(r.status, FitStatus::Converged),
                    "non-finite input {lep:?} {met:?} reported as converged"
                );
            }
            if (li, mi) == (0, 0) {
                // The well-formed case: ndf = 0, the W mass is met exactly.
                assert!(r.converged() && r.chi2 < 1e-6, "{r:?}");
                assert!((r.composite_masses()[0] - quarry::pdg::W_MASS).abs() < 0.01);
            }
        }
    }
    assert_eq!(runs + refused, leptons.len() * mets.len());
    assert!(runs >= 1 && refused >= 1, "runs {runs}, refused {refused}");
}

/// A non-finite event weight (possible only for events built in code: the
/// reader rejects it) never reaches a result as if it were a number: the
/// event is `bad_input` for every hypothesis.
#[test]
fn non_finite_weight_is_bad_input() {
    let p = &pipelines()[0];
    for w in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
        let mut e = Event::new(3);
        for (i, pt) in [90.0, 70.0, 55.0, 60.0].into_iter().enumerate() {
            e.jets.push(
                Jet::new(
                    FourMomentum::from_pt_eta_phi_m(pt, 0.1 * i as f64, i as f64, 5.0),
                    0.5,
                )
                .with_index(i as u32),
            );
        }
        e.weight = w;
        for r in p.reconstruct(&e) {
            assert_eq!(r.status, Status::BadInput, "weight {w}: {:?}", r.status);
            assert!(!r.reason.is_empty());
        }
    }
}

/// Finite components whose transverse momentum overflows (px = py =
/// f64::MAX, found by the event_direct fuzz target) must not give HT = +∞:
/// the event is `bad_input`.
#[test]
fn finite_momenta_that_overflow_pt_are_bad_input() {
    let p = &pipelines()[0];
    let mut e = Event::new(11);
    e.electrons.push(Lepton {
        p4: FourMomentum::new(f64::MAX, f64::MAX, 3533.9, 3533.1),
        flavour: Flavour::Electron,
        charge: 1,
        truth: None,
        index: 0,
    });
    e.electrons.push(Lepton {
        p4: FourMomentum::ZERO,
        flavour: Flavour::Electron,
        charge: 0,
        truth: None,
        index: 1,
    });
    for r in p.reconstruct(&e) {
        assert_eq!(r.status, Status::BadInput, "{:?}", r.vars);
        assert_eq!(r.reason, "an input momentum is not finite");
    }
}

/// Charges outside −1, 0, +1 (possible only in code-built events; found by
/// the event_direct fuzz target: 125 × −109 overflowed `i8`) never panic
/// and never form an opposite-sign pair.
#[test]
fn out_of_range_charges_do_not_panic() {
    let p = &pipelines()[0];
    for (qa, qb) in [(125i8, -109i8), (i8::MIN, i8::MIN), (127, -1), (2, -2)] {
        let mut e = Event::new(12);
        for (q, px) in [(qa, 45.0), (qb, -45.0)] {
            e.muons.push(Lepton {
                p4: FourMomentum::new(px, 0.0, 0.0, 45.0),
                flavour: Flavour::Muon,
                charge: q,
                truth: None,
                index: e.muons.len() as u32,
            });
        }
        for r in p.reconstruct(&e) {
            let v = r.vars.expect("finite momenta give variables");
            // A Z-like pair (m = 90 GeV) does not count unless the charges
            // are exactly +1 and −1.
            assert_eq!(v.mll_z, None, "charges {qa}, {qb}");
        }
    }
}

/// i8::MIN as a lepton charge (found by the event_direct fuzz target:
/// negating it overflowed in the lepton-pair rule of `tz-3l`) gives a status,
/// not a panic.
#[test]
fn most_negative_charge_does_not_panic() {
    let p = &pipelines()[0];
    let mut e = Event::new(13);
    for (i, q) in [i8::MIN, -109, 1].into_iter().enumerate() {
        e.muons.push(Lepton {
            p4: FourMomentum::from_pt_eta_phi_m(40.0 + i as f64, 0.3 * i as f64, i as f64, 0.1),
            flavour: Flavour::Muon,
            charge: q,
            truth: None,
            index: i as u32,
        });
    }
    for i in 0..4 {
        e.jets.push(
            Jet::new(
                FourMomentum::from_pt_eta_phi_m(60.0, 0.2 * i as f64, -1.0 + i as f64, 5.0),
                0.9,
            )
            .with_index(i),
        );
    }
    let results = p.reconstruct(&e);
    assert_eq!(results.len(), p.hypotheses().len());
    for r in results {
        assert!(Status::ALL.contains(&r.status));
    }
}
