//! Pull and χ²-probability test of the hard-constrained fit on toy
//! tt̄ → ℓ+jets events whose partons are exactly on-shell (W and top masses
//! from quarry_pdg, two-body decays in rest frames boosted with
//! quarry_lorentz) and whose measurements are smeared with exactly the
//! resolution model's Gaussian σ.
//!
//! Pull definition (common in kinematic fitting; P. Avery, "Applied Fitting
//! Theory VI: Formulas for Kinematic Fitting", CLEO CBX 98-37, and V. Blobel
//! and E. Lohrmann, *Statistische und numerische Methoden der
//! Datenanalyse*): pull = (x_fit − x_meas)/√(σ_meas² − σ_fit²), which is
//! N(0, 1) for a correct fit with correct errors. The χ² probability of a
//! correct fit is uniform on [0, 1]; uniformity is tested with the
//! Kolmogorov–Smirnov statistic and its asymptotic distribution (F. James,
//! *Statistical Methods in Experimental Physics*, 2nd ed., World Scientific
//! 2006, ch. 11).

#![allow(clippy::needless_range_loop)]

mod common;

use common::{pair_input, smear, w_pz_roots, PairEvent};
use quarry_fit::{ConstraintMode, FitConfig, KinematicFitter};
use quarry_resolution::ResolutionModel;
use rand::SeedableRng;
use rand_pcg::Pcg64;

/// Kolmogorov–Smirnov distance of a sample from U(0, 1).
fn ks_uniform(values: &mut [f64]) -> f64 {
    values.sort_by(f64::total_cmp);
    let n = values.len() as f64;
    values
        .iter()
        .enumerate()
        .map(|(i, &v)| {
            let lo = v - i as f64 / n;
            let hi = (i + 1) as f64 / n - v;
            lo.max(hi)
        })
        .fold(0.0, f64::max)
}

/// Asymptotic KS p-value Q(λ) = 2 Σ (−1)^{k−1} exp(−2k²λ²) with Stephens'
/// small-n correction λ = (√n + 0.12 + 0.11/√n) D (James, ch. 11).
fn ks_p_value(d: f64, n: usize) -> f64 {
    let sn = (n as f64).sqrt();
    let lambda = (sn + 0.12 + 0.11 / sn) * d;
    if lambda < 0.2 {
        return 1.0;
    }
    let mut sum = 0.0;
    for k in 1..=100 {
        let k = k as f64;
        let term = 2.0 * (-1f64).powf(k - 1.0) * (-2.0 * k * k * lambda * lambda).exp();
        sum += term;
        if term.abs() < 1e-12 {
            break;
        }
    }
    sum.clamp(0.0, 1.0)
}

fn mean_and_width(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let var = x.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (n - 1.0);
    (mean, var.sqrt())
}

#[test]
fn ks_helpers_behave() {
    // A perfectly uniform grid has D = 1/(2n); a shifted one is rejected.
    let mut grid: Vec<f64> = (0..1000).map(|i| (i as f64 + 0.5) / 1000.0).collect();
    let d = ks_uniform(&mut grid);
    assert!((d - 0.0005).abs() < 1e-12);
    assert!(ks_p_value(d, 1000) > 0.99);
    let mut squeezed: Vec<f64> = (0..1000).map(|i| (i as f64 + 0.5) / 1000.0 * 0.9).collect();
    assert!(ks_p_value(ks_uniform(&mut squeezed), 1000) < 1e-6);
    // Q(1.0) = 0.2700 (tabulated Kolmogorov distribution, from memory).
    let q = ks_p_value(1.0 / ((1e6f64).sqrt() + 0.12 + 0.11 / 1e3), 1_000_000);
    assert!((q - 0.2700).abs() < 1e-3, "{q}");
}

/// Pull means and widths (4 jet energies, lepton pt, MET x, MET y), the KS
/// p-value of the χ² probability, and the worst constraint violation, for
/// `events` toy tt̄ events with every resolution coefficient of the default
/// model scaled by `scale` (smearing and fit use the same model).
struct Summary {
    means: [f64; 7],
    widths: [f64; 7],
    ks_p: f64,
    worst_violation: f64,
}

const NAMES: [&str; 7] = [
    "E(b_had)",
    "E(q1)",
    "E(q2)",
    "E(b_lep)",
    "pt(lepton)",
    "MET x",
    "MET y",
];

