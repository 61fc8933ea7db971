//! The reconstruction output's columns, defined once: name, kind, unit and
//! meaning of each, in output order.
//!
//! Everything else is derived from [`RECO_COLUMNS`]: the facade's output row
//! (`quarry::output::Row`, whose fields are checked against it at compile
//! time, so its serialized header is [`RECO_COLUMN_NAMES`]), the CSV
//! formatting of a row (one cell per column, in this order), the column
//! table of `docs/cli.md` (a test compares it with [`markdown_table`]),
//! `quarry eval`'s reader (it finds its columns by these constants' names),
//! and any other output format, which maps each [`ColumnKind`] to its own
//! type.
//!
//! Empty cells mean "does not apply". Momenta and masses are rounded to
//! 0.1 MeV (4 decimals in GeV), χ² to 6 decimals, probabilities to 6
//! significant digits.

/// What a column holds (every column may also be empty: "does not apply").
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColumnKind {
    /// An unsigned integer (counts, ids, positions).
    UInt,
    /// A 0/1 flag.
    Flag,
    /// A floating-point number.
    Float,
    /// Text.
    Text,
}

impl ColumnKind {
    /// The kind's name in the documentation table.
    pub const fn name(self) -> &'static str {
        match self {
            ColumnKind::UInt => "integer",
            ColumnKind::Flag => "0/1",
            ColumnKind::Float => "number",
            ColumnKind::Text => "text",
        }
    }
}

/// One output column.
///
/// Invariant: `name` is lower snake_case and unique within
/// [`RECO_COLUMNS`]; `unit` is empty for dimensionless columns.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Column {
    /// The header name.
    pub name: &'static str,
    /// What the cells hold.
    pub kind: ColumnKind,
    /// The unit of the cells (`GeV`), or empty.
    pub unit: &'static str,
    /// What the column means (Markdown).
    pub doc: &'static str,
}

const fn column(
    name: &'static str,
    kind: ColumnKind,
    unit: &'static str,
    doc: &'static str,
) -> Column {
    Column {
        name,
        kind,
        unit,
        doc,
    }
}

use ColumnKind::{Flag, Float, Text, UInt};

