//! Writing a table of typed columns to Parquet (zstd, strings
//! dictionary-encoded), atomically: into a hidden temporary file beside
//! the target, renamed into place by [`TableWriter::finish`] and removed
//! if the writer is dropped unfinished.

use std::fs::{self, File};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

use arrow_array::builder::{
    ArrayBuilder, BooleanBuilder, Float64Builder, StringDictionaryBuilder, UInt32Builder,
    UInt64Builder, UInt8Builder,
};
use arrow_array::types::Int32Type;
use arrow_array::{ArrayRef, RecordBatch};
use arrow_schema::{DataType, Field, Schema};
use parquet::arrow::ArrowWriter;
use parquet::basic::{Compression, ZstdLevel};
use parquet::file::properties::WriterProperties;

use crate::ParquetError;

/// Rows per row group of a written file: large enough for good
/// compression and fast scans, small enough that a reader holds little
/// (about 2 MB of 36 result columns).
pub const ROW_GROUP_ROWS: usize = 65_536;

/// Rows buffered before they are handed to the Parquet encoder.
const BATCH_ROWS: usize = 8192;

/// A column's type in the written file. Every column is nullable: null
/// means "does not apply", like an empty CSV field.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColumnType {
    /// Unsigned 64-bit integer.
    UInt64,
    /// Unsigned 32-bit integer.
    UInt32,
    /// Unsigned 8-bit integer.
    UInt8,
    /// Boolean.
    Boolean,
    /// 64-bit float.
    Float64,
    /// String, dictionary-encoded (few distinct values, e.g. a status).
    Text,
}

/// A named, typed column.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Column {
    /// Column name.
    pub name: &'static str,
    /// Its type.
    pub ty: ColumnType,
}

/// One value of a row, matching its column's type (`None` = null).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Cell<'a> {
    /// For [`ColumnType::UInt64`].
    U64(Option<u64>),
    /// For [`ColumnType::UInt32`].
    U32(Option<u32>),
    /// For [`ColumnType::UInt8`].
    U8(Option<u8>),
    /// For [`ColumnType::Boolean`].
    Bool(Option<bool>),
    /// For [`ColumnType::Float64`].
    F64(Option<f64>),
    /// For [`ColumnType::Text`].
    Text(Option<&'a str>),
}

enum Builder {
    U64(UInt64Builder),
    U32(UInt32Builder),
    U8(UInt8Builder),
    Bool(BooleanBuilder),
    F64(Float64Builder),
    Text(StringDictionaryBuilder<Int32Type>),
}

impl Builder {
    fn new(ty: ColumnType) -> Builder {
        match ty {
            ColumnType::UInt64 => Builder::U64(UInt64Builder::with_capacity(BATCH_ROWS)),
            ColumnType::UInt32 => Builder::U32(UInt32Builder::with_capacity(BATCH_ROWS)),
            ColumnType::UInt8 => Builder::U8(UInt8Builder::with_capacity(BATCH_ROWS)),
            ColumnType::Boolean => Builder::Bool(BooleanBuilder::with_capacity(BATCH_ROWS)),
            ColumnType::Float64 => Builder::F64(Float64Builder::with_capacity(BATCH_ROWS)),
            ColumnType::Text => Builder::Text(StringDictionaryBuilder::new()),
        }
    }

    fn append(&mut self, cell: Cell<'_>) -> bool {
        match (self, cell) {
            (Builder::U64(b), Cell::U64(v)) => b.append_option(v),
            (Builder::U32(b), Cell::U32(v)) => b.append_option(v),
            (Builder::U8(b), Cell::U8(v)) => b.append_option(v),
            (Builder::Bool(b), Cell::Bool(v)) => b.append_option(v),
            (Builder::F64(b), Cell::F64(v)) => b.append_option(v),
            (Builder::Text(b), Cell::Text(v)) => b.append_option(v),
            _ => return false,
        }
        true
    }

    fn finish(&mut self) -> ArrayRef {
        match self {
            Builder::U64(b) => Arc::new(b.finish()),
            Builder::U32(b) => Arc::new(b.finish()),
            Builder::U8(b) => Arc::new(b.finish()),
            Builder::Bool(b) => Arc::new(b.finish()),
            Builder::F64(b) => Arc::new(b.finish()),
            Builder::Text(b) => Arc::new(b.finish()),
        }
    }

    fn len(&self) -> usize {
        match self {
            Builder::U64(b) => b.len(),
            Builder::U32(b) => b.len(),
            Builder::U8(b) => b.len(),
            Builder::Bool(b) => b.len(),
            Builder::F64(b) => b.len(),
            Builder::Text(b) => b.len(),
        }
    }
}

fn data_type(ty: ColumnType) -> DataType {
    match ty {
        ColumnType::UInt64 => DataType::UInt64,
        ColumnType::UInt32 => DataType::UInt32,
        ColumnType::UInt8 => DataType::UInt8,
        ColumnType::Boolean => DataType::Boolean,
        ColumnType::Float64 => DataType::Float64,
        ColumnType::Text => {
            DataType::Dictionary(Box::new(DataType::Int32), Box::new(DataType::Utf8))
        }
    }
}

