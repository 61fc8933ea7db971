//! The reconstruction pipeline: selection → event variables → assignment
//! search per hypothesis → optional kinematic fit → truth matching.
//!
//! The `quarry reco` command is a thin layer over this module: it reads
//! events, hands them to a [`Worker`] per thread, and turns each
//! [`Reconstruction`] into an output row.

use std::path::Path;
use std::sync::Arc;

use quarry_assign::{
    presets, ConstraintKind, Hypothesis, HypothesisError, ObjectRef as AssignRef, Part,
    RankedAssignment, SearchConfig, SearchConfigError, SearchOutcome, SearchStatus, Searcher,
    TruthMatch, Width,
};
use quarry_event::{Event, Flavour, Selection};
use quarry_fit::{
    Composite as FitComposite, Constraint as FitConstraint, FitConfig, FitInput, FitInputError,
    FitResult, FitStatus, KinematicFitter, Measured, NeutrinoStart,
};
use quarry_neutrino::SolutionCase;
use quarry_resolution::ResolutionModel;
use quarry_vars::{EventVars, ObjectRef as VarsRef, VarsConfig};
use rayon::prelude::*;

/// Why a pipeline could not be built.
#[derive(Debug, thiserror::Error)]
pub enum PipelineError {
    /// No preset has this name.
    #[error("unknown preset '{name}' (known: {known})")]
    UnknownPreset {
        /// The name asked for.
        name: String,
        /// The preset names, comma-separated.
        known: String,
    },
    /// A hypothesis file could not be read.
    #[error("{path}: cannot read hypothesis file: {source}")]
    ReadHypothesis {
        /// The file.
        path: String,
        /// The I/O error.
        source: std::io::Error,
    },
    /// A hypothesis file is invalid.
    #[error("{path}: {source}")]
    BadHypothesis {
        /// The file (or preset name).
        path: String,
        /// What is wrong.
        source: HypothesisError,
    },
    /// Two hypotheses share a name (rows would be ambiguous).
    #[error("hypothesis '{0}' is given twice")]
    DuplicateHypothesis(String),
    /// No hypothesis was given.
    #[error("no hypothesis given")]
    NoHypothesis,
    /// The search configuration is invalid for a hypothesis.
    #[error("hypothesis '{name}': {source}")]
    Search {
        /// Hypothesis name.
        name: String,
        /// What is wrong.
        source: SearchConfigError,
    },
    /// The event-variable configuration is invalid.
    #[error("event variables: W mass window must be finite with low < high")]
    BadVarsConfig,
}

/// What happened to one event under one hypothesis.
///
/// Names (from [`as_str`](Self::as_str)) are the `status` column of the
/// command line's output.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Status {
    /// An assignment was found (and, with the fit enabled, the fit
    /// converged).
    Ok,
    /// Fewer usable jets than the hypothesis's jet roles.
    TooFewJets,
    /// Fewer leptons than the hypothesis's lepton roles.
    TooFewLeptons,
    /// Fewer large-radius jets than the hypothesis's required large-jet
    /// roles.
    TooFewLargeJets,
    /// The neutrino pz could not be solved for any lepton.
    NeutrinoFailed,
    /// Enough objects, but no assignment satisfies the hypothesis's
    /// requirements (b-tags, charges, mass windows, overlaps).
    NoValidAssignment,
    /// The fit was requested and did not converge (the search results are
    /// still reported).
    FitNotConverged,
    /// The event could not be used: rejected by the CSV reader, or (for
    /// events built in code) a non-finite momentum or weight.
    BadInput,
}

impl Status {
    /// Every status, in a fixed order.
    pub const ALL: [Status; 8] = [
        Status::Ok,
        Status::TooFewJets,
        Status::TooFewLeptons,
        Status::TooFewLargeJets,
        Status::NeutrinoFailed,
        Status::NoValidAssignment,
        Status::FitNotConverged,
        Status::BadInput,
    ];

    /// The stable snake_case name used in outputs.
    ///
    /// ```
    /// assert_eq!(quarry::Status::NoValidAssignment.as_str(), "no_valid_assignment");
    /// ```
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::TooFewJets => "too_few_jets",
            Status::TooFewLeptons => "too_few_leptons",
            Status::TooFewLargeJets => "too_few_large_jets",
            Status::NeutrinoFailed => "neutrino_failed",
            Status::NoValidAssignment => "no_valid_assignment",
            Status::FitNotConverged => "fit_not_converged",
            Status::BadInput => "bad_input",
        }
    }
}

