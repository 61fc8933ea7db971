//! The example in docs/csv-format.md is read as documented.

use quarry_csv::{EventReader, ReadOptions, Record};

#[test]
fn documented_example_reads() {
    let doc = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../docs/csv-format.md"),
    )
    .unwrap();
    let start = doc.find("```csv\n").expect("example block") + "```csv\n".len();
    let len = doc[start..].find("```").unwrap();
    let example = doc[start..start + len].to_string();
    let reader = EventReader::from_reader(
        std::io::Cursor::new(example),
        "example.csv",
        ReadOptions::default(),
    )
    .unwrap();
    let events: Vec<_> = reader
        .map(|r| match r.unwrap() {
            Record::Good(e) => e,
            Record::Bad(b) => panic!("{b}"),
        })
        .collect();
    assert_eq!(events.len(), 2);
    let (a, b) = (&events[0], &events[1]);
    assert_eq!(
        (a.id, a.jets.len(), a.muons.len(), a.weight),
        (1001, 4, 1, 1.0)
    );
    assert_eq!(
        a.jets.iter().map(|j| j.index).collect::<Vec<_>>(),
        [0, 1, 2, 3]
    );
    assert_eq!(a.muons[0].charge, -1);
    assert!((a.met.pt() - 120.7).abs() < 1e-9);
    assert_eq!(
        (b.id, b.fat_jets.len(), b.electrons.len(), b.weight),
        (1002, 1, 1, 0.8)
    );
    assert_eq!(b.fat_jets[0].truth.unwrap().as_str(), "h.W");
    assert!((b.fat_jets[0].p4.m() - 84.0).abs() < 1e-9);
}
