//! The reconstruction pipeline: selection → event variables → assignment
//! search per hypothesis → optional kinematic fit → truth matching.
//!
//! This module only orchestrates. Each concern has its own file: the
//! builder and its checks (`builder`), the per-thread [`Worker`] that runs
//! the stages (`worker`), the result type (`reconstruction`) and its text
//! forms (`text`), the status (`status`), the error (`error`), and the two
//! mappings between stages, each with one owner and its own tests: search
//! result → fit input (`fit_input`) and search result → the objects the
//! unclaimed ST subtracts (`residual`).

use std::sync::Arc;

use quarry_assign::{Hypothesis, Searcher};
use quarry_event::{Event, Selection};
use quarry_fit::KinematicFitter;
use quarry_vars::VarsConfig;
use rayon::prelude::*;

mod builder;
mod error;
mod fit_input;
mod reconstruction;
mod residual;
mod status;
mod text;
mod worker;

pub use builder::PipelineBuilder;
pub use error::PipelineError;
pub use reconstruction::Reconstruction;
pub use status::Status;
pub use worker::Worker;

/// Where the reference assignment for the unclaimed ST comes from.
#[derive(Clone, Debug)]
enum ResidualSource {
    /// No unclaimed ST.
    Off,
    /// The reference is the pipeline's hypothesis at this position: its
    /// search is reused.
    Hypothesis(usize),
    /// A dedicated searcher (best assignment only) for the reference.
    Own(Box<Searcher>, Arc<Hypothesis>),
}

/// A configured reconstruction: hypotheses, search and fit settings.
///
/// Cheap to share across threads (`&Pipeline` is `Sync`); each thread does
/// its work through its own [`Worker`], which owns the search buffers.
///
/// ```
/// use quarry::Pipeline;
/// use quarry::event::{Event, Flavour, Jet, Lepton, Met};
/// use quarry::lorentz::FourMomentum;
///
/// let pipeline = Pipeline::builder().preset("ttbar-ljets").build().unwrap();
/// let mut e = Event::new(1);
/// for (i, (pt, eta, phi, b)) in [(90.0, 0.1, 0.3, 0.9), (70.0, -0.4, 2.5, 0.1),
///     (55.0, 0.8, 2.0, 0.05), (60.0, -1.0, -1.5, 0.95)].into_iter().enumerate() {
///     e.jets.push(Jet::new(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 5.0), b)
///         .with_index(i as u32));
/// }
/// e.muons.push(Lepton { p4: FourMomentum::from_pt_eta_phi_m(40.0, 0.2, -2.0, 0.1057),
///     flavour: Flavour::Muon, charge: 1, truth: None, index: 0 });
/// e.met = Met::new(30.0, 20.0);
/// let results = pipeline.reconstruct(&e);
/// assert_eq!(results.len(), 1);
/// assert_eq!(results[0].status, quarry::Status::Ok);
/// println!("{}  χ² = {:.2}", results[0].assignment_text(), results[0].best().unwrap().chi2());
/// ```
#[derive(Clone, Debug)]
pub struct Pipeline {
    hypotheses: Vec<Arc<Hypothesis>>,
    searchers: Vec<Searcher>,
    residual: ResidualSource,
    fit: Option<KinematicFitter>,
    selection: Option<Selection>,
    btag: Selection,
    vars: VarsConfig,
}

impl Pipeline {
    /// A builder with the defaults listed on [`PipelineBuilder`].
    pub fn builder() -> PipelineBuilder {
        PipelineBuilder::default()
    }

    /// The hypotheses, in the order results are returned.
    pub fn hypotheses(&self) -> &[Arc<Hypothesis>] {
        &self.hypotheses
    }

    /// The hypothesis whose best assignment defines the unclaimed ST
    /// ([`PipelineBuilder::residual_reference`]); `None` when it is off.
    pub fn residual_reference(&self) -> Option<&Hypothesis> {
        match &self.residual {
            ResidualSource::Off => None,
            ResidualSource::Hypothesis(i) => Some(&self.hypotheses[*i]),
            ResidualSource::Own(_, h) => Some(h),
        }
    }

    /// The b-tag working point of the `n_bjets` count and of the search's
    /// threshold policy ([`PipelineBuilder::btag_threshold`]).
    pub fn btag_threshold(&self) -> f64 {
        self.btag.btag_threshold
    }

    /// Whether the fit runs.
    pub fn fits(&self) -> bool {
        self.fit.is_some()
    }

    /// A worker: per-thread state (search buffers, fitter) for
    /// [`Worker::reconstruct`]. Creating one allocates; reuse it.
    pub fn worker(&self) -> Worker<'_> {
        Worker {
            pipeline: self,
            searchers: self.searchers.clone(),
            residual: match &self.residual {
                ResidualSource::Own(s, _) => Some(s.as_ref().clone()),
                _ => None,
            },
            fitter: self.fit.clone(),
        }
    }

    /// Reconstructs one event under every hypothesis (results in hypothesis
    /// order). Convenience: builds a fresh [`Worker`] each call; use a
    /// worker or [`reconstruct_all`](Self::reconstruct_all) for many events.
    pub fn reconstruct(&self, event: &Event) -> Vec<Reconstruction> {
        self.worker().reconstruct(event.clone())
    }

    /// Reconstructs many events in parallel (rayon, one worker per thread);
    /// the outer vector is in input order whatever the number of threads.
    pub fn reconstruct_all(&self, events: &[Event]) -> Vec<Vec<Reconstruction>> {
        events
            .par_iter()
            .map_init(|| self.worker(), |w, e| w.reconstruct(e.clone()))
            .collect()
    }
}
