//! The search's public types: settings, results and their errors.

use super::*;

/// How b-tag scores enter the search.
///
/// ```
/// use quarry_assign::BtagPolicy;
/// let p = BtagPolicy::default();
/// assert_eq!(p, BtagPolicy::Threshold(0.5));
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum BtagPolicy {
    /// Hard working point: a jet with score **above** the threshold is
    /// b-tagged. Roles with `tag = "b"` accept only tagged jets, roles with
    /// `tag = "light"` only untagged ones. No χ² term. The default threshold,
    /// 0.5, is [`quarry_event::Selection`]'s default.
    Threshold(f64),
    /// Score-weighted: every jet may fill every jet role, and the χ² gains a
    /// term per jet role. The score `s ∈ [0, 1]` is read as the weight of a
    /// tagged decision, interpolating a working point of b-jet efficiency
    /// `ε_b` and light-jet mistag rate `ε_l`:
    ///
    /// ```text
    /// p_b(s) = s ε_b + (1 − s)(1 − ε_b)      (probability-like weight, b jet)
    /// p_l(s) = s ε_l + (1 − s)(1 − ε_l)      (same, light jet)
    /// b role:     −2 ln( p_b / max(p_b, p_l) )
    /// light role: −2 ln( p_l / max(p_b, p_l) )
    /// any role:   0
    /// ```
    ///
    /// Dividing by the larger weight keeps each term ≥ 0 (so the search's
    /// bounds stay valid) and zero for a jet that looks like what its role
    /// wants. Typical working points have ε_b ≈ 0.70 and ε_l ≈ 0.01 (common
    /// practice; values from memory) — see [`BtagPolicy::weighted_default`].
    Weighted {
        /// b-jet tagging efficiency ε_b, in (0, 1).
        b_efficiency: f64,
        /// light-jet mistag rate ε_l, in (0, 1), below ε_b.
        light_mistag: f64,
    },
    /// No b-tag information: every jet may fill every jet role, no term.
    Ignore,
}

impl Default for BtagPolicy {
    fn default() -> Self {
        BtagPolicy::Threshold(quarry_event::Selection::default().btag_threshold)
    }
}

impl BtagPolicy {
    /// [`BtagPolicy::Weighted`] with ε_b = 0.70 and ε_l = 0.01 (typical
    /// working point; from memory).
    ///
    /// ```
    /// assert!(matches!(quarry_assign::BtagPolicy::weighted_default(),
    ///     quarry_assign::BtagPolicy::Weighted { .. }));
    /// ```
    pub fn weighted_default() -> BtagPolicy {
        BtagPolicy::Weighted {
            b_efficiency: 0.70,
            light_mistag: 0.01,
        }
    }

    /// The χ² terms `(b role, light role)` for a jet with this score (both
    /// zero for `Threshold` and `Ignore`, which filter instead). A score
    /// outside [0, 1] is clamped; NaN counts as 0.
    ///
    /// ```
    /// let p = quarry_assign::BtagPolicy::weighted_default();
    /// let (b, light) = p.penalties(1.0);
    /// assert_eq!(b, 0.0);
    /// assert!(light > 8.0); // −2 ln(0.01 / 0.70) ≈ 8.5
    /// ```
    pub fn penalties(&self, score: f64) -> (f64, f64) {
        match *self {
            BtagPolicy::Weighted {
                b_efficiency: eb,
                light_mistag: el,
            } => {
                let s = if score.is_nan() {
                    0.0
                } else {
                    score.clamp(0.0, 1.0)
                };
                let pb = s * eb + (1.0 - s) * (1.0 - eb);
                let pl = s * el + (1.0 - s) * (1.0 - el);
                let top = pb.max(pl);
                (-2.0 * (pb / top).ln(), -2.0 * (pl / top).ln())
            }
            _ => (0.0, 0.0),
        }
    }

    /// Whether a jet with this score may fill a role with this tag rule.
    pub(super) fn admits(&self, tag: TagRule, score: f64) -> bool {
        match (*self, tag) {
            (BtagPolicy::Threshold(t), TagRule::B) => score > t,
            (BtagPolicy::Threshold(t), TagRule::Light) => score.is_nan() || score <= t,
            _ => true,
        }
    }
}

