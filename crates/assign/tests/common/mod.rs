//! Shared test helpers: a random event maker and an exhaustive enumeration of
//! assignments written independently of the library's search (it reads only
//! the hypothesis description through the public accessors).
#![allow(dead_code)]

use std::collections::HashMap;

use quarry_assign::{
    BtagPolicy, ConstraintKind, Hypothesis, ObjectRef, Part, RankedAssignment, Relation, RoleKind,
    SearchConfig, TagRule, Width,
};
use quarry_event::{Event, FatJet, Flavour, Jet, Lepton, Met};
use quarry_lorentz::FourMomentum;
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64;

/// An object as the test names it (positions in the event's vectors).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Obj {
    Jet(u32),
    Ele(u32),
    Mu(u32),
    Large(u32),
    Nu(u8),
    Empty,
}

pub fn obj_of(o: ObjectRef) -> Obj {
    match o {
        ObjectRef::Jet { pos, .. } => Obj::Jet(pos),
        ObjectRef::Lepton {
            flavour: Flavour::Electron,
            pos,
            ..
        } => Obj::Ele(pos),
        ObjectRef::Lepton {
            flavour: Flavour::Muon,
            pos,
            ..
        } => Obj::Mu(pos),
        ObjectRef::LargeJet { pos, .. } => Obj::Large(pos),
        ObjectRef::Neutrino { root } => Obj::Nu(root),
        ObjectRef::Empty => Obj::Empty,
    }
}

/// Sorts the objects of each interchangeable group so two representations
/// of the same set compare equal.
pub fn normalise(h: &Hypothesis, objs: &[Obj]) -> Vec<Obj> {
    let mut out = objs.to_vec();
    for g in h.interchangeable() {
        let mut v: Vec<Obj> = g.iter().map(|&r| out[r]).collect();
        v.sort();
        for (k, &r) in g.iter().enumerate() {
            out[r] = v[k];
        }
    }
    out
}

pub fn lib_objs(h: &Hypothesis, a: &RankedAssignment) -> Vec<Obj> {
    normalise(
        h,
        &a.objects().iter().map(|&o| obj_of(o)).collect::<Vec<_>>(),
    )
}

#[derive(Clone, Debug)]
pub struct Scored {
    pub chi2: f64,
    pub objs: Vec<Obj>,
}

#[derive(Clone, Copy)]
struct LepInfo {
    obj: Obj,
    p4: FourMomentum,
    flavour: Flavour,
    charge: i8,
}

fn sorted_by_pt(p4s: &[(FourMomentum, u32)]) -> Vec<u32> {
    let mut v: Vec<(f64, u32)> = p4s
        .iter()
        .filter(|(p, _)| p.is_finite())
        .map(|(p, i)| (p.pt(), *i))
        .collect();
    v.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
    v.into_iter().map(|x| x.1).collect()
}

/// b-tag χ² terms as documented for `BtagPolicy::Weighted` (written out
/// again here rather than calling the library).
fn btag_term(policy: &BtagPolicy, tag: TagRule, score: f64) -> f64 {
    match *policy {
        BtagPolicy::Weighted {
            b_efficiency: eb,
            light_mistag: el,
        } => {
            let s = score.clamp(0.0, 1.0);
            let pb = s * eb + (1.0 - s) * (1.0 - eb);
            let pl = s * el + (1.0 - s) * (1.0 - el);
            match tag {
                TagRule::B => -2.0 * (pb / pb.max(pl)).ln(),
                TagRule::Light => -2.0 * (pl / pb.max(pl)).ln(),
                TagRule::Any => 0.0,
            }
        }
        _ => 0.0,
    }
}

fn admitted(policy: &BtagPolicy, tag: TagRule, score: f64) -> bool {
    match (*policy, tag) {
        (BtagPolicy::Threshold(t), TagRule::B) => score > t,
        (BtagPolicy::Threshold(t), TagRule::Light) => score <= t,
        _ => true,
    }
}

