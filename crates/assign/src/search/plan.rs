//! The plan compiler: the order in which roles are filled and what
//! completes at each step, compiled once per hypothesis and jet count.

use super::*;

/// What kind of object a search step places.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum StepKind {
    Jet(TagRule),
    Lepton(Option<Flavour>, Option<i8>),
    Neutrino { lepton: usize },
    LargeJet { lo: f64, hi: f64, optional: bool },
}

#[derive(Clone, Debug)]
pub(super) struct Step {
    pub(super) role: RoleSlot,
    pub(super) kind: StepKind,
    /// Earlier member of this role's interchangeable group: the object here
    /// must come after that one's (canonical order, each set once).
    pub(super) sym_role: Option<usize>,
    /// The optional large-jet role that would fill this jet role's composite.
    pub(super) skip_if: Option<usize>,
    /// Lepton pair rules with roles placed earlier: (other role, pair index).
    pub(super) pair_checks: Vec<(usize, usize)>,
    /// Composites completed by this step, bottom-up: a range of
    /// [`Plan::comp_ops`].
    pub(super) comps: (usize, usize),
    /// Constraints completed by this step: a range of [`Plan::con_ops`].
    pub(super) cons: (usize, usize),
    /// The join that completes the assignment below this step (index into
    /// [`Plan::joins`]).
    pub(super) join: Option<usize>,
}

/// Slots of the search's four-vector array: one per role, then one per
/// composite.
pub(super) const SLOTS: usize = MAX_ROLES + MAX_COMPOSITES;

/// Sums the four-vectors in `src` (slots) into composite `dest`, as a left
/// fold in this order: first the `n_inv` sources fixed before the step that
/// completes the composite, then those set at that step (its role, and
/// composites completed at the same step). The fixed part is summed once per
/// visit of the step (`Workspace::prefix`), and the replay that reports an
/// assignment (`Workspace::build_into`) sums in the same order, so the
/// reported composite four-vectors and constraint terms are bit for bit the
/// ones the χ² was computed from. The reported *masses* are not:
/// `RankedAssignment::composite_mass` takes `FourMomentum::m` of that
/// four-vector (two square roots, precise for nearly massless sums), while
/// the search uses `fast_mass` (one root); for the W, top and heavier
/// systems searched they agree to about 1e-13
/// relatively (see `fast_mass`). Reporting `fast_mass` instead would change
/// output bytes.
#[derive(Clone, Copy, Debug)]
pub(super) struct CompOp {
    pub(super) dest: CompSlot,
    pub(super) n: usize,
    pub(super) n_inv: usize,
    pub(super) src: [P4Slot; SLOTS],
}

/// Object slots in `Workspace::obj_p4`: jets, leptons, large jets, then two
/// neutrino roots per lepton.
pub(super) const JET_BASE: usize = 0;
pub(super) const LEP_BASE: usize = JET_BASE + MAX_JETS;
pub(super) const LARGE_BASE: usize = LEP_BASE + MAX_LEPTONS;
pub(super) const NU_BASE: usize = LARGE_BASE + MAX_LARGE_JETS;
pub(super) const OBJ_SLOTS: usize = NU_BASE + 2 * MAX_LEPTONS;
const _: () = assert!(OBJ_SLOTS == 64 && SLOTS == 32 && MAX_COMPOSITES == 16);

/// How a compiled constraint computes σ.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum ConShape {
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
pub(super) struct ConOp {
    /// Constraint index.
    pub(super) k: ConSlot,
    pub(super) shape: ConShape,
    pub(super) a: CompSlot,
    pub(super) b: CompSlot,
    pub(super) target: f64,
    /// σ in GeV, or the relative width for `EqualRelative`.
    pub(super) width: f64,
    pub(super) only_closest: bool,
}

