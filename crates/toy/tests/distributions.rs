//! Statistical properties of generated samples. Tolerances are 5 standard
//! errors of the estimate unless stated otherwise.

use quarry_event::Flavour;
use quarry_pdg::{branching as br, W_MASS, W_WIDTH};
use quarry_toy::{
    channel_probabilities, Branching, DecayMode, Generator, HeavyQuark, Partner, PartonKind,
    ToyConfig, BREIT_WIGNER_CUTOFF,
};
use serde_json::Value;

fn median(v: &mut [f64]) -> f64 {
    quantile(v, 0.5)
}

fn quantile(v: &mut [f64], q: f64) -> f64 {
    v.sort_by(f64::total_cmp);
    v[((v.len() - 1) as f64 * q).round() as usize]
}

fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n - 1.0);
    (m, var.sqrt())
}

/// Rule of thumb (common practice): a boosted two-body decay opens by
/// ΔR ≈ 2m/pT. W bosons with 380 < pT < 420 GeV (2m/pT ≈ 0.40) must give
/// quark pairs with median ΔR between 0.35 and 0.5.
#[test]
fn boosted_w_opening_angle_follows_two_m_over_pt() {
    let q = HeavyQuark::new(Partner::UpType, 1000.0)
        .with_branching(Branching::only(DecayMode::BottomW));
    let g = Generator::new(ToyConfig::heavy_pair(q), 31).unwrap();
    let mut drs = Vec::new();
    for i in 0..20_000 {
        let (_, rec) = g.generate_with_partons(i);
        for (k, w) in rec.partons.iter().enumerate() {
            if w.kind != PartonKind::W || !(380.0..420.0).contains(&w.p4.pt()) {
                continue;
            }
            let kids: Vec<_> = rec.children(k).map(|c| rec.partons[c]).collect();
            if kids[0].kind == PartonKind::LightQuark {
                drs.push(kids[0].p4.delta_r(&kids[1].p4));
            }
        }
    }
    assert!(drs.len() > 500, "only {} W in the window", drs.len());
    let m = median(&mut drs);
    println!("median ΔR of {} W decays: {m:.4}", drs.len());
    assert!((0.35..0.5).contains(&m), "median ΔR {m}");
}

/// W masses in top-pair events: median and half inter-quartile range agree
/// with the truncated relativistic Breit–Wigner quantiles computed by scipy
/// (fixture) within 5 standard errors, and hence with m_W and Γ_W/2
/// (quarry_pdg): the median within 0.05 GeV of m_W (the relativistic shape shifts it
/// by +0.007 GeV), the half-IQR within 5 % of Γ_W/2 (truncation at
/// ±15 Γ removes 2 % of the tails and narrows it by 3.4 %).
#[test]
fn w_masses_follow_the_breit_wigner() {
    let fx: Value = serde_json::from_str(
        &std::fs::read_to_string(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../tests/reference/fixtures/toy_kinematics.json"
        ))
        .unwrap(),
    )
    .unwrap();
    let qs = &fx["breit_wigner_w"]["quantiles"];
    let (q25, q50, q75) = (
        qs["0.25"].as_f64().unwrap(),
        qs["0.5"].as_f64().unwrap(),
        qs["0.75"].as_f64().unwrap(),
    );
    let g = Generator::new(ToyConfig::top_pair(), 77).unwrap();
    let mut masses = Vec::new();
    for i in 0..15_000 {
        let (_, rec) = g.generate_with_partons(i);
        masses.extend(rec.of_kind(PartonKind::W).map(|w| w.p4.m()));
    }
    let n = masses.len() as f64;
    // Density of the truncated distribution in m at the pole:
    // dP/dm = 2m/(MΓ) / ((θ_hi − θ_lo)(1 + x²)), x = (m² − M²)/(MΓ).
    let (mm, gg) = (W_MASS, W_WIDTH);
    let th = |m: f64| ((m * m - mm * mm) / (mm * gg)).atan();
    let span = th(mm + BREIT_WIGNER_CUTOFF * gg) - th(mm - BREIT_WIGNER_CUTOFF * gg);
    let density = |m: f64| {
        let x = (m * m - mm * mm) / (mm * gg);
        2.0 * m / (mm * gg) / (span * (1.0 + x * x))
    };
    // Standard errors of sample quantiles: sqrt(q(1−q)/n)/f(x_q).
    let se = |q: f64, x: f64| (q * (1.0 - q) / n).sqrt() / density(x);
    let m50 = quantile(&mut masses, 0.5);
    let m25 = quantile(&mut masses, 0.25);
    let m75 = quantile(&mut masses, 0.75);
    assert!(
        (m50 - q50).abs() < 5.0 * se(0.5, q50),
        "median {m50} vs {q50}"
    );
    let half_iqr = 0.5 * (m75 - m25);
    println!("W: n = {n}, median {m50:.4} (scipy {q50:.4}), half-IQR {half_iqr:.4}");
    // Ignoring the (positive) correlation of the two quartiles overstates
    // the error of their difference slightly: conservative.
    let se_half = 0.5 * (se(0.25, q25).powi(2) + se(0.75, q75).powi(2)).sqrt();
    assert!(
        (half_iqr - 0.5 * (q75 - q25)).abs() < 5.0 * se_half,
        "half-IQR {half_iqr}"
    );
    assert!((m50 - W_MASS).abs() < 0.05, "median {m50} vs m_W {W_MASS}");
    assert!(
        (half_iqr / (0.5 * W_WIDTH) - 1.0).abs() < 0.05,
        "half-IQR {half_iqr} vs Γ/2"
    );
}

