//! The inputs the fuzzers found (`fuzz/regressions/<target>/`), replayed on
//! the stable toolchain in every `cargo test`, so a fixed bug stays fixed
//! without nightly or cargo-fuzz.
//!
//! Each file is a raw fuzz input: its first byte is the target's selector
//! (row limit or pipeline choice), the rest is the CSV text. The checks are
//! the fuzz targets' essentials: every record is good or bad, a good event
//! has only finite four-vectors, and reconstruction yields one result per
//! hypothesis, each with a status.

use std::path::Path;

use quarry::csv::{ErrorPolicy, EventReader, ReadOptions, Record};
use quarry::{Pipeline, Status};

fn replay(path: &Path, pipeline: &Pipeline) -> (usize, usize) {
    let bytes = std::fs::read(path).unwrap();
    let text = bytes.get(1..).unwrap_or_default().to_vec();
    let opts = ReadOptions::default().with_policy(ErrorPolicy::Skip);
    let Ok(reader) = EventReader::from_reader(std::io::Cursor::new(text), "fuzz.csv", opts) else {
        return (0, 0);
    };
    let mut worker = pipeline.worker();
    let (mut good, mut bad) = (0, 0);
    for record in reader.filter_map(Result::ok) {
        let results = match record {
            Record::Good(e) => {
                good += 1;
                for p in e.jets.iter().map(|j| j.p4).chain(e.leptons().map(|l| l.p4)) {
                    assert!(
                        [p.px(), p.py(), p.pz(), p.e()]
                            .iter()
                            .all(|x| x.is_finite()),
                        "{}: good event {} has a non-finite object {p:?}",
                        path.display(),
                        e.id
                    );
                }
                worker.reconstruct(e)
            }
            Record::Bad(b) => {
                bad += 1;
                // As `quarry reco` writes a rejected event.
                let (rows, reason) = quarry::stream::rows_of(&mut worker, 0, Record::Bad(b));
                assert!(reason.is_some());
                assert_eq!(rows.len(), pipeline.hypotheses().len());
                assert!(rows.iter().all(|r| r.status == "bad_input"));
                continue;
            }
        };
        assert_eq!(results.len(), pipeline.hypotheses().len());
        for r in &results {
            assert!(Status::ALL.contains(&r.status));
            if r.status == Status::Ok {
                assert!(r.best().is_some_and(|b| b.chi2().is_finite()));
            }
        }
    }
    (good, bad)
}

#[test]
fn fuzz_reproducers_stay_fixed() {
    let pipeline = Pipeline::builder()
        .preset("ttbar-ljets")
        .preset("bwbw-ljets")
        .fit(true)
        .build()
        .unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/regressions");
    let mut files = 0;
    // event_direct inputs are structured (arbitrary-encoded), not CSV: each
    // has its own explicit test in tests/hostile_kinematics.rs.
    for target in ["csv_reader", "pipeline"] {
        for entry in std::fs::read_dir(root.join(target)).unwrap() {
            let path = entry.unwrap().path();
            replay(&path, &pipeline);
            files += 1;
        }
    }
    assert!(files >= 1, "no reproducers under {}", root.display());
}

/// The first reproducer in particular: a jet with mass 8.9e181 (finite)
/// whose energy overflowed. It must now be a bad event, not a good one.
#[test]
fn overflowing_mass_is_a_bad_event() {
    let pipeline = Pipeline::builder().preset("ttbar-ljets").build().unwrap();
    let path =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/regressions/pipeline/overflow-mass");
    let (good, bad) = replay(&path, &pipeline);
    // Event 1 (with the overflowing mass) is bad; what follows is garbage
    // that the reader also rejects, except none of it forms a good event.
    assert!(bad >= 1, "good {good}, bad {bad}");
    let text = std::fs::read(&path).unwrap();
    let reader = EventReader::from_reader(
        std::io::Cursor::new(text[1..].to_vec()),
        "fuzz.csv",
        ReadOptions::default().with_policy(ErrorPolicy::Skip),
    )
    .unwrap();
    let first = reader.filter_map(Result::ok).next().unwrap();
    match first {
        Record::Bad(b) => {
            assert_eq!(b.id, Some(1));
            assert_eq!(b.reason(), quarry::csv::BadReason::NotFinite);
            assert!(
                b.error
                    .to_string()
                    .starts_with("fuzz.csv:5: jet four-momentum overflows"),
                "{b}"
            );
        }
        Record::Good(e) => panic!("event {} with an overflowing mass was accepted", e.id),
    }
}
