//! Two-body decay kinematics and Breit–Wigner sampling against outside
//! references (fixture from tests/reference/toy_kinematics.py).

use quarry_lorentz::FourMomentum;
use quarry_toy::{
    breit_wigner_mass, decay_at_rest, kallen, two_body_decay, two_body_momentum,
    BREIT_WIGNER_CUTOFF,
};
use rand::{Rng, SeedableRng};
use serde_json::Value;

fn fixture() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../../tests/reference/fixtures/toy_kinematics.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).expect("fixture present"))
        .expect("fixture is JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

fn vec4(v: &Value) -> FourMomentum {
    let a: Vec<f64> = v.as_array().unwrap().iter().map(f).collect();
    FourMomentum::new(a[0], a[1], a[2], a[3])
}

/// p* = λ^{1/2}(M², m1², m2²)/(2M) — PDG Review of Particle Physics,
/// "Kinematics"; reference values evaluated exactly by sympy.
#[test]
fn two_body_momentum_matches_sympy_exact_values() {
    let fx = fixture();
    let cases = fx["two_body"].as_array().unwrap();
    assert!(cases.len() >= 50);
    for c in cases {
        let (m, m1, m2) = (f(&c["m"]), f(&c["m1"]), f(&c["m2"]));
        let want = f(&c["pstar"]);
        let got = two_body_momentum(m, m1, m2).expect("open decay");
        assert!(
            (got - want).abs() <= 1e-12 * want.max(1e-300),
            "p*({m}, {m1}, {m2}) = {got}, sympy {want}"
        );
    }
}

/// Daughters of moving parents against scikit-hep `vector`'s boost_p4.
#[test]
fn boosted_decays_match_scikit_hep_vector() {
    let fx = fixture();
    for c in fx["boosted"].as_array().unwrap() {
        let parent = vec4(&c["parent"]);
        let (d1, d2) = two_body_decay(
            &parent,
            f(&c["m"]),
            f(&c["m1"]),
            f(&c["m2"]),
            f(&c["cos_theta"]),
            f(&c["phi"]),
        )
        .unwrap();
        let scale = parent.e();
        for (got, want) in [(d1, vec4(&c["d1"])), (d2, vec4(&c["d2"]))] {
            for (g, w) in [
                (got.px(), want.px()),
                (got.py(), want.py()),
                (got.pz(), want.pz()),
                (got.e(), want.e()),
            ] {
                assert!((g - w).abs() <= 1e-9 * scale, "{got:?} vs vector {want:?}");
            }
        }
    }
}

/// Many random draws: the rest-frame momentum of both daughters equals p*
/// from the plain (unfactorised) Källén function to 1e-12, energies add up
/// to M, and boosting to the lab and back to the parent's rest frame gives
/// p* again to 1e-9 of the parent energy.
#[test]
fn random_decays_have_kallen_momentum_and_conserve_four_momentum() {
    let mut rng = rand_pcg::Pcg64Mcg::seed_from_u64(99);
    for _ in 0..20_000 {
        let m: f64 = rng.random_range(1.0..3000.0);
        let m1: f64 = rng.random_range(0.0..0.5 * m);
        let m2: f64 = rng.random_range(0.0..(m - m1) * 0.999);
        let cos_t: f64 = rng.random_range(-1.0..=1.0);
        let phi: f64 = rng.random_range(-4.0..4.0);
        let pstar = kallen(m * m, m1 * m1, m2 * m2).sqrt() / (2.0 * m);
        let (a, b) = decay_at_rest(m, m1, m2, cos_t, phi).unwrap();
        for d in [a, b] {
            assert!(
                (d.p() - pstar).abs() <= 1e-12 * m,
                "|p| {} vs p* {pstar}",
                d.p()
            );
        }
        assert!((a.e() + b.e() - m).abs() <= 1e-12 * m);
        assert!((a.m() - m1).abs() <= 1e-9 * m && (b.m() - m2).abs() <= 1e-9 * m);

        // Lab frame: Lorentz factors up to ~600 (2 TeV pt, |η| < 2.5,
        // M ≥ 20 GeV), beyond any parent the generator decays. (The boost's
        // rounding grows like γ²·ε through 1 − β².)
        if m < 20.0 {
            continue;
        }
        let parent = FourMomentum::from_pt_eta_phi_m(
            rng.random_range(0.0..2000.0),
            rng.random_range(-2.5..2.5),
            rng.random_range(-3.0..3.0),
            m,
        );
        let (la, lb) = two_body_decay(&parent, m, m1, m2, cos_t, phi).unwrap();
        let sum = la + lb;
        let scale = parent.e();
        for (s, p) in [
            (sum.px(), parent.px()),
            (sum.py(), parent.py()),
            (sum.pz(), parent.pz()),
            (sum.e(), parent.e()),
        ] {
            assert!((s - p).abs() <= 1e-9 * scale);
        }
        let back = la.to_rest_frame_of(&parent);
        assert!((back.p() - pstar).abs() <= 1e-9 * scale);
    }
}

#[test]
fn closed_or_invalid_decays_are_refused() {
    assert_eq!(two_body_momentum(10.0, 6.0, 5.0), None);
    assert_eq!(two_body_momentum(0.0, 0.0, 0.0), None);
    assert_eq!(two_body_momentum(f64::NAN, 0.0, 0.0), None);
    assert_eq!(two_body_momentum(10.0, -1.0, 0.0), None);
    assert!(decay_at_rest(10.0, 1.0, 1.0, 1.5, 0.0).is_none());
    assert!(decay_at_rest(10.0, 1.0, 1.0, 0.5, f64::INFINITY).is_none());
    // At threshold the daughters are at rest.
    assert_eq!(two_body_momentum(10.0, 4.0, 6.0), Some(0.0));
}

/// The inverse-CDF sampler at u = 0.25, 0.5, 0.75 reproduces the quantiles
/// of the truncated relativistic Breit–Wigner found by scipy's numerical
/// integration and root finding (fixture), for the PDG 2024 W mass/width.
#[test]
fn breit_wigner_quantiles_match_scipy_integration() {
    let fx = fixture();
    let bw = &fx["breit_wigner_w"];
    let (mass, width) = (f(&bw["mass"]), f(&bw["width"]));
    assert_eq!(mass, quarry_pdg::W_MASS, "fixture uses quarry_pdg's W mass");
    assert_eq!(
        width,
        quarry_pdg::W_WIDTH,
        "fixture uses quarry_pdg's W width"
    );
    let (lo, hi) = (
        mass - BREIT_WIGNER_CUTOFF * width,
        mass + BREIT_WIGNER_CUTOFF * width,
    );
    assert!((f(&bw["lo"]) - lo).abs() < 1e-9 && (f(&bw["hi"]) - hi).abs() < 1e-9);
    for (q, key) in [(0.25, "0.25"), (0.5, "0.5"), (0.75, "0.75")] {
        let want = f(&bw["quantiles"][key]);
        let got = breit_wigner_mass(q, mass, width, lo, hi).unwrap();
        assert!(
            (got - want).abs() < 1e-8,
            "quantile {q}: {got} vs scipy {want}"
        );
    }
}

#[test]
fn breit_wigner_stays_in_window_and_refuses_bad_input() {
    for i in 0..=1000 {
        let u = i as f64 / 1000.0;
        let m = breit_wigner_mass(u, 91.0, 2.5, 60.0, 120.0).unwrap();
        assert!(m.is_finite() && (60.0..=120.0).contains(&m));
    }
    assert_eq!(breit_wigner_mass(f64::NAN, 91.0, 2.5, 60.0, 120.0), None);
    assert_eq!(breit_wigner_mass(0.5, 91.0, 2.5, 60.0, f64::NAN), None);
    assert_eq!(breit_wigner_mass(0.5, 91.0, -1.0, 60.0, 120.0), None);
    assert_eq!(breit_wigner_mass(0.5, 91.0, 2.5, 120.0, 60.0), None);
    assert_eq!(breit_wigner_mass(0.5, 91.0, 0.0, 60.0, 120.0), Some(91.0));
    // A window entirely above the pole: u = 0 maps to its lower edge.
    let m = breit_wigner_mass(0.0, 91.0, 2.5, 95.0, 120.0).unwrap();
    assert!((m - 95.0).abs() < 1e-9, "got {m}");
}
