//! quarry's own long-form CSV event format: reading events from it, writing
//! events back, and writing per-event result rows.
//!
//! The format has one row per reconstructed object (`jet`, `fatjet`,
//! `electron`, `muon`, `met`), a header naming the columns, and the rows of
//! one event contiguous. `docs/csv-format.md` describes it in full.
//!
//! **Design decision:** the reader never hides an event. Every contiguous
//! block of rows becomes exactly one [`Record`], either a good [`Event`] or a
//! [`BadEvent`] that carries its id, first line and the first error found, so
//! the pipeline can account for every input event in its output. Only a
//! broken byte stream (I/O error, truncated gzip) is a [`CsvError`], after
//! which iteration ends.
//!
//! Both writers share one piece of machinery: output goes to a temporary file
//! beside the target and is renamed into place on `finish()`.
#![deny(missing_docs)]

pub mod columns;
mod error;
mod output;
mod reader;
mod seen;
mod writer;

pub use error::{BadEvent, BadReason, CsvError, FieldError};
pub use output::AtomicOutput;
pub use quarry_event::Event;
pub use reader::{
    ErrorPolicy, EventReader, RawEvent, ReadOptions, ReadSummary, Record, UnknownColumns,
    DEFAULT_MAX_OBJECTS, ENERGY_ROUNDING_TOLERANCE, MAX_ABS_ETA, MAX_ABS_PHI, MAX_LINE_BYTES,
    STDIN_NAME,
};
pub use seen::SeenIds;
pub use writer::{encode_rows, format_f64, EventWriter, RecordText, RowWriter, EVENT_COLUMNS};
