//! The exact branch-and-bound χ² search over assignments.

use quarry_event::{Event, Flavour};
use quarry_lorentz::FourMomentum;
use quarry_neutrino::{Neutrino, NeutrinoError, NeutrinoSolutions, WMassSolver};
use rayon::prelude::*;

use crate::hypothesis::{ConstraintKind, Hypothesis, Part, RoleKind, TagRule};
use crate::{
    MAX_COMPOSITES, MAX_CONSTRAINTS, MAX_JETS, MAX_K_BEST, MAX_LARGE_JETS, MAX_LEPTONS, MAX_ROLES,
};

/// Marks an unfilled slot in the search's compact choice arrays.
const NONE: u8 = u8::MAX;

mod pair_join;
/// Room for every jet plus the "no large jet" option.
const MAX_CANDS: usize = MAX_JETS + 1;

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
    fn admits(&self, tag: TagRule, score: f64) -> bool {
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
}

impl Default for SearchConfig {
    fn default() -> Self {
        SearchConfig {
            k_best: 3,
            max_jets_override: None,
            btag: BtagPolicy::default(),
            neutrino: WMassSolver::default(),
            prune: true,
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
    chi2: f64,
    btag_chi2: f64,
    n_roles: u8,
    n_composites: u8,
    n_constraints: u8,
    objects: [ObjectRef; MAX_ROLES],
    composite_p4: [FourMomentum; MAX_COMPOSITES],
    leaf_masks: [u16; MAX_COMPOSITES],
    terms: [f64; MAX_CONSTRAINTS],
    neutrino: Option<Neutrino>,
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

/// What kind of object a search step places.
#[derive(Clone, Copy, Debug, PartialEq)]
enum StepKind {
    Jet(TagRule),
    Lepton(Option<Flavour>, Option<i8>),
    Neutrino { lepton: usize },
    LargeJet { lo: f64, hi: f64, optional: bool },
}

#[derive(Clone, Debug)]
struct Step {
    role: usize,
    kind: StepKind,
    /// Earlier member of this role's interchangeable group: the object here
    /// must come after that one's (canonical order, each set once).
    sym_role: Option<usize>,
    /// The optional large-jet role that would fill this jet role's composite.
    skip_if: Option<usize>,
    /// Lepton pair rules with roles placed earlier: (other role, pair index).
    pair_checks: Vec<(usize, usize)>,
    /// Composites completed by this step, bottom-up: a range of
    /// [`Plan::comp_ops`].
    comps: (usize, usize),
    /// Constraints completed by this step: a range of [`Plan::con_ops`].
    cons: (usize, usize),
    /// The join that completes the assignment below this step (index into
    /// [`Plan::joins`]).
    join: Option<usize>,
}

/// Slots of the search's four-vector array: one per role, then one per
/// composite.
const SLOTS: usize = MAX_ROLES + MAX_COMPOSITES;

/// Sums the four-vectors in `src` (slots) into composite `dest`, as a left
/// fold in this order: first the `n_inv` sources fixed before the step that
/// completes the composite, then those set at that step (its role, and
/// composites completed at the same step). The fixed part is summed once per
/// visit of the step (`Workspace::prefix`), and the replay that reports an
/// assignment sums in the same order, so reported masses are bit-for-bit the
/// ones the χ² was computed from.
#[derive(Clone, Copy, Debug)]
struct CompOp {
    dest: usize,
    n: usize,
    n_inv: usize,
    src: [u8; SLOTS],
}

/// Object slots in `Workspace::obj_p4`: jets, leptons, large jets, then two
/// neutrino roots per lepton.
const JET_BASE: usize = 0;
const LEP_BASE: usize = JET_BASE + MAX_JETS;
const LARGE_BASE: usize = LEP_BASE + MAX_LEPTONS;
const NU_BASE: usize = LARGE_BASE + MAX_LARGE_JETS;
const OBJ_SLOTS: usize = NU_BASE + 2 * MAX_LEPTONS;
const _: () = assert!(OBJ_SLOTS == 64 && SLOTS == 32 && MAX_COMPOSITES == 16);

/// How a compiled constraint computes σ.
#[derive(Clone, Copy, Debug, PartialEq)]
enum ConShape {
    /// `(m_a − target)/width`.
    Mass,
    /// `(m_a − m_b)/width`.
    EqualAbsolute,
    /// `(m_a − m_b)/max(width·(|m_a| + |m_b|)/2, MIN_RELATIVE_SIGMA)`.
    EqualRelative,
}

/// A constraint with its parameters unpacked for the inner loop. Its term is
/// bit-for-bit [`crate::Constraint::chi2`].
#[derive(Clone, Copy, Debug)]
struct ConOp {
    /// Constraint index.
    k: usize,
    shape: ConShape,
    a: usize,
    b: usize,
    target: f64,
    /// σ in GeV, or the relative width for `EqualRelative`.
    width: f64,
    only_closest: bool,
}

impl ConOp {
    fn new(k: usize, c: &crate::Constraint) -> ConOp {
        use crate::Width;
        let (shape, a, b, target, width) = match (c.kind, c.width) {
            (ConstraintKind::Mass { composite, target }, Width::Absolute(w)) => {
                (ConShape::Mass, composite, composite, target, w)
            }
            (ConstraintKind::Mass { composite, target }, Width::Relative(r)) => {
                (ConShape::Mass, composite, composite, target, r * target)
            }
            (ConstraintKind::EqualMass { composites: [a, b] }, Width::Absolute(w)) => {
                (ConShape::EqualAbsolute, a, b, 0.0, w)
            }
            (ConstraintKind::EqualMass { composites: [a, b] }, Width::Relative(r)) => {
                (ConShape::EqualRelative, a, b, 0.0, r)
            }
        };
        ConOp {
            k,
            shape,
            a,
            b,
            target,
            width,
            only_closest: c.only_closest,
        }
    }

    /// The χ² term given the composite masses.
    #[inline(always)]
    fn term(&self, m: &[f64; MAX_COMPOSITES]) -> f64 {
        self.term_of(m[self.a % MAX_COMPOSITES], m[self.b % MAX_COMPOSITES])
    }

    /// The χ² term for masses `ma` (composite `a`) and `mb` (composite `b`;
    /// unused by mass constraints).
    #[inline(always)]
    fn term_of(&self, ma: f64, mb: f64) -> f64 {
        let (diff, sigma) = match self.shape {
            ConShape::Mass => (ma - self.target, self.width),
            ConShape::EqualAbsolute => (ma - mb, self.width),
            ConShape::EqualRelative => (
                ma - mb,
                (self.width * 0.5 * (ma.abs() + mb.abs())).max(crate::MIN_RELATIVE_SIGMA),
            ),
        };
        if diff == 0.0 {
            return 0.0;
        }
        let z = diff / sigma;
        z * z
    }
}

/// A *join* for an equal-mass constraint whose one side (the *closed*
/// composite) completes at step `depth` while every later step fills the
/// other (*open*) side.
///
/// The subtree below `depth` then depends on the rest of the assignment only
/// through the closed mass and the objects already used. So every filling of
/// the open roles is listed once per event, by replaying the search's own
/// steps (same sums, same terms, bit for bit), and sorted by the open
/// composite's mass. Below `depth` the search then walks this list outwards from the
/// closed mass instead of descending: on each side the equal-mass term does
/// not decrease with the distance between the masses and every other term is
/// ≥ 0, so a side ends once `running χ² + equal-mass term` exceeds the K-th
/// best. Fillings that use an object already taken are skipped; the others'
/// χ² is the replayed sum, so the K best are those of the plain search.
#[derive(Clone, Debug)]
struct Join {
    depth: usize,
    /// The equal-mass constraint.
    eq: ConOp,
    closed: usize,
    open: usize,
    /// The steps after `depth` (all of them), in fill order, and their
    /// roles.
    open_steps: Vec<usize>,
    open_roles: Vec<usize>,
    /// Additions to the running χ² per filling, in the search's order: per
    /// open step its b-tag term, then its constraints' terms.
    n_incr: usize,
    /// Which addition is the equal-mass term (known only with the closed
    /// mass).
    eq_slot: usize,
    /// The open side's dedicated list builder, if it has that shape.
    lepton_side: Option<pair_join::LeptonSide>,
}

/// Largest estimated number of fillings (see `Plan::new`) of a side that
/// the plan fills last to join it (see [`Join`]): its list is built for
/// every event, which pays off only while it is short.
const MAX_JOIN_COST: f64 = 64.0;

/// What a walk over a join's list needs from the search.
struct JoinWalk {
    /// Running χ² at the join's step.
    v: f64,
    m_closed: f64,
    used_jets: u64,
    used_leps: u32,
    n_roles: usize,
}

/// Most fillings in a join's list; past this the search descends as usual
/// for that event (exact either way).
const MAX_JOIN_ENTRIES: usize = 4096;

/// Room reserved for a join's list when a [`Searcher`] is made: a list never
/// shrinks, so after the first events a search allocates nothing for it.
const JOIN_ENTRIES_RESERVED: usize = 256;

/// One filling of a join's open roles.
#[derive(Clone, Copy, Debug)]
struct JoinEntry {
    /// The open composite's mass.
    mass: f64,
    /// The sum of its additions, leaving out the equal-mass term.
    rest: f64,
    jets: u64,
    leps: u32,
    /// Which filling: its objects are `JoinList::objs[id]`, its additions
    /// start at `JoinList::incr[id × Join::n_incr]`.
    id: u32,
}

/// A join's list for the current event and key.
#[derive(Clone, Debug, Default)]
struct JoinList {
    entries: Vec<JoinEntry>,
    /// Objects of the open steps per filling, in step order.
    objs: Vec<[u8; MAX_ROLES]>,
    incr: Vec<f64>,
    /// Number of the search the list was built for.
    stamp: u64,
    /// Too many fillings: no join for this key.
    overflow: bool,
}

/// The order in which roles are filled and what completes at each step.
#[derive(Clone, Debug)]
struct Plan {
    steps: Vec<Step>,
    /// An empty result with the hypothesis's sizes and leaf masks filled.
    template: RankedAssignment,
    comp_ops: Vec<CompOp>,
    con_ops: Vec<ConOp>,
    joins: Vec<Join>,
    /// Lepton roles the neutrino may come from (at most one).
    nu_lepton: Option<usize>,
    /// The shape with a dedicated path, if the plan has it.
    pair_join: Option<pair_join::PairJetJoin>,
}

fn kind_rank(k: &RoleKind) -> u8 {
    match k {
        RoleKind::Lepton { .. } => 0,
        RoleKind::Neutrino { .. } => 1,
        RoleKind::LargeJet { .. } => 2,
        RoleKind::Jet { .. } => 3,
    }
}

impl Plan {
    /// Orders the roles so that constraints complete as early as possible:
    /// repeatedly pick the unfinished constraint whose missing roles have the
    /// smallest estimated branching product, append them (leptons, neutrino,
    /// large jets, jets), and finish with roles no constraint needs.
    fn new(h: &Hypothesis, n_jets: usize, btag: &BtagPolicy) -> Plan {
        let roles = h.roles();
        let n = roles.len();
        let branching = |r: usize| -> f64 {
            match roles[r].kind {
                RoleKind::Jet { tag } => {
                    let nj = n_jets.max(1) as f64;
                    match (btag, tag) {
                        (BtagPolicy::Threshold(_), TagRule::B) => (nj / 3.0).max(1.5),
                        _ => nj,
                    }
                }
                RoleKind::Lepton { .. } => 1.5,
                RoleKind::Neutrino { .. } => 2.0,
                RoleKind::LargeJet { .. } => 2.0,
            }
        };
        let need_of = |mut mask: u16| {
            for (r, role) in roles.iter().enumerate() {
                if mask & (1 << r) != 0 {
                    if let RoleKind::Neutrino { lepton } = role.kind {
                        mask |= 1 << lepton;
                    }
                }
            }
            mask
        };
        let cons_mask: Vec<u16> = h
            .constraints()
            .iter()
            .map(|c| match c.kind {
                ConstraintKind::Mass { composite, .. } => {
                    need_of(h.composites()[composite].leaf_mask)
                }
                ConstraintKind::EqualMass { composites: [a, b] } => {
                    need_of(h.composites()[a].leaf_mask | h.composites()[b].leaf_mask)
                }
            })
            .collect();
        let mut order: Vec<usize> = Vec::with_capacity(n);
        let mut placed = 0u16;
        // Within one constraint's roles: greedily the role that completes a
        // composite with the fewest roles still missing (so that, e.g., one
        // side of an equal-mass constraint completes early), then by kind
        // (leptons, neutrino, large jets, jets) and index. A neutrino waits
        // for its lepton, a jet for the large jet that may replace its
        // composite.
        let comps_all = h.composites();
        let push_sorted = |mask: u16, order: &mut Vec<usize>, placed: &mut u16| {
            let mut add: Vec<usize> = (0..n)
                .filter(|&r| mask & (1 << r) != 0 && *placed & (1 << r) == 0)
                .collect();
            while !add.is_empty() {
                let waiting = |r: usize| match roles[r].kind {
                    RoleKind::Neutrino { lepton } => add.contains(&lepton),
                    _ => comps_all.iter().any(|c| {
                        c.parts.contains(&Part::Role(r))
                            && c.whole.is_some_and(|w| add.contains(&w))
                    }),
                };
                let missing = |r: usize| {
                    comps_all
                        .iter()
                        .filter(|c| c.leaf_mask & (1 << r) != 0)
                        .map(|c| (c.leaf_mask & !*placed).count_ones())
                        .min()
                        .unwrap_or(u32::MAX)
                };
                let pick = add
                    .iter()
                    .copied()
                    .filter(|&r| !waiting(r))
                    .min_by_key(|&r| (missing(r), kind_rank(&roles[r].kind), r))
                    .or_else(|| {
                        add.iter()
                            .copied()
                            .min_by_key(|&r| (kind_rank(&roles[r].kind), r))
                    });
                let Some(r) = pick else { break };
                add.retain(|&x| x != r);
                order.push(r);
                *placed |= 1 << r;
            }
        };
        let cost_of = |missing: u16| {
            let mut cost = 1.0;
            for r in 0..n {
                if missing & (1 << r) != 0 {
                    cost *= branching(r);
                }
            }
            for g in h.interchangeable() {
                let k = g.iter().filter(|&&r| missing & (1 << r) != 0).count();
                cost /= (1..=k).product::<usize>() as f64;
            }
            cost
        };
        // An equal-mass constraint whose two sides share no role and hold
        // every role splits the search: the side with more fillings is
        // searched first and the other, last, is joined to it from a list
        // built once per event (see `Join`).
        let all = u16::MAX >> (16 - n);
        let first_side = h.constraints().iter().find_map(|c| {
            let ConstraintKind::EqualMass { composites: [a, b] } = c.kind else {
                return None;
            };
            let (ma, mb) = (
                need_of(h.composites()[a].leaf_mask),
                need_of(h.composites()[b].leaf_mask),
            );
            if ma & mb != 0 || ma | mb != all {
                return None;
            }
            let joinable = |m: u16| {
                (0..n).all(|r| {
                    m & (1 << r) == 0 || !matches!(roles[r].kind, RoleKind::LargeJet { .. })
                }) && h
                    .lepton_pairs()
                    .iter()
                    .all(|p| (m & (1 << p.roles[0]) == 0) == (m & (1 << p.roles[1]) == 0))
            };
            // The list is built for every event: only for a small side.
            let small = |m: u16| joinable(m) && cost_of(m) <= MAX_JOIN_COST;
            // The first side is searched, the other (small) one listed.
            match (small(ma), small(mb)) {
                (true, true) if cost_of(ma) < cost_of(mb) => Some(mb),
                (_, true) => Some(ma),
                (true, false) => Some(mb),
                (false, false) => None,
            }
        });
        for allowed in [first_side.unwrap_or(all), all] {
            loop {
                let mut best: Option<(f64, usize)> = None;
                for (k, &m) in cons_mask.iter().enumerate() {
                    let missing = m & !placed;
                    if missing == 0 || m & !allowed != 0 {
                        continue;
                    }
                    let cost = cost_of(missing);
                    if best.is_none_or(|(c, _)| cost < c) {
                        best = Some((cost, k));
                    }
                }
                match best {
                    Some((_, k)) => push_sorted(cons_mask[k], &mut order, &mut placed),
                    None => break,
                }
            }
            push_sorted(allowed, &mut order, &mut placed);
        }
        push_sorted(need_of(u16::MAX >> (16 - n)), &mut order, &mut placed);

        let depth_of = |r: usize| order.iter().position(|&x| x == r).unwrap_or(0);
        let comps = h.composites();
        let comp_close: Vec<usize> = comps
            .iter()
            .map(|c| c.leaves().map(depth_of).max().unwrap_or(0))
            .collect();
        let cons_close: Vec<usize> = h
            .constraints()
            .iter()
            .map(|c| match c.kind {
                ConstraintKind::Mass { composite, .. } => comp_close[composite],
                ConstraintKind::EqualMass { composites: [a, b] } => {
                    comp_close[a].max(comp_close[b])
                }
            })
            .collect();
        let mut steps = Vec::with_capacity(n);
        let mut comp_ops = Vec::new();
        let mut con_ops = Vec::new();
        for (d, &r) in order.iter().enumerate() {
            let kind = match roles[r].kind {
                RoleKind::Jet { tag } => StepKind::Jet(tag),
                RoleKind::Lepton { flavour, charge } => StepKind::Lepton(flavour, charge),
                RoleKind::Neutrino { lepton } => StepKind::Neutrino { lepton },
                RoleKind::LargeJet {
                    mass_min,
                    mass_max,
                    fills,
                } => StepKind::LargeJet {
                    lo: mass_min,
                    hi: mass_max,
                    optional: fills.is_some(),
                },
            };
            let sym_role = roles[r].group.and_then(|g| {
                order[..d]
                    .iter()
                    .rev()
                    .find(|&&x| roles[x].group == Some(g))
                    .copied()
            });
            let skip_if = comps
                .iter()
                .find(|c| c.whole.is_some() && c.parts.contains(&Part::Role(r)))
                .and_then(|c| c.whole);
            let pair_checks = h
                .lepton_pairs()
                .iter()
                .enumerate()
                .filter_map(|(k, p)| {
                    let other = if p.roles[0] == r {
                        p.roles[1]
                    } else if p.roles[1] == r {
                        p.roles[0]
                    } else {
                        return None;
                    };
                    (depth_of(other) < d).then_some((other, k))
                })
                .collect();
            let c0 = comp_ops.len();
            for &c in h.composites_bottom_up() {
                if comp_close[c] != d {
                    continue;
                }
                // Sources in declaration order (whole, roles, composites),
                // then stably split into fixed and set-at-this-step.
                let mut all: Vec<(bool, usize)> = Vec::new();
                if let Some(w) = comps[c].whole {
                    all.push((w == r, w));
                }
                for p in &comps[c].parts {
                    if let Part::Role(q) = p {
                        all.push((*q == r, *q));
                    }
                }
                for p in &comps[c].parts {
                    if let Part::Composite(j) = p {
                        all.push((comp_close[*j] == d, MAX_ROLES + *j));
                    }
                }
                all.sort_by_key(|&(varying, _)| varying);
                let mut op = CompOp {
                    dest: c,
                    n: all.len(),
                    n_inv: all.iter().filter(|(varying, _)| !varying).count(),
                    src: [0; SLOTS],
                };
                for (i, &(_, slot)) in all.iter().enumerate() {
                    op.src[i] = slot as u8;
                }
                comp_ops.push(op);
            }
            let k0 = con_ops.len();
            for (k, c) in h.constraints().iter().enumerate() {
                if cons_close[k] == d {
                    con_ops.push(ConOp::new(k, c));
                }
            }
            steps.push(Step {
                role: r,
                kind,
                sym_role,
                skip_if,
                pair_checks,
                comps: (c0, comp_ops.len()),
                cons: (k0, con_ops.len()),
                join: None,
            });
        }
        let joins = Self::joins(h, &order, &steps, &comp_close, &con_ops);
        for (i, la) in joins.iter().enumerate() {
            if steps[la.depth].join.is_none() {
                steps[la.depth].join = Some(i);
            }
        }
        let mut template = RankedAssignment {
            chi2: 0.0,
            btag_chi2: 0.0,
            n_roles: n as u8,
            n_composites: comps.len() as u8,
            n_constraints: h.constraints().len() as u8,
            objects: [ObjectRef::Empty; MAX_ROLES],
            composite_p4: [FourMomentum::ZERO; MAX_COMPOSITES],
            leaf_masks: [0; MAX_COMPOSITES],
            terms: [0.0; MAX_CONSTRAINTS],
            neutrino: None,
        };
        for (c, comp) in comps.iter().enumerate() {
            template.leaf_masks[c] = comp.leaf_mask;
        }
        let mut plan = Plan {
            steps,
            template,
            comp_ops,
            con_ops,
            joins,
            nu_lepton: roles.iter().find_map(|r| match r.kind {
                RoleKind::Neutrino { lepton } => Some(lepton),
                _ => None,
            }),
            pair_join: None,
        };
        for i in 0..plan.joins.len() {
            plan.joins[i].lepton_side = pair_join::LeptonSide::detect(&plan, &plan.joins[i]);
        }
        plan.pair_join = pair_join::PairJetJoin::detect(&plan);
        plan
    }

    /// The joins of the equal-mass constraints (see [`Join`]): for those
    /// whose sides are disjoint and whose open side fills every step after
    /// the closed one, with no large jet, no lepton-pair rule, and no
    /// constraint there other than the equal-mass one and mass constraints
    /// inside the open side.
    fn joins(
        h: &Hypothesis,
        order: &[usize],
        steps: &[Step],
        comp_close: &[usize],
        con_ops: &[ConOp],
    ) -> Vec<Join> {
        let comps = h.composites();
        let roles = h.roles();
        let depth_of = |r: usize| order.iter().position(|&x| x == r).unwrap_or(0);
        let mut out = Vec::new();
        'constraints: for (k, c) in h.constraints().iter().enumerate() {
            let ConstraintKind::EqualMass { composites: [a, b] } = c.kind else {
                continue;
            };
            let (ma, mb) = (comps[a].leaf_mask, comps[b].leaf_mask);
            if ma & mb != 0 || comp_close[a] == comp_close[b] {
                continue;
            }
            let (closed, open) = if comp_close[a] < comp_close[b] {
                (a, b)
            } else {
                (b, a)
            };
            let depth = comp_close[closed];
            let open_mask = comps[open].leaf_mask;
            let open_steps: Vec<usize> = (depth + 1..steps.len()).collect();
            // The list must depend on no earlier role: it is built once per
            // event (a list rebuilt within the search costs more than it
            // saves).
            if (0..roles.len()).any(|r| open_mask & (1 << r) != 0 && depth_of(r) <= depth) {
                continue;
            }
            let mut n_incr = 0;
            let mut eq_slot = usize::MAX;
            for &d in &open_steps {
                let st = &steps[d];
                if open_mask & (1 << st.role) == 0
                    || st.skip_if.is_some()
                    || !st.pair_checks.is_empty()
                {
                    continue 'constraints;
                }
                match st.kind {
                    StepKind::LargeJet { .. } => continue 'constraints,
                    StepKind::Neutrino { lepton } if open_mask & (1 << lepton) == 0 => {
                        continue 'constraints;
                    }
                    _ => {}
                }
                n_incr += 1;
                for op in &con_ops[st.cons.0..st.cons.1] {
                    if op.k == k {
                        eq_slot = n_incr;
                    } else {
                        let inside = |c: usize| comps[c].leaf_mask & !open_mask == 0;
                        if op.only_closest || !inside(op.a) || !inside(op.b) {
                            continue 'constraints;
                        }
                    }
                    n_incr += 1;
                }
            }
            if eq_slot == usize::MAX {
                continue;
            }
            let mut eq = ConOp::new(k, c);
            eq.a = closed;
            eq.b = open;
            out.push(Join {
                depth,
                eq,
                closed,
                open,
                open_roles: open_steps.iter().map(|&d| steps[d].role).collect(),
                open_steps,
                n_incr,
                eq_slot,
                lepton_side: None,
            });
        }
        out
    }
}

/// One finished assignment held in the K-best list.
#[derive(Clone, Copy, Debug)]
struct Leaf {
    chi2: f64,
    choice: [u8; MAX_ROLES],
}

/// Objects used by a partial assignment; passed down the search by value, so
/// nothing is restored on the way back.
#[derive(Clone, Copy, Debug, Default)]
struct Occupancy {
    /// Used objects by kind: jets, leptons, large jets (and a dummy row for
    /// neutrino roots, which occupy nothing).
    used: [u64; 4],
    /// Jets inside a large jet already used.
    blocked: u64,
}

/// Per-event buffers, allocated once per [`Searcher`].
#[derive(Clone, Debug)]
struct Workspace {
    // Object pools (leading objects, finite four-vectors).
    n_jets: usize,
    /// Four-vectors of every object: jets, leptons, large jets, then two
    /// neutrino roots per lepton (see [`JET_BASE`] and friends).
    obj_p4: [FourMomentum; OBJ_SLOTS],
    jet_pos: [u32; MAX_JETS],
    jet_index: [u32; MAX_JETS],
    jet_score: [f64; MAX_JETS],
    /// b-tag χ² term per jet: row 0 for `any` roles (zeros), 1 for `b`
    /// roles, 2 for `light` roles.
    pen: [[f64; MAX_JETS]; 3],
    n_leps: usize,
    lep_flav: [Flavour; MAX_LEPTONS],
    lep_charge: [i8; MAX_LEPTONS],
    lep_pos: [u32; MAX_LEPTONS],
    lep_index: [u32; MAX_LEPTONS],
    n_large: usize,
    large_pos: [u32; MAX_LARGE_JETS],
    large_index: [u32; MAX_LARGE_JETS],
    large_overlap: [u64; MAX_LARGE_JETS],
    nu: [Option<NeutrinoSolutions>; MAX_LEPTONS],
    /// Per depth: the objects its role's requirements admit in this event
    /// (bit = object index), and the b-tag row of `pen`.
    cand_mask: [u64; MAX_ROLES],
    pen_row: [usize; MAX_ROLES],
    /// Per depth: candidates scored for best-first descent.
    buf: [[(f64, u8); MAX_CANDS]; MAX_ROLES],
    rest_min: [f64; MAX_ROLES + 1],
    closest_dev: [f64; MAX_CONSTRAINTS],
    // Current partial assignment.
    choice: [u8; MAX_ROLES],
    /// Four-vectors: roles, then composites (see [`SLOTS`]).
    p4s: [FourMomentum; SLOTS],
    comp_m: [f64; MAX_COMPOSITES],
    /// Join lists (one per [`Plan::joins`]) and the number of this
    /// search, which invalidates them.
    lists: Vec<JoinList>,
    searches: u64,
    /// Per composite: the sum of its sources fixed before the step that
    /// completes it (see [`CompOp`]).
    prefix: [FourMomentum; MAX_COMPOSITES],
    /// χ² of the K-th best so far (∞ until K are held).
    thr: f64,
    // Results.
    best: Vec<Leaf>,
    k: usize,
    prune: bool,
    evaluated: Evaluated,
    // Scratch for sorting the input jets.
    sort_scratch: Vec<(f64, u32)>,
    /// Scored pairs of the [`pair_join`] path (empty for other plans), and
    /// their running χ² apart, for the best-first scan.
    pairs: Vec<pair_join::ScoredPair>,
    pair_v: Vec<f64>,
    /// The lepton side's compact list for the [`pair_join`] path.
    lepton_list: pair_join::LeptonList,
}

/// A reusable search engine for one hypothesis and configuration.
///
/// All buffers are allocated in [`Searcher::new`]; a search allocates only
/// the returned `Vec` of ranked assignments (none with
/// [`Searcher::search_into`] once its vector has capacity), and, for a
/// hypothesis whose equal-mass side is joined from a per-event list, grows
/// that list when an event has more fillings than any before (at most 4096),
/// never per assignment.
///
/// ```
/// use quarry_assign::{presets, SearchConfig, Searcher, SearchStatus};
/// let h = presets::get("ttbar-ljets").unwrap();
/// let mut s = Searcher::new(&h, SearchConfig::default()).unwrap();
/// let out = s.search(&quarry_event::Event::new(1));
/// assert!(matches!(out.status, SearchStatus::TooFewJets { .. }));
/// ```
#[derive(Clone, Debug)]
pub struct Searcher {
    hyp: Hypothesis,
    config: SearchConfig,
    leading: usize,
    plan: Plan,
    ws: Box<Workspace>,
}

impl Searcher {
    /// Prepares a search: checks the configuration, orders the roles and
    /// allocates every buffer.
    ///
    /// # Errors
    /// [`SearchConfigError`] for a bad `k_best`, jet override or b-tag policy.
    pub fn new(hyp: &Hypothesis, config: SearchConfig) -> Result<Searcher, SearchConfigError> {
        if config.k_best == 0 || config.k_best > MAX_K_BEST {
            return Err(SearchConfigError::BadK(config.k_best));
        }
        let leading = match config.max_jets_override {
            Some(v) if v > MAX_JETS || v < hyp.min_jets() => {
                return Err(SearchConfigError::BadLeadingJets {
                    value: v,
                    needed: hyp.min_jets(),
                })
            }
            Some(v) => v,
            None => hyp.leading_jets(),
        };
        match config.btag {
            BtagPolicy::Threshold(t) if !t.is_finite() => {
                return Err(SearchConfigError::BadBtag(config.btag))
            }
            BtagPolicy::Weighted {
                b_efficiency: eb,
                light_mistag: el,
            } if !(eb > 0.0 && eb < 1.0 && el > 0.0 && el < eb) => {
                return Err(SearchConfigError::BadBtag(config.btag))
            }
            _ => {}
        }
        let plan = Plan::new(hyp, leading, &config.btag);
        let ws = Box::new(Workspace {
            n_jets: 0,
            obj_p4: [FourMomentum::ZERO; OBJ_SLOTS],
            jet_pos: [0; MAX_JETS],
            jet_index: [0; MAX_JETS],
            jet_score: [0.0; MAX_JETS],
            pen: [[0.0; MAX_JETS]; 3],
            n_leps: 0,
            lep_flav: [Flavour::Electron; MAX_LEPTONS],
            lep_charge: [0; MAX_LEPTONS],
            lep_pos: [0; MAX_LEPTONS],
            lep_index: [0; MAX_LEPTONS],
            n_large: 0,
            large_pos: [0; MAX_LARGE_JETS],
            large_index: [0; MAX_LARGE_JETS],
            large_overlap: [0; MAX_LARGE_JETS],
            nu: [None; MAX_LEPTONS],
            cand_mask: [0; MAX_ROLES],
            pen_row: [0; MAX_ROLES],
            buf: [[(0.0, 0); MAX_CANDS]; MAX_ROLES],
            rest_min: [0.0; MAX_ROLES + 1],
            closest_dev: [0.0; MAX_CONSTRAINTS],
            choice: [NONE; MAX_ROLES],
            p4s: [FourMomentum::ZERO; SLOTS],
            comp_m: [0.0; MAX_COMPOSITES],
            prefix: [FourMomentum::ZERO; MAX_COMPOSITES],
            lists: plan
                .joins
                .iter()
                .map(|la| JoinList {
                    // Grown (rarely) by the first events, then reused.
                    entries: Vec::with_capacity(JOIN_ENTRIES_RESERVED),
                    objs: Vec::with_capacity(JOIN_ENTRIES_RESERVED),
                    incr: Vec::with_capacity(JOIN_ENTRIES_RESERVED * la.n_incr),
                    ..JoinList::default()
                })
                .collect(),
            searches: 0,
            thr: f64::INFINITY,
            best: Vec::with_capacity(config.k_best + 1),
            k: config.k_best,
            prune: config.prune,
            evaluated: Evaluated::default(),
            sort_scratch: Vec::with_capacity(64),
            pairs: Vec::with_capacity(if plan.pair_join.is_some() {
                pair_join::MAX_PAIRS
            } else {
                0
            }),
            pair_v: Vec::with_capacity(if plan.pair_join.is_some() {
                pair_join::MAX_PAIRS
            } else {
                0
            }),
            lepton_list: pair_join::LeptonList::for_plan(&plan),
        });
        Ok(Searcher {
            hyp: hyp.clone(),
            config,
            leading,
            plan,
            ws,
        })
    }

    /// The hypothesis searched.
    pub fn hypothesis(&self) -> &Hypothesis {
        &self.hyp
    }

    /// The configuration in use.
    pub fn config(&self) -> &SearchConfig {
        &self.config
    }

    /// Role indices in the order the search fills them (constraints that
    /// close early first). Exposed for diagnostics.
    pub fn fill_order(&self) -> Vec<usize> {
        self.plan.steps.iter().map(|s| s.role).collect()
    }

    /// Searches one event for the best assignments. Never panics; problems
    /// with the event are reported in [`SearchOutcome::status`].
    pub fn search(&mut self, event: &Event) -> SearchOutcome {
        let mut out = SearchOutcome {
            status: SearchStatus::NoValidAssignment,
            ranked: Vec::with_capacity(self.config.k_best),
            evaluated: Evaluated::default(),
        };
        self.search_into(event, &mut out);
        out
    }

    /// Like [`search`](Self::search), reusing `out`'s vector.
    pub fn search_into(&mut self, event: &Event, out: &mut SearchOutcome) {
        out.ranked.clear();
        out.evaluated = Evaluated::default();
        out.status = self.run(event);
        out.evaluated = self.ws.evaluated;
        if out.status == SearchStatus::Found {
            for i in 0..self.ws.best.len() {
                let leaf = self.ws.best[i];
                out.ranked.push(self.plan.template);
                if let Some(slot) = out.ranked.last_mut() {
                    self.ws.build_into(&self.plan, &leaf, slot);
                }
            }
        }
    }

    fn run(&mut self, event: &Event) -> SearchStatus {
        let ws = &mut *self.ws;
        let hyp = &self.hyp;
        let plan = &self.plan;
        ws.best.clear();
        ws.thr = f64::INFINITY;
        ws.searches += 1;
        ws.evaluated = Evaluated::default();
        ws.load_objects(
            event,
            self.leading,
            hyp.large_jet_overlap_dr(),
            &self.config.btag,
        );
        if ws.n_jets < hyp.min_jets() {
            return SearchStatus::TooFewJets {
                needed: hyp.min_jets(),
                available: ws.n_jets,
            };
        }
        if ws.n_leps < hyp.min_leptons() {
            return SearchStatus::TooFewLeptons {
                needed: hyp.min_leptons(),
                available: ws.n_leps,
            };
        }
        if ws.n_large < hyp.min_large_jets() {
            return SearchStatus::TooFewLargeJets {
                needed: hyp.min_large_jets(),
                available: ws.n_large,
            };
        }
        ws.build_candidates(plan, &self.config.btag);
        // Neutrino solutions for every lepton that may source it.
        let mut nu_error = None;
        let mut nu_ok = false;
        if let Some(lrole) = plan.nu_lepton {
            ws.nu = [None; MAX_LEPTONS];
            let d = plan.steps.iter().position(|s| s.role == lrole).unwrap_or(0);
            let mut m = ws.cand_mask[d];
            while m != 0 {
                let l = m.trailing_zeros() as usize;
                m &= m - 1;
                match self.config.neutrino.solve(
                    &ws.obj_p4[LEP_BASE + l],
                    event.met.px,
                    event.met.py,
                ) {
                    Ok(s) => {
                        for (r, n) in s.as_slice().iter().enumerate() {
                            ws.obj_p4[NU_BASE + 2 * l + r] = n.p4;
                        }
                        ws.nu[l] = Some(s);
                        nu_ok = true;
                    }
                    Err(e) => nu_error = nu_error.or(Some(e)),
                }
            }
        }
        ws.prepare_closest(hyp);
        ws.choice = [NONE; MAX_ROLES];
        if self.config.prune {
            ws.prepare_joins(hyp, plan, plan.pair_join.as_ref());
        }
        // The join lists are read-only during the search: moved out of the
        // workspace meanwhile, so the search can borrow them beside it.
        let lists = std::mem::take(&mut ws.lists);
        match (&plan.pair_join, self.config.prune) {
            (Some(k), true) => ws.pair_join(k, hyp, plan, &lists),
            _ => ws.dfs(hyp, plan, &lists, 0, 0.0, Occupancy::default()),
        }
        ws.lists = lists;
        if !ws.best.is_empty() {
            SearchStatus::Found
        } else if let (Some(e), false) = (nu_error, nu_ok) {
            SearchStatus::NeutrinoFailed(e)
        } else {
            SearchStatus::NoValidAssignment
        }
    }
}

/// Searches every event in parallel (rayon; one [`Searcher`] per worker),
/// returning outcomes in input order.
///
/// # Errors
/// [`SearchConfigError`] if the configuration is invalid.
///
/// ```
/// use quarry_assign::{presets, search_all, SearchConfig};
/// let h = presets::get("bwbw-ljets").unwrap();
/// let events = vec![quarry_event::Event::new(1), quarry_event::Event::new(2)];
/// let out = search_all(&h, &events, &SearchConfig::default()).unwrap();
/// assert_eq!(out.len(), 2);
/// ```
pub fn search_all(
    hyp: &Hypothesis,
    events: &[Event],
    config: &SearchConfig,
) -> Result<Vec<SearchOutcome>, SearchConfigError> {
    let proto = Searcher::new(hyp, *config)?;
    Ok(events
        .par_iter()
        .map_init(|| proto.clone(), |s, e| s.search(e))
        .collect())
}

/// Sorts a join's list by mass. Lists are short (a dozen fillings for a bW
/// pair's leptonic side), where a plain insertion sort on the mass alone
/// beats the general sort; long ones use the general sort. Masses are never
/// NaN (those fillings are left out), so `<` is a total order up to the sign
/// of zero, which the walk does not distinguish.
fn sort_by_mass<T: Copy>(entries: &mut [T], mass: impl Fn(&T) -> f64) {
    if entries.len() > 32 {
        entries.sort_unstable_by(|a, b| mass(a).total_cmp(&mass(b)));
        return;
    }
    for i in 1..entries.len() {
        let e = entries[i];
        let m = mass(&e);
        let mut j = i;
        while j > 0 && m < mass(&entries[j - 1]) {
            entries[j] = entries[j - 1];
            j -= 1;
        }
        entries[j] = e;
    }
}

/// Invariant mass from `E² − |p|²` with one square root (the search's
/// innermost operation). `FourMomentum::m` takes a second root to factor
/// `(E − |p|)(E + |p|)` for precision on nearly massless vectors; composites
/// here are W, top and heavier systems, for which the direct form loses at
/// most ~1e-13 relatively. Same sign convention as `FourMomentum::m`.
#[inline(always)]
fn fast_mass(p: &FourMomentum) -> f64 {
    let m2 = p.e() * p.e() - (p.px() * p.px() + p.py() * p.py() + p.pz() * p.pz());
    if m2 >= 0.0 {
        m2.sqrt()
    } else {
        -(-m2).sqrt()
    }
}

impl Workspace {
    fn load_objects(&mut self, event: &Event, leading: usize, overlap_dr: f64, btag: &BtagPolicy) {
        // Jets: finite four-vectors, leading `leading` by pt (ties: input
        // position), so 10 000 jets cost one partial selection.
        let scratch = &mut self.sort_scratch;
        scratch.clear();
        for (i, j) in event.jets.iter().enumerate() {
            if j.p4.is_finite() {
                scratch.push((j.p4.pt(), i as u32));
            }
        }
        let by_pt = |a: &(f64, u32), b: &(f64, u32)| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1));
        let keep = leading.min(scratch.len()).min(MAX_JETS);
        if keep > 0 && keep < scratch.len() {
            scratch.select_nth_unstable_by(keep - 1, by_pt);
        }
        scratch.truncate(keep);
        scratch.sort_unstable_by(by_pt);
        self.n_jets = keep;
        for (k, &(_, i)) in scratch.iter().enumerate() {
            let j = &event.jets[i as usize];
            self.obj_p4[JET_BASE + k] = j.p4;
            self.jet_pos[k] = i;
            self.jet_index[k] = j.index;
            self.jet_score[k] = j.btag;
            let (b, l) = btag.penalties(j.btag);
            self.pen[1][k] = b;
            self.pen[2][k] = l;
        }
        // Leptons: finite, by pt, at most MAX_LEPTONS.
        scratch.clear();
        let ne = event.electrons.len();
        for (i, l) in event.leptons().enumerate() {
            if l.p4.is_finite() {
                scratch.push((l.p4.pt(), i as u32));
            }
        }
        scratch.sort_unstable_by(by_pt);
        scratch.truncate(MAX_LEPTONS);
        self.n_leps = scratch.len();
        for (k, &(_, i)) in scratch.iter().enumerate() {
            let i = i as usize;
            let (l, pos) = if i < ne {
                (&event.electrons[i], i)
            } else {
                (&event.muons[i - ne], i - ne)
            };
            self.obj_p4[LEP_BASE + k] = l.p4;
            self.lep_flav[k] = l.flavour;
            self.lep_charge[k] = l.charge;
            self.lep_pos[k] = pos as u32;
            self.lep_index[k] = l.index;
        }
        // Large-radius jets: finite, by pt, at most MAX_LARGE_JETS.
        scratch.clear();
        for (i, j) in event.fat_jets.iter().enumerate() {
            if j.p4.is_finite() {
                scratch.push((j.p4.pt(), i as u32));
            }
        }
        scratch.sort_unstable_by(by_pt);
        scratch.truncate(MAX_LARGE_JETS);
        self.n_large = scratch.len();
        let dr2 = overlap_dr * overlap_dr;
        for (k, &(_, i)) in scratch.iter().enumerate() {
            let f = &event.fat_jets[i as usize];
            self.obj_p4[LARGE_BASE + k] = f.p4;
            self.large_pos[k] = i;
            self.large_index[k] = f.index;
            let mut mask = 0u64;
            for j in 0..self.n_jets {
                if self.obj_p4[JET_BASE + j].delta_r2(&f.p4) < dr2 {
                    mask |= 1 << j;
                }
            }
            self.large_overlap[k] = mask;
        }
    }

