//! Analytic gradient and Hessian of the χ² against central finite
//! differences at random points (both soft and augmented-Lagrangian weights).

mod common;

use argmin::core::{CostFunction, Gradient, Hessian};
use common::{pair_input, smear, w_pz_roots, PairEvent};
use quarry_fit::{KinematicChi2, Params};
use quarry_pdg::TOP_MASS;
use quarry_resolution::ResolutionModel;
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64;

fn check(problem: &KinematicChi2, x: &Params) -> (f64, f64) {
    let n = problem.n_params();
    let g = problem.gradient(x).unwrap();
    let h = problem.exact_hessian(x);
    assert_eq!(
        problem.hessian(x).unwrap().shift() == 0.0,
        h.cholesky().is_some()
    );
    let mut worst_g: f64 = 0.0;
    let mut worst_h: f64 = 0.0;
    for i in 0..n {
        let step = 1e-5;
        let mut xp = *x;
        let mut xm = *x;
        xp[i] += step;
        xm[i] -= step;
        let fd = (problem.cost(&xp).unwrap() - problem.cost(&xm).unwrap()) / (2.0 * step);
        worst_g = worst_g.max((fd - g[i]).abs() / (1.0 + g[i].abs()));
        let gp = problem.gradient(&xp).unwrap();
        let gm = problem.gradient(&xm).unwrap();
        for j in 0..n {
            let fdh = (gp[j] - gm[j]) / (2.0 * step);
            worst_h = worst_h.max((fdh - h[(i, j)]).abs() / (1.0 + h[(i, j)].abs()));
        }
    }
    // Padding entries: no gradient, identity Hessian.
    for i in n..quarry_fit::MAX_PARAMS {
        assert_eq!(g[i], 0.0);
        assert_eq!(h[(i, i)], 1.0);
    }
    (worst_g, worst_h)
}

#[test]
fn analytic_derivatives_match_finite_differences() {
    let model = ResolutionModel::default();
    let mut rng = Pcg64::seed_from_u64(11);
    let mut checked = 0;
    for event in 0..40 {
        let ev = PairEvent::generate_with_cuts(
            if event % 2 == 0 { TOP_MASS } else { 900.0 },
            300.0,
            25.0,
            &mut rng,
        );
        let s = smear(&ev, &model, &mut rng);
        let pz = w_pz_roots(&s.lepton, s.met)[0];
        let equal = if event % 2 == 0 { None } else { Some(20.0) };
        let input = pair_input(&s, pz, equal, false);
        let mut problem = KinematicChi2::new(&input, &model).unwrap();
        if event % 4 >= 2 {
            // Augmented-Lagrangian weights: nonzero linear terms, stiff ρ.
            for t in 0..problem.n_terms() {
                problem.set_term_weights(
                    t,
                    rng.random_range(-3.0..3.0),
                    rng.random_range(0.1..50.0),
                );
            }
        }
        for _ in 0..3 {
            let mut x = Params::zeros();
            for i in 0..problem.n_params() {
                x[i] = rng.random_range(-1.5..1.5);
            }
            let (eg, eh) = check(&problem, &x);
            assert!(eg < 1e-5, "event {event}: gradient mismatch {eg:e}");
            assert!(eh < 1e-4, "event {event}: Hessian mismatch {eh:e}");
            checked += 1;
        }
    }
    assert_eq!(checked, 120);
}
