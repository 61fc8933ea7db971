//! Fuzzes the whole per-event path as `quarry reco` runs it: CSV bytes →
//! `EventReader` (skip policy) → `Pipeline` worker (selection, event
//! variables, assignment search per hypothesis, optional kinematic fit) for
//! good events, and `quarry::stream::rows_of` (the CLI's own code) for
//! rejected ones.
//!
//! Properties checked beyond "no panic": every record read yields exactly
//! one result per hypothesis (so output rows = input events × hypotheses),
//! each with a status; numbers are finite or replaced by a typed status
//! (`quarry_fuzz::check_reconstructions`).
#![no_main]

use libfuzzer_sys::fuzz_target;
use quarry::csv::{ErrorPolicy, Record};
use quarry_fuzz::{check_good_event, check_reconstructions, pipelines, read_all};

fuzz_target!(|data: &[u8]| {
    let Some((&selector, bytes)) = data.split_first() else {
        return;
    };
    let all = pipelines();
    let pipeline = &all[usize::from(selector) % all.len()];
    let out = read_all(bytes, ErrorPolicy::Skip, quarry::csv::DEFAULT_MAX_OBJECTS);
    let mut worker = pipeline.worker();
    let mut rows = 0usize;
    for (ordinal, record) in out.records.iter().enumerate() {
        match record {
            Record::Good(event) => {
                check_good_event(event, quarry::csv::DEFAULT_MAX_OBJECTS);
                let results = worker.reconstruct(event.clone());
                check_reconstructions(pipeline, event.id, &results);
                rows += results.len();
            }
            Record::Bad(_) => {
                let (bad_rows, reason) =
                    quarry::stream::rows_of(&mut worker, ordinal as u64, record.clone());
                assert!(reason.is_some());
                assert!(bad_rows.iter().all(|r| r.status == "bad_input"));
                rows += bad_rows.len();
            }
        }
    }
    assert_eq!(
        rows,
        out.records.len() * pipeline.hypotheses().len(),
        "rows = events × hypotheses"
    );
});
