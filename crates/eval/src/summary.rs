//! Per (sample, hypothesis) metrics and the summary CSV.

use std::collections::BTreeMap;
use std::io::Write;

use crate::record::{EvalError, EvalRecord};
use crate::stats::{
    gaussian_core, quantile, shortest_interval, sorted_finite, Fraction, ONE_SIGMA_COVERAGE,
};

/// Tail cut of [`MassResolution::tail_fraction`], in core σ.
pub const TAIL_CUT: f64 = 3.0;

/// The evaluation of every (sample, hypothesis) pair found in the records,
/// in order of first appearance.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Summary {
    /// One entry per (sample, hypothesis).
    pub groups: Vec<GroupSummary>,
}

impl Summary {
    /// Marks the signal groups of `hypotheses` as not measuring the
    /// signal's mass ([`GroupSummary::measures_signal_mass`]): hypotheses
    /// whose pair masses are constrained to a known particle's mass (see
    /// [`crate::choose_mass_columns`]).
    ///
    /// ```
    /// use quarry_eval::{evaluate, EvalRecord};
    /// let r = EvalRecord { sample: "T1000".into(), generated_mass: Some(1000.0),
    ///     hypothesis: "ttbar-ljets".into(), status: "ok".into(), mass: Some(172.0),
    ///     ..EvalRecord::default() };
    /// let mut s = evaluate(&[r]);
    /// assert!(s.groups[0].measures_signal_mass);
    /// s.mark_fixed_mass(&["ttbar-ljets".to_string()]);
    /// assert!(!s.groups[0].measures_signal_mass);
    /// ```
    pub fn mark_fixed_mass(&mut self, hypotheses: &[String]) {
        for g in &mut self.groups {
            if g.generated_mass.is_some() && hypotheses.contains(&g.hypothesis) {
                g.measures_signal_mass = false;
            }
        }
    }

    /// The entry for `sample` and `hypothesis`, if any.
    pub fn get(&self, sample: &str, hypothesis: &str) -> Option<&GroupSummary> {
        self.groups
            .iter()
            .find(|g| g.sample == sample && g.hypothesis == hypothesis)
    }
}

/// Metrics of one sample under one hypothesis.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct GroupSummary {
    /// Sample name.
    pub sample: String,
    /// Generated mass \[GeV\] (signal samples).
    pub generated_mass: Option<f64>,
    /// Hypothesis name.
    pub hypothesis: String,
    /// Rows (events) of this sample under this hypothesis.
    pub n_rows: usize,
    /// Rows per status name.
    pub status_counts: BTreeMap<String, usize>,
    /// Rows with status `ok`.
    pub n_ok: usize,
    /// Right-assignment fraction: `ok` rows whose chosen assignment matches
    /// the truth, among `ok` rows with a truth verdict. `None` without any.
    pub right: Option<Fraction>,
    /// Per-composite right fraction, among `ok` rows that carry the
    /// composite's verdict (only when the input has per-composite truth);
    /// sorted by composite name.
    pub composites: Vec<(String, Fraction)>,
    /// Mass peak and resolution over all `ok` rows with a mass.
    pub mass: Option<MassResolution>,
    /// χ² of the chosen assignment, `ok` rows matching the truth.
    pub chi2_right: Option<Quantiles>,
    /// χ² of the chosen assignment, `ok` rows not matching the truth.
    pub chi2_wrong: Option<Quantiles>,
    /// Fit probability, `ok` rows matching the truth.
    pub fit_prob_right: Option<Quantiles>,
    /// Fit probability, `ok` rows not matching the truth.
    pub fit_prob_wrong: Option<Quantiles>,
    /// The column the masses came from (the most common among the `ok`
    /// rows with a mass; empty if none has one).
    pub mass_column: String,
    /// Whether this group says anything about the signal's mass: `false`
    /// for a signal sample under a hypothesis that reconstructs no pair
    /// mass although it reconstructed events, or whose pair masses are a
    /// known particle's ([`Summary::mark_fixed_mass`], e.g. the top-pair
    /// hypothesis on heavy-quark signal). Such groups stay in the summary CSV but are
    /// left out of the Markdown table and the right-fraction plot.
    /// Always `true` for background.
    pub measures_signal_mass: bool,
}

