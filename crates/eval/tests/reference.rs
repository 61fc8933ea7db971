//! quarry-eval's statistics against scipy and numpy.
//!
//! Fixture: tests/reference/fixtures/eval_statistics.json, written by
//! tests/reference/eval_statistics.py (scipy 1.17.1, numpy 2.4.6).

use quarry_eval::stats::{quantile, Fraction, ONE_SIGMA_COVERAGE, TRUNCATED_STD_RATIO};

fn fixture() -> serde_json::Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/reference/fixtures/eval_statistics.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).expect("fixture present"))
        .expect("fixture is JSON")
}

fn num(v: &serde_json::Value) -> f64 {
    v.as_f64().expect("number")
}

#[test]
fn truncation_constant_matches_scipy_truncnorm() {
    // scipy.stats.truncnorm(-2, 2).std()
    let f = fixture();
    assert!((TRUNCATED_STD_RATIO - num(&f["truncnorm_std_2sigma"])).abs() < 1e-12);
}

#[test]
fn one_sigma_coverage_matches_scipy_norm() {
    // scipy.stats.norm.cdf(1) - norm.cdf(-1)
    let f = fixture();
    assert!((ONE_SIGMA_COVERAGE - num(&f["normal_one_sigma_coverage"])).abs() < 1e-12);
}

#[test]
fn mad_scale_matches_scipy_norm_ppf() {
    // 1 / scipy.stats.norm.ppf(0.75)
    let f = fixture();
    assert!((quarry_eval::stats::MAD_TO_SIGMA - num(&f["mad_scale"])).abs() < 1e-12);
}

#[test]
fn wilson_intervals_match_scipy_binomtest() {
    // scipy.stats.binomtest(k, n).proportion_ci(0.6827, method="wilson")
    let f = fixture();
    let cases = f["wilson_68"].as_array().expect("list");
    assert!(cases.len() >= 8);
    for c in cases {
        let k = c["k"].as_u64().unwrap() as usize;
        let n = c["n"].as_u64().unwrap() as usize;
        let (lo, hi) = Fraction::new(k, n).unwrap().wilson(1.0);
        assert!(
            (lo - num(&c["lo"])).abs() < 1e-9,
            "{k}/{n}: lo {lo} vs {}",
            c["lo"]
        );
        assert!(
            (hi - num(&c["hi"])).abs() < 1e-9,
            "{k}/{n}: hi {hi} vs {}",
            c["hi"]
        );
    }
}

#[test]
fn quantiles_match_numpy_linear_method() {
    // numpy.quantile(values, q) (default method "linear")
    let f = fixture();
    let mut values: Vec<f64> = f["quantile_values"]
        .as_array()
        .unwrap()
        .iter()
        .map(num)
        .collect();
    values.sort_by(f64::total_cmp);
    for c in f["quantiles"].as_array().unwrap() {
        let q = num(&c["q"]);
        let got = quantile(&values, q).unwrap();
        assert!((got - num(&c["value"])).abs() < 1e-12, "q = {q}: {got}");
    }
}

#[test]
fn gaussian_tail_beyond_three_sigma_matches_scipy() {
    // 2 * scipy.stats.norm.sf(3): the tail fraction of a pure Gaussian that
    // the summary's TAIL_CUT = 3 reports. Checked on an exact normal-quantile
    // grid so that only the cut, not sampling, is tested.
    let f = fixture();
    let expected = num(&f["normal_outside_3sigma"]);
    assert_eq!(quarry_eval::TAIL_CUT, 3.0);
    let core = quarry_eval::stats::Core {
        center: 0.0,
        sigma: 1.0,
        n_core: 1,
        iterations: 1,
    };
    // 40 000 values at the unit-normal quantiles (i + 0.5)/n (probit by
    // bisection of an erf series): the count beyond ±3 gives the tail to
    // 1/n = 2.5e-5.
    let n = 40_000;
    let grid: Vec<f64> = (0..n)
        .map(|i| probit((i as f64 + 0.5) / n as f64))
        .collect();
    let tail = core.outside_fraction(&grid, quarry_eval::TAIL_CUT);
    assert!((tail - expected).abs() < 5e-5, "{tail} vs {expected}");
}

/// Φ⁻¹(p) by bisection on Φ(x) = (1 + erf(x/√2))/2, erf from its Taylor
/// series (|x| ≤ 8 suffices here).
fn probit(p: f64) -> f64 {
    let (mut lo, mut hi) = (-8.0f64, 8.0f64);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if phi(mid) < p {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

fn phi(x: f64) -> f64 {
    0.5 * (1.0 + erf(x / std::f64::consts::SQRT_2))
}

fn erf(x: f64) -> f64 {
    if x.abs() > 3.0 {
        // Continued fraction of erfc for large |x|.
        let t = x.abs();
        let mut cf = 0.0;
        for k in (1..60).rev() {
            cf = (k as f64 / 2.0) / (t + cf);
        }
        let erfc = (-t * t).exp() / (std::f64::consts::PI.sqrt() * (t + cf));
        return x.signum() * (1.0 - erfc);
    }
    let mut term = x;
    let mut sum = x;
    for n in 1..200 {
        term *= -x * x / n as f64;
        sum += term / (2 * n + 1) as f64;
        if term.abs() < 1e-17 {
            break;
        }
    }
    2.0 / std::f64::consts::PI.sqrt() * sum
}
