//! Bad input is a typed error or a status, never a panic or a NaN; ranking
//! is deterministic.

mod common;

use common::{pair_input, smear, w_pz_roots, PairEvent};
use proptest::prelude::*;
use quarry_fit::{
    compare_fits, rank_by_chi2, Composite, Constraint, ConstraintMode, FitConfig, FitInput,
    FitInputError, FitResult, FitStatus, KinematicFitter, Measured, NeutrinoStart,
};
use quarry_lorentz::FourMomentum;
use quarry_resolution::ResolutionModel;
use rand::SeedableRng;
use rand_pcg::Pcg64;

fn no_nan(r: &FitResult) {
    assert!(!r.chi2.is_nan() && r.probability.is_finite() && r.max_violation.is_finite());
    assert!((0.0..=1.0).contains(&r.probability));
    assert!(r.objects().iter().all(|o| o.is_finite()));
    assert!(r
        .scales()
        .iter()
        .chain(r.scale_sigmas())
        .all(|v| v.is_finite()));
    assert!(r.composite_masses().iter().all(|v| v.is_finite()));
    assert!(r
        .common_masses()
        .iter()
        .all(|c| c.value.is_finite() && c.sigma.is_finite()));
    assert!(r.neutrino().is_none_or(|n| n.is_finite()));
    assert!(r.neutrino_sigmas().iter().all(|v| v.is_finite()));
    if !r.chi2.is_finite() {
        assert_eq!(r.probability, 0.0);
    }
}

#[test]
fn non_finite_and_malformed_input_is_refused() {
    let mut input = FitInput::new();
    let nan = FourMomentum::new(f64::NAN, 0.0, 1.0, 2.0);
    assert_eq!(
        input.add_object(Measured::jet(nan)),
        Err(FitInputError::NonFinite("object four-momentum"))
    );
    let inf = FourMomentum::new(0.0, 0.0, 1.0, f64::INFINITY);
    assert!(input.add_object(Measured::jet(inf)).is_err());
    let spacelike = FourMomentum::new(10.0, 0.0, 0.0, 5.0);
    assert_eq!(
        input.add_object(Measured::jet(spacelike)),
        Err(FitInputError::UnphysicalObject(0))
    );
    let good = FourMomentum::from_pt_eta_phi_m(40.0, 0.1, 0.2, 0.0);
    assert!(input
        .add_object(Measured::jet(good).with_sigma(f64::NAN))
        .is_err());
    assert!(input
        .add_object(Measured::jet(good).with_sigma(-1.0))
        .is_err());
    let nu = NeutrinoStart {
        p3: [1.0, 2.0, f64::NAN],
        met: [1.0, 2.0],
        met_cov: [100.0, 0.0, 100.0],
    };
    assert!(input.set_neutrino(nu).is_err());
    let nu = NeutrinoStart {
        p3: [1.0, 2.0, 3.0],
        met: [1.0, 2.0],
        met_cov: [100.0, 200.0, 100.0],
    };
    assert_eq!(input.set_neutrino(nu), Err(FitInputError::MetCovariance));
    // Composite members must exist.
    assert_eq!(
        input.add_composite(Composite::of(&[0], false)),
        Err(FitInputError::BadComposite(0))
    );
    input.add_object(Measured::jet(good)).unwrap();
    assert_eq!(
        input.add_composite(Composite::new()),
        Err(FitInputError::BadComposite(0))
    );
    assert_eq!(
        input.add_composite(Composite::of(&[0], true)),
        Err(FitInputError::BadComposite(0))
    );
    assert_eq!(
        input.add_composite(Composite::new().with_object(12)),
        Err(FitInputError::BadComposite(0))
    );
    let c = input.add_composite(Composite::of(&[0], false)).unwrap();
    assert!(input
        .add_constraint(Constraint::Mass {
            composite: c,
            mass: f64::NAN,
            width: 1.0
        })
        .is_err());
    assert!(input
        .add_constraint(Constraint::Mass {
            composite: 5,
            mass: 80.0,
            width: 1.0
        })
        .is_err());
    assert!(input
        .add_constraint(Constraint::EqualMass {
            a: c,
            b: c,
            width: 1.0
        })
        .is_err());
    for _ in 0..9 {
        input.add_object(Measured::jet(good)).unwrap();
    }
    assert_eq!(
        input.add_object(Measured::jet(good)),
        Err(FitInputError::Capacity("objects"))
    );
}