/// Peak and width of a reconstructed-mass distribution.
///
/// Definitions (robust against the wrong-assignment tails):
/// - `peak`, `core_sigma`: the iterative ±2σ Gaussian core
///   ([`crate::stats::gaussian_core`]): centre = mean inside the window,
///   σ = r.m.s. inside corrected for the truncation;
/// - `half_width_68`: half the width of the narrowest interval holding
///   68.27 % of the masses ([`crate::stats::shortest_interval`]), which
///   includes the tails' effect;
/// - `tail_fraction`: fraction of masses outside `peak ± 3·core_sigma`
///   ([`TAIL_CUT`]); 0.27 % for a pure Gaussian.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MassResolution {
    /// Masses used.
    pub n: usize,
    /// Peak position \[GeV\].
    pub peak: f64,
    /// Statistical uncertainty of the peak, core_sigma/√n_core \[GeV\].
    pub peak_err: f64,
    /// Gaussian-core width \[GeV\].
    pub core_sigma: f64,
    /// Half-width of the narrowest 68.27 % interval \[GeV\].
    pub half_width_68: f64,
    /// Fraction outside peak ± 3 core σ.
    pub tail_fraction: f64,
    /// core_sigma divided by the generated mass (signal) or by the peak
    /// (background).
    pub relative_resolution: f64,
    /// (peak − generated)/generated; `None` for background.
    pub peak_shift: Option<f64>,
}

impl MassResolution {
    /// Evaluates `masses` (non-finite values are dropped); `None` when the
    /// core estimate fails (too few values or no spread).
    ///
    /// ```
    /// use quarry_eval::MassResolution;
    /// let masses: Vec<f64> = (0..400).map(|i| 990.0 + (i % 21) as f64).collect();
    /// let r = MassResolution::of(&masses, Some(1000.0)).unwrap();
    /// assert!((r.peak - 1000.0).abs() < 0.1);
    /// assert!(r.peak_shift.unwrap().abs() < 1e-3);
    /// ```
    pub fn of(masses: &[f64], generated_mass: Option<f64>) -> Option<MassResolution> {
        let sorted = sorted_finite(masses.iter().copied());
        let core = gaussian_core(&sorted)?;
        let (lo, hi) = shortest_interval(&sorted, ONE_SIGMA_COVERAGE)?;
        let reference = generated_mass.unwrap_or(core.center);
        Some(MassResolution {
            n: sorted.len(),
            peak: core.center,
            peak_err: core.center_error(),
            core_sigma: core.sigma,
            half_width_68: 0.5 * (hi - lo),
            tail_fraction: core.outside_fraction(&sorted, TAIL_CUT),
            relative_resolution: core.sigma / reference.abs(),
            peak_shift: generated_mass.map(|m| (core.center - m) / m),
        })
    }
}

/// Summary quantiles of a distribution (type-7 interpolation, see
/// [`crate::stats::quantile`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Quantiles {
    /// Values.
    pub n: usize,
    /// 10 % quantile.
    pub q10: f64,
    /// Median.
    pub median: f64,
    /// 90 % quantile.
    pub q90: f64,
}

impl Quantiles {
    /// Quantiles of the finite `values`; `None` if there are none.
    ///
    /// ```
    /// let q = quarry_eval::Quantiles::of([1.0, 2.0, 3.0, f64::NAN]).unwrap();
    /// assert_eq!((q.n, q.median), (3, 2.0));
    /// ```
    pub fn of(values: impl IntoIterator<Item = f64>) -> Option<Quantiles> {
        let s = sorted_finite(values);
        Some(Quantiles {
            n: s.len(),
            q10: quantile(&s, 0.1)?,
            median: quantile(&s, 0.5)?,
            q90: quantile(&s, 0.9)?,
        })
    }
}

