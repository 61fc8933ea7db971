//! A toy event generator for quarry's demos, tests and benchmarks.
//!
//! **This is a toy, not a physics generator.** It produces events that look
//! like heavy-quark pairs or top pairs seen by a simple detector, with the
//! exact truth of every object, so that quarry's reconstruction can be
//! demonstrated, tested and timed without external simulation.
//!
//! **Design decision:** the toy detector smears with *exactly* the model the
//! kinematic fit assumes ([`quarry_resolution::ResolutionModel`]: jet energy
//! Gaussian at fixed direction and mass, lepton pt Gaussian, MET Gaussian per
//! component), and nothing else. A fit of toy events is then a closed test:
//! pulls must be unit Gaussians and reconstructed masses must close on the
//! generated ones. Realism that the fit does not model (jet direction
//! smearing, MET absorbing jet mismeasurement, pile-up) is left out on
//! purpose.
//!
//! Every event is generated from its own random stream, seeded from
//! `(seed, event index)`: the same seed gives identical events, in any order
//! and on any number of threads.
//!
//! ```
//! use quarry_toy::{Generator, HeavyQuark, Partner, ToyConfig};
//! let cfg = ToyConfig::heavy_pair(HeavyQuark::new(Partner::DownType, 900.0));
//! let events: Vec<_> = Generator::new(cfg, 42).unwrap().take(3).collect();
//! assert_eq!(events.len(), 3);
//! assert_eq!(events[2].id, 2);
//! // Every jet carries its truth label.
//! assert!(events.iter().flat_map(|e| &e.jets).all(|j| j.truth.is_some()));
//! ```
//!
//! # Model
//! **Processes.** [`Process::HeavyPair`]: a heavy quark Q and its antiquark,
//! each decaying independently by the configured [`Branching`] fractions:
//! bW, tZ, tH (up-type T), tW, bZ, bH (down-type B), tW (charge 5/3 X), tg
//! (excited top). The antiquark takes the charge-conjugate mode.
//! [`Process::TopPair`]: tt̄ background, t → bW.
//!
//! **Production.** The pair mass is m₁ + m₂ + Δ, where m₁, m₂ are the two
//! quarks' Breit–Wigner masses and Δ ~ Gamma(shape 3/2, scale
//! `mass_scale`·M): the Δ^{1/2} rise is the threshold velocity factor
//! β ≈ (Δ/M)^{1/2}, the exponential a stand-in for falling parton
//! luminosities. The system's rapidity is Gaussian (σ = `rapidity_sigma`)
//! and redrawn when the collider energy would be exceeded; its transverse
//! momentum balances the radiation jets. Radiation: a Poisson number of
//! gluons (`isr`, mean 1, at most 12), pt ∝ pt⁻³ from `pt_min` (20 GeV)
//! capped at `pt_max`, Gaussian η (σ = 1.8). The production
//! angle in the pair frame and all decay angles are isotropic (no spin
//! correlations).
//!
//! **Decays.** Exact two-body kinematics in each rest frame
//! ([`decay_at_rest`], then [`quarry_lorentz::FourMomentum::from_rest_frame_of`]).
//! Masses of the heavy quark (width `width_fraction`·M, default 1 %), top,
//! W, Z and H follow relativistic Breit–Wigner shapes
//! ([`breit_wigner_mass`]) with the PDG widths, truncated at
//! ±[`BREIT_WIGNER_CUTOFF`] widths and above the daughters' masses. Daughter
//! masses: b quark [`quarry_pdg::BOTTOM_MASS`], light quarks and gluons 0,
//! leptons their PDG masses, neutrinos 0.
//!
//! **Boson channels** ([`channel_probabilities`], from
//! [`quarry_pdg::branching`]): W → eν, μν, qq̄′; Z → ee, μμ, νν, bb̄, light
//! qq̄; H → bb̄, and all other Higgs decays replaced by a gluon pair `g g`
//! (stand-in). **τ channels are left out**: W → τν and Z → ττ are dropped
//! and the remaining branching ratios renormalised to sum to 1, so every
//! charged lepton in the toy is prompt.
//!
//! **Detector.** Coloured final partons (b, q, g) in decreasing pt; a
//! parton within ΔR < `jet_merge_dr` (0.4) of an earlier jet is merged into
//! it (four-momenta added; label and flavour of the leading parton). Each
//! jet's energy is smeared by a Gaussian of σ =
//! [`ResolutionModel::jet_energy_sigma`](quarry_resolution::ResolutionModel::jet_energy_sigma)
//! at its unsmeared energy and η, keeping direction and mass, truncated
//! below at `jet_energy_floor` (1 GeV). Jets need pt > 20 GeV, |η| < 4.5.
//! b-tag scores: u^k with k set so that 70 % of b jets and 1 % of other jets
//! exceed the 0.5 working point (typical, from memory; [`BTagModel`]).
//! Electrons and muons: pt smeared by
//! [`lepton_pt_sigma`](quarry_resolution::ResolutionModel::lepton_pt_sigma),
//! direction and mass kept; pt > 10 GeV, |η| < 2.5; no isolation. MET = Σ
//! neutrino pt + Gaussian noise per component with σ =
//! [`met_sigma`](quarry_resolution::ResolutionModel::met_sigma)(Σ accepted
//! jet pt), and the event's MET covariance is set to that diagonal. Real
//! MET also absorbs jet mismeasurement and lost objects; this toy omits
//! that on purpose so that the fit's model is exact. Large-radius jets: a
//! W, Z, H or top with true pt > 200 GeV, decaying to quarks/gluons only,
//! all within ΔR < 1.0 of it, becomes a fat jet with its four-momentum
//! scaled by a smeared energy ratio (jet energy resolution, so the jet mass
//! scales with the energy); the outermost qualifies (a contained top hides
//! its W); after smearing it must still have pt > 200 GeV and |η| < 2.0.
//! Objects failing acceptance are dropped, so some events lack objects.
//! For calibration studies a [`Distortion`] (off by default) multiplies
//! each smeared jet energy by a response r(E_true) ≠ 1 and gives a fraction
//! of b jets a low-side tail; the fit does not model either.
//! Objects are sorted by decreasing pt.
//!
//! For mass-closure studies, [`signal_events`] gives `n` events of one
//! partner at one mass in a single call.
//!
//! # Truth labels
//! Exactly these labels are emitted (`S` is the side, see below):
//!
//! | origin | jets / leptons | large-radius jet |
//! |---|---|---|
//! | Q → **b**W, Q → **b**Z, Q → **b**H | `S.b` | |
//! | Q → **t**X, t → bW | `S.t.b`, `S.t.W.q`, `S.t.W.e`, `S.t.W.mu` (+ `S.t.W.nu` in MET) | `S.t`, `S.t.W` |
//! | Q → b**W** / t**W**, W → qq̄′, eν, μν | `S.W.q`, `S.W.e`, `S.W.mu` (+ `S.W.nu`) | `S.W` |
//! | Q → b**Z** / t**Z** | `S.Z.q`, `S.Z.b`, `S.Z.e`, `S.Z.mu` (+ `S.Z.nu`) | `S.Z` |
//! | Q → b**H** / t**H** | `S.H.b`, `S.H.g` | `S.H` |
//! | t* → t**g** | `S.g` | |
//! | tt̄ (each top is the parent) | `S.b`, `S.W.q`, `S.W.e`, `S.W.mu` (+ `S.W.nu`) | `S` (the top), `S.W` |
//! | radiation | `isr` | |
//!
//! The side `S` is decided per event: a side is *leptonic* if any W in its
//! chain decays to eν or μν. With exactly one leptonic side, it is `l` and
//! the other `h`; with none or both, the quark (record entry 0) is `a` and
//! the antiquark `b`. (A Z → ℓℓ does not make a side leptonic: a
//! dilepton-from-Z event is `a.Z.mu`, `a.Z.mu`.) Jets carry the label of
//! their leading parton. Parton-record entries of intermediate particles
//! carry their path (`S`, `S.t`, `S.W`, `S.t.W`, `S.Z`, `S.H`).
//!
//! # Limits
//! No parton showers, hadronisation, underlying event or pile-up; no
//! matrix elements, parton distributions or spin correlations; no jet
//! direction smearing, no lepton isolation or fakes, no charm tagging; τ
//! channels removed; H → non-bb̄ as gluon pairs; production rates and
//! cross-sections are not modelled (every event has weight 1). Defaults are
//! typical values, from memory, chosen for plausible-looking demos only.
#![deny(missing_docs)]

