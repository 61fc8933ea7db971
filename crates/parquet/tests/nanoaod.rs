//! The Parquet reader on real events: 200 simulated events of CMS Open
//! Data (2015, NanoAOD format; ../shared/data/README.md), converted to
//! tests/fixtures/nanoaod-200ev.parquet by scripts/root_to_parquet.py and
//! compared with what `uproot` (PyPI) reads from the original ROOT file:
//! tests/reference/fixtures/nanoaod_parquet.json, written by
//! tests/reference/nanoaod_parquet.py.

use std::path::{Path, PathBuf};

use quarry_event::{Event, Selection};
use quarry_parquet::{ColumnMap, Layout, ParquetReader, ReadOptions, Record};
use serde_json::Value;

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn reference() -> Value {
    let text =
        std::fs::read_to_string(repo().join("tests/reference/fixtures/nanoaod_parquet.json"))
            .expect("fixture written by tests/reference/nanoaod_parquet.py");
    serde_json::from_str(&text).unwrap()
}

fn read(map: ColumnMap, options: ReadOptions) -> Vec<Record> {
    let path = repo().join("tests/fixtures/nanoaod-200ev.parquet");
    ParquetReader::open(&path, Some(Layout::PerEvent(Box::new(map))), options)
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap()
}

fn good(records: Vec<Record>) -> Vec<Event> {
    records
        .into_iter()
        .map(|r| match r {
            Record::Good(e) => e,
            Record::Bad(b) => panic!("bad event: {b}"),
        })
        .collect()
}

fn map_2015() -> ColumnMap {
    ColumnMap::load(
        repo()
            .join("tests/fixtures/nanoaod-2015.toml")
            .to_str()
            .unwrap(),
    )
    .unwrap()
}

/// A value quarry holds as f64, rounded to the float32 it came from.
fn as_f32(x: f64) -> f64 {
    f64::from(x as f32)
}

