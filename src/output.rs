//! The flat output row: one per event per hypothesis, with a fixed set of
//! columns whatever the hypotheses are (see docs/cli.md for each column).
//!
//! Numbers are rounded before writing so that files stay compact: momenta
//! and masses to 0.1 MeV (4 decimals in GeV), χ² to 6 decimals. Empty
//! fields mean "does not apply" (e.g. no fit requested, no neutrino in the
//! hypothesis, event rejected by the reader).

use quarry_csv::RecordText;
use serde::Serialize;

use crate::{Reconstruction, Status};

/// Column names, in order, as written in the header.
///
/// ```
/// assert_eq!(quarry::output::COLUMNS[0], "ordinal");
/// assert_eq!(quarry::output::COLUMNS.len(), 36);
/// ```
pub const COLUMNS: [&str; 36] = [
    "ordinal",
    "event",
    "hypothesis",
    "status",
    "reason",
    "weight",
    "n_jets",
    "n_bjets",
    "n_leptons",
    "n_fatjets",
    "n_fatjets_w",
    "lead_jet_pt",
    "ht",
    "st",
    "st_unclaimed",
    "mll_z",
    "same_sign",
    "chi2",
    "assignment",
    "masses",
    "mass_a",
    "mass_b",
    "mass_avg",
    "nu_pz",
    "nu_solution",
    "nu_met_shift",
    "n_evaluated",
    "n_candidates",
    "fit_status",
    "fit_chi2",
    "fit_ndf",
    "fit_prob",
    "fit_mass",
    "fit_mass_err",
    "truth_match",
    "truth_composites",
];

/// One output row. Field order is column order ([`COLUMNS`]).
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct Row {
    /// 0-based position of the event in the input stream (all files, all
    /// events including rejected ones, before sharding).
    pub ordinal: u64,
    /// Event id from the input; empty if the reader could not parse it.
    pub event: Option<u64>,
    /// Hypothesis name.
    pub hypothesis: String,
    /// Status name (see [`Status::as_str`]).
    pub status: &'static str,
    /// Detail for a non-ok status (reader error with file:line: column, …).
    pub reason: String,
    /// Event weight.
    pub weight: Option<f64>,
    /// Selected jets.
    pub n_jets: Option<usize>,
    /// Selected b-tagged jets.
    pub n_bjets: Option<usize>,
    /// Selected leptons.
    pub n_leptons: Option<usize>,
    /// Selected large-radius jets.
    pub n_fatjets: Option<usize>,
    /// Large-radius jets in the W mass window.
    pub n_fatjets_w: Option<usize>,
    /// Leading jet pT \[GeV\].
    pub lead_jet_pt: Option<f64>,
    /// HT \[GeV\].
    pub ht: Option<f64>,
    /// ST \[GeV\].
    pub st: Option<f64>,
    /// ST not claimed by the best top-pair reconstruction \[GeV\].
    pub st_unclaimed: Option<f64>,
    /// m(ℓℓ) of the SFOS pair closest to the Z mass \[GeV\].
    pub mll_z: Option<f64>,
    /// 1 if two leptons share a known charge, else 0.
    pub same_sign: Option<u8>,
    /// χ² of the best assignment.
    pub chi2: Option<f64>,
    /// `role=object;...` of the best assignment
    /// (see [`Reconstruction::assignment_text`]).
    pub assignment: String,
    /// `composite=mass;...` of the best assignment \[GeV\].
    pub masses: String,
    /// Mass of the first composite of the pair \[GeV\]
    /// (see [`Reconstruction::pair`]).
    pub mass_a: Option<f64>,
    /// Mass of the second composite of the pair \[GeV\].
    pub mass_b: Option<f64>,
    /// Their average \[GeV\].
    pub mass_avg: Option<f64>,
    /// Neutrino pz of the best assignment \[GeV\].
    pub nu_pz: Option<f64>,
    /// Which neutrino solution was used
    /// (see [`Reconstruction::neutrino_solution`]).
    pub nu_solution: &'static str,
    /// How far the MET was moved to make the solution real \[GeV\].
    pub nu_met_shift: Option<f64>,
    /// Complete assignments whose χ² was evaluated.
    pub n_evaluated: Option<u64>,
    /// Ranked assignments the search returned (at most its k best).
    pub n_candidates: Option<usize>,
    /// Fit status (see [`quarry_fit::FitStatus::as_str`]), when the fit ran.
    pub fit_status: &'static str,
    /// Fit χ².
    pub fit_chi2: Option<f64>,
    /// Fit degrees of freedom.
    pub fit_ndf: Option<u32>,
    /// Fit χ² probability.
    pub fit_prob: Option<f64>,
    /// Fitted common mass of the first equal-mass constraint \[GeV\].
    pub fit_mass: Option<f64>,
    /// Its uncertainty \[GeV\].
    pub fit_mass_err: Option<f64>,
    /// 1 if the best assignment matches the truth labels, 0 if not; empty
    /// when the event has no truth labels or no assignment.
    pub truth_match: Option<u8>,
    /// Per-composite truth match of the best assignment,
    /// `W_had=1;t_had=0;...` in declaration order; empty like `truth_match`.
    pub truth_composites: String,
}