/// `ordinal`.
pub const ORDINAL: Column = column("ordinal", UInt, "", "0-based position of the event in the input stream: all files in order, every event counted (also rejected ones), before sharding");
/// `event`.
pub const EVENT: Column = column(
    "event",
    UInt,
    "",
    "event id from the input (empty if the reader could not parse it)",
);
/// `hypothesis`.
pub const HYPOTHESIS: Column = column("hypothesis", Text, "", "hypothesis name");
/// `status`.
pub const STATUS: Column = column(
    "status",
    Text,
    "",
    "what happened to the event under the hypothesis (see the statuses below)",
);
/// `reason`.
pub const REASON: Column = column("reason", Text, "", "detail for a non-`ok` status: the reader's error `file:line: column 'c': 'value' …` for `bad_input`, `needs 4 jet(s), has 3` for too few objects, the fit status for `fit_not_converged`");
/// `weight`.
pub const WEIGHT: Column = column("weight", Float, "", "event weight");
/// `n_jets`.
pub const N_JETS: Column = column("n_jets", UInt, "", "selected jets");
/// `n_bjets`.
pub const N_BJETS: Column = column(
    "n_bjets",
    UInt,
    "",
    "selected b-tagged jets (score above the b-tag working point, the same as the search's)",
);
/// `n_leptons`.
pub const N_LEPTONS: Column = column("n_leptons", UInt, "", "selected electrons + muons");
/// `n_fatjets`.
pub const N_FATJETS: Column = column("n_fatjets", UInt, "", "selected large-radius jets");
/// `n_fatjets_w`.
pub const N_FATJETS_W: Column = column(
    "n_fatjets_w",
    UInt,
    "",
    "large-radius jets with mass in the W window 60–100 GeV (a typical window, from memory)",
);
/// `lead_jet_pt`.
pub const LEAD_JET_PT: Column = column("lead_jet_pt", Float, "GeV", "leading jet pT");
/// `ht`.
pub const HT: Column = column("ht", Float, "GeV", "Σ pT of selected jets");
/// `st`.
pub const ST: Column = column("st", Float, "GeV", "HT + Σ lepton pT + MET");
/// `st_unclaimed`.
pub const ST_UNCLAIMED: Column = column("st_unclaimed", Float, "GeV", "the *unclaimed ST*: ST minus the pT of every object used by the best assignment of the reference hypothesis, by default `ttbar-ljets` (the hadronic top's three jets; the leptonic top's b jet, lepton and MET). Small for top pairs (only extra radiation), large for signal with extra heavy objects. Computed from the reference's search whatever `-H` says; empty when that search finds no assignment");
/// `mll_z`.
pub const MLL_Z: Column = column(
    "mll_z",
    Float,
    "GeV",
    "m(ℓℓ) of the same-flavour opposite-sign pair closest to m_Z; empty without such a pair",
);
/// `same_sign`.
pub const SAME_SIGN: Column = column(
    "same_sign",
    Flag,
    "",
    "1 if two leptons have the same charge, else 0",
);
/// `chi2`.
pub const CHI2: Column = column("chi2", Float, "", "χ² of the best assignment");
/// `assignment`.
pub const ASSIGNMENT: Column = column("assignment", Text, "", "the best assignment as `role=object;…`: jets by their input index (`b_had=3;q1=0;q2=5;b_lep=1`), leptons as `e0`/`mu1` (input index among that flavour), large-radius jets as `fj0`, the neutrino as `nu0`/`nu1` (root with the smaller/larger \\|pz\\|), `-` for a role left empty");
/// `masses`.
pub const MASSES: Column = column("masses", Text, "GeV", "every composite mass of the best assignment, `W_had=80.100;t_had=172.900;…` (3 decimals), declaration order");
/// `mass_a`.
pub const MASS_A: Column = column("mass_a", Float, "GeV", "first of the pair: the two composites of the hypothesis's first equal-mass constraint (e.g. `Q_had`, `Q_lep`); without one, its two top-level composites if there are exactly two (e.g. `t_had`, `t_lep`); else empty");
/// `mass_b`.
pub const MASS_B: Column = column("mass_b", Float, "GeV", "second of the pair");
/// `mass_avg`.
pub const MASS_AVG: Column = column("mass_avg", Float, "GeV", "(`mass_a` + `mass_b`)/2");
/// `nu_pz`.
pub const NU_PZ: Column = column("nu_pz", Float, "GeV", "neutrino pz of the best assignment");
/// `nu_solution`.
pub const NU_SOLUTION: Column = column("nu_solution", Text, "", "`real_smaller`, `real_larger` (root of the W-mass quadratic with the measured MET), `complex_real_part` (negative discriminant, imaginary part dropped), `met_adjusted` (negative discriminant, MET moved by the least amount)");
/// `nu_met_shift`.
pub const NU_MET_SHIFT: Column = column(
    "nu_met_shift",
    Float,
    "GeV",
    "how far the MET was moved for `met_adjusted`; 0 otherwise",
);
/// `n_evaluated`.
pub const N_EVALUATED: Column = column(
    "n_evaluated",
    UInt,
    "",
    "complete assignments whose χ² the search computed",
);
/// `n_candidates`.
pub const N_CANDIDATES: Column = column(
    "n_candidates",
    UInt,
    "",
    "ranked assignments the search returned (at most `--best`, default 3)",
);
/// `fit_status`.
pub const FIT_STATUS: Column = column("fit_status", Text, "", "with `--fit`: `converged`, `covariance_failed` (converged, no uncertainties), `iteration_limit`, `constraints_not_met`, `numerical_failure`, `invalid_input`");
/// `fit_chi2`.
pub const FIT_CHI2: Column = column("fit_chi2", Float, "", "fit χ²");
/// `fit_ndf`.
pub const FIT_NDF: Column = column("fit_ndf", UInt, "", "fit degrees of freedom");
/// `fit_prob`.
pub const FIT_PROB: Column = column("fit_prob", Float, "", "fit χ² probability");
/// `fit_mass`.
pub const FIT_MASS: Column = column(
    "fit_mass",
    Float,
    "GeV",
    "fitted common mass of the first equal-mass constraint (empty for hypotheses without one)",
);
/// `fit_mass_err`.
pub const FIT_MASS_ERR: Column = column("fit_mass_err", Float, "GeV", "uncertainty of `fit_mass`");
/// `truth_match`.
pub const TRUTH_MATCH: Column = column("truth_match", Flag, "", "1 if every role of the best assignment holds an object with a matching truth label, 0 if not; empty without truth labels or without an assignment");
/// `truth_composites`.
pub const TRUTH_COMPOSITES: Column = column("truth_composites", Text, "", "the same per composite, `W_had=1;t_had=0;…` in declaration order (a composite matches when every role under it does); read by `quarry eval`");