impl std::fmt::Display for Status {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

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

    /// The best assignment as `role=object;...`: jets by their input index
    /// (`3`), leptons as `e0`/`mu1` (input index among that flavour),
    /// large-radius jets as `fj0`, the neutrino as `nu0`/`nu1` (root with
    /// the smaller/larger |pz|), unfilled roles as `-`. Empty without an
    /// assignment.
    pub fn assignment_text(&self) -> String {
        let Some(best) = self.best() else {
            return String::new();
        };
        let mut s = String::with_capacity(64);
        for (role, obj) in self.hypothesis.roles().iter().zip(best.objects()) {
            if !s.is_empty() {
                s.push(';');
            }
            s.push_str(&role.name);
            s.push('=');
            match *obj {
                AssignRef::Jet { index, .. } => s.push_str(&index.to_string()),
                AssignRef::Lepton { flavour, index, .. } => {
                    s.push_str(match flavour {
                        Flavour::Electron => "e",
                        Flavour::Muon => "mu",
                    });
                    s.push_str(&index.to_string());
                }
                AssignRef::LargeJet { index, .. } => {
                    s.push_str("fj");
                    s.push_str(&index.to_string());
                }
                AssignRef::Neutrino { root } => {
                    s.push_str("nu");
                    s.push_str(&root.to_string());
                }
                AssignRef::Empty => s.push('-'),
            }
        }
        s
    }

    /// Every composite mass of the best assignment as `name=mass;...` in
    /// declaration order, masses in GeV with 3 decimals. Empty without an
    /// assignment.
    pub fn masses_text(&self) -> String {
        let Some(best) = self.best() else {
            return String::new();
        };
        let mut s = String::with_capacity(64);
        for (c, comp) in self.hypothesis.composites().iter().enumerate() {
            if !s.is_empty() {
                s.push(';');
            }
            let m = best.composite_mass(c);
            s.push_str(&comp.name);
            s.push('=');
            if m.is_finite() {
                s.push_str(&format!("{m:.3}"));
            }
        }
        s
    }

    /// Which neutrino solution the best assignment used: `real_smaller`,
    /// `real_larger` (the root with the smaller/larger |pz| with the measured
    /// MET), `complex_real_part` (negative discriminant, imaginary part
    /// dropped) or `met_adjusted` (negative discriminant, MET moved by the
    /// smallest amount). `None` without a neutrino.
    pub fn neutrino_solution(&self) -> Option<&'static str> {
        let best = self.best()?;
        let nu = best.neutrino()?;
        let root = best.objects().iter().find_map(|o| match o {
            AssignRef::Neutrino { root } => Some(*root),
            _ => None,
        });
        Some(match nu.case {
            SolutionCase::Real if root == Some(1) => "real_larger",
            SolutionCase::Real => "real_smaller",
            SolutionCase::DroppedImaginary => "complex_real_part",
            SolutionCase::AdjustedMet => "met_adjusted",
        })
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

/// Builds a [`Pipeline`].
///
/// Defaults: [`Selection::default`] applied to every event, the search's
/// defaults ([`SearchConfig::default`]), no fit, the default resolution
/// model and fit settings, the default event-variable settings, and the
/// unclaimed ST computed from the `ttbar-ljets` preset.
#[derive(Debug)]
pub struct PipelineBuilder {
    hypotheses: Vec<Hypothesis>,
    error: Option<PipelineError>,
    fit: bool,
    selection: Option<Selection>,
    search: SearchConfig,
    fit_config: FitConfig,
    resolution: ResolutionModel,
    vars: VarsConfig,
    unclaimed: bool,
}

impl Default for PipelineBuilder {
    fn default() -> Self {
        PipelineBuilder {
            hypotheses: Vec::new(),
            error: None,
            fit: false,
            selection: Some(Selection::default()),
            search: SearchConfig::default(),
            fit_config: FitConfig::default(),
            resolution: ResolutionModel::default(),
            vars: VarsConfig::default(),
            unclaimed: true,
        }
    }
}

impl PipelineBuilder {
    fn fail(mut self, e: PipelineError) -> Self {
        self.error.get_or_insert(e);
        self
    }

    /// Adds a built-in hypothesis by name (see [`presets::names`]).
    pub fn preset(self, name: &str) -> Self {
        match presets::get(name) {
            Some(h) => self.hypothesis(h),
            None => self.fail(PipelineError::UnknownPreset {
                name: name.to_string(),
                known: presets::names().join(", "),
            }),
        }
    }