impl Row {
    /// The row of one reconstruction; `ordinal` is the event's position in
    /// the input stream.
    ///
    /// ```
    /// use quarry::{output::Row, Pipeline};
    /// let p = Pipeline::builder().preset("ttbar-ljets").build().unwrap();
    /// let r = &p.reconstruct(&quarry::event::Event::new(5))[0];
    /// let row = Row::from_reconstruction(0, r);
    /// assert_eq!((row.event, row.status, row.n_jets), (Some(5), "too_few_jets", Some(0)));
    /// ```
    pub fn from_reconstruction(ordinal: u64, r: &Reconstruction) -> Row {
        let best = r.best();
        let pair = r.pair_masses();
        let nu = best.and_then(|b| b.neutrino());
        let fit = r.fit.as_ref();
        let fitted = fit.and_then(|f| f.as_ref().ok());
        let common = fitted.and_then(|f| f.common_masses().first().copied());
        let v = r.vars.as_ref();
        Row {
            ordinal,
            event: Some(r.event_id),
            hypothesis: r.hypothesis.name().to_string(),
            status: r.status.as_str(),
            reason: r.reason.clone(),
            weight: Some(r.weight).filter(|w| w.is_finite()),
            n_jets: v.map(|v| v.n_jets),
            n_bjets: v.map(|v| v.n_bjets),
            n_leptons: v.map(|v| v.n_leptons),
            n_fatjets: v.map(|v| v.n_fat_jets),
            n_fatjets_w: v.map(|v| v.n_fat_w),
            lead_jet_pt: v.and_then(|v| v.leading_jet_pt).and_then(gev),
            ht: v.and_then(|v| gev(v.ht)),
            st: v.and_then(|v| gev(v.st)),
            st_unclaimed: r.st_unclaimed.and_then(gev),
            mll_z: v.and_then(|v| v.m_ll_z).and_then(gev),
            same_sign: v.map(|v| u8::from(v.same_sign)),
            chi2: best.and_then(|b| chi2(b.chi2())),
            assignment: r.assignment_text(),
            masses: r.masses_text(),
            mass_a: pair.and_then(|p| gev(p[0])),
            mass_b: pair.and_then(|p| gev(p[1])),
            mass_avg: pair.and_then(|p| gev(0.5 * (p[0] + p[1]))),
            nu_pz: nu.and_then(|n| gev(n.p4.pz())),
            nu_solution: r.neutrino_solution().unwrap_or(""),
            nu_met_shift: nu.and_then(|n| gev(n.met_shift)),
            n_evaluated: (r.status != Status::BadInput).then_some(r.search.evaluated.complete),
            n_candidates: (r.status != Status::BadInput).then_some(r.search.ranked.len()),
            fit_status: match fit {
                None => "",
                Some(Ok(f)) => f.status.as_str(),
                Some(Err(_)) => "invalid_input",
            },
            fit_chi2: fitted.and_then(|f| chi2(f.chi2)),
            fit_ndf: fitted.map(|f| f.ndf),
            fit_prob: fitted.and_then(|f| significant(f.probability)),
            fit_mass: common.and_then(|c| gev(c.value)),
            fit_mass_err: common.and_then(|c| gev(c.sigma)),
            truth_match: r.truth.map(|t| u8::from(t.all())),
            truth_composites: r.truth.map_or_else(String::new, |t| {
                let names = r.hypothesis.composites().iter().map(|c| &c.name);
                let flags = names
                    .zip(t.composites())
                    .map(|(n, &ok)| format!("{n}={}", u8::from(ok)));
                flags.collect::<Vec<_>>().join(";")
            }),
        }
    }

