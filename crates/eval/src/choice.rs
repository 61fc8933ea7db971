//! Which column is a hypothesis's reconstructed mass: chosen from measured
//! closure on the signal samples, with every candidate's closure kept so a
//! user sees the choice.
//!
//! Why not one fixed column: the fitted common mass (`fit_mass`) is the
//! best estimate when the assignment is right, but in hypotheses where most
//! events get a wrong assignment (e.g. a tW pair with many jets) the fit
//! pulls the wrong events' mass down and the peak with them, while the
//! plain mean of the two candidates (`mass_avg`) stays near the generated
//! mass. Which is better depends on the hypothesis and the sample, so it is
//! measured.

use crate::read::MassColumn;
use crate::record::EvalRecord;
use crate::summary::MassResolution;

/// How one mass column closes on one signal sample.
#[derive(Clone, Debug, PartialEq)]
pub struct SampleClosure {
    /// Sample name.
    pub sample: String,
    /// Generated mass \[GeV\].
    pub generated_mass: f64,
    /// Peak, width and shift of the column's masses over the sample's `ok`
    /// rows.
    pub resolution: MassResolution,
}

impl SampleClosure {
    /// The closure measure of one sample: √(shift² + (σ/m)²), the peak's
    /// relative distance from the generated mass and the relative core
    /// width added in quadrature (a biased or a wide peak both score badly).
    pub fn score(&self) -> f64 {
        let shift = self.resolution.peak_shift.unwrap_or(0.0);
        shift.hypot(self.resolution.relative_resolution)
    }
}

/// One candidate column of one hypothesis over its signal samples.
#[derive(Clone, Debug, PartialEq)]
pub struct ColumnClosure {
    /// Column name.
    pub column: String,
    /// Closure per signal sample where the column gives a peak, in order of
    /// generated mass.
    pub samples: Vec<SampleClosure>,
}

impl ColumnClosure {
    /// Root mean square of the samples' [`SampleClosure::score`]; `None`
    /// without samples.
    pub fn score(&self) -> Option<f64> {
        if self.samples.is_empty() {
            return None;
        }
        let sum: f64 = self.samples.iter().map(|s| s.score().powi(2)).sum();
        Some((sum / self.samples.len() as f64).sqrt())
    }
}

/// The mass column of one hypothesis and why.
#[derive(Clone, Debug, PartialEq)]
pub struct MassChoice {
    /// Hypothesis name.
    pub hypothesis: String,
    /// The column used; `None` when the hypothesis reconstructs no pair
    /// mass (e.g. the top-pair hypothesis: its masses are fixed targets).
    pub column: Option<String>,
    /// Why, in words (shown in the table).
    pub reason: String,
    /// Every candidate column's closure, side by side.
    pub columns: Vec<ColumnClosure>,
}

/// Chooses each hypothesis's mass column and sets every record's `mass`
/// and `mass_column` from it.
///
/// `fixed_mass` names hypotheses whose pair masses are constrained to a
/// known particle's mass (e.g. the top-pair hypothesis, whose `mass_a` and
/// `mass_b` are the two top candidates): their masses say nothing about a
/// signal's mass, so no column is chosen for them (column `None`; the
/// masses stay as read, and [`crate::Summary::mark_fixed_mass`] leaves
/// their signal groups out of the table and the right-fraction plot).
///
/// With [`MassColumn::Auto`], the column is the candidate
/// ([`crate::MASS_CANDIDATES`]) with the smallest [`ColumnClosure::score`]
/// among those that give a peak on the most signal samples. Without any
/// signal sample the rule falls back to `fit_mass` where the fit gave one,
/// else `mass_avg` (as read). With [`MassColumn::Named`] the named column
/// is used and the others' closure is still reported.
///
/// ```
/// use quarry_eval::{choose_mass_columns, EvalRecord, MassColumn};
/// // A biased fitted mass and an unbiased mean, at 1000 GeV.
/// let mut records: Vec<EvalRecord> = (0..400)
///     .map(|i| {
///         let spread = (i % 21) as f64 - 10.0;
///         EvalRecord {
///             sample: "T1000".into(),
///             generated_mass: Some(1000.0),
///             hypothesis: "pair".into(),
///             status: "ok".into(),
///             mass_candidates: vec![
///                 ("fit_mass".into(), 850.0 + spread),
///                 ("mass_avg".into(), 1000.0 + 2.0 * spread),
///             ],
///             ..EvalRecord::default()
///         }
///     })
///     .collect();
/// let choices = choose_mass_columns(&mut records, &MassColumn::Auto, &[]);
/// assert_eq!(choices[0].column.as_deref(), Some("mass_avg"));
/// assert_eq!(records[0].mass_column, "mass_avg");
/// ```
pub fn choose_mass_columns(
    records: &mut [EvalRecord],
    mass: &MassColumn,
    fixed_mass: &[String],
) -> Vec<MassChoice> {
    let mut hypotheses: Vec<String> = Vec::new();
    for r in records.iter() {
        if !hypotheses.contains(&r.hypothesis) {
            hypotheses.push(r.hypothesis.clone());
        }
    }
    let mut choices = Vec::new();
    for h in hypotheses {
        let mine = |r: &&EvalRecord| r.hypothesis == h;
        let columns = closures(records.iter().filter(mine));
        let any_mass = records
            .iter()
            .filter(mine)
            .any(|r| r.mass.is_some() || !r.mass_candidates.is_empty());
        let (column, reason, measured) = match mass {
            _ if fixed_mass.contains(&h) => (
                None,
                "its pair masses are constrained to a known particle's mass: they do not \
                 estimate the signal's mass"
                    .to_string(),
                false,
            ),
            MassColumn::Named(n) => (
                Some(n.clone()),
                "chosen with --mass-column".to_string(),
                false,
            ),
            MassColumn::Auto if !any_mass => (
                None,
                "the hypothesis reconstructs no pair mass (no mass column has a value)".into(),
                false,
            ),
            MassColumn::Auto => best(&columns),
        };
        if let (true, Some(c)) = (measured, &column) {
            for r in records.iter_mut().filter(|r| r.hypothesis == h) {
                r.mass = r
                    .mass_candidates
                    .iter()
                    .find(|(name, _)| name == c)
                    .map(|&(_, m)| m);
                r.mass_column = c.clone();
            }
        }
        choices.push(MassChoice {
            hypothesis: h,
            column,
            reason,
            columns,
        });
    }
    choices
}

