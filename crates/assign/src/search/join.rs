//! Joins: the small side of an equal-mass constraint listed once per event
//! and walked outwards from the other side's mass (see [`Join`]).

use super::*;

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
pub(super) struct Join {
    pub(super) depth: usize,
    /// The equal-mass constraint.
    pub(super) eq: ConOp,
    pub(super) closed: CompSlot,
    pub(super) open: CompSlot,
    /// The steps after `depth` (all of them), in fill order, and their
    /// roles.
    pub(super) open_steps: Vec<usize>,
    pub(super) open_roles: Vec<RoleSlot>,
    /// Additions to the running χ² per filling, in the search's order: per
    /// open step its b-tag term, then its constraints' terms.
    pub(super) n_incr: usize,
    /// Which addition is the equal-mass term (known only with the closed
    /// mass).
    pub(super) eq_slot: usize,
    /// The open side's dedicated list builder, if it has that shape.
    pub(super) lepton_side: Option<pair_join::LeptonSide>,
}

/// Largest estimated number of fillings (see `Plan::new`) of a side that
/// the plan fills last to join it (see [`Join`]): its list is built for
/// every event, which pays off only while it is short.
pub(super) const MAX_JOIN_COST: f64 = 64.0;

/// What a walk over a join's list needs from the search.
pub(super) struct JoinWalk {
    /// Running χ² at the join's step.
    pub(super) v: f64,
    pub(super) m_closed: f64,
    pub(super) used_jets: u64,
    pub(super) used_leps: u32,
    pub(super) n_roles: usize,
}

/// Most fillings in a join's list; past this the search descends as usual
/// for that event (exact either way).
pub(super) const MAX_JOIN_ENTRIES: usize = 4096;

/// Room reserved for a join's list when a [`Searcher`] is made: a list never
/// shrinks, so after the first events a search allocates nothing for it.
pub(super) const JOIN_ENTRIES_RESERVED: usize = 256;

/// One filling of a join's open roles.
#[derive(Clone, Copy, Debug)]
pub(super) struct JoinEntry {
    /// The open composite's mass.
    pub(super) mass: f64,
    /// The sum of its additions, leaving out the equal-mass term.
    pub(super) rest: f64,
    pub(super) jets: u64,
    pub(super) leps: u32,
    /// Which filling: its objects are `JoinList::objs[id]`, its additions
    /// start at `JoinList::incr[id × Join::n_incr]`.
    pub(super) id: u32,
}

/// A join's list for the current event and key.
#[derive(Clone, Debug, Default)]
pub(super) struct JoinList {
    pub(super) entries: Vec<JoinEntry>,
    /// Objects of the open steps per filling, in step order.
    pub(super) objs: Vec<[u8; MAX_ROLES]>,
    pub(super) incr: Vec<f64>,
    /// Number of the search the list was built for.
    pub(super) stamp: u64,
    /// Too many fillings: no join for this key.
    pub(super) overflow: bool,
}

impl Plan {
    /// The joins of the equal-mass constraints (see [`Join`]): for those
    /// whose sides are disjoint and whose open side fills every step after
    /// the closed one, with no large jet, no lepton-pair rule, and no
    /// constraint there other than the equal-mass one and mass constraints
    /// inside the open side.
    pub(super) fn joins(
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
                if open_mask & (1 << st.role.get()) == 0
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
                    if op.k.get() == k {
                        eq_slot = n_incr;
                    } else {
                        let inside = |c: usize| comps[c].leaf_mask & !open_mask == 0;
                        if op.only_closest || !inside(op.a.get()) || !inside(op.b.get()) {
                            continue 'constraints;
                        }
                    }
                    n_incr += 1;
                }
            }
            if eq_slot == usize::MAX {
                continue;
            }
            let (closed, open) = (CompSlot::new(closed), CompSlot::new(open));
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

/// Sorts a join's list by mass. Lists are short (a dozen fillings for a bW
/// pair's leptonic side), where a plain insertion sort on the mass alone
/// beats the general sort; long ones use the general sort. Masses are never
/// NaN (those fillings are left out), so `<` is a total order up to the sign
/// of zero, which the walk does not distinguish.
pub(super) fn sort_by_mass<T: Copy>(entries: &mut [T], mass: impl Fn(&T) -> f64) {
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

impl Workspace {
    /// Completes the assignment below join `i`'s step from its list (see
    /// [`Join`]), given the running χ² `v` and the objects used;
    /// `false` if the list cannot be used here (the caller descends).
    pub(super) fn join(
        &mut self,
        hyp: &Hypothesis,
        plan: &Plan,
        t: &JoinList,
        i: usize,
        v: f64,
        occ: Occupancy,
    ) -> bool {
        let la = &plan.joins[i];
        let m_closed = self.comp_m[la.closed];
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
    pub(super) fn join_visit(
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
                    self.choice[r] = objs[s];
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
    pub(super) fn prepare_joins(
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
    pub(super) fn build_join(&mut self, hyp: &Hypothesis, plan: &Plan, i: usize) {
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
    pub(super) fn fill_join(
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
            let mass = self.comp_m[la.open];
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
        let role = step.role;
        let (base, kind) = self.pool(step);
        let row = self.pen_row[d];
        while mask != 0 {
            let o = mask.trailing_zeros() as usize;
            mask &= mask - 1;
            self.choice[role] = o as u8;
            objs[s] = o as u8;
            self.close_comps(ops, role, self.obj_p4[base.offset(o)]);
            let mut n = n_incr;
            incr[n] = self.pen[row][JetSlot::new(o)];
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
}
