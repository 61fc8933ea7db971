//! The depth-first walk: per-step candidates, running χ², pruning, the
//! K-best list and the replay that reports an assignment.

use super::*;

/// One finished assignment held in the K-best list.
#[derive(Clone, Copy, Debug)]
pub(super) struct Leaf {
    pub(super) chi2: f64,
    pub(super) choice: [u8; MAX_ROLES],
}

/// Objects used by a partial assignment; passed down the search by value, so
/// nothing is restored on the way back.
#[derive(Clone, Copy, Debug, Default)]
pub(super) struct Occupancy {
    /// Used objects by kind: jets, leptons, large jets (and a dummy row for
    /// neutrino roots, which occupy nothing).
    pub(super) used: [u64; 4],
    /// Jets inside a large jet already used.
    pub(super) blocked: u64,
}

/// Per-event buffers, allocated once per [`Searcher`].
#[derive(Clone, Debug)]
pub(super) struct Workspace {
    // Object pools (leading objects, finite four-vectors).
    pub(super) n_jets: usize,
    /// Four-vectors of every object: jets, leptons, large jets, then two
    /// neutrino roots per lepton (see [`JET_BASE`] and friends).
    pub(super) obj_p4: [FourMomentum; OBJ_SLOTS],
    pub(super) jet_pos: [u32; MAX_JETS],
    pub(super) jet_index: [u32; MAX_JETS],
    pub(super) jet_score: [f64; MAX_JETS],
    /// b-tag χ² term per jet: row 0 for `any` roles (zeros), 1 for `b`
    /// roles, 2 for `light` roles; row 3 is unused (zeros), there so that a
    /// [`PenRow`] reduces by a mask.
    pub(super) pen: [[f64; MAX_JETS]; PEN_ROWS],
    pub(super) n_leps: usize,
    pub(super) lep_flav: [Flavour; MAX_LEPTONS],
    pub(super) lep_charge: [i8; MAX_LEPTONS],
    pub(super) lep_pos: [u32; MAX_LEPTONS],
    pub(super) lep_index: [u32; MAX_LEPTONS],
    pub(super) n_large: usize,
    pub(super) large_pos: [u32; MAX_LARGE_JETS],
    pub(super) large_index: [u32; MAX_LARGE_JETS],
    pub(super) large_overlap: [u64; MAX_LARGE_JETS],
    pub(super) nu: [Option<NeutrinoSolutions>; MAX_LEPTONS],
    /// Per depth: the objects its role's requirements admit in this event
    /// (bit = object index), and the b-tag row of `pen`.
    pub(super) cand_mask: [u64; MAX_ROLES],
    pub(super) pen_row: [PenRow; MAX_ROLES],
    /// Per depth: candidates scored for best-first descent.
    pub(super) buf: [[(f64, u8); MAX_CANDS]; MAX_ROLES],
    pub(super) rest_min: [f64; MAX_ROLES + 1],
    pub(super) closest_dev: [f64; MAX_CONSTRAINTS],
    // Current partial assignment.
    pub(super) choice: [u8; MAX_ROLES],
    /// Four-vectors: roles, then composites (see [`SLOTS`]).
    pub(super) p4s: [FourMomentum; SLOTS],
    pub(super) comp_m: [f64; MAX_COMPOSITES],
    /// Join lists (one per [`Plan::joins`]) and the number of this
    /// search, which invalidates them.
    pub(super) lists: Vec<JoinList>,
    pub(super) searches: u64,
    /// Per composite: the sum of its sources fixed before the step that
    /// completes it (see [`CompOp`]).
    pub(super) prefix: [FourMomentum; MAX_COMPOSITES],
    /// χ² of the K-th best so far (∞ until K are held).
    pub(super) thr: f64,
    // Results.
    pub(super) best: Vec<Leaf>,
    pub(super) k: usize,
    pub(super) prune: bool,
    pub(super) evaluated: Evaluated,
    // Scratch for sorting the input jets.
    pub(super) sort_scratch: Vec<(f64, u32)>,
    /// Scored pairs of the [`pair_join`] path (empty for other plans), and
    /// their running χ² apart, for the best-first scan.
    pub(super) pairs: Vec<pair_join::ScoredPair>,
    pub(super) pair_v: Vec<f64>,
    /// The lepton side's compact list for the [`pair_join`] path.
    pub(super) lepton_list: pair_join::LeptonList,
    // Budget and cancellation (see `check_limits`).
    /// Why the current search stopped before it was exact, if it did.
    pub(super) stopped: Option<SearchStatus>,
    /// Work count (complete + partial) at which limits are next checked.
    pub(super) next_check: u64,
    pub(super) budget: SearchBudget,
    pub(super) deadline: Option<std::time::Instant>,
    pub(super) cancel: Option<Arc<AtomicBool>>,
    /// [`SearchConfig::prune`]; `prune` itself is forced on to unwind a
    /// stopped search.
    pub(super) prune_config: bool,
}

