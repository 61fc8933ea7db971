//! Physical constants used by quarry: masses, widths and branching ratios.
//!
//! **Design decision:** every constant quarry uses lives here and nowhere
//! else, so one test can compare all of them with the Particle Data Group's
//! machine-readable mass/width table (see `tests/` of this crate) and an
//! update of the table is a one-file change.
//!
//! Masses and widths are the central values of the PDG *Review of Particle
//! Physics* **2026 edition** machine-readable mass/width table, in GeV — the
//! table the `particle` package (PyPI, version 1.1.0) ships, against which
//! `tests/pdg_table.rs` checks every one of them exactly. Branching ratios
//! are not in that table and remain PDG 2024 central values. All are
//! defaults: an analysis should set the values its own experiment's review
//! prescribes.
//!
//! ```
//! use quarry_pdg::{W_MASS, TOP_MASS};
//! assert!(TOP_MASS > W_MASS);
//! ```
#![deny(missing_docs)]

/// W boson mass \[GeV\] (PDG RPP 2026 table: 80.362 ± 0.008).
pub const W_MASS: f64 = 80.362;
/// W boson total width \[GeV\] (PDG RPP 2026 table: 2.14 ± 0.05).
pub const W_WIDTH: f64 = 2.14;
/// Z boson mass \[GeV\] (PDG RPP 2026 table: 91.1879 ± 0.0020).
pub const Z_MASS: f64 = 91.1879;
/// Z boson total width \[GeV\] (PDG RPP 2026 table: 2.4955 ± 0.0023).
pub const Z_WIDTH: f64 = 2.4955;
/// Higgs boson mass \[GeV\] (PDG RPP 2026 table: 125.13 ± 0.11).
pub const HIGGS_MASS: f64 = 125.13;
/// Higgs boson total width \[GeV\] (PDG RPP 2026 table: 3.0 +1.5 −0.7 MeV).
pub const HIGGS_WIDTH: f64 = 0.003;
/// Top quark mass \[GeV\] (PDG RPP 2026 table: 172.60 ± 0.27).
pub const TOP_MASS: f64 = 172.6;
/// Top quark total width \[GeV\] (PDG RPP 2026 table: 1.42 +0.19 −0.15).
pub const TOP_WIDTH: f64 = 1.42;
/// Bottom quark mass \[GeV\] (PDG RPP 2026 table: MS-bar m_b(m_b) =
/// 4.186 ± 0.006); used only as the parton mass of a b quark in the toy
/// generator.
pub const BOTTOM_MASS: f64 = 4.186;
/// Electron mass \[GeV\] (PDG RPP 2026 table).
pub const ELECTRON_MASS: f64 = 0.000_510_998_950_69;
/// Muon mass \[GeV\] (PDG RPP 2026 table).
pub const MUON_MASS: f64 = 0.105_658_375_5;
/// Tau mass \[GeV\] (PDG RPP 2026 table: 1.77693 ± 0.00009).
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
