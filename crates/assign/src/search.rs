//! The exact branch-and-bound χ² search over assignments.
//!
//! Split by concern:
//! - [`types`]: the public settings, results and errors;
//! - [`plan`]: compiles a hypothesis into steps (fill order, composite sums,
//!   constraint terms), once per [`Searcher`];
//! - [`prepare`]: per event, the objects entering the search and each step's
//!   admissible candidates;
//! - [`slot`]: the typed indices into the search's fixed-size arrays;
//! - [`walk`]: the depth-first walk, its bounds and the K-best list;
//! - [`join`]: the per-event lists that complete the small side of an
//!   equal-mass constraint, and [`pair_join`], the bW-pair shape's dedicated
//!   code for both sides;
//!
//! This file holds the engine that ties them together: [`Searcher`].

use quarry_event::{Event, Flavour};
use quarry_lorentz::FourMomentum;
use quarry_neutrino::{Neutrino, NeutrinoError, NeutrinoSolutions, WMassSolver};
use rayon::prelude::*;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

use crate::hypothesis::{ConstraintKind, Hypothesis, Part, RoleKind, TagRule};
use crate::{
    MAX_COMPOSITES, MAX_CONSTRAINTS, MAX_JETS, MAX_K_BEST, MAX_LARGE_JETS, MAX_LEPTONS, MAX_ROLES,
};

mod join;
mod pair_join;
mod plan;
mod prepare;
mod slot;
mod types;
mod walk;

use join::*;
use plan::*;
use slot::*;
pub use types::*;
use walk::*;

/// Marks an unfilled slot in the search's compact choice arrays.
const NONE: u8 = u8::MAX;

/// Room for every jet plus the "no large jet" option.
const MAX_CANDS: usize = MAX_JETS + 1;

/// A reusable search engine for one hypothesis and configuration.
///
/// All buffers are allocated in [`Searcher::new`]; a search allocates only
/// the returned `Vec` of ranked assignments (none with
/// [`Searcher::search_into`] once its vector has capacity), and, for a
/// hypothesis whose equal-mass side is joined from a per-event list, grows
/// that list when an event has more fillings than any before (at most 4096),
/// never per assignment.
///
/// ```
/// use quarry_assign::{presets, SearchConfig, Searcher, SearchStatus};
/// let h = presets::get("ttbar-ljets").unwrap();
/// let mut s = Searcher::new(&h, SearchConfig::default()).unwrap();
/// let out = s.search(&quarry_event::Event::new(1));
/// assert!(matches!(out.status, SearchStatus::TooFewJets { .. }));
/// ```
#[derive(Clone, Debug)]
pub struct Searcher {
    hyp: Hypothesis,
    config: SearchConfig,
    leading: usize,
    plan: Plan,
    ws: Box<Workspace>,
}

impl Searcher {
    /// Prepares a search: checks the configuration, orders the roles and
    /// allocates every buffer.
    ///
    /// # Errors
    /// [`SearchConfigError`] for a bad `k_best`, jet override or b-tag policy.
    pub fn new(hyp: &Hypothesis, config: SearchConfig) -> Result<Searcher, SearchConfigError> {
        if config.k_best == 0 || config.k_best > MAX_K_BEST {
            return Err(SearchConfigError::BadK(config.k_best));
        }
        let leading = match config.max_jets_override {
            Some(v) if v > MAX_JETS || v < hyp.min_jets() => {
                return Err(SearchConfigError::BadLeadingJets {
                    value: v,
                    needed: hyp.min_jets(),
                })
            }
            Some(v) => v,
            None => hyp.leading_jets(),
        };
        match config.btag {
            BtagPolicy::Threshold(t) if !t.is_finite() => {
                return Err(SearchConfigError::BadBtag(config.btag))
            }
            BtagPolicy::Weighted {
                b_efficiency: eb,
                light_mistag: el,
            } if !(eb > 0.0 && eb < 1.0 && el > 0.0 && el < eb) => {
                return Err(SearchConfigError::BadBtag(config.btag))
            }
            _ => {}
        }
        let plan = Plan::new(hyp, leading, &config.btag);
        let ws = Box::new(Workspace::new(&plan, &config));
        Ok(Searcher {
            hyp: hyp.clone(),
            config,
            leading,
            plan,
            ws,
        })
    }

    /// Lets `flag` stop searches: once it is set, the search in progress
    /// returns [`SearchStatus::Cancelled`] within [`BUDGET_CHECK_EVERY`]
    /// assignments (about a millisecond), and so does every later search
    /// until it is cleared. `None` removes the flag. Clones of this searcher
    /// share it.
    ///
    /// ```
    /// use quarry_assign::{presets, SearchConfig, Searcher, SearchStatus};
    /// use std::sync::{atomic::AtomicBool, Arc};
    /// let h = presets::get("ttbar-ljets").unwrap();
    /// let mut s = Searcher::new(&h, SearchConfig::default()).unwrap();
    /// let stop = Arc::new(AtomicBool::new(true));
    /// s.set_cancel(Some(stop));
    /// let out = s.search(&quarry_event::Event::new(1));
    /// assert_eq!(out.status, SearchStatus::Cancelled);
    /// ```
    pub fn set_cancel(&mut self, flag: Option<Arc<AtomicBool>>) {
        self.ws.cancel = flag;
    }

    /// The hypothesis searched.
    pub fn hypothesis(&self) -> &Hypothesis {
        &self.hyp
    }

    /// The configuration in use.
    pub fn config(&self) -> &SearchConfig {
        &self.config
    }

