//! Checks against outside references (fixtures written by the committed
//! scripts in tests/reference/):
//! - `fit_chi2_sf.json`: scipy.stats.chi2.sf (scipy, PyPI) for the χ²
//!   probability.
//! - `fit_iminuit.json`: the identical soft-constraint χ² minimised by
//!   iminuit 2.33.0 (MINUIT2, PyPI) on 120 toy bW-pair events.
//! - `fit_hard_scipy.json`: the hard-constraint fit (quarry's default mode)
//!   on the same 120 events, minimised by scipy 1.17.1's SLSQP (PyPI) with
//!   the constraints as equations, and its covariance from the bordered
//!   matrix of P. Avery, "Applied Fitting Theory VI", CLEO CBX 98-37,
//!   inverted by numpy.

use quarry_fit::{
    chi2_survival, Composite, Constraint, ConstraintMode, FitConfig, FitInput, FitResult,
    KinematicChi2, KinematicFitter, Measured, NeutrinoStart,
};
use quarry_lorentz::FourMomentum;
use quarry_resolution::{JetBin, LeptonResolution, ResolutionModel};
use serde_json::Value;

fn fixture(name: &str) -> Value {
    let path = format!(
        "{}/../../tests/reference/fixtures/{name}",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).expect("valid JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

/// scipy.stats.chi2.sf (scipy 1.17.1) on a grid of χ² and ndf.
#[test]
fn chi2_survival_matches_scipy() {
    let data = fixture("fit_chi2_sf.json");
    let cases = data["cases"].as_array().unwrap();
    assert!(cases.len() >= 200);
    for c in cases {
        let (x, ndf, expected) = (
            f(&c["chi2"]),
            c["ndf"].as_u64().unwrap() as u32,
            f(&c["sf"]),
        );
        let got = chi2_survival(x, ndf);
        let tol = 1e-12_f64.max(1e-10 * expected);
        assert!(
            (got - expected).abs() <= tol,
            "chi2 {x}, ndf {ndf}: {got} vs scipy {expected}"
        );
    }
}

/// The resolution model a fixture states (the reference's independent
/// implementation of quarry-resolution's defaults).
fn model_of(data: &Value) -> ResolutionModel {
    let model = ResolutionModel {
        jet: data["jet_bins"]
            .as_array()
            .unwrap()
            .iter()
            .map(|b| JetBin {
                abs_eta_max: f(&b[0]),
                stochastic: f(&b[1]),
                noise: f(&b[2]),
                constant: f(&b[3]),
            })
            .collect(),
        muon: LeptonResolution {
            constant: f(&data["muon"][0]),
            per_gev: f(&data["muon"][1]),
        },
        ..ResolutionModel::default()
    };
    model.validate().unwrap();
    model
}

/// One worked bW-pair event of a fixture as the fit's input: five objects,
/// the neutrino start and MET, the four composites, m(W_had) = m(W_lep) =
/// m_W and m(B_had) = m(B_lep) = M. Also checks that the reference's
/// relative resolutions are ours.
fn input_of(data: &Value, ev: &Value, model: &ResolutionModel, n: usize) -> FitInput {
    let (w_mass, w_width, equal_width) = (
        f(&data["w_mass"]),
        f(&data["w_width"]),
        f(&data["equal_width"]),
    );
    let mut input = FitInput::new();
    for (o, kind) in ev["objects"]
        .as_array()
        .unwrap()
        .iter()
        .zip(ev["kinds"].as_array().unwrap())
    {
        let p4 = FourMomentum::new(f(&o[0]), f(&o[1]), f(&o[2]), f(&o[3]));
        let m = if kind == "jet" {
            Measured::jet(p4)
        } else {
            Measured::muon(p4)
        };
        input.add_object(m).unwrap();
    }
    let v = |key: &str, i: usize| f(&ev[key][i]);
    input
        .set_neutrino(NeutrinoStart {
            p3: [v("nu_start", 0), v("nu_start", 1), v("nu_start", 2)],
            met: [v("met", 0), v("met", 1)],
            met_cov: [v("met_cov", 0), v("met_cov", 1), v("met_cov", 2)],
        })
        .unwrap();
    for c in data["composites"].as_array().unwrap() {
        let members: Vec<usize> = c[0]
            .as_array()
            .unwrap()
            .iter()
            .map(|i| i.as_u64().unwrap() as usize)
            .collect();
        input
            .add_composite(Composite::of(&members, c[1].as_bool().unwrap()))
            .unwrap();
    }
    for composite in [0, 1] {
        input
            .add_constraint(Constraint::Mass {
                composite,
                mass: w_mass,
                width: w_width,
            })
            .unwrap();
    }
    input
        .add_constraint(Constraint::EqualMass {
            a: 2,
            b: 3,
            width: equal_width,
        })
        .unwrap();

    // Same resolutions as the reference's independent implementation.
    let problem = KinematicChi2::new(&input, model).unwrap();
    for i in 0..5 {
        let (ours, theirs) = (problem.relative_sigma(i), v("relative_sigma", i));
        assert!(
            (ours - theirs).abs() < 1e-12 * theirs,
            "event {n}: r_{i} {ours} vs {theirs}"
        );
    }
    input
}

/// The fitted parameters in the fixtures' order (s_1..s_5, ν px, py, pz,
/// common mass), each with its σ.
fn parameters(fit: &FitResult) -> Vec<(f64, f64)> {
    let nu = fit.neutrino().unwrap();
    let nu_sigma = fit.neutrino_sigmas();
    let common = fit.common_masses()[0];
    let mut out: Vec<(f64, f64)> = fit
        .scales()
        .iter()
        .copied()
        .zip(fit.scale_sigmas().iter().copied())
        .collect();
    out.extend([
        (nu.px(), nu_sigma[0]),
        (nu.py(), nu_sigma[1]),
        (nu.pz(), nu_sigma[2]),
        (common.value, common.sigma),
    ]);
    out
}

/// iminuit 2.33.0 (MINUIT2): same minimum (≤ 1e-4 relative), same
/// parameters (≤ 1e-3 of MINUIT's error), and errors from our inverse
/// Hessian agreeing with MINUIT's Hesse errors (median ≤ 0.1 %, each ≤ 5 %).
#[test]
fn soft_fit_matches_iminuit() {
    let data = fixture("fit_iminuit.json");
    assert!(data["source"].as_str().unwrap().contains("MINUIT2"));
    let model = model_of(&data);
    let config = FitConfig {
        mode: ConstraintMode::Soft,
        decrement_tolerance: 1e-12,
        ..FitConfig::default()
    };
    let mut fitter = KinematicFitter::new(model.clone(), config);
    let events = data["events"].as_array().unwrap();
    let mut compared = 0;
    let mut deviations = Vec::new();
    for (n, ev) in events.iter().enumerate() {
        assert!(
            ev["valid"].as_bool().unwrap(),
            "event {n}: MINUIT minimum not valid"
        );
        let v = |key: &str, i: usize| f(&ev[key][i]);
        let input = input_of(&data, ev, &model, n);
        let fit = fitter.fit(&input);
        assert!(fit.converged(), "event {n}: {:?}", fit.status);
        let fval = f(&ev["fval"]);
        assert!(
            (fit.chi2 - fval).abs() <= 1e-4 * fval,
            "event {n}: χ² {} vs MINUIT {fval}",
            fit.chi2
        );
        for (k, (value, sigma)) in parameters(&fit).iter().enumerate() {
            let (theirs, error) = (v("values", k), v("errors", k));
            assert!(
                (value - theirs).abs() <= 1e-3 * error,
                "event {n}, parameter {k}: {value} vs MINUIT {theirs} ± {error}"
            );
            // MINUIT's Hesse takes finite-step second derivatives, ours are
            // exact at the minimum: they differ where the χ² is far from
            // quadratic over a step (seen up to 4 % for the neutrino pz).
            let dev = (sigma / error - 1.0).abs();
            assert!(
                dev <= 0.05,
                "event {n}, parameter {k}: σ {sigma} vs MINUIT {error}"
            );
            deviations.push(dev);
        }
        compared += 1;
    }
    assert!(compared >= 100);
    deviations.sort_by(f64::total_cmp);
    let median = deviations[deviations.len() / 2];
    assert!(
        median < 1e-3,
        "median relative σ deviation from MINUIT {median}"
    );
}

/// The default hard-constraint fit against scipy 1.17.1's SLSQP
/// (`scipy.optimize.minimize`, the constraints as equations) on the same 120
/// worked events: the reference stopped at a constrained minimum (constraints
/// met to 1e-6 GeV, the Lagrange condition ∇χ² + Aᵀλ = 0 to 1e-4); ours
/// meets the constraints to its 1 MeV tolerance with the same χ² (≤ 1e-6
/// relative) and the same parameters (≤ 1e-3 of the reference's σ); our σ
/// agree with the linearised constrained covariance of P. Avery, CLEO CBX
/// 98-37 (bordered-matrix inverse computed by numpy) to 1e-3.
#[test]
fn hard_fit_matches_scipy_slsqp() {
    let data = fixture("fit_hard_scipy.json");
    assert!(data["source"].as_str().unwrap().contains("SLSQP"));
    let model = model_of(&data);
    let config = FitConfig {
        decrement_tolerance: 1e-12,
        ..FitConfig::default()
    };
    assert_eq!(config.mode, ConstraintMode::Hard, "hard is the default");
    let w_mass = f(&data["w_mass"]);
    let mut fitter = KinematicFitter::new(model.clone(), config);
    let events = data["events"].as_array().unwrap();
    assert!(events.len() >= 100);
    for (n, ev) in events.iter().enumerate() {
        assert!(ev["success"].as_bool().unwrap(), "event {n}: SLSQP failed");
        assert!(f(&ev["max_violation_gev"]) < 1e-6, "event {n}");
        assert!(f(&ev["lagrange_residual"]) < 1e-4, "event {n}");
        let v = |key: &str, i: usize| f(&ev[key][i]);
        let input = input_of(&data, ev, &model, n);
        let fit = fitter.fit(&input);
        assert!(fit.converged(), "event {n}: {:?}", fit.status);
        assert!(fit.max_violation < config.hard_tolerance, "event {n}");
        let masses = fit.composite_masses();
        assert!((masses[0] - w_mass).abs() < config.hard_tolerance);
        assert!((masses[1] - w_mass).abs() < config.hard_tolerance);
        assert!((masses[2] - masses[3]).abs() < 2.0 * config.hard_tolerance);
        let fval = f(&ev["fval"]);
        assert!(
            (fit.chi2 - fval).abs() <= 1e-6 * fval + 1e-9,
            "event {n}: χ² {} vs SLSQP {fval}",
            fit.chi2
        );
        for (k, (value, sigma)) in parameters(&fit).iter().enumerate() {
            let (theirs, error) = (v("values", k), v("errors", k));
            assert!(
                (value - theirs).abs() <= 1e-3 * error,
                "event {n}, parameter {k}: {value} vs SLSQP {theirs} ± {error}"
            );
            assert!(
                (sigma / error - 1.0).abs() <= 1e-3,
                "event {n}, parameter {k}: σ {sigma} vs bordered-matrix σ {error}"
            );
        }
    }
}
