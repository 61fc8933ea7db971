//! Property tests over random kinematics.

use proptest::prelude::*;
use quarry_lorentz::{transverse_mass, FourMomentum};
use quarry_neutrino::{ComplexStrategy, SolutionCase, WMassSolver};
use quarry_pdg::{ELECTRON_MASS, MUON_MASS, TAU_MASS, W_MASS};

/// Lepton masses probed: massless, the three charged leptons (PDG values from
/// quarry_pdg) and an exaggerated 5 GeV to make the mass effect visible.
const MASSES: [f64; 5] = [0.0, ELECTRON_MASS, MUON_MASS, TAU_MASS, 5.0];

fn lepton() -> impl Strategy<Value = FourMomentum> {
    (
        1.0..500.0_f64,
        -4.0..4.0_f64,
        -3.2..3.2_f64,
        0..MASSES.len(),
    )
        .prop_map(|(pt, eta, phi, im)| FourMomentum::from_pt_eta_phi_m(pt, eta, phi, MASSES[im]))
}

fn met() -> impl Strategy<Value = (f64, f64)> {
    (0.0..500.0_f64, -3.2..3.2_f64).prop_map(|(r, phi)| (r * phi.cos(), r * phi.sin()))
}

fn rel(m: f64) -> f64 {
    (m - W_MASS).abs() / W_MASS
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(4000))]

    /// Every real root closes the W mass: m(ℓ + ν) = m_W within 1e-9 relative.
    #[test]
    fn real_roots_give_the_w_mass(l in lepton(), (mx, my) in met()) {
        let s = WMassSolver::default().solve(&l, mx, my).unwrap();
        if s.case() == SolutionCase::Real {
            prop_assert_eq!(s.len(), 2);
            for nu in s.as_slice() {
                prop_assert!(nu.p4.m2().abs() <= 1e-12 * nu.p4.e() * nu.p4.e(), "massless");
                prop_assert_eq!((nu.p4.px(), nu.p4.py()), (mx, my));
                let m = (l + nu.p4).m();
                prop_assert!(rel(m) <= 1e-9, "m(l+nu) = {m}");
            }
            let z = [s.as_slice()[0].p4.pz(), s.as_slice()[1].p4.pz()];
            prop_assert!(z[0].abs() <= z[1].abs(), "ascending |pz|: {z:?}");
            prop_assert_eq!(s.smaller_abs_pz(), s.as_slice()[0]);
        } else {
            prop_assert_eq!(s.len(), 1);
        }
    }

    /// Both complex strategies: AdjustMet closes the W mass (1e-6 relative)
    /// and reports how far it moved the MET; DropImaginary keeps the MET and
    /// lands above m_W (with this MET no pz reaches m_W).
    #[test]
    fn complex_strategies(l in lepton(), (mx, my) in met()) {
        let adjust = WMassSolver::default().solve(&l, mx, my).unwrap();
        let drop = WMassSolver { strategy: ComplexStrategy::DropImaginary, ..Default::default() }
            .solve(&l, mx, my)
            .unwrap();
        if adjust.case() == SolutionCase::Real {
            prop_assert_eq!(drop.case(), SolutionCase::Real);
        } else {
            prop_assert_eq!(adjust.case(), SolutionCase::AdjustedMet);
            prop_assert_eq!(drop.case(), SolutionCase::DroppedImaginary);
            let nu = adjust.smaller_abs_pz();
            let m = (l + nu.p4).m();
            prop_assert!(rel(m) <= 1e-6, "adjusted m(l+nu) = {m}");
            let moved = (nu.p4.px() - mx).hypot(nu.p4.py() - my);
            prop_assert!((moved - nu.met_shift).abs() <= 1e-9 * (1.0 + moved));
            prop_assert!(nu.met_shift > 0.0 && nu.met_shift.is_finite());
            let d = drop.smaller_abs_pz();
            prop_assert_eq!((d.p4.px(), d.p4.py()), (mx, my));
            prop_assert!((l + d.p4).m() > W_MASS * (1.0 - 1e-9));
        }
    }

    /// Known relation (common practice): for a massless lepton, real roots
    /// exist exactly when the transverse mass of (ℓ, MET) is ≤ m_W. Checked
    /// away from the boundary by a 1e-6 relative margin.
    #[test]
    fn massless_real_iff_transverse_mass_below_w(
        (pt, eta, phi) in (1.0..500.0_f64, -4.0..4.0_f64, -3.2..3.2_f64),
        (mx, my) in met(),
    ) {
        let l = FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 0.0);
        let nu_t = FourMomentum::new(mx, my, 0.0, mx.hypot(my));
        let mt = transverse_mass(&l, &nu_t);
        let s = WMassSolver::default().solve(&l, mx, my).unwrap();
        if mt < W_MASS * (1.0 - 1e-6) {
            prop_assert_eq!(s.case(), SolutionCase::Real, "mT = {}", mt);
        } else if mt > W_MASS * (1.0 + 1e-6) {
            prop_assert_eq!(s.case(), SolutionCase::AdjustedMet, "mT = {}", mt);
        }
    }
}

/// The relation above is exercised on both sides, not vacuously.
#[test]
fn transverse_mass_relation_sees_both_sides() {
    let l = FourMomentum::from_pt_eta_phi_m(40.0, 0.3, 0.0, 0.0);
    let solver = WMassSolver::default();
    // Back to back: mT = 2 sqrt(pt_l pt_nu); W_MASS²/(4·40) is the boundary MET.
    let boundary = W_MASS * W_MASS / 160.0;
    let below = solver.solve(&l, -boundary * (1.0 - 1e-6), 0.0).unwrap();
    let above = solver.solve(&l, -boundary * (1.0 + 1e-6), 0.0).unwrap();
    assert_eq!(below.case(), SolutionCase::Real);
    assert_eq!(above.case(), SolutionCase::AdjustedMet);
}