/// Every valid assignment with its χ², ascending.
pub fn exhaustive(h: &Hypothesis, e: &Event, cfg: &SearchConfig) -> Vec<Scored> {
    let n_lead = cfg.max_jets_override.unwrap_or(h.leading_jets());
    let jets: Vec<u32> = sorted_by_pt(
        &e.jets
            .iter()
            .enumerate()
            .map(|(i, j)| (j.p4, i as u32))
            .collect::<Vec<_>>(),
    )
    .into_iter()
    .take(n_lead)
    .collect();
    let all_leps: Vec<(FourMomentum, u32)> = e
        .leptons()
        .enumerate()
        .map(|(i, l)| (l.p4, i as u32))
        .collect();
    let ne = e.electrons.len() as u32;
    let leps: Vec<LepInfo> = sorted_by_pt(&all_leps)
        .into_iter()
        .take(quarry_assign::MAX_LEPTONS)
        .map(|i| {
            let (l, obj) = if i < ne {
                (&e.electrons[i as usize], Obj::Ele(i))
            } else {
                (&e.muons[(i - ne) as usize], Obj::Mu(i - ne))
            };
            LepInfo {
                obj,
                p4: l.p4,
                flavour: l.flavour,
                charge: l.charge,
            }
        })
        .collect();
    let larges: Vec<u32> = sorted_by_pt(
        &e.fat_jets
            .iter()
            .enumerate()
            .map(|(i, j)| (j.p4, i as u32))
            .collect::<Vec<_>>(),
    )
    .into_iter()
    .take(quarry_assign::MAX_LARGE_JETS)
    .collect();

    let roles = h.roles();
    let optional_jet = |r: usize| {
        h.composites()
            .iter()
            .any(|c| c.whole.is_some() && c.parts.contains(&Part::Role(r)))
    };
    // Options per role (the neutrino is filled last).
    let mut options: Vec<Vec<Obj>> = Vec::new();
    for (r, role) in roles.iter().enumerate() {
        let mut o = Vec::new();
        match role.kind {
            RoleKind::Jet { tag } => {
                for &j in &jets {
                    if admitted(&cfg.btag, tag, e.jets[j as usize].btag) {
                        o.push(Obj::Jet(j));
                    }
                }
                if optional_jet(r) {
                    o.push(Obj::Empty);
                }
            }
            RoleKind::Lepton { flavour, charge } => {
                for l in &leps {
                    if flavour.is_none_or(|f| f == l.flavour)
                        && charge.is_none_or(|q| q == l.charge)
                    {
                        o.push(l.obj);
                    }
                }
            }
            RoleKind::LargeJet {
                mass_min,
                mass_max,
                fills,
            } => {
                for &f in &larges {
                    let m = e.fat_jets[f as usize].p4.m();
                    if m >= mass_min && m <= mass_max {
                        o.push(Obj::Large(f));
                    }
                }
                if fills.is_some() {
                    o.push(Obj::Empty);
                }
            }
            RoleKind::Neutrino { .. } => o.push(Obj::Empty),
        }
        options.push(o);
    }
    let lep_info = |o: Obj| leps.iter().find(|l| l.obj == o).copied();
    let p4_of = |o: Obj, nu: FourMomentum| match o {
        Obj::Jet(j) => e.jets[j as usize].p4,
        Obj::Ele(_) | Obj::Mu(_) => lep_info(o).map(|l| l.p4).unwrap_or_default(),
        Obj::Large(f) => e.fat_jets[f as usize].p4,
        Obj::Nu(_) => nu,
        Obj::Empty => FourMomentum::ZERO,
    };
    // Closest deviation for only_closest constraints: all lepton tuples for
    // the composite's roles that satisfy the role and pair rules.
    let mut closest: HashMap<usize, f64> = HashMap::new();
    for (k, c) in h.constraints().iter().enumerate() {
        if let (true, ConstraintKind::Mass { composite, target }) = (c.only_closest, c.kind) {
            let rs: Vec<usize> = h.composites()[composite].leaves().collect();
            let mut best = f64::INFINITY;
            let mut pick = vec![Obj::Empty; rs.len()];
            fn rec(
                i: usize,
                rs: &[usize],
                pick: &mut Vec<Obj>,
                options: &[Vec<Obj>],
                f: &mut dyn FnMut(&[Obj]),
            ) {
                if i == rs.len() {
                    f(pick);
                    return;
                }
                for &o in &options[rs[i]] {
                    if pick[..i].contains(&o) {
                        continue;
                    }
                    pick[i] = o;
                    rec(i + 1, rs, pick, options, f);
                }
            }
            rec(0, &rs, &mut pick, &options, &mut |p: &[Obj]| {
                for pr in h.lepton_pairs() {
                    let (Some(a), Some(b)) = (
                        rs.iter().position(|&r| r == pr.roles[0]),
                        rs.iter().position(|&r| r == pr.roles[1]),
                    ) else {
                        continue;
                    };
                    if !pair_ok(
                        pr.flavour,
                        pr.charge,
                        lep_info(p[a]).unwrap(),
                        lep_info(p[b]).unwrap(),
                    ) {
                        return;
                    }
                }
                let m: FourMomentum = p.iter().map(|&o| p4_of(o, FourMomentum::ZERO)).sum();
                best = best.min((m.m() - target).abs());
            });
            closest.insert(k, best);
        }
    }

    let mut out = Vec::new();
    let mut pick = vec![Obj::Empty; roles.len()];
    let nu_role = roles
        .iter()
        .position(|r| matches!(r.kind, RoleKind::Neutrino { .. }));
    let mut visit = |pick: &[Obj]| {
        // Whole-or-parts consistency.
        for c in h.composites() {
            if let Some(w) = c.whole {
                let whole_used = pick[w] != Obj::Empty;
                for p in &c.parts {
                    if let Part::Role(r) = p {
                        if (pick[*r] == Obj::Empty) != whole_used {
                            return;
                        }
                    }
                }
            }
        }
        // Large jets swallow nearby small jets.
        let dr = h.large_jet_overlap_dr();
        for &a in pick {
            if let Obj::Large(f) = a {
                for &b in pick {
                    if let Obj::Jet(j) = b {
                        if e.jets[j as usize].p4.delta_r(&e.fat_jets[f as usize].p4) < dr {
                            return;
                        }
                    }
                }
            }
        }
        for pr in h.lepton_pairs() {
            let (a, b) = (lep_info(pick[pr.roles[0]]), lep_info(pick[pr.roles[1]]));
            if !pair_ok(pr.flavour, pr.charge, a.unwrap(), b.unwrap()) {
                return;
            }
        }
        let roots: Vec<(Obj, FourMomentum)> = match nu_role {
            None => vec![(Obj::Empty, FourMomentum::ZERO)],
            Some(nr) => {
                let RoleKind::Neutrino { lepton } = roles[nr].kind else {
                    unreachable!()
                };
                let l = lep_info(pick[lepton]).unwrap();
                match cfg.neutrino.solve(&l.p4, e.met.px, e.met.py) {
                    Err(_) => vec![],
                    Ok(s) => s
                        .as_slice()
                        .iter()
                        .enumerate()
                        .map(|(i, n)| (Obj::Nu(i as u8), n.p4))
                        .collect(),
                }
            }
        };
        for (nu_obj, nu_p4) in roots {
            let mut objs = pick.to_vec();
            if let Some(nr) = nu_role {
                objs[nr] = nu_obj;
            }
            // Composite masses, recursively from the parts.
            fn comp_p4(
                h: &Hypothesis,
                c: usize,
                p4: &dyn Fn(usize) -> FourMomentum,
            ) -> FourMomentum {
                let comp = &h.composites()[c];
                let mut s = comp.whole.map(p4).unwrap_or_default();
                for part in &comp.parts {
                    s += match *part {
                        Part::Role(r) => p4(r),
                        Part::Composite(j) => comp_p4(h, j, p4),
                    };
                }
                s
            }
            let role_p4 = |r: usize| p4_of(objs[r], nu_p4);
            let masses: Vec<f64> = (0..h.composites().len())
                .map(|c| comp_p4(h, c, &role_p4).m())
                .collect();
            let mut chi2 = 0.0;
            let mut ok = true;
            for (k, c) in h.constraints().iter().enumerate() {
                let (diff, sigma) = match (c.kind, c.width) {
                    (ConstraintKind::Mass { composite, target }, Width::Absolute(w)) => {
                        if c.only_closest {
                            let dev = (masses[composite] - target).abs();
                            if dev > closest[&k] + 1e-9 * closest[&k].max(1.0) {
                                ok = false;
                            }
                        }
                        (masses[composite] - target, w)
                    }
                    (ConstraintKind::EqualMass { composites: [a, b] }, Width::Absolute(w)) => {
                        (masses[a] - masses[b], w)
                    }
                    (ConstraintKind::EqualMass { composites: [a, b] }, Width::Relative(rw)) => (
                        masses[a] - masses[b],
                        (rw * 0.5 * (masses[a].abs() + masses[b].abs())).max(1e-6),
                    ),
                    _ => panic!("unexpected constraint form"),
                };
                chi2 += (diff / sigma).powi(2);
            }
            for (r, role) in roles.iter().enumerate() {
                if let (RoleKind::Jet { tag }, Obj::Jet(j)) = (role.kind, objs[r]) {
                    chi2 += btag_term(&cfg.btag, tag, e.jets[j as usize].btag);
                }
            }
            if ok && chi2.is_finite() {
                out.push(Scored { chi2, objs });
            }
        }
    };
    fn rec(
        r: usize,
        h: &Hypothesis,
        options: &[Vec<Obj>],
        pick: &mut Vec<Obj>,
        visit: &mut dyn FnMut(&[Obj]),
    ) {
        if r == options.len() {
            visit(pick);
            return;
        }
        for &o in &options[r] {
            if o != Obj::Empty && pick[..r].contains(&o) {
                continue;
            }
            // One representative per interchangeable set: objects ascending
            // within the group (in declaration order).
            if let Some(g) = h.roles()[r].group {
                if let Some(&prev) = h.interchangeable()[g].iter().rev().find(|&&x| x < r) {
                    if !(pick[prev] < o || (pick[prev] == Obj::Empty && o == Obj::Empty)) {
                        continue;
                    }
                }
            }
            pick[r] = o;
            rec(r + 1, h, options, pick, visit);
        }
        pick[r] = Obj::Empty;
    }
    rec(0, h, &options, &mut pick, &mut visit);
    out.sort_by(|a, b| a.chi2.total_cmp(&b.chi2));
    out
}

