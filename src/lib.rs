//! quarry: event reconstruction for heavy-quark searches and top-quark
//! measurements at hadron colliders.
//!
//! This facade re-exports each stage of the data's path as its own module.
#![deny(missing_docs)]

pub use quarry_assign as assign;
pub use quarry_csv as csv;
pub use quarry_eval as eval;
pub use quarry_event as event;
pub use quarry_fit as fit;
pub use quarry_lorentz as lorentz;
pub use quarry_neutrino as neutrino;
pub use quarry_pdg as pdg;
pub use quarry_resolution as resolution;
pub use quarry_toy as toy;
pub use quarry_vars as vars;
