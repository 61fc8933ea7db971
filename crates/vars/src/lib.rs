//! Event variables: the per-event sums, counts and masses an analysis cuts
//! on after reconstruction (HT, ST, the *unclaimed ST*, m(ℓℓ), object
//! counts).
//!
//! **Design decision:** every function here reads an [`Event`] that has
//! *already* passed [`Selection::apply`]: no thresholds are re-applied, so
//! the numbers always describe exactly the objects the reconstruction saw.
//! The one variable that depends on the reconstruction (the unclaimed ST)
//! takes the used objects as plain [`ObjectRef`]s rather than an assignment
//! type, so this crate never depends on the search crate's internals.
//!
//! # Definitions
//! All momenta in GeV; "selected" means "present in the event after
//! [`Selection::apply`]".
//!
//! | variable | definition |
//! |---|---|
//! | `ht` | Σ pT of selected small-radius jets (common practice) |
//! | `st` | `ht` + Σ pT of selected electrons and muons + MET (common practice) |
//! | `st_unclaimed` | `st` − Σ pT of the distinct objects used by the top-pair reconstruction: the hadronic top's three jets, the leptonic top's b-jet, the lepton and the MET. Small (only extra radiation) for top-pair events, large for signal with extra heavy objects |
//! | `lead_jet_pt` | pT of the highest-pT selected jet (`None` without jets) |
//! | `mll_z` | m(ℓℓ) of the same-flavour opposite-sign pair whose mass is closest to [`quarry_pdg::Z_MASS`] (`None` with < 2 leptons or no such pair) |
//! | `same_sign` | at least one pair of leptons (any flavours) with equal, known charge |
//! | `n_fatjets_w` | number of large-radius jets whose mass lies in the W window (default 60–100 GeV: a typical window, from memory) |
//! | `n_jets`, `n_bjets`, `n_leptons`, `n_fatjets` | counts; b-tagged means [`Selection::is_btagged`] |
//!
//! ```
//! use quarry_event::{Event, FourMomentum, Jet, Met, Selection};
//! use quarry_vars::{EventVars, VarsConfig};
//! let mut e = Event::new(1);
//! e.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(100.0, 0.0, 0.0, 10.0), 0.9));
//! e.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(50.0, 1.0, 2.0, 5.0), 0.1));
//! e.met = Met::new(30.0, 40.0);
//! let v = EventVars::compute(&e, &Selection::default(), &VarsConfig::default()).unwrap();
//! assert!((v.ht - 150.0).abs() < 1e-9);
//! assert!((v.st - 200.0).abs() < 1e-9); // 150 + MET 50
//! assert_eq!(v.n_bjets, 1);
//! ```
#![deny(missing_docs)]

use std::fmt;

use quarry_event::{Event, Lepton, Momentum, Selection};
use quarry_pdg::Z_MASS;

/// Why an event variable could not be computed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum VarsError {
    /// An [`ObjectRef`] points past the end of the event's objects.
    NoSuchObject(ObjectRef),
    /// An input momentum (or the result) is NaN or infinite.
    NonFinite,
    /// The W mass window is empty or not finite.
    BadWindow,
}

impl fmt::Display for VarsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            VarsError::NoSuchObject(r) => write!(f, "object {r} is not in the event"),
            VarsError::NonFinite => f.write_str("an input momentum is not finite"),
            VarsError::BadWindow => f.write_str("the W mass window must be finite with low < high"),
        }
    }
}

impl std::error::Error for VarsError {}

/// One object of an event that contributes to ST, by its position in the
/// (selected) event.
///
/// Positions are 0-based into `event.jets`, `event.electrons` and
/// `event.muons` — *not* the input-file `index` fields. Each lepton names
/// its own flavour's list, so a caller never depends on the order of
/// [`Event::leptons`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum ObjectRef {
    /// `event.jets[i]`.
    Jet(usize),
    /// `event.electrons[i]`.
    Electron(usize),
    /// `event.muons[i]`.
    Muon(usize),
    /// The missing transverse momentum.
    Met,
}