/// Search settings.
///
/// ```
/// let c = quarry_assign::SearchConfig::default();
/// assert_eq!(c.k_best, 3);
/// assert!(c.prune);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SearchConfig {
    /// How many best distinct assignments to return, 1 to [`MAX_K_BEST`].
    /// Default 3.
    pub k_best: usize,
    /// Replaces the hypothesis's `leading_jets` when set (at most
    /// [`MAX_JETS`], at least the hypothesis's [`Hypothesis::min_jets`]).
    pub max_jets_override: Option<usize>,
    /// b-tag handling. Default: [`BtagPolicy::default`].
    pub btag: BtagPolicy,
    /// Neutrino solver; every root it returns enters the search.
    pub neutrino: WMassSolver,
    /// `true` (default): branch-and-bound. `false`: visit every assignment
    /// (same result, for benchmarks and cross-checks).
    pub prune: bool,
    /// Per-event limits on the work of one search. Default:
    /// [`SearchBudget::default`].
    pub budget: SearchBudget,
}

impl Default for SearchConfig {
    fn default() -> Self {
        SearchConfig {
            k_best: 3,
            max_jets_override: None,
            btag: BtagPolicy::default(),
            neutrino: WMassSolver::default(),
            prune: true,
            budget: SearchBudget::default(),
        }
    }
}

/// A rejected [`SearchConfig`].
#[derive(Clone, Copy, Debug, PartialEq, thiserror::Error)]
pub enum SearchConfigError {
    /// `k_best` is 0 or above [`MAX_K_BEST`].
    #[error("k_best = {0} must be between 1 and {MAX_K_BEST}")]
    BadK(usize),
    /// The jet override is outside `[needed, MAX_JETS]`.
    #[error("max_jets_override = {value} must be between {needed} and {MAX_JETS}")]
    BadLeadingJets {
        /// Value given.
        value: usize,
        /// Jet roles the hypothesis always fills.
        needed: usize,
    },
    /// A threshold that is not finite, or weighted-policy rates outside
    /// (0, 1) or with ε_l ≥ ε_b.
    #[error("b-tag policy {0:?} is invalid")]
    BadBtag(BtagPolicy),
}

/// Which reconstructed object fills a role.
///
/// `pos` is the position in the event's vector (`event.jets`,
/// `event.electrons`/`event.muons` by flavour, `event.fat_jets`); `index` is
/// that object's own `index` field, its position in the *input*, for naming
/// input objects in outputs.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub enum ObjectRef {
    /// A small-radius jet.
    Jet {
        /// Position in `event.jets`.
        pos: u32,
        /// The jet's input index.
        index: u32,
    },
    /// A charged lepton.
    Lepton {
        /// Electron or muon (which vector `pos` indexes).
        flavour: Flavour,
        /// Position in `event.electrons` or `event.muons`.
        pos: u32,
        /// The lepton's input index.
        index: u32,
    },
    /// A large-radius jet.
    LargeJet {
        /// Position in `event.fat_jets`.
        pos: u32,
        /// The large jet's input index.
        index: u32,
    },
    /// The neutrino solved from MET: root `root` of the solutions
    /// (0 = smaller |pz|); its four-vector is in
    /// [`RankedAssignment::neutrino`].
    Neutrino {
        /// Root index.
        root: u8,
    },
    /// Unfilled: the role's composite was filled whole by a large jet (or an
    /// optional large-jet role was not used).
    #[default]
    Empty,
}

/// One scored assignment of objects to roles.
///
/// Small and `Copy` (fixed-size arrays, sized by [`MAX_ROLES`],
/// [`MAX_COMPOSITES`], [`MAX_CONSTRAINTS`]); indices follow the hypothesis's
/// declaration order ([`Hypothesis::roles`], [`Hypothesis::composites`],
/// [`Hypothesis::constraints`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RankedAssignment {
    pub(super) chi2: f64,
    pub(super) btag_chi2: f64,
    pub(super) n_roles: u8,
    pub(super) n_composites: u8,
    pub(super) n_constraints: u8,
    pub(super) objects: [ObjectRef; MAX_ROLES],
    pub(super) composite_p4: [FourMomentum; MAX_COMPOSITES],
    pub(super) leaf_masks: [u16; MAX_COMPOSITES],
    pub(super) terms: [f64; MAX_CONSTRAINTS],
    pub(super) neutrino: Option<Neutrino>,
}

impl RankedAssignment {
    /// Total χ²: the constraint terms plus the b-tag terms.
    pub fn chi2(&self) -> f64 {
        self.chi2
    }

