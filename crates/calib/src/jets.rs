//! Jet energy response and resolution versus energy, per flavour and |η|
//! bin.

use serde::{Deserialize, Serialize};

use crate::binned::{binned_cores, fit_points, ResolutionPoint};
use crate::quadrature::{fit_quadrature, Form, Point, QuadratureFit};
use crate::{bin_of, Binning, CalibError, Measured, SkippedBin};

/// The jet flavours calibrated apart (b jets lose energy to neutrinos of
/// semileptonic b decays; common practice).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum JetFlavour {
    /// Jets from b quarks.
    Bottom,
    /// Light-quark and gluon jets.
    Light,
}

impl JetFlavour {
    /// `b` or `light`.
    pub fn name(self) -> &'static str {
        match self {
            JetFlavour::Bottom => "b",
            JetFlavour::Light => "light",
        }
    }
}

/// A reconstructed jet and the generator-level energy it should have
/// measured.
///
/// Invariants (checked by [`JetMatch::new`]): energies finite, true energy
/// > 0, measured energy ≥ 0, |η| finite, b-tag score finite.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct JetMatch {
    measured_energy: f64,
    true_energy: f64,
    abs_eta: f64,
    flavour: JetFlavour,
    btag: f64,
}

impl JetMatch {
    /// A matched jet; `None` if a value breaks the invariants.
    pub fn new(
        measured_energy: f64,
        true_energy: f64,
        eta: f64,
        flavour: JetFlavour,
        btag: f64,
    ) -> Option<JetMatch> {
        let ok = measured_energy.is_finite()
            && measured_energy >= 0.0
            && true_energy.is_finite()
            && true_energy > 0.0
            && eta.is_finite()
            && btag.is_finite();
        ok.then_some(JetMatch {
            measured_energy,
            true_energy,
            abs_eta: eta.abs(),
            flavour,
            btag,
        })
    }

    /// Measured energy \[GeV\].
    pub fn measured_energy(&self) -> f64 {
        self.measured_energy
    }

    /// Generator-level energy \[GeV\].
    pub fn true_energy(&self) -> f64 {
        self.true_energy
    }

    /// |η|.
    pub fn abs_eta(&self) -> f64 {
        self.abs_eta
    }

    /// Flavour from the truth.
    pub fn flavour(&self) -> JetFlavour {
        self.flavour
    }

    /// b-tag score.
    pub fn btag(&self) -> f64 {
        self.btag
    }
}

/// Response r(E) = r₀ + r₁·ln(E / 100 GeV), a weighted linear fit to the
/// bins' response.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ResponseFit {
    /// r₀: response at 100 GeV.
    pub at_100_gev: Measured,
    /// r₁: slope per unit of ln E.
    pub slope_per_log_e: Measured,
    /// Correlation of r₀ and r₁.
    pub correlation: f64,
    /// χ² of the fit.
    pub chi2: f64,
    /// Points − 2.
    pub ndf: usize,
}

impl ResponseFit {
    /// The fitted response at true energy `e` \[GeV\].
    pub fn eval(&self, e: f64) -> f64 {
        self.at_100_gev.value + self.slope_per_log_e.value * (e / 100.0).ln()
    }

    /// Weighted linear least squares of y on ln(x/100); `None` with fewer
    /// than three points or a degenerate design.
    pub fn fit(points: &[Point]) -> Option<ResponseFit> {
        if points.len() < 3 {
            return None;
        }
        let (mut s, mut sx, mut sxx, mut sy, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for p in points {
            let w = 1.0 / (p.error * p.error);
            let x = (p.x / 100.0).ln();
            s += w;
            sx += w * x;
            sxx += w * x * x;
            sy += w * p.y;
            sxy += w * x * p.y;
        }
        let det = s * sxx - sx * sx;
        if !(det > 0.0 && det.is_finite()) {
            return None;
        }
        let r0 = (sxx * sy - sx * sxy) / det;
        let r1 = (s * sxy - sx * sy) / det;
        let chi2 = points
            .iter()
            .map(|p| ((p.y - r0 - r1 * (p.x / 100.0).ln()) / p.error).powi(2))
            .sum();
        Some(ResponseFit {
            at_100_gev: Measured::new(r0, (sxx / det).sqrt()),
            slope_per_log_e: Measured::new(r1, (s / det).sqrt()),
            correlation: -sx / (s * sxx).sqrt(),
            chi2,
            ndf: points.len() - 2,
        })
    }
}

/// Response and resolution of one flavour in one |η| bin.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct JetGroup {
    /// The flavour.
    pub flavour: JetFlavour,
    /// Lower |η| edge.
    pub abs_eta_lo: f64,
    /// Upper |η| edge.
    pub abs_eta_hi: f64,
    /// Jets in this group (inside the energy range).
    pub n: usize,
    /// Estimated energy bins, ascending.
    pub points: Vec<ResolutionPoint>,
    /// Bins with too few entries or no core.
    pub skipped: Vec<SkippedBin>,
    /// The calorimeter-form fit of `points`' resolution, or why it failed.
    pub resolution_fit: Result<QuadratureFit, String>,
    /// The response fit, or why it failed.
    pub response_fit: Result<ResponseFit, String>,
}