    /// The row of an event the reader rejected: status `bad_input`, the
    /// reader's message as the reason, every other field empty.
    ///
    /// ```
    /// let row = quarry::output::Row::bad_input(3, None, "ttbar-ljets", "a.csv:7: column 'pt': 'x' is not a number");
    /// assert_eq!((row.status, row.event), ("bad_input", None));
    /// ```
    pub fn bad_input(ordinal: u64, event: Option<u64>, hypothesis: &str, reason: &str) -> Row {
        Row {
            ordinal,
            event,
            hypothesis: hypothesis.to_string(),
            status: Status::BadInput.as_str(),
            reason: reason.to_string(),
            ..Row::default()
        }
    }
}

impl Row {
    /// Appends this row as one CSV record to `out`, byte for byte what the
    /// serde path (`RowWriter::write`, `quarry::csv::encode_rows`) writes,
    /// without serde's per-field dispatch: `quarry reco` formats rows with
    /// it on the worker threads.
    ///
    /// ```
    /// let row = quarry::output::Row::bad_input(3, None, "ttbar-ljets", "a.csv:7: 'x, y'");
    /// let mut out = Vec::new();
    /// row.write_csv(&mut out);
    /// assert_eq!(out, quarry::csv::encode_rows(&[row]).unwrap());
    /// ```
    pub fn write_csv(&self, out: &mut Vec<u8>) {
        // Destructured in full so that a new field cannot be forgotten;
        // the order is the column order.
        let Row {
            ordinal,
            event,
            hypothesis,
            status,
            reason,
            weight,
            n_jets,
            n_bjets,
            n_leptons,
            n_fatjets,
            n_fatjets_w,
            lead_jet_pt,
            ht,
            st,
            st_unclaimed,
            mll_z,
            same_sign,
            chi2,
            assignment,
            masses,
            mass_a,
            mass_b,
            mass_avg,
            nu_pz,
            nu_solution,
            nu_met_shift,
            n_evaluated,
            n_candidates,
            fit_status,
            fit_chi2,
            fit_ndf,
            fit_prob,
            fit_mass,
            fit_mass_err,
            truth_match,
            truth_composites,
        } = self;
        let count = |n: &Option<usize>| n.map(|n| n as u64);
        let mut r = RecordText::new(out);
        r.uint(Some(*ordinal));
        r.uint(*event);
        r.text(hypothesis);
        r.text(status);
        r.text(reason);
        r.float(*weight);
        r.uint(count(n_jets));
        r.uint(count(n_bjets));
        r.uint(count(n_leptons));
        r.uint(count(n_fatjets));
        r.uint(count(n_fatjets_w));
        r.float(*lead_jet_pt);
        r.float(*ht);
        r.float(*st);
        r.float(*st_unclaimed);
        r.float(*mll_z);
        r.uint(same_sign.map(u64::from));
        r.float(*chi2);
        r.text(assignment);
        r.text(masses);
        r.float(*mass_a);
        r.float(*mass_b);
        r.float(*mass_avg);
        r.float(*nu_pz);
        r.text(nu_solution);
        r.float(*nu_met_shift);
        r.uint(*n_evaluated);
        r.uint(count(n_candidates));
        r.text(fit_status);
        r.float(*fit_chi2);
        r.uint(fit_ndf.map(u64::from));
        r.float(*fit_prob);
        r.float(*fit_mass);
        r.float(*fit_mass_err);
        r.uint(truth_match.map(u64::from));
        r.text(truth_composites);
        r.end();
    }
}