#[test]
fn events_read_as_uproot_reads_them() {
    let reference = reference();
    let expected = reference["events"].as_array().unwrap();
    let events = good(read(map_2015(), ReadOptions::default()));
    assert_eq!(events.len(), 200, "uproot reads 200 events");
    assert_eq!(expected.len(), 200);
    let mut lead_jets = 0;
    let mut tagged = 0;
    for (event, want) in events.iter().zip(expected) {
        let id = want["event"].as_u64().unwrap();
        assert_eq!(event.id, id);
        // Float32 values widen to f64 exactly; quarry keeps those that it
        // does not transform exactly (weight, b-tag, MET covariance).
        assert_eq!(event.weight, want["weight"].as_f64().unwrap(), "event {id}");
        let counts = &want["counts"];
        assert_eq!(event.jets.len() as u64, counts["jets"].as_u64().unwrap());
        assert_eq!(
            event.fat_jets.len() as u64,
            counts["fatjets"].as_u64().unwrap()
        );
        assert_eq!(
            event.electrons.len() as u64,
            counts["electrons"].as_u64().unwrap()
        );
        assert_eq!(event.muons.len() as u64, counts["muons"].as_u64().unwrap());
        let btags: Vec<f64> = event.jets.iter().map(|j| j.btag).collect();
        let want_btags: Vec<f64> = want["btag"]
            .as_array()
            .unwrap()
            .iter()
            .map(|b| b.as_f64().unwrap())
            .collect();
        assert_eq!(btags, want_btags, "event {id}");
        tagged += btags.iter().filter(|&&b| b > 0.5).count();
        // pt/eta/phi/mass become a Cartesian four-vector; read back and
        // rounded to float32 they must be uproot's float32 values exactly
        // (the round trip's error, ~1e-15 relative, is far below float32's
        // 6e-8).
        if let Some(lead) = want["lead_jet"].as_array() {
            let p4 = event.jets[0].p4;
            let got = [p4.pt(), p4.eta(), p4.phi(), p4.m()].map(as_f32);
            let mut want: Vec<f64> = lead.iter().map(|x| x.as_f64().unwrap()).collect();
            // The map's negative_mass = "zero" (uproot reads -0.0084 for
            // one leading jet).
            want[3] = want[3].max(0.0);
            assert_eq!(
                got.to_vec(),
                want,
                "event {id} leading jet pt, eta, phi, mass"
            );
            lead_jets += 1;
        } else {
            assert!(event.jets.is_empty());
        }
        let met = &want["met"];
        assert_eq!(
            as_f32(event.met.pt()),
            met["pt"].as_f64().unwrap(),
            "event {id}"
        );
        assert_eq!(
            as_f32(event.met.phi()),
            met["phi"].as_f64().unwrap(),
            "event {id}"
        );
        let cov: Vec<f64> = met["cov"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        assert_eq!(event.met.cov.unwrap().to_vec(), cov, "event {id}");
        // Object counts after quarry's default selection, as the reference
        // script computes them with the same thresholds.
        let mut selected = event.clone();
        let selection = Selection::default();
        selection.apply(&mut selected);
        let s = &want["selected"];
        let got = [
            selected.jets.len(),
            selected
                .jets
                .iter()
                .filter(|j| selection.is_btagged(j))
                .count(),
            selected.fat_jets.len(),
            selected.electrons.len(),
            selected.muons.len(),
        ];
        let want_sel = ["jets", "bjets", "fatjets", "electrons", "muons"]
            .map(|k| s[k].as_u64().unwrap() as usize);
        assert_eq!(
            got, want_sel,
            "event {id}: selected jets, b-jets, fat jets, electrons, muons"
        );
    }
    // The comparison covered real content, not empty events.
    assert!(lead_jets > 150, "{lead_jets} events with a jet");
    assert!(tagged > 20, "{tagged} jets with a CSVv2 score above 0.5");
    assert!(events.iter().any(|e| e.met.cov.unwrap()[1] != 0.0));
}

#[test]
fn shipped_nanoaod_map_reads_every_event_and_reads_the_not_computed_score_as_untagged() {
    // This file's Jet_btagDeepFlavB is -3000 for every jet (uproot); the
    // shipped map reads negative scores as untagged.
    let events = good(read(
        ColumnMap::named("nanoaod").unwrap(),
        ReadOptions::default(),
    ));
    assert_eq!(events.len(), 200);
    assert!(events.iter().flat_map(|e| &e.jets).all(|j| j.btag == 0.0));
    assert!(events.iter().map(|e| e.jets.len()).sum::<usize>() > 500);
}

#[test]
fn order_and_content_do_not_depend_on_batches_or_parallel_row_groups() {
    let reference = good(read(map_2015(), ReadOptions::default()));
    assert_eq!(reference_json_row_groups(), 4);
    for (batch_rows, decode_ahead) in [(1, 1), (7, 3), (64, 4), (1000, 1)] {
        let options = ReadOptions {
            batch_rows,
            decode_ahead,
            ..ReadOptions::default()
        };
        assert_eq!(
            good(read(map_2015(), options)),
            reference,
            "{batch_rows} {decode_ahead}"
        );
    }
}

fn reference_json_row_groups() -> u64 {
    reference()["row_groups"].as_u64().unwrap()
}

#[test]
fn rejecting_negative_masses_names_file_row_group_row_and_column() {
    // With the default policy a slightly negative NanoAOD mass is bad
    // input: the event is kept as a bad record that says where.
    let mut map = map_2015();
    for c in [
        &mut map.jets,
        &mut map.electrons,
        &mut map.muons,
        &mut map.fatjets,
    ] {
        c.as_mut().unwrap().negative_mass = quarry_parquet::NegativePolicy::Reject;
    }
    let records = read(map, ReadOptions::default());
    assert_eq!(records.len(), 200, "every event accounted for");
    let bad: Vec<_> = records
        .iter()
        .filter_map(|r| match r {
            Record::Bad(b) => Some(b),
            Record::Good(_) => None,
        })
        .collect();
    // uproot: 2 events have a negative jet mass, 39 a negative electron
    // mass (some may coincide).
    assert!(bad.len() >= 39 && bad.len() <= 41, "{}", bad.len());
    let text = bad[0].to_string();
    assert!(text.contains("nanoaod-200ev.parquet: row group"), "{text}");
    assert!(text.contains("_mass'["), "{text}");
    assert!(text.contains("is negative"), "{text}");
    for b in &bad {
        assert_eq!(b.location.row_group as u64, b.location.row / 64);
    }
}