fn run_pulls(scale: f64, events: usize, seed: u64) -> Summary {
    let mut model = ResolutionModel::default();
    for b in model.jet.iter_mut() {
        b.stochastic *= scale;
        b.noise *= scale;
        b.constant *= scale;
    }
    model.muon.constant *= scale;
    model.muon.per_gev *= scale;
    model.met.floor *= scale;
    model.met.sqrt_sum_pt *= scale;
    let mut fitter = KinematicFitter::new(
        model.clone(),
        FitConfig {
            mode: ConstraintMode::Hard,
            ..FitConfig::default()
        },
    );
    let mut rng = Pcg64::seed_from_u64(seed);
    let mut pulls: Vec<Vec<f64>> = (0..7).map(|_| Vec::with_capacity(events)).collect();
    let mut probabilities = Vec::with_capacity(events);
    let mut worst_violation: f64 = 0.0;
    let mut failed = 0;
    for _ in 0..events {
        let truth = PairEvent::generate_ttbar(30.0, &mut rng);
        let measured = smear(&truth, &model, &mut rng);
        // Start from the W-mass pz root nearer the truth (the pipeline fits
        // both roots; starting at the true pz gives the same pulls).
        let roots = w_pz_roots(&measured.lepton, measured.met);
        let pz = if (roots[0] - truth.neutrino.pz()).abs() < (roots[1] - truth.neutrino.pz()).abs()
        {
            roots[0]
        } else {
            roots[1]
        };
        // The fit gets the σ the smearing used (the model at the true value):
        // with σ evaluated at the measured value instead, the pulls of
        // low-energy jets shift by O(σ/E) ≈ 0.1 — a property of the
        // resolution model's energy dependence, not of the fit.
        let input = pair_input(&measured, pz, None, true);
        assert_eq!(input.ndf(), 3);
        let fit = fitter.fit(&input);
        assert_eq!(fit.ndf, 3);
        if !fit.converged() {
            // A status, never a panic: counted, and bounded below.
            failed += 1;
            continue;
        }
        worst_violation = worst_violation.max(fit.max_violation);
        probabilities.push(fit.probability);
        for (k, jet) in measured.jets.iter().enumerate() {
            let r = measured.jet_sigma[k] / jet.e();
            let (s, ss) = (fit.scales()[k], fit.scale_sigmas()[k]);
            pulls[k].push((s - 1.0) / (r * r - ss * ss).sqrt());
        }
        let r = measured.lepton_sigma / measured.lepton.pt();
        let (s, ss) = (fit.scales()[4], fit.scale_sigmas()[4]);
        pulls[4].push((s - 1.0) / (r * r - ss * ss).sqrt());
        let nu = fit.neutrino().expect("neutrino fitted");
        let sig = fit.neutrino_sigmas();
        pulls[5].push((nu.px() - measured.met[0]) / (measured.met_cov[0] - sig[0] * sig[0]).sqrt());
        pulls[6].push((nu.py() - measured.met[1]) / (measured.met_cov[2] - sig[1] * sig[1]).sqrt());
    }
    // At most 0.1 % of right-assignment fits may stop unconverged.
    assert!(
        failed * 1000 <= events,
        "{failed} of {events} fits did not converge"
    );
    let mut means = [0.0; 7];
    let mut widths = [0.0; 7];
    for (k, p) in pulls.iter().enumerate() {
        assert!(
            p.iter().all(|v| v.is_finite()),
            "{}: non-finite pull",
            NAMES[k]
        );
        (means[k], widths[k]) = mean_and_width(p);
        eprintln!(
            "scale {scale}: pull {:>10}: mean {:+.4}, width {:.4}",
            NAMES[k], means[k], widths[k]
        );
    }
    let d = ks_uniform(&mut probabilities);
    let ks_p = ks_p_value(d, events);
    eprintln!("scale {scale}: χ² probability KS D = {d:.4}, p = {ks_p:.3}; max |m − M| = {worst_violation:.2e} GeV");
    Summary {
        means,
        widths,
        ks_p,
        worst_violation,
    }
}

/// The linear regime the textbook pull and χ² properties assume: a detector
/// with a fifth of the default resolution coefficients.
#[test]
fn pulls_are_standard_normal_and_probability_is_flat() {
    let s = run_pulls(0.2, 3000, 20240611);
    assert!(
        s.worst_violation < 0.01,
        "max |m − M| = {}",
        s.worst_violation
    );
    for k in 0..7 {
        assert!(
            s.means[k].abs() < 0.05,
            "{}: pull mean {}",
            NAMES[k],
            s.means[k]
        );
        assert!(
            (s.widths[k] - 1.0).abs() < 0.05,
            "{}: pull width {}",
            NAMES[k],
            s.widths[k]
        );
    }
    assert!(s.ks_p > 0.01, "χ² probability not flat: KS p = {}", s.ks_p);
}

/// Default resolutions: widths and the χ² probability still behave, the
/// hadronic-side and MET pulls are unbiased, but the leptonic-side pulls
/// (b_lep, lepton) carry a bias from the nonlinearity of the constraints
/// with the unmeasured pz (measured: about −0.06 and −0.17 at scale 1,
/// −0.03 and −0.07 at 0.3, consistent with 0 at 0.01 — so it is not a fit
/// error). The looser bound guards against regressions.
#[test]
fn pulls_at_default_resolution() {
    let s = run_pulls(1.0, 3000, 7);
    assert!(
        s.worst_violation < 0.01,
        "max |m − M| = {}",
        s.worst_violation
    );
    for k in 0..7 {
        let bound = if k == 3 || k == 4 { 0.25 } else { 0.05 };
        assert!(
            s.means[k].abs() < bound,
            "{}: pull mean {}",
            NAMES[k],
            s.means[k]
        );
        assert!(
            (s.widths[k] - 1.0).abs() < 0.05,
            "{}: pull width {}",
            NAMES[k],
            s.widths[k]
        );
    }
    assert!(s.ks_p > 0.01, "χ² probability not flat: KS p = {}", s.ks_p);
}
