//! Fuzzes `quarry::csv::EventReader` on arbitrary bytes (plain or gzip),
//! under both error policies and a small and the default row limit.
//!
//! Properties checked beyond "no panic" (see `quarry_fuzz::check_outcome`):
//! the iterator protocol (one fatal error at most, then `None`), summary
//! counts equal the records, `Stop` ends at the first bad event and yields
//! exactly the `Skip` records up to it, every good event is finite and in
//! range, and — where a simple independent model of the format applies —
//! every contiguous block of rows becomes exactly one record.
#![no_main]

use libfuzzer_sys::fuzz_target;
use quarry::csv::{ErrorPolicy, Record, DEFAULT_MAX_OBJECTS};
use quarry_fuzz::{check_outcome, model_block_count, read_all};

fuzz_target!(|data: &[u8]| {
    // The first byte picks the row limit, so the too-many-objects path is
    // reachable with small inputs.
    let (max_objects, bytes) = match data.split_first() {
        Some((b, rest)) if b & 1 == 1 => (usize::from(b >> 4) + 1, rest),
        Some((_, rest)) => (DEFAULT_MAX_OBJECTS, rest),
        None => (DEFAULT_MAX_OBJECTS, data),
    };
    let skip = read_all(bytes, ErrorPolicy::Skip, max_objects);
    check_outcome(&skip, ErrorPolicy::Skip, max_objects);
    let stop = read_all(bytes, ErrorPolicy::Stop, max_objects);
    check_outcome(&stop, ErrorPolicy::Stop, max_objects);

    assert_eq!(skip.opened, stop.opened, "the header is read the same way");
    // Stop yields a prefix of Skip: identical records up to the first bad.
    assert!(stop.records.len() <= skip.records.len());
    assert_eq!(stop.records[..], skip.records[..stop.records.len()]);
    match stop.records.last() {
        Some(Record::Bad(_)) => {}
        _ => {
            assert_eq!(
                stop.records.len(),
                skip.records.len(),
                "Stop ended early without a bad event"
            );
            assert_eq!(stop.fatal, skip.fatal);
        }
    }
    if skip.opened.is_ok() {
        if let Some(blocks) = model_block_count(bytes) {
            assert_eq!(
                skip.records.len(),
                blocks,
                "records != contiguous row blocks"
            );
            assert!(skip.fatal.is_none(), "plain in-memory text cannot break");
        }
    }
});