    /// Role indices in the order the search fills them (constraints that
    /// close early first). Exposed for diagnostics.
    pub fn fill_order(&self) -> Vec<usize> {
        self.plan.steps.iter().map(|s| s.role.get()).collect()
    }

    /// Searches one event for the best assignments. Never panics; problems
    /// with the event are reported in [`SearchOutcome::status`].
    pub fn search(&mut self, event: &Event) -> SearchOutcome {
        let mut out = SearchOutcome {
            status: SearchStatus::NoValidAssignment,
            ranked: Vec::with_capacity(self.config.k_best),
            evaluated: Evaluated::default(),
        };
        self.search_into(event, &mut out);
        out
    }

    /// Like [`search`](Self::search), reusing `out`'s vector.
    pub fn search_into(&mut self, event: &Event, out: &mut SearchOutcome) {
        out.ranked.clear();
        out.evaluated = Evaluated::default();
        out.status = self.run(event);
        out.evaluated = self.ws.evaluated;
        if out.status == SearchStatus::Found {
            for i in 0..self.ws.best.len() {
                let leaf = self.ws.best[i];
                out.ranked.push(self.plan.template);
                if let Some(slot) = out.ranked.last_mut() {
                    self.ws.build_into(&self.plan, &leaf, slot);
                }
            }
        }
    }

    fn run(&mut self, event: &Event) -> SearchStatus {
        let ws = &mut *self.ws;
        let hyp = &self.hyp;
        let plan = &self.plan;
        ws.best.clear();
        ws.thr = f64::INFINITY;
        ws.searches += 1;
        ws.evaluated = Evaluated::default();
        ws.start_budget();
        if let Some(stopped) = ws.stopped {
            return stopped;
        }
        ws.load_objects(
            event,
            self.leading,
            hyp.large_jet_overlap_dr(),
            &self.config.btag,
        );
        if ws.n_jets < hyp.min_jets() {
            return SearchStatus::TooFewJets {
                needed: hyp.min_jets(),
                available: ws.n_jets,
            };
        }
        if ws.n_leps < hyp.min_leptons() {
            return SearchStatus::TooFewLeptons {
                needed: hyp.min_leptons(),
                available: ws.n_leps,
            };
        }
        if ws.n_large < hyp.min_large_jets() {
            return SearchStatus::TooFewLargeJets {
                needed: hyp.min_large_jets(),
                available: ws.n_large,
            };
        }
        ws.build_candidates(plan, &self.config.btag);
        // Neutrino solutions for every lepton that may source it.
        let mut nu_error = None;
        let mut nu_ok = false;
        if let Some(lrole) = plan.nu_lepton {
            ws.nu = [None; MAX_LEPTONS];
            let d = plan
                .steps
                .iter()
                .position(|s| s.role.get() == lrole)
                .unwrap_or(0);
            let mut m = ws.cand_mask[d];
            while m != 0 {
                let l = m.trailing_zeros() as usize;
                m &= m - 1;
                match self.config.neutrino.solve(
                    &ws.obj_p4[LEP_BASE + l],
                    event.met.px,
                    event.met.py,
                ) {
                    Ok(s) => {
                        for (r, n) in s.as_slice().iter().enumerate() {
                            ws.obj_p4[NU_BASE + 2 * l + r] = n.p4;
                        }
                        ws.nu[l] = Some(s);
                        nu_ok = true;
                    }
                    Err(e) => nu_error = nu_error.or(Some(e)),
                }
            }
        }
        ws.prepare_closest(hyp);
        ws.choice = [NONE; MAX_ROLES];
        if self.config.prune {
            ws.prepare_joins(hyp, plan, plan.pair_join.as_ref());
        }
        // The join lists are read-only during the search: moved out of the
        // workspace meanwhile, so the search can borrow them beside it.
        let lists = std::mem::take(&mut ws.lists);
        match (&plan.pair_join, self.config.prune) {
            (Some(k), true) => ws.pair_join(k, hyp, plan, &lists),
            _ => ws.dfs(hyp, plan, &lists, 0, 0.0, Occupancy::default()),
        }
        ws.lists = lists;
        if let Some(stopped) = ws.stopped {
            // Not exact: report nothing rather than a wrong K best.
            ws.best.clear();
            return stopped;
        }
        if !ws.best.is_empty() {
            SearchStatus::Found
        } else if let (Some(e), false) = (nu_error, nu_ok) {
            SearchStatus::NeutrinoFailed(e)
        } else {
            SearchStatus::NoValidAssignment
        }
    }
}

/// Searches every event in parallel (rayon; one [`Searcher`] per worker),
/// returning outcomes in input order.
///
/// # Errors
/// [`SearchConfigError`] if the configuration is invalid.
///
/// ```
/// use quarry_assign::{presets, search_all, SearchConfig};
/// let h = presets::get("bwbw-ljets").unwrap();
/// let events = vec![quarry_event::Event::new(1), quarry_event::Event::new(2)];
/// let out = search_all(&h, &events, &SearchConfig::default()).unwrap();
/// assert_eq!(out.len(), 2);
/// ```
pub fn search_all(
    hyp: &Hypothesis,
    events: &[Event],
    config: &SearchConfig,
) -> Result<Vec<SearchOutcome>, SearchConfigError> {
    let proto = Searcher::new(hyp, *config)?;
    Ok(events
        .par_iter()
        .map_init(|| proto.clone(), |s, e| s.search(e))
        .collect())
}
