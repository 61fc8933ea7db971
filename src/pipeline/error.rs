//! Why a pipeline could not be built.

use quarry_assign::{HypothesisError, SearchConfigError};

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
    /// Two settings name different b-tag working points (see
    /// [`PipelineBuilder::btag_threshold`](crate::PipelineBuilder::btag_threshold)).
    #[error("{setting} uses b-tag threshold {value}, but the pipeline's working point is {threshold}: set one with PipelineBuilder::btag_threshold")]
    BtagMismatch {
        /// Which setting disagrees.
        setting: &'static str,
        /// Its threshold.
        value: f64,
        /// The working point in force.
        threshold: f64,
    },
    /// The event-variable configuration is invalid.
    #[error("event variables: W mass window must be finite with low < high")]
    BadVarsConfig,
}