    fn build_candidates(&mut self, plan: &Plan, btag: &BtagPolicy) {
        // Per b-tag row (any, b, light): the jets admitted and their
        // smallest b-tag term, found in one pass over the jets.
        let mut jets_of = [0u64; 3];
        let mut pen_min = [f64::INFINITY; 3];
        for j in 0..self.n_jets {
            for (row, tag) in [TagRule::Any, TagRule::B, TagRule::Light]
                .into_iter()
                .enumerate()
            {
                if btag.admits(tag, self.jet_score[j]) {
                    jets_of[row] |= 1 << j;
                    pen_min[row] = pen_min[row].min(self.pen[row][j]);
                }
            }
        }
        for (d, step) in plan.steps.iter().enumerate() {
            let mut mask = 0u64;
            let mut row = 0;
            match step.kind {
                StepKind::Jet(tag) => {
                    row = match tag {
                        TagRule::Any => 0,
                        TagRule::B => 1,
                        TagRule::Light => 2,
                    };
                    mask = jets_of[row];
                }
                StepKind::Lepton(flav, charge) => {
                    for l in 0..self.n_leps {
                        if flav.is_none_or(|f| f == self.lep_flav[l])
                            && charge.is_none_or(|q| q == self.lep_charge[l])
                        {
                            mask |= 1 << l;
                        }
                    }
                }
                StepKind::Neutrino { .. } => {}
                StepKind::LargeJet { lo, hi, .. } => {
                    for f in 0..self.n_large {
                        let m = self.obj_p4[LARGE_BASE + f].m();
                        if m >= lo && m <= hi {
                            mask |= 1 << f;
                        }
                    }
                }
            }
            self.cand_mask[d] = mask;
            self.pen_row[d] = row;
        }
        // Admissible lower bound on the b-tag terms still to come.
        let nsteps = plan.steps.len();
        self.rest_min[nsteps] = 0.0;
        for d in (0..nsteps).rev() {
            let step = &plan.steps[d];
            let mut min_here = f64::INFINITY;
            if step.skip_if.is_none() && matches!(step.kind, StepKind::Jet(_)) {
                min_here = pen_min[self.pen_row[d] % 3];
            }
            let min_here = if min_here.is_finite() { min_here } else { 0.0 };
            self.rest_min[d] = self.rest_min[d + 1] + min_here;
        }
    }
}

