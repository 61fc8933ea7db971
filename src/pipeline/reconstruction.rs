//! [`Reconstruction`]: the result of one event under one hypothesis, and
//! the quantities read off it (best assignment, named masses, the pair of
//! pair-produced candidates).

use std::sync::Arc;

use quarry_assign::{
    ConstraintKind, Hypothesis, Part, RankedAssignment, SearchOutcome, SearchStatus, TruthMatch,
};
use quarry_fit::{FitInputError, FitResult};
use quarry_vars::EventVars;

use super::Status;

/// The result of one event under one hypothesis.
#[derive(Clone, Debug)]
pub struct Reconstruction {
    /// The event id.
    pub event_id: u64,
    /// The event weight.
    pub weight: f64,
    /// The hypothesis (shared by every reconstruction of a pipeline).
    pub hypothesis: Arc<Hypothesis>,
    /// Overall status.
    pub status: Status,
    /// Detail for a non-ok status (empty when ok).
    pub reason: String,
    /// Event variables of the selected event (`None` only for bad input).
    pub vars: Option<EventVars>,
    /// The unclaimed ST \[GeV\]: ST minus the objects of the best top-pair
    /// (`ttbar-ljets`) assignment; `None` when that search found none or the
    /// pipeline was built without it.
    pub st_unclaimed: Option<f64>,
    /// The search result (ranked assignments, status, work done).
    pub search: SearchOutcome,
    /// Position in `search.ranked` of the reported assignment. Without the
    /// fit it is 0, the lowest search χ². With the fit every ranked
    /// assignment is fitted and the one with the best fit wins
    /// ([`quarry_fit::compare_fits`]: converged fits first, then the lowest
    /// fit χ²; search order breaks ties).
    pub chosen: usize,
    /// Truth match of the best assignment; `None` without truth labels or
    /// without an assignment.
    pub truth: Option<TruthMatch>,
    /// Fit of the best assignment, when the fit is enabled and an assignment
    /// was found: `Err` when the assignment could not be turned into a fit
    /// input (e.g. more objects than the fit holds).
    pub fit: Option<Result<FitResult, FitInputError>>,
}

impl Reconstruction {
    /// The reported assignment, if any: the lowest search χ², or with the
    /// fit the best-fitting of the ranked assignments (see
    /// [`chosen`](Self::chosen)).
    pub fn best(&self) -> Option<&RankedAssignment> {
        self.search.ranked.get(self.chosen)
    }

    /// Mass of the named composite in the best assignment \[GeV\].
    ///
    /// ```
    /// # use quarry::{Pipeline, Status};
    /// let p = Pipeline::builder().preset("ttbar-ljets").build().unwrap();
    /// let r = &p.reconstruct(&quarry::event::Event::new(1))[0];
    /// assert_eq!(r.status, Status::TooFewJets);
    /// assert_eq!(r.composite_mass("t_had"), None);
    /// ```
    pub fn composite_mass(&self, name: &str) -> Option<f64> {
        let c = self.hypothesis.composite_index(name)?;
        self.best().map(|b| b.composite_mass(c))
    }

    /// The pair of composites reported as `mass_a`/`mass_b`: the two sides of
    /// the hypothesis's first equal-mass constraint; without one, its two
    /// top-level composites (those inside no other) if there are exactly
    /// two (e.g. `t_had`, `t_lep`); else `None`.
    pub fn pair(&self) -> Option<[usize; 2]> {
        pair_of(&self.hypothesis)
    }

    /// Masses of [`pair`](Self::pair) in the best assignment \[GeV\].
    pub fn pair_masses(&self) -> Option<[f64; 2]> {
        let [a, b] = self.pair()?;
        let best = self.best()?;
        Some([best.composite_mass(a), best.composite_mass(b)])
    }

    /// The result of an event that could not be used: status
    /// [`Status::BadInput`] with `reason`, no variables, no assignment.
    pub(crate) fn bad_input(
        event_id: u64,
        weight: f64,
        hypothesis: &Arc<Hypothesis>,
        reason: String,
    ) -> Reconstruction {
        Reconstruction {
            event_id,
            weight,
            hypothesis: Arc::clone(hypothesis),
            status: Status::BadInput,
            reason,
            vars: None,
            st_unclaimed: None,
            search: SearchOutcome {
                status: SearchStatus::NoValidAssignment,
                ranked: Vec::new(),
                evaluated: Default::default(),
            },
            chosen: 0,
            truth: None,
            fit: None,
        }
    }
}

/// See [`Reconstruction::pair`].
fn pair_of(h: &Hypothesis) -> Option<[usize; 2]> {
    for c in h.constraints() {
        if let ConstraintKind::EqualMass { composites } = c.kind {
            return Some(composites);
        }
    }
    let n = h.composites().len();
    let mut inner = vec![false; n];
    for comp in h.composites() {
        for part in &comp.parts {
            if let Part::Composite(i) = *part {
                inner[i] = true;
            }
        }
    }
    let top: Vec<usize> = (0..n).filter(|&i| !inner[i]).collect();
    match top[..] {
        [a, b] => Some([a, b]),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use quarry_assign::presets;

    #[test]
    fn pairs_of_presets() {
        let ttbar = presets::get("ttbar-ljets").unwrap();
        let [a, b] = pair_of(&ttbar).unwrap();
        assert_eq!(ttbar.composites()[a].name, "t_had");
        assert_eq!(ttbar.composites()[b].name, "t_lep");
        let bw = presets::get("bwbw-ljets").unwrap();
        let [a, b] = pair_of(&bw).unwrap();
        assert_eq!(
            (&bw.composites()[a].name[..], &bw.composites()[b].name[..]),
            ("Q_had", "Q_lep")
        );
    }
}