/// Evaluates every (sample, hypothesis) pair in `records`.
///
/// ```
/// use quarry_eval::{evaluate, EvalRecord};
/// let rec = |ok: bool, right: bool, m: f64| EvalRecord {
///     sample: "T1000".into(), generated_mass: Some(1000.0), hypothesis: "bwbw".into(),
///     status: if ok { "ok" } else { "no_valid_assignment" }.into(),
///     mass: ok.then_some(m), chi2: ok.then_some(1.0), truth_match: ok.then_some(right),
///     ..EvalRecord::default()
/// };
/// let mut records: Vec<_> = (0..100).map(|i| rec(true, i % 4 != 0, 990.0 + (i % 21) as f64)).collect();
/// records.push(rec(false, false, 0.0));
/// let s = evaluate(&records);
/// let g = s.get("T1000", "bwbw").unwrap();
/// assert_eq!((g.n_rows, g.n_ok), (101, 100));
/// assert_eq!(g.status_counts["no_valid_assignment"], 1);
/// assert_eq!(g.right.unwrap().value(), 0.75);
/// ```
pub fn evaluate(records: &[EvalRecord]) -> Summary {
    let mut order: Vec<(&str, &str)> = Vec::new();
    let mut members: BTreeMap<(&str, &str), Vec<&EvalRecord>> = BTreeMap::new();
    for r in records {
        let key = (r.sample.as_str(), r.hypothesis.as_str());
        members
            .entry(key)
            .or_insert_with(|| {
                order.push(key);
                Vec::new()
            })
            .push(r);
    }
    Summary {
        groups: order
            .into_iter()
            .map(|key| summarise(&members[&key]))
            .collect(),
    }
}

fn summarise(rows: &[&EvalRecord]) -> GroupSummary {
    let first = rows[0];
    let mut status_counts = BTreeMap::new();
    for r in rows {
        *status_counts.entry(r.status.clone()).or_insert(0) += 1;
    }
    let ok: Vec<&EvalRecord> = rows.iter().copied().filter(|r| r.is_ok()).collect();
    let with_truth = ok.iter().filter(|r| r.truth_match.is_some()).count();
    let n_right = ok.iter().filter(|r| r.truth_match == Some(true)).count();
    let mut per_composite: BTreeMap<&str, (usize, usize)> = BTreeMap::new();
    for r in &ok {
        for (name, matched) in &r.composite_matches {
            let e = per_composite.entry(name.as_str()).or_insert((0, 0));
            e.0 += usize::from(*matched);
            e.1 += 1;
        }
    }
    let masses: Vec<f64> = ok.iter().filter_map(|r| r.mass).collect();
    let mut columns: BTreeMap<&str, usize> = BTreeMap::new();
    for r in ok.iter().filter(|r| r.mass.is_some()) {
        *columns.entry(r.mass_column.as_str()).or_insert(0) += 1;
    }
    let mass_column = columns
        .iter()
        .max_by_key(|(_, n)| **n)
        .map_or(String::new(), |(c, _)| c.to_string());
    let has_pair_mass = ok
        .iter()
        .any(|r| r.mass.is_some() || !r.mass_candidates.is_empty());
    let measures_signal_mass = first.generated_mass.is_none() || ok.is_empty() || has_pair_mass;
    let pick = |right: bool, f: fn(&EvalRecord) -> Option<f64>| {
        Quantiles::of(
            ok.iter()
                .filter(|r| r.truth_match == Some(right))
                .filter_map(|r| f(r)),
        )
    };
    GroupSummary {
        sample: first.sample.clone(),
        generated_mass: first.generated_mass,
        hypothesis: first.hypothesis.clone(),
        n_rows: rows.len(),
        status_counts,
        n_ok: ok.len(),
        right: Fraction::new(n_right, with_truth),
        composites: per_composite
            .into_iter()
            .filter_map(|(name, (k, n))| Some((name.to_string(), Fraction::new(k, n)?)))
            .collect(),
        mass: MassResolution::of(&masses, first.generated_mass),
        chi2_right: pick(true, |r| r.chi2),
        chi2_wrong: pick(false, |r| r.chi2),
        fit_prob_right: pick(true, |r| r.fit_prob),
        fit_prob_wrong: pick(false, |r| r.fit_prob),
        mass_column,
        measures_signal_mass,
    }
}