impl Workspace {
    /// Every buffer for searching with `plan` under `config`, allocated
    /// once per [`Searcher`].
    pub(super) fn new(plan: &Plan, config: &SearchConfig) -> Workspace {
        Workspace {
            n_jets: 0,
            obj_p4: [FourMomentum::ZERO; OBJ_SLOTS],
            jet_pos: [0; MAX_JETS],
            jet_index: [0; MAX_JETS],
            jet_score: [0.0; MAX_JETS],
            pen: [[0.0; MAX_JETS]; PEN_ROWS],
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
            pen_row: [PenRow::new(0); MAX_ROLES],
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
            lepton_list: pair_join::LeptonList::for_plan(plan),
            stopped: None,
            next_check: 0,
            budget: config.budget,
            deadline: None,
            cancel: None,
            prune_config: config.prune,
        }
    }
}

/// Invariant mass from `E² − |p|²` with one square root (the search's
/// innermost operation). `FourMomentum::m` takes a second root to factor
/// `(E − |p|)(E + |p|)` for precision on nearly massless vectors; composites
/// here are W, top and heavier systems, for which the direct form loses at
/// most ~1e-13 relatively. Same sign convention as `FourMomentum::m`.
#[inline(always)]
pub(super) fn fast_mass(p: &FourMomentum) -> f64 {
    let m2 = p.e() * p.e() - (p.px() * p.px() + p.py() * p.py() + p.pz() * p.pz());
    if m2 >= 0.0 {
        m2.sqrt()
    } else {
        -(-m2).sqrt()
    }
}

