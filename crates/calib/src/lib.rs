//! Calibration from the user's own simulation: jet energy response and
//! resolution, lepton and MET resolutions and b-tag rates, measured from
//! truth-matched simulated objects.
//!
//! Every width the χ² and the kinematic fit use, and both b-tag rates of
//! the weighted mode, are otherwise typical values from memory
//! (`quarry-resolution`, the presets). This crate measures them on the
//! detector that produced the user's simulation.
//!
//! **Design decision:** the estimators work on plain *matched pairs* (a
//! measured object and the generator-level quantity it should have
//! measured: [`JetMatch`], [`LeptonMatch`], [`MetMatch`]), not on events or
//! files. Whoever knows the truth builds the pairs — the toy generator's
//! parton record in tests, truth columns of an input file in the command
//! line — and the estimators stay testable in memory and independent of any
//! format.
//!
//! # Estimators
//! - **Core estimate** ([`CoreEstimate`]): the iterative ±2σ Gaussian core
//!   of `quarry_eval::stats::gaussian_core` (not quantiles), with
//!   statistical errors that account for the window following its own
//!   estimate, and the fractions beyond ±2.5σ (the *tails*), with the
//!   excess over a Gaussian's.
//! - **Jets** ([`calibrate_jets`]): in each (flavour b / light, |η| bin,
//!   true-energy bin) the core of R = E_measured / E_true gives the
//!   *response* (the core centre) and the *relative resolution* after
//!   response correction, σ_R / ⟨R⟩. The points are fitted with the
//!   calorimeter form σ(E)/E = a/√E ⊕ b/E ⊕ c (Fabjan and Gianotti, Rev.
//!   Mod. Phys. 75 (2003) 1243) ([`fit_quadrature`]) and the response with
//!   r(E) = r₀ + r₁·ln(E / 100 GeV) ([`ResponseFit`]).
//! - **Leptons** ([`calibrate_leptons`]): per flavour, the core of
//!   pt_measured / pt_true in true-pt bins, fitted with σ(pt)/pt = c ⊕ k·pt.
//! - **MET** ([`calibrate_met`]): the core width of each component of
//!   MET − Σ true neutrino pt, in bins of the event's scalar jet pt sum,
//!   fitted with σ = floor ⊕ s·√(Σ jet pt).
//! - **b-tag** ([`calibrate_btag`]): efficiency for b jets and mistag rate
//!   for other jets above the working point, with Clopper–Pearson intervals
//!   ([`Efficiency`]).
//!
//! Every number carries its statistical uncertainty ([`Measured`]) and the
//! sample size it came from; a bin with fewer than
//! [`Binning::min_entries`] entries is reported as skipped, never fitted.
//!
//! # Limits
//! The errors of the core estimate assume a Gaussian core. The energy bins
//! have a finite width; the resolution of a bin is attributed to its mean
//! true energy. Objects selected on their *measured* momentum near a
//! threshold bias the lowest bins (down-fluctuations are lost): keep the
//! lowest true-energy edge well above the selection threshold.
//!
//! ```
//! use quarry_calib::{calibrate_btag, JetFlavour, JetMatch};
//! let jets = [
//!     JetMatch::new(100.0, 100.0, 0.2, JetFlavour::Bottom, 0.9).unwrap(),
//!     JetMatch::new(50.0, 50.0, 1.2, JetFlavour::Light, 0.1).unwrap(),
//! ];
//! let rates = calibrate_btag(&jets, 0.5).unwrap();
//! assert_eq!(rates.b_efficiency.value, 1.0);
//! assert_eq!(rates.mistag.value, 0.0);
//! ```
#![deny(missing_docs)]

mod binned;
pub mod binomial;
mod core;
pub mod file;
mod jets;
mod objects;
mod quadrature;

pub use binned::ResolutionPoint;
pub use binomial::Efficiency;
pub use core::{CoreEstimate, CENTER_FEEDBACK, GAUSSIAN_TAIL, TAIL_SIGMAS, WIDTH_FEEDBACK};
pub use jets::{calibrate_jets, JetFlavour, JetGroup, JetMatch, ResponseFit};
pub use objects::{
    calibrate_btag, calibrate_leptons, calibrate_met, BTagRates, LeptonGroup, LeptonMatch,
    MetCalibration, MetMatch,
};
pub use quadrature::{fit_quadrature, FitError, Form, Point, QuadratureFit, MAX_ITERATIONS};

use serde::{Deserialize, Serialize};

/// A value with its statistical uncertainty (one standard deviation).
///
/// Invariant: `error >= 0` (not checked on construction; every estimator
/// here produces finite values and non-negative errors or no result).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Measured {
    /// The value.
    pub value: f64,
    /// Its statistical uncertainty.
    pub error: f64,
}

impl Measured {
    /// `value ± error`.
    pub fn new(value: f64, error: f64) -> Measured {
        Measured { value, error }
    }

