//! A dedicated path for the commonest joined shape: the searched side of an
//! equal-mass constraint is a pair of interchangeable jets (a hadronic W)
//! plus one more jet (the b), and the other side is joined from its list
//! (see [`Join`]). This is the bW-pair lepton+jets topology.
//!
//! The general search fills the pair role by role: six nodes for the first
//! jet, a sort of each one's partners, and so on. Here every pair is scored
//! at once and visited best first (picked by a scan of their running χ²,
//! then sorted if many are needed), so the first pair that cannot reach the
//! K best ends the whole search. When the other side is a lepton, its
//! neutrino and a jet ([`LeptonSide`]), its fillings are kept as a compact
//! [`LeptonList`] and walked here; when only that side has the shape, the
//! general list is still built by plain loops (`fill_lepton_side`).
//!
//! The arithmetic is the general search's own, operation for operation
//! (same sums in the same order, same terms, same bounds), so the K best
//! are bit for bit those of the general search without pruning and of
//! plain enumeration; `tests/join.rs` and `tests/search_vs_exhaustive.rs`
//! check this on every b-tag policy, and fail if this file's own terms,
//! sort or clash check are broken.

use super::*;

/// Where the shape sits in a [`Plan`]; found by [`PairJetJoin::detect`].
#[derive(Clone, Copy, Debug)]
pub(super) struct PairJetJoin {
    /// Roles at steps 0 and 1 (the interchangeable pair) and 2 (the extra
    /// jet).
    roles: [RoleSlot; 3],
    /// The composite closed at step 1 (sum of the pair) and at step 2 (pair
    /// composite + extra jet: the join's closed side).
    pair: CompSlot,
    closed: CompSlot,
    /// The join at step 2 (index into [`Plan::joins`]) and, if its open side
    /// is a [`LeptonSide`], that shape: its list is then this path's compact
    /// [`LeptonList`].
    join: usize,
    side: Option<LeptonSide>,
}

/// One scored pair: running χ² after step 1, the two jets, the pair's
/// four-vector and mass.
#[derive(Clone, Copy, Debug)]
pub(super) struct ScoredPair {
    v: f64,
    a: u8,
    b: u8,
    p: FourMomentum,
    m: f64,
}

/// Additions per list entry copied as one fixed-size block (see
/// `fill_lepton_side`).
const FIXED_COPY: usize = 8;

/// Pairs picked one by one (by a scan for the smallest χ²) before the rest
/// are sorted (see [`Workspace::pair_join`]).
const SELECT_FIRST: usize = 8;

// `fill_lepton_side` relies on this: its list can never overflow.
const _: () = assert!(MAX_LEPTONS * 2 * MAX_JETS <= MAX_JOIN_ENTRIES);

/// Most pairs of [`MAX_JETS`] jets.
pub(super) const MAX_PAIRS: usize = MAX_JETS * (MAX_JETS - 1) / 2;

impl PairJetJoin {
    /// The shape, if the plan has it exactly: steps 0–2 are jet roles
    /// without a large-jet alternative; step 1's role is interchangeable
    /// with step 0's; step 0 completes nothing; step 1 completes one
    /// composite, the sum of the two (in that order), with only plain mass
    /// constraints on it; step 2 completes one composite, that sum plus its
    /// jet (in that order), with only plain mass constraints on it; and a
    /// join at step 2 has that composite as its closed side.
    pub(super) fn detect(plan: &Plan) -> Option<PairJetJoin> {
        let steps = plan.steps.get(..3)?;
        let join_index = steps[2].join?;
        let join = plan.joins.get(join_index)?;
        for s in steps {
            if !matches!(s.kind, StepKind::Jet(_)) || s.skip_if.is_some() {
                return None;
            }
        }
        let roles = [steps[0].role, steps[1].role, steps[2].role];
        if steps[1].sym_role != Some(roles[0].get())
            || steps[2].sym_role.is_some()
            || steps[0].comps.0 != steps[0].comps.1
            || steps[0].cons.0 != steps[0].cons.1
        {
            return None;
        }
        let single = |s: &Step| (s.comps.1 == s.comps.0 + 1).then(|| plan.comp_ops[s.comps.0]);
        let (op1, op2) = (single(&steps[1])?, single(&steps[2])?);
        let (pair, closed) = (op1.dest, op2.dest);
        let sources = |op: &CompOp| (op.n, op.n_inv, op.src[0], op.src[1]);
        if sources(&op1) != (2, 1, roles[0].p4(), roles[1].p4())
            || sources(&op2) != (2, 1, pair.p4(), roles[2].p4())
            || join.depth != 2
            || join.closed != closed
        {
            return None;
        }
        let plain_on = |s: &Step, c: CompSlot| {
            plan.con_ops[s.cons.0..s.cons.1]
                .iter()
                .all(|op| op.shape == ConShape::Mass && op.a == c && !op.only_closest)
        };
        if !plain_on(&steps[1], pair) || !plain_on(&steps[2], closed) {
            return None;
        }
        Some(PairJetJoin {
            roles,
            pair,
            closed,
            join: join_index,
            side: join.lepton_side,
        })
    }

