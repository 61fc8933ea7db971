//! [`Row`]: the output row, its fields checked against the one column
//! schema ([`quarry_csv::columns::RECO_COLUMNS`]), its values taken from a
//! [`Reconstruction`], and its CSV record.

use quarry_csv::columns::{ColumnKind, RECO_COLUMNS};
use quarry_csv::RecordText;
use quarry_parquet::Cell as TypedCell;
use serde::Serialize;

use super::{chi2, gev, significant};
use crate::{Reconstruction, Status};

/// A field type of [`Row`]: its column kind, its CSV cell and its Parquet
/// cell (of the type [`super::parquet_type`] gives its kind; an empty text
/// is null there, as "does not apply" is an empty CSV field).
trait Cell {
    const KIND: ColumnKind;
    fn write(&self, r: &mut RecordText<'_>);
    fn typed(&self) -> TypedCell<'_>;
}

impl Cell for u64 {
    const KIND: ColumnKind = ColumnKind::UInt;
    fn write(&self, r: &mut RecordText<'_>) {
        r.uint(Some(*self));
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::U64(Some(*self))
    }
}

impl Cell for Option<u64> {
    const KIND: ColumnKind = ColumnKind::UInt;
    fn write(&self, r: &mut RecordText<'_>) {
        r.uint(*self);
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::U64(*self)
    }
}

impl Cell for Option<usize> {
    const KIND: ColumnKind = ColumnKind::UInt;
    fn write(&self, r: &mut RecordText<'_>) {
        r.uint(self.map(|n| n as u64));
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::U64(self.map(|n| n as u64))
    }
}

impl Cell for Option<u32> {
    const KIND: ColumnKind = ColumnKind::UInt;
    fn write(&self, r: &mut RecordText<'_>) {
        r.uint(self.map(u64::from));
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::U64(self.map(u64::from))
    }
}

/// 0/1 flags.
impl Cell for Option<u8> {
    const KIND: ColumnKind = ColumnKind::Flag;
    fn write(&self, r: &mut RecordText<'_>) {
        r.uint(self.map(u64::from));
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::Bool(self.map(|v| v != 0))
    }
}

impl Cell for Option<f64> {
    const KIND: ColumnKind = ColumnKind::Float;
    fn write(&self, r: &mut RecordText<'_>) {
        r.float(*self);
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::F64(*self)
    }
}

impl Cell for String {
    const KIND: ColumnKind = ColumnKind::Text;
    fn write(&self, r: &mut RecordText<'_>) {
        r.text(self);
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::Text(Some(self.as_str()).filter(|s| !s.is_empty()))
    }
}

impl Cell for &'static str {
    const KIND: ColumnKind = ColumnKind::Text;
    fn write(&self, r: &mut RecordText<'_>) {
        r.text(self);
    }
    fn typed(&self) -> TypedCell<'_> {
        TypedCell::Text(Some(*self).filter(|s| !s.is_empty()))
    }
}

const fn same_text(a: &str, b: &str) -> bool {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    if a.len() != b.len() {
        return false;
    }
    let mut i = 0;
    while i < a.len() {
        if a[i] != b[i] {
            return false;
        }
        i += 1;
    }
    true
}

/// Whether the fields (name, kind) are the schema's columns, in order.
const fn fields_are_the_schema(fields: &[(&str, ColumnKind)]) -> bool {
    if fields.len() != RECO_COLUMNS.len() {
        return false;
    }
    let mut i = 0;
    while i < fields.len() {
        let c = RECO_COLUMNS[i];
        if !same_text(fields[i].0, c.name) || fields[i].1 as u8 != c.kind as u8 {
            return false;
        }
        i += 1;
    }
    true
}