impl fmt::Display for ObjectRef {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ObjectRef::Jet(i) => write!(f, "jet {i}"),
            ObjectRef::Electron(i) => write!(f, "electron {i}"),
            ObjectRef::Muon(i) => write!(f, "muon {i}"),
            ObjectRef::Met => f.write_str("MET"),
        }
    }
}

/// Tunable parameters of the variables that are not object thresholds.
///
/// Invariant (checked by [`EventVars::compute`]): `w_window_low <
/// w_window_high`, both finite.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct VarsConfig {
    /// Lower edge of the large-radius-jet W mass window \[GeV\] (default 60).
    pub w_window_low: f64,
    /// Upper edge of the window \[GeV\] (default 100).
    pub w_window_high: f64,
}

impl Default for VarsConfig {
    /// 60–100 GeV: a typical W-tagging mass window around m_W ≈ 80 GeV,
    /// from memory; analyses tune it to their jet mass resolution.
    fn default() -> Self {
        VarsConfig {
            w_window_low: 60.0,
            w_window_high: 100.0,
        }
    }
}

/// HT: scalar sum of the selected jets' pT \[GeV\].
///
/// ```
/// use quarry_event::{Event, FourMomentum, Jet};
/// let mut e = Event::new(1);
/// e.jets.push(Jet::new(FourMomentum::new(30.0, 40.0, 0.0, 60.0), 0.0)); // pT 50
/// assert_eq!(quarry_vars::ht(&e), 50.0);
/// ```
pub fn ht(event: &Event) -> f64 {
    event.jets.iter().map(|j| j.p4.pt()).sum()
}

/// ST: HT + Σ selected lepton pT + MET \[GeV\].
///
/// ```
/// use quarry_event::{Event, Met};
/// let mut e = Event::new(1);
/// e.met = Met::new(6.0, 8.0);
/// assert_eq!(quarry_vars::st(&e), 10.0);
/// ```
pub fn st(event: &Event) -> f64 {
    ht(event) + event.leptons().map(|l| l.p4.pt()).sum::<f64>() + event.met.pt()
}

/// pT of one referenced object, or an error if it is not in the event.
fn object_pt(event: &Event, r: ObjectRef) -> Result<f64, VarsError> {
    match r {
        ObjectRef::Jet(i) => event.jets.get(i).map(|j| j.p4.pt()),
        ObjectRef::Electron(i) => event.electrons.get(i).map(|l| l.p4.pt()),
        ObjectRef::Muon(i) => event.muons.get(i).map(|l| l.p4.pt()),
        ObjectRef::Met => Some(event.met.pt()),
    }
    .ok_or(VarsError::NoSuchObject(r))
}

/// The *unclaimed ST*: ST minus the pT of every distinct object in `used`
/// (the objects the best top-pair reconstruction assigned) \[GeV\].
///
/// An object listed twice is subtracted once. With an empty `used` it equals
/// [`st`]. The result is ≥ 0 up to rounding, since every referenced object
/// is itself a term of ST.
///
/// ```
/// use quarry_event::{Event, FourMomentum, Jet, Met};
/// use quarry_vars::{st_unclaimed, ObjectRef};
/// let mut e = Event::new(1);
/// e.jets.push(Jet::new(FourMomentum::new(30.0, 40.0, 0.0, 60.0), 0.0)); // pT 50
/// e.jets.push(Jet::new(FourMomentum::new(0.0, 20.0, 5.0, 30.0), 0.0)); // pT 20
/// e.met = Met::new(6.0, 8.0); // 10
/// // ST = 50 + 20 + 10 = 80; jet 0 and MET used: 80 − 50 − 10 = 20
/// let r = st_unclaimed(&e, &[ObjectRef::Jet(0), ObjectRef::Met, ObjectRef::Jet(0)]).unwrap();
/// assert!((r - 20.0).abs() < 1e-12);
/// assert!(st_unclaimed(&e, &[ObjectRef::Jet(5)]).is_err());
/// ```
pub fn st_unclaimed(event: &Event, used: &[ObjectRef]) -> Result<f64, VarsError> {
    let mut distinct: Vec<ObjectRef> = used.to_vec();
    distinct.sort_unstable();
    distinct.dedup();
    let mut claimed = 0.0;
    for r in distinct {
        claimed += object_pt(event, r)?;
    }
    let value = st(event) - claimed;
    if value.is_finite() {
        // Cancellation can leave −1e-13 when everything is claimed.
        Ok(value.max(0.0))
    } else {
        Err(VarsError::NonFinite)
    }
}