    /// The lepton side whose compact list replaces join `i`'s general one.
    pub(super) fn compact_side(&self, i: usize) -> Option<LeptonSide> {
        self.side.filter(|_| i == self.join)
    }
}

impl Workspace {
    /// The search below the root for a plan with the [`PairJetJoin`]
    /// shape (pruning on): replaces `dfs(…, 0, 0.0, empty)`.
    pub(super) fn pair_join(
        &mut self,
        k: &PairJetJoin,
        hyp: &Hypothesis,
        plan: &Plan,
        lists: &[JoinList],
    ) {
        let rows = [self.pen_row[0], self.pen_row[1], self.pen_row[2]];
        let cons1 = &plan.con_ops[plan.steps[1].cons.0..plan.steps[1].cons.1];
        // Step 0 then step 1, as `dfs` computes them: the running χ² after
        // step 0 is 0 + its b-tag term (no constraint closes there).
        let mut pairs = std::mem::take(&mut self.pairs);
        let mut pair_v = std::mem::take(&mut self.pair_v);
        pairs.clear();
        pair_v.clear();
        let mut m0 = self.cand_mask[0];
        while m0 != 0 {
            let a = m0.trailing_zeros() as usize;
            m0 &= m0 - 1;
            let v0 = 0.0 + self.pen[rows[0]][JetSlot::new(a)];
            if v0.is_nan() {
                continue;
            }
            let pa = self.obj_p4[ObjSlot::new(JET_BASE + a)];
            let mut m1 =
                self.cand_mask[1] & !(1u64 << a) & u64::MAX.checked_shl(a as u32 + 1).unwrap_or(0);
            while m1 != 0 {
                let b = m1.trailing_zeros() as usize;
                m1 &= m1 - 1;
                let p = pa + self.obj_p4[ObjSlot::new(JET_BASE + b)];
                let m = fast_mass(&p);
                let v = plain_terms(cons1, m, v0 + self.pen[rows[1]][JetSlot::new(b)]);
                if v.is_finite() {
                    pair_v.push(v);
                    pairs.push(ScoredPair {
                        v,
                        a: a as u8,
                        b: b as u8,
                        p,
                        m,
                    });
                }
            }
        }
        self.evaluated.partial += pairs.len() as u64;
        let list = std::mem::take(&mut self.lepton_list);
        let walk = k.side.map(|side| LeptonWalk {
            la: &plan.joins[k.join],
            roles: side.roles(plan),
            rows: side.rows(self),
            cons_j: side.cons_j(plan),
            n_roles: hyp.roles().len(),
        });
        let rest2 = self.rest_min[2];
        // Best first: the search usually ends after a few pairs, so picking
        // the smallest remaining each time costs less than sorting them all.
        // Ties go to the earlier pair (made in (a, b) order), so the visit
        // order is deterministic. The scan runs over the χ² values alone
        // (`pair_v`); a visited pair's becomes ∞ (every kept one is finite).
        // The bound grows with v, so the first pair that fails it ends the
        // search.
        let mut open = true;
        for _ in 0..SELECT_FIRST {
            let mut best = usize::MAX;
            let mut best_v = f64::INFINITY;
            for (i, &v) in pair_v.iter().enumerate() {
                if v < best_v {
                    best_v = v;
                    best = i;
                }
            }
            if best == usize::MAX || !self.admissible(best_v, rest2) {
                open = false;
                break;
            }
            pair_v[best] = f64::INFINITY;
            let sp = pairs[best];
            self.visit_pair(k, &sp, hyp, plan, lists, &list, walk.as_ref());
        }
        if open {
            // Still open after many pairs (many jets, few completions): one
            // sort of the rest instead of a scan per pick, in the same order.
            for (sp, &v) in pairs.iter_mut().zip(&pair_v) {
                sp.v = v;
            }
            pairs.sort_unstable_by(|x, y| x.v.total_cmp(&y.v).then((x.a, x.b).cmp(&(y.a, y.b))));
            for sp in &pairs {
                if !sp.v.is_finite() || !self.admissible(sp.v, rest2) {
                    break;
                }
                self.visit_pair(k, sp, hyp, plan, lists, &list, walk.as_ref());
            }
        }
        self.pairs = pairs;
        self.pair_v = pair_v;
        self.lepton_list = list;
    }

