//! The generator's configuration: plain serde data, loadable from TOML.

use quarry_pdg::{BOTTOM_MASS, HIGGS_MASS, TOP_MASS, W_MASS, Z_MASS};
use quarry_resolution::{ResolutionError, ResolutionModel};
use serde::{Deserialize, Serialize};

/// Why a configuration was rejected.
#[derive(Debug, thiserror::Error)]
pub enum ToyError {
    /// The TOML text did not parse or did not match the configuration's
    /// fields.
    #[error("toy configuration: {0}")]
    Toml(#[from] toml::de::Error),
    /// The resolution model inside the configuration is invalid.
    #[error("toy configuration: {0}")]
    Resolution(#[from] ResolutionError),
    /// A value is out of range; the text says which and why.
    #[error("toy configuration: {0}")]
    Invalid(String),
}

fn invalid<T>(text: String) -> Result<T, ToyError> {
    Err(ToyError::Invalid(text))
}

/// Which heavy quark is pair-produced. The partner fixes the allowed decay
/// modes and the charges of the W bosons (hence of the leptons).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Partner {
    /// Up-type vector-like quark T (charge +2/3): T → bW⁺, tZ, tH.
    UpType,
    /// Down-type vector-like quark B (charge −1/3): B → tW⁻, bZ, bH.
    DownType,
    /// Charge-5/3 quark X: X → tW⁺ (two same-sign W per side).
    ChargeFiveThirds,
    /// Excited top quark t*: t* → t g.
    ExcitedTop,
}

impl std::fmt::Display for Partner {
    /// The physics name, for messages.
    ///
    /// ```
    /// assert_eq!(
    ///     quarry_toy::Partner::UpType.to_string(),
    ///     "up-type vector-like quark T"
    /// );
    /// ```
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Partner::UpType => "up-type vector-like quark T",
            Partner::DownType => "down-type vector-like quark B",
            Partner::ChargeFiveThirds => "charge-5/3 quark X",
            Partner::ExcitedTop => "excited top quark t*",
        })
    }
}

impl Partner {
    /// The names of the decay modes this partner allows, comma-separated.
    fn allowed_names(self) -> String {
        DecayMode::ALL
            .into_iter()
            .filter(|m| self.allows(*m))
            .map(|m| m.name())
            .collect::<Vec<_>>()
            .join(", ")
    }

    /// The decay modes this partner may have.
    ///
    /// ```
    /// use quarry_toy::{DecayMode, Partner};
    /// assert!(Partner::DownType.allows(DecayMode::TopW));
    /// assert!(!Partner::DownType.allows(DecayMode::BottomW));
    /// ```
    pub fn allows(self, mode: DecayMode) -> bool {
        use DecayMode::*;
        matches!(
            (self, mode),
            (Partner::UpType, BottomW | TopZ | TopHiggs)
                | (Partner::DownType, TopW | BottomZ | BottomHiggs)
                | (Partner::ChargeFiveThirds, TopW)
                | (Partner::ExcitedTop, TopGluon)
        )
    }

    /// Branching fractions of a weak-singlet partner at high mass:
    /// 50 % / 25 % / 25 % for (bW, tZ, tH) or (tW, bZ, bH) — common practice
    /// (the Goldstone-equivalence limit); 100 % tW for the charge-5/3 quark
    /// and 100 % tg for the excited top.
    ///
    /// ```
    /// use quarry_toy::Partner;
    /// assert_eq!(Partner::UpType.singlet_branching().b_w, 0.5);
    /// ```
    pub fn singlet_branching(self) -> Branching {
        let zero = Branching::default();
        match self {
            Partner::UpType => Branching {
                b_w: 0.5,
                t_z: 0.25,
                t_h: 0.25,
                ..zero
            },
            Partner::DownType => Branching {
                t_w: 0.5,
                b_z: 0.25,
                b_h: 0.25,
                ..zero
            },
            Partner::ChargeFiveThirds => Branching { t_w: 1.0, ..zero },
            Partner::ExcitedTop => Branching { t_g: 1.0, ..zero },
        }
    }