impl Workspace {
    /// For each `only_closest` constraint: the smallest |m − target| over the
    /// lepton combinations its composite allows.
    fn prepare_closest(&mut self, hyp: &Hypothesis) {
        for (k, c) in hyp.constraints().iter().enumerate() {
            if !c.only_closest {
                continue;
            }
            let ConstraintKind::Mass { composite, target } = c.kind else {
                continue;
            };
            let mut roles = [0usize; MAX_ROLES];
            let mut nr = 0;
            for r in hyp.composites()[composite].leaves() {
                roles[nr] = r;
                nr += 1;
            }
            let mut pick = [0u8; MAX_ROLES];
            let mut best = f64::INFINITY;
            self.closest_rec(hyp, &roles[..nr], 0, &mut pick, 0, target, &mut best);
            self.closest_dev[k] = best;
        }
    }

    #[allow(clippy::too_many_arguments)]
    fn closest_rec(
        &self,
        hyp: &Hypothesis,
        roles: &[usize],
        i: usize,
        pick: &mut [u8; MAX_ROLES],
        used: u32,
        target: f64,
        best: &mut f64,
    ) {
        if i == roles.len() {
            let p: FourMomentum = pick[..i]
                .iter()
                .map(|&l| self.obj_p4[LEP_BASE + l as usize])
                .sum();
            let dev = (p.m() - target).abs();
            if dev < *best {
                *best = dev;
            }
            return;
        }
        let RoleKind::Lepton { flavour, charge } = hyp.roles()[roles[i]].kind else {
            return;
        };
        'leptons: for l in 0..self.n_leps {
            if used & (1 << l) != 0
                || flavour.is_some_and(|f| f != self.lep_flav[l])
                || charge.is_some_and(|q| q != self.lep_charge[l])
            {
                continue;
            }
            for p in hyp.lepton_pairs() {
                for t in 0..i {
                    let hit = (p.roles[0] == roles[i] && p.roles[1] == roles[t])
                        || (p.roles[1] == roles[i] && p.roles[0] == roles[t]);
                    let o = pick[t] as usize;
                    if hit
                        && !p.allows(
                            (self.lep_flav[l], self.lep_charge[l]),
                            (self.lep_flav[o], self.lep_charge[o]),
                        )
                    {
                        continue 'leptons;
                    }
                }
            }
            pick[i] = l as u8;
            self.closest_rec(hyp, roles, i + 1, pick, used | (1 << l), target, best);
        }
    }
}

