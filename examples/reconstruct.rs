//! The quarry pipeline from Rust, end to end, without any CSV:
//! build an event in code, reconstruct it under two hypotheses with the
//! kinematic fit, then reconstruct a batch of toy events in parallel.
//!
//! Run with `cargo run --example reconstruct`.

use quarry::assign::Hypothesis;
use quarry::event::{Event, Jet, Lepton, Met, Truth};
use quarry::lorentz::FourMomentum;
use quarry::toy::{Generator, HeavyQuark, Partner, ToyConfig};
use quarry::{Pipeline, Status};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    // 1. One event built in code: four jets (two b-tagged), a muon, MET.
    //    (A fictional 14 TeV collision; numbers are illustrative.)
    let mut event = Event::new(1);
    let jets = [
        (95.0, 0.2, 0.4, 0.92, "h.b"),
        (62.0, -0.3, 1.9, 0.08, "h.W.q"),
        (48.0, 0.9, 2.6, 0.15, "h.W.q"),
        (71.0, -1.0, -2.0, 0.81, "l.b"),
    ];
    // add_jet numbers each jet by its position (outputs name jets by it).
    for (pt, eta, phi, btag, truth) in jets {
        event.add_jet(
            Jet::new(FourMomentum::from_pt_eta_phi_m(pt, eta, phi, 5.0), btag)
                .with_truth(Truth::new(truth).expect("valid label")),
        );
    }
    event.add_lepton(
        Lepton::muon(
            FourMomentum::from_pt_eta_phi_m(45.0, -0.8, 2.6, quarry::pdg::MUON_MASS),
            -1,
        )
        .with_truth(Truth::new("l.W.mu").expect("valid label")),
    );
    event.met = Met::new(-38.0, -9.0);

    // 2. A pipeline: a preset by name, plus a hypothesis loaded from TOML
    //    (here the bW-pair preset's text; normally your own edited file).
    let bw_text = quarry::assign::presets::toml("bwbw-ljets").expect("preset exists");
    let bw = Hypothesis::from_toml(bw_text)?;
    let pipeline = Pipeline::builder()
        .preset("ttbar-ljets")
        .hypothesis(bw)
        .fit(true)
        .build()?;

    // 3. One event: one typed result per hypothesis, in the order given.
    for r in pipeline.reconstruct(&event) {
        println!("hypothesis {:<12} status {}", r.hypothesis.name(), r.status);
        if let Some(best) = r.best() {
            println!("  assignment   {}", r.assignment_text());
            println!("  χ²           {:.3}", best.chi2());
            println!("  masses       {}", r.masses_text());
            if let Some([a, b]) = r.pair_masses() {
                println!("  pair masses  {a:.1} / {b:.1} GeV");
            }
        }
        if let Some(v) = r.vars {
            println!(
                "  HT {:.1}  ST {:.1}  unclaimed ST {:?}",
                v.ht, v.st, r.st_unclaimed
            );
        }
        if let Some(Ok(fit)) = &r.fit {
            println!(
                "  fit {}: χ² {:.2} (ndf {}), P = {:.3}",
                fit.status, fit.chi2, fit.ndf, fit.probability
            );
        }
        if let Some(t) = r.truth {
            println!("  truth match  {}", t.all());
        }
    }

    // 4. Many events in parallel: toy B-quark pairs (m = 900 GeV), results
    //    in input order whatever the number of threads.
    let signal = ToyConfig::heavy_pair(HeavyQuark::new(Partner::DownType, 900.0));
    let events: Vec<Event> = Generator::new(signal, 2024)?.take(2000).collect();
    let pipeline = Pipeline::builder().preset("twtw-ljets").build()?;
    let results = pipeline.reconstruct_all(&events);
    let ok: Vec<f64> = results
        .iter()
        .filter_map(|per_hyp| {
            let r = &per_hyp[0];
            (r.status == Status::Ok)
                .then(|| r.pair_masses().map(|[a, b]| 0.5 * (a + b)))
                .flatten()
        })
        .collect();
    let mut sorted = ok.clone();
    sorted.sort_by(f64::total_cmp);
    println!(
        "\n{} toy B-pair events: {} reconstructed under twtw-ljets; median pair mass {:.0} GeV",
        events.len(),
        ok.len(),
        sorted.get(sorted.len() / 2).copied().unwrap_or(f64::NAN)
    );
    Ok(())
}
