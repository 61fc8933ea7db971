//! Checks of the resolution model's formulas and its TOML form.

use quarry_event::{Flavour, Met};
use quarry_resolution::{JetBin, LeptonResolution, ResolutionModel};

/// σ(E)/E = a/√E ⊕ b/E ⊕ c, the calorimeter form of Fabjan and Gianotti,
/// Rev. Mod. Phys. 75 (2003) 1243, evaluated by hand:
/// a = 0.9, b = 4, c = 0.04 at E = 100 GeV:
///   a/√E = 0.09, b/E = 0.04, c = 0.04
///   σ/E = sqrt(0.0081 + 0.0016 + 0.0016) = sqrt(0.0113) = 0.106301...
///   σ = 10.6301 GeV.
#[test]
fn calorimeter_form_by_hand() {
    let bin = JetBin {
        abs_eta_max: 1.3,
        stochastic: 0.9,
        noise: 4.0,
        constant: 0.04,
    };
    let expected = 100.0 * 0.0113f64.sqrt();
    assert!((bin.sigma(100.0) - expected).abs() < 1e-12);
    // The stochastic term dominates at low energy, the constant term at high
    // energy: σ/E falls with E and tends to c.
    let rel = |e: f64| bin.sigma(e) / e;
    assert!(rel(20.0) > rel(200.0));
    assert!((rel(1.0e7) - 0.04).abs() < 1e-3);
}

#[test]
fn eta_bins_are_chosen_by_abs_eta() {
    let m = ResolutionModel::default();
    assert_eq!(m.jet_bin(0.0).abs_eta_max, 1.3);
    assert_eq!(m.jet_bin(-1.29).abs_eta_max, 1.3);
    assert_eq!(m.jet_bin(1.3).abs_eta_max, 2.5);
    assert_eq!(m.jet_bin(-4.0).abs_eta_max, 5.0);
    assert_eq!(m.jet_bin(f64::INFINITY).abs_eta_max, 5.0);
}

/// σ(pt)/pt = c ⊕ k·pt by hand: c = 0.015, k = 1e-4 /GeV at pt = 150 GeV:
/// k·pt = 0.015, so σ/pt = 0.015·√2 and σ = 2.25·√2 = 3.18198 GeV.
#[test]
fn lepton_resolution_by_hand() {
    let r = LeptonResolution {
        constant: 0.015,
        per_gev: 1e-4,
    };
    assert!((r.sigma(150.0) - 2.25 * 2f64.sqrt()).abs() < 1e-12);
    let m = ResolutionModel::default();
    assert_eq!(m.lepton_pt_sigma(Flavour::Muon, 150.0), m.muon.sigma(150.0));
    assert_eq!(
        m.lepton_pt_sigma(Flavour::Electron, 150.0),
        m.electron.sigma(150.0)
    );
}

#[test]
fn met_covariance_prefers_the_events_own() {
    let m = ResolutionModel::default();
    let mut met = Met::new(20.0, 5.0);
    // Model: σ = 10 ⊕ 0.5·√900 = 10 ⊕ 15 = √325 GeV per component.
    let c = m.met_covariance(&met, 900.0);
    assert!((c[0] - 325.0).abs() < 1e-9 && (c[2] - 325.0).abs() < 1e-9 && c[1] == 0.0);
    met.cov = Some([400.0, 30.0, 250.0]);
    assert_eq!(m.met_covariance(&met, 900.0), [400.0, 30.0, 250.0]);
}

#[test]
fn toml_round_trip_and_edits() {
    let text = ResolutionModel::default().to_toml();
    let edited = text.replacen("stochastic = 0.9", "stochastic = 0.7", 1);
    let m = ResolutionModel::from_toml(&edited).unwrap();
    assert_eq!(m.jet[0].stochastic, 0.7);
    assert_eq!(m.jet[1], ResolutionModel::default().jet[1]);
}

#[test]
fn invalid_models_are_explained() {
    let mut m = ResolutionModel::default();
    m.jet[1].abs_eta_max = 1.0;
    let err = m.validate().unwrap_err().to_string();
    assert!(err.contains("jet bin 1"), "{err}");

    let mut m = ResolutionModel::default();
    m.muon.constant = f64::NAN;
    assert!(m.validate().unwrap_err().to_string().contains("muon"));

    let mut m = ResolutionModel::default();
    m.met.floor = 0.0;
    assert!(m.validate().unwrap_err().to_string().contains("met"));

    let err = ResolutionModel::from_toml("jet = 3")
        .unwrap_err()
        .to_string();
    assert!(err.starts_with("resolution model:"), "{err}");
}