impl Workspace {
    /// The objects step `d` may place given the roles already filled, as a
    /// bit mask over object indices, and whether leaving the role empty is a
    /// candidate (visited before the objects).
    #[inline(always)]
    fn admissible_objects(
        &self,
        hyp: &Hypothesis,
        step: &Step,
        d: usize,
        occ: &Occupancy,
    ) -> (u64, bool) {
        if let StepKind::Neutrino { lepton } = step.kind {
            let l = self.choice[lepton] as usize;
            return match self.nu.get(l).and_then(Option::as_ref) {
                Some(s) => ((1u64 << s.len()) - 1, false),
                None => (0, false),
            };
        }
        if let Some(w) = step.skip_if {
            if self.choice[w] != NONE {
                return (0, true);
            }
        }
        let mut mask = self.cand_mask[d];
        let mut none = false;
        match step.kind {
            StepKind::Jet(_) => mask &= !(occ.used[0] | occ.blocked),
            StepKind::Lepton(..) => {
                mask &= !occ.used[1];
                if !step.pair_checks.is_empty() {
                    let mut m = mask;
                    while m != 0 {
                        let l = m.trailing_zeros() as usize;
                        m &= m - 1;
                        let ok = step.pair_checks.iter().all(|&(other, k)| {
                            let o = self.choice[other] as usize;
                            hyp.lepton_pairs()[k].allows(
                                (self.lep_flav[l], self.lep_charge[l]),
                                (self.lep_flav[o], self.lep_charge[o]),
                            )
                        });
                        if !ok {
                            mask &= !(1 << l);
                        }
                    }
                }
            }
            StepKind::LargeJet { optional, .. } => {
                none = optional;
                mask &= !occ.used[2];
                let mut m = mask;
                while m != 0 {
                    let f = m.trailing_zeros() as usize;
                    m &= m - 1;
                    if self.large_overlap[f] & occ.used[0] != 0 {
                        mask &= !(1 << f);
                    }
                }
            }
            StepKind::Neutrino { .. } => {}
        }
        if let Some(s) = step.sym_role {
            // Canonical order within an interchangeable group: strictly
            // after the earlier member's object (never empty).
            let prev = self.choice[s];
            if prev == NONE {
                return (0, false);
            }
            mask &= u64::MAX.checked_shl(u32::from(prev) + 1).unwrap_or(0);
            none = false;
        }
        (mask, none)
    }