    /// Adds a hypothesis built in code or loaded elsewhere.
    pub fn hypothesis(mut self, hypothesis: Hypothesis) -> Self {
        self.hypotheses.push(hypothesis);
        self
    }

    /// Adds a hypothesis from a TOML file.
    pub fn hypothesis_file(self, path: impl AsRef<Path>) -> Self {
        let path = path.as_ref();
        let shown = path.display().to_string();
        match std::fs::read_to_string(path) {
            Err(source) => self.fail(PipelineError::ReadHypothesis {
                path: shown,
                source,
            }),
            Ok(text) => match Hypothesis::from_toml(&text) {
                Ok(h) => self.hypothesis(h),
                Err(source) => self.fail(PipelineError::BadHypothesis {
                    path: shown,
                    source,
                }),
            },
        }
    }

    /// Adds a hypothesis named on a command line: a preset name if one has
    /// that name, else a TOML file if the argument ends in `.toml` or names
    /// an existing file (else an unknown-preset error).
    pub fn hypothesis_arg(self, arg: &str) -> Self {
        if presets::get(arg).is_some() {
            return self.preset(arg);
        }
        if arg.ends_with(".toml") || Path::new(arg).exists() {
            return self.hypothesis_file(arg);
        }
        self.preset(arg)
    }

    /// Runs the kinematic fit on each best assignment.
    pub fn fit(mut self, on: bool) -> Self {
        self.fit = on;
        self
    }

    /// The object selection applied to each event before anything else.
    pub fn selection(mut self, selection: Selection) -> Self {
        self.selection = Some(selection);
        self
    }

    /// Applies no selection (events were selected upstream). The b-tag
    /// working point for the `n_bjets` count is then
    /// [`Selection::default`]'s.
    pub fn no_selection(mut self) -> Self {
        self.selection = None;
        self
    }

    /// Search settings (k best, b-tag policy, neutrino solver, …).
    pub fn search_config(mut self, config: SearchConfig) -> Self {
        self.search = config;
        self
    }

    /// Fit settings.
    pub fn fit_config(mut self, config: FitConfig) -> Self {
        self.fit_config = config;
        self
    }

    /// The detector resolution model used by the fit.
    pub fn resolution(mut self, model: ResolutionModel) -> Self {
        self.resolution = model;
        self
    }

    /// Event-variable settings (the W mass window).
    pub fn vars_config(mut self, config: VarsConfig) -> Self {
        self.vars = config;
        self
    }

    /// Whether to compute the unclaimed ST (default on). It needs one more
    /// search per event with the `ttbar-ljets` preset unless that preset is
    /// already one of the hypotheses.
    pub fn unclaimed_st(mut self, on: bool) -> Self {
        self.unclaimed = on;
        self
    }

    /// Checks everything and prepares the searches.
    ///
    /// # Errors
    /// The first problem met while adding hypotheses, no hypothesis at all,
    /// duplicate names, or an invalid search or variable configuration.
    pub fn build(self) -> Result<Pipeline, PipelineError> {
        if let Some(e) = self.error {
            return Err(e);
        }
        if self.hypotheses.is_empty() {
            return Err(PipelineError::NoHypothesis);
        }
        let (lo, hi) = (self.vars.w_window_low, self.vars.w_window_high);
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(PipelineError::BadVarsConfig);
        }
        let mut searchers = Vec::with_capacity(self.hypotheses.len());
        let mut shared = Vec::with_capacity(self.hypotheses.len());
        for (i, h) in self.hypotheses.iter().enumerate() {
            if self.hypotheses[..i].iter().any(|o| o.name() == h.name()) {
                return Err(PipelineError::DuplicateHypothesis(h.name().to_string()));
            }
            let s = Searcher::new(h, self.search).map_err(|source| PipelineError::Search {
                name: h.name().to_string(),
                source,
            })?;
            searchers.push(s);
            shared.push(Arc::new(h.clone()));
        }
        let ttbar = if self.unclaimed {
            let reference =
                presets::get(presets::TTBAR_LJETS).ok_or_else(|| PipelineError::UnknownPreset {
                    name: presets::TTBAR_LJETS.to_string(),
                    known: presets::names().join(", "),
                })?;
            match self.hypotheses.iter().position(|h| *h == reference) {
                Some(i) => TopPairSource::Hypothesis(i),
                None => TopPairSource::Own(Box::new(
                    Searcher::new(
                        &reference,
                        SearchConfig {
                            k_best: 1,
                            ..self.search
                        },
                    )
                    .map_err(|source| PipelineError::Search {
                        name: reference.name().to_string(),
                        source,
                    })?,
                )),
            }
        } else {
            TopPairSource::Off
        };
        Ok(Pipeline {
            hypotheses: shared,
            searchers,
            ttbar,
            fit: self
                .fit
                .then(|| KinematicFitter::new(self.resolution.clone(), self.fit_config)),
            selection: self.selection,
            btag: self.selection.unwrap_or_default(),
            vars: self.vars,
        })
    }
}