mod config;
mod detector;
mod kinematics;
mod partons;

pub use config::{
    Acceptance, BTagModel, Branching, DecayMode, Distortion, HeavyQuark, Partner, Process,
    Production, Radiation, ToyConfig, ToyError,
};
pub use kinematics::{
    breit_wigner_mass, decay_at_rest, kallen, two_body_decay, two_body_momentum,
    BREIT_WIGNER_CUTOFF,
};
pub use partons::{channel_probabilities, Parton, PartonKind, PartonRecord};

use quarry_event::Event;
use rand::SeedableRng;
use rand_pcg::Pcg64Mcg;

/// The generator: a validated configuration plus a seed.
///
/// Event `i` depends only on `(config, seed, i)` ([`Generator::generate`]);
/// as an [`Iterator`] it yields events 0, 1, 2, … without end (use
/// `.take(n)`).
///
/// ```
/// use quarry_toy::{Generator, ToyConfig};
/// let g = Generator::new(ToyConfig::top_pair(), 7).unwrap();
/// assert_eq!(g.generate(5), g.generate(5));
/// assert_ne!(g.generate(5), g.generate(6));
/// ```
#[derive(Clone, Debug)]
pub struct Generator {
    config: ToyConfig,
    seed: u64,
    next: u64,
    partons: partons::PartonModel,
    detector: detector::Detector,
}

