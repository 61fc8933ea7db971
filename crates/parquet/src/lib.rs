//! Parquet for quarry: events in, result rows out, on the Apache Arrow
//! project's `parquet` and `arrow` crates.
//!
//! Two input layouts:
//! - **per event** ([`Layout::PerEvent`]): one row per event and one list
//!   column per object value (`Jet_pt`, `Jet_eta`, … of length `nJet`), as
//!   awkward/uproot, pandas and polars write them. A [`ColumnMap`] (a small
//!   TOML; [`SHIPPED_MAPS`] has one for NanoAOD-style names) says which
//!   column gives what; [`template`] drafts one from a file's schema.
//! - **the long form** ([`Layout::LongForm`]): quarry's CSV schema, one row
//!   per object, stored as Parquet.
//!
//! Every event becomes exactly one [`Record`] — a good [`Event`] or a
//! [`BadRow`] naming file, row group, row and column — checked against the
//! same limits as the CSV reader. Structural problems (not Parquet, a
//! missing or mistyped mapped column, a list whose length disagrees with
//! its count) are a [`ParquetError`].
//!
//! **Design decision:** decoding is per row group and streaming. Each row
//! group is decoded on its own thread in bounded batches, a few row groups
//! at a time, and handed over in file order, so the reader is parallel,
//! keeps input order, and holds a bounded number of rows however large the
//! file or its row groups are. Only the mapped columns are read.
//!
//! Output: [`TableWriter`] writes typed columns (zstd, dictionary-encoded
//! strings) to a hidden temporary file renamed into place on
//! [`TableWriter::finish`].
//!
//! ```no_run
//! use quarry_parquet::{ColumnMap, Layout, ParquetReader, ReadOptions, Record};
//! let map = ColumnMap::named("nanoaod").unwrap();
//! let reader = ParquetReader::open("events.parquet".as_ref(), Some(Layout::PerEvent(Box::new(map))),
//!     ReadOptions::default())?;
//! for record in reader {
//!     match record? {
//!         Record::Good(event) => println!("{} jets", event.jets.len()),
//!         Record::Bad(bad) => eprintln!("{bad}"),
//!     }
//! }
//! # Ok::<(), quarry_parquet::ParquetError>(())
//! ```
//!
//! [`Event`]: quarry_event::Event
#![deny(missing_docs)]

mod columns;
mod error;
mod jagged;
mod long;
mod map;
mod reader;
mod template;
mod validate;
mod writer;

pub use error::{BadRow, Location, ParquetError, Record};
pub use map::{CollectionColumns, ColumnMap, MetColumns, NegativePolicy, SHIPPED_MAPS};
pub use reader::{is_parquet, Layout, ParquetReader, ReadOptions, MAGIC};
pub use template::{template, template_of_file};
pub use writer::{Cell, Column, ColumnType, TableWriter, ROW_GROUP_ROWS};
