//! Edge cases from the issue: each gives a typed result or error, never a
//! panic or NaN.

use quarry_lorentz::FourMomentum;
use quarry_neutrino::{
    ComplexStrategy, NeutrinoError, NeutrinoSolutions, SolutionCase, WMassSolver,
};
use quarry_pdg::{ELECTRON_MASS, MUON_MASS, W_MASS};

const STRATEGIES: [ComplexStrategy; 2] =
    [ComplexStrategy::DropImaginary, ComplexStrategy::AdjustMet];

fn solver(strategy: ComplexStrategy) -> WMassSolver {
    WMassSolver {
        strategy,
        ..Default::default()
    }
}

/// Every field of every solution is finite, the neutrino massless.
fn assert_finite(s: &NeutrinoSolutions) {
    assert!(!s.is_empty());
    for nu in s.as_slice() {
        assert!(nu.p4.is_finite() && nu.met_shift.is_finite(), "{nu:?}");
        assert!(
            nu.p4.m2().abs() <= 1e-12 * nu.p4.e() * nu.p4.e(),
            "massless: {nu:?}"
        );
    }
}

/// m(ℓ+ν) with the cancellation-free form m_ℓ² + 2(E_ℓ E_ν − p⃗_ℓ·p⃗_ν).
fn pair_mass(l: &FourMomentum, nu: &FourMomentum) -> f64 {
    (l.m2().max(0.0) + 2.0 * l.dot(nu)).sqrt()
}

#[test]
fn zero_met_gives_two_real_roots_along_the_beam() {
    for m in [0.0, MUON_MASS, 5.0] {
        let l = FourMomentum::from_pt_eta_phi_m(35.0, 0.8, -1.0, m);
        let s = WMassSolver::default().solve(&l, 0.0, 0.0).unwrap();
        assert_eq!(s.case(), SolutionCase::Real);
        assert_eq!(s.len(), 2);
        assert_finite(&s);
        for nu in s.as_slice() {
            assert_eq!(nu.p4.pt(), 0.0);
            assert!(nu.p4.pz() != 0.0);
            assert!(((l + nu.p4).m() - W_MASS).abs() <= 1e-9 * W_MASS);
        }
    }
}

#[test]
fn lepton_with_zero_pz_gives_symmetric_roots() {
    let l = FourMomentum::from_pt_eta_phi_m(45.0, 0.0, 0.3, MUON_MASS);
    assert_eq!(l.pz(), 0.0);
    let s = WMassSolver::default().solve(&l, -25.0, 10.0).unwrap();
    assert_eq!(s.case(), SolutionCase::Real);
    assert_finite(&s);
    let [a, b] = [s.as_slice()[0].p4.pz(), s.as_slice()[1].p4.pz()];
    assert!(a != 0.0 && (a + b).abs() <= 1e-12 * a.abs(), "{a} {b}");
    // Complex case with pz = 0: both strategies give pz = 0 (real part zero).
    for st in STRATEGIES {
        let s = solver(st).solve(&l, -200.0, 50.0).unwrap();
        assert_ne!(s.case(), SolutionCase::Real);
        assert_finite(&s);
        assert_eq!(s.smaller_abs_pz().p4.pz(), 0.0);
    }
}

#[test]
fn lepton_collinear_with_met() {
    let l = FourMomentum::from_pt_eta_phi_m(60.0, 1.1, 0.7, ELECTRON_MASS);
    let (c, s) = (0.7_f64.cos(), 0.7_f64.sin());
    // Parallel: transverse mass ≈ 0, always real, here a near-double root
    // structure with both roots finite.
    for r in [1.0, 60.0, 500.0] {
        let sol = WMassSolver::default().solve(&l, r * c, r * s).unwrap();
        assert_eq!(sol.case(), SolutionCase::Real);
        assert_finite(&sol);
        for nu in sol.as_slice() {
            assert!((pair_mass(&l, &nu.p4) - W_MASS).abs() <= 1e-9 * W_MASS);
        }
    }
    // Anti-parallel and hard: complex; both strategies finite, AdjustMet on shell
    // and moved along the lepton axis (the nearest point on the axis of symmetry).
    for st in STRATEGIES {
        let sol = solver(st).solve(&l, -300.0 * c, -300.0 * s).unwrap();
        assert_ne!(sol.case(), SolutionCase::Real);
        assert_finite(&sol);
        let nu = sol.smaller_abs_pz();
        if st == ComplexStrategy::AdjustMet {
            assert!((pair_mass(&l, &nu.p4) - W_MASS).abs() <= 1e-6 * W_MASS);
            assert!(
                (nu.p4.px() * s - nu.p4.py() * c).abs() <= 1e-9 * nu.p4.pt(),
                "stays on the axis"
            );
            assert!(nu.met_shift > 200.0);
        }
    }
}