    /// Where the step's objects live in `obj_p4` (object `o` at `base + o`)
    /// and which row of [`Occupancy::used`] they occupy.
    #[inline(always)]
    fn pool(&self, step: &Step) -> (usize, usize) {
        match step.kind {
            StepKind::Jet(_) => (JET_BASE, 0),
            StepKind::Lepton(..) => (LEP_BASE, 1),
            StepKind::LargeJet { .. } => (LARGE_BASE, 2),
            StepKind::Neutrino { lepton } => (
                NU_BASE + 2 * (self.choice[lepton] as usize % MAX_LEPTONS),
                3,
            ),
        }
    }

    /// Sums, once per visit of a step, the sources of its composites that are
    /// fixed before it.
    #[inline(always)]
    fn prepare_prefixes(&mut self, ops: &[CompOp]) {
        for op in ops {
            if op.n_inv > 0 {
                let inv = &op.src[..op.n_inv];
                let mut p = self.p4s[inv[0] as usize % SLOTS];
                for &s in &inv[1..] {
                    p += self.p4s[s as usize % SLOTS];
                }
                self.prefix[op.dest % MAX_COMPOSITES] = p;
            }
        }
    }

    /// Puts four-vector `p` in `role` and completes the step's composites
    /// (prefixes prepared).
    #[inline(always)]
    fn close_comps(&mut self, ops: &[CompOp], role: usize, p: FourMomentum) {
        self.p4s[role % SLOTS] = p;
        for op in ops {
            let dest = op.dest % MAX_COMPOSITES;
            let (mut p, from) = if op.n_inv > 0 {
                (self.prefix[dest], op.n_inv)
            } else {
                (self.p4s[op.src[0] as usize % SLOTS], 1)
            };
            for &s in &op.src[from.min(op.n)..op.n] {
                p += self.p4s[s as usize % SLOTS];
            }
            self.p4s[MAX_ROLES + dest] = p;
            self.comp_m[dest] = fast_mass(&p);
        }
    }

