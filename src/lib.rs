//! quarry: event reconstruction for heavy-quark searches and top-quark
//! measurements at hadron colliders.
//!
//! This facade re-exports each stage of the data's path as its own module
//! and adds the [`Pipeline`] that joins them: object selection, event
//! variables, the χ² assignment search for one or more hypotheses, the
//! optional kinematic fit and truth matching. The `quarry` command line is a
//! thin layer over it.
//!
//! **Design decision:** a [`Pipeline`] is immutable configuration shared by
//! every thread, and all mutable search state lives in a per-thread
//! [`Worker`], so the same code serves one event, a slice in parallel, or an
//! endless stream in bounded chunks ([`stream::ordered_chunked_map`]) with
//! results always in input order.
//!
//! ```
//! use quarry::{Pipeline, Status};
//! use quarry::toy::{Generator, ToyConfig};
//!
//! // Events built in code (here: from the toy generator), no CSV involved.
//! let events: Vec<_> = Generator::new(ToyConfig::top_pair(), 7).unwrap().take(20).collect();
//! let pipeline = Pipeline::builder().preset("ttbar-ljets").build().unwrap();
//! let results = pipeline.reconstruct_all(&events);
//! assert_eq!(results.len(), events.len());
//! for (event, per_hypothesis) in events.iter().zip(&results) {
//!     let r = &per_hypothesis[0];
//!     assert_eq!(r.event_id, event.id);
//!     if r.status == Status::Ok {
//!         assert!(r.best().unwrap().chi2() >= 0.0);
//!     }
//! }
//! ```
#![deny(missing_docs)]

// The README's Rust snippets are compiled and run as doc tests.
#[cfg(doctest)]
#[doc = include_str!("../README.md")]
pub struct ReadmeDoctests;

pub use quarry_assign as assign;
pub use quarry_calib as calib;
pub use quarry_csv as csv;
pub use quarry_eval as eval;
pub use quarry_event as event;
pub use quarry_fit as fit;
pub use quarry_lorentz as lorentz;
pub use quarry_neutrino as neutrino;
pub use quarry_parquet as parquet;
pub use quarry_pdg as pdg;
pub use quarry_resolution as resolution;
pub use quarry_toy as toy;
pub use quarry_vars as vars;

pub mod manifest;
pub mod merge;
pub mod output;
mod pipeline;
pub mod stream;

pub use pipeline::{Pipeline, PipelineBuilder, PipelineError, Reconstruction, Status, Worker};