#[test]
fn very_large_values() {
    // 1e6 GeV lepton and MET: finite, on shell to 1e-6 relative.
    let l = FourMomentum::from_pt_eta_phi_m(1.0e6, 1.5, 0.2, MUON_MASS);
    for (mx, my) in [
        (1.0e6 * 0.2_f64.cos(), 1.0e6 * 0.2_f64.sin()),
        (-1.0e6, 3.0e5),
        (0.0, 0.0),
    ] {
        for st in STRATEGIES {
            let s = solver(st).solve(&l, mx, my).unwrap();
            assert_finite(&s);
            if s.case() != SolutionCase::DroppedImaginary {
                for nu in s.as_slice() {
                    let m = pair_mass(&l, &nu.p4);
                    assert!(
                        (m - W_MASS).abs() <= 1e-6 * W_MASS,
                        "{st:?} {:?}: m = {m}",
                        s.case()
                    );
                }
            }
        }
    }
    // Far beyond any collider, an overflowing input is a typed error.
    let huge = FourMomentum::new(1.0e200, 0.0, 1.0e200, 2.0e200);
    assert_eq!(
        WMassSolver::default().solve(&huge, 1.0e200, 0.0),
        Err(NeutrinoError::Overflow)
    );
    let big_met = FourMomentum::from_pt_eta_phi_m(40.0, 0.0, 0.0, 0.0);
    for st in STRATEGIES {
        assert_eq!(
            solver(st).solve(&big_met, 1.0e300, 1.0e300),
            Err(NeutrinoError::Overflow)
        );
    }
}

#[test]
fn non_finite_inputs_are_rejected() {
    let ok = FourMomentum::from_pt_eta_phi_m(40.0, 0.5, 0.0, MUON_MASS);
    let bad = [f64::NAN, f64::INFINITY, f64::NEG_INFINITY];
    let s = WMassSolver::default();
    for b in bad {
        for i in 0..4 {
            let mut c = [ok.px(), ok.py(), ok.pz(), ok.e()];
            c[i] = b;
            let l = FourMomentum::new(c[0], c[1], c[2], c[3]);
            assert_eq!(s.solve(&l, 10.0, 10.0), Err(NeutrinoError::NonFiniteInput));
        }
        assert_eq!(s.solve(&ok, b, 10.0), Err(NeutrinoError::NonFiniteInput));
        assert_eq!(s.solve(&ok, 10.0, b), Err(NeutrinoError::NonFiniteInput));
        let w = WMassSolver {
            w_mass: b,
            ..Default::default()
        };
        assert_eq!(w.solve(&ok, 10.0, 10.0), Err(NeutrinoError::NonFiniteInput));
    }
}

