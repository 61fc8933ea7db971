//! Events built from exact partons (no smearing): the right assignment has
//! χ² ≈ 0, is ranked first and is truth-matched.
//!
//! Kinematics: isotropic two-body decays in the parent's rest frame with the
//! momentum p* = √λ(M², m₁², m₂²) / 2M (PDG Review of Particle Physics,
//! "Kinematics" section), boosted to the lab with quarry-lorentz. Masses are
//! quarry-pdg's, which its own tests check against the PDG table. MET is the
//! neutrino's transverse momentum, so one root of the W-mass solver is the
//! true neutrino.

use quarry_assign::{presets, BtagPolicy, Hypothesis, SearchConfig, SearchStatus, Searcher};
use quarry_event::{Event, FatJet, Flavour, Jet, Lepton, Met, Truth};
use quarry_lorentz::FourMomentum;
use quarry_pdg::{BOTTOM_MASS, ELECTRON_MASS, HIGGS_MASS, MUON_MASS, TOP_MASS, W_MASS, Z_MASS};
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64;

fn decay(rng: &mut Pcg64, parent: FourMomentum, m1: f64, m2: f64) -> (FourMomentum, FourMomentum) {
    let m = parent.m();
    let lam = (m * m - (m1 + m2).powi(2)) * (m * m - (m1 - m2).powi(2));
    let p = lam.max(0.0).sqrt() / (2.0 * m);
    let cos: f64 = rng.random_range(-1.0..1.0);
    let sin = (1.0 - cos * cos).sqrt();
    let phi: f64 = rng.random_range(-std::f64::consts::PI..std::f64::consts::PI);
    let (x, y, z) = (p * sin * phi.cos(), p * sin * phi.sin(), p * cos);
    let a = FourMomentum::new(x, y, z, (p * p + m1 * m1).sqrt());
    let b = FourMomentum::new(-x, -y, -z, (p * p + m2 * m2).sqrt());
    (a.from_rest_frame_of(&parent), b.from_rest_frame_of(&parent))
}

fn parent(rng: &mut Pcg64, mass: f64) -> FourMomentum {
    FourMomentum::from_pt_eta_phi_m(
        rng.random_range(0.0..250.0),
        rng.random_range(-1.0..1.0),
        rng.random_range(-3.0..3.0),
        mass,
    )
}

struct Builder {
    e: Event,
}

impl Builder {
    fn new(id: u64) -> Self {
        Builder { e: Event::new(id) }
    }
    fn jet(&mut self, p4: FourMomentum, btag: f64, label: &str) -> &mut Self {
        let i = self.e.jets.len() as u32;
        self.e.jets.push(
            Jet::new(p4, btag)
                .with_truth(Truth::new(label).unwrap())
                .with_index(i),
        );
        self
    }
    fn lepton(&mut self, p4: FourMomentum, flavour: Flavour, charge: i8, label: &str) -> &mut Self {
        let l = Lepton {
            p4,
            flavour,
            charge,
            truth: Truth::new(label).ok(),
            index: 0,
        };
        match flavour {
            Flavour::Electron => self.e.electrons.push(l),
            Flavour::Muon => self.e.muons.push(l),
        }
        self
    }
    fn nu(&mut self, p4: FourMomentum) -> &mut Self {
        self.e.met = Met::new(p4.px(), p4.py());
        self
    }
    fn isr(&mut self, rng: &mut Pcg64) -> &mut Self {
        let p = FourMomentum::from_pt_eta_phi_m(
            rng.random_range(25.0..60.0),
            rng.random_range(-2.5..2.5),
            rng.random_range(-3.0..3.0),
            0.0,
        );
        self.jet(p, 0.0, "isr")
    }
}

