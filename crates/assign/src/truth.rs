//! Truth matching of assignments against the labels carried by simulated
//! objects.

use quarry_event::{Event, Flavour, Truth};

use crate::hypothesis::{Hypothesis, RoleKind};
use crate::search::{ObjectRef, RankedAssignment};
use crate::{MAX_COMPOSITES, MAX_ROLES};

/// Whether an assignment put the generated objects in the right roles.
///
/// A role is *matched* when the truth label of its object matches one of the
/// role's patterns. Roles that are not checked count as matched: neutrino
/// roles (the neutrino is solved, not a labelled object), empty roles (their
/// composite was filled by a large jet, which is checked instead) and roles
/// with no patterns. Interchangeable roles are matched as a set: the group
/// matches if some permutation of its objects matches the roles' patterns,
/// and every member carries the group's flag. A composite is matched when all
/// roles under it are; the event flag when all roles are.
///
/// Limit: a pattern with `*` for the side segment does not require two
/// objects to come from the *same* side.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TruthMatch {
    all: bool,
    n_roles: u8,
    roles: [bool; MAX_ROLES],
    n_composites: u8,
    composites: [bool; MAX_COMPOSITES],
}

impl TruthMatch {
    /// Every role matched.
    pub fn all(&self) -> bool {
        self.all
    }

    /// Per-role flags, by role index.
    pub fn roles(&self) -> &[bool] {
        &self.roles[..self.n_roles as usize]
    }

    /// Per-composite flags, by composite index.
    pub fn composites(&self) -> &[bool] {
        &self.composites[..self.n_composites as usize]
    }

    /// Flag of composite `c` (`false` if out of range).
    pub fn composite(&self, c: usize) -> bool {
        self.composites().get(c).copied().unwrap_or(false)
    }
}

fn truth_of(event: &Event, obj: ObjectRef) -> Option<Truth> {
    match obj {
        ObjectRef::Jet { pos, .. } => event.jets.get(pos as usize).and_then(|j| j.truth),
        ObjectRef::Lepton { flavour, pos, .. } => match flavour {
            Flavour::Electron => event.electrons.get(pos as usize).and_then(|l| l.truth),
            Flavour::Muon => event.muons.get(pos as usize).and_then(|l| l.truth),
        },
        ObjectRef::LargeJet { pos, .. } => event.fat_jets.get(pos as usize).and_then(|j| j.truth),
        ObjectRef::Neutrino { .. } | ObjectRef::Empty => None,
    }
}

fn role_accepts(patterns: &[String], label: Option<Truth>) -> bool {
    label.is_some_and(|t| patterns.iter().any(|p| t.matches(p)))
}

/// Whether objects `objs` can be matched one-to-one to `patterns` (each a
/// role's pattern list).
fn set_match(objs: &[Option<Truth>], patterns: &[&[String]], used: u32, i: usize) -> bool {
    if i == objs.len() {
        return true;
    }
    (0..patterns.len()).any(|p| {
        used & (1 << p) == 0
            && role_accepts(patterns[p], objs[i])
            && set_match(objs, patterns, used | (1 << p), i + 1)
    })
}

impl Hypothesis {
    /// Truth-match flags for `assignment` in `event`; `None` if no object of
    /// the event carries a truth label (real data, or simulation without
    /// labels). See [`TruthMatch`] for the rules.
    ///
    /// ```
    /// use quarry_assign::{presets, SearchConfig, Searcher};
    /// let h = presets::get("ttbar-ljets").unwrap();
    /// let event = quarry_event::Event::new(1);
    /// let out = Searcher::new(&h, SearchConfig::default()).unwrap().search(&event);
    /// assert!(out.best().is_none());
    /// ```
    pub fn truth_match(&self, event: &Event, assignment: &RankedAssignment) -> Option<TruthMatch> {
        let any_truth = event.jets.iter().any(|j| j.truth.is_some())
            || event.fat_jets.iter().any(|j| j.truth.is_some())
            || event.leptons().any(|l| l.truth.is_some());
        if !any_truth {
            return None;
        }
        let roles = self.roles();
        let checked = |r: usize| {
            let obj = assignment.object(r);
            !(matches!(roles[r].kind, RoleKind::Neutrino { .. })
                || obj == ObjectRef::Empty
                || roles[r].truth.is_empty())
        };
        let mut flags = [true; MAX_ROLES];
        for (r, role) in roles.iter().enumerate() {
            if role.group.is_none() && checked(r) {
                flags[r] = role_accepts(&role.truth, truth_of(event, assignment.object(r)));
            }
        }
        for group in self.interchangeable() {
            let mut objs = [None; MAX_ROLES];
            let mut pats: [&[String]; MAX_ROLES] = [&[]; MAX_ROLES];
            let mut n = 0;
            let mut np = 0;
            for &r in group {
                if checked(r) {
                    objs[n] = truth_of(event, assignment.object(r));
                    n += 1;
                }
                if !roles[r].truth.is_empty() {
                    pats[np] = &roles[r].truth;
                    np += 1;
                }
            }
            let ok = n == 0 || (np >= n && set_match(&objs[..n], &pats[..np], 0, 0));
            for &r in group {
                flags[r] = ok;
            }
        }
        let mut composites = [false; MAX_COMPOSITES];
        for (c, comp) in self.composites().iter().enumerate() {
            composites[c] = comp.leaves().all(|r| flags[r]);
        }
        Some(TruthMatch {
            all: flags[..roles.len()].iter().all(|&f| f),
            n_roles: roles.len() as u8,
            roles: flags,
            n_composites: self.composites().len() as u8,
            composites,
        })
    }
}
