//! Property tests of the dilepton solver over random kinematics.

use proptest::prelude::*;
use quarry_lorentz::FourMomentum;
use quarry_neutrino::dilepton::{real_roots, DileptonEvent, DileptonMasses, DileptonSolver};

fn object(pt: (f64, f64), mass: f64) -> impl Strategy<Value = FourMomentum> {
    (pt.0..pt.1, -3.0..3.0_f64, -3.2..3.2_f64)
        .prop_map(move |(pt, eta, phi)| FourMomentum::from_pt_eta_phi_m(pt, eta, phi, mass))
}

/// Random visible objects and neutrinos; the masses and the MET are taken
/// from their sums, so the true neutrinos solve the equations exactly.
fn exact_configuration() -> impl Strategy<Value = (DileptonEvent, DileptonSolver, [FourMomentum; 2])>
{
    (
        object((10.0, 400.0), quarry_pdg::MUON_MASS),
        object((10.0, 400.0), 0.0),
        object((20.0, 600.0), quarry_pdg::BOTTOM_MASS),
        object((20.0, 600.0), quarry_pdg::BOTTOM_MASS),
        object((1.0, 500.0), 0.0),
        object((1.0, 500.0), 0.0),
    )
        .prop_map(|(la, lb, ba, bb, na, nb)| {
            let solver = DileptonSolver {
                masses: DileptonMasses {
                    w_a: (la + na).m(),
                    w_b: (lb + nb).m(),
                    top_a: (la + na + ba).m(),
                    top_b: (lb + nb + bb).m(),
                },
            };
            let event = DileptonEvent {
                lepton_a: la,
                lepton_b: lb,
                bjet_a: ba,
                bjet_b: bb,
                met: (na.px() + nb.px(), na.py() + nb.py()),
            };
            (event, solver, [na, nb])
        })
}

fn any_f64() -> impl Strategy<Value = f64> {
    prop_oneof![
        8 => -1e4..1e4_f64,
        1 => Just(0.0),
        1 => Just(f64::NAN),
        1 => Just(f64::INFINITY),
        1 => Just(1e300),
    ]
}

fn any_p4() -> impl Strategy<Value = FourMomentum> {
    (any_f64(), any_f64(), any_f64(), any_f64())
        .prop_map(|(x, y, z, e)| FourMomentum::new(x, y, z, e))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(3000))]

    /// The true neutrinos are among the solutions (1e-6 of the event's
    /// largest energy), and every solution is massless with E > 0.
    #[test]
    fn true_neutrinos_are_found((event, solver, truth) in exact_configuration()) {
        let s = solver.solve(&event).unwrap();
        let scale = [event.lepton_a, event.lepton_b, event.bjet_a, event.bjet_b, truth[0], truth[1]]
            .iter()
            .map(|v| v.e())
            .fold(0.0, f64::max);
        let close = |a: &FourMomentum, b: &FourMomentum| {
            [(a.px(), b.px()), (a.py(), b.py()), (a.pz(), b.pz())]
                .iter()
                .all(|(g, w)| (g - w).abs() <= 1e-6 * scale)
        };
        prop_assert!(
            s.as_slice().iter().any(|p| close(&p.nu_a, &truth[0]) && close(&p.nu_b, &truth[1])),
            "truth {:?} not in {:?}", truth, s
        );
        for p in s.as_slice() {
            for nu in [p.nu_a, p.nu_b] {
                prop_assert!(nu.e() > 0.0 && nu.is_finite());
                prop_assert!(nu.m2().abs() <= 1e-9 * nu.e() * nu.e());
            }
        }
    }

    /// Arbitrary input, finite or not: an error or finite solutions, never a
    /// panic, never NaN.
    #[test]
    fn hostile_input_never_panics(
        la in any_p4(), lb in any_p4(), ba in any_p4(), bb in any_p4(),
        mx in any_f64(), my in any_f64(),
        w in any_f64(), t in any_f64(),
    ) {
        let solver = DileptonSolver {
            masses: DileptonMasses { w_a: w, w_b: w, top_a: t, top_b: t },
        };
        let event = DileptonEvent { lepton_a: la, lepton_b: lb, bjet_a: ba, bjet_b: bb, met: (mx, my) };
        if let Ok(s) = solver.solve(&event) {
            prop_assert!(s.len() <= 4);
            for p in s.as_slice() {
                prop_assert!(p.nu_a.is_finite() && p.nu_b.is_finite());
            }
        }
        let _ = solver.quartic(&event);
    }

    /// Roots of a quartic built from four separated real roots (times a
    /// random scale) are recovered to 1e-9.
    #[test]
    fn quartic_roots_recovered(
        r in prop::array::uniform4(-5.0..5.0_f64),
        k in prop_oneof![-10.0..-0.1_f64, 0.1..10.0_f64],
    ) {
        let mut sorted = r;
        sorted.sort_by(f64::total_cmp);
        prop_assume!(sorted.windows(2).all(|w| w[1] - w[0] > 0.05));
        // k (x − r0)(x − r1)(x − r2)(x − r3), lowest power first.
        let mut c = [k, 0.0, 0.0, 0.0, 0.0];
        for (deg, root) in sorted.iter().enumerate() {
            let mut next = [0.0; 5];
            for i in 0..=deg + 1 {
                let shifted = if i > 0 { c[i - 1] } else { 0.0 };
                next[i] = shifted - root * c[i];
            }
            c = next;
        }
        let c = [c[0], c[1], c[2], c[3], c[4]];
        let (got, n) = real_roots(&c).unwrap();
        prop_assert_eq!(n, 4);
        for (g, w) in got.iter().zip(&sorted) {
            prop_assert!((g - w).abs() <= 1e-9 * (1.0 + w.abs()), "{:?} vs {:?}", got, sorted);
        }
    }
}