/// t → b W(→ q q̄′) with labels `<side>.b`, `<side>.W.q` (or with `t.` inserted).
fn hadronic_top(rng: &mut Pcg64, b: &mut Builder, top: FourMomentum, prefix: &str) {
    let (bq, w) = decay(rng, top, BOTTOM_MASS, W_MASS);
    let (q1, q2) = decay(rng, w, 0.0, 0.0);
    b.jet(bq, 1.0, &format!("{prefix}.b"))
        .jet(q1, 0.0, &format!("{prefix}.W.q"))
        .jet(q2, 0.0, &format!("{prefix}.W.q"));
}

/// t → b W(→ μ ν).
fn leptonic_top(rng: &mut Pcg64, b: &mut Builder, top: FourMomentum, prefix: &str) {
    let (bq, w) = decay(rng, top, BOTTOM_MASS, W_MASS);
    let (mu, nu) = decay(rng, w, MUON_MASS, 0.0);
    b.jet(bq, 1.0, &format!("{prefix}.b"))
        .lepton(mu, Flavour::Muon, 1, &format!("{prefix}.W.mu"))
        .nu(nu);
}

fn check(h: &Hypothesis, e: &Event, btag: BtagPolicy, masses: &[(&str, f64)]) {
    let cfg = SearchConfig {
        btag,
        ..SearchConfig::default()
    };
    let out = Searcher::new(h, cfg).unwrap().search(e);
    assert_eq!(
        out.status,
        SearchStatus::Found,
        "{} event {}",
        h.name(),
        e.id
    );
    let best = out.best().unwrap();
    let constraint_chi2 = best.chi2() - best.btag_chi2();
    assert!(
        constraint_chi2 < 1e-6,
        "{} event {}: χ² {}",
        h.name(),
        e.id,
        constraint_chi2
    );
    let m = h.truth_match(e, best).expect("event has truth");
    assert!(
        m.all(),
        "{} event {}: best assignment is not the true one: {:?}",
        h.name(),
        e.id,
        best.objects()
    );
    assert!(m.composites().iter().all(|&c| c));
    for &(name, mass) in masses {
        let c = h.composite_index(name).unwrap();
        assert!(
            (best.composite_mass(c) - mass).abs() < 1e-6 * mass,
            "{} {name}: {}",
            h.name(),
            best.composite_mass(c)
        );
    }
    if out.ranked.len() > 1 {
        assert!(out.ranked[1].chi2() >= best.chi2());
        // Another truth-matched assignment can only be the same objects with
        // the other neutrino root.
        let second = &out.ranked[1];
        if h.truth_match(e, second).unwrap().all() {
            for (r, role) in h.roles().iter().enumerate() {
                if !matches!(role.kind, quarry_assign::RoleKind::Neutrino { .. }) {
                    assert_eq!(
                        second.object(r),
                        best.object(r),
                        "{} event {}",
                        h.name(),
                        e.id
                    );
                }
            }
        }
    }
}

#[test]
fn ttbar_partons() {
    let h = presets::get("ttbar-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(1);
    for id in 0..20 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, TOP_MASS);
        hadronic_top(&mut rng, &mut b, par, "h");
        let par = parent(&mut rng, TOP_MASS);
        leptonic_top(&mut rng, &mut b, par, "l");
        b.isr(&mut rng);
        for policy in [
            BtagPolicy::default(),
            BtagPolicy::weighted_default(),
            BtagPolicy::Ignore,
        ] {
            check(
                &h,
                &b.e,
                policy,
                &[("W_had", W_MASS), ("t_had", TOP_MASS), ("t_lep", TOP_MASS)],
            );
        }
    }
}