/// Writes rows of typed cells to a Parquet file.
///
/// ```
/// use quarry_parquet::{Cell, Column, ColumnType, TableWriter};
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("t.parquet");
/// let columns = [Column { name: "n", ty: ColumnType::UInt64 },
///                Column { name: "status", ty: ColumnType::Text }];
/// let mut w = TableWriter::create(&path, &columns).unwrap();
/// w.push(&[Cell::U64(Some(1)), Cell::Text(Some("ok"))]).unwrap();
/// w.push(&[Cell::U64(None), Cell::Text(None)]).unwrap();
/// assert!(!path.exists());      // still in the hidden temporary file
/// w.finish().unwrap();
/// assert!(quarry_parquet::is_parquet(&path).unwrap());
/// ```
pub struct TableWriter {
    target: PathBuf,
    temporary: PathBuf,
    name: String,
    columns: Vec<Column>,
    builders: Vec<Builder>,
    schema: Arc<Schema>,
    writer: Option<ArrowWriter<File>>,
    committed: bool,
}

impl std::fmt::Debug for TableWriter {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("TableWriter")
            .field("target", &self.target)
            .finish_non_exhaustive()
    }
}

impl TableWriter {
    /// Starts writing `path` with these columns (nothing appears under
    /// `path` until [`finish`](Self::finish)).
    pub fn create(path: &Path, columns: &[Column]) -> Result<TableWriter, ParquetError> {
        static COUNTER: AtomicU64 = AtomicU64::new(0);
        let name = path.display().to_string();
        let werr = |message: String| ParquetError::Write {
            file: name.clone(),
            message,
        };
        let file_name = path
            .file_name()
            .ok_or_else(|| werr("not a file name".into()))?;
        let dir = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let temporary = dir.join(format!(
            ".{}.tmp-{}-{n}",
            file_name.to_string_lossy(),
            std::process::id()
        ));
        let schema = Arc::new(Schema::new(
            columns
                .iter()
                .map(|c| Field::new(c.name, data_type(c.ty), true))
                .collect::<Vec<_>>(),
        ));
        let file = File::create(&temporary).map_err(|e| werr(e.to_string()))?;
        let props = WriterProperties::builder()
            .set_compression(Compression::ZSTD(ZstdLevel::default()))
            .set_max_row_group_row_count(Some(ROW_GROUP_ROWS))
            .set_created_by("quarry".into())
            .build();
        let writer = ArrowWriter::try_new(file, Arc::clone(&schema), Some(props)).map_err(|e| {
            let _ = fs::remove_file(&temporary);
            werr(e.to_string())
        })?;
        Ok(TableWriter {
            target: path.to_path_buf(),
            temporary,
            name,
            columns: columns.to_vec(),
            builders: columns.iter().map(|c| Builder::new(c.ty)).collect(),
            schema,
            writer: Some(writer),
            committed: false,
        })
    }

    /// The hidden temporary file the rows go to until
    /// [`finish`](Self::finish) renames it into place.
    pub fn temp_path(&self) -> &Path {
        &self.temporary
    }

    /// Appends one row; `cells` must match the columns in number and type.
    pub fn push(&mut self, cells: &[Cell<'_>]) -> Result<(), ParquetError> {
        if cells.len() != self.columns.len() {
            return Err(self.error(format!(
                "a row has {} values, the table {} columns",
                cells.len(),
                self.columns.len()
            )));
        }
        for (i, (b, &c)) in self.builders.iter_mut().zip(cells).enumerate() {
            if !b.append(c) {
                let column = self.columns[i];
                return Err(ParquetError::Write {
                    file: self.name.clone(),
                    message: format!(
                        "column '{}' is {:?}, got the value {c:?}",
                        column.name, column.ty
                    ),
                });
            }
        }
        if self.builders[0].len() >= BATCH_ROWS {
            self.flush()?;
        }
        Ok(())
    }

    fn error(&self, message: String) -> ParquetError {
        ParquetError::Write {
            file: self.name.clone(),
            message,
        }
    }

    fn flush(&mut self) -> Result<(), ParquetError> {
        if self.builders[0].len() == 0 {
            return Ok(());
        }
        let arrays: Vec<ArrayRef> = self.builders.iter_mut().map(Builder::finish).collect();
        let batch = RecordBatch::try_new(Arc::clone(&self.schema), arrays)
            .map_err(|e| self.error(e.to_string()))?;
        let writer = self.writer.as_mut().expect("open until finish");
        writer.write(&batch).map_err(|e| ParquetError::Write {
            file: self.name.clone(),
            message: e.to_string(),
        })
    }

    /// Writes what is buffered, closes the file and renames it into place.
    pub fn finish(mut self) -> Result<(), ParquetError> {
        self.flush()?;
        let writer = self.writer.take().expect("open until finish");
        writer.close().map_err(|e| self.error(e.to_string()))?;
        fs::rename(&self.temporary, &self.target).map_err(|e| self.error(e.to_string()))?;
        self.committed = true;
        Ok(())
    }
}

impl Drop for TableWriter {
    fn drop(&mut self) {
        if !self.committed {
            self.writer.take();
            let _ = fs::remove_file(&self.temporary);
        }
    }
}
