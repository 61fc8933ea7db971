//! quarry-calib against outside references: scipy's `curve_fit`,
//! `scipy.stats` (normal and truncated-normal constants, moments, beta
//! quantiles) and an independent numpy implementation of the iterative core,
//! all from `tests/reference/calib_reference.py` (fixture
//! `tests/reference/fixtures/calib_reference.json`).

use quarry_calib::binomial::{clopper_pearson, ln_gamma};
use quarry_calib::{
    fit_quadrature, CoreEstimate, Form, Point, CENTER_FEEDBACK, GAUSSIAN_TAIL, WIDTH_FEEDBACK,
};
use serde_json::Value;

fn fixture() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/reference/fixtures/calib_reference.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

/// Source: scipy.stats.norm / scipy.stats.truncnorm (the script derives the
/// feedback constants from them; the width one by a numerical derivative of
/// truncnorm(-a, a).var(), hence the looser 1e-8).
#[test]
fn gaussian_constants_match_scipy() {
    let f = fixture();
    let close = |a: f64, b: f64, tol: f64| assert!((a - b).abs() <= tol * b.abs(), "{a} vs {b}");
    close(
        CENTER_FEEDBACK,
        f["center_feedback"].as_f64().unwrap(),
        1e-13,
    );
    close(WIDTH_FEEDBACK, f["width_feedback"].as_f64().unwrap(), 1e-8);
    close(
        GAUSSIAN_TAIL,
        f["gaussian_tail_2p5"].as_f64().unwrap(),
        1e-13,
    );
    close(
        quarry_eval::stats::TRUNCATED_STD_RATIO,
        f["truncnorm_std_2sigma"].as_f64().unwrap(),
        1e-13,
    );
}

/// Source: scipy.optimize.curve_fit (absolute_sigma=True) on the same
/// binned points, for all three quadrature forms.
#[test]
fn quadrature_fits_match_scipy_curve_fit() {
    let f = fixture();
    for case in f["fits"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let form = match name {
            "calorimeter" | "calorimeter-wide" => Form::Calorimeter,
            "tracker" => Form::Tracker,
            "sqrt-sum" => Form::SqrtSum,
            other => panic!("unknown case {other}"),
        };
        let (x, y, e) = (
            floats(&case["x"]),
            floats(&case["y"]),
            floats(&case["error"]),
        );
        let points: Vec<Point> = (0..x.len())
            .map(|i| Point {
                x: x[i],
                y: y[i],
                error: e[i],
            })
            .collect();
        let fit = fit_quadrature(form, &points).unwrap();
        let params = floats(&case["params"]);
        let errors = floats(&case["errors"]);
        for (j, p) in fit.params.iter().enumerate() {
            assert!(
                (p.value - params[j]).abs() <= 1e-3 * errors[j],
                "{name} p{j}: {} vs scipy {} ± {}",
                p.value,
                params[j],
                errors[j]
            );
            assert!(
                (p.error - errors[j]).abs() <= 1e-3 * errors[j],
                "{name} error {j}: {} vs scipy {}",
                p.error,
                errors[j]
            );
        }
        let chi2 = case["chi2"].as_f64().unwrap();
        assert!(
            (fit.chi2 - chi2).abs() <= 1e-6 * chi2,
            "{name} chi2 {} vs {chi2}",
            fit.chi2
        );
        assert_eq!(fit.ndf, x.len() - form.n_params());
    }
}

/// Source: the script's own numpy implementation of the ±2σ iterative core
/// (with scipy.stats.median_abs_deviation and truncnorm) and
/// scipy.stats.moment for the error formula's moments.
#[test]
fn core_estimate_matches_independent_numpy_implementation() {
    let f = fixture();
    let c = &f["core"];
    let values = floats(&c["values"]);
    let core = CoreEstimate::of(&values).unwrap();
    let close = |a: f64, b: f64, tol: f64, what: &str| {
        assert!((a - b).abs() <= tol * b.abs(), "{what}: {a} vs {b}")
    };
    close(
        core.center.value,
        c["center"].as_f64().unwrap(),
        1e-12,
        "center",
    );
    close(
        core.sigma.value,
        c["sigma"].as_f64().unwrap(),
        1e-12,
        "sigma",
    );
    assert_eq!(core.n_core as u64, c["n_core"].as_u64().unwrap());
    close(
        core.center.error,
        c["center_error"].as_f64().unwrap(),
        1e-10,
        "center error",
    );
    // The fixture's width feedback is a numerical derivative (1e-9 relative).
    close(
        core.sigma.error,
        c["sigma_error"].as_f64().unwrap(),
        1e-8,
        "sigma error",
    );
    close(
        core.tail_low.value,
        c["tail_low"].as_f64().unwrap(),
        1e-12,
        "tail low",
    );
    close(
        core.tail_high.value,
        c["tail_high"].as_f64().unwrap(),
        1e-12,
        "tail high",
    );
    // The injected low tail (150 of 2000 uniform in [0.4, 0.8]) shows as an
    // excess over a Gaussian's 0.62 %.
    assert!(core.low_tail_excess().value > 5.0 * core.low_tail_excess().error);
}

/// Source: scipy.stats.beta.ppf, cross-checked in the script against
/// scipy.stats.binomtest(...).proportion_ci(method="exact").
#[test]
fn clopper_pearson_matches_scipy_beta() {
    let f = fixture();
    for case in f["clopper_pearson"].as_array().unwrap() {
        let k = case["k"].as_u64().unwrap();
        let n = case["n"].as_u64().unwrap();
        let level = case["level"].as_f64().unwrap();
        let (lo, hi) = clopper_pearson(k, n, level);
        let (slo, shi) = (case["lo"].as_f64().unwrap(), case["hi"].as_f64().unwrap());
        assert!(
            (lo - slo).abs() <= 1e-10,
            "{k}/{n} @ {level}: lo {lo} vs {slo}"
        );
        assert!(
            (hi - shi).abs() <= 1e-10,
            "{k}/{n} @ {level}: hi {hi} vs {shi}"
        );
    }
}

/// Source: Γ(n) = (n − 1)! and Γ(1/2) = √π (textbook identities).
#[test]
fn ln_gamma_on_known_values() {
    assert!((ln_gamma(1.0)).abs() < 1e-14);
    assert!((ln_gamma(5.0) - 24f64.ln()).abs() < 1e-13);
    assert!((ln_gamma(0.5) - std::f64::consts::PI.sqrt().ln()).abs() < 1e-14);
    let ln_fact_20: f64 = (1..20).map(|k| (k as f64).ln()).sum();
    assert!((ln_gamma(20.0) - ln_fact_20).abs() < 1e-12);
}