impl ConOp {
    pub(super) fn new(k: usize, c: &crate::Constraint) -> ConOp {
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
            k: ConSlot::new(k),
            shape,
            a: CompSlot::new(a),
            b: CompSlot::new(b),
            target,
            width,
            only_closest: c.only_closest,
        }
    }

    /// The χ² term given the composite masses.
    #[inline(always)]
    pub(super) fn term(&self, m: &[f64; MAX_COMPOSITES]) -> f64 {
        self.term_of(m[self.a], m[self.b])
    }

    /// The χ² term for masses `ma` (composite `a`) and `mb` (composite `b`;
    /// unused by mass constraints).
    #[inline(always)]
    pub(super) fn term_of(&self, ma: f64, mb: f64) -> f64 {
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

/// The order in which roles are filled and what completes at each step.
#[derive(Clone, Debug)]
pub(super) struct Plan {
    pub(super) steps: Vec<Step>,
    /// An empty result with the hypothesis's sizes and leaf masks filled.
    pub(super) template: RankedAssignment,
    pub(super) comp_ops: Vec<CompOp>,
    pub(super) con_ops: Vec<ConOp>,
    pub(super) joins: Vec<Join>,
    /// Lepton roles the neutrino may come from (at most one).
    pub(super) nu_lepton: Option<usize>,
    /// The shape with a dedicated path, if the plan has it.
    pub(super) pair_join: Option<pair_join::PairJetJoin>,
}

/// Rank of a role kind within one constraint's roles: leptons, then the
/// neutrino (which needs its lepton), large jets, jets.
fn kind_rank(k: &RoleKind) -> u8 {
    match k {
        RoleKind::Lepton { .. } => 0,
        RoleKind::Neutrino { .. } => 1,
        RoleKind::LargeJet { .. } => 2,
        RoleKind::Jet { .. } => 3,
    }
}

/// The first phase of [`Plan::new`]: choosing the fill order. Role sets are
/// bit masks over role indices (at most [`MAX_ROLES`] = 16 roles, so a
/// `u16`).
struct FillOrder<'h> {
    h: &'h Hypothesis,
    /// Jets entering the search, for the branching estimate.
    n_jets: usize,
    btag: &'h BtagPolicy,
    order: Vec<usize>,
    placed: u16,
}