    /// Sign of the W charge in the particle's (not the antiparticle's) decay
    /// modes with a W: +1 for T → bW⁺ and X → tW⁺, −1 for B → tW⁻.
    pub(crate) fn w_sign(self) -> i8 {
        match self {
            Partner::DownType => -1,
            _ => 1,
        }
    }
}

/// A two-body decay mode of the heavy quark.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum DecayMode {
    /// b W.
    BottomW,
    /// t Z.
    TopZ,
    /// t H.
    TopHiggs,
    /// t W.
    TopW,
    /// b Z.
    BottomZ,
    /// b H.
    BottomHiggs,
    /// t g (excited top).
    TopGluon,
}

impl DecayMode {
    /// Every mode, in a fixed order.
    pub const ALL: [DecayMode; 7] = [
        DecayMode::BottomW,
        DecayMode::TopZ,
        DecayMode::TopHiggs,
        DecayMode::TopW,
        DecayMode::BottomZ,
        DecayMode::BottomHiggs,
        DecayMode::TopGluon,
    ];

    /// Short trade notation: `bW`, `tZ`, `tH`, `tW`, `bZ`, `bH`, `tg`.
    ///
    /// ```
    /// assert_eq!(quarry_toy::DecayMode::TopZ.name(), "tZ");
    /// ```
    pub fn name(self) -> &'static str {
        match self {
            DecayMode::BottomW => "bW",
            DecayMode::TopZ => "tZ",
            DecayMode::TopHiggs => "tH",
            DecayMode::TopW => "tW",
            DecayMode::BottomZ => "bZ",
            DecayMode::BottomHiggs => "bH",
            DecayMode::TopGluon => "tg",
        }
    }

    /// Sum of the nominal (pole) masses of the two daughters (GeV): the
    /// heavy quark must be heavier than this.
    ///
    /// ```
    /// use quarry_toy::DecayMode;
    /// assert!(DecayMode::TopZ.threshold() > 260.0);
    /// ```
    pub fn threshold(self) -> f64 {
        let (a, b) = self.daughters();
        a.nominal_mass() + b.nominal_mass()
    }

    /// The two daughters: (quark, boson-or-gluon).
    pub(crate) fn daughters(self) -> (Daughter, Daughter) {
        use Daughter::*;
        match self {
            DecayMode::BottomW => (Bottom, W),
            DecayMode::TopZ => (Top, Z),
            DecayMode::TopHiggs => (Top, Higgs),
            DecayMode::TopW => (Top, W),
            DecayMode::BottomZ => (Bottom, Z),
            DecayMode::BottomHiggs => (Bottom, Higgs),
            DecayMode::TopGluon => (Top, Gluon),
        }
    }
}

/// A direct daughter of the heavy quark.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Daughter {
    Bottom,
    Top,
    W,
    Z,
    Higgs,
    Gluon,
}

impl Daughter {
    pub(crate) fn nominal_mass(self) -> f64 {
        match self {
            Daughter::Bottom => BOTTOM_MASS,
            Daughter::Top => TOP_MASS,
            Daughter::W => W_MASS,
            Daughter::Z => Z_MASS,
            Daughter::Higgs => HIGGS_MASS,
            Daughter::Gluon => 0.0,
        }
    }
}

/// Branching fractions of the heavy quark, one field per mode (TOML keys
/// `bW`, `tZ`, `tH`, `tW`, `bZ`, `bH`, `tg`; missing keys are 0). They must
/// be non-negative, allowed for the partner, and sum to 1 within 10⁻⁶. The
/// antiparticle decays by the charge-conjugate modes with the same
/// fractions, independently of the particle.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Branching {
    /// B(Q → bW).
    #[serde(rename = "bW")]
    pub b_w: f64,
    /// B(Q → tZ).
    #[serde(rename = "tZ")]
    pub t_z: f64,
    /// B(Q → tH).
    #[serde(rename = "tH")]
    pub t_h: f64,
    /// B(Q → tW).
    #[serde(rename = "tW")]
    pub t_w: f64,
    /// B(Q → bZ).
    #[serde(rename = "bZ")]
    pub b_z: f64,
    /// B(Q → bH).
    #[serde(rename = "bH")]
    pub b_h: f64,
    /// B(Q → tg).
    #[serde(rename = "tg")]
    pub t_g: f64,
}

