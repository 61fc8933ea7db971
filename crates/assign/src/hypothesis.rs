//! Validated decay hypotheses: roles, composites, constraints.

use std::collections::HashMap;
use std::fmt;

use quarry_event::Flavour;

use crate::spec::{ChargeSpec, FlavourSpec, KindSpec, RelationSpec, Spec, TagSpec, TargetSpec};
use crate::{MAX_COMPOSITES, MAX_CONSTRAINTS, MAX_GROUP, MAX_JETS, MAX_ROLES};

/// Default ΔR below which a small-radius jet overlaps a large-radius jet that
/// fills a composite (and so may not be used alongside it): the radius of a
/// typical large-radius jet, common practice.
pub const DEFAULT_LARGE_JET_OVERLAP_DR: f64 = 1.0;

/// Smallest σ (GeV) a relative equal-mass width may produce; keeps the term
/// finite when both masses are near zero.
pub const MIN_RELATIVE_SIGMA: f64 = 1.0e-6;

/// Why a hypothesis file was rejected. Every variant names the offending
/// item so the message can be acted on.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum HypothesisError {
    /// The text is not valid TOML, has an unknown key, or a value of the wrong
    /// type. The message is the TOML reader's, with line and column.
    #[error("hypothesis TOML could not be read: {0}")]
    Parse(String),
    /// Nothing to assign, or a composite/group/pair with no members.
    #[error("{0} is empty")]
    Empty(String),
    /// Two roles or composites share a name (they share one namespace).
    #[error("the name `{0}` is defined twice (roles and composites share one namespace)")]
    DuplicateName(String),
    /// A reference to a name that no role or composite defines, or to a
    /// definition of the wrong sort (e.g. `from` naming a jet role).
    #[error("unknown or unsuitable name `{name}` in {used_in}: {expected}")]
    UnknownName {
        /// The name as written.
        name: String,
        /// Where it was written.
        used_in: String,
        /// What sort of definition was expected there.
        expected: &'static str,
    },
    /// Composites that contain themselves, as the path around the cycle.
    #[error("composites form a cycle: {}", .0.join(" -> "))]
    Cycle(Vec<String>),
    /// A role or composite placed in two places (each object fills one slot).
    #[error("`{name}` is used twice: in {first} and in {second}")]
    UsedTwice {
        /// The role or composite.
        name: String,
        /// First place it appears.
        first: String,
        /// Second place it appears.
        second: String,
    },
    /// A field that does not belong to the role's kind (e.g. `tag` on a
    /// lepton).
    #[error("role `{role}` of kind {kind} cannot have the field `{field}`")]
    FieldNotForKind {
        /// Role name.
        role: String,
        /// Its kind.
        kind: &'static str,
        /// The misplaced field.
        field: &'static str,
    },
    /// Requirements no event can satisfy, with the reason.
    #[error("impossible requirement in {what}: {reason}")]
    Impossible {
        /// The item.
        what: String,
        /// Why it cannot be satisfied.
        reason: String,
    },
    /// A constraint width that is missing, doubled, zero, negative or not
    /// finite.
    #[error("bad width in {constraint}: {reason}")]
    BadWidth {
        /// The constraint, described.
        constraint: String,
        /// What is wrong.
        reason: String,
    },
    /// A mass target that is missing, unknown or not a positive finite GeV.
    #[error("bad target in {constraint}: {reason}")]
    BadTarget {
        /// The constraint, described.
        constraint: String,
        /// What is wrong.
        reason: String,
    },
    /// More items than the fixed-size search buffers hold.
    #[error("too many {what}: {count} given, at most {max} supported")]
    TooMany {
        /// What there are too many of.
        what: &'static str,
        /// How many were given.
        count: usize,
        /// The limit.
        max: usize,
    },
    /// An interchangeable group whose members are not truly symmetric.
    #[error("roles {roles:?} cannot be interchangeable: {reason}")]
    BadInterchange {
        /// The group.
        roles: Vec<String>,
        /// Why swapping them would change the χ².
        reason: String,
    },
    /// `leading_jets` is zero, above [`MAX_JETS`], or below the number of jet
    /// roles that must be filled.
    #[error("leading_jets = {value} is invalid: need at least {needed} and at most {max}")]
    BadLeadingJets {
        /// Value given.
        value: u32,
        /// Jet roles that must always be filled.
        needed: usize,
        /// [`MAX_JETS`].
        max: usize,
    },
    /// A truth pattern that no label can match (empty segment, too long,
    /// spaces or commas).
    #[error("role `{role}` has an unusable truth pattern `{pattern}`")]
    BadTruthPattern {
        /// Role name.
        role: String,
        /// The pattern.
        pattern: String,
    },
    /// The hypothesis name is empty, longer than 64 characters, or has a
    /// character outside letters, digits, `-`, `_` and `.` (names are
    /// written unquoted into output rows and file names).
    #[error("hypothesis name `{0}` is invalid: use 1 to 64 letters, digits, `-`, `_` or `.`")]
    BadName(String),
    /// The worst case of one event's search (see
    /// [`Hypothesis::worst_case_assignments`]) is beyond
    /// [`MAX_WORST_CASE_ASSIGNMENTS`].
    #[error(
        "up to {count:.3e} assignments per event with leading_jets = {leading_jets} \
         (at most {max:.0e} supported): use fewer leading jets, b-tag \
         requirements or interchangeable groups"
    )]
    TooManyAssignments {
        /// The worst-case count.
        count: f64,
        /// The hypothesis's `leading_jets`.
        leading_jets: usize,
        /// [`MAX_WORST_CASE_ASSIGNMENTS`].
        max: f64,
    },
}