    /// Places pair `sp` (steps 0 and 1) and goes on with every jet for step
    /// 2, as `dfs` would.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn visit_pair(
        &mut self,
        k: &PairJetJoin,
        sp: &ScoredPair,
        hyp: &Hypothesis,
        plan: &Plan,
        lists: &[JoinList],
        list: &LeptonList,
        walk: Option<&LeptonWalk>,
    ) {
        let [r0, r1, r2] = k.roles;
        let row2 = self.pen_row[2];
        let cons2 = &plan.con_ops[plan.steps[2].cons.0..plan.steps[2].cons.1];
        let rest3 = self.rest_min[3];
        let (a, b) = (sp.a as usize, sp.b as usize);
        self.choice[r0] = sp.a;
        self.choice[r1] = sp.b;
        self.p4s[r0.p4()] = self.obj_p4[ObjSlot::new(JET_BASE + a)];
        self.p4s[r1.p4()] = self.obj_p4[ObjSlot::new(JET_BASE + b)];
        self.p4s[k.pair.p4()] = sp.p;
        self.comp_m[k.pair] = sp.m;
        let used = (1u64 << a) | (1u64 << b);
        let mut m2 = self.cand_mask[2] & !used;
        self.evaluated.partial += u64::from(m2.count_ones());
        while m2 != 0 {
            let c = m2.trailing_zeros() as usize;
            m2 &= m2 - 1;
            let pc = self.obj_p4[ObjSlot::new(JET_BASE + c)];
            let p = sp.p + pc;
            let m = fast_mass(&p);
            let v = plain_terms(cons2, m, sp.v + self.pen[row2][JetSlot::new(c)]);
            if !self.admissible(v, rest3) {
                continue;
            }
            self.choice[r2] = c as u8;
            self.p4s[r2.p4()] = pc;
            self.p4s[k.closed.p4()] = p;
            self.comp_m[k.closed] = m;
            let mut occ = Occupancy::default();
            occ.used[0] = used | (1u64 << c);
            match walk {
                // As `join`: a closed mass below 0 or not finite descends.
                Some(w) if m >= 0.0 && m.is_finite() => {
                    self.walk_lepton_list(w, list, v, m, occ.used[0]);
                }
                Some(_) => self.dfs(hyp, plan, lists, 3, v, occ),
                None => self.descend(hyp, plan, lists, 2, v, occ),
            }
        }
    }

    /// `join` on the compact list: the same walk, bounds and order of
    /// additions as `join` and `join_visit` on the general list.
    #[inline(always)]
    fn walk_lepton_list(
        &mut self,
        w: &LeptonWalk,
        list: &LeptonList,
        v: f64,
        m_closed: f64,
        used_jets: u64,
    ) {
        let entries = &list.entries[..];
        let split = entries.partition_point(|e| e.mass < m_closed);
        let mut complete = 0;
        let at = WalkPoint {
            v,
            m_closed,
            used_jets,
        };
        for e in &entries[split..] {
            if !self.lepton_visit(w, &at, list, e, &mut complete) {
                break;
            }
        }
        for e in entries[..split].iter().rev() {
            if !self.lepton_visit(w, &at, list, e, &mut complete) {
                break;
            }
        }
        self.evaluated.complete += complete;
    }

    /// `join_visit` for one compact entry; `false` once this side of the
    /// walk can stop.
    #[inline(always)]
    fn lepton_visit(
        &mut self,
        w: &LeptonWalk,
        at: &WalkPoint,
        list: &LeptonList,
        e: &LeptonEntry,
        complete: &mut u64,
    ) -> bool {
        // The closed side holds jets only: only the jet can clash.
        if (1u64 << JetSlot::new(e.jet as usize).get()) & at.used_jets != 0 {
            return true;
        }
        let t_eq = w.la.eq.term_of(at.m_closed, e.mass);
        let at_least = at.v + t_eq;
        if at_least - 1e-12 * at_least > self.thr {
            return false;
        }
        let with_rest = at_least + e.rest;
        if with_rest - 1e-12 * with_rest <= self.thr {
            let (l, r, j) = (e.lep as usize, e.root as usize, e.jet as usize);
            // The general list's additions, in its order: lepton, neutrino
            // (then the neutrino step's terms), jet (then the jet step's
            // terms, the equal-mass one now known).
            let mut x = at.v;
            x += self.pen[w.rows[0]][JetSlot::new(l)];
            x += self.pen[w.rows[1]][JetSlot::new(r)];
            for &t in list.w_terms_of(l, r) {
                x += t;
            }
            x += self.pen[w.rows[2]][JetSlot::new(j)];
            for op in w.cons_j {
                x += if op.k == w.la.eq.k {
                    t_eq
                } else {
                    op.term_of(e.mass, e.mass)
                };
            }
            *complete += 1;
            if x <= self.thr {
                self.choice[w.roles[0]] = e.lep;
                self.choice[w.roles[1]] = e.root;
                self.choice[w.roles[2]] = e.jet;
                self.record(x, w.n_roles);
            }
        }
        true
    }
}

