//! Decay hypotheses and an exact χ² search for which reconstructed object
//! came from which parton.
//!
//! A [`Hypothesis`] (quarry's own TOML format, below, or one of the
//! [`presets`]) names *roles* to fill (jets, charged leptons, the neutrino,
//! large-radius jets), *composites* summed from them (a W, a top, a heavy
//! quark) and *constraints* on composite masses. A [`Searcher`] returns the K
//! assignments of an event's objects to roles with the lowest χ², exactly as
//! plain enumeration of every assignment would, together with masses,
//! four-vectors, the neutrino root used and the work done.
//!
//! **Design decision:** the search is a depth-first branch-and-bound over
//! roles whose *order is planned from the constraints*: roles are filled so
//! that each constraint's composite completes as early as possible, and
//! because every χ² term is non-negative, the χ² of completed constraints is
//! a lower bound on any completion. Where a constraint completes, the
//! candidates are scored first and visited best-first, so a good incumbent is
//! found immediately and whole subtrees are cut. Pruning is strict (ties
//! survive), so the result — including the deterministic tie-break — is that
//! of exhaustive enumeration. When an equal-mass constraint splits the roles
//! into two sides and one side has few fillings (the leptonic heavy quark of
//! a bW pair: lepton × neutrino root × jet), that side is filled last and
//! *joined*: its fillings are listed once per event, with their χ² terms
//! computed by the search's own steps, sorted by mass, and below the other
//! side the search walks this list outwards from the other side's mass,
//! stopping where the equal-mass term alone exceeds the K-th best. The
//! commonest joined shape, a bW pair (a W jet pair + b searched, lepton +
//! neutrino + b listed), has dedicated code for both sides, chosen from the
//! plan's shape, not the preset's name: all pairs are scored at once and
//! visited best first, so the first pair that cannot reach the K best ends
//! the search, and the list is built by plain loops. They do the general
//! search's arithmetic in its order, and tests hold them to the search
//! without pruning, bit for bit. All
//! buffers are fixed-size arrays
//! ([`MAX_ROLES`], [`MAX_JETS`], …) inside a reusable [`Searcher`]: nothing is
//! allocated per assignment.
//!
//! # The hypothesis file
//!
//! ```toml
//! name = "ttbar-ljets"          # required
//! about = "one line"            # optional
//! leading_jets = 6              # jets entering the search: the leading N by pt
//! large_jet_overlap_dr = 1.0    # optional, default 1.0 (see below)
//!
//! [[role]]                      # one object each
//! name = "b_had"
//! kind = "jet"                  # jet | lepton | neutrino | large_jet
//! tag = "b"                     # jets only: b | light | any (default any)
//! truth = ["h.b"]               # truth-label patterns, `*` = one segment
//!
//! [[role]]
//! name = "lep"
//! kind = "lepton"
//! flavour = "any"               # leptons only: e | mu | any (default any)
//! charge = "any"                # leptons only: plus | minus | any (default any)
//!
//! [[role]]
//! name = "nu"
//! kind = "neutrino"
//! from = "lep"                  # solved from MET + this lepton role; every
//!                               # root enters the search; at most one neutrino
//!
//! [[role]]
//! name = "W_big"
//! kind = "large_jet"
//! mass_window = [60.0, 110.0]   # large jets only, GeV (default: any mass)
//!
//! [[composite]]                 # a named four-vector sum
//! name = "W_had"
//! parts = ["q1", "q2"]          # roles and/or other composites
//! or_large_jet = "W_big"        # optional: a large_jet role may fill the
//!                               # composite whole instead (parts stay empty)
//!
//! [[constraint]]                # χ² term ((m − target)/width)²
//! mass = "W_had"
//! target = "W"                  # W | Z | H | top (PDG values) or GeV
//! width = 10.0                  # σ in GeV
//! only_closest = false          # lepton-only composites: keep only the
//!                               # combination(s) closest to the target
//!
//! [[constraint]]                # χ² term ((m₁ − m₂)/σ)²
//! equal = ["Q_had", "Q_lep"]
//! relative_width = 0.10         # σ = 0.10 × (|m₁| + |m₂|)/2 ; or give
//!                               # `width` for an absolute σ in GeV
//!
//! [[interchangeable]]           # swapping these changes no χ²: visit once
//! roles = ["q1", "q2"]
//!
//! [[lepton_pair]]               # rules between two lepton roles
//! roles = ["zl1", "zl2"]
//! flavour = "same"              # same | different | any
//! charge = "opposite"           # same | opposite | any
//! ```
//!
//! Rules: roles and composites share one namespace; every role or composite
//! is a part of at most one composite; composites may not form cycles. A
//! width is either absolute (`width`, GeV — the default way, and the only one
//! for mass targets) or, for equal-mass constraints, relative to the mean of
//! the two masses (`relative_width`); exactly one must be given, positive and
//! finite. Interchangeable roles must have identical kinds and requirements
//! and be direct parts of the same composite. Small-radius jets closer than
//! `large_jet_overlap_dr` to a large jet used in the assignment may not be
//! used beside it (the large jet already contains them). Every problem is a
//! typed [`HypothesisError`] naming the item.
//!
//! # Objects entering the search
//! - jets: those with finite four-vectors, the leading `leading_jets` by pt
//!   (ties: input order); at most [`MAX_JETS`];
//! - leptons: electrons and muons with finite four-vectors, the leading
//!   [`MAX_LEPTONS`] by pt; large-radius jets likewise, at most
//!   [`MAX_LARGE_JETS`];
//! - the neutrino: [`quarry_neutrino::WMassSolver`] on MET and the lepton
//!   filling the `from` role; one candidate per returned root.
//!
//! # Limits and assumptions
//! The χ² treats constraints as independent Gaussian terms with fixed
//! widths; the widths in the presets are typical resolution-dominated values
//! quoted from memory and are starting points to tune. The search is exact
//! for the χ² it defines, not a kinematic fit (that is `quarry-fit`).
//!
//! ```
//! use quarry_assign::{presets, SearchConfig, Searcher, SearchStatus};
//! use quarry_event::{Event, Jet, Lepton, Flavour, Met};
//! use quarry_lorentz::FourMomentum;
//!
//! let h = presets::get("ttbar-ljets").unwrap();
//! let mut e = Event::new(1);
//! for (i, (pt, eta, phi, b)) in [(90.0, 0.1, 0.3, 0.9), (70.0, -0.4, 2.5, 0.1),
//!     (55.0, 0.8, 2.0, 0.05), (60.0, -1.0, -1.5, 0.95), (30.0, 1.5, 1.0, 0.2)]
//!     .into_iter().enumerate()
//! {
//!     e.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 5.0), b)
//!         .with_index(i as u32));
//! }
//! e.muons.push(Lepton { p4: FourMomentum::from_pt_eta_phi_m(40.0, 0.2, -2.0, 0.1057),
//!     flavour: Flavour::Muon, charge: 1, truth: None, index: 0 });
//! e.met = Met::new(30.0, 20.0);
//! let mut s = Searcher::new(&h, SearchConfig::default()).unwrap();
//! let out = s.search(&e);
//! assert_eq!(out.status, SearchStatus::Found);
//! let best = out.best().unwrap();
//! let t_had = h.composite_index("t_had").unwrap();
//! println!("χ² = {:.2}, m(t_had) = {:.1} GeV", best.chi2(), best.composite_mass(t_had));
//! assert!(out.ranked.windows(2).all(|w| w[0].chi2() <= w[1].chi2()));
//! ```
#![deny(missing_docs)]