fn pair_ok(flavour: Relation, charge: Relation, a: LepInfo, b: LepInfo) -> bool {
    let f = match flavour {
        Relation::Same => a.flavour == b.flavour,
        Relation::Different => a.flavour != b.flavour,
        Relation::Any => true,
    };
    let q = match charge {
        Relation::Same => a.charge == b.charge,
        Relation::Different => a.charge != 0 && a.charge == -b.charge,
        Relation::Any => true,
    };
    f && q
}

/// A random but plausible event: jets 20–400 GeV, |η| < 2.5, b-tag scores
/// either continuous or 0/1, a few leptons of random flavour and charge,
/// large jets 30–220 GeV mass, and MET. Sometimes duplicates a jet exactly
/// to exercise ties.
pub fn random_event(seed: u64, max_jets: usize, max_leptons: usize, max_large: usize) -> Event {
    random_event_with(seed, 0, max_jets, max_leptons, max_large)
}

/// As [`random_event`] with at least `min_jets` jets.
pub fn random_event_with(
    seed: u64,
    min_jets: usize,
    max_jets: usize,
    max_leptons: usize,
    max_large: usize,
) -> Event {
    let mut rng = Pcg64::seed_from_u64(seed);
    let mut e = Event::new(seed);
    let nj = rng.random_range(min_jets.min(max_jets)..=max_jets);
    let binary = rng.random_bool(0.3);
    for i in 0..nj {
        let p4 = FourMomentum::from_pt_eta_phi_m(
            rng.random_range(20.0..400.0),
            rng.random_range(-2.5..2.5),
            rng.random_range(-std::f64::consts::PI..std::f64::consts::PI),
            rng.random_range(0.0..25.0),
        );
        let btag = if binary {
            f64::from(u8::from(rng.random_bool(0.35)))
        } else {
            rng.random_range(0.0..1.0)
        };
        e.jets.push(Jet::new(p4, btag).with_index(100 + i as u32));
    }
    if nj >= 2 && rng.random_bool(0.15) {
        let j = e.jets[0];
        e.jets.push(j.with_index(999));
    }
    let nl = rng.random_range(0..=max_leptons);
    for i in 0..nl {
        let flavour = if rng.random_bool(0.5) {
            Flavour::Electron
        } else {
            Flavour::Muon
        };
        let mass = match flavour {
            Flavour::Electron => quarry_pdg::ELECTRON_MASS,
            Flavour::Muon => quarry_pdg::MUON_MASS,
        };
        let l = Lepton {
            p4: FourMomentum::from_pt_eta_phi_m(
                rng.random_range(25.0..250.0),
                rng.random_range(-2.5..2.5),
                rng.random_range(-std::f64::consts::PI..std::f64::consts::PI),
                mass,
            ),
            flavour,
            charge: if rng.random_bool(0.5) { 1 } else { -1 },
            truth: None,
            index: i as u32,
        };
        match flavour {
            Flavour::Electron => e.electrons.push(l),
            Flavour::Muon => e.muons.push(l),
        }
    }
    let nf = rng.random_range(0..=max_large);
    for i in 0..nf {
        e.fat_jets.push(FatJet {
            p4: FourMomentum::from_pt_eta_phi_m(
                rng.random_range(200.0..800.0),
                rng.random_range(-2.0..2.0),
                rng.random_range(-std::f64::consts::PI..std::f64::consts::PI),
                rng.random_range(30.0..220.0),
            ),
            truth: None,
            index: i as u32,
        });
    }
    e.met = Met::new(
        rng.random_range(-200.0..200.0),
        rng.random_range(-200.0..200.0),
    );
    e
}