#[test]
fn bwbw_partons() {
    let h = presets::get("bwbw-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(2);
    for id in 0..20 {
        let mut b = Builder::new(id);
        // Q → b W: the same label layout as a top.
        let par = parent(&mut rng, 1100.0);
        hadronic_top(&mut rng, &mut b, par, "h");
        let par = parent(&mut rng, 1100.0);
        leptonic_top(&mut rng, &mut b, par, "l");
        b.isr(&mut rng);
        check(
            &h,
            &b.e,
            BtagPolicy::default(),
            &[("Q_had", 1100.0), ("Q_lep", 1100.0)],
        );
    }
}

fn twtw_event(rng: &mut Pcg64, id: u64, boosted: bool) -> Event {
    let mut b = Builder::new(id);
    let par = parent(rng, 1400.0);
    let (th, w2) = decay(rng, par, TOP_MASS, W_MASS);
    hadronic_top(rng, &mut b, th, "h.t");
    if boosted {
        b.e.fat_jets.push(FatJet {
            p4: w2,
            truth: Truth::new("h.W").ok(),
            index: 0,
        });
    } else {
        let (q3, q4) = decay(rng, w2, 0.0, 0.0);
        b.jet(q3, 0.0, "h.W.q").jet(q4, 0.0, "h.W.q");
    }
    let par = parent(rng, 1400.0);
    let (tl, w3) = decay(rng, par, TOP_MASS, W_MASS);
    leptonic_top(rng, &mut b, tl, "l.t");
    let (q5, q6) = decay(rng, w3, 0.0, 0.0);
    b.jet(q5, 0.0, "l.W.q").jet(q6, 0.0, "l.W.q");
    b.isr(rng);
    b.e
}

/// H → b b̄ with labels `<prefix>.b`.
fn higgs_to_bb(rng: &mut Pcg64, b: &mut Builder, h: FourMomentum, prefix: &str) {
    let (b1, b2) = decay(rng, h, BOTTOM_MASS, BOTTOM_MASS);
    b.jet(b1, 1.0, &format!("{prefix}.b"))
        .jet(b2, 1.0, &format!("{prefix}.b"));
}

#[test]
fn bwth_partons() {
    let h = presets::get("bwth-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(21);
    for id in 0..10 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1200.0);
        let (t, higgs) = decay(&mut rng, par, TOP_MASS, HIGGS_MASS);
        hadronic_top(&mut rng, &mut b, t, "h.t");
        higgs_to_bb(&mut rng, &mut b, higgs, "h.H");
        // Q → b W(→ μ ν): the same label layout as a leptonic top.
        let par = parent(&mut rng, 1200.0);
        leptonic_top(&mut rng, &mut b, par, "l");
        b.isr(&mut rng);
        for policy in [BtagPolicy::default(), BtagPolicy::weighted_default()] {
            check(
                &h,
                &b.e,
                policy,
                &[
                    ("Q_had", 1200.0),
                    ("Q_lep", 1200.0),
                    ("H_had", HIGGS_MASS),
                    ("t_had", TOP_MASS),
                ],
            );
        }
    }
}

#[test]
fn thth_partons() {
    let h = presets::get("thth-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(22);
    for id in 0..10 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1200.0);
        let (t, higgs) = decay(&mut rng, par, TOP_MASS, HIGGS_MASS);
        hadronic_top(&mut rng, &mut b, t, "h.t");
        higgs_to_bb(&mut rng, &mut b, higgs, "h.H");
        let par = parent(&mut rng, 1200.0);
        let (t, higgs) = decay(&mut rng, par, TOP_MASS, HIGGS_MASS);
        leptonic_top(&mut rng, &mut b, t, "l.t");
        higgs_to_bb(&mut rng, &mut b, higgs, "l.H");
        b.isr(&mut rng);
        check(
            &h,
            &b.e,
            BtagPolicy::default(),
            &[
                ("Q_had", 1200.0),
                ("Q_lep", 1200.0),
                ("H_had", HIGGS_MASS),
                ("H_lep", HIGGS_MASS),
                ("t_lep", TOP_MASS),
            ],
        );
    }
}

/// Z → q q̄ (light quarks, b-tag 0) with labels `<prefix>.q`.
fn z_to_quarks(rng: &mut Pcg64, b: &mut Builder, z: FourMomentum, prefix: &str) {
    let (q1, q2) = decay(rng, z, 0.0, 0.0);
    b.jet(q1, 0.0, &format!("{prefix}.q"))
        .jet(q2, 0.0, &format!("{prefix}.q"));
}