impl Branching {
    /// 100 % into one mode.
    ///
    /// ```
    /// use quarry_toy::{Branching, DecayMode};
    /// assert_eq!(Branching::only(DecayMode::BottomZ).get(DecayMode::BottomZ), 1.0);
    /// ```
    pub fn only(mode: DecayMode) -> Branching {
        let mut b = Branching::default();
        b.set(mode, 1.0);
        b
    }

    /// The fraction of one mode.
    pub fn get(&self, mode: DecayMode) -> f64 {
        match mode {
            DecayMode::BottomW => self.b_w,
            DecayMode::TopZ => self.t_z,
            DecayMode::TopHiggs => self.t_h,
            DecayMode::TopW => self.t_w,
            DecayMode::BottomZ => self.b_z,
            DecayMode::BottomHiggs => self.b_h,
            DecayMode::TopGluon => self.t_g,
        }
    }

    /// Sets the fraction of one mode.
    ///
    /// ```
    /// use quarry_toy::{Branching, DecayMode};
    /// let mut b = Branching::default();
    /// b.set(DecayMode::TopW, 0.5);
    /// assert_eq!(b.t_w, 0.5);
    /// ```
    pub fn set(&mut self, mode: DecayMode, fraction: f64) {
        let slot = match mode {
            DecayMode::BottomW => &mut self.b_w,
            DecayMode::TopZ => &mut self.t_z,
            DecayMode::TopHiggs => &mut self.t_h,
            DecayMode::TopW => &mut self.t_w,
            DecayMode::BottomZ => &mut self.b_z,
            DecayMode::BottomHiggs => &mut self.b_h,
            DecayMode::TopGluon => &mut self.t_g,
        };
        *slot = fraction;
    }

    /// Modes with a non-zero fraction, with their fractions.
    pub fn nonzero(&self) -> impl Iterator<Item = (DecayMode, f64)> + '_ {
        DecayMode::ALL
            .into_iter()
            .map(|m| (m, self.get(m)))
            .filter(|&(_, f)| f != 0.0)
    }
}

/// A pair-produced heavy quark: partner type, mass, width and decay modes.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HeavyQuark {
    /// Which partner.
    pub partner: Partner,
    /// Pole mass (GeV).
    pub mass: f64,
    /// Total width as a fraction of the mass. Default 0.01 (narrow: well
    /// below the jet mass resolution, so the reconstructed peak width is set
    /// by the detector, as the fit assumes).
    #[serde(default = "default_width_fraction")]
    pub width_fraction: f64,
    /// Branching fractions (defaults to the partner's singlet values when
    /// built with [`HeavyQuark::new`]).
    pub branching: Branching,
}

fn default_width_fraction() -> f64 {
    0.01
}

impl HeavyQuark {
    /// A partner of the given mass with its singlet branching fractions and a
    /// 1 % width.
    ///
    /// ```
    /// use quarry_toy::{HeavyQuark, Partner};
    /// let t = HeavyQuark::new(Partner::UpType, 1200.0);
    /// assert_eq!(t.width_fraction, 0.01);
    /// ```
    pub fn new(partner: Partner, mass: f64) -> HeavyQuark {
        HeavyQuark {
            partner,
            mass,
            width_fraction: default_width_fraction(),
            branching: partner.singlet_branching(),
        }
    }

    /// The same quark with other branching fractions.
    ///
    /// ```
    /// use quarry_toy::{Branching, DecayMode, HeavyQuark, Partner};
    /// let t = HeavyQuark::new(Partner::UpType, 1200.0)
    ///     .with_branching(Branching::only(DecayMode::BottomW));
    /// assert_eq!(t.branching.b_w, 1.0);
    /// ```
    pub fn with_branching(mut self, branching: Branching) -> HeavyQuark {
        self.branching = branching;
        self
    }

