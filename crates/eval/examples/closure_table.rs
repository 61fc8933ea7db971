//! Mass-point closure table without the CLI: toy signal (heavy up-type
//! partner, 100 % bW, lepton+jets under the `bwbw-ljets` preset) at 600,
//! 1000, 1400 and 1800 GeV plus a tt̄ background, reconstructed with the
//! χ² assignment search, evaluated, plotted.
//!
//! ```sh
//! cargo run --release -p quarry-eval --example closure_table -- [EVENTS] [OUTDIR]
//! ```
//!
//! Prints the Markdown table and writes `summary.csv` and the SVG plots to
//! OUTDIR (default `eval-out`). EVENTS per sample, default 2000.

use std::path::PathBuf;

use quarry_assign::{presets, SearchConfig, SearchStatus, Searcher};
use quarry_eval::{
    evaluate, markdown_table, plot_chi2, plot_mass, plot_right_fraction, write_summary_csv,
    EvalRecord,
};
use quarry_toy::{Branching, DecayMode, Generator, HeavyQuark, Partner, ToyConfig};

const HYPOTHESIS: &str = "bwbw-ljets";

fn status_name(s: &SearchStatus) -> &'static str {
    match s {
        SearchStatus::Found => "ok",
        SearchStatus::TooFewJets { .. } => "too_few_jets",
        SearchStatus::TooFewLeptons { .. } => "too_few_leptons",
        SearchStatus::TooFewLargeJets { .. } => "too_few_large_jets",
        SearchStatus::NeutrinoFailed(_) => "neutrino_failed",
        SearchStatus::NoValidAssignment => "no_valid_assignment",
    }
}

/// Reconstructs `n` events of `config` into evaluation records. Events
/// without exactly one charged lepton are marked `not_one_lepton`.
fn reconstruct(
    config: ToyConfig,
    seed: u64,
    n: usize,
    sample: &str,
    generated_mass: Option<f64>,
) -> Vec<EvalRecord> {
    let hyp = presets::get(HYPOTHESIS).expect("shipped preset");
    let q_had = hyp.composite_index("Q_had").expect("composite");
    let q_lep = hyp.composite_index("Q_lep").expect("composite");
    let mut searcher = Searcher::new(&hyp, SearchConfig::default()).expect("default config");
    let generator = Generator::new(config, seed).expect("valid toy config");
    (0..n as u64)
        .map(|i| {
            let event = generator.generate(i);
            let mut rec = EvalRecord {
                sample: sample.to_string(),
                generated_mass,
                hypothesis: HYPOTHESIS.to_string(),
                ..EvalRecord::default()
            };
            if event.n_leptons() != 1 {
                rec.status = "not_one_lepton".into();
                return rec;
            }
            let out = searcher.search(&event);
            rec.status = status_name(&out.status).into();
            if let Some(best) = out.best() {
                let m = 0.5 * (best.composite_mass(q_had) + best.composite_mass(q_lep));
                rec.mass = m.is_finite().then_some(m);
                rec.chi2 = Some(best.chi2());
                if let Some(t) = hyp.truth_match(&event, best) {
                    rec.truth_match = Some(t.all());
                    rec.composite_matches = hyp
                        .composites()
                        .iter()
                        .zip(t.composites())
                        .map(|(c, &ok)| (c.name.clone(), ok))
                        .collect();
                }
            }
            rec
        })
        .collect()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let n: usize = args.next().map_or(Ok(2000), |a| a.parse())?;
    let dir = PathBuf::from(args.next().unwrap_or_else(|| "eval-out".into()));
    std::fs::create_dir_all(&dir)?;

    let mut records = Vec::new();
    for (i, mass) in [600.0, 1000.0, 1400.0, 1800.0].into_iter().enumerate() {
        let quark = HeavyQuark::new(Partner::UpType, mass)
            .with_branching(Branching::only(DecayMode::BottomW));
        records.extend(reconstruct(
            ToyConfig::heavy_pair(quark),
            1000 + i as u64,
            n,
            &format!("T{mass}"),
            Some(mass),
        ));
    }
    records.extend(reconstruct(ToyConfig::top_pair(), 2000, n, "ttbar", None));

    let summary = evaluate(&records);
    write_summary_csv(&summary, std::fs::File::create(dir.join("summary.csv"))?)?;
    plot_mass(&records, HYPOTHESIS, &dir.join("mass.svg"))?;
    let signal: Vec<EvalRecord> = records
        .iter()
        .filter(|r| r.generated_mass.is_some())
        .cloned()
        .collect();
    plot_chi2(&signal, HYPOTHESIS, &dir.join("chi2.svg"))?;
    plot_right_fraction(&summary, &dir.join("right_fraction.svg"))?;
    print!("{}", markdown_table(&summary));
    for g in &summary.groups {
        let comps: Vec<String> = g
            .composites
            .iter()
            .map(|(c, f)| format!("{c} {:.3}", f.value()))
            .collect();
        eprintln!(
            "{}: statuses {:?}; per composite: {}",
            g.sample,
            g.status_counts,
            comps.join(", ")
        );
    }
    eprintln!("wrote {}", dir.display());
    Ok(())
}
