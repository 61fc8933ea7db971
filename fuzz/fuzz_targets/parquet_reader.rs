//! Fuzzes `quarry_parquet::ParquetReader` on mutated Parquet files (read
//! from memory): the first byte picks the layout (even: one row per event
//! through the shipped `nanoaod` column map; odd: the long form), the rest
//! is the file. Seeds are small valid files of both layouts
//! (`corpus/parquet_reader/`), so mutations land in real pages, page
//! headers, dictionaries and footers.
//!
//! Properties checked beyond "no panic" (`quarry_fuzz::parquet_checks`):
//! the iterator protocol; every row accounted for (a record per event in
//! file order, or a fatal error naming a row group, row or column); the
//! same records with 3-row batches one row group at a time as with the
//! defaults; good events within the format's limits.
#![no_main]

use libfuzzer_sys::fuzz_target;
use quarry_fuzz::parquet_checks::check_parquet;

fuzz_target!(|data: &[u8]| {
    let Some((&selector, file)) = data.split_first() else {
        return;
    };
    check_parquet(file, selector);
});
