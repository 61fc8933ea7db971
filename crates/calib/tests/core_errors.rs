//! The stated statistical errors of the core estimate against the actual
//! spread of repeated estimates on independent Gaussian samples (a
//! Monte Carlo check of the feedback-corrected error formulas).

use quarry_calib::CoreEstimate;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use rand_pcg::Pcg64Mcg;

fn spread(values: &[f64]) -> f64 {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    (values.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
}

#[test]
fn stated_errors_match_the_spread_of_repeated_estimates() {
    let mut rng = Pcg64Mcg::seed_from_u64(99);
    let gauss = Normal::new(0.97, 0.12).unwrap();
    let (mut centers, mut sigmas, mut center_errors, mut sigma_errors) =
        (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    for _ in 0..600 {
        let sample: Vec<f64> = (0..2000).map(|_| gauss.sample(&mut rng)).collect();
        let core = CoreEstimate::of(&sample).unwrap();
        centers.push(core.center.value);
        sigmas.push(core.sigma.value);
        center_errors.push(core.center.error);
        sigma_errors.push(core.sigma.error);
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let center_ratio = spread(&centers) / mean(&center_errors);
    let sigma_ratio = spread(&sigmas) / mean(&sigma_errors);
    eprintln!("spread / stated error: centre {center_ratio:.3}, width {sigma_ratio:.3}");
    // 600 repetitions measure a spread to ≈ 3 %; allow 12 %.
    assert!((center_ratio - 1.0).abs() < 0.12, "centre {center_ratio}");
    assert!((sigma_ratio - 1.0).abs() < 0.12, "width {sigma_ratio}");
    // (Without the feedback factors the ratios would be 1/(1 − 0.226) = 1.29
    // and 1/(1 − 0.472) = 1.89: the 12 % band tells them apart.)
    // Unbiased on a Gaussian: the mean estimate is within 4 errors of the
    // mean's own error.
    assert!((mean(&centers) - 0.97).abs() < 4.0 * spread(&centers) / 600f64.sqrt());
    assert!((mean(&sigmas) - 0.12).abs() < 4.0 * spread(&sigmas) / 600f64.sqrt() + 1e-4);
}
