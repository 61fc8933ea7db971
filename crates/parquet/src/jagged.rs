//! The per-event layout: one row per event, one list column per object
//! value (`Jet_pt`, `Jet_eta`, … of length `nJet`), read through a
//! [`ColumnMap`].

use std::sync::Arc;

use arrow_array::{ArrayRef, RecordBatch};
use arrow_schema::{DataType, Schema};
use quarry_csv::BadReason;
use quarry_event::{Event, FatJet, Flavour, Jet, Lepton, Met};

use crate::columns::{
    is_number, list_element, type_name, ListColumn, NumberColumn, StringListColumn,
};
use crate::map::{CollectionColumns, ColumnMap, MetColumns};
use crate::validate::{self, Fault, Field, Kinematics};
use crate::{BadRow, Location, ParquetError, Record};

/// What a mapped column must be.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Expect {
    Integer,
    Number,
    NumberList,
    StringList,
}

impl Expect {
    fn fits(self, t: &DataType) -> bool {
        match self {
            Expect::Integer => t.is_integer(),
            Expect::Number => is_number(t),
            Expect::NumberList => list_element(t).is_some_and(is_number),
            Expect::StringList => {
                list_element(t).is_some_and(|e| matches!(e, DataType::Utf8 | DataType::LargeUtf8))
            }
        }
    }

    fn describe(self) -> &'static str {
        match self {
            Expect::Integer => "an integer column",
            Expect::Number => "a number column (float32, float64 or integer)",
            Expect::NumberList => {
                "a list column of numbers (list<float32>, list<float64> or list of integers), one entry per object"
            }
            Expect::StringList => "a list column of strings",
        }
    }
}

/// The mapped columns with what each must be and the map key that names it
/// (for error messages), e.g. `("Jet_pt", NumberList, "jets.pt")`.
fn expectations(map: &ColumnMap) -> Vec<(&str, Expect, String)> {
    let mut out = Vec::new();
    if let Some(e) = &map.event {
        out.push((e.as_str(), Expect::Integer, "event".to_string()));
    }
    if let Some(w) = &map.weight {
        out.push((w.as_str(), Expect::Number, "weight".to_string()));
    }
    for (section, c) in map.collections() {
        for (name, expect, key) in [
            (&c.count, Expect::Integer, "count"),
            (&c.mass, Expect::NumberList, "mass"),
            (&c.energy, Expect::NumberList, "energy"),
            (&c.btag, Expect::NumberList, "btag"),
            (&c.charge, Expect::NumberList, "charge"),
            (&c.truth, Expect::StringList, "truth"),
        ] {
            if let Some(n) = name {
                out.push((n.as_str(), expect, format!("{section}.{key}")));
            }
        }
        for (n, key) in [(&c.pt, "pt"), (&c.eta, "eta"), (&c.phi, "phi")] {
            out.push((n.as_str(), Expect::NumberList, format!("{section}.{key}")));
        }
    }
    if let Some(m) = &map.met {
        for (n, key) in [
            (&m.pt, "pt"),
            (&m.phi, "phi"),
            (&m.px, "px"),
            (&m.py, "py"),
            (&m.cov_xx, "cov_xx"),
            (&m.cov_xy, "cov_xy"),
            (&m.cov_yy, "cov_yy"),
        ] {
            if let Some(n) = n {
                out.push((n.as_str(), Expect::Number, format!("met.{key}")));
            }
        }
    }
    out
}

/// Checks that every mapped column exists with a usable type; returns the
/// mapped column names (for the projection).
pub(crate) fn check_schema(
    map: &ColumnMap,
    schema: &Schema,
    file: &str,
) -> Result<Vec<String>, ParquetError> {
    let mut names = Vec::new();
    for (name, expect, key) in expectations(map) {
        let field = schema.field_with_name(name).map_err(|_| ParquetError::Schema {
            file: file.to_string(),
            message: format!(
                "missing column '{name}' (the column map's {key}); `quarry columns template {file}` prints a map from this file's columns"
            ),
        })?;
        if !expect.fits(field.data_type()) {
            return Err(ParquetError::Schema {
                file: file.to_string(),
                message: format!(
                    "column '{name}' (the column map's {key}) is {}, expected {}",
                    type_name(field.data_type()),
                    expect.describe()
                ),
            });
        }
        if !names.iter().any(|n| n == name) {
            names.push(name.to_string());
        }
    }
    if names.is_empty() {
        return Err(ParquetError::Schema {
            file: file.to_string(),
            message: "the column map names no column".into(),
        });
    }
    Ok(names)
}