/// Where the top-pair objects for the unclaimed ST come from.
#[derive(Clone, Debug)]
enum TopPairSource {
    Off,
    /// One of the pipeline's hypotheses is the ttbar preset.
    Hypothesis(usize),
    /// A dedicated searcher.
    Own(Box<Searcher>),
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
    ttbar: TopPairSource,
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
            ttbar: match &self.ttbar {
                TopPairSource::Own(s) => Some(s.as_ref().clone()),
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

    /// Like [`reconstruct_all`](Self::reconstruct_all) for owned events from
    /// any indexed parallel source (no clone); the result is an indexed
    /// parallel iterator, so `collect()` keeps input order.
    pub fn par_reconstruct<'a, I>(
        &'a self,
        events: I,
    ) -> impl IndexedParallelIterator<Item = Vec<Reconstruction>> + 'a
    where
        I: IndexedParallelIterator<Item = Event> + 'a,
    {
        events.map_init(|| self.worker(), |w, e| w.reconstruct(e))
    }

    /// Results for an event that could not be used (e.g. rejected by the
    /// reader): one [`Status::BadInput`] reconstruction per hypothesis.
    pub fn bad_input(&self, event_id: u64, reason: &str) -> Vec<Reconstruction> {
        self.hypotheses
            .iter()
            .map(|h| bad(event_id, 1.0, h, reason.to_string()))
            .collect()
    }
}

fn empty_outcome() -> SearchOutcome {
    SearchOutcome {
        status: SearchStatus::NoValidAssignment,
        ranked: Vec::new(),
        evaluated: Default::default(),
    }
}

fn bad(event_id: u64, weight: f64, h: &Arc<Hypothesis>, reason: String) -> Reconstruction {
    Reconstruction {
        event_id,
        weight,
        hypothesis: Arc::clone(h),
        status: Status::BadInput,
        reason,
        vars: None,
        st_unclaimed: None,
        search: empty_outcome(),
        chosen: 0,
        truth: None,
        fit: None,
    }
}

/// Per-thread reconstruction state of a [`Pipeline`].
#[derive(Clone, Debug)]
pub struct Worker<'p> {
    pipeline: &'p Pipeline,
    searchers: Vec<Searcher>,
    ttbar: Option<Searcher>,
    fitter: Option<KinematicFitter>,
}