/// m(ℓℓ) \[GeV\] of the same-flavour, opposite-sign lepton pair closest to
/// the Z mass; `None` if there is no such pair. Leptons of unknown charge
/// (0) never form an opposite-sign pair.
///
/// ```
/// use quarry_event::{Event, Flavour, FourMomentum, Lepton};
/// let lep = |px: f64, q: i8| Lepton { p4: FourMomentum::new(px, 0.0, 0.0, px.abs()),
///     flavour: Flavour::Muon, charge: q, truth: None, index: 0 };
/// let mut e = Event::new(1);
/// e.muons = vec![lep(45.0, 1), lep(-45.0, -1)];
/// // back-to-back massless pair: m = 2·45 = 90
/// assert!((quarry_vars::m_ll_closest_to_z(&e).unwrap() - 90.0).abs() < 1e-9);
/// ```
pub fn m_ll_closest_to_z(event: &Event) -> Option<f64> {
    let leptons: Vec<&Lepton> = event.leptons().collect();
    let mut best: Option<f64> = None;
    for (i, a) in leptons.iter().enumerate() {
        for b in &leptons[i + 1..] {
            if a.flavour != b.flavour || !matches!((a.charge, b.charge), (1, -1) | (-1, 1)) {
                continue;
            }
            let m = (a.p4 + b.p4).m();
            if !m.is_finite() {
                continue;
            }
            if best.is_none_or(|old| (m - Z_MASS).abs() < (old - Z_MASS).abs()) {
                best = Some(m);
            }
        }
    }
    best
}

/// Whether two leptons (any flavours) carry the same known charge.
///
/// ```
/// use quarry_event::{Event, Flavour, FourMomentum, Lepton};
/// let lep = |f, q: i8| Lepton { p4: FourMomentum::ZERO, flavour: f, charge: q, truth: None, index: 0 };
/// let mut e = Event::new(1);
/// e.electrons = vec![lep(Flavour::Electron, 1)];
/// e.muons = vec![lep(Flavour::Muon, 1)];
/// assert!(quarry_vars::has_same_sign_pair(&e));
/// ```
pub fn has_same_sign_pair(event: &Event) -> bool {
    let plus = event.leptons().filter(|l| l.charge > 0).count();
    let minus = event.leptons().filter(|l| l.charge < 0).count();
    plus >= 2 || minus >= 2
}

/// Every variable of one event, computed together.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EventVars {
    /// Selected small-radius jets.
    pub n_jets: usize,
    /// Selected jets that are b-tagged at the selection's working point.
    pub n_bjets: usize,
    /// Selected electrons + muons.
    pub n_leptons: usize,
    /// Selected large-radius jets.
    pub n_fatjets: usize,
    /// Large-radius jets with mass inside the W window.
    pub n_fatjets_w: usize,
    /// HT \[GeV\] (see [`ht`]).
    pub ht: f64,
    /// ST \[GeV\] (see [`st`]).
    pub st: f64,
    /// Leading jet pT \[GeV\], `None` without jets.
    pub lead_jet_pt: Option<f64>,
    /// See [`m_ll_closest_to_z`].
    pub mll_z: Option<f64>,
    /// See [`has_same_sign_pair`].
    pub same_sign: bool,
}