#[test]
fn twbh_partons() {
    let h = presets::get("twbh-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(23);
    for id in 0..10 {
        let mut b = Builder::new(id);
        // B → b H(→ b b̄) on the hadronic side.
        let par = parent(&mut rng, 1300.0);
        let (bq, higgs) = decay(&mut rng, par, BOTTOM_MASS, HIGGS_MASS);
        b.jet(bq, 1.0, "h.b");
        higgs_to_bb(&mut rng, &mut b, higgs, "h.H");
        // B → t(→ b μ ν) W(→ q q̄′) on the leptonic side.
        let par = parent(&mut rng, 1300.0);
        let (t, w) = decay(&mut rng, par, TOP_MASS, W_MASS);
        leptonic_top(&mut rng, &mut b, t, "l.t");
        let (q1, q2) = decay(&mut rng, w, 0.0, 0.0);
        b.jet(q1, 0.0, "l.W.q").jet(q2, 0.0, "l.W.q");
        b.isr(&mut rng);
        for policy in [BtagPolicy::default(), BtagPolicy::weighted_default()] {
            check(
                &h,
                &b.e,
                policy,
                &[
                    ("Q_had", 1300.0),
                    ("Q_lep", 1300.0),
                    ("H_had", HIGGS_MASS),
                    ("W_had", W_MASS),
                    ("t_lep", TOP_MASS),
                ],
            );
        }
    }
}

#[test]
fn tzth_partons() {
    let h = presets::get("tzth-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(24);
    for id in 0..10 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1200.0);
        let (t, z) = decay(&mut rng, par, TOP_MASS, Z_MASS);
        hadronic_top(&mut rng, &mut b, t, "h.t");
        z_to_quarks(&mut rng, &mut b, z, "h.Z");
        let par = parent(&mut rng, 1200.0);
        let (t, higgs) = decay(&mut rng, par, TOP_MASS, HIGGS_MASS);
        leptonic_top(&mut rng, &mut b, t, "l.t");
        higgs_to_bb(&mut rng, &mut b, higgs, "l.H");
        b.isr(&mut rng);
        check(
            &h,
            &b.e,
            BtagPolicy::default(),
            &[
                ("Q_had", 1200.0),
                ("Q_lep", 1200.0),
                ("Z_had", Z_MASS),
                ("H_lep", HIGGS_MASS),
                ("t_had", TOP_MASS),
                ("t_lep", TOP_MASS),
            ],
        );
    }
}

#[test]
fn thth_boosted_partons() {
    let h = presets::get("thth-ljets-boosted").unwrap();
    let mut rng = Pcg64::seed_from_u64(25);
    let mut checked = 0;
    for id in 0..20 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1500.0);
        let (t, higgs) = decay(&mut rng, par, TOP_MASS, HIGGS_MASS);
        hadronic_top(&mut rng, &mut b, t, "h.t");
        // The hadronic side's H is one large-radius jet.
        b.e.fat_jets.push(FatJet {
            p4: higgs,
            truth: Truth::new("h.H").ok(),
            index: 0,
        });
        let par = parent(&mut rng, 1500.0);
        let (t, higgs) = decay(&mut rng, par, TOP_MASS, HIGGS_MASS);
        leptonic_top(&mut rng, &mut b, t, "l.t");
        higgs_to_bb(&mut rng, &mut b, higgs, "l.H");
        b.isr(&mut rng);
        let e = b.e;
        // The true assignment is only allowed if no jet it uses overlaps the
        // large jet; skip the events where one does.
        let fat = e.fat_jets[0].p4;
        if e.jets
            .iter()
            .filter(|j| j.truth.unwrap().as_str() != "isr")
            .any(|j| j.p4.delta_r(&fat) < 1.0)
        {
            continue;
        }
        check(
            &h,
            &e,
            BtagPolicy::default(),
            &[
                ("Q_had", 1500.0),
                ("Q_lep", 1500.0),
                ("H_had", HIGGS_MASS),
                ("H_lep", HIGGS_MASS),
            ],
        );
        let best = Searcher::new(&h, SearchConfig::default())
            .unwrap()
            .search(&e)
            .ranked[0];
        let whole = h.role_index("H_h_large").unwrap();
        assert!(matches!(
            best.object(whole),
            quarry_assign::ObjectRef::LargeJet { pos: 0, .. }
        ));
        assert_eq!(
            best.leaves_of(h.composite_index("H_had").unwrap()).count(),
            1
        );
        checked += 1;
    }
    assert!(checked >= 8, "only {checked} events checked");
}