    /// The part of [`chi2`](Self::chi2) from b-tag terms (0 unless the policy
    /// is [`BtagPolicy::Weighted`]).
    pub fn btag_chi2(&self) -> f64 {
        self.btag_chi2
    }

    /// The object filling each role, by role index.
    pub fn objects(&self) -> &[ObjectRef] {
        &self.objects[..self.n_roles as usize]
    }

    /// The object filling role `role` ([`ObjectRef::Empty`] if out of range).
    pub fn object(&self, role: usize) -> ObjectRef {
        self.objects().get(role).copied().unwrap_or_default()
    }

    /// Four-momentum of each composite, by composite index.
    pub fn composite_p4s(&self) -> &[FourMomentum] {
        &self.composite_p4[..self.n_composites as usize]
    }

    /// Four-momentum of composite `c` (zero vector if out of range).
    pub fn composite_p4(&self, c: usize) -> FourMomentum {
        self.composite_p4s().get(c).copied().unwrap_or_default()
    }

    /// Mass of composite `c` (GeV) (see `FourMomentum::m` for the sign
    /// convention of space-like sums).
    pub fn composite_mass(&self, c: usize) -> f64 {
        self.composite_p4(c).m()
    }

    /// The χ² term of each constraint, by constraint index.
    pub fn terms(&self) -> &[f64] {
        &self.terms[..self.n_constraints as usize]
    }

    /// The neutrino used, if the hypothesis has a neutrino role: the root
    /// index is in that role's [`ObjectRef::Neutrino`], the solution (with its
    /// `case` and `met_shift`) here.
    pub fn neutrino(&self) -> Option<Neutrino> {
        self.neutrino
    }

    /// The measured objects summed into composite `c` (roles under it,
    /// recursively, skipping empty ones), in role order. For the kinematic
    /// fit: each constraint's composites expand to these objects.
    ///
    /// ```
    /// # use quarry_assign::*;
    /// # fn f(h: &Hypothesis, a: &RankedAssignment) {
    /// let w = h.composite_index("W_had").unwrap();
    /// for obj in a.leaves_of(w) {
    ///     println!("{obj:?}");
    /// }
    /// # }
    /// ```
    pub fn leaves_of(&self, c: usize) -> impl Iterator<Item = ObjectRef> + '_ {
        let mask = self.leaf_masks.get(c).copied().unwrap_or(0);
        self.objects()
            .iter()
            .enumerate()
            .filter(move |(r, o)| mask & (1 << r) != 0 && **o != ObjectRef::Empty)
            .map(|(_, o)| *o)
    }

    /// Positions in `event.jets` of every small-radius jet this assignment
    /// uses, in role order.
    pub fn used_jets(&self) -> impl Iterator<Item = u32> + '_ {
        self.objects().iter().filter_map(|o| match o {
            ObjectRef::Jet { pos, .. } => Some(*pos),
            _ => None,
        })
    }

    /// The four-momentum of `object` in `event` (the neutrino from this
    /// assignment); `None` for [`ObjectRef::Empty`] or a position that the
    /// event does not have.
    pub fn p4_of(&self, event: &Event, object: ObjectRef) -> Option<FourMomentum> {
        match object {
            ObjectRef::Jet { pos, .. } => event.jets.get(pos as usize).map(|j| j.p4),
            ObjectRef::Lepton { flavour, pos, .. } => match flavour {
                Flavour::Electron => event.electrons.get(pos as usize).map(|l| l.p4),
                Flavour::Muon => event.muons.get(pos as usize).map(|l| l.p4),
            },
            ObjectRef::LargeJet { pos, .. } => event.fat_jets.get(pos as usize).map(|j| j.p4),
            ObjectRef::Neutrino { .. } => self.neutrino.map(|n| n.p4),
            ObjectRef::Empty => None,
        }
    }
}