    fn validate(&self) -> Result<(), ToyError> {
        if !(self.mass.is_finite() && self.mass > 0.0) {
            return invalid(format!("heavy quark mass {} must be > 0", self.mass));
        }
        if !(self.width_fraction.is_finite() && (0.0..0.5).contains(&self.width_fraction)) {
            return invalid(format!(
                "width_fraction {} must be in [0, 0.5)",
                self.width_fraction
            ));
        }
        let mut sum = 0.0;
        for mode in DecayMode::ALL {
            let f = self.branching.get(mode);
            if !(f.is_finite() && f >= 0.0) {
                return invalid(format!(
                    "branching fraction {} = {f} must be >= 0",
                    mode.name()
                ));
            }
            if f > 0.0 && !self.partner.allows(mode) {
                return invalid(format!(
                    "decay mode {} is not allowed for the {} (it decays to {})",
                    mode.name(),
                    self.partner,
                    self.partner.allowed_names()
                ));
            }
            if f > 0.0 && self.mass <= mode.threshold() {
                return invalid(format!(
                    "mass {} GeV is below the {} threshold {:.2} GeV",
                    self.mass,
                    mode.name(),
                    mode.threshold()
                ));
            }
            sum += f;
        }
        if (sum - 1.0).abs() > 1e-6 {
            return invalid(format!("branching fractions sum to {sum}, not 1"));
        }
        Ok(())
    }
}

/// What is produced.
///
/// TOML: `kind = "top-pair"`, or `kind = "heavy-pair"` with the
/// [`HeavyQuark`] fields beside it.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Process {
    /// Pair production of a heavy quark and its antiquark.
    HeavyPair(HeavyQuark),
    /// Top-quark pair (background), t → bW with the PDG top width.
    TopPair,
}

/// Extra radiation jets (initial-state radiation; labelled `isr`).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Radiation {
    /// Poisson mean of the number of radiated gluons per event. Default 1.0.
    pub mean: f64,
    /// Lowest transverse momentum of a radiated gluon (GeV); the spectrum
    /// falls as pt⁻³ above it. Default 20.
    pub pt_min: f64,
    /// Highest transverse momentum (GeV): larger draws are set to this
    /// value (a 4·10⁻⁴ fraction with the defaults). Default 1000.
    pub pt_max: f64,
    /// Width of the Gaussian pseudorapidity distribution. Default 1.8.
    pub eta_sigma: f64,
}

impl Default for Radiation {
    fn default() -> Self {
        Radiation {
            mean: 1.0,
            pt_min: 20.0,
            pt_max: 1000.0,
            eta_sigma: 1.8,
        }
    }
}

/// Production kinematics of the pair system.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Production {
    /// Slope of the pair-mass spectrum as a fraction of the quark mass: the
    /// pair mass is m₁ + m₂ + Δ with Δ ~ Gamma(shape 3/2, scale
    /// `mass_scale`·M). Default 0.35.
    pub mass_scale: f64,
    /// Width of the Gaussian rapidity distribution of the pair system.
    /// Default 0.8.
    pub rapidity_sigma: f64,
}

impl Default for Production {
    fn default() -> Self {
        Production {
            mass_scale: 0.35,
            rapidity_sigma: 0.8,
        }
    }
}

/// Detector acceptance and thresholds of the toy. Objects failing them are
/// dropped from the event.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Acceptance {
    /// Minimum jet pt after smearing (GeV). Default 20.
    pub jet_pt_min: f64,
    /// Maximum jet |η|. Default 4.5.
    pub jet_abs_eta_max: f64,
    /// Partons closer than this ΔR are merged into one jet. Default 0.4;
    /// 0 disables merging.
    pub jet_merge_dr: f64,
    /// Smeared jet energies are truncated from below at this value (GeV)
    /// (or just above the jet mass, if larger). Default 1.
    pub jet_energy_floor: f64,
    /// Minimum electron pt after smearing (GeV). Default 10.
    pub electron_pt_min: f64,
    /// Maximum electron |η|. Default 2.5.
    pub electron_abs_eta_max: f64,
    /// Minimum muon pt after smearing (GeV). Default 10.
    pub muon_pt_min: f64,
    /// Maximum muon |η|. Default 2.5.
    pub muon_abs_eta_max: f64,
    /// A hadronically decaying W, Z, H or top with at least this true pt
    /// (GeV) may become a large-radius jet. Default 200.
    pub fat_jet_pt_min: f64,
    /// Maximum large-radius jet |η|. Default 2.0.
    pub fat_jet_abs_eta_max: f64,
    /// All decay products must lie within this ΔR of the parent for a
    /// large-radius jet. Default 1.0.
    pub fat_jet_radius: f64,
}

