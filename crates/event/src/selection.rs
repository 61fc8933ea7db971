//! Object selection: thresholds and lepton–jet overlap removal.

use crate::{Event, Momentum};

/// Configurable object selection applied before reconstruction.
///
/// Defaults (all configurable):
/// - jets: pt > 25 GeV, |η| < 2.5 — common practice for central jets at a
///   hadron collider;
/// - large-radius jets: pt > 200 GeV, |η| < 2.0 — common practice;
/// - electrons and muons: pt > 25 GeV, |η| < 2.5 — common practice
///   (single-lepton trigger plateau);
/// - jets within ΔR < 0.4 of a selected lepton are removed — from memory, a
///   typical overlap-removal cone;
/// - b-tag working point: score > 0.5 counts as b-tagged — a neutral default
///   for scores in [0, 1]; each experiment's calibrated working point
///   replaces it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Selection {
    /// Minimum jet pt \[GeV\].
    pub jet_pt_min: f64,
    /// Maximum jet |η|.
    pub jet_abs_eta_max: f64,
    /// Minimum large-radius jet pt \[GeV\].
    pub fat_jet_pt_min: f64,
    /// Maximum large-radius jet |η|.
    pub fat_jet_abs_eta_max: f64,
    /// Minimum electron pt \[GeV\].
    pub electron_pt_min: f64,
    /// Maximum electron |η|.
    pub electron_abs_eta_max: f64,
    /// Minimum muon pt \[GeV\].
    pub muon_pt_min: f64,
    /// Maximum muon |η|.
    pub muon_abs_eta_max: f64,
    /// Jets closer than this ΔR to a selected lepton are removed; 0 disables.
    pub lepton_jet_overlap_dr: f64,
    /// A jet with b-tag score above this counts as b-tagged.
    pub btag_threshold: f64,
}

impl Default for Selection {
    fn default() -> Self {
        Selection {
            jet_pt_min: 25.0,
            jet_abs_eta_max: 2.5,
            fat_jet_pt_min: 200.0,
            fat_jet_abs_eta_max: 2.0,
            electron_pt_min: 25.0,
            electron_abs_eta_max: 2.5,
            muon_pt_min: 25.0,
            muon_abs_eta_max: 2.5,
            lepton_jet_overlap_dr: 0.4,
            btag_threshold: 0.5,
        }
    }
}

impl Selection {
    /// A selection that keeps every object (for inputs already selected
    /// upstream).
    ///
    /// ```
    /// let s = quarry_event::Selection::keep_all();
    /// assert_eq!(s.jet_pt_min, 0.0);
    /// ```
    pub fn keep_all() -> Selection {
        Selection {
            jet_pt_min: 0.0,
            jet_abs_eta_max: f64::INFINITY,
            fat_jet_pt_min: 0.0,
            fat_jet_abs_eta_max: f64::INFINITY,
            electron_pt_min: 0.0,
            electron_abs_eta_max: f64::INFINITY,
            muon_pt_min: 0.0,
            muon_abs_eta_max: f64::INFINITY,
            lepton_jet_overlap_dr: 0.0,
            btag_threshold: 0.5,
        }
    }

    /// Applies the selection in place: leptons first, then jets (thresholds
    /// and overlap removal against the *selected* leptons), then large-radius
    /// jets. Jets end up sorted by decreasing pt, ties kept in input order;
    /// leptons and large-radius jets likewise.
    ///
    /// ```
    /// use quarry_event::{Event, FourMomentum, Jet, Selection};
    /// let mut e = Event::new(1);
    /// e.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(20.0, 0.0, 0.0, 0.0), 0.0));
    /// e.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(40.0, 0.0, 0.0, 0.0), 0.0));
    /// Selection::default().apply(&mut e);
    /// assert_eq!(e.jets.len(), 1);
    /// ```
    pub fn apply(&self, event: &mut Event) {
        let pass = |p: &quarry_lorentz::FourMomentum, pt_min: f64, eta_max: f64| {
            p.pt() > pt_min && p.eta().abs() < eta_max
        };
        event
            .electrons
            .retain(|l| pass(&l.p4, self.electron_pt_min, self.electron_abs_eta_max));
        event
            .muons
            .retain(|l| pass(&l.p4, self.muon_pt_min, self.muon_abs_eta_max));
        let dr2 = self.lepton_jet_overlap_dr * self.lepton_jet_overlap_dr;
        let leptons: Vec<_> = event.leptons().map(Momentum::p4).collect();
        event.jets.retain(|j| {
            pass(&j.p4, self.jet_pt_min, self.jet_abs_eta_max)
                && (dr2 == 0.0 || leptons.iter().all(|l| j.p4.delta_r2(l) >= dr2))
        });
        event
            .fat_jets
            .retain(|j| pass(&j.p4, self.fat_jet_pt_min, self.fat_jet_abs_eta_max));
        let by_pt = |a: &quarry_lorentz::FourMomentum, b: &quarry_lorentz::FourMomentum| {
            b.pt().total_cmp(&a.pt())
        };
        event.jets.sort_by(|a, b| by_pt(&a.p4, &b.p4));
        event.fat_jets.sort_by(|a, b| by_pt(&a.p4, &b.p4));
        event.electrons.sort_by(|a, b| by_pt(&a.p4, &b.p4));
        event.muons.sort_by(|a, b| by_pt(&a.p4, &b.p4));
    }

    /// Whether a jet counts as b-tagged at this selection's working point.
    ///
    /// ```
    /// use quarry_event::{FourMomentum, Jet, Selection};
    /// assert!(Selection::default().is_btagged(&Jet::new(FourMomentum::ZERO, 0.9)));
    /// ```
    pub fn is_btagged(&self, jet: &crate::Jet) -> bool {
        jet.btag > self.btag_threshold
    }
}
