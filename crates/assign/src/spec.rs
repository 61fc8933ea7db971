//! The raw TOML form of a hypothesis, exactly as written by a user.
//!
//! These structs only mirror the file; [`crate::Hypothesis::from_toml`]
//! validates them and builds the indexed form the search uses. Keeping the raw
//! form lets [`crate::Hypothesis::to_toml`] write back what was read (particle
//! names stay names, optional fields stay absent).

use serde::{Deserialize, Serialize};

/// Top level of a hypothesis file.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct Spec {
    pub name: String,
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub about: String,
    pub leading_jets: u32,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub large_jet_overlap_dr: Option<f64>,
    #[serde(default, rename = "role", skip_serializing_if = "Vec::is_empty")]
    pub roles: Vec<RoleSpec>,
    #[serde(default, rename = "composite", skip_serializing_if = "Vec::is_empty")]
    pub composites: Vec<CompositeSpec>,
    #[serde(default, rename = "constraint", skip_serializing_if = "Vec::is_empty")]
    pub constraints: Vec<ConstraintSpec>,
    #[serde(
        default,
        rename = "interchangeable",
        skip_serializing_if = "Vec::is_empty"
    )]
    pub interchangeable: Vec<GroupSpec>,
    #[serde(default, rename = "lepton_pair", skip_serializing_if = "Vec::is_empty")]
    pub lepton_pairs: Vec<PairSpec>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum KindSpec {
    Jet,
    Lepton,
    Neutrino,
    LargeJet,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum TagSpec {
    B,
    Light,
    Any,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum FlavourSpec {
    E,
    Mu,
    Any,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum ChargeSpec {
    Plus,
    Minus,
    Any,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RoleSpec {
    pub name: String,
    pub kind: KindSpec,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tag: Option<TagSpec>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flavour: Option<FlavourSpec>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub charge: Option<ChargeSpec>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub from: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mass_window: Option<[f64; 2]>,
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub truth: Vec<String>,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct CompositeSpec {
    pub name: String,
    pub parts: Vec<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub or_large_jet: Option<String>,
}

/// A mass target: a particle name resolved through `quarry-pdg`, or GeV.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub(crate) enum TargetSpec {
    Particle(String),
    Gev(f64),
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct ConstraintSpec {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mass: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub equal: Option<Vec<String>>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub target: Option<TargetSpec>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub width: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub relative_width: Option<f64>,
    #[serde(default, skip_serializing_if = "is_false")]
    pub only_closest: bool,
}

fn is_false(b: &bool) -> bool {
    !*b
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct GroupSpec {
    pub roles: Vec<String>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum RelationSpec {
    Same,
    Different,
    Opposite,
    Any,
}

#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct PairSpec {
    pub roles: Vec<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flavour: Option<RelationSpec>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub charge: Option<RelationSpec>,
}