/// One sample's masses in one column: (sample, generated mass, masses).
type SampleMasses = (String, f64, Vec<f64>);

/// Every candidate column's closure over the signal samples in `rows`.
fn closures<'a>(rows: impl Iterator<Item = &'a EvalRecord>) -> Vec<ColumnClosure> {
    // Per column, in order of appearance: its masses per sample.
    let mut per: Vec<(String, Vec<SampleMasses>)> = Vec::new();
    for r in rows.filter(|r| r.is_ok()) {
        let Some(generated) = r.generated_mass else {
            continue;
        };
        for (column, m) in &r.mass_candidates {
            let pos = match per.iter().position(|(c, _)| c == column) {
                Some(p) => p,
                None => {
                    per.push((column.clone(), Vec::new()));
                    per.len() - 1
                }
            };
            let samples = &mut per[pos].1;
            match samples.iter_mut().find(|s| s.0 == r.sample) {
                Some(s) => s.2.push(*m),
                None => samples.push((r.sample.clone(), generated, vec![*m])),
            }
        }
    }
    per.into_iter()
        .map(|(column, samples)| {
            let mut samples: Vec<SampleClosure> = samples
                .into_iter()
                .filter_map(|(sample, generated_mass, masses)| {
                    Some(SampleClosure {
                        sample,
                        generated_mass,
                        resolution: MassResolution::of(&masses, Some(generated_mass))?,
                    })
                })
                .collect();
            samples.sort_by(|a, b| a.generated_mass.total_cmp(&b.generated_mass));
            ColumnClosure { column, samples }
        })
        .collect()
}

/// The best-closing column, the reason, and whether closure chose it
/// (`false`: the fallback rule without signal samples, which keeps the
/// masses as read).
fn best(columns: &[ColumnClosure]) -> (Option<String>, String, bool) {
    let most = columns.iter().map(|c| c.samples.len()).max().unwrap_or(0);
    if most == 0 {
        let has = |n: &str| columns.iter().any(|c| c.column == n);
        let fallback = if has("fit_mass") {
            "fit_mass"
        } else {
            "mass_avg"
        };
        return (
            Some(fallback.to_string()),
            "no signal sample to measure closure on: fit_mass where the fit gave one, else mass_avg"
                .into(),
            false,
        );
    }
    let mut ranked: Vec<(&ColumnClosure, f64)> = columns
        .iter()
        .filter(|c| c.samples.len() == most)
        .filter_map(|c| Some((c, c.score()?)))
        .collect();
    ranked.sort_by(|a, b| a.1.total_cmp(&b.1));
    let (chosen, score) = ranked[0];
    let mut reason = format!(
        "smallest closure score {score:.3} (r.m.s. over {most} signal sample{} of √(peak shift² + (σ/m)²))",
        if most == 1 { "" } else { "s" }
    );
    if let Some((next, s)) = ranked.get(1) {
        reason.push_str(&format!("; next {} {s:.3}", next.column));
    }
    (Some(chosen.column.clone()), reason, true)
}

/// A Markdown table of every candidate column's closure per hypothesis:
/// the peak shift and σ/m on each signal sample, the score, and which
/// column was chosen and why.
///
/// ```
/// assert!(quarry_eval::mass_choice_table(&[]).starts_with("| hypothesis |"));
/// ```
pub fn mass_choice_table(choices: &[MassChoice]) -> String {
    let mut s = String::from(
        "| hypothesis | mass column | used | closure score | peak shift, σ/m per generated mass |\n\
         |---|---|---|---:|---|\n",
    );
    for choice in choices {
        if choice.columns.is_empty() {
            s.push_str(&format!(
                "| {} | – | – | – | {} |\n",
                choice.hypothesis, choice.reason
            ));
            continue;
        }
        for (i, c) in choice.columns.iter().enumerate() {
            let used = choice.column.as_deref() == Some(c.column.as_str());
            let note = if used {
                format!("**yes**: {}", choice.reason)
            } else if choice.column.is_none() && i == 0 {
                format!("none: {}", choice.reason)
            } else {
                String::new()
            };
            let per: Vec<String> = c
                .samples
                .iter()
                .map(|x| {
                    format!(
                        "{}: {:+.1} %, {:.1} %",
                        x.generated_mass,
                        100.0 * x.resolution.peak_shift.unwrap_or(0.0),
                        100.0 * x.resolution.relative_resolution
                    )
                })
                .collect();
            s.push_str(&format!(
                "| {} | {} | {} | {} | {} |\n",
                choice.hypothesis,
                c.column,
                note,
                c.score().map_or("–".into(), |x| format!("{x:.3}")),
                per.join("; ")
            ));
        }
    }
    s
}