/// Most assignments one event may have in the worst case
/// ([`Hypothesis::worst_case_assignments`]) for a hypothesis to load:
/// 10^11, over an hour of one core at the search's rate of tens of millions
/// per second. The per-event [`crate::SearchBudget`] stops such events
/// anyway; this rejects files that could never be searched exactly.
pub const MAX_WORST_CASE_ASSIGNMENTS: f64 = 1e11;

/// Whether `name` is a usable hypothesis name (see
/// [`HypothesisError::BadName`]).
fn valid_hypothesis_name(name: &str) -> bool {
    (1..=64).contains(&name.len())
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
}

/// Which b-tag state a jet role needs.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum TagRule {
    /// A b-tagged jet (`tag = "b"`).
    B,
    /// A jet that is not b-tagged (`tag = "light"`).
    Light,
    /// Any jet (`tag = "any"`, the default).
    Any,
}

/// What kind of object fills a role, with its requirements.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum RoleKind {
    /// A small-radius jet.
    Jet {
        /// b-tag requirement.
        tag: TagRule,
    },
    /// A charged lepton.
    Lepton {
        /// Required flavour; `None` accepts both.
        flavour: Option<Flavour>,
        /// Required charge (+1 or −1); `None` accepts any.
        charge: Option<i8>,
    },
    /// The neutrino solved from MET and the lepton filling role `lepton`
    /// (an index into [`Hypothesis::roles`]); each real root is a candidate.
    Neutrino {
        /// Index of the lepton role.
        lepton: usize,
    },
    /// A large-radius jet whose mass lies in `[mass_min, mass_max]` GeV.
    LargeJet {
        /// Lower edge of the mass window (GeV).
        mass_min: f64,
        /// Upper edge of the mass window (GeV).
        mass_max: f64,
        /// If this role is the `or_large_jet` alternative of a composite, that
        /// composite's index: the role is then optional, and when filled the
        /// composite's own parts stay empty.
        fills: Option<usize>,
    },
}

/// One slot of a hypothesis that one reconstructed object fills.
#[derive(Clone, Debug, PartialEq)]
pub struct Role {
    /// Name, unique among roles and composites.
    pub name: String,
    /// Kind and requirements.
    pub kind: RoleKind,
    /// Truth-label patterns this role corresponds to (`*` matches one
    /// segment). Empty: the role is not checked by truth matching.
    pub truth: Vec<String>,
    /// The interchangeable group this role belongs to, if any (index into
    /// [`Hypothesis::interchangeable`]).
    pub group: Option<usize>,
}

/// A member of a composite.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Part {
    /// A role (index into [`Hypothesis::roles`]).
    Role(usize),
    /// Another composite (index into [`Hypothesis::composites`]).
    Composite(usize),
}

/// A named sum of roles and other composites (a W, a top, a heavy quark).
#[derive(Clone, Debug, PartialEq)]
pub struct Composite {
    /// Name, unique among roles and composites.
    pub name: String,
    /// Direct members.
    pub parts: Vec<Part>,
    /// The optional large-radius-jet role that may fill this composite whole
    /// (then `parts` stay empty).
    pub whole: Option<usize>,
    /// Every role under this composite, recursively, including `whole` and
    /// the roles it would replace, as a bit mask over role indices (the
    /// search's representation; users read it through
    /// [`leaves`](Self::leaves)).
    pub(crate) leaf_mask: u16,
}

impl Composite {
    /// Indices of every role under this composite, recursively, including
    /// `whole` and the roles it would replace, ascending.
    ///
    /// ```
    /// let h = quarry_assign::presets::get("ttbar-ljets").unwrap();
    /// let t_had = &h.composites()[h.composite_index("t_had").unwrap()];
    /// let names: Vec<&str> = t_had.leaves().map(|r| h.roles()[r].name.as_str()).collect();
    /// assert_eq!(names, ["b_had", "q1", "q2"]);
    /// ```
    pub fn leaves(&self) -> impl Iterator<Item = usize> + '_ {
        (0..MAX_ROLES).filter(move |r| self.leaf_mask & (1 << r) != 0)
    }
}

/// How wide a constraint is.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Width {
    /// σ in GeV (`width = …`). The default way to give a width.
    Absolute(f64),
    /// σ as a fraction of the mean of the two masses (`relative_width = …`),
    /// floored at [`MIN_RELATIVE_SIGMA`]; only for equal-mass constraints.
    Relative(f64),
}

/// What a constraint compares.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ConstraintKind {
    /// The composite's mass should be `target` GeV.
    Mass {
        /// Composite index.
        composite: usize,
        /// Target mass (GeV).
        target: f64,
    },
    /// The two composites should have equal masses.
    EqualMass {
        /// The two composite indices.
        composites: [usize; 2],
    },
}

/// One χ² term: `((m − target)/σ)²` or `((m₁ − m₂)/σ)²`.
#[derive(Clone, Debug, PartialEq)]
pub struct Constraint {
    /// What is compared.
    pub kind: ConstraintKind,
    /// σ.
    pub width: Width,
    /// Mass constraints on all-lepton composites only: among the lepton
    /// combinations allowed for this composite, only the one(s) closest to
    /// the target are accepted (e.g. "the same-flavour opposite-sign pair
    /// closest to m_Z"); the χ² term is still added.
    pub only_closest: bool,
    /// A short description such as `mass(W_had)` or `equal(Q1, Q2)`.
    pub label: String,
}