impl Worker<'_> {
    /// Selects the event's objects, computes its variables, and
    /// reconstructs it under every hypothesis (results in hypothesis order).
    pub fn reconstruct(&mut self, mut event: Event) -> Vec<Reconstruction> {
        let p = self.pipeline;
        if !event.weight.is_finite() {
            // Only events built in code can get here (the reader rejects a
            // non-finite weight): never let it pass as a number.
            let reason = format!("event weight {} is not finite", event.weight);
            return p
                .hypotheses
                .iter()
                .map(|h| bad(event.id, event.weight, h, reason.clone()))
                .collect();
        }
        if let Some(sel) = &p.selection {
            sel.apply(&mut event);
        }
        let vars = match EventVars::compute(&event, &p.btag, &p.vars) {
            Ok(v) => v,
            Err(e) => {
                return p
                    .hypotheses
                    .iter()
                    .map(|h| bad(event.id, event.weight, h, e.to_string()))
                    .collect()
            }
        };
        let outcomes: Vec<SearchOutcome> = self
            .searchers
            .iter_mut()
            .map(|s| s.search(&event))
            .collect();
        let top_pair: Option<RankedAssignment> = match &p.ttbar {
            TopPairSource::Off => None,
            TopPairSource::Hypothesis(i) => outcomes[*i].best().copied(),
            TopPairSource::Own(_) => self
                .ttbar
                .as_mut()
                .and_then(|s| s.search(&event).best().copied()),
        };
        let st_unclaimed = top_pair.and_then(|a| unclaimed(&event, &a));
        outcomes
            .into_iter()
            .zip(&p.hypotheses)
            .map(|(search, h)| {
                let (mut status, mut reason) = search_status(&search.status);
                let (chosen, fit) = match &mut self.fitter {
                    Some(fitter) if !search.ranked.is_empty() => {
                        let (chosen, fit) = fit_and_rerank(fitter, h, &event, &search.ranked);
                        (chosen, Some(fit))
                    }
                    _ => (0, None),
                };
                let truth = search
                    .ranked
                    .get(chosen)
                    .and_then(|b| h.truth_match(&event, b));
                match &fit {
                    Some(Ok(f)) if f.status == FitStatus::Converged => {}
                    Some(Ok(f)) if f.status == FitStatus::CovarianceFailed => {}
                    Some(Ok(f)) => {
                        status = Status::FitNotConverged;
                        reason = match f.status {
                            FitStatus::InvalidInput(e) => format!("invalid_input: {e}"),
                            other => fit_status_name(&other).to_string(),
                        };
                    }
                    Some(Err(e)) => {
                        status = Status::FitNotConverged;
                        reason = format!("invalid_input: {e}");
                    }
                    None => {}
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

/// Maps a search status to a pipeline status and its detail.
fn search_status(s: &SearchStatus) -> (Status, String) {
    match s {
        SearchStatus::Found => (Status::Ok, String::new()),
        SearchStatus::TooFewJets { needed, available } => (
            Status::TooFewJets,
            format!("needs {needed} jet(s), has {available}"),
        ),
        SearchStatus::TooFewLeptons { needed, available } => (
            Status::TooFewLeptons,
            format!("needs {needed} lepton(s), has {available}"),
        ),
        SearchStatus::TooFewLargeJets { needed, available } => (
            Status::TooFewLargeJets,
            format!("needs {needed} large-radius jet(s), has {available}"),
        ),
        SearchStatus::NeutrinoFailed(e) => (Status::NeutrinoFailed, e.to_string()),
        SearchStatus::NoValidAssignment => (Status::NoValidAssignment, String::new()),
    }
}

/// The `fit_status` column's name for a fit status.
pub fn fit_status_name(s: &FitStatus) -> &'static str {
    match s {
        FitStatus::Converged => "converged",
        FitStatus::CovarianceFailed => "covariance_failed",
        FitStatus::IterationLimit => "iteration_limit",
        FitStatus::ConstraintsNotMet => "constraints_not_met",
        FitStatus::NumericalFailure => "numerical_failure",
        FitStatus::InvalidInput(_) => "invalid_input",
    }
}

/// ST minus the objects of a top-pair assignment (see [`quarry_vars`]).
fn unclaimed(event: &Event, a: &RankedAssignment) -> Option<f64> {
    let n_e = event.electrons.len();
    let used: Vec<VarsRef> = a
        .objects()
        .iter()
        .filter_map(|o| match *o {
            AssignRef::Jet { pos, .. } => Some(VarsRef::Jet(pos as usize)),
            AssignRef::Lepton { flavour, pos, .. } => Some(VarsRef::Lepton(match flavour {
                Flavour::Electron => pos as usize,
                Flavour::Muon => n_e + pos as usize,
            })),
            AssignRef::Neutrino { .. } => Some(VarsRef::Met),
            // Large-radius jets are not terms of ST.
            AssignRef::LargeJet { .. } | AssignRef::Empty => None,
        })
        .collect();
    quarry_vars::st_unclaimed(event, &used).ok()
}

/// Fits every ranked assignment and picks the best fit: the kinematic fit
/// re-ranks the search's K best, since the right assignment often is not the
/// one with the lowest search χ² but fits the constraints better once
/// energies may move within their resolutions. Returns the chosen position
/// and its fit. An assignment that cannot become a fit input ranks last;
/// if none can, the first one's error is returned.
fn fit_and_rerank(
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
        if let quarry_assign::RoleKind::Neutrino { lepton } = h.roles()[nr].kind {
            let mask = (1u16 << nr) | (1u16 << lepton);
            if let Some(c) = h.composites().iter().position(|c| c.leaf_mask == mask) {
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

    #[test]
    fn status_names_are_distinct() {
        let mut names: Vec<&str> = Status::ALL.iter().map(|s| s.as_str()).collect();
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), Status::ALL.len());
    }
}
