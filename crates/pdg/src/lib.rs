//! Physical constants used by quarry: masses, widths and branching ratios.
//!
//! **Design decision:** every constant quarry uses lives here and nowhere
//! else, so one test can compare all of them with the Particle Data Group's
//! machine-readable mass/width table (see `tests/` of this crate) and an
//! update of the table is a one-file change.
//!
//! Values are the PDG *Review of Particle Physics* (2024 edition) central
//! values, in GeV. They are defaults: an analysis should set the values its
//! own experiment's review prescribes.
//!
//! ```
//! use quarry_pdg::{W_MASS, TOP_MASS};
//! assert!(TOP_MASS > W_MASS);
//! ```
#![deny(missing_docs)]

/// W boson mass [GeV] (PDG 2024 world average).
pub const W_MASS: f64 = 80.3692;
/// W boson total width [GeV] (PDG 2024).
pub const W_WIDTH: f64 = 2.085;
/// Z boson mass [GeV] (PDG 2024).
pub const Z_MASS: f64 = 91.1880;
/// Z boson total width [GeV] (PDG 2024).
pub const Z_WIDTH: f64 = 2.4955;
/// Higgs boson mass [GeV] (PDG 2024).
pub const HIGGS_MASS: f64 = 125.20;
/// Higgs boson total width [GeV] (PDG 2024 value from off-shell
/// measurements, 3.7 MeV).
pub const HIGGS_WIDTH: f64 = 0.0037;
/// Top quark mass [GeV] (PDG 2024, direct measurements).
pub const TOP_MASS: f64 = 172.57;
/// Top quark total width [GeV] (PDG 2024).
pub const TOP_WIDTH: f64 = 1.42;
/// Bottom quark mass [GeV] (PDG 2024, MS-bar m_b(m_b)); used only as the
/// parton mass of a b quark in the toy generator.
pub const BOTTOM_MASS: f64 = 4.183;
/// Electron mass [GeV] (PDG 2024).
pub const ELECTRON_MASS: f64 = 0.000_510_998_950_69;
/// Muon mass [GeV] (PDG 2024).
pub const MUON_MASS: f64 = 0.105_658_375_5;
/// Tau mass [GeV] (PDG 2024).
pub const TAU_MASS: f64 = 1.776_93;

/// Branching ratios used by the toy generator (PDG 2024 central values).
pub mod branching {
    /// W → e ν.
    pub const W_TO_E_NU: f64 = 0.1071;
    /// W → μ ν.
    pub const W_TO_MU_NU: f64 = 0.1063;
    /// W → τ ν.
    pub const W_TO_TAU_NU: f64 = 0.1138;
    /// W → hadrons.
    pub const W_TO_HADRONS: f64 = 0.6741;
    /// Z → e⁺e⁻.
    pub const Z_TO_EE: f64 = 0.033_632;
    /// Z → μ⁺μ⁻.
    pub const Z_TO_MUMU: f64 = 0.033_662;
    /// Z → invisible (νν̄).
    pub const Z_TO_INVISIBLE: f64 = 0.2000;
    /// Z → hadrons.
    pub const Z_TO_HADRONS: f64 = 0.6991;
    /// Z → b b̄ (PDG 2024, Γ(b b̄)/Γ = 15.12 %); a part of
    /// [`Z_TO_HADRONS`]. Used by the toy generator to give hadronic Z decays
    /// their b-quark share.
    pub const Z_TO_BB: f64 = 0.1512;
    /// H → b b̄ (SM prediction at m_H = 125 GeV, LHC Higgs working group
    /// value as quoted by the PDG; from memory).
    pub const H_TO_BB: f64 = 0.582;
}