    /// (self − expected) / error: how many standard deviations apart.
    ///
    /// ```
    /// assert_eq!(quarry_calib::Measured::new(1.2, 0.1).pull(1.0).round(), 2.0);
    /// ```
    pub fn pull(&self, expected: f64) -> f64 {
        (self.value - expected) / self.error
    }
}

impl std::fmt::Display for Measured {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{} ± {}", self.value, self.error)
    }
}

/// The bins the estimators use. Edges ascend; a value `v` belongs to bin
/// `i` when `edges[i] <= v < edges[i + 1]`; values outside are not used.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Binning {
    /// |η| edges of the jet bins (from 0). Default 0, 1.3, 2.5, 5.0 (the
    /// default resolution model's bins).
    pub jet_abs_eta: Vec<f64>,
    /// True jet energy edges \[GeV\]. Default 20 bins evenly spaced in
    /// ln E from 30 GeV to 3 TeV.
    pub jet_energy: Vec<f64>,
    /// True lepton pt edges \[GeV\]. Default 12 bins, log-spaced, 25 GeV to
    /// 1.5 TeV.
    pub lepton_pt: Vec<f64>,
    /// Scalar jet pt sum edges \[GeV\]. Default 0, 100, 200, … 1000, 1250,
    /// 1500, 2000, 3000.
    pub met_sum_pt: Vec<f64>,
    /// Fewest entries for a bin to be estimated. Default 200.
    pub min_entries: usize,
}

impl Default for Binning {
    fn default() -> Self {
        Binning {
            jet_abs_eta: vec![0.0, 1.3, 2.5, 5.0],
            jet_energy: log_edges(30.0, 3000.0, 20),
            lepton_pt: log_edges(25.0, 1500.0, 12),
            met_sum_pt: vec![
                0.0, 100.0, 200.0, 300.0, 400.0, 500.0, 600.0, 700.0, 800.0, 1000.0, 1250.0,
                1500.0, 2000.0, 3000.0,
            ],
            min_entries: 200,
        }
    }
}

/// `n` bins evenly spaced in ln x from `lo` to `hi` (n + 1 edges).
///
/// ```
/// let e = quarry_calib::log_edges(10.0, 1000.0, 2);
/// assert!((e[1] - 100.0).abs() < 1e-9 && e.len() == 3);
/// ```
pub fn log_edges(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    let r = (hi / lo).ln() / n as f64;
    (0..=n).map(|i| lo * (r * i as f64).exp()).collect()
}

/// The bin of `v` among ascending `edges`, if inside.
fn bin_of(edges: &[f64], v: f64) -> Option<usize> {
    if edges.len() < 2 || !(v >= edges[0] && v < edges[edges.len() - 1]) {
        return None;
    }
    Some(edges.partition_point(|&e| e <= v) - 1)
}

/// Why a bin was not estimated.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SkippedBin {
    /// Lower edge.
    pub lo: f64,
    /// Upper edge.
    pub hi: f64,
    /// Entries in the bin.
    pub n: usize,
    /// Why.
    pub reason: String,
}

/// Why a calibration could not be made at all.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum CalibError {
    /// No matched objects of the kind were given.
    #[error("no {0} to calibrate from")]
    Empty(&'static str),
    /// The binning is unusable.
    #[error("binning: {0}")]
    Binning(String),
}

impl Binning {
    /// Checks that every edge list ascends strictly with at least two
    /// finite, non-negative edges.
    pub fn validate(&self) -> Result<(), CalibError> {
        for (name, edges) in [
            ("jet_abs_eta", &self.jet_abs_eta),
            ("jet_energy", &self.jet_energy),
            ("lepton_pt", &self.lepton_pt),
            ("met_sum_pt", &self.met_sum_pt),
        ] {
            let ok = edges.len() >= 2
                && edges.iter().all(|e| e.is_finite() && *e >= 0.0)
                && edges.windows(2).all(|w| w[0] < w[1]);
            if !ok {
                return Err(CalibError::Binning(format!(
                    "{name} needs at least two finite, non-negative, strictly ascending edges"
                )));
            }
        }
        if self.min_entries < 20 {
            return Err(CalibError::Binning(
                "min_entries below 20 gives no usable core estimate".to_string(),
            ));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bin_of_edges() {
        let e = [0.0, 1.0, 2.0];
        assert_eq!(bin_of(&e, 0.0), Some(0));
        assert_eq!(bin_of(&e, 1.0), Some(1));
        assert_eq!(bin_of(&e, 1.999), Some(1));
        assert_eq!(bin_of(&e, 2.0), None);
        assert_eq!(bin_of(&e, -0.1), None);
        assert_eq!(bin_of(&e, f64::NAN), None);
    }

    #[test]
    fn default_binning_is_valid_and_bad_one_is_not() {
        assert!(Binning::default().validate().is_ok());
        let b = Binning {
            jet_energy: vec![100.0, 50.0],
            ..Binning::default()
        };
        assert!(b.validate().is_err());
    }
}
