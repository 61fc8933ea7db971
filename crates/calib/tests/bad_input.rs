//! Unusable input gives a clear reason, never a NaN or a panic.

use quarry_calib::{
    calibrate_btag, calibrate_jets, calibrate_met, fit_quadrature, Binning, CoreEstimate, FitError,
    Form, JetFlavour, JetMatch, MetMatch, Point,
};

#[test]
fn matches_reject_non_physical_values() {
    assert!(JetMatch::new(f64::NAN, 100.0, 0.0, JetFlavour::Light, 0.0).is_none());
    assert!(JetMatch::new(90.0, 0.0, 0.0, JetFlavour::Light, 0.0).is_none());
    assert!(JetMatch::new(-1.0, 10.0, 0.0, JetFlavour::Light, 0.0).is_none());
    assert!(MetMatch::new([0.0, f64::INFINITY], [0.0, 0.0], 10.0).is_none());
    assert!(MetMatch::new([0.0, 0.0], [0.0, 0.0], -1.0).is_none());
}

#[test]
fn too_few_points_and_bad_points_are_errors() {
    let p = |x: f64, y: f64, error: f64| Point { x, y, error };
    let three = [
        p(50.0, 0.1, 0.01),
        p(100.0, 0.08, 0.01),
        p(200.0, 0.06, 0.01),
    ];
    assert_eq!(
        fit_quadrature(Form::Calorimeter, &three),
        Err(FitError::TooFewPoints {
            points: 3,
            params: 3
        })
    );
    let mut four = three.to_vec();
    four.push(p(400.0, 0.05, 0.0));
    assert_eq!(
        fit_quadrature(Form::Calorimeter, &four),
        Err(FitError::BadPoint { index: 3 })
    );
    four[3] = p(-400.0, 0.05, 0.01);
    assert_eq!(
        fit_quadrature(Form::Calorimeter, &four),
        Err(FitError::BadPoint { index: 3 })
    );
}

#[test]
fn sparse_bins_are_skipped_with_their_count() {
    // 150 jets in one bin: below the default 200 entries.
    let jets: Vec<JetMatch> = (0..150)
        .map(|i| {
            JetMatch::new(100.0 + i as f64 * 0.1, 100.0, 0.1, JetFlavour::Bottom, 0.9).unwrap()
        })
        .collect();
    let groups = calibrate_jets(&jets, &Binning::default()).unwrap();
    let central_b = &groups[0];
    assert!(central_b.points.is_empty());
    assert_eq!(central_b.skipped.len(), 1);
    assert_eq!(central_b.skipped[0].n, 150);
    assert!(central_b.skipped[0].reason.contains("fewer than 200"));
    assert!(central_b
        .resolution_fit
        .as_ref()
        .unwrap_err()
        .contains("points"));
    assert!(central_b.response_fit.is_err());
}

#[test]
fn empty_inputs_and_spikes() {
    assert!(calibrate_jets(&[], &Binning::default()).is_err());
    assert!(calibrate_met(&[], &Binning::default()).is_err());
    let only_b = [JetMatch::new(1.0, 1.0, 0.0, JetFlavour::Bottom, 1.0).unwrap()];
    assert!(calibrate_btag(&only_b, 0.5)
        .unwrap_err()
        .to_string()
        .contains("light jets"));
    // A spike has no Gaussian width.
    assert!(CoreEstimate::of(&[1.0; 500]).is_none());
    assert!(CoreEstimate::of(&[f64::NAN; 50]).is_none());
}