#[test]
fn refused_fits_are_a_status_without_nan() {
    let mut fitter = KinematicFitter::default();
    // No constraints.
    let mut input = FitInput::new();
    input
        .add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(
            40.0, 0.1, 0.2, 0.0,
        )))
        .unwrap();
    let r = fitter.fit(&input);
    assert_eq!(
        r.status,
        FitStatus::InvalidInput(FitInputError::Underconstrained)
    );
    assert!(!r.converged() && r.chi2 == f64::INFINITY);
    no_nan(&r);
    // A neutrino that no constraint reaches: pz undetermined.
    input
        .set_neutrino(NeutrinoStart {
            p3: [1.0, 2.0, 3.0],
            met: [1.0, 2.0],
            met_cov: [100.0, 0.0, 100.0],
        })
        .unwrap();
    input
        .add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(
            45.0, -0.3, 2.0, 0.0,
        )))
        .unwrap();
    let w = input.add_composite(Composite::of(&[0, 1], false)).unwrap();
    input.add_constraint(Constraint::w_mass(w)).unwrap();
    assert_eq!(input.ndf(), 0);
    let r = fitter.fit(&input);
    assert_eq!(
        r.status,
        FitStatus::InvalidInput(FitInputError::Underconstrained)
    );
    no_nan(&r);
}

#[test]
fn extreme_but_finite_inputs_end_in_a_status() {
    let model = ResolutionModel::default();
    let mut rng = Pcg64::seed_from_u64(3);
    for mode in [ConstraintMode::Soft, ConstraintMode::Hard] {
        let mut fitter = KinematicFitter::new(
            model.clone(),
            FitConfig {
                mode,
                ..FitConfig::default()
            },
        );
        for scale in [1e-6, 1e-2, 1.0, 1e3, 1e8, 1e150] {
            let ev = PairEvent::generate_ttbar(30.0, &mut rng);
            let mut s = smear(&ev, &model, &mut rng);
            for j in s.jets.iter_mut() {
                *j = *j * scale;
            }
            let roots = w_pz_roots(&s.lepton, s.met);
            let mut input = pair_input(
                &s,
                if roots[0].is_finite() { roots[0] } else { 0.0 },
                Some(20.0),
                false,
            );
            let r = fitter.fit(&input);
            no_nan(&r);
            input.clear();
            assert!(input.objects().is_empty());
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]
    /// Random (finite, physical) objects in the bW-pair topology: the fit
    /// always returns, with no NaN anywhere.
    #[test]
    fn random_inputs_never_panic_or_leak_nan(
        jets in proptest::collection::vec((1.0f64..2000.0, -4.0f64..4.0, -3.2f64..3.2, 0.0f64..50.0), 4),
        lep in (1.0f64..1000.0, -2.5f64..2.5, -3.2f64..3.2),
        met in (-500.0f64..500.0, -500.0f64..500.0),
        pz in -2000.0f64..2000.0,
        hard in any::<bool>(),
    ) {
        let mut input = FitInput::new();
        for &(pt, eta, phi, m) in &jets {
            input.add_object(Measured::jet(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m))).unwrap();
        }
        let l = input.add_object(Measured::muon(FourMomentum::from_pt_eta_phi_m(lep.0, lep.1, lep.2, 0.1))).unwrap();
        input.set_neutrino(NeutrinoStart { p3: [met.0, met.1, pz], met: [met.0, met.1], met_cov: [200.0, 20.0, 150.0] }).unwrap();
        let wh = input.add_composite(Composite::of(&[1, 2], false)).unwrap();
        let wl = input.add_composite(Composite::of(&[l], true)).unwrap();
        let bh = input.add_composite(Composite::of(&[0, 1, 2], false)).unwrap();
        let bl = input.add_composite(Composite::of(&[3, l], true)).unwrap();
        input.add_constraint(Constraint::w_mass(wh)).unwrap();
        input.add_constraint(Constraint::w_mass(wl)).unwrap();
        input.add_constraint(Constraint::EqualMass { a: bh, b: bl, width: 25.0 }).unwrap();
        let mode = if hard { ConstraintMode::Hard } else { ConstraintMode::Soft };
        let r = KinematicFitter::new(ResolutionModel::default(), FitConfig { mode, ..FitConfig::default() }).fit(&input);
        no_nan(&r);
        if r.converged() && hard {
            prop_assert!(r.max_violation < 0.01);
        }
    }
}