/// Where output rows go: one implementation per output format, so that a
/// new format plugs in without touching the pipeline or the streaming code.
///
/// A sink works in two steps because `quarry reco` formats rows on the
/// worker threads and writes them on one thread in input order:
/// [`prepare`](Self::prepare) turns one event's rows into whatever the
/// format wants to carry across (CSV text, or the rows themselves for a
/// columnar format that batches them), and [`write`](Self::write) takes
/// those in input order. [`finish`](Self::finish) commits the output; a
/// sink dropped without it must leave no partial file under the output's
/// name.
///
/// ```
/// use quarry::output::{Row, RowSink};
///
/// /// Counts rows by status, writing nothing.
/// #[derive(Default)]
/// struct Count(std::collections::BTreeMap<&'static str, usize>);
///
/// impl RowSink for Count {
///     type Prepared = Vec<&'static str>;
///     type Error = std::convert::Infallible;
///     fn prepare(rows: &[Row]) -> Self::Prepared {
///         rows.iter().map(|r| r.status).collect()
///     }
///     fn write(&mut self, prepared: Self::Prepared) -> Result<(), Self::Error> {
///         for s in prepared {
///             *self.0.entry(s).or_default() += 1;
///         }
///         Ok(())
///     }
///     fn finish(self) -> Result<(), Self::Error> {
///         Ok(())
///     }
/// }
///
/// let mut count = Count::default();
/// count.write(Count::prepare(&[Row::bad_input(0, None, "ttbar-ljets", "x")])).unwrap();
/// assert_eq!(count.0["bad_input"], 1);
/// ```
pub trait RowSink {
    /// One event's rows as prepared on a worker thread.
    type Prepared: Send;
    /// A write error.
    type Error;

    /// Prepares one event's rows (called on the worker threads).
    fn prepare(rows: &[Row]) -> Self::Prepared;

    /// Writes one event's prepared rows (called in input order).
    fn write(&mut self, prepared: Self::Prepared) -> Result<(), Self::Error>;

    /// Commits the output.
    fn finish(self) -> Result<(), Self::Error>;
}

/// The CSV output of `quarry reco`: the header ([`COLUMNS`]) and one record
/// per row, formatted on the workers by [`Row::write_csv`]. Written to a
/// temporary file renamed over the target by [`finish`](RowSink::finish)
/// (`-` is standard output, `.gz` gzips); see [`quarry_csv::RowWriter`].
///
/// ```
/// use quarry::output::{CsvSink, Row, RowSink};
/// let dir = tempfile::tempdir().unwrap();
/// let path = dir.path().join("rows.csv");
/// let mut sink = CsvSink::create(&path).unwrap();
/// sink.write(CsvSink::prepare(&[Row::bad_input(0, Some(4), "ttbar-ljets", "x")])).unwrap();
/// sink.finish().unwrap();
/// let text = std::fs::read_to_string(&path).unwrap();
/// assert!(text.starts_with("ordinal,event,hypothesis,status,"));
/// assert!(text.lines().nth(1).unwrap().starts_with("0,4,ttbar-ljets,bad_input,x,"));
/// ```
pub struct CsvSink {
    writer: quarry_csv::RowWriter<Row>,
}

impl CsvSink {
    /// Creates the output (nothing is visible under its name before
    /// [`finish`](RowSink::finish)).
    pub fn create(path: &std::path::Path) -> Result<CsvSink, quarry_csv::CsvError> {
        Ok(CsvSink {
            writer: quarry_csv::RowWriter::create(path)?,
        })
    }