/// Every column of the reconstruction output, in output order.
pub const RECO_COLUMNS: [Column; 36] = [
    ORDINAL,
    EVENT,
    HYPOTHESIS,
    STATUS,
    REASON,
    WEIGHT,
    N_JETS,
    N_BJETS,
    N_LEPTONS,
    N_FATJETS,
    N_FATJETS_W,
    LEAD_JET_PT,
    HT,
    ST,
    ST_UNCLAIMED,
    MLL_Z,
    SAME_SIGN,
    CHI2,
    ASSIGNMENT,
    MASSES,
    MASS_A,
    MASS_B,
    MASS_AVG,
    NU_PZ,
    NU_SOLUTION,
    NU_MET_SHIFT,
    N_EVALUATED,
    N_CANDIDATES,
    FIT_STATUS,
    FIT_CHI2,
    FIT_NDF,
    FIT_PROB,
    FIT_MASS,
    FIT_MASS_ERR,
    TRUTH_MATCH,
    TRUTH_COMPOSITES,
];

/// The header: [`RECO_COLUMNS`]' names in order.
///
/// ```
/// use quarry_csv::columns::RECO_COLUMN_NAMES;
/// assert_eq!(RECO_COLUMN_NAMES[..4], ["ordinal", "event", "hypothesis", "status"]);
/// ```
pub const RECO_COLUMN_NAMES: [&str; RECO_COLUMNS.len()] = {
    let mut names = [""; RECO_COLUMNS.len()];
    let mut i = 0;
    while i < names.len() {
        names[i] = RECO_COLUMNS[i].name;
        i += 1;
    }
    names
};

/// The documentation table of the columns (Markdown), as in `docs/cli.md`.
///
/// ```
/// let table = quarry_csv::columns::markdown_table();
/// assert!(table.starts_with("| column | kind | unit | meaning |\n"));
/// assert!(table.contains("| `ht` | number | GeV | Σ pT of selected jets |\n"));
/// ```
pub fn markdown_table() -> String {
    let mut s = String::from("| column | kind | unit | meaning |\n|---|---|---|---|\n");
    for c in RECO_COLUMNS {
        let unit = if c.unit.is_empty() { "—" } else { c.unit };
        s.push_str(&format!(
            "| `{}` | {} | {} | {} |\n",
            c.name,
            c.kind.name(),
            unit,
            c.doc
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_snake_case() {
        let mut names = RECO_COLUMN_NAMES.to_vec();
        for n in &names {
            assert!(
                n.bytes()
                    .all(|b| b.is_ascii_lowercase() || b.is_ascii_digit() || b == b'_'),
                "{n}"
            );
        }
        names.sort_unstable();
        names.dedup();
        assert_eq!(names.len(), RECO_COLUMNS.len());
    }
}