fn binomial_ok(count: usize, n: usize, p: f64) -> bool {
    let expect = n as f64 * p;
    let sd = (n as f64 * p * (1.0 - p)).sqrt();
    (count as f64 - expect).abs() < 5.0 * sd.max(1.0)
}

/// Observed heavy-quark decay modes match the configured fractions;
/// observed W, Z and H channels match the PDG branching ratios
/// (quarry_pdg::branching) after the documented removal of τ channels.
#[test]
fn decay_fractions_match_configuration_and_pdg() {
    let mut b = Branching::default();
    b.set(DecayMode::TopW, 0.5);
    b.set(DecayMode::BottomZ, 0.3);
    b.set(DecayMode::BottomHiggs, 0.2);
    let q = HeavyQuark::new(Partner::DownType, 900.0).with_branching(b);
    let g = Generator::new(ToyConfig::heavy_pair(q), 4).unwrap();
    let n_events = 20_000;
    let mut modes = std::collections::BTreeMap::new();
    let (mut w, mut z, mut h) = ([0usize; 3], [0usize; 5], [0usize; 2]);
    for i in 0..n_events {
        let (_, rec) = g.generate_with_partons(i);
        for m in rec.modes.iter().flatten() {
            *modes.entry(*m).or_insert(0usize) += 1;
        }
        for (k, p) in rec.partons.iter().enumerate() {
            let kids: Vec<PartonKind> = rec.children(k).map(|c| rec.partons[c].kind).collect();
            match p.kind {
                PartonKind::W => match kids[0] {
                    PartonKind::Electron => w[0] += 1,
                    PartonKind::Muon => w[1] += 1,
                    _ => w[2] += 1,
                },
                PartonKind::Z => match kids[0] {
                    PartonKind::Electron => z[0] += 1,
                    PartonKind::Muon => z[1] += 1,
                    PartonKind::Neutrino => z[2] += 1,
                    PartonKind::Bottom => z[3] += 1,
                    _ => z[4] += 1,
                },
                PartonKind::Higgs => match kids[0] {
                    PartonKind::Bottom => h[0] += 1,
                    _ => h[1] += 1,
                },
                _ => {}
            }
        }
    }
    let sides = 2 * n_events as usize;
    for (mode, frac) in [
        (DecayMode::TopW, 0.5),
        (DecayMode::BottomZ, 0.3),
        (DecayMode::BottomHiggs, 0.2),
    ] {
        let c = modes.get(&mode).copied().unwrap_or(0);
        assert!(binomial_ok(c, sides, frac), "{mode:?}: {c} of {sides}");
    }
    assert_eq!(modes.len(), 3);

    // PDG ratios without τ, renormalised — computed here independently.
    let w_sum = br::W_TO_E_NU + br::W_TO_MU_NU + br::W_TO_HADRONS;
    let pw = [
        br::W_TO_E_NU / w_sum,
        br::W_TO_MU_NU / w_sum,
        br::W_TO_HADRONS / w_sum,
    ];
    let z_sum = br::Z_TO_EE + br::Z_TO_MUMU + br::Z_TO_INVISIBLE + br::Z_TO_HADRONS;
    let pz = [
        br::Z_TO_EE / z_sum,
        br::Z_TO_MUMU / z_sum,
        br::Z_TO_INVISIBLE / z_sum,
        br::Z_TO_BB / z_sum,
        (br::Z_TO_HADRONS - br::Z_TO_BB) / z_sum,
    ];
    let ph = [br::H_TO_BB, 1.0 - br::H_TO_BB];
    let (tw, tz, th) = channel_probabilities();
    for (a, b) in tw
        .iter()
        .zip(pw)
        .chain(tz.iter().zip(pz))
        .chain(th.iter().zip(ph))
    {
        assert!((a - b).abs() < 1e-12);
    }
    let nw: usize = w.iter().sum();
    for (c, p) in w.iter().zip(pw) {
        assert!(binomial_ok(*c, nw, p), "W channels {w:?} vs {pw:?}");
    }
    let nz: usize = z.iter().sum();
    for (c, p) in z.iter().zip(pz) {
        assert!(binomial_ok(*c, nz, p), "Z channels {z:?} vs {pz:?}");
    }
    let nh: usize = h.iter().sum();
    for (c, p) in h.iter().zip(ph) {
        assert!(binomial_ok(*c, nh, p), "H channels {h:?} vs {ph:?}");
    }
}

