//! `ComplexStrategy::AdjustMet` against a brute-force scan.
//!
//! Feasibility of a candidate MET vector v is decided independently of the
//! solver by the known relation (common practice): real roots exist exactly
//! when the transverse mass of (ℓ, v) — with the lepton mass,
//! `m_T² = m_ℓ² + 2(E_T,ℓ |v| − p⃗_T,ℓ·v)`, which is the minimum of m(ℓ + ν)
//! over the neutrino pz — is at most m_W.

use quarry_lorentz::{transverse_mass, FourMomentum};
use quarry_neutrino::{ComplexStrategy, SolutionCase, WMassSolver};
use quarry_pdg::{ELECTRON_MASS, MUON_MASS, TAU_MASS, W_MASS};

/// Directions and magnitudes of the scan grid.
const N_PHI: usize = 3000;
const N_R: usize = 3000;

fn feasible(lepton: &FourMomentum, vx: f64, vy: f64) -> bool {
    let nu_t = FourMomentum::new(vx, vy, 0.0, vx.hypot(vy));
    transverse_mass(lepton, &nu_t) <= W_MASS
}

/// Nearest feasible grid point to the MET, and the grid's resolution (largest
/// distance between neighbouring points).
fn scan(lepton: &FourMomentum, mx: f64, my: f64) -> (f64, f64) {
    let r_max = 2.0 * mx.hypot(my) + 100.0;
    let dr = r_max / N_R as f64;
    let dphi = std::f64::consts::TAU / N_PHI as f64;
    let mut best = f64::INFINITY;
    for i in 0..N_PHI {
        let (s, c) = (i as f64 * dphi).sin_cos();
        for j in 0..=N_R {
            let r = j as f64 * dr;
            let (vx, vy) = (r * c, r * s);
            let d = (vx - mx).hypot(vy - my);
            if d < best && feasible(lepton, vx, vy) {
                best = d;
            }
        }
    }
    (best, dr.max(r_max * dphi))
}

fn check(lepton: FourMomentum, mx: f64, my: f64) {
    let solver = WMassSolver {
        strategy: ComplexStrategy::AdjustMet,
        ..Default::default()
    };
    let s = solver.solve(&lepton, mx, my).unwrap();
    assert_eq!(
        s.case(),
        SolutionCase::AdjustedMet,
        "input must be a complex case"
    );
    let nu = s.smaller_abs_pz();
    // The constraint holds after the adjustment.
    let m = (lepton + nu.p4).m();
    assert!((m - W_MASS).abs() <= 1e-6 * W_MASS, "m(l+nu) = {m}");
    let (best, resolution) = scan(&lepton, mx, my);
    let shift = nu.met_shift;
    // Never worse than any feasible scan point (up to rounding on the boundary)...
    assert!(
        shift <= best + 1e-9 * (1.0 + best),
        "solver shift {shift} > scan best {best}"
    );
    // ...and the scan's best is within its resolution of the solver's point.
    assert!(
        best <= shift + resolution,
        "scan best {best} vs shift {shift} (resolution {resolution})"
    );
}

#[test]
fn massless_lepton_back_to_back() {
    check(
        FourMomentum::from_pt_eta_phi_m(50.0, 0.4, 0.0, 0.0),
        -150.0,
        0.0,
    );
}

#[test]
fn muon_various_directions() {
    for (k, phi_met) in [1.7_f64, 2.3, 2.9, -2.0].into_iter().enumerate() {
        let mu = FourMomentum::from_pt_eta_phi_m(60.0 + 30.0 * k as f64, -1.2, 0.1, MUON_MASS);
        check(mu, 140.0 * phi_met.cos(), 140.0 * phi_met.sin());
    }
}

#[test]
fn electron_and_tau() {
    check(
        FourMomentum::from_pt_eta_phi_m(120.0, 2.0, -2.0, ELECTRON_MASS),
        90.0,
        -60.0,
    );
    check(
        FourMomentum::from_pt_eta_phi_m(70.0, 0.0, 1.0, TAU_MASS),
        -40.0,
        -110.0,
    );
}

#[test]
fn exaggerated_lepton_masses() {
    // 5 and 20 GeV leptons make the zero-discriminant curve a visible ellipse.
    check(
        FourMomentum::from_pt_eta_phi_m(80.0, 0.7, 0.5, 5.0),
        -100.0,
        30.0,
    );
    check(
        FourMomentum::from_pt_eta_phi_m(30.0, -0.3, 2.5, 20.0),
        60.0,
        120.0,
    );
}

/// Number of local minima of the distance from (mx, my) along the
/// zero-discriminant curve, sampled densely in the azimuth θ about the
/// lepton direction (curve r(θ) = k / (m_T − p_T cos θ), lepton along +x).
fn local_minima_on_curve(lepton_pt: f64, lepton_m: f64, mx: f64, my: f64) -> usize {
    let k = 0.5 * (W_MASS * W_MASS - lepton_m * lepton_m);
    let mt = lepton_pt.hypot(lepton_m);
    let n = 20_000;
    let dist: Vec<f64> = (0..n)
        .map(|i| {
            let th = std::f64::consts::TAU * i as f64 / n as f64;
            let r = k / (mt - lepton_pt * th.cos());
            (r * th.cos() - mx).hypot(r * th.sin() - my)
        })
        .collect();
    (0..n)
        .filter(|&i| dist[i] < dist[(i + n - 1) % n] && dist[i] < dist[(i + 1) % n])
        .count()
}

#[test]
fn met_beside_an_elongated_ellipse_with_two_local_minima() {
    // A 20 GeV lepton along +x: the zero-discriminant curve is an ellipse
    // centred near x ≈ 300 GeV with semi-minor axis ≈ 150 GeV. A MET beside
    // its minor axis sees two local minima of the distance along the curve
    // (near and far side); a local search started on the wrong side would
    // stop at the far one.
    let (pt, m) = (40.0, 20.0);
    let l = FourMomentum::from_pt_eta_phi_m(pt, 0.0, 0.0, m);
    for (mx, my) in [(300.0, 250.0), (320.0, -230.0)] {
        assert!(
            local_minima_on_curve(pt, m, mx, my) >= 2,
            "setup: two minima at ({mx}, {my})"
        );
        check(l, mx, my);
    }
}
