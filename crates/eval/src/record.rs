//! The plain record the evaluation works on, the sample description, and the
//! crate's error type.

use std::path::PathBuf;

/// Status name of a reconstructed event (the reconstruction's own `ok`).
pub const OK_STATUS: &str = "ok";

/// One event reconstructed under one hypothesis, as the evaluation needs it.
///
/// Independent of any file format: build records directly from a pipeline
/// in Rust, or read them from the reconstruction's output CSV with
/// [`crate::read_records`].
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EvalRecord {
    /// Sample name (e.g. `T1000` or `ttbar`).
    pub sample: String,
    /// Generated heavy-quark mass \[GeV\] of a signal sample; `None` for a
    /// background sample.
    pub generated_mass: Option<f64>,
    /// Hypothesis name.
    pub hypothesis: String,
    /// Status name; [`OK_STATUS`] for a reconstructed event.
    pub status: String,
    /// Reconstructed mass \[GeV\] (finite when set).
    pub mass: Option<f64>,
    /// χ² of the chosen assignment.
    pub chi2: Option<f64>,
    /// χ² probability of the kinematic fit, when it ran.
    pub fit_prob: Option<f64>,
    /// Whether the chosen assignment matches the truth; `None` without
    /// truth labels.
    pub truth_match: Option<bool>,
    /// Per-composite truth match `(composite, matched)`, when known.
    pub composite_matches: Vec<(String, bool)>,
    /// Name of the column `mass` was taken from (empty when unknown, e.g.
    /// a record built in code).
    pub mass_column: String,
    /// Every candidate mass column ([`crate::MASS_CANDIDATES`]) that has a
    /// value on this row, `(column, value)`: what
    /// [`crate::choose_mass_columns`] compares.
    pub mass_candidates: Vec<(String, f64)>,
}

impl EvalRecord {
    /// Whether the event was reconstructed ([`OK_STATUS`]).
    pub fn is_ok(&self) -> bool {
        self.status == OK_STATUS
    }
}

/// A sample to evaluate: a name, an optional generated mass, and the file
/// holding its reconstruction output.
///
/// Written `NAME[@MASS]=FILE` on the command line: `T1000@1000=t1000.csv` is
/// a signal sample generated at 1000 GeV, `ttbar=tt.csv` a background.
/// The name may not contain `@` or `=`; the file is everything after the
/// first `=`.
#[derive(Clone, Debug, PartialEq)]
pub struct SampleSpec {
    /// Sample name.
    pub name: String,
    /// Generated mass \[GeV\], positive and finite; `None` for background.
    pub generated_mass: Option<f64>,
    /// Reconstruction output file.
    pub path: PathBuf,
}

impl std::str::FromStr for SampleSpec {
    type Err = EvalError;

    /// Parses `NAME[@MASS]=FILE`.
    ///
    /// ```
    /// use quarry_eval::SampleSpec;
    /// let s: SampleSpec = "T1000@1000=out/t1000.csv".parse().unwrap();
    /// assert_eq!((s.name.as_str(), s.generated_mass), ("T1000", Some(1000.0)));
    /// assert_eq!(s.path, std::path::PathBuf::from("out/t1000.csv"));
    /// let b: SampleSpec = "ttbar=tt.csv".parse().unwrap();
    /// assert_eq!(b.generated_mass, None);
    /// assert!("T1000@heavy=x.csv".parse::<SampleSpec>().is_err());
    /// assert!("no-file".parse::<SampleSpec>().is_err());
    /// ```
    fn from_str(text: &str) -> Result<SampleSpec, EvalError> {
        let bad = |why: &str| EvalError::BadSample {
            spec: text.to_string(),
            why: why.to_string(),
        };
        let (head, path) = text
            .split_once('=')
            .ok_or_else(|| bad("expected NAME[@MASS]=FILE"))?;
        if path.is_empty() {
            return Err(bad("the file is empty"));
        }
        let (name, mass) = match head.split_once('@') {
            Some((name, mass)) => {
                let m: f64 = mass
                    .trim()
                    .parse()
                    .map_err(|_| bad("the mass after @ is not a number"))?;
                if !(m.is_finite() && m > 0.0) {
                    return Err(bad("the mass must be positive and finite (GeV)"));
                }
                (name, Some(m))
            }
            None => (head, None),
        };
        let name = name.trim();
        if name.is_empty() {
            return Err(bad("the sample name is empty"));
        }
        Ok(SampleSpec {
            name: name.to_string(),
            generated_mass: mass,
            path: PathBuf::from(path),
        })
    }
}

/// Everything that can go wrong in the evaluation.
#[derive(Debug, thiserror::Error)]
pub enum EvalError {
    /// A sample description that does not parse.
    #[error("bad sample '{spec}': {why}")]
    BadSample {
        /// The text given.
        spec: String,
        /// What is wrong.
        why: String,
    },
    /// A file could not be opened, read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The CSV itself is malformed (unequal field counts, bad UTF-8, …).
    #[error("{source_name}: {message}")]
    Csv {
        /// File name or stream description.
        source_name: String,
        /// The CSV reader's message, with the line.
        message: String,
    },
    /// A required column is missing from the header.
    #[error("{source_name}: missing column '{column}'")]
    MissingColumn {
        /// File name or stream description.
        source_name: String,
        /// The column.
        column: String,
    },
    /// A field that does not hold what its column promises.
    #[error("{source_name}:{line}: column '{column}': {why} (got '{value}')")]
    BadValue {
        /// File name or stream description.
        source_name: String,
        /// 1-based line number.
        line: u64,
        /// The column.
        column: String,
        /// The field's text.
        value: String,
        /// What is wrong.
        why: String,
    },
    /// A plot was asked for with nothing to draw.
    #[error("nothing to plot: {0}")]
    NothingToPlot(String),
    /// The plotting backend failed.
    #[error("plot {path}: {message}")]
    Plot {
        /// The output file.
        path: PathBuf,
        /// The backend's message.
        message: String,
    },
}
