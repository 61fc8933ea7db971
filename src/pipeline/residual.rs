//! The mapping from a search result to the objects the unclaimed ST
//! subtracts: the one owner of "which objects of an assignment are terms of
//! ST".

use quarry_assign::{ObjectRef as AssignRef, RankedAssignment};
use quarry_event::{Event, Flavour};
use quarry_vars::ObjectRef as VarsRef;

/// The ST terms an assignment uses: its jets, its leptons (each by its
/// own flavour's list) and, for a neutrino, the MET it was solved from.
/// Large-radius jets are not terms of ST and unfilled roles use nothing.
pub(super) fn st_terms(assignment: &RankedAssignment) -> Vec<VarsRef> {
    assignment
        .objects()
        .iter()
        .filter_map(|o| match *o {
            AssignRef::Jet { pos, .. } => Some(VarsRef::Jet(pos as usize)),
            AssignRef::Lepton {
                flavour: Flavour::Electron,
                pos,
                ..
            } => Some(VarsRef::Electron(pos as usize)),
            AssignRef::Lepton {
                flavour: Flavour::Muon,
                pos,
                ..
            } => Some(VarsRef::Muon(pos as usize)),
            AssignRef::Neutrino { .. } => Some(VarsRef::Met),
            AssignRef::LargeJet { .. } | AssignRef::Empty => None,
        })
        .collect()
}

/// ST minus the objects of the reference assignment (see
/// [`quarry_vars::st_unclaimed`]); `None` if it cannot be computed.
pub(super) fn st_unclaimed(event: &Event, reference: &RankedAssignment) -> Option<f64> {
    quarry_vars::st_unclaimed(event, &st_terms(reference)).ok()
}

#[cfg(test)]
mod tests {
    use super::*;
    use quarry_assign::{presets, SearchConfig, Searcher};
    use quarry_event::{Jet, Lepton, Met};
    use quarry_lorentz::FourMomentum;

    fn lepton(flavour: Flavour, pt: f64, phi: f64) -> Lepton {
        Lepton {
            p4: FourMomentum::from_pt_eta_phi_m(pt, 0.3, phi, 0.0),
            flavour,
            charge: -1,
            truth: None,
            index: 0,
        }
    }

    /// A lepton+jets event with one electron (which the ttbar preset must
    /// use: it has one lepton role) and five jets, one of them extra.
    fn event() -> Event {
        let mut e = Event::new(1);
        for (i, (pt, eta, phi, b)) in [
            (90.0, 0.1, 0.3, 0.9),
            (70.0, -0.4, 2.5, 0.1),
            (55.0, 0.8, 2.0, 0.05),
            (60.0, -1.0, -1.5, 0.95),
            (33.0, 1.9, -0.7, 0.02),
        ]
        .into_iter()
        .enumerate()
        {
            e.jets.push(
                Jet::new(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 5.0), b)
                    .with_index(i as u32),
            );
        }
        e.electrons.push(lepton(Flavour::Electron, 40.0, -2.0));
        e.met = Met::new(30.0, 20.0);
        e
    }

    #[test]
    fn terms_are_the_assignments_st_objects() {
        let e = event();
        let h = presets::get(presets::TTBAR_LJETS).unwrap();
        let out = Searcher::new(&h, SearchConfig::default())
            .unwrap()
            .search(&e);
        let best = out.best().expect("an assignment");
        let mut terms = st_terms(best);
        terms.sort_unstable();
        // Four jets, the electron and the MET behind the neutrino.
        assert_eq!(terms.len(), 6, "{terms:?}");
        assert_eq!(
            terms
                .iter()
                .filter(|t| matches!(t, VarsRef::Jet(_)))
                .count(),
            4
        );
        assert!(terms.contains(&VarsRef::Electron(0)));
        assert!(terms.contains(&VarsRef::Met));
        // By hand: ST minus those pT = the one unused jet's pT.
        let unused: f64 = (0..e.jets.len())
            .filter(|&j| !terms.contains(&VarsRef::Jet(j)))
            .map(|j| e.jets[j].p4.pt())
            .sum();
        let value = st_unclaimed(&e, best).unwrap();
        assert!((value - unused).abs() < 1e-9, "{value} vs {unused}");
    }

    /// A muon is named as a muon even when electrons come before it in
    /// `Event::leptons()`: the mapping does not rely on that order.
    #[test]
    fn a_muon_is_named_by_its_own_list() {
        let mut e = event();
        let electron = e.electrons.pop().unwrap();
        e.muons.push(lepton(Flavour::Muon, 40.0, -2.0));
        let h = presets::get(presets::TTBAR_LJETS).unwrap();
        let out = Searcher::new(&h, SearchConfig::default())
            .unwrap()
            .search(&e);
        let best = out.best().expect("an assignment");
        assert!(st_terms(best).contains(&VarsRef::Muon(0)));
        // An electron that no role takes (the preset has one lepton role;
        // a soft one loses) is still a term of ST, and stays unclaimed.
        let with_extra = {
            let mut e2 = e.clone();
            e2.electrons.push(Lepton {
                p4: FourMomentum::from_pt_eta_phi_m(26.0, -1.2, 1.0, 0.0),
                ..electron
            });
            e2
        };
        let claimed_muon_only = st_unclaimed(&with_extra, best).unwrap();
        let without = st_unclaimed(&e, best).unwrap();
        assert!((claimed_muon_only - without - 26.0).abs() < 1e-9);
    }
}