impl Constraint {
    /// σ (GeV) given the composite masses (indexed like
    /// [`Hypothesis::composites`]).
    #[inline]
    pub fn sigma(&self, masses: &[f64]) -> f64 {
        match (self.width, self.kind) {
            (Width::Absolute(w), _) => w,
            (Width::Relative(r), ConstraintKind::EqualMass { composites: [a, b] }) => {
                (r * 0.5 * (masses[a].abs() + masses[b].abs())).max(MIN_RELATIVE_SIGMA)
            }
            (Width::Relative(r), ConstraintKind::Mass { target, .. }) => r * target,
        }
    }

    /// This constraint's χ² term (≥ 0) given the composite masses.
    ///
    /// ```
    /// let h = quarry_assign::presets::get("ttbar-ljets").unwrap();
    /// let c = &h.constraints()[0];
    /// let mut masses = vec![0.0; h.composites().len()];
    /// assert_eq!(c.chi2(&masses) > 0.0, true);
    /// if let quarry_assign::ConstraintKind::Mass { composite, target } = c.kind {
    ///     masses[composite] = target;
    ///     assert_eq!(c.chi2(&masses), 0.0);
    /// }
    /// ```
    #[inline]
    pub fn chi2(&self, masses: &[f64]) -> f64 {
        let diff = match self.kind {
            ConstraintKind::Mass { composite, target } => masses[composite] - target,
            ConstraintKind::EqualMass { composites: [a, b] } => masses[a] - masses[b],
        };
        if diff == 0.0 {
            return 0.0;
        }
        let z = diff / self.sigma(masses);
        z * z
    }
}

/// A relation required between two lepton roles.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Relation {
    /// Equal (flavour or charge).
    Same,
    /// Different flavour, or opposite charge.
    Different,
    /// No requirement.
    Any,
}

/// A flavour/charge rule between two lepton roles, e.g. same-flavour
/// opposite-sign for a Z.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct LeptonPair {
    /// The two lepton role indices.
    pub roles: [usize; 2],
    /// Flavour relation.
    pub flavour: Relation,
    /// Charge relation (`Different` = opposite sign).
    pub charge: Relation,
}

impl LeptonPair {
    /// Whether two leptons satisfy the rule.
    pub fn allows(&self, a: (Flavour, i8), b: (Flavour, i8)) -> bool {
        let f = match self.flavour {
            Relation::Same => a.0 == b.0,
            Relation::Different => a.0 != b.0,
            Relation::Any => true,
        };
        let c = match self.charge {
            Relation::Same => a.1 == b.1,
            // Widened: `-b.1` overflows for i8::MIN (a code-built lepton with
            // an invalid charge must not panic).
            Relation::Different => a.1 != 0 && i16::from(a.1) == -i16::from(b.1),
            Relation::Any => true,
        };
        f && c
    }
}

/// A validated decay hypothesis: which objects to look for, how they combine,
/// and which masses the χ² constrains.
///
/// Build one with [`Hypothesis::from_toml`] (or take a preset from
/// [`crate::presets`]); write it back with [`Hypothesis::to_toml`]. See the
/// crate documentation for the file format.
///
/// ```
/// let h = quarry_assign::Hypothesis::from_toml(r#"
/// name = "hadronic-w"
/// leading_jets = 4
/// [[role]]
/// name = "q1"
/// kind = "jet"
/// [[role]]
/// name = "q2"
/// kind = "jet"
/// [[composite]]
/// name = "W"
/// parts = ["q1", "q2"]
/// [[constraint]]
/// mass = "W"
/// target = "W"
/// width = 10.0
/// [[interchangeable]]
/// roles = ["q1", "q2"]
/// "#).unwrap();
/// assert_eq!(h.roles().len(), 2);
/// assert_eq!(quarry_assign::Hypothesis::from_toml(&h.to_toml()).unwrap(), h);
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct Hypothesis {
    pub(crate) spec: Spec,
    roles: Vec<Role>,
    composites: Vec<Composite>,
    /// Composite indices, children before parents.
    topo: Vec<usize>,
    constraints: Vec<Constraint>,
    groups: Vec<Vec<usize>>,
    pairs: Vec<LeptonPair>,
    overlap_dr: f64,
    min_jets: usize,
    min_leptons: usize,
    min_large_jets: usize,
}

fn kind_name(k: KindSpec) -> &'static str {
    match k {
        KindSpec::Jet => "jet",
        KindSpec::Lepton => "lepton",
        KindSpec::Neutrino => "neutrino",
        KindSpec::LargeJet => "large_jet",
    }
}

/// Resolves a particle name used as a mass target through `quarry-pdg`.
///
/// Accepted names: `W`, `Z`, `H`, `top`.
pub fn particle_mass(name: &str) -> Option<f64> {
    match name {
        "W" => Some(quarry_pdg::W_MASS),
        "Z" => Some(quarry_pdg::Z_MASS),
        "H" => Some(quarry_pdg::HIGGS_MASS),
        "top" => Some(quarry_pdg::TOP_MASS),
        _ => None,
    }
}

fn valid_pattern(p: &str) -> bool {
    !p.is_empty()
        && p.len() <= quarry_event::Truth::CAPACITY
        && p.split('.').all(|s| !s.is_empty())
        && p.bytes().all(|c| c.is_ascii_graphic() && c != b',')
}