/// One collection's columns in a batch.
struct Collection<'a> {
    kind: Kind,
    cols: &'a CollectionColumns,
    count: Option<NumberColumn<'a>>,
    pt: ListColumn<'a>,
    eta: ListColumn<'a>,
    phi: ListColumn<'a>,
    mass_or_energy: ListColumn<'a>,
    btag: Option<ListColumn<'a>>,
    charge: Option<ListColumn<'a>>,
    truth: Option<StringListColumn<'a>>,
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum Kind {
    Jet,
    FatJet,
    Electron,
    Muon,
}

impl<'a> Collection<'a> {
    fn column_of(&self, field: Field) -> &'a str {
        let c = self.cols;
        match field {
            Field::Pt | Field::Whole => &c.pt,
            Field::Eta => &c.eta,
            Field::Phi => &c.phi,
            Field::Mass | Field::Energy => c.mass.as_deref().or(c.energy.as_deref()).unwrap_or(""),
            Field::Btag => c.btag.as_deref().unwrap_or(""),
            Field::Charge => c.charge.as_deref().unwrap_or(""),
            Field::Truth => c.truth.as_deref().unwrap_or(""),
            Field::Weight | Field::CovXx => "",
        }
    }
}

/// Decodes one batch of rows into records, one per row, in order.
///
/// `first_row` is the batch's first row in the file. A list whose length
/// disagrees with its count column, or with the collection's `pt` list, is
/// a structural error of the file (`Err`).
pub(crate) fn decode_batch(
    map: &ColumnMap,
    batch: &RecordBatch,
    file: &Arc<str>,
    row_group: usize,
    first_row: u64,
    max_objects: usize,
) -> Result<Vec<Record>, ParquetError> {
    let column = |name: &str| -> &ArrayRef {
        batch
            .column_by_name(name)
            .expect("the projection holds every mapped column")
    };
    let number = |name: &str| NumberColumn::new(column(name).as_ref()).expect("schema checked");
    let list = |name: &str| ListColumn::new(column(name)).expect("schema checked");
    let collections: Vec<Collection> = [
        (Kind::Jet, &map.jets),
        (Kind::FatJet, &map.fatjets),
        (Kind::Electron, &map.electrons),
        (Kind::Muon, &map.muons),
    ]
    .into_iter()
    .filter_map(|(kind, c)| c.as_ref().map(|c| (kind, c)))
    .map(|(kind, c)| Collection {
        kind,
        cols: c,
        count: c.count.as_deref().map(number),
        pt: list(&c.pt),
        eta: list(&c.eta),
        phi: list(&c.phi),
        mass_or_energy: list(
            c.mass
                .as_deref()
                .or(c.energy.as_deref())
                .expect("map checked"),
        ),
        btag: c.btag.as_deref().map(list),
        charge: c.charge.as_deref().map(list),
        truth: c
            .truth
            .as_deref()
            .map(|n| StringListColumn::new(column(n)).expect("schema checked")),
    })
    .collect();
    let event_col = map.event.as_deref().map(number);
    let weight_col = map.weight.as_deref().map(number);
    let met = map.met.as_ref().map(|m| MetView::new(m, &number));

    let mut out = Vec::with_capacity(batch.num_rows());
    for i in 0..batch.num_rows() {
        let location = Location {
            file: Arc::clone(file),
            row_group,
            row: first_row + i as u64,
        };
        check_lengths(&collections, i, &location)?;
        let bad = |id, column: &str, element, fault: Fault| {
            Record::Bad(BadRow {
                id,
                location: location.clone(),
                column: (!column.is_empty()).then(|| column.to_string()),
                element,
                value: fault.value,
                reason: fault.reason,
                message: fault.message,
            })
        };
        let id = match (&event_col, map.event.as_deref()) {
            (Some(c), Some(name)) => match c.get_u64(i) {
                Ok(Some(id)) => id,
                Ok(None) => {
                    out.push(bad(None, name, None, missing("an event id")));
                    continue;
                }
                Err(text) => {
                    out.push(bad(
                        None,
                        name,
                        None,
                        Fault {
                            field: Field::Whole,
                            value: Some(text),
                            reason: BadReason::BadEventId,
                            message: "is not an unsigned integer event id".into(),
                        },
                    ));
                    continue;
                }
            },
            _ => location.row,
        };
        let mut event = Event::new(id);
        if let (Some(c), Some(name)) = (&weight_col, map.weight.as_deref()) {
            match validate::finite(Field::Weight, c.get(i), "an event weight") {
                Ok(w) => event.weight = w,
                Err(f) => {
                    out.push(bad(Some(id), name, None, f));
                    continue;
                }
            }
        }
        let total: usize = collections
            .iter()
            .map(|c| c.pt.range(i).map_or(0, |(a, b)| b - a))
            .sum();
        if total > max_objects {
            out.push(bad(
                Some(id),
                "",
                None,
                Fault {
                    field: Field::Whole,
                    value: None,
                    reason: BadReason::TooManyObjects,
                    message: format!(
                        "event has {total} objects, more than the limit of {max_objects}"
                    ),
                },
            ));
            continue;
        }
        let mut failed = None;
        for c in &collections {
            if let Err((element, fault)) = add_objects(c, i, &mut event) {
                failed = Some(bad(Some(id), c.column_of(fault.field), element, fault));
                break;
            }
        }
        if failed.is_none() {
            if let (Some(view), Some(cols)) = (&met, &map.met) {
                match view.read(i) {
                    Ok(m) => event.met = m,
                    Err(fault) => {
                        let name = met_column(cols, fault.field);
                        failed = Some(bad(Some(id), name, None, fault));
                    }
                }
            }
        }
        out.push(failed.unwrap_or(Record::Good(event)));
    }
    Ok(out)
}