#[test]
fn ranking_orders_by_status_then_chi2_with_stable_ties() {
    let model = ResolutionModel::default();
    let mut rng = Pcg64::seed_from_u64(9);
    let mut fitter = KinematicFitter::new(model.clone(), FitConfig::default());
    let ev = PairEvent::generate_ttbar(30.0, &mut rng);
    let s = smear(&ev, &model, &mut rng);
    let pz = w_pz_roots(&s.lepton, s.met)[0];
    let right = fitter.fit(&pair_input(&s, pz, None, false));
    let mut swapped = s;
    swapped.jets.swap(0, 1);
    let wrong = fitter.fit(&pair_input(&swapped, pz, None, false));
    let refused = fitter.fit(&FitInput::new());
    assert!(right.converged() && wrong.converged());
    assert_ne!(right.chi2, wrong.chi2);
    let (best, worse) = if right.chi2 < wrong.chi2 {
        (right, wrong)
    } else {
        (wrong, right)
    };
    let results = [refused, worse, best, worse, refused];
    assert_eq!(rank_by_chi2(&results), vec![2, 1, 3, 0, 4]);
    assert_eq!(compare_fits(&best, &worse), std::cmp::Ordering::Less);
    // An unconverged fit ranks after every converged one, whatever its χ².
    let mut stuck = best;
    stuck.status = FitStatus::IterationLimit;
    stuck.chi2 = 0.0;
    assert_eq!(rank_by_chi2(&[stuck, worse]), vec![1, 0]);
}

#[test]
fn soft_and_hard_modes_differ_as_documented() {
    let model = ResolutionModel::default();
    let mut rng = Pcg64::seed_from_u64(21);
    let ev = PairEvent::generate_ttbar(30.0, &mut rng);
    let s = smear(&ev, &model, &mut rng);
    let pz = w_pz_roots(&s.lepton, s.met)[0];
    let input = pair_input(&s, pz, Some(20.0), false);
    assert_eq!(input.ndf(), 2); // 2 W masses + 1 equal-mass pair − pz
    let hard = KinematicFitter::new(model.clone(), FitConfig::default()).fit(&input);
    let soft = KinematicFitter::new(
        model,
        FitConfig {
            mode: ConstraintMode::Soft,
            ..FitConfig::default()
        },
    )
    .fit(&input);
    assert!(hard.converged() && soft.converged());
    assert!(hard.max_violation < 0.01);
    let m = hard.composite_masses();
    assert!((m[0] - quarry_pdg::W_MASS).abs() < 0.01 && (m[1] - quarry_pdg::W_MASS).abs() < 0.01);
    assert!((m[2] - m[3]).abs() < 0.02);
    assert!((hard.common_masses()[0].value - m[2]).abs() < 0.01);
    assert!(hard.common_masses()[0].sigma > 0.0);
    // Soft constraints pull less: χ² no larger than the hard fit's.
    assert!(soft.chi2 <= hard.chi2 + 1e-9);
    assert!(soft.max_violation > hard.max_violation);
}
