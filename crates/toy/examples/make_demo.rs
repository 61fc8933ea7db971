//! Regenerates the bundled demo events in `demo-events/`.
//!
//! The scenario is invented: run "Q-7" of the imaginary Tessera Hadron
//! Collider at √s = 14 TeV, with a down-type heavy quark B (B → tW / bZ / bH
//! at 50 / 25 / 25 %) at 900 and 1400 GeV, and top-pair background. Events
//! pass a single-lepton trigger stand-in: at least one electron or muon with
//! pt > 25 GeV.
//!
//! ```text
//! cargo run -p quarry-toy --example make_demo            # writes demo-events/
//! cargo run -p quarry-toy --example make_demo -- OUT_DIR # writes elsewhere
//! ```
//!
//! Output is deterministic: the same code writes byte-identical files.

use std::path::{Path, PathBuf};

use quarry_csv::EventWriter;
use quarry_event::Event;
use quarry_toy::{Generator, HeavyQuark, Partner, ToyConfig};

/// Events written per file.
const EVENTS_PER_FILE: usize = 2000;
/// Trigger stand-in: lowest pt [GeV] of the leading electron or muon.
const TRIGGER_LEPTON_PT: f64 = 25.0;

struct Sample {
    stem: &'static str,
    config: ToyConfig,
    seed: u64,
}

fn samples() -> Vec<Sample> {
    let signal = |mass: f64, offset: u64| {
        let mut cfg = ToyConfig::heavy_pair(HeavyQuark::new(Partner::DownType, mass));
        cfg.event_id_offset = offset;
        cfg
    };
    let mut ttbar = ToyConfig::top_pair();
    ttbar.event_id_offset = 3_000_000;
    vec![
        Sample {
            stem: "q7_bquark_900",
            config: signal(900.0, 1_000_000),
            seed: 70_900,
        },
        Sample {
            stem: "q7_bquark_1400",
            config: signal(1400.0, 2_000_000),
            seed: 71_400,
        },
        Sample {
            stem: "q7_ttbar",
            config: ttbar,
            seed: 70_172,
        },
    ]
}

fn triggered(e: &Event) -> bool {
    e.leptons().any(|l| l.p4.pt() > TRIGGER_LEPTON_PT)
}

fn write_sample(dir: &Path, s: &Sample) -> Result<(usize, u64), Box<dyn std::error::Error>> {
    let toml_path = dir.join(format!("{}.toml", s.stem));
    let header = format!(
        "# quarry toy configuration for demo-events/{stem}.csv.gz (seed {seed}).\n\
         # Written by `cargo run -p quarry-toy --example make_demo`.\n",
        stem = s.stem,
        seed = s.seed
    );
    std::fs::write(&toml_path, header + &s.config.to_toml())?;

    let generator = Generator::new(s.config.clone(), s.seed)?;
    let mut writer = EventWriter::create(&dir.join(format!("{}.csv.gz", s.stem)))?;
    let mut written = 0;
    let mut tried = 0;
    for event in generator.filter(triggered).take(EVENTS_PER_FILE) {
        writer.write(&event)?;
        written += 1;
        tried = event.id - s.config.event_id_offset + 1;
    }
    writer.finish()?;
    Ok((written, tried))
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::args()
        .nth(1)
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo-events"));
    std::fs::create_dir_all(&dir)?;
    for s in samples() {
        let (written, tried) = write_sample(&dir, &s)?;
        println!(
            "{}: {written} events written ({tried} generated, seed {})",
            s.stem, s.seed
        );
    }
    Ok(())
}
