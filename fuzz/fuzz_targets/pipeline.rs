//! Fuzzes the whole per-event path as `quarry reco` runs it: CSV bytes →
//! `EventReader` (skip policy) → `Pipeline` worker (selection, event
//! variables, assignment search per hypothesis, optional kinematic fit) or
//! `Pipeline::bad_input` for rejected events.
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
    for record in &out.records {
        let (id, results) = match record {
            Record::Good(event) => {
                check_good_event(event, quarry::csv::DEFAULT_MAX_OBJECTS);
                (event.id, worker.reconstruct(event.clone()))
            }
            Record::Bad(bad) => {
                let id = bad.id.unwrap_or(0);
                (id, pipeline.bad_input(id, &bad.to_string()))
            }
        };
        check_reconstructions(pipeline, id, &results);
        if matches!(record, Record::Bad(_)) {
            assert!(results.iter().all(|r| r.status == quarry::Status::BadInput));
        }
        rows += results.len();
    }
    assert_eq!(
        rows,
        out.records.len() * pipeline.hypotheses().len(),
        "rows = events × hypotheses"
    );
});
