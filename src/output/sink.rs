//! [`RowSink`]: where output rows go, one implementation per format;
//! [`CsvSink`] is the CSV one.

use super::Row;

/// Where output rows go: one implementation per output format, so that a
/// new format plugs in without touching the pipeline or the streaming code.
///
/// A sink works in two steps because `quarry reco` formats rows on the
/// worker threads and writes them on one thread in input order:
/// [`prepare`](Self::prepare) turns one event's rows into whatever the
/// format wants to carry across (CSV text, or the rows themselves for a
/// columnar format that batches them), and [`write`](Self::write) takes
/// those in input order. [`finish`](Self::finish) commits the output; a
/// sink dropped without it must leave no partial file under the output's
/// name.
///
/// ```
/// use quarry::output::{Row, RowSink};
///
/// /// Counts rows by status, writing nothing.
/// #[derive(Default)]
/// struct Count(std::collections::BTreeMap<&'static str, usize>);
///
/// impl RowSink for Count {
///     type Prepared = Vec<&'static str>;
///     type Error = std::convert::Infallible;
///     fn prepare(rows: &[Row]) -> Self::Prepared {
///         rows.iter().map(|r| r.status).collect()
///     }
///     fn write(&mut self, prepared: Self::Prepared) -> Result<(), Self::Error> {
///         for s in prepared {
///             *self.0.entry(s).or_default() += 1;
///         }
///         Ok(())
///     }
///     fn finish(self) -> Result<(), Self::Error> {
///         Ok(())
///     }
/// }
///
/// let mut count = Count::default();
/// count.write(Count::prepare(&[Row::bad_input(0, None, "ttbar-ljets", "x")])).unwrap();
/// assert_eq!(count.0["bad_input"], 1);
/// ```
pub trait RowSink {
    /// One event's rows as prepared on a worker thread.
    type Prepared: Send;
    /// A write error.
    type Error;

    /// Prepares one event's rows (called on the worker threads).
    fn prepare(rows: &[Row]) -> Self::Prepared;

    /// Writes one event's prepared rows (called in input order).
    fn write(&mut self, prepared: Self::Prepared) -> Result<(), Self::Error>;

    /// Commits the output.
    fn finish(self) -> Result<(), Self::Error>;
}

/// The CSV output of `quarry reco`: the header ([`COLUMNS`](super::COLUMNS)) and one record
/// per row, formatted on the workers by [`Row::write_csv`]. Written to a
/// temporary file renamed over the target by [`finish`](RowSink::finish)
/// (`-` is standard output, `.gz` gzips); see [`quarry_csv::RowWriter`].
///
/// ```
/// use quarry::output::{CsvSink, Row, RowSink};
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("rows.csv");
/// let mut sink = CsvSink::create(&path).unwrap();
/// sink.write(CsvSink::prepare(&[Row::bad_input(0, Some(4), "ttbar-ljets", "x")])).unwrap();
/// sink.finish().unwrap();
/// let text = std::fs::read_to_string(&path).unwrap();
/// assert!(text.starts_with("ordinal,event,hypothesis,status,"));
/// assert!(text.lines().nth(1).unwrap().starts_with("0,4,ttbar-ljets,bad_input,x,"));
/// ```
pub struct CsvSink {
    writer: quarry_csv::RowWriter<Row>,
}

impl CsvSink {
    /// Creates the output (nothing is visible under its name before
    /// [`finish`](RowSink::finish)).
    pub fn create(path: &std::path::Path) -> Result<CsvSink, quarry_csv::CsvError> {
        Ok(CsvSink {
            writer: quarry_csv::RowWriter::create(path)?,
        })
    }

    /// The hidden temporary file the rows go to until the output is
    /// committed; `None` for standard output
    /// ([`quarry_csv::RowWriter::temp_path`]).
    pub fn temp_path(&self) -> Option<&std::path::Path> {
        self.writer.temp_path()
    }
}

impl RowSink for CsvSink {
    type Prepared = Vec<u8>;
    type Error = quarry_csv::CsvError;

    fn prepare(rows: &[Row]) -> Vec<u8> {
        let mut bytes = Vec::with_capacity(256 * rows.len());
        for row in rows {
            row.write_csv(&mut bytes);
        }
        bytes
    }

    fn write(&mut self, prepared: Vec<u8>) -> Result<(), Self::Error> {
        self.writer.write_encoded(&prepared)
    }

    fn finish(self) -> Result<(), Self::Error> {
        self.writer.finish()
    }
}
