//! Errors: fatal ones that end the reading of a file (exit code 2 in the
//! CLI), and the bad event that becomes a `bad_input` row.

use std::fmt;
use std::sync::Arc;

use quarry_csv::BadReason;

/// A problem that ends the reading of a file: it cannot be opened, is not
/// Parquet, its schema does not fit the column map, or its structure is
/// inconsistent (a list column whose length disagrees with its count).
#[derive(Debug, thiserror::Error)]
pub enum ParquetError {
    /// The file could not be opened or read.
    #[error("{file}: cannot read: {source}")]
    Io {
        /// File name.
        file: String,
        /// The underlying error.
        source: std::io::Error,
    },
    /// The file does not start and end with Parquet's magic bytes `PAR1`.
    #[error("{file}: not a Parquet file (it does not start and end with the bytes 'PAR1')")]
    NotParquet {
        /// File name.
        file: String,
    },
    /// The Parquet library rejected the file (corrupt metadata or pages).
    #[error("{file}: {context}: {message}")]
    Decode {
        /// File name.
        file: String,
        /// Where: `footer`, `row group 3`, …
        context: String,
        /// The library's message.
        message: String,
    },
    /// The schema does not fit the column map or the long form.
    #[error("{file}: {message}")]
    Schema {
        /// File name.
        file: String,
        /// What is missing or of the wrong type, and what was expected.
        message: String,
    },
    /// A structural inconsistency in the data, e.g. a list column whose
    /// length disagrees with its count column.
    #[error("{file}: row group {row_group}, row {row}: {message}")]
    Structure {
        /// File name.
        file: String,
        /// 0-based row group.
        row_group: usize,
        /// 0-based row in the file.
        row: u64,
        /// What disagrees with what.
        message: String,
    },
    /// The column map itself is unusable (TOML syntax, unknown key, a
    /// collection without pt).
    #[error("column map {source_name}: {message}")]
    Map {
        /// The map's name or file.
        source_name: String,
        /// What is wrong.
        message: String,
    },
    /// Writing a Parquet output failed.
    #[error("{file}: write error: {message}")]
    Write {
        /// Output file name.
        file: String,
        /// What failed.
        message: String,
    },
}

/// Where a value sits in a Parquet file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Location {
    /// File name.
    pub file: Arc<str>,
    /// 0-based row group.
    pub row_group: usize,
    /// 0-based row in the file (over all row groups), as pandas and
    /// pyarrow number rows.
    pub row: u64,
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{}: row group {}, row {}",
            self.file, self.row_group, self.row
        )
    }
}

/// An event the reader could not accept: it surfaces as a `bad_input` row,
/// so every input event is accounted for.
///
/// Displays as `file: row group G, row R: column 'Jet_eta'[3]: 'NaN' is not
/// a finite number`.
#[derive(Clone, Debug, PartialEq)]
pub struct BadRow {
    /// The event id, when it was read.
    pub id: Option<u64>,
    /// Where the first error is (for the long form: the offending row).
    pub location: Location,
    /// Column at fault, if one is.
    pub column: Option<String>,
    /// Position in the column's list (per-event layout), if one applies.
    pub element: Option<usize>,
    /// The offending value, if one is.
    pub value: Option<String>,
    /// Category (shared with the CSV reader's summary).
    pub reason: BadReason,
    /// What was expected.
    pub message: String,
}

impl fmt::Display for BadRow {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: ", self.location)?;
        if let Some(c) = &self.column {
            write!(f, "column '{c}'")?;
            if let Some(i) = self.element {
                write!(f, "[{i}]")?;
            }
            f.write_str(": ")?;
        }
        if let Some(v) = &self.value {
            write!(f, "'{v}' ")?;
        }
        f.write_str(&self.message)
    }
}

impl std::error::Error for BadRow {}

/// One event from a Parquet input: accepted, or rejected with its error.
#[derive(Clone, Debug, PartialEq)]
pub enum Record {
    /// A valid event.
    Good(quarry_event::Event),
    /// An event the reader rejected.
    Bad(BadRow),
}

impl Record {
    /// The event id, if it was read.
    ///
    /// ```
    /// let r = quarry_parquet::Record::Good(quarry_event::Event::new(4));
    /// assert_eq!(r.id(), Some(4));
    /// ```
    pub fn id(&self) -> Option<u64> {
        match self {
            Record::Good(e) => Some(e.id),
            Record::Bad(b) => b.id,
        }
    }
}