#[test]
fn twtw_partons() {
    let h = presets::get("twtw-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(3);
    for id in 0..10 {
        let e = twtw_event(&mut rng, id, false);
        check(
            &h,
            &e,
            BtagPolicy::default(),
            &[("T_had", 1400.0), ("T_lep", 1400.0), ("t_had", TOP_MASS)],
        );
    }
}

#[test]
fn twtw_boosted_partons() {
    let h = presets::get("twtw-ljets-boosted").unwrap();
    let mut rng = Pcg64::seed_from_u64(4);
    let mut checked = 0;
    for id in 0..20 {
        let e = twtw_event(&mut rng, id, true);
        // The true assignment is only allowed if no jet it uses overlaps the
        // large jet; skip the rare events where one does.
        let fat = e.fat_jets[0].p4;
        if e.jets
            .iter()
            .filter(|j| j.truth.unwrap().as_str() != "isr")
            .any(|j| j.p4.delta_r(&fat) < 1.0)
        {
            continue;
        }
        check(
            &h,
            &e,
            BtagPolicy::default(),
            &[("T_had", 1400.0), ("W_h", W_MASS)],
        );
        let best = Searcher::new(&h, SearchConfig::default())
            .unwrap()
            .search(&e)
            .ranked[0];
        let whole = h.role_index("W_h_large").unwrap();
        assert!(matches!(
            best.object(whole),
            quarry_assign::ObjectRef::LargeJet { pos: 0, .. }
        ));
        assert_eq!(best.leaves_of(h.composite_index("W_h").unwrap()).count(), 1);
        checked += 1;
    }
    assert!(checked >= 8, "only {checked} events checked");
}

#[test]
fn tgtg_partons() {
    let h = presets::get("tgtg-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(5);
    for id in 0..15 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1500.0);
        let (th, gh) = decay(&mut rng, par, TOP_MASS, 0.0);
        hadronic_top(&mut rng, &mut b, th, "h.t");
        b.jet(gh, 0.0, "h.g");
        let par = parent(&mut rng, 1500.0);
        let (tl, gl) = decay(&mut rng, par, TOP_MASS, 0.0);
        leptonic_top(&mut rng, &mut b, tl, "l.t");
        b.jet(gl, 0.0, "l.g");
        b.isr(&mut rng);
        check(
            &h,
            &b.e,
            BtagPolicy::default(),
            &[("Tx_had", 1500.0), ("Tx_lep", 1500.0)],
        );
    }
}

#[test]
fn tz_partons() {
    let h = presets::get("tz-3l").unwrap();
    let mut rng = Pcg64::seed_from_u64(6);
    for id in 0..15 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1300.0);
        let (t, z) = decay(&mut rng, par, TOP_MASS, Z_MASS);
        let (bq, w) = decay(&mut rng, t, BOTTOM_MASS, W_MASS);
        let (e, nu) = decay(&mut rng, w, ELECTRON_MASS, 0.0);
        let (m1, m2) = decay(&mut rng, z, MUON_MASS, MUON_MASS);
        b.jet(bq, 1.0, "a.t.b")
            .lepton(e, Flavour::Electron, 1, "a.t.W.e")
            .nu(nu)
            .lepton(m1, Flavour::Muon, 1, "a.Z.mu")
            .lepton(m2, Flavour::Muon, -1, "a.Z.mu");
        // The other heavy quark decays hadronically (bW).
        let par = parent(&mut rng, 1300.0);
        hadronic_top(&mut rng, &mut b, par, "b");
        check(
            &h,
            &b.e,
            BtagPolicy::default(),
            &[("Z", Z_MASS), ("T", 1300.0)],
        );
    }
}

