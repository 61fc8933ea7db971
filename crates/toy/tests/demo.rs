//! The bundled demo files in demo-events/ are what `make_demo` writes today:
//! each reads back cleanly with quarry-csv, carries truth labels, and its
//! first events equal the generator's output for the configuration and seed
//! stored beside it. (If the generator or a default changes, regenerate with
//! `cargo run -p quarry-toy --example make_demo`.)

use std::path::Path;

use quarry_csv::{EventReader, ReadOptions, Record};
use quarry_event::Event;
use quarry_lorentz::FourMomentum;
use quarry_toy::{Generator, ToyConfig};

fn close(a: &FourMomentum, b: &FourMomentum) -> bool {
    let scale = a.e().abs().max(1.0);
    (a.px() - b.px()).abs() < 1e-9 * scale
        && (a.py() - b.py()).abs() < 1e-9 * scale
        && (a.pz() - b.pz()).abs() < 1e-9 * scale
        && (a.e() - b.e()).abs() < 1e-9 * scale
}

fn same(file: &Event, gen: &Event) -> bool {
    file.id == gen.id
        && file.jets.len() == gen.jets.len()
        && file.jets.iter().zip(&gen.jets).all(|(a, b)| {
            close(&a.p4, &b.p4) && (a.btag - b.btag).abs() < 1e-12 && a.truth == b.truth
        })
        && file.fat_jets.len() == gen.fat_jets.len()
        && file
            .fat_jets
            .iter()
            .zip(&gen.fat_jets)
            .all(|(a, b)| close(&a.p4, &b.p4) && a.truth == b.truth)
        && file.electrons.len() == gen.electrons.len()
        && file.muons.len() == gen.muons.len()
        && file
            .leptons()
            .zip(gen.leptons())
            .all(|(a, b)| close(&a.p4, &b.p4) && a.charge == b.charge && a.truth == b.truth)
        && (file.met.px - gen.met.px).abs() < 1e-9 * gen.met.pt().max(1.0)
        && (file.met.py - gen.met.py).abs() < 1e-9 * gen.met.pt().max(1.0)
}

#[test]
fn demo_files_match_the_generator() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo-events");
    let seeds = [
        ("q7_bquark_900", 70_900),
        ("q7_bquark_1400", 71_400),
        ("q7_ttbar", 70_172),
    ];
    for (stem, seed) in seeds {
        let toml = std::fs::read_to_string(dir.join(format!("{stem}.toml"))).unwrap();
        assert!(toml.contains(&format!("(seed {seed})")));
        let cfg = ToyConfig::from_toml(&toml).unwrap();
        let offset = cfg.event_id_offset;
        let g = Generator::new(cfg, seed).unwrap();
        let reader =
            EventReader::open(&dir.join(format!("{stem}.csv.gz")), ReadOptions::default()).unwrap();
        let mut n = 0;
        for record in reader {
            let event = match record.unwrap() {
                Record::Good(e) => e,
                Record::Bad(b) => panic!("{stem}: bad event {b}"),
            };
            assert!(
                event.jets.iter().all(|j| j.truth.is_some()),
                "{stem}: truth on jets"
            );
            assert!(
                event.n_leptons() > 0,
                "{stem}: trigger stand-in keeps lepton events"
            );
            if n < 25 {
                let regenerated = g.generate(event.id - offset);
                assert!(
                    same(&event, &regenerated),
                    "{stem}: event {} differs",
                    event.id
                );
            }
            n += 1;
        }
        assert_eq!(n, 2000, "{stem}");
    }
}
