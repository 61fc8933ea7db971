//! The detector resolution model: how precisely each object is measured.
//!
//! The kinematic fit weights each measured quantity by these resolutions, and
//! the toy generator smears partons with the *same* model, so a fit of toy
//! events is a closed test of the fit itself.
//!
//! **Design decision:** the model is plain data (serde + TOML) with no
//! behaviour beyond evaluating σ, so an analysis replaces the defaults with
//! its own calibration by editing a file, not code.
//!
//! # Model
//! - Jets: calorimeter form σ(E)/E = a/√E ⊕ b/E ⊕ c (⊕ = sum in quadrature;
//!   Fabjan and Gianotti, Rev. Mod. Phys. 75 (2003) 1243), in |η| bins.
//! - Electrons and muons: σ(pt)/pt = c ⊕ k·pt, in one |η| range.
//! - MET: the per-event covariance when the input has one; else a diagonal
//!   covariance with σx = σy = floor ⊕ s·√(Σ jet pt).
//!
//! The default coefficients are typical values for a general-purpose LHC
//! detector, **from memory**, not any experiment's calibration; they are a
//! starting point only.
//!
//! ```
//! use quarry_resolution::ResolutionModel;
//! let model = ResolutionModel::default();
//! let sigma = model.jet_energy_sigma(100.0, 0.5);
//! assert!(sigma > 5.0 && sigma < 20.0);
//! ```
#![deny(missing_docs)]

use quarry_event::{Flavour, Met};
use serde::{Deserialize, Serialize};

/// Jet energy resolution in one |η| bin: σ(E)/E = a/√E ⊕ b/E ⊕ c.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct JetBin {
    /// Upper edge of the bin in |η|; bins are checked in increasing order.
    pub abs_eta_max: f64,
    /// Stochastic term a \[√GeV\].
    pub stochastic: f64,
    /// Noise term b \[GeV\].
    pub noise: f64,
    /// Constant term c (dimensionless).
    pub constant: f64,
}

impl JetBin {
    /// σ(E) in GeV for energy `e` in GeV.
    ///
    /// ```
    /// use quarry_resolution::JetBin;
    /// let bin = JetBin { abs_eta_max: 2.5, stochastic: 1.0, noise: 0.0, constant: 0.0 };
    /// assert!((bin.sigma(100.0) - 10.0).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn sigma(&self, e: f64) -> f64 {
        let e = e.max(1e-3);
        let rel2 = self.stochastic * self.stochastic / e
            + (self.noise / e) * (self.noise / e)
            + self.constant * self.constant;
        e * rel2.sqrt()
    }
}

/// Lepton transverse-momentum resolution: σ(pt)/pt = c ⊕ k·pt.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct LeptonResolution {
    /// Constant relative term c.
    pub constant: f64,
    /// Term growing with pt, k \[1/GeV\] (tracker curvature resolution).
    pub per_gev: f64,
}

impl LeptonResolution {
    /// σ(pt) in GeV.
    ///
    /// ```
    /// use quarry_resolution::LeptonResolution;
    /// let r = LeptonResolution { constant: 0.01, per_gev: 0.0 };
    /// assert!((r.sigma(50.0) - 0.5).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn sigma(&self, pt: f64) -> f64 {
        let pt = pt.max(1e-3);
        pt * self.constant.hypot(self.per_gev * pt)
    }
}

/// MET resolution used when the input has no per-event covariance.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct MetResolution {
    /// Floor of σ per component \[GeV\] (pile-up and soft terms).
    pub floor: f64,
    /// Coefficient s \[√GeV\] multiplying √(Σ jet pt).
    pub sqrt_sum_pt: f64,
}

/// The full resolution model. Not `Copy` (it owns its jet bins); build it
/// once and share it by reference.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ResolutionModel {
    /// Jet energy resolution bins in increasing |η|; the last bin also serves
    /// |η| beyond its edge.
    pub jet: Vec<JetBin>,
    /// Electron pt resolution.
    pub electron: LeptonResolution,
    /// Muon pt resolution.
    pub muon: LeptonResolution,
    /// MET resolution without per-event covariance.
    pub met: MetResolution,
}

impl Default for ResolutionModel {
    /// Typical general-purpose-detector values, from memory (see the crate
    /// docs): jets a = 0.9/1.1/1.4 √GeV, b = 4/5/6 GeV, c = 0.04/0.05/0.06 in
    /// |η| < 1.3 / 2.5 / beyond; electrons 1 % ⊕ 0.01 %·pt; muons 1.5 % ⊕
    /// 0.01 %·pt; MET 10 GeV ⊕ 0.5 √GeV·√(Σ jet pt).
    fn default() -> Self {
        ResolutionModel {
            jet: vec![
                JetBin {
                    abs_eta_max: 1.3,
                    stochastic: 0.9,
                    noise: 4.0,
                    constant: 0.04,
                },
                JetBin {
                    abs_eta_max: 2.5,
                    stochastic: 1.1,
                    noise: 5.0,
                    constant: 0.05,
                },
                JetBin {
                    abs_eta_max: 5.0,
                    stochastic: 1.4,
                    noise: 6.0,
                    constant: 0.06,
                },
            ],
            electron: LeptonResolution {
                constant: 0.01,
                per_gev: 0.0001,
            },
            muon: LeptonResolution {
                constant: 0.015,
                per_gev: 0.0001,
            },
            met: MetResolution {
                floor: 10.0,
                sqrt_sum_pt: 0.5,
            },
        }
    }
}