/// Columns of the summary CSV, in order. Stable: new columns are only ever
/// appended. Empty fields mean "not available" (no truth, no fit, too few
/// masses, background sample).
pub const SUMMARY_COLUMNS: [&str; 33] = [
    "sample",
    "generated_mass",
    "hypothesis",
    "n_rows",
    "n_ok",
    "status_counts",
    "n_truth",
    "n_right",
    "right_fraction",
    "right_fraction_err",
    "right_fraction_lo68",
    "right_fraction_hi68",
    "composite_right",
    "n_mass",
    "mass_peak",
    "mass_peak_err",
    "mass_core_sigma",
    "mass_half_width_68",
    "mass_rel_resolution",
    "mass_peak_shift",
    "mass_tail_fraction",
    "chi2_right_median",
    "chi2_right_q90",
    "chi2_wrong_median",
    "chi2_wrong_q90",
    "n_fit_right",
    "fit_prob_right_median",
    "fit_prob_right_q10",
    "n_fit_wrong",
    "fit_prob_wrong_median",
    "fit_prob_wrong_q10",
    "mass_column",
    "measures_signal_mass",
];

fn opt<T>(x: Option<T>, f: impl Fn(T) -> String) -> String {
    x.map(f).unwrap_or_default()
}

/// The summary CSV row of `g`, one field per [`SUMMARY_COLUMNS`] entry.
pub fn summary_row(g: &GroupSummary) -> Vec<String> {
    let f4 = |x: f64| format!("{x:.4}");
    let f6 = |x: f64| format!("{x:.6}");
    let status_counts = g
        .status_counts
        .iter()
        .map(|(k, v)| format!("{k}={v}"))
        .collect::<Vec<_>>()
        .join(";");
    let composite_right = g
        .composites
        .iter()
        .map(|(name, f)| format!("{name}={}/{}", f.k, f.n))
        .collect::<Vec<_>>()
        .join(";");
    let m = g.mass;
    let wilson = g.right.map(|f| f.wilson(1.0));
    vec![
        g.sample.clone(),
        opt(g.generated_mass, |x| format!("{x}")),
        g.hypothesis.clone(),
        g.n_rows.to_string(),
        g.n_ok.to_string(),
        status_counts,
        opt(g.right, |f| f.n.to_string()),
        opt(g.right, |f| f.k.to_string()),
        opt(g.right, |f| f6(f.value())),
        opt(g.right, |f| f6(f.std_error())),
        opt(wilson, |w| f6(w.0)),
        opt(wilson, |w| f6(w.1)),
        composite_right,
        opt(m, |m| m.n.to_string()),
        opt(m, |m| f4(m.peak)),
        opt(m, |m| f4(m.peak_err)),
        opt(m, |m| f4(m.core_sigma)),
        opt(m, |m| f4(m.half_width_68)),
        opt(m, |m| f6(m.relative_resolution)),
        opt(m.and_then(|m| m.peak_shift), f6),
        opt(m, |m| f6(m.tail_fraction)),
        opt(g.chi2_right, |q| f6(q.median)),
        opt(g.chi2_right, |q| f6(q.q90)),
        opt(g.chi2_wrong, |q| f6(q.median)),
        opt(g.chi2_wrong, |q| f6(q.q90)),
        g.fit_prob_right.map_or(0, |q| q.n).to_string(),
        opt(g.fit_prob_right, |q| f6(q.median)),
        opt(g.fit_prob_right, |q| f6(q.q10)),
        g.fit_prob_wrong.map_or(0, |q| q.n).to_string(),
        opt(g.fit_prob_wrong, |q| f6(q.median)),
        opt(g.fit_prob_wrong, |q| f6(q.q10)),
        g.mass_column.clone(),
        u8::from(g.measures_signal_mass).to_string(),
    ]
}

