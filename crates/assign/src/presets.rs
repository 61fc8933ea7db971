//! Hypotheses shipped with quarry, as editable TOML.
//!
//! Each preset is a `.toml` file under `crates/assign/presets/`, compiled into
//! the binary with `include_str!`. Print one with [`toml()`], edit it, and load
//! the edited file with [`crate::Hypothesis::from_toml`]. Each file's header
//! comment states the physics it targets and where its widths come from
//! (typical resolution-dominated values, from memory).
//!
//! ```
//! use quarry_assign::presets;
//! for name in presets::names() {
//!     let h = presets::get(name).unwrap();
//!     assert_eq!(h.name(), *name);
//!     assert!(!presets::description(name).unwrap().is_empty());
//! }
//! ```

use crate::Hypothesis;

/// Top pair, lepton+jets (also used for the top-subtracted residual sum).
pub const TTBAR_LJETS: &str = "ttbar-ljets";

/// (name, one-line description, TOML text).
const PRESETS: [(&str, &str, &str); 13] = [
    (
        TTBAR_LJETS,
        "top pair, lepton+jets: hadronic W and both top masses (dominant background; objects feed the residual sum)",
        include_str!("../presets/ttbar-ljets.toml"),
    ),
    (
        "bwbw-ljets",
        "heavy-quark pair to bW bW, lepton+jets: hadronic W mass and equal quark masses",
        include_str!("../presets/bwbw-ljets.toml"),
    ),
    (
        "twtw-ljets",
        "heavy-quark pair to tW tW, lepton+jets, resolved: W, top and equal-mass constraints, up to 10 jets",
        include_str!("../presets/twtw-ljets.toml"),
    ),
    (
        "twtw-ljets-boosted",
        "as twtw-ljets, but a large-radius jet in a W mass window may fill either direct W",
        include_str!("../presets/twtw-ljets-boosted.toml"),
    ),
    (
        "tz-3l",
        "heavy quark to tZ (+ anything), Z to ll, three leptons: Z from the SFOS pair nearest m_Z, leptonic top",
        include_str!("../presets/tz-3l.toml"),
    ),
    (
        "bz-2l",
        "heavy quark to bZ, Z to ll: mass of the llb system for a bump search",
        include_str!("../presets/bz-2l.toml"),
    ),
    (
        "tgtg-ljets",
        "excited-top pair to tg tg, lepton+jets: W and top masses plus equal excited-top masses",
        include_str!("../presets/tgtg-ljets.toml"),
    ),
    (
        "tw-had5",
        "one heavy quark to tW, fully hadronic (same-sign dilepton events): five jets, two W and one top mass",
        include_str!("../presets/tw-had5.toml"),
    ),
    (
        "bwth-ljets",
        "heavy-quark pair to bW tH, H to bb, lepton+jets (lepton from the W), resolved: W, top, H and equal-mass constraints, 3-4 b-tags, up to 10 jets",
        include_str!("../presets/bwth-ljets.toml"),
    ),
    (
        "thth-ljets",
        "heavy-quark pair to tH tH, H to bb, lepton+jets, resolved: W, top, H and equal-mass constraints, 4+ b-tags, up to 10 jets",
        include_str!("../presets/thth-ljets.toml"),
    ),
    (
        "thth-ljets-boosted",
        "as thth-ljets, but a large-radius jet in a Higgs mass window may fill either H",
        include_str!("../presets/thth-ljets-boosted.toml"),
    ),
    (
        "twbh-ljets",
        "heavy-quark pair to tW bH, H to bb, lepton+jets (lepton from the top), resolved: W, top, H and equal-mass constraints, 3-4 b-tags, up to 10 jets",
        include_str!("../presets/twbh-ljets.toml"),
    ),
    (
        "tzth-ljets",
        "heavy-quark pair to tZ tH, H to bb, Z to jets, lepton+jets (lepton from the tH side's top), resolved: W, Z, top, H and equal-mass constraints, 2+ b-tags, up to 10 jets",
        include_str!("../presets/tzth-ljets.toml"),
    ),
];

/// Names of all presets.
///
/// ```
/// assert!(quarry_assign::presets::names().contains(&"ttbar-ljets"));
/// ```
pub fn names() -> &'static [&'static str] {
    const NAMES: [&str; PRESETS.len()] = {
        let mut out = [""; PRESETS.len()];
        let mut i = 0;
        while i < PRESETS.len() {
            out[i] = PRESETS[i].0;
            i += 1;
        }
        out
    };
    &NAMES
}

/// The preset called `name`, validated; `None` for an unknown name.
///
/// ```
/// assert!(quarry_assign::presets::get("bz-2l").is_some());
/// assert!(quarry_assign::presets::get("nope").is_none());
/// ```
pub fn get(name: &str) -> Option<Hypothesis> {
    // Shipped presets are checked by the test suite; a failure here would be
    // a build defect, reported as "unknown".
    toml(name).and_then(|t| Hypothesis::from_toml(t).ok())
}

/// The preset's TOML text, with its explanatory comments.
///
/// ```
/// assert!(quarry_assign::presets::toml("tz-3l").unwrap().contains("only_closest"));
/// ```
pub fn toml(name: &str) -> Option<&'static str> {
    PRESETS.iter().find(|p| p.0 == name).map(|p| p.2)
}

/// A one-line description of the preset.
///
/// ```
/// assert!(quarry_assign::presets::description("tw-had5").unwrap().contains("five jets"));
/// ```
pub fn description(name: &str) -> Option<&'static str> {
    PRESETS.iter().find(|p| p.0 == name).map(|p| p.1)
}