/// What walks over the compact list need, the same for a whole event.
struct LeptonWalk<'a> {
    la: &'a Join,
    roles: [RoleSlot; 3],
    rows: [PenRow; 3],
    cons_j: &'a [ConOp],
    n_roles: usize,
}

/// Where one walk starts: the running χ², the closed mass and the jets
/// already used.
struct WalkPoint {
    v: f64,
    m_closed: f64,
    used_jets: u64,
}

/// The lepton side's fillings for the [`PairJetJoin`] path: one 24-byte
/// entry per filling (the general list keeps objects and additions beside
/// each), sorted by mass. A walk recomputes the additions, the same values
/// in the same order, for the few fillings that complete an assignment.
#[derive(Clone, Debug, Default)]
pub(super) struct LeptonList {
    entries: Vec<LeptonEntry>,
    /// Terms of the constraints completed at the neutrino step, per lepton
    /// and root: `w_terms[(2 l + r) n_w + k]`.
    w_terms: Vec<f64>,
    n_w: usize,
}

#[derive(Clone, Copy, Debug)]
struct LeptonEntry {
    mass: f64,
    /// The sum of the filling's additions, leaving out the equal-mass term.
    rest: f64,
    jet: u8,
    lep: u8,
    root: u8,
}

impl LeptonList {
    /// Room for `plan`'s list if it has the path, else none.
    pub(super) fn for_plan(plan: &Plan) -> LeptonList {
        let used = plan.pair_join.is_some_and(|k| k.side.is_some());
        let room = if used { MAX_LEPTONS * 2 * MAX_JETS } else { 0 };
        LeptonList {
            entries: Vec::with_capacity(room),
            w_terms: Vec::with_capacity(if used {
                MAX_LEPTONS * 2 * MAX_CONSTRAINTS
            } else {
                0
            }),
            n_w: 0,
        }
    }

    fn w_terms_of(&self, l: usize, r: usize) -> &[f64] {
        let at = (2 * l + r) * self.n_w;
        self.w_terms.get(at..at + self.n_w).unwrap_or(&[])
    }
}

/// `eval_cons` for plain mass constraints on one composite of mass `m`:
/// adds their terms to `v` in order; `∞` for a NaN sum.
#[inline(always)]
fn plain_terms(cons: &[ConOp], m: f64, mut v: f64) -> f64 {
    for op in cons {
        v += op.term_of(m, m);
    }
    if v.is_nan() {
        f64::INFINITY
    } else {
        v
    }
}

/// The other dedicated path: a join whose open side is a charged lepton,
/// the neutrino solved from it, and one jet (the leptonic heavy quark of a
/// bW or tW pair). Its list is built by three plain loops instead of the
/// general replay (`fill_join`), with the same sums, terms and entries in
/// the same order, so the list is bit for bit the general one.
#[derive(Clone, Copy, Debug)]
pub(super) struct LeptonSide {
    /// Depths of the lepton, neutrino and jet steps.
    depths: [DepthSlot; 3],
}