    /// Adds the terms of the constraints the step completes to `v`; `∞` if
    /// one rejects the assignment or the sum is NaN.
    #[inline(always)]
    fn eval_cons(&self, cons: &[ConOp], mut v: f64) -> f64 {
        for op in cons {
            if op.only_closest && op.shape == ConShape::Mass {
                let dev = (self.comp_m[op.a % MAX_COMPOSITES] - op.target).abs();
                let lim = self.closest_dev[op.k % MAX_CONSTRAINTS];
                if dev.is_nan() || dev > lim + 1e-9 * lim.max(1.0) {
                    return f64::INFINITY;
                }
            }
            v += op.term(&self.comp_m);
        }
        if v.is_nan() {
            f64::INFINITY
        } else {
            v
        }
    }

    /// Whether a partial assignment with running χ² `v` and at least `rest`
    /// more to come may still reach the K best. Strict: ties survive, so the
    /// tie-break matches exhaustive enumeration. The running sum only grows
    /// (adding a non-negative term never rounds down), so `v` alone is an
    /// exact bound; `rest` is shaved by 1e-12 relative to absorb rounding.
    #[inline(always)]
    fn admissible(&self, v: f64, rest: f64) -> bool {
        if !v.is_finite() {
            return false;
        }
        if !self.prune {
            return true;
        }
        let bound = if rest > 0.0 {
            v + rest - 1e-12 * (v + rest)
        } else {
            v
        };
        bound <= self.thr
    }

    /// Offers the current complete assignment with χ² `v` to the K best.
    #[inline(always)]
    fn record(&mut self, v: f64, n_roles: usize) {
        // Strictly worse than the K-th best (or not finite): cannot enter.
        if v <= self.thr {
            self.insert(v, n_roles);
        }
    }

    #[inline(never)]
    fn insert(&mut self, v: f64, n_roles: usize) {
        if !v.is_finite() {
            return;
        }
        let key = &self.choice[..n_roles];
        let before = |leaf: &Leaf| {
            v.total_cmp(&leaf.chi2)
                .then_with(|| key.cmp(&leaf.choice[..n_roles]))
                == std::cmp::Ordering::Less
        };
        if self.best.len() == self.k && !before(&self.best[self.k - 1]) {
            return;
        }
        let pos = self.best.iter().position(before).unwrap_or(self.best.len());
        let leaf = Leaf {
            chi2: v,
            choice: self.choice,
        };
        if self.best.len() < self.k {
            self.best.push(leaf);
        }
        // Shift the worse ones down by hand (K is small).
        let mut i = self.best.len() - 1;
        while i > pos {
            self.best[i] = self.best[i - 1];
            i -= 1;
        }
        self.best[pos] = leaf;
        if self.best.len() == self.k {
            self.thr = self.best[self.k - 1].chi2;
        }
    }

    /// Completes the assignment below join `i`'s step from its list (see
    /// [`Join`]), given the running χ² `v` and the objects used;
    /// `false` if the list cannot be used here (the caller descends).
    fn join(
        &mut self,
        hyp: &Hypothesis,
        plan: &Plan,
        t: &JoinList,
        i: usize,
        v: f64,
        occ: Occupancy,
    ) -> bool {
        let la = &plan.joins[i];
        let m_closed = self.comp_m[la.closed % MAX_COMPOSITES];
        if !(m_closed >= 0.0 && m_closed.is_finite()) {
            return false;
        }
        if t.overflow || t.stamp != self.searches {
            return false;
        }
        let used_jets = occ.used[0] | occ.blocked;
        let used_leps = occ.used[1];
        let n_roles = hyp.roles().len();
        let entries = &t.entries[..];
        let split = entries.partition_point(|e| e.mass < m_closed);
        let walk = JoinWalk {
            v,
            m_closed,
            used_jets,
            used_leps: used_leps as u32,
            n_roles,
        };
        let mut complete = 0;
        // Outwards on each side of the closed mass.
        for e in &entries[split..] {
            if !self.join_visit(la, t, e, &walk, &mut complete) {
                break;
            }
        }
        for e in entries[..split].iter().rev() {
            if !self.join_visit(la, t, e, &walk, &mut complete) {
                break;
            }
        }
        self.evaluated.complete += complete;
        true
    }