impl Workspace {
    /// The objects step `d` may place given the roles already filled, as a
    /// bit mask over object indices, and whether leaving the role empty is a
    /// candidate (visited before the objects).
    #[inline(always)]
    pub(super) fn admissible_objects(
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
    pub(super) fn pool(&self, step: &Step) -> (ObjSlot, usize) {
        match step.kind {
            StepKind::Jet(_) => (ObjSlot::new(JET_BASE), 0),
            StepKind::Lepton(..) => (ObjSlot::new(LEP_BASE), 1),
            StepKind::LargeJet { .. } => (ObjSlot::new(LARGE_BASE), 2),
            StepKind::Neutrino { lepton } => {
                // The lepton may still be unplaced (`NONE`) when the step has
                // no candidate and the pool goes unused; reduced into range
                // rather than made a slot, which must be in range.
                let l = self.choice[lepton] as usize % MAX_LEPTONS;
                (ObjSlot::new(NU_BASE + 2 * l), 3)
            }
        }
    }

    /// Sums, once per visit of a step, the sources of its composites that are
    /// fixed before it.
    #[inline(always)]
    pub(super) fn prepare_prefixes(&mut self, ops: &[CompOp]) {
        for op in ops {
            if op.n_inv > 0 {
                let inv = &op.src[..op.n_inv];
                let mut p = self.p4s[inv[0]];
                for &s in &inv[1..] {
                    p += self.p4s[s];
                }
                self.prefix[op.dest] = p;
            }
        }
    }

    /// Puts four-vector `p` in `role` and completes the step's composites
    /// (prefixes prepared).
    #[inline(always)]
    pub(super) fn close_comps(&mut self, ops: &[CompOp], role: RoleSlot, p: FourMomentum) {
        self.p4s[role.p4()] = p;
        for op in ops {
            let dest = op.dest;
            let (mut p, from) = if op.n_inv > 0 {
                (self.prefix[dest], op.n_inv)
            } else {
                (self.p4s[op.src[0]], 1)
            };
            for &s in &op.src[from.min(op.n)..op.n] {
                p += self.p4s[s];
            }
            self.p4s[dest.p4()] = p;
            self.comp_m[dest] = fast_mass(&p);
        }
    }

    /// Adds the terms of the constraints the step completes to `v`; `∞` if
    /// one rejects the assignment or the sum is NaN.
    #[inline(always)]
    pub(super) fn eval_cons(&self, cons: &[ConOp], mut v: f64) -> f64 {
        for op in cons {
            if op.only_closest && op.shape == ConShape::Mass {
                let dev = (self.comp_m[op.a] - op.target).abs();
                let lim = self.closest_dev[op.k];
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
    pub(super) fn admissible(&self, v: f64, rest: f64) -> bool {
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
    pub(super) fn record(&mut self, v: f64, n_roles: usize) {
        // Strictly worse than the K-th best (or not finite): cannot enter.
        if v <= self.thr {
            self.insert(v, n_roles);
        }
    }

    #[inline(never)]
    pub(super) fn insert(&mut self, v: f64, n_roles: usize) {
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

    pub(super) fn dfs(
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
        let role = step.role;
        let (base, kind) = self.pool(step);
        let row = self.pen_row[d];
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
                self.close_comps(ops, role, self.obj_p4[base.offset(o)]);
                let v = self.eval_cons(cons, partial + self.pen[row][JetSlot::new(o)]);
                self.record(v, n_roles);
                n += 1;
            }
            self.evaluated.complete += n;
            self.tick();
            return;
        }
        let rest = self.rest_min[d + 1];
        let placed = |ws: &Self, o: usize| -> Occupancy {
            let mut occ = occ;
            occ.used[kind] |= 1 << o;
            if kind == 2 {
                occ.blocked |= ws.large_overlap[LargeSlot::new(o)];
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
                self.close_comps(ops, role, self.obj_p4[base.offset(o)]);
                self.buf[d][n] = (
                    self.eval_cons(cons, partial + self.pen[row][JetSlot::new(o)]),
                    o as u8,
                );
                n += 1;
            }
            self.evaluated.partial += n as u64;
            self.tick();
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
                    self.close_comps(ops, role, self.obj_p4[base.offset(o)]);
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
                self.close_comps(ops, role, self.obj_p4[base.offset(o)]);
                let v = self.eval_cons(cons, partial + self.pen[row][JetSlot::new(o)]);
                n += 1;
                if self.admissible(v, rest) {
                    let occ = placed(self, o);
                    self.descend(hyp, plan, lists, d, v, occ);
                }
            }
            self.evaluated.partial += n;
            self.tick();
        }
    }

    /// Starts the budget of a new search (see [`SearchBudget`]).
    pub(super) fn start_budget(&mut self) {
        self.stopped = None;
        self.prune = self.prune_config;
        self.next_check = BUDGET_CHECK_EVERY.min(self.budget.max_assignments.unwrap_or(u64::MAX));
        self.deadline = self
            .budget
            .max_time
            .and_then(|t| std::time::Instant::now().checked_add(t));
        if self
            .cancel
            .as_ref()
            .is_some_and(|c| c.load(Ordering::Relaxed))
        {
            self.stopped = Some(SearchStatus::Cancelled);
        }
    }

    /// Checks the limits once the work count passes `next_check`: one
    /// compare per call in the walk, the rest every [`BUDGET_CHECK_EVERY`]
    /// assignments.
    #[inline(always)]
    fn tick(&mut self) {
        if self.evaluated.complete + self.evaluated.partial >= self.next_check {
            self.check_limits();
        }
    }

    /// Stops the search if the budget is spent, the deadline passed or the
    /// cancellation flag is set; otherwise schedules the next check.
    #[cold]
    #[inline(never)]
    fn check_limits(&mut self) {
        self.stop_if_spent();
        if self.stopped.is_some() {
            // Unwind without a test per node: with pruning on and the K-th
            // best at −∞, `admissible` and `record` refuse everything, so
            // each open step ends after its current candidate list.
            self.prune = true;
            self.thr = f64::NEG_INFINITY;
        }
    }

    /// Sets `stopped` if a limit is reached, else schedules the next check.
    fn stop_if_spent(&mut self) {
        let work = self.evaluated.complete + self.evaluated.partial;
        if let Some(max) = self.budget.max_assignments {
            if work >= max {
                self.stopped = Some(SearchStatus::BudgetExceeded(BudgetLimit::Assignments(max)));
                return;
            }
        }
        if self
            .cancel
            .as_ref()
            .is_some_and(|c| c.load(Ordering::Relaxed))
        {
            self.stopped = Some(SearchStatus::Cancelled);
            return;
        }
        if let (Some(deadline), Some(t)) = (self.deadline, self.budget.max_time) {
            if std::time::Instant::now() >= deadline {
                self.stopped = Some(SearchStatus::BudgetExceeded(BudgetLimit::Time(t)));
                return;
            }
        }
        let next = work.saturating_add(BUDGET_CHECK_EVERY);
        self.next_check = next.min(self.budget.max_assignments.unwrap_or(u64::MAX));
    }

    /// Goes on from step `d` (its candidate placed, running χ² `v`): by the
    /// step's join if it has one, else by the next step.
    #[inline(always)]
    pub(super) fn descend(
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
    pub(super) fn build_into(&mut self, plan: &Plan, leaf: &Leaf, out: &mut RankedAssignment) {
        let mut btag_chi2 = 0.0;
        for step in &plan.steps {
            let role = step.role;
            let obj = leaf.choice[role];
            self.choice[role] = obj;
            let o = obj as usize;
            let p = if obj == NONE {
                FourMomentum::ZERO
            } else {
                out.objects[role] = match step.kind {
                    StepKind::Jet(tag) => {
                        btag_chi2 += match tag {
                            TagRule::B => self.pen[1][JetSlot::new(o)],
                            TagRule::Light => self.pen[2][JetSlot::new(o)],
                            TagRule::Any => 0.0,
                        };
                        ObjectRef::Jet {
                            pos: self.jet_pos[JetSlot::new(o)],
                            index: self.jet_index[JetSlot::new(o)],
                        }
                    }
                    StepKind::Lepton(..) => ObjectRef::Lepton {
                        flavour: self.lep_flav[LepSlot::new(o)],
                        pos: self.lep_pos[LepSlot::new(o)],
                        index: self.lep_index[LepSlot::new(o)],
                    },
                    StepKind::LargeJet { .. } => ObjectRef::LargeJet {
                        pos: self.large_pos[LargeSlot::new(o)],
                        index: self.large_index[LargeSlot::new(o)],
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
                self.obj_p4[self.pool(step).0.offset(o)]
            };
            self.p4s[role.p4()] = p;
        }
        // Every role is placed: each composite is the left fold of its
        // sources in `CompOp` order, as the search summed it (its prefix,
        // then the rest), and `comp_ops` lists sources before their users.
        for op in &plan.comp_ops {
            let src = &op.src[..op.n.clamp(1, SLOTS)];
            let mut p = self.p4s[src[0]];
            for &s in &src[1..] {
                p += self.p4s[s];
            }
            let dest = op.dest;
            self.p4s[dest.p4()] = p;
            self.comp_m[dest] = fast_mass(&p);
        }
        for op in &plan.con_ops {
            out.terms[op.k] = op.term(&self.comp_m);
        }
        let n = out.n_composites as usize;
        out.composite_p4[..n].copy_from_slice(&self.p4s[MAX_ROLES..MAX_ROLES + n]);
        out.chi2 = leaf.chi2;
        out.btag_chi2 = btag_chi2;
    }
}