/// Jet energies: (E_jet − E_parton)/σ(E_parton, η) has mean 0 and width 1
/// for jets well above threshold (unsmeared pt > 60 GeV, so neither the
/// 20 GeV jet threshold nor the energy floor biases the sample), and the
/// direction is kept. Leptons and MET likewise with their own σ.
#[test]
fn smearing_pulls_are_unit_gaussians() {
    let cfg = ToyConfig::top_pair();
    let model = cfg.resolution.clone();
    let g = Generator::new(cfg, 12).unwrap();
    let (mut jet, mut lep, mut met) = (Vec::new(), Vec::new(), Vec::new());
    for i in 0..8_000 {
        let (event, rec) = g.generate_with_partons(i);
        for (j, src) in event.jets.iter().zip(&rec.jet_sources) {
            assert!(j.p4.delta_r(src) < 1e-9, "direction kept");
            if src.pt() > 60.0 {
                jet.push((j.p4.e() - src.e()) / model.jet_energy_sigma(src.e(), src.eta()));
            }
        }
        for l in event.leptons() {
            let kind = match l.flavour {
                Flavour::Electron => PartonKind::Electron,
                Flavour::Muon => PartonKind::Muon,
            };
            let src = rec
                .of_kind(kind)
                .min_by(|a, b| a.p4.delta_r(&l.p4).total_cmp(&b.p4.delta_r(&l.p4)))
                .unwrap();
            assert!(src.p4.delta_r(&l.p4) < 1e-9);
            // σ(pt) ≈ 0.3 GeV at 20 GeV: far above the 10 GeV threshold.
            if src.p4.pt() > 20.0 {
                let pt = src.p4.pt();
                lep.push((l.p4.pt() - pt) / model.lepton_pt_sigma(l.flavour, pt));
            }
        }
        let (nx, ny) = rec
            .of_kind(PartonKind::Neutrino)
            .fold((0.0, 0.0), |(x, y), p| (x + p.p4.px(), y + p.p4.py()));
        let sum_pt: f64 = event.jets.iter().map(|j| j.p4.pt()).sum();
        let s = model.met_sigma(sum_pt);
        let cov = event.met.cov.expect("toy MET has a covariance");
        assert!((cov[0] - s * s).abs() < 1e-9 * s * s && cov[1] == 0.0 && cov[0] == cov[2]);
        met.push((event.met.px - nx) / s);
        met.push((event.met.py - ny) / s);
    }
    for (name, v) in [("jet", &jet), ("lepton", &lep), ("met", &met)] {
        let (m, sd) = mean_sd(v);
        let n = v.len() as f64;
        println!("{name} pulls: n = {n}, mean {m:.4}, sd {sd:.4}");
        assert!(n > 2000.0, "{name}: {n} entries");
        // SE(mean) = 1/√n, SE(sd) ≈ 1/√(2n).
        assert!(m.abs() < 5.0 / n.sqrt(), "{name} pull mean {m}");
        assert!(
            (sd - 1.0).abs() < 5.0 / (2.0 * n).sqrt(),
            "{name} pull width {sd}"
        );
    }
}

/// b-tag: 70 % of b jets and 1 % of other jets score above the 0.5 working
/// point (the configured defaults).
#[test]
fn btag_efficiency_and_mistag_rate() {
    let cfg = ToyConfig::top_pair();
    let (wp, eff, mis) = (
        cfg.btag.working_point,
        cfg.btag.b_efficiency,
        cfg.btag.mistag_rate,
    );
    let g = Generator::new(cfg, 21).unwrap();
    let (mut nb, mut tb, mut nl, mut tl) = (0, 0, 0, 0);
    for i in 0..10_000 {
        for j in g.generate(i).jets {
            let is_b = j.truth.unwrap().as_str().ends_with(".b");
            let tagged = j.btag > wp;
            if is_b {
                nb += 1;
                tb += tagged as usize;
            } else {
                nl += 1;
                tl += tagged as usize;
            }
        }
    }
    assert!(binomial_ok(tb, nb, eff), "b: {tb}/{nb}");
    assert!(binomial_ok(tl, nl, mis), "light: {tl}/{nl}");
}

/// Large-radius jets come from boosted hadronic bosons/tops: their
/// unsmeared source has the boson's mass, and the smeared mass stays near it.
#[test]
fn fat_jets_carry_boson_masses() {
    let q = HeavyQuark::new(Partner::DownType, 1400.0);
    let g = Generator::new(ToyConfig::heavy_pair(q), 2).unwrap();
    let mut w_masses = Vec::new();
    let mut count = 0;
    for i in 0..3000 {
        let (event, rec) = g.generate_with_partons(i);
        for (f, src) in event.fat_jets.iter().zip(&rec.fat_jet_sources) {
            count += 1;
            assert!(f.p4.delta_r(src) < 1e-9);
            let label = f.truth.unwrap();
            if label.matches("*.W") {
                assert!((src.m() - W_MASS).abs() < BREIT_WIGNER_CUTOFF * W_WIDTH + 1e-6);
                w_masses.push(f.p4.m());
            }
            if label.matches("*.t") {
                assert!((src.m() - quarry_pdg::TOP_MASS).abs() < 25.0);
            }
        }
    }
    assert!(count > 1000);
    let m = median(&mut w_masses);
    assert!((m - W_MASS).abs() < 3.0, "median W fat-jet mass {m}");
}
