//! Every mass and width in quarry_pdg against the PDG Review of Particle
//! Physics **2026 edition** mass/width table, as shipped in the `particle`
//! package 1.1.0 (PyPI). The fixture is written by
//! `tests/reference/pdg_constants.py`, which copies the table's numbers.
//!
//! The constants are meant to *be* the table's central values, so the check
//! is exact equality of the central value (both sides parse the same decimal
//! text to the same f64); the table's uncertainty is printed to show the
//! scale of any disagreement, and a separate check confirms that each
//! constant lies within it (trivially true when equal, but it keeps the
//! comparison meaningful if a constant is ever deliberately set to another
//! review's value).

use serde_json::Value;

fn fixture() -> Value {
    let text = include_str!("../../../tests/reference/fixtures/pdg_constants.json");
    serde_json::from_str(text).unwrap()
}

fn entry<'a>(f: &'a Value, name: &str) -> &'a Value {
    &f["particles"][name]
}

fn num(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("fixture lacks {key}: {v}"))
}

fn check(name: &str, what: &str, constant: f64) {
    let f = fixture();
    let e = entry(&f, name);
    let central = num(e, what);
    let plus = num(e, &format!("{what}_err_plus"));
    let minus = num(e, &format!("{what}_err_minus"));
    assert_eq!(
        constant, central,
        "{name} {what}: quarry_pdg has {constant}, PDG RPP {} table has {central} +{plus} -{minus} GeV",
        f["edition"]
    );
    assert!(
        constant <= central + plus && constant >= central - minus,
        "{name} {what} outside the table's uncertainty"
    );
}

#[test]
fn table_is_the_2026_edition() {
    // If the `particle` package ships a newer table, this fails: re-run the
    // script, update the constants and the edition named in the crate docs.
    let f = fixture();
    assert_eq!(f["edition"], 2026);
    assert_eq!(
        f["table_header"],
        "* MASSES, WIDTHS, AND MC ID NUMBERS FROM 2026 EDITION OF RPP"
    );
    assert_eq!(f["unit"], "GeV");
}

// Source for every check below: PDG RPP 2026 mass/width table via the
// `particle` package 1.1.0 (PyPI).

#[test]
fn w_boson() {
    check("W", "mass", quarry_pdg::W_MASS);
    check("W", "width", quarry_pdg::W_WIDTH);
}

#[test]
fn z_boson() {
    check("Z", "mass", quarry_pdg::Z_MASS);
    check("Z", "width", quarry_pdg::Z_WIDTH);
}

#[test]
fn higgs_boson() {
    check("H", "mass", quarry_pdg::HIGGS_MASS);
    check("H", "width", quarry_pdg::HIGGS_WIDTH);
}

#[test]
fn top_quark() {
    check("top", "mass", quarry_pdg::TOP_MASS);
    check("top", "width", quarry_pdg::TOP_WIDTH);
}

#[test]
fn bottom_quark() {
    check("bottom", "mass", quarry_pdg::BOTTOM_MASS);
}

#[test]
fn charged_leptons() {
    check("electron", "mass", quarry_pdg::ELECTRON_MASS);
    check("muon", "mass", quarry_pdg::MUON_MASS);
    check("tau", "mass", quarry_pdg::TAU_MASS);
}

#[test]
fn branching_ratios_are_fractions_that_add_up() {
    // Not in the mass/width table; a consistency check only. W: the three
    // leptonic modes plus hadrons exhaust the width (PDG 2024 values sum to
    // 1.0013, within their uncertainties; from memory ±0.3 %).
    use quarry_pdg::branching::*;
    let w = W_TO_E_NU + W_TO_MU_NU + W_TO_TAU_NU + W_TO_HADRONS;
    assert!((w - 1.0).abs() < 0.005, "W branching sum {w}");
    // Z: e, μ, τ (≈ μ share, lepton universality) + invisible + hadrons.
    let z = Z_TO_EE + Z_TO_MUMU + Z_TO_MUMU + Z_TO_INVISIBLE + Z_TO_HADRONS;
    assert!((z - 1.0).abs() < 0.005, "Z branching sum {z}");
    const { assert!(Z_TO_BB < Z_TO_HADRONS && H_TO_BB > 0.5 && H_TO_BB < 0.65) };
}