impl Default for Acceptance {
    /// Thresholds typical of a general-purpose LHC detector, from memory;
    /// looser than [`quarry_event::Selection`]'s defaults so that the
    /// analysis selection still has work to do.
    fn default() -> Self {
        Acceptance {
            jet_pt_min: 20.0,
            jet_abs_eta_max: 4.5,
            jet_merge_dr: 0.4,
            jet_energy_floor: 1.0,
            electron_pt_min: 10.0,
            electron_abs_eta_max: 2.5,
            muon_pt_min: 10.0,
            muon_abs_eta_max: 2.5,
            fat_jet_pt_min: 200.0,
            fat_jet_abs_eta_max: 2.0,
            fat_jet_radius: 1.0,
        }
    }
}

/// b-tag score model. Scores lie in [0, 1]; a jet whose leading parton is a
/// b quark gets `score = u^k_b`, any other jet `u^k_l` (u uniform), with the
/// exponents chosen so that exactly `b_efficiency` of b jets and
/// `mistag_rate` of other jets score above `working_point`.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct BTagModel {
    /// The working point the two rates refer to. Default 0.5.
    pub working_point: f64,
    /// Fraction of b jets above the working point. Default 0.70 (typical,
    /// from memory).
    pub b_efficiency: f64,
    /// Fraction of light-quark and gluon jets above the working point.
    /// Default 0.01 (typical, from memory; the toy has no separate charm
    /// rate).
    pub mistag_rate: f64,
}

impl Default for BTagModel {
    fn default() -> Self {
        BTagModel {
            working_point: 0.5,
            b_efficiency: 0.70,
            mistag_rate: 0.01,
        }
    }
}

impl BTagModel {
    /// Exponent k with P(u^k > working_point) = `rate`.
    pub(crate) fn exponent(&self, rate: f64) -> f64 {
        self.working_point.ln() / (1.0 - rate).ln()
    }

    fn validate(&self) -> Result<(), ToyError> {
        let open = |x: f64| x.is_finite() && x > 0.0 && x < 1.0;
        if !(open(self.working_point) && open(self.b_efficiency) && open(self.mistag_rate)) {
            return invalid(
                "btag: working_point, b_efficiency and mistag_rate must lie strictly between 0 and 1"
                    .to_string(),
            );
        }
        Ok(())
    }
}

/// Detector effects beyond the resolution model, for calibration studies:
/// a jet energy response that is not 1 and a low-side tail for b jets (as
/// neutrinos from semileptonic b decays cause in a real detector). None by
/// default: the default toy smears exactly as the kinematic fit assumes.
/// A configuration with every field at its default generates exactly the
/// events it generated before these options existed (no extra random
/// numbers are drawn).
///
/// ```
/// use quarry_toy::{Distortion, ToyConfig};
/// let mut cfg = ToyConfig::top_pair();
/// assert!(cfg.distortion.is_none());
/// cfg.distortion = Distortion { jet_response_at_100_gev: 0.97, ..Distortion::default() };
/// assert!(cfg.validate().is_ok());
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Distortion {
    /// Jet energy response at 100 GeV true energy: each smeared jet energy
    /// is multiplied by r(E) = `jet_response_at_100_gev` +
    /// `jet_response_slope`·ln(E_true / 100 GeV). Default 1.
    pub jet_response_at_100_gev: f64,
    /// Slope of the response per unit ln E. Default 0.
    pub jet_response_slope: f64,
    /// Fraction of b jets whose energy is further multiplied by a factor
    /// drawn uniformly in [`b_jet_tail_min_scale`, `b_jet_tail_max_scale`].
    /// Default 0.
    ///
    /// [`b_jet_tail_min_scale`]: Distortion::b_jet_tail_min_scale
    /// [`b_jet_tail_max_scale`]: Distortion::b_jet_tail_max_scale
    pub b_jet_tail_fraction: f64,
    /// Smallest tail factor. Default 0.6.
    pub b_jet_tail_min_scale: f64,
    /// Largest tail factor. Default 0.85.
    pub b_jet_tail_max_scale: f64,
}