    /// Offers one filling of a join's list; `false` once the walk on this
    /// side can stop.
    #[inline(always)]
    fn join_visit(
        &mut self,
        la: &Join,
        t: &JoinList,
        e: &JoinEntry,
        w: &JoinWalk,
        complete: &mut u64,
    ) -> bool {
        // A filling that reuses an object is skipped before its term is
        // computed: the walk's stop test is left to the next entry, whose
        // term is at least as large (the bound holds for it too).
        if e.jets & w.used_jets != 0 || e.leps & w.used_leps != 0 {
            return true;
        }
        let t_eq = la.eq.term_of(w.m_closed, e.mass);
        // Every other addition is ≥ 0 and floating-point addition of
        // non-negative numbers is monotonic, so the replayed sum is at least
        // `v + t_eq`, and that of every farther entry too, up to rounding:
        // shaved by 1e-12 of the total like `admissible`.
        let at_least = w.v + t_eq;
        if at_least - 1e-12 * at_least > self.thr {
            return false;
        }
        let with_rest = at_least + e.rest;
        if with_rest - 1e-12 * with_rest <= self.thr {
            let id = e.id as usize;
            let mut x = w.v;
            for (k, &a) in t.incr[id * la.n_incr..(id + 1) * la.n_incr]
                .iter()
                .enumerate()
            {
                x += if k == la.eq_slot { t_eq } else { a };
            }
            *complete += 1;
            if x <= self.thr {
                let objs = &t.objs[id];
                for (s, &r) in la.open_roles.iter().enumerate() {
                    self.choice[r % MAX_ROLES] = objs[s];
                }
                self.record(x, w.n_roles);
            }
        }
        true
    }

    /// Builds, at the start of a search, the lists of joins that depend on
    /// no earlier role, and raises the lower bound on the χ² still to come
    /// for the steps before each join by its list's smallest sum of
    /// additions (the equal-mass term, ≥ 0, left out).
    /// The join of `pair` (the [`pair_join`] path), if it has a lepton
    /// side, gets that path's compact list instead of the general one.
    fn prepare_joins(
        &mut self,
        hyp: &Hypothesis,
        plan: &Plan,
        pair: Option<&pair_join::PairJetJoin>,
    ) {
        for (i, la) in plan.joins.iter().enumerate() {
            let min_rest = match pair.and_then(|k| k.compact_side(i)) {
                Some(side) => self.build_lepton_list(&side, plan, la),
                None => {
                    self.build_join(hyp, plan, i);
                    let t = &self.lists[i];
                    if t.overflow {
                        continue;
                    }
                    t.entries
                        .iter()
                        .map(|e| e.rest)
                        .fold(f64::INFINITY, f64::min)
                }
            };
            // Replaces the b-tag part of the open steps (each entry holds
            // its own b-tag terms). No entry: nothing can complete.
            let old = self.rest_min;
            let mut below = min_rest;
            for d in (0..=la.depth).rev() {
                below += old[d] - old[d + 1];
                self.rest_min[d] = below.max(0.0);
            }
        }
    }

    /// Lists the fillings of join `i`'s open roles for `key` by replaying
    /// the search's steps.
    fn build_join(&mut self, hyp: &Hypothesis, plan: &Plan, i: usize) {
        let mut t = std::mem::take(&mut self.lists[i]);
        t.entries.clear();
        t.objs.clear();
        t.incr.clear();
        t.overflow = false;
        t.stamp = self.searches;
        if let Some(side) = &plan.joins[i].lepton_side {
            self.fill_lepton_side(side, plan, &plan.joins[i], &mut t);
        } else {
            let mut objs = [NONE; MAX_ROLES];
            let mut incr = [0.0; 2 * MAX_ROLES + MAX_CONSTRAINTS];
            self.fill_join(
                hyp,
                plan,
                i,
                0,
                &mut objs,
                &mut incr,
                0,
                Occupancy::default(),
                &mut t,
            );
        }
        if !t.overflow {
            sort_by_mass(&mut t.entries, |e| e.mass);
        }
        self.evaluated.partial += t.entries.len() as u64;
        self.lists[i] = t;
    }

    #[allow(clippy::too_many_arguments)]
    fn fill_join(
        &mut self,
        hyp: &Hypothesis,
        plan: &Plan,
        i: usize,
        s: usize,
        objs: &mut [u8; MAX_ROLES],
        incr: &mut [f64; 2 * MAX_ROLES + MAX_CONSTRAINTS],
        n_incr: usize,
        occ: Occupancy,
        t: &mut JoinList,
    ) {
        let la = &plan.joins[i];
        if t.overflow {
            return;
        }
        let Some(&d) = la.open_steps.get(s) else {
            let mass = self.comp_m[la.open % MAX_COMPOSITES];
            // A NaN mass gives a NaN χ², never recorded; leaving it out
            // keeps the list ordered for the outward walk.
            if mass.is_nan() {
                return;
            }
            if t.entries.len() == MAX_JOIN_ENTRIES {
                t.overflow = true;
                return;
            }
            t.entries.push(JoinEntry {
                mass,
                rest: incr[..n_incr].iter().sum(),
                jets: occ.used[0],
                leps: occ.used[1] as u32,
                id: t.objs.len() as u32,
            });
            t.objs.push(*objs);
            t.incr.extend_from_slice(&incr[..n_incr]);
            return;
        };
        let step = &plan.steps[d];
        let (mut mask, _) = self.admissible_objects(hyp, step, d, &occ);
        let ops = &plan.comp_ops[step.comps.0..step.comps.1];
        let cons = &plan.con_ops[step.cons.0..step.cons.1];
        self.prepare_prefixes(ops);
        let role = step.role % MAX_ROLES;
        let (base, kind) = self.pool(step);
        let row = self.pen_row[d] % 3;
        while mask != 0 {
            let o = mask.trailing_zeros() as usize;
            mask &= mask - 1;
            self.choice[role] = o as u8;
            objs[s] = o as u8;
            self.close_comps(ops, role, self.obj_p4[(base + o) % OBJ_SLOTS]);
            let mut n = n_incr;
            incr[n] = self.pen[row][o % MAX_JETS];
            n += 1;
            for op in cons {
                incr[n] = if op.k == la.eq.k {
                    0.0
                } else {
                    op.term(&self.comp_m)
                };
                n += 1;
            }
            let mut occ = occ;
            occ.used[kind] |= 1 << o;
            self.fill_join(hyp, plan, i, s + 1, objs, incr, n, occ, t);
        }
    }