impl EventVars {
    /// Computes every variable of an already-selected event. `selection`
    /// provides only the b-tag working point (thresholds were applied
    /// before).
    ///
    /// Errors: [`VarsError::NonFinite`] if a jet, lepton or MET momentum is
    /// not finite, or finite momenta overflow a result (HT, ST, leading-jet
    /// pT, m(ℓℓ)); [`VarsError::BadWindow`] for an invalid `config`.
    ///
    /// ```
    /// use quarry_event::{Event, Selection};
    /// use quarry_vars::{EventVars, VarsConfig};
    /// let v = EventVars::compute(&Event::new(1), &Selection::default(), &VarsConfig::default()).unwrap();
    /// assert_eq!((v.n_jets, v.ht, v.lead_jet_pt), (0, 0.0, None));
    /// ```
    pub fn compute(
        event: &Event,
        selection: &Selection,
        config: &VarsConfig,
    ) -> Result<EventVars, VarsError> {
        let (lo, hi) = (config.w_window_low, config.w_window_high);
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(VarsError::BadWindow);
        }
        let finite = event.jets.iter().all(|j| j.p4.is_finite())
            && event.leptons().all(|l| l.p4.is_finite())
            && event.fat_jets.iter().all(|j| j.p4.is_finite())
            && event.met.p4().is_finite();
        if !finite {
            return Err(VarsError::NonFinite);
        }
        let vars = EventVars {
            n_jets: event.jets.len(),
            n_bjets: event
                .jets
                .iter()
                .filter(|j| selection.is_btagged(j))
                .count(),
            n_leptons: event.n_leptons(),
            n_fatjets: event.fat_jets.len(),
            n_fatjets_w: event
                .fat_jets
                .iter()
                .filter(|j| {
                    let m = j.p4.m();
                    lo <= m && m <= hi
                })
                .count(),
            ht: ht(event),
            st: st(event),
            lead_jet_pt: event.jets.iter().map(|j| j.p4.pt()).reduce(f64::max),
            mll_z: m_ll_closest_to_z(event),
            same_sign: has_same_sign_pair(event),
        };
        // Finite inputs can still overflow: px = py = 1e308 has pT = +inf,
        // and a mass of two such leptons is NaN.
        let finite_result = vars.ht.is_finite()
            && vars.st.is_finite()
            && vars.lead_jet_pt.is_none_or(f64::is_finite)
            && vars.mll_z.is_none_or(f64::is_finite);
        if !finite_result {
            return Err(VarsError::NonFinite);
        }
        Ok(vars)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use quarry_event::{FatJet, Flavour, FourMomentum, Jet, Met};

    fn jet(px: f64, py: f64, btag: f64) -> Jet {
        // pz = 0 and E chosen ≥ |p| so the mass is real; pT = hypot(px, py).
        Jet::new(FourMomentum::new(px, py, 0.0, px.hypot(py) + 5.0), btag)
    }

    fn lepton(flavour: Flavour, px: f64, py: f64, pz: f64, charge: i8) -> Lepton {
        Lepton {
            p4: FourMomentum::new(px, py, pz, (px * px + py * py + pz * pz).sqrt()),
            flavour,
            charge,
            truth: None,
            index: 0,
        }
    }

    fn fat(mass: f64) -> FatJet {
        FatJet {
            p4: FourMomentum::from_pt_eta_phi_m(300.0, 0.0, 0.0, mass),
            truth: None,
            index: 0,
        }
    }

    /// A single-lepton top-pair-like event plus one extra jet.
    fn ttbar_like() -> Event {
        let mut e = Event::new(42);
        // jet pTs (3-4-5 and 5-12-13 triangles): 50, 130, 40, 25, 60
        e.jets = vec![
            jet(30.0, 40.0, 0.9),  // 50
            jet(50.0, 120.0, 0.1), // 130
            jet(24.0, 32.0, 0.2),  // 40
            jet(15.0, -20.0, 0.8), // 25
            jet(-36.0, 48.0, 0.3), // 60 (extra jet)
        ];
        e.muons = vec![lepton(Flavour::Muon, 21.0, 28.0, 10.0, -1)]; // pT 35
        e.met = Met::new(-12.0, -16.0); // 20
        e
    }

