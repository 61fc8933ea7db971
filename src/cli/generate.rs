//! `quarry generate`: toy events to CSV.

use quarry::csv::EventWriter;
use quarry::toy::{Branching, DecayMode, Generator, HeavyQuark, Partner, ToyConfig};
use rayon::prelude::*;

use super::args::{GenerateArgs, ProcessArg};
use super::Failure;

/// Heavy-quark mass when `--mass` is not given [GeV] (in `--help`).
const DEFAULT_MASS: f64 = 1200.0;

/// Events generated per parallel batch (bounds memory for large files).
const BATCH: u64 = 8192;

fn config(args: &GenerateArgs) -> Result<ToyConfig, Failure> {
    if let Some(path) = &args.config {
        let text = std::fs::read_to_string(path)
            .map_err(|e| Failure::Usage(format!("{}: cannot read: {e}", path.display())))?;
        return ToyConfig::from_toml(&text)
            .map_err(|e| Failure::Usage(format!("{}: {e}", path.display())));
    }
    let partner = match args.process {
        ProcessArg::Ttbar => {
            if args.mass.is_some() || args.decay.is_some() {
                return Err(Failure::Usage(
                    "--mass and --decay apply to heavy-quark processes, not ttbar".into(),
                ));
            }
            return Ok(ToyConfig::top_pair());
        }
        ProcessArg::VlqT => Partner::UpType,
        ProcessArg::VlqB => Partner::DownType,
        ProcessArg::X53 => Partner::ChargeFiveThirds,
        ProcessArg::Tstar => Partner::ExcitedTop,
    };
    let mut quark = HeavyQuark::new(partner, args.mass.unwrap_or(DEFAULT_MASS));
    if let Some(name) = &args.decay {
        let mode = DecayMode::ALL
            .into_iter()
            .find(|m| m.name() == name)
            .ok_or_else(|| {
                let known: Vec<&str> = DecayMode::ALL.iter().map(|m| m.name()).collect();
                Failure::Usage(format!(
                    "unknown decay mode '{name}' (known: {})",
                    known.join(", ")
                ))
            })?;
        quark = quark.with_branching(Branching::only(mode));
    }
    Ok(ToyConfig::heavy_pair(quark))
}

pub fn run(args: &GenerateArgs) -> Result<(), Failure> {
    super::reco::check_output(&args.output)?;
    let mut cfg = config(args)?;
    cfg.event_id_offset = args.first_id;
    if args.first_id.checked_add(args.events).is_none() {
        return Err(Failure::Usage("--first-id + --events overflows".into()));
    }
    let what = match &args.config {
        Some(path) => format!("configuration {}", path.display()),
        None => describe(args),
    };
    let generator = Generator::new(cfg, args.seed).map_err(|e| Failure::Usage(e.to_string()))?;
    let pool = super::reco::thread_pool(args.threads)?;
    let mut writer =
        EventWriter::create(&args.output).map_err(|e| Failure::Output(e.to_string()))?;
    let mut start = 0;
    let mut batch = Vec::new();
    while start < args.events {
        let end = (start + BATCH).min(args.events);
        pool.install(|| {
            (0..(end - start) as usize)
                .into_par_iter()
                .map(|k| generator.generate(start + k as u64))
                .collect_into_vec(&mut batch)
        });
        for event in &batch {
            writer
                .write(event)
                .map_err(|e| Failure::Output(e.to_string()))?;
        }
        start = end;
    }
    writer
        .finish()
        .map_err(|e| Failure::Output(e.to_string()))?;
    if !args.quiet {
        let to = if args.output.as_os_str() == "-" {
            "stdout".to_string()
        } else {
            args.output.display().to_string()
        };
        eprintln!(
            "quarry generate: {} events ({what}, seed {}, ids {}-{}) written to {to}",
            args.events,
            args.seed,
            args.first_id,
            (args.first_id + args.events).saturating_sub(1)
        );
    }
    Ok(())
}

/// The process in words, for the summary line.
fn describe(args: &GenerateArgs) -> String {
    let process = match args.process {
        ProcessArg::Ttbar => return "top pair".to_string(),
        ProcessArg::VlqT => "vlq-t",
        ProcessArg::VlqB => "vlq-b",
        ProcessArg::X53 => "x53",
        ProcessArg::Tstar => "tstar",
    };
    let mut s = format!("{process}, mass {} GeV", args.mass.unwrap_or(DEFAULT_MASS));
    if let Some(mode) = &args.decay {
        s.push_str(&format!(", decay {mode}"));
    }
    s
}