impl Hypothesis {
    /// Reads and validates a hypothesis from TOML.
    ///
    /// # Errors
    /// A [`HypothesisError`] naming the first problem found: unreadable TOML
    /// or unknown keys, duplicate/unknown names, cycles, a role or composite
    /// used twice, impossible requirements, bad widths or targets, too many
    /// items for the fixed buffers, non-symmetric interchangeable groups.
    pub fn from_toml(text: &str) -> Result<Hypothesis, HypothesisError> {
        let spec: Spec = toml::from_str(text).map_err(|e| HypothesisError::Parse(e.to_string()))?;
        if !valid_hypothesis_name(&spec.name) {
            return Err(HypothesisError::BadName(spec.name));
        }
        let h = Hypothesis::from_spec(spec)?;
        let count = h.worst_case_assignments(h.leading_jets());
        if count > MAX_WORST_CASE_ASSIGNMENTS {
            return Err(HypothesisError::TooManyAssignments {
                count,
                leading_jets: h.leading_jets(),
                max: MAX_WORST_CASE_ASSIGNMENTS,
            });
        }
        Ok(h)
    }

    /// An upper bound on the assignments one event can have with `n_jets`
    /// leading jets: every role filled from the most objects its kind may
    /// bring ([`MAX_LEPTONS`](crate::MAX_LEPTONS) leptons,
    /// [`MAX_LARGE_JETS`](crate::MAX_LARGE_JETS) large jets plus "none" for
    /// an optional one, two neutrino roots), each object used once
    /// (`n!/(n−k)!` for `k` roles of one kind), divided by `g!` for each
    /// interchangeable group of `g` roles; requirements (b-tags, charges) are
    /// ignored. For warnings (e.g. above the default
    /// [`crate::SearchBudget`]) and for the load-time limit
    /// [`MAX_WORST_CASE_ASSIGNMENTS`].
    ///
    /// ```
    /// let h = quarry_assign::presets::get("ttbar-ljets").unwrap();
    /// // 4 jet roles from 6 jets (q1, q2 interchangeable), 1 lepton of 8,
    /// // 2 neutrino roots: 6·5·4·3 / 2 · 8 · 2.
    /// assert_eq!(h.worst_case_assignments(6), 2880.0);
    /// ```
    pub fn worst_case_assignments(&self, n_jets: usize) -> f64 {
        let mut used = [0usize; 3];
        let mut count = 1.0f64;
        for r in &self.roles {
            let (kind, pool, extra) = match r.kind {
                RoleKind::Jet { .. } => (0, n_jets, 0),
                RoleKind::Lepton { .. } => (1, crate::MAX_LEPTONS, 0),
                RoleKind::LargeJet { fills, .. } => {
                    (2, crate::MAX_LARGE_JETS, usize::from(fills.is_some()))
                }
                RoleKind::Neutrino { .. } => {
                    count *= 2.0;
                    continue;
                }
            };
            count *= (pool.saturating_sub(used[kind]) + extra) as f64;
            used[kind] += 1;
        }
        for g in self.interchangeable() {
            count /= (1..=g.len()).product::<usize>() as f64;
        }
        count
    }

    /// Writes the hypothesis as TOML that [`from_toml`](Self::from_toml) reads
    /// back to an equal hypothesis (comments of the original are not kept).
    pub fn to_toml(&self) -> String {
        // Serialising plain structs of strings, numbers and arrays cannot fail.
        toml::to_string(&self.spec).unwrap_or_default()
    }

    /// The hypothesis name.
    pub fn name(&self) -> &str {
        &self.spec.name
    }

    /// The one-line description (`about`), possibly empty.
    pub fn about(&self) -> &str {
        &self.spec.about
    }

    /// How many leading jets (by pt) enter the search unless overridden.
    pub fn leading_jets(&self) -> usize {
        self.spec.leading_jets as usize
    }

    /// ΔR within which small-radius jets overlap a large-radius jet used to
    /// fill a composite ([`DEFAULT_LARGE_JET_OVERLAP_DR`] unless set with
    /// `large_jet_overlap_dr`).
    pub fn large_jet_overlap_dr(&self) -> f64 {
        self.overlap_dr
    }

    /// Roles in declaration order.
    pub fn roles(&self) -> &[Role] {
        &self.roles
    }

    /// Composites in declaration order.
    pub fn composites(&self) -> &[Composite] {
        &self.composites
    }

    /// Composite indices ordered children-before-parents.
    pub(crate) fn composites_bottom_up(&self) -> &[usize] {
        &self.topo
    }

    /// Constraints in declaration order (the χ² is the sum of their terms,
    /// plus b-tag terms under a weighted b-tag policy).
    pub fn constraints(&self) -> &[Constraint] {
        &self.constraints
    }

    /// Interchangeable role groups (role indices, each group ascending).
    pub fn interchangeable(&self) -> &[Vec<usize>] {
        &self.groups
    }

    /// Flavour/charge rules between lepton roles.
    pub fn lepton_pairs(&self) -> &[LeptonPair] {
        &self.pairs
    }

    /// Index of the role called `name`.
    pub fn role_index(&self, name: &str) -> Option<usize> {
        self.roles.iter().position(|r| r.name == name)
    }

    /// Index of the composite called `name`.
    pub fn composite_index(&self, name: &str) -> Option<usize> {
        self.composites.iter().position(|c| c.name == name)
    }

    /// Jet roles that every assignment fills (jet roles not replaceable by a
    /// large-radius jet).
    pub fn min_jets(&self) -> usize {
        self.min_jets
    }

