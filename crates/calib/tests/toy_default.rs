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

/// The calibration file built from the default toy detector reads back
/// identically from its TOML text, and reading rejects unphysical values
/// naming the entry and field.
#[test]
fn calibration_file_round_trip_and_validation() {
    use quarry_calib::file::{CalibrationFile, Defaults, MassPeakEntry, Results};
    let m = samples();
    let binning = Binning::default();
    let jets = calibrate_jets(&m.jets, &binning).unwrap();
    let leptons = calibrate_leptons(&m.leptons, &binning).unwrap();
    let model = ResolutionModel::default();
    let masses: Vec<f64> = (0..2000)
        .map(|i| 80.0 + 8.0 * (((i * 7919) % 2000) as f64 / 2000.0 - 0.5))
        .collect();
    let results = Results {
        samples: vec!["toy ttbar, 30000 events".into()],
        jets: &jets,
        leptons: Ok(&leptons),
        met: Err("no MET in this sample".into()),
        btag: calibrate_btag(&m.jets, 0.5).map_err(|e| e.to_string()),
        mass_peaks: vec![MassPeakEntry::measure("W", quarry_pdg::W_MASS, &masses).unwrap()],
    };
    let defaults = Defaults {
        electron: (0.01, 0.0001),
        muon: (0.015, 0.0001),
        met: (10.0, 0.5),
        btag: (0.5, 0.7, 0.01),
    };
    let file = CalibrationFile::from_results(
        &results,
        |_, eta| {
            let b = model.jet_bin(eta);
            (b.stochastic, b.noise, b.constant)
        },
        &defaults,
    );
    // The MET item could not be measured: defaults, marked.
    assert!(file.met.status.starts_with("default: no MET"));
    assert_eq!((file.met.floor, file.met.sqrt_sum_pt), (10.0, 0.5));
    assert_eq!(file.jet.len(), 6);
    assert!(file.jet.iter().all(|j| j.status == "measured"));
    let central = file.jet_entry("light", 0.3).unwrap();
    assert!((central.stochastic - 0.9).abs() < 4.0 * central.stochastic_error);
    let text = file.to_toml();
    assert_eq!(CalibrationFile::from_toml(&text).unwrap(), file);

    let broken = text.replacen("stochastic = ", "stochastic = -", 1);
    let err = CalibrationFile::from_toml(&broken).unwrap_err().to_string();
    assert!(
        err.contains("jet entry 0") && err.contains("stochastic"),
        "{err}"
    );
    let nan = text.replacen("floor = 10.0", "floor = nan", 1);
    assert!(CalibrationFile::from_toml(&nan)
        .unwrap_err()
        .to_string()
        .contains("met"));
    let dead = text.replacen("response_at_100_gev = ", "response_at_100_gev = -", 1);
    assert!(CalibrationFile::from_toml(&dead)
        .unwrap_err()
        .to_string()
        .contains("response"));
    let future = text.replacen("format = 1", "format = 2", 1);
    assert!(CalibrationFile::from_toml(&future).is_err());
}