mod hypothesis;
pub mod presets;
mod search;
mod spec;
mod truth;

pub use hypothesis::{
    particle_mass, Composite, Constraint, ConstraintKind, Hypothesis, HypothesisError, LeptonPair,
    Part, Relation, Role, RoleKind, TagRule, Width, DEFAULT_LARGE_JET_OVERLAP_DR,
    MAX_WORST_CASE_ASSIGNMENTS, MIN_RELATIVE_SIGMA,
};
pub use search::{
    search_all, BtagPolicy, BudgetLimit, Evaluated, ObjectRef, RankedAssignment, SearchBudget,
    SearchConfig, SearchConfigError, SearchOutcome, SearchStatus, Searcher, BUDGET_CHECK_EVERY,
    DEFAULT_MAX_ASSIGNMENTS,
};
pub use truth::TruthMatch;

/// Most roles a hypothesis may have (role slots are fixed-size arrays).
pub const MAX_ROLES: usize = 16;
/// Most composites a hypothesis may have.
pub const MAX_COMPOSITES: usize = 16;
/// Most constraints a hypothesis may have.
pub const MAX_CONSTRAINTS: usize = 16;
/// Most roles in one interchangeable group.
pub const MAX_GROUP: usize = 4;
/// Most leading jets that may enter a search.
pub const MAX_JETS: usize = 32;
/// Most charged leptons (leading by pt) that enter a search.
pub const MAX_LEPTONS: usize = 8;
/// Most large-radius jets (leading by pt) that enter a search.
pub const MAX_LARGE_JETS: usize = 8;
/// Largest `k_best`.
pub const MAX_K_BEST: usize = 64;