    /// Lepton roles (all are always filled).
    pub fn min_leptons(&self) -> usize {
        self.min_leptons
    }

    /// Large-radius-jet roles that are not optional.
    pub fn min_large_jets(&self) -> usize {
        self.min_large_jets
    }

    /// Index of the neutrino role, if any (at most one is allowed: MET
    /// constrains one neutrino).
    pub fn neutrino_role(&self) -> Option<usize> {
        self.roles
            .iter()
            .position(|r| matches!(r.kind, RoleKind::Neutrino { .. }))
    }

    #[allow(clippy::too_many_lines)]
    fn from_spec(spec: Spec) -> Result<Hypothesis, HypothesisError> {
        use HypothesisError as E;
        if spec.roles.is_empty() {
            return Err(E::Empty("the role list".into()));
        }
        if spec.roles.len() > MAX_ROLES {
            return Err(E::TooMany {
                what: "roles",
                count: spec.roles.len(),
                max: MAX_ROLES,
            });
        }
        if spec.composites.len() > MAX_COMPOSITES {
            return Err(E::TooMany {
                what: "composites",
                count: spec.composites.len(),
                max: MAX_COMPOSITES,
            });
        }
        if spec.constraints.len() > MAX_CONSTRAINTS {
            return Err(E::TooMany {
                what: "constraints",
                count: spec.constraints.len(),
                max: MAX_CONSTRAINTS,
            });
        }
        // One namespace for roles and composites.
        let mut names: HashMap<&str, Part> = HashMap::new();
        for (i, r) in spec.roles.iter().enumerate() {
            if r.name.trim().is_empty() || r.name.contains(char::is_whitespace) {
                return Err(E::Empty(format!("role #{} name (or it has spaces)", i + 1)));
            }
            if names.insert(&r.name, Part::Role(i)).is_some() {
                return Err(E::DuplicateName(r.name.clone()));
            }
        }
        for (i, c) in spec.composites.iter().enumerate() {
            if c.name.trim().is_empty() || c.name.contains(char::is_whitespace) {
                return Err(E::Empty(format!(
                    "composite #{} name (or it has spaces)",
                    i + 1
                )));
            }
            if names.insert(&c.name, Part::Composite(i)).is_some() {
                return Err(E::DuplicateName(c.name.clone()));
            }
        }
        let role_of = |name: &str,
                       used_in: &str,
                       kind: Option<KindSpec>,
                       expected: &'static str| match names.get(name) {
            Some(Part::Role(i)) if kind.is_none_or(|k| spec.roles[*i].kind == k) => Ok(*i),
            _ => Err(E::UnknownName {
                name: name.to_string(),
                used_in: used_in.to_string(),
                expected,
            }),
        };