/// Why a search returned no assignment (or [`SearchStatus::Found`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SearchStatus {
    /// At least one assignment was found.
    Found,
    /// Fewer usable jets (finite four-vectors) than jet roles to fill.
    TooFewJets {
        /// Jet roles always filled.
        needed: usize,
        /// Usable jets among the leading ones.
        available: usize,
    },
    /// Fewer usable leptons than lepton roles.
    TooFewLeptons {
        /// Lepton roles.
        needed: usize,
        /// Usable leptons.
        available: usize,
    },
    /// Fewer usable large-radius jets than required large-jet roles.
    TooFewLargeJets {
        /// Required large-jet roles.
        needed: usize,
        /// Usable large-radius jets.
        available: usize,
    },
    /// The neutrino solver failed for every lepton that could source it.
    NeutrinoFailed(NeutrinoError),
    /// Enough objects, but none satisfies the requirements together (b-tags,
    /// charges, flavours, mass windows, overlaps).
    NoValidAssignment,
    /// The search stopped at its [`SearchBudget`] before it was exact; no
    /// assignment is reported (a partial K best would not be the K best).
    BudgetExceeded(BudgetLimit),
    /// The search was stopped through the flag given to
    /// [`Searcher::set_cancel`]; no assignment is reported.
    Cancelled,
}

/// Default of [`SearchBudget::max_assignments`]: 100 million assignments
/// scored, a few seconds of one core. The demo events never need more than
/// about 2,100 (measured for every preset, plain, weighted b-tags and
/// `--max-jets 8`/`12`; `n_evaluated` column), so no normal event comes
/// near it, while a 200-jet event under a tW-pair hypothesis with 20 leading
/// jets (hundreds of millions) is stopped.
pub const DEFAULT_MAX_ASSIGNMENTS: u64 = 100_000_000;

/// Limits on the work of one event's search. The search checks them every
/// [`BUDGET_CHECK_EVERY`] assignments scored (about a millisecond), so a
/// stop lands within that much work past the limit.
///
/// The count is reproducible; a time limit is not (it depends on the
/// machine and its load), so it is off by default.
///
/// ```
/// use quarry_assign::{SearchBudget, DEFAULT_MAX_ASSIGNMENTS};
/// let b = SearchBudget::default();
/// assert_eq!(b.max_assignments, Some(DEFAULT_MAX_ASSIGNMENTS));
/// assert_eq!(b.max_time, None);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SearchBudget {
    /// Most assignments (complete and partial, as counted by [`Evaluated`])
    /// one event may score; `None`: no limit.
    pub max_assignments: Option<u64>,
    /// Most wall-clock time one event's search may take; `None`: no limit.
    pub max_time: Option<std::time::Duration>,
}

impl Default for SearchBudget {
    fn default() -> Self {
        SearchBudget {
            max_assignments: Some(DEFAULT_MAX_ASSIGNMENTS),
            max_time: None,
        }
    }
}

impl SearchBudget {
    /// No limit at all.
    pub const UNLIMITED: SearchBudget = SearchBudget {
        max_assignments: None,
        max_time: None,
    };
}

/// How often (in assignments scored) the search checks its budget and its
/// cancellation flag.
pub const BUDGET_CHECK_EVERY: u64 = 1 << 16;

/// Which limit of a [`SearchBudget`] an event reached; its `Display` is a
/// reason for outputs ("search budget of 100000000 assignments exceeded").
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BudgetLimit {
    /// [`SearchBudget::max_assignments`] (the value set).
    Assignments(u64),
    /// [`SearchBudget::max_time`] (the value set).
    Time(std::time::Duration),
}

impl std::fmt::Display for BudgetLimit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            BudgetLimit::Assignments(n) => {
                write!(f, "search budget of {n} assignments exceeded")
            }
            BudgetLimit::Time(t) => {
                write!(f, "search budget of {:.3} s exceeded", t.as_secs_f64())
            }
        }
    }
}

/// How much work a search did.
///
/// `complete` counts complete assignments whose χ² was computed; `partial`
/// counts partial assignments (an object placed in a role before the last)
/// whose running χ² was computed, and the entries of the per-event lists a
/// search may build to complete the small side of an equal-mass constraint
/// (see the crate docs). Without pruning, `complete` is the size of the whole
/// assignment space.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Evaluated {
    /// Complete assignments scored.
    pub complete: u64,
    /// Partial assignments visited.
    pub partial: u64,
}

/// The result of searching one event.
#[derive(Clone, Debug, PartialEq)]
pub struct SearchOutcome {
    /// Found, or why not.
    pub status: SearchStatus,
    /// The best distinct assignments, ascending χ² (ties: by the objects in
    /// role order, lower positions first). Empty unless `status` is `Found`.
    pub ranked: Vec<RankedAssignment>,
    /// Work done.
    pub evaluated: Evaluated,
}

impl SearchOutcome {
    /// The best assignment, if any.
    pub fn best(&self) -> Option<&RankedAssignment> {
        self.ranked.first()
    }
}
