//! The per-event, per-hypothesis status and its mapping from the search's
//! and the fit's own statuses.

use quarry_assign::SearchStatus;
use quarry_fit::FitStatus;

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
    /// The search reached its per-event budget
    /// ([`quarry_assign::SearchBudget`]) before it was exact; the detail
    /// names the budget.
    BudgetExceeded,
    /// The search was stopped by a cancellation (a signal) while it ran.
    Cancelled,
}

impl Status {
    /// Every status, in a fixed order.
    pub const ALL: [Status; 10] = [
        Status::Ok,
        Status::TooFewJets,
        Status::TooFewLeptons,
        Status::TooFewLargeJets,
        Status::NeutrinoFailed,
        Status::NoValidAssignment,
        Status::FitNotConverged,
        Status::BadInput,
        Status::BudgetExceeded,
        Status::Cancelled,
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
            Status::BudgetExceeded => "budget_exceeded",
            Status::Cancelled => "cancelled",
        }
    }
}

impl std::fmt::Display for Status {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl Status {
    /// The status and its detail text for a search outcome: the search's
    /// own status (enough objects, a valid assignment, a neutrino) mapped
    /// one to one.
    pub(crate) fn of_search(s: &SearchStatus) -> (Status, String) {
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
            SearchStatus::BudgetExceeded(limit) => (Status::BudgetExceeded, limit.to_string()),
            SearchStatus::Cancelled => (Status::Cancelled, String::new()),
        }
    }

    /// How the fit's outcome changes a status found by the search: a fit
    /// that converged (or converged but could not invert its covariance)
    /// keeps it; any other fit outcome, or an assignment that could not
    /// become a fit input, makes it [`Status::FitNotConverged`] with the
    /// fit's status name as the detail. `None` when no fit ran.
    pub(crate) fn after_fit(
        fit: Option<&Result<quarry_fit::FitResult, quarry_fit::FitInputError>>,
    ) -> Option<(Status, String)> {
        match fit? {
            Ok(f) => match f.status {
                FitStatus::Converged | FitStatus::CovarianceFailed => None,
                FitStatus::InvalidInput(e) => {
                    Some((Status::FitNotConverged, format!("invalid_input: {e}")))
                }
                other => Some((Status::FitNotConverged, other.to_string())),
            },
            Err(e) => Some((Status::FitNotConverged, format!("invalid_input: {e}"))),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn status_names_are_distinct() {
        let mut names: Vec<&str> = Status::ALL.iter().map(|s| s.as_str()).collect();
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), Status::ALL.len());
    }

    #[test]
    fn fit_outcomes_map_to_statuses() {
        use quarry_fit::FitInputError;
        assert_eq!(Status::after_fit(None), None);
        let err: Result<quarry_fit::FitResult, FitInputError> =
            Err(FitInputError::Underconstrained);
        let (s, reason) = Status::after_fit(Some(&err)).unwrap();
        assert_eq!(s, Status::FitNotConverged);
        assert!(reason.starts_with("invalid_input: "), "{reason}");
    }
}
