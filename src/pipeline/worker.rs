//! [`Worker`]: the per-thread state of a [`Pipeline`] and the order in which
//! the stages run for one event.

use std::sync::atomic::AtomicBool;
use std::sync::Arc;

use quarry_assign::{RankedAssignment, SearchOutcome, Searcher};
use quarry_event::Event;
use quarry_fit::KinematicFitter;
use quarry_vars::EventVars;

use super::{fit_input, residual, Pipeline, Reconstruction, ResidualSource, Status};

/// Per-thread reconstruction state of a [`Pipeline`]: the search buffers
/// and the fitter. Make one per thread with [`Pipeline::worker`] and reuse
/// it for many events.
#[derive(Clone, Debug)]
pub struct Worker<'p> {
    pub(super) pipeline: &'p Pipeline,
    pub(super) searchers: Vec<Searcher>,
    /// The reference hypothesis's own searcher, when it is not one of the
    /// pipeline's hypotheses.
    pub(super) residual: Option<Searcher>,
    pub(super) fitter: Option<KinematicFitter>,
}

impl<'p> Worker<'p> {
    /// The pipeline this worker runs.
    pub fn pipeline(&self) -> &'p Pipeline {
        self.pipeline
    }

    /// Lets `flag` stop this worker's searches (every hypothesis's and the
    /// residual reference's): once it is set, a search in progress ends
    /// within about a millisecond with status [`Status::Cancelled`], and so
    /// does every later one until it is cleared. `None` removes it. See
    /// `quarry_assign::Searcher::set_cancel`.
    ///
    /// ```
    /// use std::sync::{atomic::AtomicBool, Arc};
    /// let pipeline = quarry::Pipeline::builder().preset("ttbar-ljets").build().unwrap();
    /// let mut worker = pipeline.worker();
    /// worker.set_cancel(Some(Arc::new(AtomicBool::new(true))));
    /// let mut event = quarry::event::Event::new(3);
    /// let p4 = quarry::lorentz::FourMomentum::from_pt_eta_phi_m;
    /// for (pt, phi, btag) in [(120.0, 0.1, 0.9), (90.0, 1.2, 0.1), (70.0, 2.4, 0.1), (60.0, -2.0, 0.9)] {
    ///     event.add_jet(quarry::event::Jet::new(p4(pt, 0.3, phi, 8.0), btag));
    /// }
    /// event.add_lepton(quarry::event::Lepton::muon(p4(50.0, -0.2, -1.0, 0.106), -1));
    /// event.met = quarry::event::Met::from_pt_phi(40.0, 0.5);
    /// assert_eq!(worker.reconstruct(event)[0].status, quarry::Status::Cancelled);
    /// ```
    pub fn set_cancel(&mut self, flag: Option<Arc<AtomicBool>>) {
        for s in self.searchers.iter_mut().chain(self.residual.as_mut()) {
            s.set_cancel(flag.clone());
        }
    }

    /// Selects the event's objects, computes its variables, and
    /// reconstructs it under every hypothesis (results in hypothesis order).
    ///
    /// ```
    /// let pipeline = quarry::Pipeline::builder().preset("ttbar-ljets").build().unwrap();
    /// let mut worker = pipeline.worker();
    /// let results = worker.reconstruct(quarry::event::Event::new(3));
    /// assert_eq!(results[0].status, quarry::Status::TooFewJets);
    /// ```
    pub fn reconstruct(&mut self, mut event: Event) -> Vec<Reconstruction> {
        let p = self.pipeline;
        let all_bad = |event: &Event, reason: String| -> Vec<Reconstruction> {
            p.hypotheses
                .iter()
                .map(|h| Reconstruction::bad_input(event.id, event.weight, h, reason.clone()))
                .collect()
        };
        if !event.weight.is_finite() {
            // Only events built in code can get here (the reader rejects a
            // non-finite weight): never let it pass as a number.
            let reason = format!("event weight {} is not finite", event.weight);
            return all_bad(&event, reason);
        }
        if let Some(sel) = &p.selection {
            sel.apply(&mut event);
        }
        let vars = match EventVars::compute(&event, &p.btag, &p.vars) {
            Ok(v) => v,
            Err(e) => return all_bad(&event, e.to_string()),
        };
        let outcomes: Vec<SearchOutcome> = self
            .searchers
            .iter_mut()
            .map(|s| s.search(&event))
            .collect();
        let reference: Option<RankedAssignment> = match &p.residual {
            ResidualSource::Off => None,
            ResidualSource::Hypothesis(i) => outcomes[*i].best().copied(),
            ResidualSource::Own(..) => self
                .residual
                .as_mut()
                .and_then(|s| s.search(&event).best().copied()),
        };
        let st_unclaimed = reference.and_then(|a| residual::st_unclaimed(&event, &a));
        outcomes
            .into_iter()
            .zip(&p.hypotheses)
            .map(|(search, h)| {
                let (mut status, mut reason) = Status::of_search(&search.status);
                let (chosen, fit) = match &mut self.fitter {
                    Some(fitter) if !search.ranked.is_empty() => {
                        let (chosen, fit) =
                            fit_input::fit_and_rerank(fitter, h, &event, &search.ranked);
                        (chosen, Some(fit))
                    }
                    _ => (0, None),
                };
                let truth = search
                    .ranked
                    .get(chosen)
                    .and_then(|b| h.truth_match(&event, b));
                if let Some((s, r)) = Status::after_fit(fit.as_ref()) {
                    (status, reason) = (s, r);
                }
                Reconstruction {
                    event_id: event.id,
                    weight: event.weight,
                    hypothesis: Arc::clone(h),
                    status,
                    reason,
                    vars: Some(vars),
                    st_unclaimed,
                    search,
                    chosen,
                    truth,
                    fit,
                }
            })
            .collect()
    }
}