impl FillOrder<'_> {
    /// Estimated number of objects a role may take in a typical event.
    fn branching(&self, r: usize) -> f64 {
        match self.h.roles()[r].kind {
            RoleKind::Jet { tag } => {
                let nj = self.n_jets.max(1) as f64;
                match (self.btag, tag) {
                    (BtagPolicy::Threshold(_), TagRule::B) => (nj / 3.0).max(1.5),
                    _ => nj,
                }
            }
            RoleKind::Lepton { .. } => 1.5,
            RoleKind::Neutrino { .. } => 2.0,
            RoleKind::LargeJet { .. } => 2.0,
        }
    }

    /// `mask` plus the lepton role of every neutrino role in it.
    fn need_of(&self, mut mask: u16) -> u16 {
        for (r, role) in self.h.roles().iter().enumerate() {
            if mask & (1 << r) != 0 {
                if let RoleKind::Neutrino { lepton } = role.kind {
                    mask |= 1 << lepton;
                }
            }
        }
        mask
    }

    /// The roles each constraint needs.
    fn constraint_masks(&self) -> Vec<u16> {
        let comps = self.h.composites();
        self.h
            .constraints()
            .iter()
            .map(|c| match c.kind {
                ConstraintKind::Mass { composite, .. } => self.need_of(comps[composite].leaf_mask),
                ConstraintKind::EqualMass { composites: [a, b] } => {
                    self.need_of(comps[a].leaf_mask | comps[b].leaf_mask)
                }
            })
            .collect()
    }

    /// Estimated number of fillings of the roles in `missing`.
    fn cost_of(&self, missing: u16) -> f64 {
        let mut cost = 1.0;
        for r in 0..self.h.roles().len() {
            if missing & (1 << r) != 0 {
                cost *= self.branching(r);
            }
        }
        for g in self.h.interchangeable() {
            let k = g.iter().filter(|&&r| missing & (1 << r) != 0).count();
            cost /= (1..=k).product::<usize>() as f64;
        }
        cost
    }

    /// Appends the roles of `mask` not yet placed. Within one constraint's
    /// roles: greedily the role that completes a composite with the fewest
    /// roles still missing (so that, e.g., one side of an equal-mass
    /// constraint completes early), then by kind (leptons, neutrino, large
    /// jets, jets) and index. A neutrino waits for its lepton, a jet for the
    /// large jet that may replace its composite.
    fn push_sorted(&mut self, mask: u16) {
        let roles = self.h.roles();
        let comps_all = self.h.composites();
        let mut add: Vec<usize> = (0..roles.len())
            .filter(|&r| mask & (1 << r) != 0 && self.placed & (1 << r) == 0)
            .collect();
        while !add.is_empty() {
            let waiting = |r: usize| match roles[r].kind {
                RoleKind::Neutrino { lepton } => add.contains(&lepton),
                _ => comps_all.iter().any(|c| {
                    c.parts.contains(&Part::Role(r)) && c.whole.is_some_and(|w| add.contains(&w))
                }),
            };
            let placed = self.placed;
            let missing = |r: usize| {
                comps_all
                    .iter()
                    .filter(|c| c.leaf_mask & (1 << r) != 0)
                    .map(|c| (c.leaf_mask & !placed).count_ones())
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
            self.order.push(r);
            self.placed |= 1 << r;
        }
    }

    /// An equal-mass constraint whose two sides share no role and hold
    /// every role splits the search: the side with more fillings is
    /// searched first and the other, last, is joined to it from a list built
    /// once per event (see [`Join`]). Returns the roles of the side searched
    /// first.
    fn first_side(&self, all: u16) -> Option<u16> {
        let h = self.h;
        let roles = h.roles();
        let n = roles.len();
        h.constraints().iter().find_map(|c| {
            let ConstraintKind::EqualMass { composites: [a, b] } = c.kind else {
                return None;
            };
            let (ma, mb) = (
                self.need_of(h.composites()[a].leaf_mask),
                self.need_of(h.composites()[b].leaf_mask),
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
            let small = |m: u16| joinable(m) && self.cost_of(m) <= MAX_JOIN_COST;
            // The first side is searched, the other (small) one listed.
            match (small(ma), small(mb)) {
                (true, true) if self.cost_of(ma) < self.cost_of(mb) => Some(mb),
                (_, true) => Some(ma),
                (true, false) => Some(mb),
                (false, false) => None,
            }
        })
    }

    /// Orders the roles so that constraints complete as early as possible:
    /// repeatedly pick the unfinished constraint whose missing roles have the
    /// smallest estimated branching product, append them, and finish with
    /// roles no constraint needs. With a first side (see
    /// [`first_side`](Self::first_side)), its constraints come first.
    fn run(mut self) -> Vec<usize> {
        let n = self.h.roles().len();
        let all = u16::MAX >> (16 - n);
        let cons_mask = self.constraint_masks();
        for allowed in [self.first_side(all).unwrap_or(all), all] {
            loop {
                let mut best: Option<(f64, usize)> = None;
                for (k, &m) in cons_mask.iter().enumerate() {
                    let missing = m & !self.placed;
                    if missing == 0 || m & !allowed != 0 {
                        continue;
                    }
                    let cost = self.cost_of(missing);
                    if best.is_none_or(|(c, _)| cost < c) {
                        best = Some((cost, k));
                    }
                }
                match best {
                    Some((_, k)) => self.push_sorted(cons_mask[k]),
                    None => break,
                }
            }
            self.push_sorted(allowed);
        }
        let every = self.need_of(u16::MAX >> (16 - n));
        self.push_sorted(every);
        self.order
    }
}

impl Plan {
    /// Compiles the plan in four phases: the fill order ([`FillOrder`]), the
    /// steps with the composites and constraints each completes
    /// ([`Plan::compile_steps`]), the joins ([`Plan::joins`]) and the
    /// dedicated paths ([`pair_join`]).
    pub(super) fn new(h: &Hypothesis, n_jets: usize, btag: &BtagPolicy) -> Plan {
        let order = FillOrder {
            h,
            n_jets,
            btag,
            order: Vec::with_capacity(h.roles().len()),
            placed: 0,
        }
        .run();
        let depth_of = |r: usize| order.iter().position(|&x| x == r).unwrap_or(0);
        // The step at which each composite completes: its last leaf's.
        let comp_close: Vec<usize> = h
            .composites()
            .iter()
            .map(|c| c.leaves().map(depth_of).max().unwrap_or(0))
            .collect();
        let (mut steps, comp_ops, con_ops) = Self::compile_steps(h, &order, &comp_close);
        let joins = Self::joins(h, &order, &steps, &comp_close, &con_ops);
        for (i, la) in joins.iter().enumerate() {
            if steps[la.depth].join.is_none() {
                steps[la.depth].join = Some(i);
            }
        }
        let mut plan = Plan {
            steps,
            template: Self::template(h),
            comp_ops,
            con_ops,
            joins,
            nu_lepton: h.roles().iter().find_map(|r| match r.kind {
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

    /// One step per role in `order`, with the composites (bottom-up, as
    /// [`CompOp`]s) and constraints (as [`ConOp`]s) that complete there.
    fn compile_steps(
        h: &Hypothesis,
        order: &[usize],
        comp_close: &[usize],
    ) -> (Vec<Step>, Vec<CompOp>, Vec<ConOp>) {
        let roles = h.roles();
        let comps = h.composites();
        let depth_of = |r: usize| order.iter().position(|&x| x == r).unwrap_or(0);
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
        let mut steps = Vec::with_capacity(order.len());
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
                if comp_close[c] == d {
                    comp_ops.push(CompOp::new(h, c, r, d, comp_close));
                }
            }
            let k0 = con_ops.len();
            for (k, c) in h.constraints().iter().enumerate() {
                if cons_close[k] == d {
                    con_ops.push(ConOp::new(k, c));
                }
            }
            steps.push(Step {
                role: RoleSlot::new(r),
                kind,
                sym_role,
                skip_if,
                pair_checks,
                comps: (c0, comp_ops.len()),
                cons: (k0, con_ops.len()),
                join: None,
            });
        }
        (steps, comp_ops, con_ops)
    }

    /// An empty result with the hypothesis's sizes and leaf masks filled.
    fn template(h: &Hypothesis) -> RankedAssignment {
        let comps = h.composites();
        let mut template = RankedAssignment {
            chi2: 0.0,
            btag_chi2: 0.0,
            n_roles: h.roles().len() as u8,
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
        template
    }
}

impl CompOp {
    /// The sum of composite `c`, completed at step `d` (which places role
    /// `r`). Sources in declaration order (whole, roles, composites), then
    /// stably split into fixed and set-at-this-step.
    fn new(h: &Hypothesis, c: usize, r: usize, d: usize, comp_close: &[usize]) -> CompOp {
        let comps = h.composites();
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
            dest: CompSlot::new(c),
            n: all.len(),
            n_inv: all.iter().filter(|(varying, _)| !varying).count(),
            src: [P4Slot::new(0); SLOTS],
        };
        for (i, &(_, slot)) in all.iter().enumerate() {
            op.src[i] = P4Slot::new(slot);
        }
        op
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
                    } else if *name == "bwth-ljets" {
                        // Its lepton side is a bW pair's (lepton + neutrino +
                        // b listed); its other side (t + H) is not a W pair + b.
                        assert!(plan.pair_join.is_none(), "{name}");
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
                k: ConSlot::new(0),
                shape,
                a: CompSlot::new(0),
                b: CompSlot::new(1),
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