#[test]
fn bz_partons() {
    let h = presets::get("bz-2l").unwrap();
    let mut rng = Pcg64::seed_from_u64(7);
    for id in 0..15 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1000.0);
        let (bq, z) = decay(&mut rng, par, BOTTOM_MASS, Z_MASS);
        let (e1, e2) = decay(&mut rng, z, ELECTRON_MASS, ELECTRON_MASS);
        b.jet(bq, 1.0, "a.b")
            .lepton(e1, Flavour::Electron, -1, "a.Z.e")
            .lepton(e2, Flavour::Electron, 1, "a.Z.e");
        b.isr(&mut rng).isr(&mut rng);
        check(
            &h,
            &b.e,
            BtagPolicy::default(),
            &[("Z", Z_MASS), ("B", 1000.0)],
        );
    }
}

#[test]
fn tw_had5_partons() {
    let h = presets::get("tw-had5").unwrap();
    let mut rng = Pcg64::seed_from_u64(8);
    for id in 0..15 {
        let mut b = Builder::new(id);
        let par = parent(&mut rng, 1300.0);
        let (t, w) = decay(&mut rng, par, TOP_MASS, W_MASS);
        hadronic_top(&mut rng, &mut b, t, "a.t");
        let (q3, q4) = decay(&mut rng, w, 0.0, 0.0);
        b.jet(q3, 0.0, "a.W.q").jet(q4, 0.0, "a.W.q");
        b.isr(&mut rng);
        check(
            &h,
            &b.e,
            BtagPolicy::default(),
            &[("T", 1300.0), ("top", TOP_MASS)],
        );
    }
}

/// Truth matching: interchangeable jets match as a set; swapping the two b
/// labels breaks both tops but not the hadronic W; no labels → `None`.
#[test]
fn truth_match_rules() {
    let h = presets::get("ttbar-ljets").unwrap();
    let mut rng = Pcg64::seed_from_u64(9);
    let mut b = Builder::new(0);
    let par = parent(&mut rng, TOP_MASS);
    hadronic_top(&mut rng, &mut b, par, "h");
    let par = parent(&mut rng, TOP_MASS);
    leptonic_top(&mut rng, &mut b, par, "l");
    let e = b.e.clone();
    let best = Searcher::new(&h, SearchConfig::default())
        .unwrap()
        .search(&e)
        .ranked[0];
    assert!(h.truth_match(&e, &best).unwrap().all());
    // Swap the W-jet labels: still matched (set matching).
    let mut swapped = e.clone();
    let (a, c) = (swapped.jets[1].truth, swapped.jets[2].truth);
    swapped.jets[1].truth = c;
    swapped.jets[2].truth = a;
    assert!(h.truth_match(&swapped, &best).unwrap().all());
    // Swap the b labels: the tops fail, the hadronic W still matches.
    let mut wrong = e.clone();
    wrong.jets[0].truth = Truth::new("l.b").ok();
    wrong.jets[3].truth = Truth::new("h.b").ok();
    let m = h.truth_match(&wrong, &best).unwrap();
    assert!(!m.all());
    assert!(m.composite(h.composite_index("W_had").unwrap()));
    assert!(!m.composite(h.composite_index("t_had").unwrap()));
    assert!(!m.composite(h.composite_index("t_lep").unwrap()));
    assert!(m.composite(h.composite_index("W_lep").unwrap()));
    // No truth anywhere.
    let mut bare = e.clone();
    bare.jets.iter_mut().for_each(|j| j.truth = None);
    bare.muons.iter_mut().for_each(|l| l.truth = None);
    assert!(h.truth_match(&bare, &best).is_none());
}