    /// The hidden temporary file the rows go to until the output is
    /// committed; `None` for standard output
    /// ([`quarry_csv::RowWriter::temp_path`]).
    pub fn temp_path(&self) -> Option<&std::path::Path> {
        self.writer.temp_path()
    }
}

impl RowSink for CsvSink {
    type Prepared = Vec<u8>;
    type Error = quarry_csv::CsvError;

    fn prepare(rows: &[Row]) -> Vec<u8> {
        let mut bytes = Vec::with_capacity(256 * rows.len());
        for row in rows {
            row.write_csv(&mut bytes);
        }
        bytes
    }

    fn write(&mut self, prepared: Vec<u8>) -> Result<(), Self::Error> {
        self.writer.write_encoded(&prepared)
    }

    fn finish(self) -> Result<(), Self::Error> {
        self.writer.finish()
    }
}

/// Rounds a momentum or mass to 0.1 MeV (4 decimals in GeV); `None` for
/// non-finite values so that NaN never reaches a file.
pub fn gev(x: f64) -> Option<f64> {
    round_to(x, 1e4)
}

/// Rounds a χ² or probability to 6 decimals; `None` if not finite.
pub fn chi2(x: f64) -> Option<f64> {
    round_to(x, 1e6)
}

/// Rounds to 6 significant digits (for probabilities, which may be tiny);
/// `None` if not finite.
pub fn significant(x: f64) -> Option<f64> {
    if !x.is_finite() {
        return None;
    }
    format!("{x:.5e}").parse().ok()
}

fn round_to(x: f64, scale: f64) -> Option<f64> {
    if !x.is_finite() {
        return None;
    }
    let r = (x * scale).round() / scale;
    // Large values would lose digits through the scaling: keep them as is.
    Some(if r.is_finite() && (x.abs() < 1e12) {
        r + 0.0
    } else {
        x
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The hand-written record must match the csv crate's serde output
    /// (the reference) on real reconstructions and on awkward text.
    #[test]
    fn write_csv_matches_the_serde_path() {
        let p = crate::Pipeline::builder()
            .preset("ttbar-ljets")
            .preset("tz-3l")
            .fit(true)
            .build()
            .unwrap();
        let mut rows: Vec<Row> = crate::toy::Generator::new(crate::toy::ToyConfig::top_pair(), 5)
            .unwrap()
            .take(200)
            .enumerate()
            .flat_map(|(i, e)| {
                p.reconstruct(&e)
                    .iter()
                    .map(|r| Row::from_reconstruction(i as u64, r))
                    .collect::<Vec<_>>()
            })
            .collect();
        assert!(rows.iter().any(|r| r.status == "ok" && r.fit_ndf.is_some()));
        rows.push(Row::bad_input(u64::MAX, Some(0), "h", "say \"x, y\"\r\n"));
        rows.push(Row {
            weight: Some(1e300),
            ht: Some(-0.0),
            chi2: Some(1e-12),
            n_jets: Some(usize::MAX),
            ..Row::default()
        });
        let mut ours = Vec::new();
        for row in &rows {
            row.write_csv(&mut ours);
        }
        let reference = crate::csv::encode_rows(&rows).unwrap();
        assert_eq!(
            String::from_utf8(ours).unwrap(),
            String::from_utf8(reference).unwrap()
        );
    }

    #[test]
    fn rounding_keeps_nan_out() {
        assert_eq!(gev(80.123456), Some(80.1235));
        assert_eq!(gev(-0.00001), Some(0.0));
        assert_eq!(gev(f64::NAN), None);
        assert_eq!(chi2(f64::INFINITY), None);
        assert_eq!(chi2(1.23456789), Some(1.234568));
        assert_eq!(significant(1.234567e-9), Some(1.23457e-9));
        assert_eq!(significant(f64::NAN), None);
    }
}