/// Response and resolution for every (flavour, |η| bin) of `binning`, in
/// the order b then light, |η| ascending. Jets outside the |η| or
/// true-energy range are not used.
///
/// ```
/// use quarry_calib::{calibrate_jets, Binning, JetFlavour, JetMatch};
/// let jets: Vec<JetMatch> = (0..5000)
///     .map(|i| {
///         let e = 40.0 + (i % 100) as f64 * 10.0;
///         let z = ((i * 7919 % 1000) as f64 / 1000.0 - 0.5) * 0.2;
///         JetMatch::new(e * (0.97 + z), e, 0.3, JetFlavour::Light, 0.0).unwrap()
///     })
///     .collect();
/// let groups = calibrate_jets(&jets, &Binning::default()).unwrap();
/// let light_central = &groups[3];
/// assert_eq!(light_central.flavour, JetFlavour::Light);
/// assert!((light_central.points[0].core.center.value - 0.97).abs() < 0.01);
/// ```
pub fn calibrate_jets(jets: &[JetMatch], binning: &Binning) -> Result<Vec<JetGroup>, CalibError> {
    binning.validate()?;
    if jets.is_empty() {
        return Err(CalibError::Empty("jets"));
    }
    let n_eta = binning.jet_abs_eta.len() - 1;
    let n_e = binning.jet_energy.len() - 1;
    let mut groups = Vec::with_capacity(2 * n_eta);
    for flavour in [JetFlavour::Bottom, JetFlavour::Light] {
        // ratios[eta][energy] and the true energies, for the bin means.
        let mut ratios = vec![vec![Vec::new(); n_e]; n_eta];
        let mut energies = vec![vec![0.0; n_e]; n_eta];
        for j in jets.iter().filter(|j| j.flavour == flavour) {
            let (Some(ie), Some(ib)) = (
                bin_of(&binning.jet_abs_eta, j.abs_eta),
                bin_of(&binning.jet_energy, j.true_energy),
            ) else {
                continue;
            };
            ratios[ie][ib].push(j.measured_energy / j.true_energy);
            energies[ie][ib] += j.true_energy;
        }
        for ie in 0..n_eta {
            groups.push(group(flavour, binning, ie, &ratios[ie], &energies[ie]));
        }
    }
    Ok(groups)
}

fn group(
    flavour: JetFlavour,
    binning: &Binning,
    ie: usize,
    ratios: &[Vec<f64>],
    energy_sums: &[f64],
) -> JetGroup {
    let (points, skipped) = binned_cores(&binning.jet_energy, ratios, energy_sums, binning, true);
    let response_points: Vec<Point> = points
        .iter()
        .map(|p| Point {
            x: p.mean,
            y: p.core.center.value,
            error: p.core.center.error,
        })
        .collect();
    JetGroup {
        flavour,
        abs_eta_lo: binning.jet_abs_eta[ie],
        abs_eta_hi: binning.jet_abs_eta[ie + 1],
        n: ratios.iter().map(Vec::len).sum(),
        resolution_fit: fit_quadrature(Form::Calorimeter, &fit_points(&points))
            .map_err(|e| e.to_string()),
        response_fit: ResponseFit::fit(&response_points)
            .ok_or_else(|| format!("{} usable energy bins (need 3)", points.len())),
        points,
        skipped,
    }
}