/// Writes the summary as CSV (header [`SUMMARY_COLUMNS`], one row per
/// group) to `out`.
///
/// ```
/// use quarry_eval::{evaluate, write_summary_csv, EvalRecord, SUMMARY_COLUMNS};
/// let records = vec![EvalRecord { sample: "ttbar".into(), hypothesis: "h".into(),
///     status: "ok".into(), ..EvalRecord::default() }];
/// let mut buf = Vec::new();
/// write_summary_csv(&evaluate(&records), &mut buf).unwrap();
/// let text = String::from_utf8(buf).unwrap();
/// assert!(text.starts_with(&SUMMARY_COLUMNS.join(",")));
/// assert!(text.lines().nth(1).unwrap().starts_with("ttbar,,h,1,1,ok=1,"));
/// ```
pub fn write_summary_csv(summary: &Summary, out: impl Write) -> Result<(), EvalError> {
    let err = |e: csv::Error| EvalError::Csv {
        source_name: "summary".into(),
        message: e.to_string(),
    };
    let mut w = csv::Writer::from_writer(out);
    w.write_record(SUMMARY_COLUMNS).map_err(err)?;
    for g in &summary.groups {
        w.write_record(summary_row(g)).map_err(err)?;
    }
    w.flush().map_err(|source| EvalError::Io {
        path: "summary".into(),
        source,
    })
}

/// A Markdown table of right-assignment fraction and mass resolution per
/// signal sample and hypothesis (the README's closure table), ordered by
/// generated mass, with the mass column of each row. Groups that do not
/// measure the signal's mass ([`GroupSummary::measures_signal_mass`]) are
/// left out and listed under the table.
///
/// ```
/// let s = quarry_eval::Summary::default();
/// assert!(quarry_eval::markdown_table(&s).starts_with("| hypothesis |"));
/// ```
pub fn markdown_table(summary: &Summary) -> String {
    let mut rows: Vec<&GroupSummary> = summary
        .groups
        .iter()
        .filter(|g| g.generated_mass.is_some() && g.measures_signal_mass)
        .collect();
    let left_out: Vec<String> = summary
        .groups
        .iter()
        .filter(|g| !g.measures_signal_mass)
        .map(|g| format!("{} on {}", g.hypothesis, g.sample))
        .collect();
    rows.sort_by(|a, b| {
        (a.hypothesis.as_str(), a.generated_mass.unwrap_or(0.0))
            .partial_cmp(&(b.hypothesis.as_str(), b.generated_mass.unwrap_or(0.0)))
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let mut s = String::from(
        "| hypothesis | generated mass [GeV] | events | reconstructed | right assignment | mass column | mass peak [GeV] | peak shift | core σ [GeV] | σ/m | half-width 68 % [GeV] | tail (>3σ) |\n\
         |---|---:|---:|---:|---:|---|---:|---:|---:|---:|---:|---:|\n",
    );
    for g in rows {
        let right = g.right.map_or("–".to_string(), |f| {
            format!("{:.3} ± {:.3}", f.value(), f.std_error())
        });
        let (peak, shift, sigma, rel, hw, tail) = match g.mass {
            Some(m) => (
                format!("{:.1} ± {:.1}", m.peak, m.peak_err),
                opt(m.peak_shift, |x| format!("{:+.2} %", 100.0 * x)),
                format!("{:.1}", m.core_sigma),
                format!("{:.1} %", 100.0 * m.relative_resolution),
                format!("{:.1}", m.half_width_68),
                format!("{:.1} %", 100.0 * m.tail_fraction),
            ),
            None => Default::default(),
        };
        s.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |\n",
            g.hypothesis,
            opt(g.generated_mass, |x| format!("{x}")),
            g.n_rows,
            g.n_ok,
            right,
            if g.mass_column.is_empty() {
                "–"
            } else {
                &g.mass_column
            },
            peak,
            shift,
            sigma,
            rel,
            hw,
            tail
        ));
    }
    if !left_out.is_empty() {
        s.push_str(&format!(
            "\nLeft out (the hypothesis reconstructs no free pair mass, so it says nothing about the signal's mass): {}.\n",
            left_out.join(", ")
        ));
    }
    s
}