    fn dfs(
        &mut self,
        hyp: &Hypothesis,
        plan: &Plan,
        lists: &[JoinList],
        d: usize,
        partial: f64,
        occ: Occupancy,
    ) {
        let step = &plan.steps[d];
        let (mask, none) = self.admissible_objects(hyp, step, d, &occ);
        if mask == 0 && !none {
            return;
        }
        let ops = &plan.comp_ops[step.comps.0..step.comps.1];
        let cons = &plan.con_ops[step.cons.0..step.cons.1];
        self.prepare_prefixes(ops);
        let role = step.role % MAX_ROLES;
        let (base, kind) = self.pool(step);
        let row = self.pen_row[d] % 3;
        if d + 1 == plan.steps.len() {
            let n_roles = hyp.roles().len();
            let mut n = 0u64;
            if none {
                self.choice[role] = NONE;
                self.close_comps(ops, role, FourMomentum::ZERO);
                let v = self.eval_cons(cons, partial);
                self.record(v, n_roles);
                n += 1;
            }
            let mut m = mask;
            while m != 0 {
                let o = m.trailing_zeros() as usize;
                m &= m - 1;
                self.choice[role] = o as u8;
                self.close_comps(ops, role, self.obj_p4[(base + o) % OBJ_SLOTS]);
                let v = self.eval_cons(cons, partial + self.pen[row][o % MAX_JETS]);
                self.record(v, n_roles);
                n += 1;
            }
            self.evaluated.complete += n;
            return;
        }
        let rest = self.rest_min[d + 1];
        let placed = |ws: &Self, o: usize| -> Occupancy {
            let mut occ = occ;
            occ.used[kind] |= 1 << o;
            if kind == 2 {
                occ.blocked |= ws.large_overlap[o % MAX_LARGE_JETS];
            }
            occ
        };
        if self.prune && !cons.is_empty() {
            // A constraint closes here: score every candidate, then descend
            // best-first so good incumbents appear early and the rest can be
            // cut off at once.
            let mut n = 0;
            if none {
                self.close_comps(ops, role, FourMomentum::ZERO);
                self.buf[d][n] = (self.eval_cons(cons, partial), NONE);
                n += 1;
            }
            let mut m = mask;
            while m != 0 {
                let o = m.trailing_zeros() as usize;
                m &= m - 1;
                self.close_comps(ops, role, self.obj_p4[(base + o) % OBJ_SLOTS]);
                self.buf[d][n] = (
                    self.eval_cons(cons, partial + self.pen[row][o % MAX_JETS]),
                    o as u8,
                );
                n += 1;
            }
            self.evaluated.partial += n as u64;
            let list = &mut self.buf[d][..n];
            for i in 1..n {
                let mut j = i;
                while j > 0 && {
                    let (a, b) = (list[j - 1], list[j]);
                    a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)) == std::cmp::Ordering::Greater
                } {
                    list.swap(j - 1, j);
                    j -= 1;
                }
            }
            for i in 0..n {
                let (v, obj) = self.buf[d][i];
                if !self.admissible(v, rest) {
                    break;
                }
                self.choice[role] = obj;
                if obj == NONE {
                    self.close_comps(ops, role, FourMomentum::ZERO);
                    self.descend(hyp, plan, lists, d, v, occ);
                } else {
                    let o = obj as usize;
                    self.close_comps(ops, role, self.obj_p4[(base + o) % OBJ_SLOTS]);
                    let occ = placed(self, o);
                    self.descend(hyp, plan, lists, d, v, occ);
                }
            }
        } else {
            let mut n = 0u64;
            if none {
                self.choice[role] = NONE;
                self.close_comps(ops, role, FourMomentum::ZERO);
                let v = self.eval_cons(cons, partial);
                n += 1;
                if self.admissible(v, rest) {
                    self.descend(hyp, plan, lists, d, v, occ);
                }
            }
            let mut m = mask;
            while m != 0 {
                let o = m.trailing_zeros() as usize;
                m &= m - 1;
                self.choice[role] = o as u8;
                self.close_comps(ops, role, self.obj_p4[(base + o) % OBJ_SLOTS]);
                let v = self.eval_cons(cons, partial + self.pen[row][o % MAX_JETS]);
                n += 1;
                if self.admissible(v, rest) {
                    let occ = placed(self, o);
                    self.descend(hyp, plan, lists, d, v, occ);
                }
            }
            self.evaluated.partial += n;
        }
    }

    /// Goes on from step `d` (its candidate placed, running χ² `v`): by the
    /// step's join if it has one, else by the next step.
    #[inline(always)]
    fn descend(
        &mut self,
        hyp: &Hypothesis,
        plan: &Plan,
        lists: &[JoinList],
        d: usize,
        v: f64,
        occ: Occupancy,
    ) {
        if let (Some(i), true) = (plan.steps[d].join, self.prune) {
            if self.join(hyp, plan, &lists[i], i, v, occ) {
                return;
            }
        }
        self.dfs(hyp, plan, lists, d + 1, v, occ);
    }

    /// Replays a stored assignment into `out` (a copy of the plan's
    /// template) to report its objects, masses and terms.
    fn build_into(&mut self, plan: &Plan, leaf: &Leaf, out: &mut RankedAssignment) {
        let mut btag_chi2 = 0.0;
        for step in &plan.steps {
            let role = step.role % MAX_ROLES;
            let obj = leaf.choice[role];
            self.choice[role] = obj;
            let o = obj as usize;
            let p = if obj == NONE {
                FourMomentum::ZERO
            } else {
                out.objects[role] = match step.kind {
                    StepKind::Jet(tag) => {
                        btag_chi2 += match tag {
                            TagRule::B => self.pen[1][o % MAX_JETS],
                            TagRule::Light => self.pen[2][o % MAX_JETS],
                            TagRule::Any => 0.0,
                        };
                        ObjectRef::Jet {
                            pos: self.jet_pos[o % MAX_JETS],
                            index: self.jet_index[o % MAX_JETS],
                        }
                    }
                    StepKind::Lepton(..) => ObjectRef::Lepton {
                        flavour: self.lep_flav[o % MAX_LEPTONS],
                        pos: self.lep_pos[o % MAX_LEPTONS],
                        index: self.lep_index[o % MAX_LEPTONS],
                    },
                    StepKind::LargeJet { .. } => ObjectRef::LargeJet {
                        pos: self.large_pos[o % MAX_LARGE_JETS],
                        index: self.large_index[o % MAX_LARGE_JETS],
                    },
                    StepKind::Neutrino { lepton } => {
                        out.neutrino = self
                            .nu
                            .get(leaf.choice[lepton] as usize)
                            .and_then(Option::as_ref)
                            .and_then(|s| s.as_slice().get(o).copied());
                        ObjectRef::Neutrino { root: obj }
                    }
                };
                self.obj_p4[(self.pool(step).0 + o) % OBJ_SLOTS]
            };
            self.p4s[role % SLOTS] = p;
        }
        // Every role is placed: each composite is the left fold of its
        // sources in `CompOp` order, as the search summed it (its prefix,
        // then the rest), and `comp_ops` lists sources before their users.
        for op in &plan.comp_ops {
            let src = &op.src[..op.n.clamp(1, SLOTS)];
            let mut p = self.p4s[src[0] as usize % SLOTS];
            for &s in &src[1..] {
                p += self.p4s[s as usize % SLOTS];
            }
            let dest = op.dest % MAX_COMPOSITES;
            self.p4s[MAX_ROLES + dest] = p;
            self.comp_m[dest] = fast_mass(&p);
        }
        for op in &plan.con_ops {
            out.terms[op.k % MAX_CONSTRAINTS] = op.term(&self.comp_m);
        }
        let n = out.n_composites as usize;
        out.composite_p4[..n].copy_from_slice(&self.p4s[MAX_ROLES..MAX_ROLES + n]);
        out.chi2 = leaf.chi2;
        out.btag_chi2 = btag_chi2;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The dedicated paths must be taken where they apply (else the bench
    /// and the equivalence tests would measure and check the general search
    /// only), and nowhere else.
    #[test]
    fn dedicated_paths_are_taken_exactly_for_their_shape() {
        let policies = [
            BtagPolicy::Ignore,
            BtagPolicy::default(),
            BtagPolicy::weighted_default(),
        ];
        for name in crate::presets::names() {
            let h = crate::presets::get(name).unwrap();
            for btag in policies {
                for n_jets in [h.min_jets(), 6, 8, MAX_JETS] {
                    let plan = Plan::new(&h, n_jets.max(h.min_jets()), &btag);
                    let lepton_sides = plan.joins.iter().filter(|j| j.lepton_side.is_some());
                    if *name == "bwbw-ljets" {
                        assert!(plan.pair_join.is_some(), "{name} {btag:?} {n_jets}");
                        assert_eq!(lepton_sides.count(), 1, "{name} {btag:?} {n_jets}");
                    } else {
                        // Other presets' joins (tgtg-ljets has one) have
                        // more roles on each side than these shapes.
                        assert!(plan.pair_join.is_none(), "{name}");
                        assert_eq!(lepton_sides.count(), 0, "{name}");
                    }
                }
            }
        }
        // Extra mass constraints on either side keep the shape (the paths
        // add their terms); a lepton-pair rule or a constraint spanning both
        // sides does not.
        let base = crate::presets::toml("bwbw-ljets").unwrap();
        let extra = format!(
            "{base}\n[[constraint]]\nmass = \"Q_had\"\ntarget = 900.0\nwidth = 80.0\n\n\
             [[constraint]]\nmass = \"W_lep\"\ntarget = 70.0\nwidth = 12.0\n\n\
             [[constraint]]\nmass = \"Q_lep\"\ntarget = 900.0\nwidth = 90.0\n"
        );
        let h = Hypothesis::from_toml(&extra).unwrap();
        let plan = Plan::new(&h, 6, &BtagPolicy::Ignore);
        assert!(plan.pair_join.is_some());
        assert!(plan.joins[0].lepton_side.is_some());
        let no_interchange = base.replace("[[interchangeable]]\nroles = [\"q1\", \"q2\"]\n", "");
        assert_ne!(no_interchange, base);
        let h = Hypothesis::from_toml(&no_interchange).unwrap();
        let plan = Plan::new(&h, 6, &BtagPolicy::Ignore);
        assert!(plan.pair_join.is_none());
        assert!(plan.joins[0].lepton_side.is_some());
    }

    /// The join's outward walk relies on this: for a closed mass ≥ 0, the
    /// equal-mass term never decreases as the other mass moves away from it
    /// on either side (negative masses of space-like sums and the σ floor
    /// included).
    #[test]
    fn equal_mass_term_grows_with_distance() {
        let mut seed = 0x1234_5678_9abc_def1u64;
        let mut next = || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        for (shape, width) in [
            (ConShape::EqualRelative, 0.10),
            (ConShape::EqualRelative, 1e-9),
            (ConShape::EqualAbsolute, 25.0),
        ] {
            let op = ConOp {
                k: 0,
                shape,
                a: 0,
                b: 1,
                target: 0.0,
                width,
                only_closest: false,
            };
            for _ in 0..20_000 {
                let closed = 2000.0 * next() * next();
                let near = -50.0 + 2100.0 * next();
                let step = 500.0 * next() * next();
                let far = if near >= closed {
                    near + step
                } else {
                    near - step
                };
                let (t_near, t_far) = (op.term_of(closed, near), op.term_of(closed, far));
                assert!(
                    t_far >= t_near * (1.0 - 1e-12),
                    "{shape:?}: closed {closed}, near {near} ({t_near}), far {far} ({t_far})"
                );
                // Symmetric in the two masses, bit for bit.
                assert_eq!(op.term_of(closed, near), op.term_of(near, closed));
            }
        }
    }
}