impl LeptonSide {
    /// The shape, if join `la` has it exactly: its open steps are a lepton
    /// (completing nothing), the neutrino from that lepton (completing one
    /// composite, lepton + neutrino in that order, with only plain mass
    /// constraints on it), and a jet (completing the open composite, that
    /// sum + the jet in that order, with only the equal-mass constraint and
    /// plain mass constraints on it).
    pub(super) fn detect(plan: &Plan, la: &Join) -> Option<LeptonSide> {
        let [dl, dn, dj] = <[usize; 3]>::try_from(la.open_steps.as_slice()).ok()?;
        let (sl, sn, sj) = (&plan.steps[dl], &plan.steps[dn], &plan.steps[dj]);
        if !matches!(sl.kind, StepKind::Lepton(..))
            || sn.kind
                != (StepKind::Neutrino {
                    lepton: sl.role.get(),
                })
            || !matches!(sj.kind, StepKind::Jet(_))
            || sl.sym_role.is_some()
            || sj.sym_role.is_some()
            || sl.comps.0 != sl.comps.1
            || sl.cons.0 != sl.cons.1
            || sn.comps.1 != sn.comps.0 + 1
            || sj.comps.1 != sj.comps.0 + 1
        {
            return None;
        }
        let (opn, opj) = (plan.comp_ops[sn.comps.0], plan.comp_ops[sj.comps.0]);
        let w = opn.dest;
        let sources = |op: &CompOp| (op.n, op.n_inv, op.src[0], op.src[1]);
        if sources(&opn) != (2, 1, sl.role.p4(), sn.role.p4())
            || sources(&opj) != (2, 1, w.p4(), sj.role.p4())
            || opj.dest != la.open
        {
            return None;
        }
        let plain_on =
            |op: &ConOp, c: CompSlot| op.shape == ConShape::Mass && op.a == c && !op.only_closest;
        let cons_n = &plan.con_ops[sn.cons.0..sn.cons.1];
        let cons_j = &plan.con_ops[sj.cons.0..sj.cons.1];
        if !cons_n.iter().all(|op| plain_on(op, w))
            || !cons_j
                .iter()
                .all(|op| op.k == la.eq.k || plain_on(op, la.open))
            || la.n_incr != 3 + cons_n.len() + cons_j.len()
        {
            return None;
        }
        Some(LeptonSide {
            depths: [dl, dn, dj].map(DepthSlot::new),
        })
    }
}

impl LeptonSide {
    fn roles(&self, plan: &Plan) -> [RoleSlot; 3] {
        self.depths.map(|d| plan.steps[d.get()].role)
    }

    fn rows(&self, ws: &Workspace) -> [PenRow; 3] {
        self.depths.map(|d| ws.pen_row[d])
    }

    fn cons_j<'a>(&self, plan: &'a Plan) -> &'a [ConOp] {
        let s = &plan.steps[self.depths[2].get()];
        &plan.con_ops[s.cons.0..s.cons.1]
    }
}

impl Workspace {
    /// Every filling of a [`LeptonSide`], in `fill_join`'s order (lepton,
    /// root, jet): `on_root(lepton, root, terms)` sees each lepton and root
    /// with the neutrino step's terms, then `on_filling(lepton, root, jet,
    /// mass, sum, additions)` each jet. The additions are in the search's
    /// order, the equal-mass one as 0, and the sum is their left fold, as in
    /// `fill_join`; the mass is never NaN.
    fn lepton_fillings(
        &self,
        side: &LeptonSide,
        plan: &Plan,
        la: &Join,
        mut on_root: impl FnMut(usize, usize, &[f64]),
        mut on_filling: impl FnMut(usize, usize, usize, f64, f64, &[f64]),
    ) {
        let [dl, dn, dj] = side.depths;
        let dn = dn.get();
        let cons_n = &plan.con_ops[plan.steps[dn].cons.0..plan.steps[dn].cons.1];
        let cons_j = side.cons_j(plan);
        let rows = side.rows(self);
        // Three b-tag terms and every constraint at most once.
        let mut incr = [0.0; 3 + MAX_CONSTRAINTS];
        let mut ml = self.cand_mask[dl];
        let mj_all = self.cand_mask[dj];
        while ml != 0 {
            let l = ml.trailing_zeros() as usize;
            ml &= ml - 1;
            let Some(n_roots) = self.nu.get(l).and_then(Option::as_ref).map(|s| s.len()) else {
                continue;
            };
            let pl = self.obj_p4[ObjSlot::new(LEP_BASE + l)];
            incr[0] = self.pen[rows[0]][JetSlot::new(l)];
            for r in 0..n_roots {
                let w = pl + self.obj_p4[ObjSlot::new(NU_BASE + 2 * l + r)];
                let mw = fast_mass(&w);
                incr[1] = self.pen[rows[1]][JetSlot::new(r)];
                let mut n = 2;
                for op in cons_n {
                    incr[n % incr.len()] = op.term_of(mw, mw);
                    n += 1;
                }
                let n = n.min(incr.len());
                on_root(l, r, &incr[2..n]);
                // The sum is a left fold; its first part is the same for
                // every jet.
                let head: f64 = incr[..n].iter().sum();
                let mut mj = mj_all;
                while mj != 0 {
                    let j = mj.trailing_zeros() as usize;
                    mj &= mj - 1;
                    let q = w + self.obj_p4[ObjSlot::new(JET_BASE + j)];
                    let mass = fast_mass(&q);
                    // As in `fill_join`: a NaN mass is never recorded.
                    if mass.is_nan() {
                        continue;
                    }
                    let mut m = n;
                    let pen = self.pen[rows[2]][JetSlot::new(j)];
                    incr[m % incr.len()] = pen;
                    let mut rest = head + pen;
                    m += 1;
                    for op in cons_j {
                        let x = if op.k == la.eq.k {
                            0.0
                        } else {
                            op.term_of(mass, mass)
                        };
                        incr[m % incr.len()] = x;
                        rest += x;
                        m += 1;
                    }
                    on_filling(l, r, j, mass, rest, &incr[..m.min(incr.len())]);
                }
            }
        }
    }

