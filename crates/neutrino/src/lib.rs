//! Placeholder: this crate's issue has not landed yet.
