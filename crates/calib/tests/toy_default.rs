//! Calibration of the toy's *default* detector, whose truth is the default
//! resolution model (`quarry_resolution::ResolutionModel::default()`, values
//! from memory) and the default b-tag model: the estimators must give back
//! the numbers the toy smeared with, within their stated uncertainties.

mod common;

use quarry_calib::{
    calibrate_btag, calibrate_jets, calibrate_leptons, calibrate_met, Binning, JetFlavour,
};
use quarry_resolution::ResolutionModel;
use quarry_toy::{HeavyQuark, Partner, ToyConfig};

/// ttbar for low and medium energies, a 1.4 TeV down-type pair for high
/// ones; jets kept down to 5 GeV measured pt so that the selection does not
/// bias the lowest calibration bins (see the crate's "Limits").
fn samples() -> common::Matches {
    let mut ttbar = ToyConfig::top_pair();
    ttbar.acceptance.jet_pt_min = 5.0;
    let mut heavy = ToyConfig::heavy_pair(HeavyQuark::new(Partner::DownType, 1400.0));
    heavy.acceptance.jet_pt_min = 5.0;
    let mut all = common::matches(ttbar, 11, 30_000);
    let more = common::matches(heavy, 12, 8_000);
    all.jets.extend(more.jets);
    all.leptons.extend(more.leptons);
    all.met.extend(more.met);
    all
}

#[test]
fn default_detector_is_recovered() {
    let m = samples();
    let binning = Binning::default();
    let truth = ResolutionModel::default();

    let groups = calibrate_jets(&m.jets, &binning).unwrap();
    for g in &groups {
        let bin = truth.jet_bin(0.5 * (g.abs_eta_lo + g.abs_eta_hi));
        let fit = g.resolution_fit.as_ref().unwrap();
        let injected = [bin.stochastic, bin.noise, bin.constant];
        eprintln!(
            "{} |eta| {}-{}: n {} bins {} a {} b {} c {} chi2 {:.1}/{} response {} slope {}",
            g.flavour.name(),
            g.abs_eta_lo,
            g.abs_eta_hi,
            g.n,
            g.points.len(),
            fit.params[0],
            fit.params[1],
            fit.params[2],
            fit.chi2,
            fit.ndf,
            g.response_fit.as_ref().unwrap().at_100_gev,
            g.response_fit.as_ref().unwrap().slope_per_log_e,
        );
        for (p, want) in fit.params.iter().zip(injected) {
            assert!(
                p.pull(want).abs() < 4.0,
                "{}: {p} vs {want}",
                g.flavour.name()
            );
        }
        // The default toy response is 1 at every energy.
        let r = g.response_fit.as_ref().unwrap();
        assert!(
            r.at_100_gev.pull(1.0).abs() < 4.0,
            "response {}",
            r.at_100_gev
        );
        assert!(
            r.slope_per_log_e.pull(0.0).abs() < 4.0,
            "slope {}",
            r.slope_per_log_e
        );
        // Gaussian smearing: no tail beyond a Gaussian's in any bin.
        for p in &g.points {
            assert!(p.core.low_tail_excess().value < 4.0 * p.core.tail_low.error + 0.002);
        }
    }
    assert_eq!(groups.len(), 6);
    assert!(groups.iter().any(|g| g.flavour == JetFlavour::Bottom));

    let leptons = calibrate_leptons(&m.leptons, &binning).unwrap();
    for (g, want) in leptons.iter().zip([truth.electron, truth.muon]) {
        let fit = g.resolution_fit.as_ref().unwrap();
        eprintln!(
            "{}: n {} c {} k {} chi2 {:.1}/{}",
            g.flavour, g.n, fit.params[0], fit.params[1], fit.chi2, fit.ndf
        );
        assert!(fit.params[0].pull(want.constant).abs() < 4.0);
        assert!(fit.params[1].pull(want.per_gev).abs() < 4.0);
    }

    let met = calibrate_met(&m.met, &binning).unwrap();
    let fit = met.resolution_fit.as_ref().unwrap();
    eprintln!(
        "met: n {} floor {} s {} chi2 {:.1}/{}",
        met.n_events, fit.params[0], fit.params[1], fit.chi2, fit.ndf
    );
    assert!(fit.params[0].pull(truth.met.floor).abs() < 4.0);
    assert!(fit.params[1].pull(truth.met.sqrt_sum_pt).abs() < 4.0);

    // b-tag: the toy tags 70 % of b jets and 1 % of others at 0.5.
    let rates = calibrate_btag(&m.jets, 0.5).unwrap();
    eprintln!("btag: {:?}", rates);
    let b = rates.b_efficiency;
    let l = rates.mistag;
    assert!((b.value - 0.70).abs() < 4.0 * b.half_width());
    assert!((l.value - 0.01).abs() < 4.0 * l.half_width());
}