    /// The compact [`LeptonList`] of join `la` (the [`PairJetJoin`] path),
    /// with the same fillings, masses and sums as `fill_lepton_side`;
    /// returns the smallest sum (∞ for no filling).
    pub(super) fn build_lepton_list(&mut self, side: &LeptonSide, plan: &Plan, la: &Join) -> f64 {
        let mut list = std::mem::take(&mut self.lepton_list);
        list.entries.clear();
        let dn = side.depths[1].get();
        list.n_w = plan.steps[dn].cons.1 - plan.steps[dn].cons.0;
        list.w_terms.clear();
        list.w_terms.resize(MAX_LEPTONS * 2 * list.n_w, 0.0);
        let mut min_rest = f64::INFINITY;
        let (entries, w_terms, n_w) = (&mut list.entries, &mut list.w_terms, list.n_w);
        self.lepton_fillings(
            side,
            plan,
            la,
            |l, r, terms| {
                let at = (2 * l + r) * n_w;
                for (k, &t) in terms.iter().enumerate() {
                    if let Some(slot) = w_terms.get_mut(at + k) {
                        *slot = t;
                    }
                }
            },
            |l, r, j, mass, rest, _| {
                min_rest = min_rest.min(rest);
                entries.push(LeptonEntry {
                    mass,
                    rest,
                    jet: j as u8,
                    lep: l as u8,
                    root: r as u8,
                });
            },
        );
        sort_by_mass(&mut list.entries, |e| e.mass);
        self.evaluated.partial += list.entries.len() as u64;
        self.lepton_list = list;
        min_rest
    }

    /// `fill_join` for a join with the [`LeptonSide`] shape: the same
    /// entries, objects and additions, in the same order.
    pub(super) fn fill_lepton_side(
        &mut self,
        side: &LeptonSide,
        plan: &Plan,
        la: &Join,
        t: &mut JoinList,
    ) {
        // At most 8 leptons × 2 roots × 32 jets entries: never more than
        // the list may hold, so no entry needs the overflow check, and the
        // room is made once.
        let most = self.cand_mask[side.depths[0]].count_ones() as usize
            * 2
            * self.cand_mask[side.depths[2]].count_ones() as usize;
        t.entries.reserve(most);
        t.objs.reserve(most);
        t.incr.reserve(most * la.n_incr.max(FIXED_COPY));
        let mut objs = [NONE; MAX_ROLES];
        self.lepton_fillings(
            side,
            plan,
            la,
            |_, _, _| {},
            |l, r, j, mass, rest, incr| {
                objs[..3].copy_from_slice(&[l as u8, r as u8, j as u8]);
                t.entries.push(JoinEntry {
                    mass,
                    rest,
                    jets: 1u64 << j,
                    leps: 1u32 << l,
                    id: t.objs.len() as u32,
                });
                t.objs.push(objs);
                // A fixed-size copy, then cut back: a copy of run-time
                // length is a `memcpy` call, which cost more than the
                // rest of the entry.
                let n = incr.len();
                if n <= FIXED_COPY {
                    let mut block = [0.0; FIXED_COPY];
                    block[..n].copy_from_slice(incr);
                    let start = t.incr.len();
                    t.incr.extend_from_slice(&block);
                    t.incr.truncate(start + n);
                } else {
                    t.incr.extend_from_slice(incr);
                }
            },
        );
    }
}