impl Default for Distortion {
    fn default() -> Self {
        Distortion {
            jet_response_at_100_gev: 1.0,
            jet_response_slope: 0.0,
            b_jet_tail_fraction: 0.0,
            b_jet_tail_min_scale: 0.6,
            b_jet_tail_max_scale: 0.85,
        }
    }
}

impl Distortion {
    /// True when nothing is distorted (the default).
    pub fn is_none(&self) -> bool {
        self.jet_response_at_100_gev == 1.0
            && self.jet_response_slope == 0.0
            && self.b_jet_tail_fraction == 0.0
    }

    /// The response at true jet energy `e` \[GeV\].
    pub fn jet_response(&self, e: f64) -> f64 {
        self.jet_response_at_100_gev + self.jet_response_slope * (e.max(1e-3) / 100.0).ln()
    }

    fn validate(&self) -> Result<(), ToyError> {
        let finite = [
            self.jet_response_at_100_gev,
            self.jet_response_slope,
            self.b_jet_tail_fraction,
            self.b_jet_tail_min_scale,
            self.b_jet_tail_max_scale,
        ]
        .iter()
        .all(|x| x.is_finite());
        // The response must stay positive over the toy's energy range.
        let positive = self.jet_response(1.0) > 0.0 && self.jet_response(14_000.0) > 0.0;
        let tail = (0.0..=1.0).contains(&self.b_jet_tail_fraction)
            && self.b_jet_tail_min_scale > 0.0
            && self.b_jet_tail_min_scale <= self.b_jet_tail_max_scale;
        if !(finite && positive && tail) {
            return invalid(
                "distortion: the jet response must be finite and > 0 from 1 GeV to 14 TeV; \
                 0 <= b_jet_tail_fraction <= 1 and 0 < b_jet_tail_min_scale <= b_jet_tail_max_scale"
                    .to_string(),
            );
        }
        Ok(())
    }
}

/// Everything the generator needs. `Default` is a top-pair sample in the
/// fictional 14 TeV run with the default detector.
///
/// ```
/// use quarry_toy::{HeavyQuark, Partner, Process, ToyConfig};
/// let cfg = ToyConfig::heavy_pair(HeavyQuark::new(Partner::DownType, 900.0));
/// let text = cfg.to_toml();
/// assert!(text.contains("kind = \"heavy-pair\""));
/// assert_eq!(ToyConfig::from_toml(&text).unwrap(), cfg);
/// ```
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ToyConfig {
    /// What is produced.
    pub process: Process,
    /// Collider centre-of-mass energy (GeV). Default 14000.
    pub sqrt_s: f64,
    /// Production kinematics.
    pub production: Production,
    /// Extra radiation jets.
    pub radiation: Radiation,
    /// Detector thresholds and acceptance.
    pub acceptance: Acceptance,
    /// Detector resolution (shared with the kinematic fit).
    pub resolution: ResolutionModel,
    /// b-tag score model.
    pub btag: BTagModel,
    /// Event `i` gets id `event_id_offset + i`.
    pub event_id_offset: u64,
    /// Detector effects beyond the resolution model (none by default; not
    /// written by [`ToyConfig::to_toml`] when none).
    #[serde(skip_serializing_if = "Distortion::is_none")]
    pub distortion: Distortion,
}

impl Default for ToyConfig {
    fn default() -> Self {
        ToyConfig {
            process: Process::TopPair,
            sqrt_s: 14_000.0,
            production: Production::default(),
            radiation: Radiation::default(),
            acceptance: Acceptance::default(),
            resolution: ResolutionModel::default(),
            btag: BTagModel::default(),
            event_id_offset: 0,
            distortion: Distortion::default(),
        }
    }
}

impl ToyConfig {
    /// Top-pair background with every other setting at its default.
    ///
    /// ```
    /// assert_eq!(quarry_toy::ToyConfig::top_pair(), quarry_toy::ToyConfig::default());
    /// ```
    pub fn top_pair() -> ToyConfig {
        ToyConfig::default()
    }

