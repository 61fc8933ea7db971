//! Lepton and MET resolutions and b-tag rates.

use quarry_event::Flavour;
use serde::{Deserialize, Serialize};

use crate::binned::{binned_cores, fit_points, ResolutionPoint};
use crate::binomial::Efficiency;
use crate::jets::{JetFlavour, JetMatch};
use crate::quadrature::{fit_quadrature, Form, QuadratureFit};
use crate::{bin_of, Binning, CalibError, SkippedBin};

/// A reconstructed charged lepton and its generator-level pt.
///
/// Invariants (checked by [`LeptonMatch::new`]): both pt finite, true pt > 0,
/// measured pt ≥ 0.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LeptonMatch {
    flavour: Flavour,
    measured_pt: f64,
    true_pt: f64,
}

impl LeptonMatch {
    /// A matched lepton; `None` if a value breaks the invariants.
    pub fn new(flavour: Flavour, measured_pt: f64, true_pt: f64) -> Option<LeptonMatch> {
        let ok =
            measured_pt.is_finite() && measured_pt >= 0.0 && true_pt.is_finite() && true_pt > 0.0;
        ok.then_some(LeptonMatch {
            flavour,
            measured_pt,
            true_pt,
        })
    }
}

/// Lepton pt response and resolution of one flavour.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LeptonGroup {
    /// `electron` or `muon`.
    pub flavour: String,
    /// Leptons inside the pt range.
    pub n: usize,
    /// Estimated bins.
    pub points: Vec<ResolutionPoint>,
    /// Bins not estimated, with the reason.
    pub skipped: Vec<SkippedBin>,
    /// Fit of σ(pt)/pt = c ⊕ k·pt, or why it failed.
    pub resolution_fit: Result<QuadratureFit, String>,
}

/// Lepton resolutions per flavour (electrons, then muons), in bins of true
/// pt: the core of pt_measured / pt_true, resolution σ/⟨ratio⟩, fitted
/// with σ(pt)/pt = c ⊕ k·pt.
pub fn calibrate_leptons(
    leptons: &[LeptonMatch],
    binning: &Binning,
) -> Result<Vec<LeptonGroup>, CalibError> {
    binning.validate()?;
    if leptons.is_empty() {
        return Err(CalibError::Empty("leptons"));
    }
    let mut out = Vec::new();
    for flavour in [Flavour::Electron, Flavour::Muon] {
        let n_bins = binning.lepton_pt.len() - 1;
        let mut ratios = vec![Vec::new(); n_bins];
        let mut sums = vec![0.0; n_bins];
        for l in leptons.iter().filter(|l| l.flavour == flavour) {
            if let Some(i) = bin_of(&binning.lepton_pt, l.true_pt) {
                ratios[i].push(l.measured_pt / l.true_pt);
                sums[i] += l.true_pt;
            }
        }
        let (points, skipped) = binned_cores(&binning.lepton_pt, &ratios, &sums, binning, true);
        let fit_points = fit_points(&points);
        out.push(LeptonGroup {
            flavour: flavour_name(flavour).to_string(),
            n: ratios.iter().map(Vec::len).sum(),
            resolution_fit: fit_quadrature(Form::Tracker, &fit_points).map_err(|e| e.to_string()),
            points,
            skipped,
        });
    }
    Ok(out)
}

fn flavour_name(f: Flavour) -> &'static str {
    match f {
        Flavour::Electron => "electron",
        Flavour::Muon => "muon",
    }
}

/// An event's measured MET, the true neutrino transverse momentum sum and
/// the scalar sum of its jets' pt.
///
/// Invariants (checked by [`MetMatch::new`]): all finite, sum ≥ 0.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MetMatch {
    measured: [f64; 2],
    neutrinos: [f64; 2],
    sum_jet_pt: f64,
}

impl MetMatch {
    /// A matched MET; `None` if a value breaks the invariants.
    pub fn new(measured: [f64; 2], neutrinos: [f64; 2], sum_jet_pt: f64) -> Option<MetMatch> {
        let ok = measured.iter().chain(&neutrinos).all(|x| x.is_finite())
            && sum_jet_pt.is_finite()
            && sum_jet_pt >= 0.0;
        ok.then_some(MetMatch {
            measured,
            neutrinos,
            sum_jet_pt,
        })
    }
}

/// MET resolution per component versus the scalar jet pt sum.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MetCalibration {
    /// Events inside the Σ pt range.
    pub n_events: usize,
    /// Estimated bins (each pools the x and y residuals: two per event).
    pub points: Vec<ResolutionPoint>,
    /// Bins not estimated.
    pub skipped: Vec<SkippedBin>,
    /// Fit of σ = floor ⊕ s·√(Σ jet pt), or why it failed.
    pub resolution_fit: Result<QuadratureFit, String>,
}

/// MET resolution: in bins of the scalar jet pt sum, the core σ of the
/// residuals MET_x − Σν_x and MET_y − Σν_y (pooled), fitted with
/// σ = floor ⊕ s·√(Σ jet pt).
pub fn calibrate_met(events: &[MetMatch], binning: &Binning) -> Result<MetCalibration, CalibError> {
    binning.validate()?;
    if events.is_empty() {
        return Err(CalibError::Empty("events with MET"));
    }
    let n_bins = binning.met_sum_pt.len() - 1;
    let mut residuals = vec![Vec::new(); n_bins];
    let mut sums = vec![0.0; n_bins];
    let mut n_events = 0;
    for m in events {
        if let Some(i) = bin_of(&binning.met_sum_pt, m.sum_jet_pt) {
            residuals[i].push(m.measured[0] - m.neutrinos[0]);
            residuals[i].push(m.measured[1] - m.neutrinos[1]);
            // Each event counts twice in the pooled list; so does its sum.
            sums[i] += 2.0 * m.sum_jet_pt;
            n_events += 1;
        }
    }
    let (points, skipped) = binned_cores(&binning.met_sum_pt, &residuals, &sums, binning, false);
    let fit_points = fit_points(&points);
    Ok(MetCalibration {
        n_events,
        resolution_fit: fit_quadrature(Form::SqrtSum, &fit_points).map_err(|e| e.to_string()),
        points,
        skipped,
    })
}

/// b-tag efficiency and mistag rate at one working point.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct BTagRates {
    /// Score above which a jet is tagged.
    pub working_point: f64,
    /// Fraction of b jets tagged.
    pub b_efficiency: Efficiency,
    /// Fraction of light jets tagged.
    pub mistag: Efficiency,
}

/// Efficiency and mistag rate: the fraction of b (light) jets whose score
/// exceeds `working_point`, with 68.27 % Clopper–Pearson intervals. `Err`
/// when either flavour has no jets.
pub fn calibrate_btag(jets: &[JetMatch], working_point: f64) -> Result<BTagRates, CalibError> {
    let count = |flavour: JetFlavour| {
        let mut k = 0;
        let mut n = 0;
        for j in jets.iter().filter(|j| j.flavour() == flavour) {
            n += 1;
            if j.btag() > working_point {
                k += 1;
            }
        }
        Efficiency::new(k, n)
    };
    Ok(BTagRates {
        working_point,
        b_efficiency: count(JetFlavour::Bottom).ok_or(CalibError::Empty("b jets"))?,
        mistag: count(JetFlavour::Light).ok_or(CalibError::Empty("light jets"))?,
    })
}
