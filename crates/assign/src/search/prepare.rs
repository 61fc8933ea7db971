//! Per-event preparation: the objects entering the search, each step's
//! admissible candidates and the `only_closest` limits.

use super::*;

impl Workspace {
    pub(super) fn load_objects(
        &mut self,
        event: &Event,
        leading: usize,
        overlap_dr: f64,
        btag: &BtagPolicy,
    ) {
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

    pub(super) fn build_candidates(&mut self, plan: &Plan, btag: &BtagPolicy) {
        // Per b-tag row (any, b, light): the jets admitted and their
        // smallest b-tag term, found in one pass over the jets.
        let mut jets_of = [0u64; 3];
        let mut pen_min = [f64::INFINITY; PEN_ROWS];
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
            self.pen_row[d] = PenRow::new(row);
        }
        // Admissible lower bound on the b-tag terms still to come.
        let nsteps = plan.steps.len();
        self.rest_min[nsteps] = 0.0;
        for d in (0..nsteps).rev() {
            let step = &plan.steps[d];
            let mut min_here = f64::INFINITY;
            if step.skip_if.is_none() && matches!(step.kind, StepKind::Jet(_)) {
                min_here = pen_min[self.pen_row[d]];
            }
            let min_here = if min_here.is_finite() { min_here } else { 0.0 };
            self.rest_min[d] = self.rest_min[d + 1] + min_here;
        }
    }
}

impl Workspace {
    /// For each `only_closest` constraint: the smallest |m − target| over the
    /// lepton combinations its composite allows.
    pub(super) fn prepare_closest(&mut self, hyp: &Hypothesis) {
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
    pub(super) fn closest_rec(
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