        // Roles.
        let mut roles = Vec::with_capacity(spec.roles.len());
        let mut n_neutrinos = 0;
        for r in &spec.roles {
            let kind = r.kind;
            let bad = |field: &'static str| E::FieldNotForKind {
                role: r.name.clone(),
                kind: kind_name(kind),
                field,
            };
            if kind != KindSpec::Jet && r.tag.is_some() {
                return Err(bad("tag"));
            }
            if kind != KindSpec::Lepton && r.flavour.is_some() {
                return Err(bad("flavour"));
            }
            if kind != KindSpec::Lepton && r.charge.is_some() {
                return Err(bad("charge"));
            }
            if kind != KindSpec::Neutrino && r.from.is_some() {
                return Err(bad("from"));
            }
            if kind != KindSpec::LargeJet && r.mass_window.is_some() {
                return Err(bad("mass_window"));
            }
            if kind == KindSpec::Neutrino && !r.truth.is_empty() {
                return Err(bad("truth"));
            }
            for p in &r.truth {
                if !valid_pattern(p) {
                    return Err(E::BadTruthPattern {
                        role: r.name.clone(),
                        pattern: p.clone(),
                    });
                }
            }
            let rk = match kind {
                KindSpec::Jet => RoleKind::Jet {
                    tag: match r.tag.unwrap_or(TagSpec::Any) {
                        TagSpec::B => TagRule::B,
                        TagSpec::Light => TagRule::Light,
                        TagSpec::Any => TagRule::Any,
                    },
                },
                KindSpec::Lepton => RoleKind::Lepton {
                    flavour: match r.flavour.unwrap_or(FlavourSpec::Any) {
                        FlavourSpec::E => Some(Flavour::Electron),
                        FlavourSpec::Mu => Some(Flavour::Muon),
                        FlavourSpec::Any => None,
                    },
                    charge: match r.charge.unwrap_or(ChargeSpec::Any) {
                        ChargeSpec::Plus => Some(1),
                        ChargeSpec::Minus => Some(-1),
                        ChargeSpec::Any => None,
                    },
                },
                KindSpec::Neutrino => {
                    n_neutrinos += 1;
                    if n_neutrinos > 1 {
                        return Err(E::Impossible {
                            what: format!("role `{}`", r.name),
                            reason: "only one neutrino role is allowed (MET fixes one neutrino)"
                                .into(),
                        });
                    }
                    let from = r.from.as_deref().ok_or_else(|| E::Impossible {
                        what: format!("role `{}`", r.name),
                        reason: "a neutrino role needs `from = \"<lepton role>\"`".into(),
                    })?;
                    RoleKind::Neutrino {
                        lepton: role_of(
                            from,
                            &format!("`from` of role `{}`", r.name),
                            Some(KindSpec::Lepton),
                            "a lepton role",
                        )?,
                    }
                }
                KindSpec::LargeJet => {
                    let [lo, hi] = r.mass_window.unwrap_or([0.0, f64::MAX]);
                    if !(lo.is_finite() && hi.is_finite() && lo >= 0.0 && lo < hi) {
                        return Err(E::Impossible {
                            what: format!("role `{}`", r.name),
                            reason: format!(
                                "mass_window [{lo}, {hi}] must be finite with 0 <= low < high"
                            ),
                        });
                    }
                    RoleKind::LargeJet {
                        mass_min: lo,
                        mass_max: hi,
                        fills: None,
                    }
                }
            };
            roles.push(Role {
                name: r.name.clone(),
                kind: rk,
                truth: r.truth.clone(),
                group: None,
            });
        }

        // Composites: resolve parts, each part used once.
        let mut placed: HashMap<String, String> = HashMap::new();
        let mut place = |name: &str, place: String| -> Result<(), HypothesisError> {
            if let Some(first) = placed.get(name) {
                return Err(E::UsedTwice {
                    name: name.to_string(),
                    first: first.clone(),
                    second: place,
                });
            }
            placed.insert(name.to_string(), place);
            Ok(())
        };
        let mut composites = Vec::with_capacity(spec.composites.len());
        for (ci, c) in spec.composites.iter().enumerate() {
            if c.parts.is_empty() {
                return Err(E::Empty(format!("the parts of composite `{}`", c.name)));
            }
            let mut parts = Vec::with_capacity(c.parts.len());
            for p in &c.parts {
                let part = *names.get(p.as_str()).ok_or_else(|| E::UnknownName {
                    name: p.clone(),
                    used_in: format!("the parts of composite `{}`", c.name),
                    expected: "a role or composite",
                })?;
                if part == Part::Composite(ci) {
                    return Err(E::Cycle(vec![c.name.clone(), c.name.clone()]));
                }
                place(p, format!("composite `{}`", c.name))?;
                parts.push(part);
            }
            let whole = match &c.or_large_jet {
                None => None,
                Some(w) => {
                    let r = role_of(
                        w,
                        &format!("`or_large_jet` of composite `{}`", c.name),
                        Some(KindSpec::LargeJet),
                        "a large_jet role",
                    )?;
                    place(w, format!("`or_large_jet` of composite `{}`", c.name))?;
                    if let Some(bad) = parts.iter().find(|p| {
                        !matches!(p, Part::Role(i) if matches!(roles[*i].kind, RoleKind::Jet { .. }))
                    }) {
                        let n = match bad {
                            Part::Role(i) => &roles[*i].name,
                            Part::Composite(i) => &spec.composites[*i].name,
                        };
                        return Err(E::Impossible {
                            what: format!("composite `{}`", c.name),
                            reason: format!(
                                "a composite that a large jet may fill must have only jet roles as parts, but `{n}` is not one"
                            ),
                        });
                    }
                    if let RoleKind::LargeJet { fills, .. } = &mut roles[r].kind {
                        *fills = Some(ci);
                    }
                    Some(r)
                }
            };
            composites.push(Composite {
                name: c.name.clone(),
                parts,
                whole,
                leaf_mask: 0,
            });
        }
        // Neutrino's lepton and a neutrino role must not both be absent from use;
        // nothing more to check there.

        // Cycles and bottom-up order (depth-first, colours).
        let n_c = composites.len();
        let mut state = vec![0u8; n_c]; // 0 new, 1 on stack, 2 done
        let mut topo = Vec::with_capacity(n_c);
        fn visit(
            c: usize,
            comps: &[Composite],
            state: &mut [u8],
            stack: &mut Vec<usize>,
            topo: &mut Vec<usize>,
        ) -> Result<(), Vec<usize>> {
            match state[c] {
                2 => return Ok(()),
                1 => {
                    let start = stack.iter().position(|&s| s == c).unwrap_or(0);
                    let mut cyc = stack[start..].to_vec();
                    cyc.push(c);
                    return Err(cyc);
                }
                _ => {}
            }
            state[c] = 1;
            stack.push(c);
            for p in &comps[c].parts {
                if let Part::Composite(j) = p {
                    visit(*j, comps, state, stack, topo)?;
                }
            }
            stack.pop();
            state[c] = 2;
            topo.push(c);
            Ok(())
        }
        for c in 0..n_c {
            let mut stack = Vec::new();
            visit(c, &composites, &mut state, &mut stack, &mut topo).map_err(|cyc| {
                E::Cycle(cyc.iter().map(|&i| composites[i].name.clone()).collect())
            })?;
        }
        for &c in &topo {
            let mut mask = 0u16;
            for p in &composites[c].parts {
                mask |= match *p {
                    Part::Role(r) => 1 << r,
                    Part::Composite(j) => composites[j].leaf_mask,
                };
            }
            if let Some(w) = composites[c].whole {
                mask |= 1 << w;
            }
            composites[c].leaf_mask = mask;
        }

        // Constraints.
        let mut constraints = Vec::with_capacity(spec.constraints.len());
        let comp_of = |name: &str, used_in: &str| match names.get(name) {
            Some(Part::Composite(i)) => Ok(*i),
            _ => Err(E::UnknownName {
                name: name.to_string(),
                used_in: used_in.to_string(),
                expected: "a composite",
            }),
        };
        for (k, c) in spec.constraints.iter().enumerate() {
            let (kind, label) = match (&c.mass, &c.equal) {
                (Some(m), None) => {
                    let label = format!("mass({m})");
                    let composite = comp_of(m, &format!("constraint #{} {label}", k + 1))?;
                    let target = match &c.target {
                        None => {
                            return Err(E::BadTarget {
                                constraint: label,
                                reason: "a mass constraint needs `target` (GeV or W/Z/H/top)".into(),
                            })
                        }
                        Some(TargetSpec::Particle(p)) => particle_mass(p).ok_or_else(|| {
                            E::BadTarget {
                                constraint: label.clone(),
                                reason: format!("unknown particle `{p}` (known: W, Z, H, top)"),
                            }
                        })?,
                        Some(TargetSpec::Gev(v)) => {
                            if !(v.is_finite() && *v > 0.0) {
                                return Err(E::BadTarget {
                                    constraint: label,
                                    reason: format!("{v} GeV is not a positive finite mass"),
                                });
                            }
                            *v
                        }
                    };
                    (ConstraintKind::Mass { composite, target }, label)
                }
                (None, Some(pair)) => {
                    let label = format!("equal({})", pair.join(", "));
                    if pair.len() != 2 {
                        return Err(E::Impossible {
                            what: format!("constraint #{} {label}", k + 1),
                            reason: "`equal` takes exactly two composites".into(),
                        });
                    }
                    let a = comp_of(&pair[0], &label)?;
                    let b = comp_of(&pair[1], &label)?;
                    if composites[a].leaf_mask & composites[b].leaf_mask != 0 {
                        return Err(E::Impossible {
                            what: format!("constraint #{} {label}", k + 1),
                            reason: "the two composites must be distinct and not contain each other".into(),
                        });
                    }
                    if c.target.is_some() {
                        return Err(E::BadTarget {
                            constraint: label,
                            reason: "an equal-mass constraint has no `target`".into(),
                        });
                    }
                    (ConstraintKind::EqualMass { composites: [a, b] }, label)
                }
                _ => {
                    return Err(E::Impossible {
                        what: format!("constraint #{}", k + 1),
                        reason: "give exactly one of `mass = \"<composite>\"` or `equal = [\"<a>\", \"<b>\"]`".into(),
                    })
                }
            };
            let width = match (c.width, c.relative_width) {
                (Some(w), None) => {
                    if !(w.is_finite() && w > 0.0) {
                        return Err(E::BadWidth {
                            constraint: label,
                            reason: format!("width = {w} must be a positive finite GeV value"),
                        });
                    }
                    Width::Absolute(w)
                }
                (None, Some(r)) => {
                    if !(r.is_finite() && r > 0.0) {
                        return Err(E::BadWidth {
                            constraint: label,
                            reason: format!("relative_width = {r} must be positive and finite"),
                        });
                    }
                    if matches!(kind, ConstraintKind::Mass { .. }) {
                        return Err(E::BadWidth {
                            constraint: label,
                            reason:
                                "relative_width is for equal-mass constraints; give `width` in GeV"
                                    .into(),
                        });
                    }
                    Width::Relative(r)
                }
                (Some(_), Some(_)) => {
                    return Err(E::BadWidth {
                        constraint: label,
                        reason: "give `width` or `relative_width`, not both".into(),
                    })
                }
                (None, None) => {
                    return Err(E::BadWidth {
                        constraint: label,
                        reason: "missing `width` (GeV) or `relative_width`".into(),
                    })
                }
            };
            if c.only_closest {
                let ok = match kind {
                    ConstraintKind::Mass { composite, .. } => composites[composite]
                        .leaves()
                        .all(|r| matches!(roles[r].kind, RoleKind::Lepton { .. })),
                    ConstraintKind::EqualMass { .. } => false,
                };
                if !ok {
                    return Err(E::Impossible {
                        what: label,
                        reason: "only_closest is for mass constraints on composites made only of leptons".into(),
                    });
                }
            }
            constraints.push(Constraint {
                kind,
                width,
                only_closest: c.only_closest,
                label,
            });
        }

        // Lepton pair rules.
        let mut pairs = Vec::with_capacity(spec.lepton_pairs.len());
        for p in &spec.lepton_pairs {
            let what = format!("lepton_pair {:?}", p.roles);
            if p.roles.len() != 2 {
                return Err(E::Impossible {
                    what,
                    reason: "a lepton_pair names exactly two lepton roles".into(),
                });
            }
            let a = role_of(&p.roles[0], &what, Some(KindSpec::Lepton), "a lepton role")?;
            let b = role_of(&p.roles[1], &what, Some(KindSpec::Lepton), "a lepton role")?;
            if a == b {
                return Err(E::Impossible {
                    what,
                    reason: "a lepton_pair needs two different roles".into(),
                });
            }
            let rel = |r: Option<RelationSpec>, field: &str| {
                match r.unwrap_or(RelationSpec::Any) {
                RelationSpec::Same => Ok(Relation::Same),
                RelationSpec::Any => Ok(Relation::Any),
                RelationSpec::Different if field == "flavour" => Ok(Relation::Different),
                RelationSpec::Opposite if field == "charge" => Ok(Relation::Different),
                other => Err(E::Impossible {
                    what: what.clone(),
                    reason: format!(
                        "{field} = {other:?} is not allowed (flavour: same/different/any; charge: same/opposite/any)"
                    ),
                }),
            }
            };
            let pair = LeptonPair {
                roles: [a, b],
                flavour: rel(p.flavour, "flavour")?,
                charge: rel(p.charge, "charge")?,
            };
            if let (
                RoleKind::Lepton {
                    flavour: fa,
                    charge: qa,
                },
                RoleKind::Lepton {
                    flavour: fb,
                    charge: qb,
                },
            ) = (roles[a].kind, roles[b].kind)
            {
                let flav_bad = match (fa, fb, pair.flavour) {
                    (Some(x), Some(y), Relation::Same) => x != y,
                    (Some(x), Some(y), Relation::Different) => x == y,
                    _ => false,
                };
                let charge_bad = match (qa, qb, pair.charge) {
                    (Some(x), Some(y), Relation::Same) => x != y,
                    (Some(x), Some(y), Relation::Different) => x == y,
                    _ => false,
                };
                if flav_bad || charge_bad {
                    return Err(E::Impossible {
                        what,
                        reason: format!(
                            "the fixed flavours/charges of `{}` and `{}` contradict the pair rule",
                            roles[a].name, roles[b].name
                        ),
                    });
                }
            }
            pairs.push(pair);
        }

        // Interchangeable groups.
        let mut groups: Vec<Vec<usize>> = Vec::with_capacity(spec.interchangeable.len());
        for g in &spec.interchangeable {
            let names_list = g.roles.clone();
            let bad = |reason: String| E::BadInterchange {
                roles: names_list.clone(),
                reason,
            };
            if g.roles.len() < 2 {
                return Err(bad("a group needs at least two roles".into()));
            }
            if g.roles.len() > MAX_GROUP {
                return Err(E::TooMany {
                    what: "roles in one interchangeable group",
                    count: g.roles.len(),
                    max: MAX_GROUP,
                });
            }
            let mut idx = Vec::with_capacity(g.roles.len());
            for n in &g.roles {
                let r = role_of(n, "an interchangeable group", None, "a role")?;
                if idx.contains(&r) {
                    return Err(bad(format!("`{n}` is listed twice")));
                }
                if roles[r].group.is_some() {
                    return Err(bad(format!("`{n}` is already in another group")));
                }
                idx.push(r);
            }
            let first = idx[0];
            for &r in &idx[1..] {
                if roles[r].kind != roles[first].kind {
                    return Err(bad(format!(
                        "`{}` and `{}` have different kinds or requirements",
                        roles[first].name, roles[r].name
                    )));
                }
            }
            if matches!(roles[first].kind, RoleKind::Neutrino { .. }) {
                return Err(bad("neutrino roles cannot be interchanged".into()));
            }
            // All members must be direct parts of one and the same composite,
            // so that swapping them changes no composite sum.
            let parent_of = |r: usize| {
                composites
                    .iter()
                    .position(|c| c.parts.contains(&Part::Role(r)))
            };
            let parent = parent_of(first);
            if parent.is_none() || idx.iter().any(|&r| parent_of(r) != parent) {
                return Err(bad(
                    "all members must be direct parts of the same composite".into(),
                ));
            }
            for p in &pairs {
                let inside = p.roles.iter().filter(|r| idx.contains(r)).count();
                if inside == 1 {
                    return Err(bad(format!(
                        "the lepton_pair between `{}` and `{}` treats the members differently",
                        roles[p.roles[0]].name, roles[p.roles[1]].name
                    )));
                }
            }
            if roles
                .iter()
                .any(|x| matches!(x.kind, RoleKind::Neutrino { lepton } if idx.contains(&lepton)))
            {
                return Err(bad("one member is the source of the neutrino".into()));
            }
            idx.sort_unstable();
            for &r in &idx {
                roles[r].group = Some(groups.len());
            }
            groups.push(idx);
        }

        // Counts and leading_jets.
        let optional_jet = |r: usize| {
            composites
                .iter()
                .any(|c| c.whole.is_some() && c.parts.contains(&Part::Role(r)))
        };
        let min_jets = (0..roles.len())
            .filter(|&r| matches!(roles[r].kind, RoleKind::Jet { .. }) && !optional_jet(r))
            .count();
        let min_leptons = roles
            .iter()
            .filter(|r| matches!(r.kind, RoleKind::Lepton { .. }))
            .count();
        let min_large_jets = roles
            .iter()
            .filter(|r| matches!(r.kind, RoleKind::LargeJet { fills: None, .. }))
            .count();
        let any_jets = roles.iter().any(|r| matches!(r.kind, RoleKind::Jet { .. }));
        let lj = spec.leading_jets as usize;
        if lj > MAX_JETS || lj < min_jets || (any_jets && lj == 0) {
            return Err(E::BadLeadingJets {
                value: spec.leading_jets,
                needed: min_jets.max(usize::from(any_jets)),
                max: MAX_JETS,
            });
        }
        let overlap_dr = spec
            .large_jet_overlap_dr
            .unwrap_or(DEFAULT_LARGE_JET_OVERLAP_DR);
        if !(overlap_dr.is_finite() && overlap_dr >= 0.0) {
            return Err(E::Impossible {
                what: "large_jet_overlap_dr".into(),
                reason: format!("{overlap_dr} must be finite and >= 0"),
            });
        }

        Ok(Hypothesis {
            spec,
            roles,
            composites,
            topo,
            constraints,
            groups,
            pairs,
            overlap_dr,
            min_jets,
            min_leptons,
            min_large_jets,
        })
    }
}

impl fmt::Display for Hypothesis {
    /// The hypothesis as TOML (same as [`Hypothesis::to_toml`]).
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.to_toml())
    }
}
