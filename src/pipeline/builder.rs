//! [`PipelineBuilder`]: collects hypotheses and settings, checks them, and
//! prepares the searches of a [`Pipeline`].

use std::path::Path;
use std::sync::Arc;

use quarry_assign::{presets, BtagPolicy, Hypothesis, SearchConfig, Searcher};
use quarry_event::Selection;
use quarry_fit::{FitConfig, KinematicFitter};
use quarry_resolution::ResolutionModel;
use quarry_vars::VarsConfig;

use super::{Pipeline, PipelineError, ResidualSource};

/// Builds a [`Pipeline`].
///
/// Defaults: [`Selection::default`] applied to every event, the search's
/// defaults ([`SearchConfig::default`]), no fit, the default resolution
/// model and fit settings, the default event-variable settings, the b-tag
/// working point 0.5 ([`Selection::default`]'s) for both the `n_bjets`
/// count and the search, and the unclaimed ST computed from the
/// `ttbar-ljets` preset ([`residual_reference`](Self::residual_reference)).
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
    /// The hypothesis whose best assignment's objects the unclaimed ST
    /// subtracts; `None`: no unclaimed ST.
    residual_reference: Option<Hypothesis>,
    /// The b-tag working point set with [`PipelineBuilder::btag_threshold`].
    btag_threshold: Option<f64>,
    /// Whether [`PipelineBuilder::selection`] or
    /// [`PipelineBuilder::no_selection`] was called (the default selection's
    /// b-tag threshold never conflicts with the search's).
    selection_set: bool,
    /// Whether [`PipelineBuilder::search_config`] was called (likewise).
    search_set: bool,
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
            residual_reference: presets::get(presets::TTBAR_LJETS),
            btag_threshold: None,
            selection_set: false,
            search_set: false,
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
        self.selection_set = true;
        self
    }

    /// Applies no selection (events were selected upstream). The b-tag
    /// working point for the `n_bjets` count is then the search's (see
    /// [`btag_threshold`](Self::btag_threshold)).
    pub fn no_selection(mut self) -> Self {
        self.selection = None;
        self.selection_set = true;
        self
    }

    /// The b-tag working point: a jet with a score above `threshold` is
    /// b-tagged, for the `n_bjets` count **and** for the search's
    /// [`BtagPolicy::Threshold`] (with [`BtagPolicy::Weighted`] or
    /// [`BtagPolicy::Ignore`] it sets the count only). One number for both,
    /// so that a count and a search can never disagree about which jets are
    /// b-tagged; [`build`](Self::build) refuses a selection or search
    /// configuration with another threshold.
    ///
    /// ```
    /// use quarry::assign::{BtagPolicy, SearchConfig};
    /// let built = quarry::Pipeline::builder().preset("ttbar-ljets").btag_threshold(0.8).build();
    /// assert!(built.is_ok());
    /// let clash = quarry::Pipeline::builder()
    ///     .preset("ttbar-ljets")
    ///     .btag_threshold(0.8)
    ///     .search_config(SearchConfig { btag: BtagPolicy::Threshold(0.5), ..SearchConfig::default() })
    ///     .build();
    /// assert!(clash.is_err());
    /// ```
    pub fn btag_threshold(mut self, threshold: f64) -> Self {
        self.btag_threshold = Some(threshold);
        self
    }

    /// Search settings (k best, b-tag policy, neutrino solver, …).
    pub fn search_config(mut self, config: SearchConfig) -> Self {
        self.search = config;
        self.search_set = true;
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

    /// Whether to compute the unclaimed ST (default on, with the
    /// `ttbar-ljets` preset as the reference). Turning it on again after
    /// [`residual_reference`](Self::residual_reference) keeps that reference.
    pub fn unclaimed_st(mut self, on: bool) -> Self {
        if !on {
            self.residual_reference = None;
        } else if self.residual_reference.is_none() {
            self.residual_reference = presets::get(presets::TTBAR_LJETS);
        }
        self
    }

    /// The hypothesis whose best assignment defines the unclaimed ST (ST
    /// minus the pT of the objects it uses; default: the `ttbar-ljets`
    /// preset, the dominant background's reconstruction). When the
    /// pipeline's own hypotheses include an identical one, its search is
    /// reused; otherwise the reference is searched once more per event
    /// (best assignment only).
    ///
    /// ```
    /// use quarry::assign::presets;
    /// let p = quarry::Pipeline::builder()
    ///     .preset("bz-2l")
    ///     .residual_reference(presets::get("tgtg-ljets").unwrap())
    ///     .build()
    ///     .unwrap();
    /// assert_eq!(p.residual_reference().unwrap().name(), "tgtg-ljets");
    /// ```
    pub fn residual_reference(mut self, hypothesis: Hypothesis) -> Self {
        self.residual_reference = Some(hypothesis);
        self
    }

    /// The b-tag working point the count and the search share, and the
    /// search configuration and selection that carry it; an error if two
    /// settings disagree.
    fn btag_settings(&self) -> Result<(f64, SearchConfig, Option<Selection>), PipelineError> {
        let search_threshold = match self.search.btag {
            BtagPolicy::Threshold(t) if self.search_set => Some(t),
            _ => None,
        };
        let selection_threshold = match (&self.selection, self.selection_set) {
            (Some(s), true) => Some(s.btag_threshold),
            _ => None,
        };
        let threshold = self
            .btag_threshold
            .or(search_threshold)
            .or(selection_threshold)
            .unwrap_or(Selection::default().btag_threshold);
        for (setting, value) in [
            ("the search's b-tag policy", search_threshold),
            ("the selection", selection_threshold),
        ] {
            if let Some(value) = value {
                // Exact comparison on purpose: one number, set once.
                #[allow(clippy::float_cmp)]
                if value != threshold {
                    return Err(PipelineError::BtagMismatch {
                        setting,
                        value,
                        threshold,
                    });
                }
            }
        }
        let search = match self.search.btag {
            BtagPolicy::Threshold(_) => SearchConfig {
                btag: BtagPolicy::Threshold(threshold),
                ..self.search
            },
            _ => self.search,
        };
        let selection = self.selection.map(|s| Selection {
            btag_threshold: threshold,
            ..s
        });
        Ok((threshold, search, selection))
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
        let (btag_threshold, search, selection) = self.btag_settings()?;
        let mut searchers = Vec::with_capacity(self.hypotheses.len());
        let mut shared = Vec::with_capacity(self.hypotheses.len());
        for (i, h) in self.hypotheses.iter().enumerate() {
            if self.hypotheses[..i].iter().any(|o| o.name() == h.name()) {
                return Err(PipelineError::DuplicateHypothesis(h.name().to_string()));
            }
            let s = Searcher::new(h, search).map_err(|source| PipelineError::Search {
                name: h.name().to_string(),
                source,
            })?;
            searchers.push(s);
            shared.push(Arc::new(h.clone()));
        }
        let residual = match self.residual_reference {
            None => ResidualSource::Off,
            Some(reference) => match self.hypotheses.iter().position(|h| *h == reference) {
                // The reference is one of the user's hypotheses: its search
                // runs anyway, so its best assignment is reused.
                Some(i) => ResidualSource::Hypothesis(i),
                None => ResidualSource::Own(
                    Box::new(
                        Searcher::new(
                            &reference,
                            SearchConfig {
                                k_best: 1,
                                ..search
                            },
                        )
                        .map_err(|source| PipelineError::Search {
                            name: reference.name().to_string(),
                            source,
                        })?,
                    ),
                    Arc::new(reference),
                ),
            },
        };
        Ok(Pipeline {
            hypotheses: shared,
            searchers,
            residual,
            fit: self
                .fit
                .then(|| KinematicFitter::new(self.resolution.clone(), self.fit_config)),
            selection,
            btag: Selection {
                btag_threshold,
                ..selection.unwrap_or_default()
            },
            vars: self.vars,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Status;
    use quarry_event::{Event, Flavour, Jet, Lepton, Met};
    use quarry_lorentz::FourMomentum;

    /// A lepton+jets event whose two b-like jets score 0.7: tagged at the
    /// default working point 0.5, untagged at 0.8.
    fn event() -> Event {
        let mut e = Event::new(1);
        for (i, (pt, eta, phi, b)) in [
            (90.0, 0.1, 0.3, 0.7),
            (70.0, -0.4, 2.5, 0.1),
            (55.0, 0.8, 2.0, 0.05),
            (60.0, -1.0, -1.5, 0.7),
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

    /// Setting the working point on the selection alone moves the search's
    /// too: the count and the search agree on which jets are b-tagged.
    #[test]
    fn the_selection_threshold_is_the_searchs() {
        let at = |builder: PipelineBuilder| {
            let p = builder.preset("ttbar-ljets").build().unwrap();
            let r = &p.reconstruct(&event())[0];
            (r.vars.unwrap().n_bjets, r.status)
        };
        assert_eq!(at(Pipeline::builder()), (2, Status::Ok));
        let strict = Selection {
            btag_threshold: 0.8,
            ..Selection::default()
        };
        let expected = (0, Status::NoValidAssignment);
        assert_eq!(at(Pipeline::builder().selection(strict)), expected);
        assert_eq!(at(Pipeline::builder().btag_threshold(0.8)), expected);
        assert_eq!(
            at(Pipeline::builder().no_selection().btag_threshold(0.8)),
            expected
        );
    }

    #[test]
    fn disagreeing_thresholds_are_refused() {
        let strict = Selection {
            btag_threshold: 0.8,
            ..Selection::default()
        };
        let loose_search = SearchConfig {
            btag: BtagPolicy::Threshold(0.5),
            ..SearchConfig::default()
        };
        let err = Pipeline::builder()
            .preset("ttbar-ljets")
            .selection(strict)
            .search_config(loose_search)
            .build()
            .unwrap_err();
        assert!(matches!(err, PipelineError::BtagMismatch { .. }), "{err}");
        // A weighted search has no threshold of its own: the count's is used.
        let weighted = SearchConfig {
            btag: BtagPolicy::weighted_default(),
            ..SearchConfig::default()
        };
        let p = Pipeline::builder()
            .preset("ttbar-ljets")
            .selection(strict)
            .search_config(weighted)
            .build()
            .unwrap();
        assert_eq!(p.btag_threshold(), 0.8);
    }

    /// The reference hypothesis is searched once when it is also one of the
    /// pipeline's hypotheses, and gives the same unclaimed ST either way.
    #[test]
    fn the_residual_reference_is_reused_or_searched() {
        let e = event();
        let alone = Pipeline::builder().preset("bz-2l").build().unwrap();
        assert!(matches!(alone.residual, ResidualSource::Own(..)));
        let with = Pipeline::builder()
            .preset("bz-2l")
            .preset("ttbar-ljets")
            .build()
            .unwrap();
        assert!(matches!(with.residual, ResidualSource::Hypothesis(1)));
        let a = alone.reconstruct(&e)[0].st_unclaimed;
        let b = with.reconstruct(&e)[0].st_unclaimed;
        assert!(a.is_some());
        assert_eq!(a, b);
        let off = Pipeline::builder()
            .preset("bz-2l")
            .unclaimed_st(false)
            .build()
            .unwrap();
        assert!(off.residual_reference().is_none());
        assert_eq!(off.reconstruct(&e)[0].st_unclaimed, None);
    }
}
