//! Evaluation of the reconstruction on simulation: how often it picks the
//! right objects, how well it resolves the mass, and plots of both.
//!
//! **Design decision:** everything works on a plain [`EvalRecord`] (sample,
//! generated mass, hypothesis, status, mass, χ², fit probability, truth
//! verdict), not on a file format. A Rust caller builds records straight
//! from a pipeline; the CLI reads them from the reconstruction's output CSV
//! with [`read_records`] (columns by header name, unknown columns ignored).
//! The rows do not carry the sample or its generated mass, so those come
//! from the caller — on the command line as a [`SampleSpec`],
//! `NAME[@MASS]=FILE`.
//!
//! # Metrics, per (sample, hypothesis) ([`evaluate`] → [`Summary`])
//! - **status counts**: rows per status name;
//! - **right-assignment fraction**: `ok` rows whose chosen assignment
//!   matches the truth, among `ok` rows with a truth verdict, with the
//!   normal-approximation error √(p(1−p)/n) and the 68 % Wilson score
//!   interval ([`stats::Fraction`]); per composite when the input carries
//!   per-composite verdicts (`truth_composites`);
//! - **mass resolution** ([`MassResolution`]), over *all* `ok` rows with a
//!   mass (right and wrong assignments alike, as in data): peak and core σ
//!   from an iterative ±2σ Gaussian-core estimate ([`stats::gaussian_core`]),
//!   the half-width of the narrowest interval holding 68.27 % of the masses,
//!   and the tail fraction beyond peak ± 3 core σ; relative to the generated
//!   mass for signal;
//! - **χ² and fit probability**: 10/50/90 % quantiles ([`Quantiles`]) for
//!   right and wrong assignments.
//!
//! Event weights are not used: every row counts once (the toy generator
//! gives weight 1; with weighted simulation the fractions are raw-event
//! fractions).
//!
//! # Outputs
//! [`write_summary_csv`] (stable columns [`SUMMARY_COLUMNS`]),
//! [`markdown_table`], and SVG plots: [`plot_mass`] (signal vs background),
//! [`plot_chi2`] and [`plot_fit_prob`] (right vs wrong),
//! [`plot_right_fraction`] (against generated mass). The SVGs use plotters'
//! built-in text layout, which needs no system fonts: text is written as
//! `<text>` elements in the generic `sans-serif` family.
//!
//! ```
//! use quarry_eval::{evaluate, read_records, MassColumn};
//! let csv = "hypothesis,status,mass_avg,chi2,truth_match\n\
//!            bwbw-ljets,ok,1003,0.8,1\n\
//!            bwbw-ljets,ok,640,7.5,0\n\
//!            bwbw-ljets,too_few_jets,,,\n";
//! let records = read_records(csv.as_bytes(), "demo", "T1000", Some(1000.0), &MassColumn::Auto)?;
//! let summary = evaluate(&records);
//! let g = summary.get("T1000", "bwbw-ljets").unwrap();
//! assert_eq!(g.n_ok, 2);
//! assert_eq!(g.right.unwrap().value(), 0.5);
//! assert!(g.mass.is_none()); // two masses are too few for a core estimate
//! # Ok::<(), quarry_eval::EvalError>(())
//! ```
#![deny(missing_docs)]

mod choice;
mod plot;
mod read;
mod record;
pub mod stats;
mod summary;

pub use choice::{
    choose_mass_columns, mass_choice_table, ColumnClosure, MassChoice, SampleClosure,
};
pub use plot::{
    plot_chi2, plot_fit_prob, plot_mass, plot_mass_with, plot_right_fraction, MassPlot, PLOT_SIZE,
};
pub use read::{read_records, read_sample, MassColumn, MASS_CANDIDATES};
pub use record::{EvalError, EvalRecord, SampleSpec, OK_STATUS};
pub use stats::Fraction;
pub use summary::{
    evaluate, markdown_table, summary_row, write_summary_csv, GroupSummary, MassResolution,
    Quantiles, Summary, SUMMARY_COLUMNS, TAIL_CUT,
};
