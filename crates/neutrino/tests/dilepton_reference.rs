//! Outside reference: the dilepton quartic and its solutions from sympy
//! 1.14.0 (PyPI), written by `tests/reference/dilepton_sympy.py` into
//! `tests/reference/fixtures/dilepton_sympy.json`: the resultant of the two
//! neutrino mass-shell conics computed exactly on the rationals of the
//! inputs (sympy.linsolve, sympy.resultant), its real roots to 40 digits
//! (Poly.nroots), and the physical solutions (both neutrino energies > 0).
//! The equations are those of L. Sonnenschein, Phys. Rev. D 73 (2006)
//! 054015. Lepton and b-quark masses come from the `particle` package's PDG
//! table.

use quarry_lorentz::FourMomentum;
use quarry_neutrino::dilepton::{real_roots, DileptonEvent, DileptonMasses, DileptonSolver};
use serde_json::Value;

const FIXTURE: &str = include_str!("../../../tests/reference/fixtures/dilepton_sympy.json");

struct Case {
    kind: String,
    event: DileptonEvent,
    solver: DileptonSolver,
    raw: Value,
}

fn nums(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("fixture array")
        .iter()
        .map(|x| x.as_f64().expect("fixture number"))
        .collect()
}

fn p4(v: &Value) -> FourMomentum {
    let c = nums(v);
    FourMomentum::new(c[0], c[1], c[2], c[3])
}

fn cases() -> Vec<Case> {
    let doc: Value = serde_json::from_str(FIXTURE).expect("fixture parses");
    assert!(doc["source"].as_str().unwrap().starts_with("sympy "));
    doc["cases"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let met = nums(&c["met"]);
            let m = nums(&c["masses"]);
            Case {
                kind: c["kind"].as_str().unwrap().to_string(),
                event: DileptonEvent {
                    lepton_a: p4(&c["lepton_a"]),
                    lepton_b: p4(&c["lepton_b"]),
                    bjet_a: p4(&c["bjet_a"]),
                    bjet_b: p4(&c["bjet_b"]),
                    met: (met[0], met[1]),
                },
                solver: DileptonSolver {
                    masses: DileptonMasses {
                        w_a: m[0],
                        w_b: m[1],
                        top_a: m[2],
                        top_b: m[3],
                    },
                },
                raw: c.clone(),
            }
        })
        .collect()
}

#[test]
fn fixture_covers_exact_and_perturbed_cases_with_zero_two_and_four_solutions() {
    let all = cases();
    assert!(all.len() >= 100);
    let count = |k: usize| {
        all.iter()
            .filter(|c| c.raw["solutions"].as_array().unwrap().len() == k)
            .count()
    };
    assert!(count(0) >= 3 && count(2) >= 50 && count(4) >= 5);
    assert!(all.iter().filter(|c| c.kind == "exact").count() >= 50);
}

#[test]
fn quartic_coefficients_match_sympy_resultant() {
    // Reference: sympy 1.14.0 resultant on exact rationals, normalised to a
    // largest coefficient magnitude of 1 (the resultant's sign does not
    // depend on the conics' scaling, so signs must agree too).
    let mut worst = 0.0_f64;
    for (i, c) in cases().iter().enumerate() {
        let q = c.solver.quartic(&c.event).unwrap().in_gev();
        let want = nums(&c.raw["quartic"]);
        for (k, (g, w)) in q.iter().zip(&want).enumerate() {
            let d = (g - w).abs();
            worst = worst.max(d);
            assert!(d <= 1e-9, "case {i} c{k}: {g} vs sympy {w}");
        }
    }
    eprintln!("largest coefficient difference {worst:e}");
}

#[test]
fn real_roots_match_sympy_nroots() {
    // Reference: sympy 1.14.0 Poly.nroots (40 digits) of the exact quartic;
    // quarry's companion-matrix roots of its own float quartic.
    for (i, c) in cases().iter().enumerate() {
        let q = c.solver.quartic(&c.event).unwrap();
        let want: Vec<f64> = nums(&c.raw["real_roots"]);
        let (roots, n) = real_roots(&q.coefficients).unwrap();
        let got: Vec<f64> = roots[..n].iter().map(|r| r * q.scale).collect();
        for w in &want {
            let nearest = got
                .iter()
                .map(|g| (g - w).abs())
                .fold(f64::INFINITY, f64::min);
            assert!(
                nearest <= 1e-6 * q.scale,
                "case {i}: sympy root {w}, quarry {got:?}"
            );
        }
        // Extra quarry roots are only allowed as near-double roots of sympy's.
        for g in &got {
            let nearest = want
                .iter()
                .map(|w| (g - w).abs())
                .fold(f64::INFINITY, f64::min);
            assert!(
                nearest <= 1e-4 * q.scale,
                "case {i}: quarry root {g}, sympy {want:?}"
            );
        }
    }
}

#[test]
fn solutions_match_sympy_physical_solutions() {
    // Reference: the physical solutions (E > 0 on both sides) sympy finds
    // from its 40-digit roots; same count, each matched to 1e-6 relative.
    for (i, c) in cases().iter().enumerate() {
        let got = c.solver.solve(&c.event).unwrap();
        let want = c.raw["solutions"].as_array().unwrap();
        assert_eq!(got.len(), want.len(), "case {i} ({})", c.kind);
        let scale = c.solver.quartic(&c.event).unwrap().scale;
        for w in want {
            let w = nums(w);
            let matched = got.as_slice().iter().any(|p| {
                let g = [
                    p.nu_a.px(),
                    p.nu_a.py(),
                    p.nu_a.pz(),
                    p.nu_b.px(),
                    p.nu_b.py(),
                    p.nu_b.pz(),
                ];
                g.iter().zip(&w).all(|(a, b)| (a - b).abs() <= 1e-6 * scale)
            });
            assert!(
                matched,
                "case {i}: sympy solution {w:?} not found in {got:?}"
            );
        }
        if c.kind == "exact" {
            let t = nums(&c.raw["truth"]);
            let found = got.as_slice().iter().any(|p| {
                (p.nu_a.px() - t[0]).abs() <= 1e-6 * scale
                    && (p.nu_a.pz() - t[2]).abs() <= 1e-6 * scale
                    && (p.nu_b.pz() - t[5]).abs() <= 1e-6 * scale
            });
            assert!(found, "case {i}: true neutrinos not among the solutions");
        }
    }
}