    #[test]
    fn ht_st_and_unclaimed_by_hand() {
        let e = ttbar_like();
        // HT = 50 + 130 + 40 + 25 + 60 = 305
        assert_relative_eq!(ht(&e), 305.0, max_relative = 1e-12);
        // ST = 305 + 35 (muon) + 20 (MET) = 360
        assert_relative_eq!(st(&e), 360.0, max_relative = 1e-12);
        // Hadronic top: jets 1, 2, 3; leptonic top: jet 0, muon, MET.
        // Claimed = 130 + 40 + 25 + 50 + 35 + 20 = 300; unclaimed = 360 − 300 = 60
        // (exactly the extra jet, as intended for top-pair events).
        let used = [
            ObjectRef::Jet(1),
            ObjectRef::Jet(2),
            ObjectRef::Jet(3),
            ObjectRef::Jet(0),
            ObjectRef::Muon(0),
            ObjectRef::Met,
        ];
        assert_relative_eq!(st_unclaimed(&e, &used).unwrap(), 60.0, max_relative = 1e-12);
        // Nothing claimed: unclaimed = ST.
        assert_relative_eq!(st_unclaimed(&e, &[]).unwrap(), 360.0, max_relative = 1e-12);
        // Everything claimed: 0 (clamped rounding).
        let mut all = used.to_vec();
        all.push(ObjectRef::Jet(4));
        assert_eq!(st_unclaimed(&e, &all).unwrap(), 0.0);
    }

    #[test]
    fn unclaimed_rejects_missing_objects() {
        let e = ttbar_like();
        assert_eq!(
            st_unclaimed(&e, &[ObjectRef::Muon(1)]),
            Err(VarsError::NoSuchObject(ObjectRef::Muon(1)))
        );
        assert!(st_unclaimed(&e, &[ObjectRef::Jet(5)]).is_err());
    }

    #[test]
    fn leptons_are_named_by_flavour() {
        let mut e = Event::new(1);
        e.electrons = vec![lepton(Flavour::Electron, 30.0, 0.0, 0.0, 1)]; // pT 30
        e.muons = vec![lepton(Flavour::Muon, 0.0, 70.0, 0.0, -1)]; // pT 70
                                                                   // ST = 30 + 70 = 100; claiming the muon leaves 30, the electron 70.
        assert_relative_eq!(
            st_unclaimed(&e, &[ObjectRef::Muon(0)]).unwrap(),
            30.0,
            max_relative = 1e-12
        );
        assert_relative_eq!(
            st_unclaimed(&e, &[ObjectRef::Electron(0)]).unwrap(),
            70.0,
            max_relative = 1e-12
        );
        assert!(st_unclaimed(&e, &[ObjectRef::Electron(1)]).is_err());
    }

    #[test]
    fn counts_and_leading_jet() {
        let mut e = ttbar_like();
        e.fat_jets = vec![fat(85.0), fat(59.0), fat(99.0), fat(172.0), fat(101.0)];
        let v = EventVars::compute(&e, &Selection::default(), &VarsConfig::default()).unwrap();
        assert_eq!(v.n_jets, 5);
        // b-tag scores 0.9 and 0.8 exceed the default 0.5 working point.
        assert_eq!(v.n_bjets, 2);
        assert_eq!(v.n_leptons, 1);
        assert_eq!(v.n_fatjets, 5);
        // 85 and 99 are inside [60, 100]; 59, 101 and 172 are not.
        assert_eq!(v.n_fatjets_w, 2);
        assert_eq!(v.lead_jet_pt, Some(130.0));
        assert_eq!(v.mll_z, None); // one lepton
        assert!(!v.same_sign);
        // A tighter b-tag working point counts one jet.
        let tight = Selection {
            btag_threshold: 0.85,
            ..Selection::default()
        };
        assert_eq!(
            EventVars::compute(&e, &tight, &VarsConfig::default())
                .unwrap()
                .n_bjets,
            1
        );
    }

