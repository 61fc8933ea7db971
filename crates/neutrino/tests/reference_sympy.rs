//! Outside reference: exact roots of the same equation from sympy 1.14.0
//! (PyPI), written by `tests/reference/neutrino_sympy.py` into
//! `tests/reference/fixtures/neutrino_sympy.json`. Lepton masses in the
//! fixture (e, μ, τ, W) come from the `particle` package's PDG table, plus
//! exaggerated 5 GeV and 20 GeV leptons.

use quarry_lorentz::FourMomentum;
use quarry_neutrino::{ComplexStrategy, SolutionCase, WMassSolver};
use serde_json::Value;

const FIXTURE: &str = include_str!("../../../tests/reference/fixtures/neutrino_sympy.json");

struct Case {
    lepton: FourMomentum,
    met: (f64, f64),
    w_mass: f64,
    raw: Value,
}

fn num(v: &Value) -> f64 {
    v.as_f64().expect("fixture number")
}

fn cases() -> Vec<Case> {
    let doc: Value = serde_json::from_str(FIXTURE).expect("fixture parses");
    assert!(doc["source"].as_str().unwrap().starts_with("sympy "));
    doc["cases"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let l: Vec<f64> = c["lepton"].as_array().unwrap().iter().map(num).collect();
            Case {
                lepton: FourMomentum::new(l[0], l[1], l[2], l[3]),
                met: (num(&c["met"][0]), num(&c["met"][1])),
                w_mass: num(&c["w_mass"]),
                raw: c.clone(),
            }
        })
        .collect()
}

/// Scale of the problem, for tolerances relative to the size of the numbers.
fn scale(c: &Case) -> f64 {
    c.lepton.e().max(c.met.0.hypot(c.met.1)).max(c.w_mass)
}

#[test]
fn fixture_covers_enough_real_complex_and_massive_cases() {
    let all = cases();
    assert!(all.len() >= 200);
    let real = all.iter().filter(|c| c.raw["kind"] == "real").count();
    let massive = all.iter().filter(|c| c.lepton.m() > 1.0).count();
    assert!(real >= 100, "{real} real cases");
    assert!(all.len() - real >= 50, "complex cases");
    assert!(massive >= 50, "{massive} cases with m_l > 1 GeV");
}

#[test]
fn real_roots_match_sympy() {
    // Reference: sympy 1.14.0 exact solution (radicals, evaluated to 40 digits).
    let mut checked = 0;
    for (i, c) in cases().iter().enumerate() {
        if c.raw["kind"] != "real" {
            continue;
        }
        let solver = WMassSolver {
            w_mass: c.w_mass,
            ..Default::default()
        };
        let s = solver.solve(&c.lepton, c.met.0, c.met.1).unwrap();
        assert_eq!(s.case(), SolutionCase::Real, "case {i}");
        assert_eq!(s.len(), 2, "case {i}");
        let tol = 1e-11 * scale(c);
        let mut want = [num(&c.raw["pz"][0]), num(&c.raw["pz"][1])];
        let mut got = [s.as_slice()[0].p4.pz(), s.as_slice()[1].p4.pz()];
        // Documented order: ascending |pz| (equal up to rounding for ties).
        assert!(
            got[0].abs() <= got[1].abs() + tol,
            "case {i}: order {got:?}"
        );
        want.sort_by(f64::total_cmp);
        got.sort_by(f64::total_cmp);
        for (g, w) in got.iter().zip(want) {
            assert!((g - w).abs() <= tol, "case {i}: pz {g} vs sympy {w}");
        }
        checked += 1;
    }
    assert!(checked >= 100);
}

#[test]
fn dropped_imaginary_is_sympy_real_part() {
    // Reference: real part of sympy 1.14.0's exact complex roots.
    let mut checked = 0;
    for (i, c) in cases().iter().enumerate() {
        if c.raw["kind"] != "complex" {
            continue;
        }
        let solver = WMassSolver {
            w_mass: c.w_mass,
            strategy: ComplexStrategy::DropImaginary,
        };
        let s = solver.solve(&c.lepton, c.met.0, c.met.1).unwrap();
        assert_eq!(s.case(), SolutionCase::DroppedImaginary, "case {i}");
        assert_eq!(s.len(), 1);
        let nu = s.smaller_abs_pz();
        let want = num(&c.raw["pz_real_part"]);
        assert!(
            (nu.p4.pz() - want).abs() <= 1e-11 * scale(c),
            "case {i}: {} vs {want}",
            nu.p4.pz()
        );
        assert_eq!((nu.p4.px(), nu.p4.py()), c.met, "MET kept");
        assert_eq!(nu.met_shift, 0.0);
        checked += 1;
    }
    assert!(checked >= 50);
}

#[test]
fn adjusted_met_matches_sympy_stationary_point_enumeration() {
    // Reference: sympy 1.14.0 — every stationary point of the distance on the
    // zero-discriminant curve (resultant of the Lagrange conditions, all
    // roots), nearest kept.
    let mut checked = 0;
    for (i, c) in cases().iter().enumerate() {
        if c.raw["kind"] != "complex" {
            continue;
        }
        let solver = WMassSolver {
            w_mass: c.w_mass,
            strategy: ComplexStrategy::AdjustMet,
        };
        let s = solver.solve(&c.lepton, c.met.0, c.met.1).unwrap();
        assert_eq!(s.case(), SolutionCase::AdjustedMet, "case {i}");
        let nu = s.smaller_abs_pz();
        let tol = 1e-9 * scale(c);
        let want_shift = num(&c.raw["met_shift"]);
        let (wx, wy) = (
            num(&c.raw["adjusted_met"][0]),
            num(&c.raw["adjusted_met"][1]),
        );
        assert!(
            (nu.met_shift - want_shift).abs() <= tol,
            "case {i}: shift {} vs {want_shift}",
            nu.met_shift
        );
        assert!(
            (nu.p4.px() - wx).abs() <= tol,
            "case {i}: px {} vs {wx}",
            nu.p4.px()
        );
        assert!(
            (nu.p4.py() - wy).abs() <= tol,
            "case {i}: py {} vs {wy}",
            nu.p4.py()
        );
        checked += 1;
    }
    assert!(checked >= 50);
}