/// Why a resolution model could not be loaded.
#[derive(Debug, thiserror::Error)]
pub enum ResolutionError {
    /// The TOML text did not parse or did not match the model's fields.
    #[error("resolution model: {0}")]
    Toml(#[from] toml::de::Error),
    /// A value is out of range.
    #[error("resolution model: {0}")]
    Invalid(String),
}

impl ResolutionModel {
    /// Parses a model from TOML (the format [`to_toml`](Self::to_toml)
    /// writes) and validates it.
    ///
    /// ```
    /// use quarry_resolution::ResolutionModel;
    /// let text = ResolutionModel::default().to_toml();
    /// assert_eq!(ResolutionModel::from_toml(&text).unwrap(), ResolutionModel::default());
    /// ```
    pub fn from_toml(text: &str) -> Result<ResolutionModel, ResolutionError> {
        let model: ResolutionModel = toml::from_str(text)?;
        model.validate()?;
        Ok(model)
    }

    /// The model as editable TOML.
    ///
    /// ```
    /// assert!(quarry_resolution::ResolutionModel::default().to_toml().contains("stochastic"));
    /// ```
    pub fn to_toml(&self) -> String {
        toml::to_string_pretty(self).unwrap_or_default()
    }

    /// Checks that there is at least one jet bin, bins increase in |η|, and
    /// every coefficient is finite and non-negative with a positive total.
    ///
    /// ```
    /// let mut m = quarry_resolution::ResolutionModel::default();
    /// m.jet.clear();
    /// assert!(m.validate().is_err());
    /// ```
    pub fn validate(&self) -> Result<(), ResolutionError> {
        let bad = |what: &str| Err(ResolutionError::Invalid(what.to_string()));
        if self.jet.is_empty() {
            return bad("at least one [[jet]] bin is required");
        }
        let ok = |x: f64| x.is_finite() && x >= 0.0;
        let mut last = 0.0;
        for (i, b) in self.jet.iter().enumerate() {
            if !(ok(b.abs_eta_max) && b.abs_eta_max > last) {
                return bad(&format!(
                    "jet bin {i}: abs_eta_max must increase and be positive"
                ));
            }
            last = b.abs_eta_max;
            if !(ok(b.stochastic) && ok(b.noise) && ok(b.constant))
                || b.stochastic + b.noise + b.constant == 0.0
            {
                return bad(&format!(
                    "jet bin {i}: coefficients must be finite, >= 0, not all 0"
                ));
            }
        }
        for (name, r) in [("electron", self.electron), ("muon", self.muon)] {
            if !(ok(r.constant) && ok(r.per_gev)) || r.constant + r.per_gev == 0.0 {
                return bad(&format!(
                    "{name}: coefficients must be finite, >= 0, not both 0"
                ));
            }
        }
        if !(ok(self.met.floor) && ok(self.met.sqrt_sum_pt)) || self.met.floor == 0.0 {
            return bad("met: floor must be > 0 and sqrt_sum_pt >= 0");
        }
        Ok(())
    }

    /// The jet bin serving pseudorapidity `eta`.
    ///
    /// ```
    /// let m = quarry_resolution::ResolutionModel::default();
    /// assert_eq!(m.jet_bin(-2.0).abs_eta_max, 2.5);
    /// assert_eq!(m.jet_bin(9.0).abs_eta_max, 5.0);
    /// ```
    #[inline]
    pub fn jet_bin(&self, eta: f64) -> &JetBin {
        let a = eta.abs();
        self.jet
            .iter()
            .find(|b| a < b.abs_eta_max)
            .unwrap_or_else(|| self.jet.last().expect("validated: at least one bin"))
    }

    /// σ(E) \[GeV\] of a jet with energy `e` \[GeV\] at pseudorapidity `eta`.
    ///
    /// ```
    /// let m = quarry_resolution::ResolutionModel::default();
    /// assert!(m.jet_energy_sigma(200.0, 0.0) < m.jet_energy_sigma(200.0, 2.0));
    /// ```
    #[inline]
    pub fn jet_energy_sigma(&self, e: f64, eta: f64) -> f64 {
        self.jet_bin(eta).sigma(e)
    }

    /// σ(pt) \[GeV\] of a charged lepton.
    ///
    /// ```
    /// use quarry_event::Flavour;
    /// let m = quarry_resolution::ResolutionModel::default();
    /// assert!(m.lepton_pt_sigma(Flavour::Muon, 50.0) > 0.0);
    /// ```
    #[inline]
    pub fn lepton_pt_sigma(&self, flavour: Flavour, pt: f64) -> f64 {
        match flavour {
            Flavour::Electron => self.electron.sigma(pt),
            Flavour::Muon => self.muon.sigma(pt),
        }
    }

    /// MET covariance `[xx, xy, yy]` \[GeV²\]: the event's own if present,
    /// else the model's diagonal one for the given Σ jet pt \[GeV\].
    ///
    /// ```
    /// use quarry_event::Met;
    /// let m = quarry_resolution::ResolutionModel::default();
    /// let c = m.met_covariance(&Met::new(10.0, 0.0), 400.0);
    /// assert!((c[0] - 200.0).abs() < 1e-9 && c[1] == 0.0);
    /// ```
    #[inline]
    pub fn met_covariance(&self, met: &Met, sum_jet_pt: f64) -> [f64; 3] {
        if let Some(cov) = met.cov {
            return cov;
        }
        let s = self.met_sigma(sum_jet_pt);
        [s * s, 0.0, s * s]
    }

    /// σ per MET component \[GeV\] from the model, for Σ jet pt \[GeV\].
    ///
    /// ```
    /// let m = quarry_resolution::ResolutionModel::default();
    /// assert!((m.met_sigma(0.0) - 10.0).abs() < 1e-12);
    /// ```
    #[inline]
    pub fn met_sigma(&self, sum_jet_pt: f64) -> f64 {
        self.met
            .floor
            .hypot(self.met.sqrt_sum_pt * sum_jet_pt.max(0.0).sqrt())
    }
}
