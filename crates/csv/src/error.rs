//! Error types: one fatal stream error, and the per-event errors that a bad
//! event carries.

use std::fmt;
use std::io;

/// An unrecoverable error: the file cannot be opened, its header is unusable,
/// the byte stream broke (I/O error, truncated gzip), or an output cannot be
/// written. After a reader returns one, iteration ends.
#[derive(Debug, thiserror::Error)]
pub enum CsvError {
    /// The input could not be opened.
    #[error("{file}: cannot open: {source}")]
    Open {
        /// File name as given (`<stdin>` for `-`).
        file: String,
        /// The underlying error.
        source: io::Error,
    },
    /// Reading the byte stream failed (I/O error, corrupt or truncated gzip).
    #[error("{file}:{line}: read error{hint}: {source}")]
    Read {
        /// File name.
        file: String,
        /// Line at which the stream broke (the last line read fully plus one).
        line: u64,
        /// Extra explanation, e.g. " (truncated or corrupt gzip stream)".
        hint: &'static str,
        /// The underlying error.
        source: io::Error,
    },
    /// The file has no header line.
    #[error("{file}: empty file: expected a header line naming the columns")]
    Empty {
        /// File name.
        file: String,
    },
    /// The header line is unusable (missing required column, duplicate
    /// column, not UTF-8).
    #[error("{file}:{line}: header: {message}")]
    Header {
        /// File name.
        file: String,
        /// Line of the header (1 unless comment lines precede it).
        line: u64,
        /// What is wrong.
        message: String,
    },
    /// A carriage return (CR) that does not end a line: the file (or its
    /// rest) uses CR-only line ends, which the reader does not read.
    #[error(
        "{file}:{line}: a carriage return (CR) inside a line: the file uses CR-only line ends, \
         which quarry does not read (its rows would run together); convert them to LF, \
         e.g. tr '\\r' '\\n' < IN > OUT"
    )]
    LineEnds {
        /// File name.
        file: String,
        /// Line (counted by LF) holding the CR.
        line: u64,
    },
    /// Writing an output failed.
    #[error("{file}: write error: {source}")]
    Write {
        /// Output file name (`<stdout>` for `-`).
        file: String,
        /// The underlying error.
        source: io::Error,
    },
    /// A value cannot be written (non-finite number, unphysical
    /// four-momentum, serialisation failure).
    #[error("{file}: cannot write event {event}: {message}")]
    Value {
        /// Output file name.
        file: String,
        /// Event id (0 for rows that have none).
        event: u64,
        /// What is wrong.
        message: String,
    },
}

/// Category of a bad event, used to summarise skipped events by reason.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum BadReason {
    /// The `event` field is empty or not an unsigned integer.
    BadEventId,
    /// A numeric field does not parse as a number.
    NotANumber,
    /// A numeric field is NaN or infinite.
    NotFinite,
    /// A value lies outside its allowed range (negative pt, btag outside
    /// [0, 1], charge not ±1, |η| too large, …).
    OutOfRange,
    /// A value the row's kind needs is empty.
    MissingValue,
    /// The `kind` field is not one of the known kinds.
    UnknownKind,
    /// More than one `met` row in the event.
    DuplicateMet,
    /// The event has more objects than the configured limit.
    TooManyObjects,
    /// Rows of this event id already appeared earlier, not contiguously.
    SplitEvent,
    /// `weight` differs between rows of the event.
    InconsistentWeight,
    /// `truth` is not a valid label.
    BadTruth,
    /// MET covariance incomplete or not positive semi-definite.
    BadCovariance,
    /// A field is not valid UTF-8.
    BadUtf8,
    /// The row has a different number of fields than the header.
    FieldCount,
    /// The stream broke while this event was being read.
    Truncated,
    /// A line is not valid CSV (unterminated quote, text after a closing
    /// quote) or is longer than the line limit.
    Syntax,
}

impl BadReason {
    /// Short stable name, used in summaries and status columns.
    ///
    /// ```
    /// assert_eq!(quarry_csv::BadReason::NotFinite.as_str(), "not-finite");
    /// ```
    pub fn as_str(self) -> &'static str {
        match self {
            BadReason::BadEventId => "bad-event-id",
            BadReason::NotANumber => "not-a-number",
            BadReason::NotFinite => "not-finite",
            BadReason::OutOfRange => "out-of-range",
            BadReason::MissingValue => "missing-value",
            BadReason::UnknownKind => "unknown-kind",
            BadReason::DuplicateMet => "duplicate-met",
            BadReason::TooManyObjects => "too-many-objects",
            BadReason::SplitEvent => "split-event",
            BadReason::InconsistentWeight => "inconsistent-weight",
            BadReason::BadTruth => "bad-truth",
            BadReason::BadCovariance => "bad-covariance",
            BadReason::BadUtf8 => "bad-utf8",
            BadReason::FieldCount => "field-count",
            BadReason::Truncated => "truncated",
            BadReason::Syntax => "syntax",
        }
    }
}

impl fmt::Display for BadReason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// What is wrong with one field (or row) of the input, with its location.
///
/// Displays as `file:line: column 'c': 'value' expected…`, or
/// `file:line: message` when no single column is at fault.
#[derive(Clone, Debug, PartialEq)]
pub struct FieldError {
    /// File name.
    pub file: String,
    /// 1-based line number of the offending row.
    pub line: u64,
    /// Column at fault, if one is.
    pub column: Option<String>,
    /// The offending value as read (lossy UTF-8), if one is.
    pub value: Option<String>,
    /// Category.
    pub reason: BadReason,
    /// What was expected, e.g. `is not a number`.
    pub message: String,
}

impl fmt::Display for FieldError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}:{}: ", self.file, self.line)?;
        if let Some(c) = &self.column {
            write!(f, "column '{c}': ")?;
        }
        if let Some(v) = &self.value {
            write!(f, "'{v}' ")?;
        }
        f.write_str(&self.message)
    }
}

impl std::error::Error for FieldError {}

/// An event the reader could not accept. It still surfaces to the caller, so
/// that every input event can be accounted for in the output.
#[derive(Clone, Debug, PartialEq)]
pub struct BadEvent {
    /// The event id, when the `event` field parsed.
    pub id: Option<u64>,
    /// The `event` field as written (lossy UTF-8), useful when `id` is `None`.
    pub raw_id: String,
    /// Line of the event's first row.
    pub first_line: u64,
    /// Number of rows the event spans.
    pub rows: u64,
    /// The first error found in the event.
    pub error: FieldError,
}

impl BadEvent {
    /// The error's category.
    ///
    /// ```
    /// # use quarry_csv::{BadEvent, BadReason, FieldError};
    /// let e = FieldError { file: "a.csv".into(), line: 3, column: None, value: None,
    ///     reason: BadReason::DuplicateMet, message: "second met row".into() };
    /// let bad = BadEvent { id: Some(4), raw_id: "4".into(), first_line: 2, rows: 2, error: e };
    /// assert_eq!(bad.reason(), BadReason::DuplicateMet);
    /// ```
    pub fn reason(&self) -> BadReason {
        self.error.reason
    }
}

impl fmt::Display for BadEvent {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.id {
            Some(id) => write!(
                f,
                "event {id} (from line {}): {}",
                self.first_line, self.error
            ),
            None => write!(
                f,
                "event '{}' (from line {}): {}",
                self.raw_id, self.first_line, self.error
            ),
        }
    }
}

impl std::error::Error for BadEvent {}