    /// Heavy-quark pair production with every other setting at its default.
    ///
    /// ```
    /// use quarry_toy::{HeavyQuark, Partner, ToyConfig};
    /// let cfg = ToyConfig::heavy_pair(HeavyQuark::new(Partner::UpType, 1000.0));
    /// assert!(cfg.validate().is_ok());
    /// ```
    pub fn heavy_pair(quark: HeavyQuark) -> ToyConfig {
        ToyConfig {
            process: Process::HeavyPair(quark),
            ..ToyConfig::default()
        }
    }

    /// Parses a configuration from TOML and validates it. Missing tables and
    /// keys take their defaults.
    ///
    /// ```
    /// let cfg = quarry_toy::ToyConfig::from_toml("sqrt_s = 13000.0").unwrap();
    /// assert_eq!(cfg.sqrt_s, 13000.0);
    /// assert!(quarry_toy::ToyConfig::from_toml("sqrt_s = -1.0").is_err());
    /// ```
    pub fn from_toml(text: &str) -> Result<ToyConfig, ToyError> {
        let cfg: ToyConfig = toml::from_str(text)?;
        cfg.validate()?;
        Ok(cfg)
    }

    /// The configuration as editable TOML.
    pub fn to_toml(&self) -> String {
        toml::to_string_pretty(self).unwrap_or_default()
    }

    /// Checks every value: positive finite energies and thresholds, valid
    /// branching fractions for the partner, a heavy-quark mass above each
    /// enabled mode's threshold and well below √s/2, a valid resolution
    /// model and b-tag model.
    ///
    /// ```
    /// use quarry_toy::{Branching, DecayMode, HeavyQuark, Partner, ToyConfig};
    /// let bad = HeavyQuark::new(Partner::UpType, 900.0).with_branching(Branching::only(DecayMode::TopW));
    /// assert!(ToyConfig::heavy_pair(bad).validate().is_err());
    /// ```
    pub fn validate(&self) -> Result<(), ToyError> {
        let pos = |x: f64| x.is_finite() && x > 0.0;
        let nonneg = |x: f64| x.is_finite() && x >= 0.0;
        if !pos(self.sqrt_s) {
            return invalid(format!("sqrt_s {} must be > 0", self.sqrt_s));
        }
        let mass = match &self.process {
            Process::HeavyPair(q) => {
                q.validate()?;
                q.mass * (1.0 + crate::kinematics::BREIT_WIGNER_CUTOFF * q.width_fraction)
            }
            Process::TopPair => TOP_MASS,
        };
        if 2.2 * mass >= self.sqrt_s {
            return invalid(format!(
                "sqrt_s {} GeV leaves no room to produce a pair of mass {mass:.1} GeV",
                self.sqrt_s
            ));
        }
        let p = &self.production;
        if !(pos(p.mass_scale) && nonneg(p.rapidity_sigma)) {
            return invalid(
                "production: mass_scale must be > 0 and rapidity_sigma >= 0".to_string(),
            );
        }
        let r = &self.radiation;
        let radiation_ok = nonneg(r.mean)
            && r.mean < 100.0
            && pos(r.pt_min)
            && r.pt_max.is_finite()
            && r.pt_max > r.pt_min
            && nonneg(r.eta_sigma);
        if !radiation_ok {
            return invalid(
                "radiation: need 0 <= mean < 100, 0 < pt_min < pt_max, eta_sigma >= 0".to_string(),
            );
        }
        let a = &self.acceptance;
        let all_nonneg = [
            a.jet_pt_min,
            a.jet_abs_eta_max,
            a.jet_merge_dr,
            a.electron_pt_min,
            a.electron_abs_eta_max,
            a.muon_pt_min,
            a.muon_abs_eta_max,
            a.fat_jet_pt_min,
            a.fat_jet_abs_eta_max,
            a.fat_jet_radius,
        ]
        .into_iter()
        .all(nonneg);
        if !all_nonneg || !pos(a.jet_energy_floor) {
            return invalid(
                "acceptance: thresholds must be finite and >= 0, jet_energy_floor > 0".to_string(),
            );
        }
        self.resolution.validate()?;
        self.btag.validate()?;
        self.distortion.validate()?;
        Ok(())
    }
}
