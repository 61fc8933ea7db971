//! quarry: event reconstruction for heavy-quark searches and top-quark
//! measurements at hadron colliders.
//!
//! This facade re-exports each stage of the data's path as its own module.
#![deny(missing_docs)]

pub use quarry_event as event;
pub use quarry_lorentz as lorentz;
pub use quarry_pdg as pdg;