/// Declares [`Row`] from one list of fields and derives from the same list
/// its CSV record ([`Row::write_csv`]); a compile-time check holds the list
/// to the schema (names, kinds and order of
/// [`RECO_COLUMNS`](quarry_csv::columns::RECO_COLUMNS)), so the serialized
/// header is the schema's.
macro_rules! schema_row {
    ($($(#[$doc:meta])* $field:ident: $ty:ty,)*) => {
        /// One output row: one field per column of
        /// [`RECO_COLUMNS`](quarry_csv::columns::RECO_COLUMNS), same names,
        /// same order.
        #[derive(Clone, Debug, Default, PartialEq, Serialize)]
        pub struct Row {
            $($(#[$doc])* pub $field: $ty,)*
        }

        const _: () = assert!(
            fields_are_the_schema(&[$((stringify!($field), <$ty as Cell>::KIND)),*]),
            "Row's fields must be RECO_COLUMNS, in order"
        );

        impl Row {
            /// Appends this row as one CSV record to `out`, one cell per
            /// column in schema order: byte for byte what the serde path
            /// (`RowWriter::write`, `quarry::csv::encode_rows`) writes,
            /// without serde's per-field dispatch (`quarry reco` formats
            /// rows with it on the worker threads).
            ///
            /// ```
            /// let row = quarry::output::Row::bad_input(3, None, "ttbar-ljets", "a.csv:7: 'x, y'");
            /// let mut out = Vec::new();
            /// row.write_csv(&mut out);
            /// assert_eq!(out, quarry::csv::encode_rows(&[row]).unwrap());
            /// ```
            pub fn write_csv(&self, out: &mut Vec<u8>) {
                let mut r = RecordText::new(out);
                $(Cell::write(&self.$field, &mut r);)*
                r.end();
            }

            /// This row's typed cells, one per column in schema order, of
            /// the Parquet types [`super::parquet_columns`] declares (null
            /// where the CSV cell is empty).
            ///
            /// ```
            /// use quarry::parquet::Cell;
            /// let row = quarry::output::Row::bad_input(3, None, "ttbar-ljets", "x");
            /// let cells = row.typed_cells();
            /// assert_eq!(cells.len(), quarry::output::COLUMNS.len());
            /// assert_eq!(cells[0], Cell::U64(Some(3)));
            /// assert_eq!(cells[1], Cell::U64(None));
            /// ```
            pub fn typed_cells(&self) -> [TypedCell<'_>; RECO_COLUMNS.len()] {
                [$(Cell::typed(&self.$field)),*]
            }
        }
    };
}

schema_row! {
    /// 0-based position of the event in the input stream (all files, all
    /// events including rejected ones, before sharding).
    ordinal: u64,
    /// Event id from the input; empty if the reader could not parse it.
    event: Option<u64>,
    /// Hypothesis name.
    hypothesis: String,
    /// Status name (see [`Status::as_str`]).
    status: &'static str,
    /// Detail for a non-ok status (reader error with file:line: column, …).
    reason: String,
    /// Event weight.
    weight: Option<f64>,
    /// Selected jets.
    n_jets: Option<usize>,
    /// Selected b-tagged jets.
    n_bjets: Option<usize>,
    /// Selected leptons.
    n_leptons: Option<usize>,
    /// Selected large-radius jets.
    n_fatjets: Option<usize>,
    /// Large-radius jets in the W mass window.
    n_fatjets_w: Option<usize>,
    /// Leading jet pT \[GeV\].
    lead_jet_pt: Option<f64>,
    /// HT \[GeV\].
    ht: Option<f64>,
    /// ST \[GeV\].
    st: Option<f64>,
    /// ST not claimed by the best top-pair reconstruction \[GeV\].
    st_unclaimed: Option<f64>,
    /// m(ℓℓ) of the SFOS pair closest to the Z mass \[GeV\].
    mll_z: Option<f64>,
    /// 1 if two leptons share a known charge, else 0.
    same_sign: Option<u8>,
    /// χ² of the best assignment.
    chi2: Option<f64>,
    /// `role=object;...` of the best assignment
    /// (see [`Reconstruction::assignment_text`]).
    assignment: String,
    /// `composite=mass;...` of the best assignment \[GeV\].
    masses: String,
    /// Mass of the first composite of the pair \[GeV\]
    /// (see [`Reconstruction::pair`]).
    mass_a: Option<f64>,
    /// Mass of the second composite of the pair \[GeV\].
    mass_b: Option<f64>,
    /// Their average \[GeV\].
    mass_avg: Option<f64>,
    /// Neutrino pz of the best assignment \[GeV\].
    nu_pz: Option<f64>,
    /// Which neutrino solution was used
    /// (see [`Reconstruction::neutrino_solution`]).
    nu_solution: &'static str,
    /// How far the MET was moved to make the solution real \[GeV\].
    nu_met_shift: Option<f64>,
    /// Complete assignments whose χ² was evaluated.
    n_evaluated: Option<u64>,
    /// Ranked assignments the search returned (at most its k best).
    n_candidates: Option<usize>,
    /// Fit status (see [`quarry_fit::FitStatus::as_str`]), when the fit ran.
    fit_status: &'static str,
    /// Fit χ².
    fit_chi2: Option<f64>,
    /// Fit degrees of freedom.
    fit_ndf: Option<u32>,
    /// Fit χ² probability.
    fit_prob: Option<f64>,
    /// Fitted common mass of the first equal-mass constraint \[GeV\].
    fit_mass: Option<f64>,
    /// Its uncertainty \[GeV\].
    fit_mass_err: Option<f64>,
    /// 1 if the best assignment matches the truth labels, 0 if not; empty
    /// when the event has no truth labels or no assignment.
    truth_match: Option<u8>,
    /// Per-composite truth match of the best assignment,
    /// `W_had=1;t_had=0;...` in declaration order; empty like `truth_match`.
    truth_composites: String,
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
            n_fatjets: v.map(|v| v.n_fatjets),
            n_fatjets_w: v.map(|v| v.n_fatjets_w),
            lead_jet_pt: v.and_then(|v| v.lead_jet_pt).and_then(gev),
            ht: v.and_then(|v| gev(v.ht)),
            st: v.and_then(|v| gev(v.st)),
            st_unclaimed: r.st_unclaimed.and_then(gev),
            mll_z: v.and_then(|v| v.mll_z).and_then(gev),
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
