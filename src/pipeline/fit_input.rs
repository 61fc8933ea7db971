//! The mapping from a search result to the kinematic fit's input, and the
//! re-ranking of the search's K best by their fits: the one owner of
//! "which fit problem does an assignment pose".

use quarry_assign::{
    ConstraintKind, Hypothesis, ObjectRef as AssignRef, RankedAssignment, RoleKind, Width,
};
use quarry_event::{Event, Flavour};
use quarry_fit::{
    Composite as FitComposite, Constraint as FitConstraint, FitInput, FitInputError, FitResult,
    KinematicFitter, Measured, NeutrinoStart,
};
use quarry_resolution::ResolutionModel;

/// Fits every ranked assignment and picks the best fit: the kinematic fit
/// re-ranks the search's K best, since the right assignment often is not the
/// one with the lowest search χ² but fits the constraints better once
/// energies may move within their resolutions. Returns the chosen position
/// and its fit. An assignment that cannot become a fit input ranks last;
/// if none can, the first one's error is returned.
pub(super) fn fit_and_rerank(
    fitter: &mut KinematicFitter,
    h: &Hypothesis,
    event: &Event,
    ranked: &[RankedAssignment],
) -> (usize, Result<FitResult, FitInputError>) {
    let mut best: Option<(usize, FitResult)> = None;
    let mut first_error = None;
    for (i, assignment) in ranked.iter().enumerate() {
        match fit_best(fitter, h, event, assignment) {
            Ok(result) => {
                let better = best.as_ref().is_none_or(|(_, b)| {
                    quarry_fit::compare_fits(&result, b) == std::cmp::Ordering::Less
                });
                if better {
                    best = Some((i, result));
                }
            }
            Err(e) => {
                first_error.get_or_insert(e);
            }
        }
    }
    match (best, first_error) {
        (Some((i, result)), _) => (i, Ok(result)),
        (None, Some(e)) => (0, Err(e)),
        // `ranked` is non-empty, so one of the two is set.
        (None, None) => (0, Err(FitInputError::Underconstrained)),
    }
}

/// Builds the fit input from a search assignment and fits it.
///
/// Translation: every composite named by a constraint becomes a fit
/// composite of the measured objects under it (large-radius jets are
/// measured as jets); mass constraints keep their targets; equal-mass
/// constraints become the fit's free common mass; widths are the
/// hypothesis's (they only scale the problem in the fit's default hard
/// mode). The search imposes m(ℓν) = m_W through the neutrino solver; the
/// fit gets the same W-mass constraint explicitly on the lepton+neutrino
/// composite when the hypothesis has one and does not constrain it already.
fn fit_best(
    fitter: &mut KinematicFitter,
    h: &Hypothesis,
    event: &Event,
    best: &RankedAssignment,
) -> Result<FitResult, FitInputError> {
    let mut input = FitInput::new();
    build_fit_input(&mut input, fitter.model(), h, event, best)?;
    Ok(fitter.fit(&input))
}