#[test]
fn unphysical_inputs_are_typed_errors() {
    let s = WMassSolver::default();
    // Space-like lepton (E < |p|) and non-positive energy.
    let spacelike = FourMomentum::new(30.0, 0.0, 0.0, 20.0);
    assert_eq!(
        s.solve(&spacelike, 1.0, 1.0),
        Err(NeutrinoError::UnphysicalLepton)
    );
    let negative = FourMomentum::new(0.0, 0.0, 0.0, -1.0);
    assert_eq!(
        s.solve(&negative, 1.0, 1.0),
        Err(NeutrinoError::UnphysicalLepton)
    );
    assert_eq!(
        s.solve(&FourMomentum::ZERO, 1.0, 1.0),
        Err(NeutrinoError::UnphysicalLepton)
    );
    // Massless lepton along the beam: no transverse mass.
    let beam = FourMomentum::new(0.0, 0.0, 50.0, 50.0);
    assert_eq!(
        s.solve(&beam, 1.0, 1.0),
        Err(NeutrinoError::LeptonAlongBeam)
    );
    // W mass not above the lepton mass, or not positive.
    let heavy = FourMomentum::from_pt_eta_phi_m(20.0, 0.0, 0.0, 90.0);
    assert_eq!(
        s.solve(&heavy, 1.0, 1.0),
        Err(NeutrinoError::WMassNotAboveLeptonMass)
    );
    let l = FourMomentum::from_pt_eta_phi_m(20.0, 0.0, 0.0, 0.0);
    for w_mass in [0.0, -80.0] {
        let w = WMassSolver {
            w_mass,
            ..Default::default()
        };
        assert_eq!(
            w.solve(&l, 1.0, 1.0),
            Err(NeutrinoError::WMassNotAboveLeptonMass)
        );
    }
    // Errors have readable messages.
    assert!(NeutrinoError::LeptonAlongBeam.to_string().contains("beam"));
}

#[test]
fn massive_lepton_without_pt() {
    // A muon with pT = 0 still has transverse mass m_μ: finite roots. The
    // zero-discriminant curve is then a circle of radius k / m_μ, so the
    // adjusted MET is the measured one scaled onto that circle.
    let mu = FourMomentum::new(0.0, 0.0, 30.0, (900.0 + MUON_MASS * MUON_MASS).sqrt());
    let s = WMassSolver::default().solve(&mu, 20.0, -5.0).unwrap();
    assert_eq!(s.case(), SolutionCase::Real);
    assert_finite(&s);
    let k = 0.5 * (W_MASS * W_MASS - MUON_MASS * MUON_MASS);
    let radius = k / MUON_MASS;
    let (mx, my) = (3.0 * radius, 4.0 * radius);
    let adj = WMassSolver::default()
        .solve(&mu, mx, my)
        .unwrap()
        .smaller_abs_pz();
    assert_eq!(adj.case, SolutionCase::AdjustedMet);
    assert!(
        (adj.met_shift - 4.0 * radius).abs() <= 1e-9 * radius,
        "{}",
        adj.met_shift
    );
    assert!((adj.p4.px() - 0.6 * radius).abs() <= 1e-9 * radius);
    assert!((adj.p4.py() - 0.8 * radius).abs() <= 1e-9 * radius);
}

#[test]
fn massless_back_to_back_adjustment_is_analytic() {
    // Massless lepton along +x, MET along −x: the boundary m_T = m_W on the
    // −x axis is at |v| = m_W² / (4 pT_l) (m_T² = 2·pT_l·|v|·2), so the shift
    // is |MET| − m_W²/(4 pT_l) and pz is the double root μ pz_l / pT_l² with
    // μ = m_W²/2 − pT_l |v|.
    let (pt, eta) = (50.0, 0.4);
    let l = FourMomentum::from_pt_eta_phi_m(pt, eta, 0.0, 0.0);
    let nu = WMassSolver::default()
        .solve(&l, -150.0, 0.0)
        .unwrap()
        .smaller_abs_pz();
    let v = W_MASS * W_MASS / (4.0 * pt);
    assert!(
        (nu.met_shift - (150.0 - v)).abs() <= 1e-9 * 150.0,
        "{}",
        nu.met_shift
    );
    assert!((nu.p4.px() + v).abs() <= 1e-9 * v && nu.p4.py().abs() <= 1e-9 * v);
    let mu = 0.5 * W_MASS * W_MASS - pt * v;
    let pz = mu * l.pz() / (pt * pt);
    assert!(
        (nu.p4.pz() - pz).abs() <= 1e-9 * pz.abs(),
        "{} vs {pz}",
        nu.p4.pz()
    );
}

#[test]
fn default_solver_uses_pdg_w_mass_and_adjust_met() {
    let d = WMassSolver::default();
    assert_eq!(d.w_mass, W_MASS);
    assert_eq!(d.strategy, ComplexStrategy::AdjustMet);
}