impl Generator {
    /// Validates `config` and prepares the generator.
    ///
    /// ```
    /// use quarry_toy::{Generator, ToyConfig};
    /// let mut bad = ToyConfig::top_pair();
    /// bad.sqrt_s = f64::NAN;
    /// assert!(Generator::new(bad, 1).is_err());
    /// ```
    pub fn new(config: ToyConfig, seed: u64) -> Result<Generator, ToyError> {
        config.validate()?;
        Ok(Generator {
            partons: partons::PartonModel::new(&config),
            detector: detector::Detector::new(&config),
            config,
            seed,
            next: 0,
        })
    }

    /// The configuration.
    pub fn config(&self) -> &ToyConfig {
        &self.config
    }

    /// The seed.
    pub fn seed(&self) -> u64 {
        self.seed
    }

    /// Event number `index` (id = `event_id_offset + index`).
    ///
    /// ```
    /// use quarry_toy::{Generator, ToyConfig};
    /// let e = Generator::new(ToyConfig::top_pair(), 3).unwrap().generate(10);
    /// assert_eq!(e.id, 10);
    /// ```
    pub fn generate(&self, index: u64) -> Event {
        self.generate_with_partons(index).0
    }

    /// Event number `index` together with its parton record.
    ///
    /// ```
    /// use quarry_toy::{Generator, PartonKind, ToyConfig};
    /// let (event, rec) = Generator::new(ToyConfig::top_pair(), 3).unwrap().generate_with_partons(0);
    /// assert_eq!(rec.partons[0].kind, PartonKind::Top);
    /// assert_eq!(rec.jet_sources.len(), event.jets.len());
    /// ```
    pub fn generate_with_partons(&self, index: u64) -> (Event, PartonRecord) {
        let mut rng = event_rng(self.seed, index);
        let mut rec = PartonRecord {
            partons: Vec::with_capacity(32),
            ..PartonRecord::default()
        };
        self.partons.generate(&mut rng, &mut rec);
        let mut event = Event::default();
        let id = self.config.event_id_offset.wrapping_add(index);
        self.detector
            .reconstruct(&mut rng, &mut rec, id, &mut event);
        (event, rec)
    }
}

impl Iterator for Generator {
    type Item = Event;

    fn next(&mut self) -> Option<Event> {
        let event = self.generate(self.next);
        self.next = self.next.wrapping_add(1);
        Some(event)
    }
}

/// `n` events of a heavy-quark pair of the given partner and mass, with the
/// partner's singlet branching fractions and every other setting at its
/// default — the quick way to a mass-closure sample.
///
/// ```
/// use quarry_toy::{signal_events, Partner};
/// let events = signal_events(Partner::UpType, 1000.0, 5, 11).unwrap();
/// assert_eq!(events.len(), 5);
/// ```
pub fn signal_events(
    partner: Partner,
    mass: f64,
    n: usize,
    seed: u64,
) -> Result<Vec<Event>, ToyError> {
    let cfg = ToyConfig::heavy_pair(HeavyQuark::new(partner, mass));
    Ok(Generator::new(cfg, seed)?.take(n).collect())
}

/// SplitMix64 finaliser: a fast, well-mixed bijection of u64.
#[inline]
fn splitmix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The random stream of one event: a PCG generator whose 128-bit state is
/// a hash of `(seed, index)`.
fn event_rng(seed: u64, index: u64) -> Pcg64Mcg {
    let hi = splitmix64(seed ^ splitmix64(index));
    let lo = splitmix64(hi ^ index.rotate_left(17) ^ 0xD1B5_4A32_D192_ED03);
    Pcg64Mcg::from_seed(((u128::from(hi) << 64) | u128::from(lo)).to_le_bytes())
}