fn missing(what: &str) -> Fault {
    Fault {
        field: Field::Whole,
        value: None,
        reason: BadReason::MissingValue,
        message: format!("is null (expected {what})"),
    }
}

/// Every list of a collection must have the `pt` list's length, and that
/// must equal the count column when there is one.
fn check_lengths(
    collections: &[Collection<'_>],
    i: usize,
    location: &Location,
) -> Result<(), ParquetError> {
    let structure = |message: String| ParquetError::Structure {
        file: location.file.to_string(),
        row_group: location.row_group,
        row: location.row,
        message,
    };
    for c in collections {
        let len = |l: &ListColumn<'_>| l.range(i).map(|(a, b)| b - a);
        let n = len(&c.pt);
        if let (Some(count), Some(name)) = (&c.count, c.cols.count.as_deref()) {
            let expected = count.get_u64(i).map_err(|v| {
                structure(format!(
                    "count column '{name}' holds '{v}', expected a count ≥ 0"
                ))
            })?;
            if expected != n.map(|n| n as u64) && !(expected == Some(0) && n.is_none()) {
                return Err(structure(format!(
                    "column '{}' has {} values, but the count column '{name}' says {}",
                    c.cols.pt,
                    n.map_or("a null list, no".to_string(), |n| n.to_string()),
                    expected.map_or("null".to_string(), |e| e.to_string())
                )));
            }
        }
        let others = [
            (Some(&c.eta), c.cols.eta.as_str()),
            (Some(&c.phi), c.cols.phi.as_str()),
            (Some(&c.mass_or_energy), c.column_of(Field::Mass)),
            (c.btag.as_ref(), c.column_of(Field::Btag)),
            (c.charge.as_ref(), c.column_of(Field::Charge)),
        ];
        for (l, name) in others {
            if let Some(l) = l {
                let m = len(l);
                if m != n && !(m.unwrap_or(0) == 0 && n.unwrap_or(0) == 0) {
                    return Err(structure(format!(
                        "column '{name}' has {} values, column '{}' has {} (lists of one collection must have equal lengths)",
                        m.map_or("null".into(), |m| m.to_string()),
                        c.cols.pt,
                        n.map_or("null".into(), |n| n.to_string()),
                    )));
                }
            }
        }
        if let Some(t) = &c.truth {
            let m = t.row(i).map(|v| v.len());
            if m.unwrap_or(0) != n.unwrap_or(0) {
                return Err(structure(format!(
                    "column '{}' has {} labels, column '{}' has {} values",
                    c.column_of(Field::Truth),
                    m.unwrap_or(0),
                    c.cols.pt,
                    n.unwrap_or(0)
                )));
            }
        }
    }
    Ok(())
}

/// Adds row `i`'s objects of one collection to the event; on a bad value,
/// the object's position in the list and what is wrong.
fn add_objects(
    c: &Collection<'_>,
    i: usize,
    event: &mut Event,
) -> Result<(), (Option<usize>, Fault)> {
    // A null list with no count column saying otherwise is an empty one
    // only if lengths were checked equal; here lengths agree, so a null
    // pt list means "no objects".
    let Some((start, end)) = c.pt.range(i) else {
        return Ok(());
    };
    let offset = |l: &ListColumn<'_>| l.range(i).map_or(0, |(a, _)| a);
    let (o_eta, o_phi, o_m) = (offset(&c.eta), offset(&c.phi), offset(&c.mass_or_energy));
    let o_btag = c.btag.as_ref().map(offset);
    let o_charge = c.charge.as_ref().map(offset);
    let truths = c.truth.as_ref().and_then(|t| t.row(i));
    let mass_given = c.cols.mass.is_some();
    for k in 0..end - start {
        let at = |f: Fault| (Some(k), f);
        let m = c.mass_or_energy.values.get(o_m + k);
        let p4 = validate::four_momentum(Kinematics {
            pt: c.pt.values.get(start + k),
            eta: c.eta.values.get(o_eta + k),
            phi: c.phi.values.get(o_phi + k),
            mass_or_energy: if mass_given { Ok(m) } else { Err(m) },
            negative_mass: c.cols.negative_mass,
        })
        .map_err(at)?;
        let truth = match &truths {
            None => None,
            Some(t) => Some(validate::truth(t.get(k).and_then(|s| s.as_deref())).map_err(at)?),
        };
        match c.kind {
            Kind::Jet => {
                let btag = match (&c.btag, o_btag) {
                    (Some(b), Some(o)) => {
                        validate::btag(b.values.get(o + k), c.cols.negative_btag).map_err(at)?
                    }
                    _ => 0.0,
                };
                let index = event.jets.len() as u32;
                event.jets.push(Jet {
                    p4,
                    btag,
                    truth,
                    index,
                });
            }
            Kind::FatJet => {
                let index = event.fat_jets.len() as u32;
                event.fat_jets.push(FatJet { p4, truth, index });
            }
            Kind::Electron | Kind::Muon => {
                let charge = match (&c.charge, o_charge) {
                    (Some(q), Some(o)) => validate::charge(q.values.get(o + k)).map_err(at)?,
                    _ => 0,
                };
                let (list, flavour) = if c.kind == Kind::Electron {
                    (&mut event.electrons, Flavour::Electron)
                } else {
                    (&mut event.muons, Flavour::Muon)
                };
                let index = list.len() as u32;
                list.push(Lepton {
                    p4,
                    flavour,
                    charge,
                    truth,
                    index,
                });
            }
        }
    }
    Ok(())
}

/// The MET columns of a batch.
struct MetView<'a> {
    polar: bool,
    a: NumberColumn<'a>,
    b: NumberColumn<'a>,
    cov: Option<[NumberColumn<'a>; 3]>,
}

impl<'a> MetView<'a> {
    fn new(m: &MetColumns, number: &dyn Fn(&str) -> NumberColumn<'a>) -> MetView<'a> {
        let polar = m.pt.is_some();
        let (a, b) = if polar {
            (m.pt.as_deref(), m.phi.as_deref())
        } else {
            (m.px.as_deref(), m.py.as_deref())
        };
        MetView {
            polar,
            a: number(a.expect("map checked")),
            b: number(b.expect("map checked")),
            cov: match (&m.cov_xx, &m.cov_xy, &m.cov_yy) {
                (Some(x), Some(y), Some(z)) => Some([number(x), number(y), number(z)]),
                _ => None,
            },
        }
    }

    fn read(&self, i: usize) -> Result<Met, Fault> {
        let (px, py) = if self.polar {
            let pt = validate::finite(Field::Pt, self.a.get(i), "MET pt in GeV")?;
            if pt < 0.0 {
                return Err(Fault {
                    field: Field::Pt,
                    value: Some(quarry_csv::format_f64(pt)),
                    reason: BadReason::OutOfRange,
                    message: "is negative (expected pt ≥ 0)".into(),
                });
            }
            let phi = validate::phi_value(self.b.get(i))?;
            let (s, c) = phi.sin_cos();
            (pt * c, pt * s)
        } else {
            (
                validate::finite(Field::Pt, self.a.get(i), "MET px in GeV")?,
                validate::finite(Field::Phi, self.b.get(i), "MET py in GeV")?,
            )
        };
        let cov = match &self.cov {
            None => None,
            Some([xx, xy, yy]) => {
                let xx = validate::finite(Field::CovXx, xx.get(i), "a covariance")?;
                let xy = validate::finite(Field::Mass, xy.get(i), "a covariance")?;
                let yy = validate::finite(Field::Energy, yy.get(i), "a covariance")?;
                Some(validate::covariance(xx, xy, yy)?)
            }
        };
        Ok(Met { px, py, cov })
    }
}

/// The MET column a fault names. The MET reader reuses the object fields
/// as slots: Pt = pt or px, Phi = phi or py, CovXx/Mass/Energy = the
/// covariance's xx/xy/yy.
fn met_column(m: &MetColumns, field: Field) -> &str {
    fn pick<'m>(a: &'m Option<String>, b: &'m Option<String>) -> &'m str {
        a.as_deref().or(b.as_deref()).unwrap_or("")
    }
    match field {
        Field::Pt => pick(&m.pt, &m.px),
        Field::Phi => pick(&m.phi, &m.py),
        Field::CovXx => m.cov_xx.as_deref().unwrap_or(""),
        Field::Mass => m.cov_xy.as_deref().unwrap_or(""),
        Field::Energy => m.cov_yy.as_deref().unwrap_or(""),
        _ => "",
    }
}