    #[test]
    fn mll_picks_sfos_pair_closest_to_z() {
        let mut e = Event::new(1);
        // Massless back-to-back pairs along x: m = 2|p|.
        // e+e− at ±45 → 90 GeV (|90 − 91.188| = 1.188)
        // μ+μ− at ±30 → 60 GeV (|60 − 91.188| = 31.188)
        e.electrons = vec![
            lepton(Flavour::Electron, 45.0, 0.0, 0.0, 1),
            lepton(Flavour::Electron, -45.0, 0.0, 0.0, -1),
        ];
        e.muons = vec![
            lepton(Flavour::Muon, 0.0, 30.0, 0.0, 1),
            lepton(Flavour::Muon, 0.0, -30.0, 0.0, -1),
        ];
        assert_relative_eq!(m_ll_closest_to_z(&e).unwrap(), 90.0, max_relative = 1e-12);
        // e+μ− (opposite flavour) would be m² = 2·45·30·(1 − cos 90°) = 2700,
        // m ≈ 51.96, never considered. Same-sign: e+ and μ+ both +1.
        assert!(has_same_sign_pair(&e));
        // Remove the e− : only μ+μ− remains → 60.
        e.electrons.pop();
        assert_relative_eq!(m_ll_closest_to_z(&e).unwrap(), 60.0, max_relative = 1e-12);
        // Unknown charge never forms an opposite-sign pair.
        e.muons[1].charge = 0;
        assert_eq!(m_ll_closest_to_z(&e), None);
    }

    #[test]
    fn mll_matches_vector_library_value() {
        // Reference: scikit-hep `vector` (PyPI), run once with
        //   m = 0.1056583755
        //   a = vector.obj(pt=40, eta=0.5, phi=0.1, mass=m)
        //   b = vector.obj(pt=35, eta=-0.3, phi=2.9, mass=m)
        //   (a + b).mass  ->  79.89421474140603
        let m_mu = quarry_pdg::MUON_MASS;
        let mk = |pt, eta, phi, q| Lepton {
            p4: FourMomentum::from_pt_eta_phi_m(pt, eta, phi, m_mu),
            flavour: Flavour::Muon,
            charge: q,
            truth: None,
            index: 0,
        };
        let mut e = Event::new(1);
        e.muons = vec![mk(40.0, 0.5, 0.1, 1), mk(35.0, -0.3, 2.9, -1)];
        let m = m_ll_closest_to_z(&e).unwrap();
        assert_relative_eq!(m, 79.894_214_741_406_03, max_relative = 1e-10);
        // Cross-check with the massless closed form (PDG, Kinematics):
        // m² ≈ 2 pT1 pT2 (cosh Δη − cos Δφ); muon masses shift m by O(m_μ²/m).
        let closed = (2.0 * 40.0 * 35.0 * ((0.8f64).cosh() - (2.8f64).cos())).sqrt();
        assert_relative_eq!(m, closed, max_relative = 1e-5);
    }

    #[test]
    fn bad_inputs_are_typed_errors() {
        let mut e = ttbar_like();
        let bad = VarsConfig {
            w_window_low: 100.0,
            w_window_high: 60.0,
        };
        assert_eq!(
            EventVars::compute(&e, &Selection::default(), &bad),
            Err(VarsError::BadWindow)
        );
        e.met = Met::new(f64::NAN, 0.0);
        assert_eq!(
            EventVars::compute(&e, &Selection::default(), &VarsConfig::default()),
            Err(VarsError::NonFinite)
        );
        assert_eq!(st_unclaimed(&e, &[]), Err(VarsError::NonFinite));
    }
}