fn build_fit_input(
    input: &mut FitInput,
    model: &ResolutionModel,
    h: &Hypothesis,
    event: &Event,
    best: &RankedAssignment,
) -> Result<(), FitInputError> {
    let n_roles = h.roles().len();
    let mut object_of_role: Vec<Option<usize>> = vec![None; n_roles];
    let mut has_nu = false;
    for (r, obj) in best.objects().iter().enumerate() {
        let measured = match *obj {
            AssignRef::Jet { .. } | AssignRef::LargeJet { .. } => {
                best.p4_of(event, *obj).map(Measured::jet)
            }
            AssignRef::Lepton { flavour, .. } => best.p4_of(event, *obj).map(|p| match flavour {
                Flavour::Electron => Measured::electron(p),
                Flavour::Muon => Measured::muon(p),
            }),
            AssignRef::Neutrino { .. } => {
                has_nu = true;
                None
            }
            AssignRef::Empty => None,
        };
        if let Some(m) = measured {
            object_of_role[r] = Some(input.add_object(m)?);
        }
    }
    if has_nu {
        if let Some(nu) = best.neutrino() {
            // The MET resolution grows with the hadronic activity; the
            // model owns that rule (see `ResolutionModel::met_covariance`).
            let sum_jet_pt: f64 = event.jets.iter().map(|j| j.p4.pt()).sum();
            input.set_neutrino(NeutrinoStart {
                p3: [nu.p4.px(), nu.p4.py(), nu.p4.pz()],
                met: [event.met.px, event.met.py],
                met_cov: model.met_covariance(&event.met, sum_jet_pt),
            })?;
        }
    }
    let nu_role = h.neutrino_role();
    let mut fit_comp: Vec<Option<usize>> = vec![None; h.composites().len()];
    let mut add_comp = |c: usize, input: &mut FitInput| -> Result<usize, FitInputError> {
        if let Some(i) = fit_comp[c] {
            return Ok(i);
        }
        let mut comp = FitComposite::new();
        for r in h.composites()[c].leaves() {
            if Some(r) == nu_role && best.object(r) != AssignRef::Empty {
                comp = comp.with_neutrino();
            } else if let Some(o) = object_of_role.get(r).copied().flatten() {
                comp = comp.with_object(o);
            }
        }
        let i = input.add_composite(comp)?;
        fit_comp[c] = Some(i);
        Ok(i)
    };
    let masses: Vec<f64> = (0..h.composites().len())
        .map(|c| best.composite_mass(c))
        .collect();
    let mut constrained = vec![false; h.composites().len()];
    for c in h.constraints() {
        let sigma = c.sigma(&masses);
        match c.kind {
            ConstraintKind::Mass { composite, target } => {
                let i = add_comp(composite, input)?;
                constrained[composite] = true;
                input.add_constraint(FitConstraint::Mass {
                    composite: i,
                    mass: target,
                    width: sigma,
                })?;
            }
            ConstraintKind::EqualMass { composites: [a, b] } => {
                let ia = add_comp(a, input)?;
                let ib = add_comp(b, input)?;
                let width = match c.width {
                    Width::Absolute(w) => w,
                    Width::Relative(_) => sigma,
                };
                input.add_constraint(FitConstraint::EqualMass {
                    a: ia,
                    b: ib,
                    width,
                })?;
            }
        }
    }
    // The leptonic W: a composite made of exactly the neutrino role and its
    // lepton role.
    if let Some(nr) = nu_role {
        if let RoleKind::Neutrino { lepton } = h.roles()[nr].kind {
            let pair = [nr.min(lepton), nr.max(lepton)];
            if let Some(c) = h.composites().iter().position(|c| c.leaves().eq(pair)) {
                if !constrained[c] {
                    let i = add_comp(c, input)?;
                    input.add_constraint(FitConstraint::w_mass(i))?;
                }
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use quarry_assign::{presets, SearchConfig, Searcher};
    use quarry_event::{Jet, Lepton, Met};
    use quarry_lorentz::FourMomentum;

    fn event() -> Event {
        let mut e = Event::new(1);
        for (i, (pt, eta, phi, b)) in [
            (90.0, 0.1, 0.3, 0.9),
            (70.0, -0.4, 2.5, 0.1),
            (55.0, 0.8, 2.0, 0.05),
            (60.0, -1.0, -1.5, 0.95),
        ]
        .into_iter()
        .enumerate()
        {
            e.jets.push(
                Jet::new(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 5.0), b)
                    .with_index(i as u32),
            );
        }
        e.muons.push(Lepton {
            p4: FourMomentum::from_pt_eta_phi_m(40.0, 0.2, -2.0, 0.1057),
            flavour: Flavour::Muon,
            charge: 1,
            truth: None,
            index: 0,
        });
        e.met = Met::new(30.0, 20.0);
        e
    }

    /// The top-pair preset's best assignment poses: four jets and a muon
    /// measured, the neutrino started from the search's solution, the
    /// hypothesis's three mass constraints on W_had, t_had and t_lep, and
    /// the W mass on the lepton+neutrino composite added (the hypothesis
    /// does not constrain W_lep itself).
    #[test]
    fn top_pair_assignment_becomes_its_fit_problem() {
        let h = presets::get(presets::TTBAR_LJETS).unwrap();
        let e = event();
        let out = Searcher::new(&h, SearchConfig::default())
            .unwrap()
            .search(&e);
        let best = out.best().expect("an assignment");
        let mut input = FitInput::new();
        build_fit_input(&mut input, &ResolutionModel::default(), &h, &e, best).unwrap();
        assert_eq!(input.objects().len(), 5);
        let nu = input.neutrino().expect("neutrino");
        let solved = best.neutrino().unwrap().p4;
        assert_eq!(nu.p3, [solved.px(), solved.py(), solved.pz()]);
        assert_eq!(nu.met, [e.met.px, e.met.py]);
        let masses: Vec<f64> = input
            .constraints()
            .iter()
            .map(|c| match *c {
                FitConstraint::Mass { mass, .. } => mass,
                FitConstraint::EqualMass { .. } => panic!("no equal-mass constraint"),
            })
            .collect();
        // Targets from quarry_pdg (PDG table): W, top, top, then the added W.
        assert_eq!(
            masses,
            [
                quarry_pdg::W_MASS,
                quarry_pdg::TOP_MASS,
                quarry_pdg::TOP_MASS,
                quarry_pdg::W_MASS
            ]
        );
        // The added W constraint sits on a composite of the lepton and the
        // neutrino only.
        let FitConstraint::Mass { composite, .. } = input.constraints()[3] else {
            unreachable!()
        };
        let w_lep = input.composites()[composite];
        assert!(w_lep.contains_neutrino());
        assert_eq!(w_lep.object_mask().count_ones(), 1);
        let lepton_slot = w_lep.object_mask().trailing_zeros() as usize;
        assert_eq!(input.objects()[lepton_slot], Measured::muon(e.muons[0].p4));
        // t_lep holds the same lepton, the neutrino and one jet.
        let FitConstraint::Mass {
            composite: t_lep, ..
        } = input.constraints()[2]
        else {
            unreachable!()
        };
        let t_lep = input.composites()[t_lep];
        assert!(t_lep.contains_neutrino() && t_lep.contains_object(lepton_slot));
        assert_eq!(t_lep.object_mask().count_ones(), 2);
    }

    /// An equal-mass hypothesis becomes the fit's free common mass.
    #[test]
    fn equal_mass_becomes_a_common_mass() {
        let h = presets::get("bwbw-ljets").unwrap();
        let e = event();
        let out = Searcher::new(&h, SearchConfig::default())
            .unwrap()
            .search(&e);
        let best = out.best().expect("an assignment");
        let mut input = FitInput::new();
        build_fit_input(&mut input, &ResolutionModel::default(), &h, &e, best).unwrap();
        assert_eq!(input.n_common(), 1);
        assert!(input
            .constraints()
            .iter()
            .any(|c| matches!(c, FitConstraint::EqualMass { .. })));
    }
}
