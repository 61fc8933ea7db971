//! [`ParquetSink`]: the result rows as a typed Parquet table, the same
//! columns as the CSV output, from the same schema.

use quarry_csv::columns::{ColumnKind, RECO_COLUMNS};
use quarry_parquet::{Column as ParquetColumn, ColumnType, ParquetError, TableWriter};

use super::{Row, RowSink};

/// The Parquet type of a column kind: integers as unsigned 64-bit, 0/1
/// flags as booleans, numbers as 64-bit floats, text dictionary-encoded
/// (few distinct values: hypothesis, status, fit status). Every column is
/// nullable; null means "does not apply", like an empty CSV field.
///
/// ```
/// use quarry::output::{parquet_type, ColumnKind};
/// use quarry::parquet::ColumnType;
/// assert_eq!(parquet_type(ColumnKind::Flag), ColumnType::Boolean);
/// ```
pub const fn parquet_type(kind: ColumnKind) -> ColumnType {
    match kind {
        ColumnKind::UInt => ColumnType::UInt64,
        ColumnKind::Flag => ColumnType::Boolean,
        ColumnKind::Float => ColumnType::Float64,
        ColumnKind::Text => ColumnType::Text,
    }
}

/// The Parquet output's columns: [`RECO_COLUMNS`], in order, typed by
/// [`parquet_type`].
pub fn parquet_columns() -> Vec<ParquetColumn> {
    RECO_COLUMNS
        .iter()
        .map(|c| ParquetColumn {
            name: c.name,
            ty: parquet_type(c.kind),
        })
        .collect()
}

/// Whether an output path asks for Parquet: its suffix is `.parquet` or
/// `.pq` (any case). The output format is chosen by suffix because the
/// file does not exist yet; inputs are told apart by content.
///
/// ```
/// use std::path::Path;
/// assert!(quarry::output::is_parquet_output(Path::new("out/results.Parquet")));
/// assert!(!quarry::output::is_parquet_output(Path::new("results.csv.gz")));
/// ```
pub fn is_parquet_output(path: &std::path::Path) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("parquet") || e.eq_ignore_ascii_case("pq"))
}

/// The Parquet output of `quarry reco`: one row per event and hypothesis,
/// the CSV output's columns with the types of [`parquet_columns`], zstd,
/// row groups of [`quarry_parquet::ROW_GROUP_ROWS`] rows, written to a
/// hidden temporary file renamed over the target by
/// [`finish`](RowSink::finish) ([`TableWriter`]). The values are the CSV
/// output's, already rounded, so both outputs hold the same numbers.
///
/// ```
/// use quarry::output::{ParquetSink, Row, RowSink};
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("rows.parquet");
/// let mut sink = ParquetSink::create(&path).unwrap();
/// sink.write(ParquetSink::prepare(&[Row::bad_input(0, Some(4), "ttbar-ljets", "x")])).unwrap();
/// assert!(!path.exists());
/// sink.finish().unwrap();
/// assert!(quarry::parquet::is_parquet(&path).unwrap());
/// ```
pub struct ParquetSink {
    writer: TableWriter,
}

impl ParquetSink {
    /// Creates the output (nothing is visible under its name before
    /// [`finish`](RowSink::finish)).
    pub fn create(path: &std::path::Path) -> Result<ParquetSink, ParquetError> {
        Ok(ParquetSink {
            writer: TableWriter::create(path, &parquet_columns())?,
        })
    }

    /// The hidden temporary file the rows go to until the output is
    /// committed.
    pub fn temp_path(&self) -> &std::path::Path {
        self.writer.temp_path()
    }
}

impl RowSink for ParquetSink {
    /// The rows themselves: the table is built column by column on the
    /// writing thread.
    type Prepared = Vec<Row>;
    type Error = ParquetError;

    fn prepare(rows: &[Row]) -> Vec<Row> {
        rows.to_vec()
    }

    fn write(&mut self, prepared: Vec<Row>) -> Result<(), ParquetError> {
        for row in &prepared {
            self.writer.push(&row.typed_cells())?;
        }
        Ok(())
    }

    fn finish(self) -> Result<(), ParquetError> {
        self.writer.finish()
    }
}
