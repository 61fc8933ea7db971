//! The long form stored as Parquet: quarry's CSV schema (`event`, `kind`,
//! `pt`, `eta`, `phi`, `mass` or `energy`, optional `btag`, `charge`,
//! `truth`, `weight`, `met_cov_xx/xy/yy`), one row per object, the rows of
//! an event contiguous.
//!
//! Row groups are decoded (decompressed, typed) in parallel into
//! [`LongRow`]s; grouping rows into events and checking them happens in
//! input order on the consuming thread, because an event may straddle a
//! batch or row-group boundary.

use std::sync::Arc;

use arrow_array::cast::AsArray;
use arrow_array::{Array, ArrayRef, RecordBatch};
use arrow_schema::{DataType, Schema};
use quarry_csv::{BadReason, SeenIds};
use quarry_event::{Event, FatJet, Flavour, Jet, Lepton, Met};

use crate::columns::{is_number, type_name, NumberColumn};
use crate::map::NegativePolicy;
use crate::validate::{self, Fault, Field, Kinematics};
use crate::{BadRow, Location, ParquetError, Record};

/// Number columns of the long form, in [`LongRow::values`] order.
const NUMBER_COLUMNS: [&str; 10] = [
    "pt",
    "eta",
    "phi",
    "mass",
    "energy",
    "btag",
    "charge",
    "weight",
    "met_cov_xx",
    "met_cov_xy",
];
const COV_YY: &str = "met_cov_yy";

/// Whether a schema is the long form: it has `event` and `kind` columns.
pub(crate) fn is_long_form(schema: &Schema) -> bool {
    schema.field_with_name("event").is_ok() && schema.field_with_name("kind").is_ok()
}

fn is_text(t: &DataType) -> bool {
    match t {
        DataType::Utf8 | DataType::LargeUtf8 => true,
        DataType::Dictionary(k, v) => k.is_integer() && is_text(v),
        _ => false,
    }
}

/// Checks the long form's columns; returns the names to read.
pub(crate) fn check_schema(schema: &Schema, file: &str) -> Result<Vec<String>, ParquetError> {
    let err = |message: String| ParquetError::Schema {
        file: file.to_string(),
        message,
    };
    let mut names = vec!["event".to_string(), "kind".to_string()];
    let event = schema
        .field_with_name("event")
        .map_err(|_| err("missing column 'event'".into()))?;
    if !event.data_type().is_integer() {
        return Err(err(format!(
            "column 'event' is {}, expected an integer column",
            type_name(event.data_type())
        )));
    }
    let kind = schema
        .field_with_name("kind")
        .map_err(|_| err("missing column 'kind'".into()))?;
    if !is_text(kind.data_type()) {
        return Err(err(format!(
            "column 'kind' is {}, expected a string column (jet, fatjet, electron, muon, met)",
            type_name(kind.data_type())
        )));
    }
    for required in ["pt", "eta", "phi"] {
        if schema.field_with_name(required).is_err() {
            return Err(err(format!(
                "missing column '{required}' (the long form needs event, kind, pt, eta, phi, and mass or energy)"
            )));
        }
    }
    if schema.field_with_name("mass").is_err() && schema.field_with_name("energy").is_err() {
        return Err(err(
            "missing column 'mass' or 'energy' (at least one is required)".into(),
        ));
    }
    let cov: Vec<bool> = ["met_cov_xx", "met_cov_xy", COV_YY]
        .iter()
        .map(|c| schema.field_with_name(c).is_ok())
        .collect();
    if cov.iter().any(|&c| c) && !cov.iter().all(|&c| c) {
        return Err(err(
            "MET covariance needs all three columns met_cov_xx, met_cov_xy, met_cov_yy".into(),
        ));
    }
    for name in NUMBER_COLUMNS.iter().chain([&COV_YY]) {
        if let Ok(f) = schema.field_with_name(name) {
            if !is_number(f.data_type()) {
                return Err(err(format!(
                    "column '{name}' is {}, expected a number column (float32, float64 or integer)",
                    type_name(f.data_type())
                )));
            }
            names.push(name.to_string());
        }
    }
    if let Ok(f) = schema.field_with_name("truth") {
        if !is_text(f.data_type()) {
            return Err(err(format!(
                "column 'truth' is {}, expected a string column",
                type_name(f.data_type())
            )));
        }
        names.push("truth".into());
    }
    Ok(names)
}

/// The object kinds of the long form.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Kind {
    Jet,
    FatJet,
    Electron,
    Muon,
    Met,
}

/// One object row, typed but not yet checked.
#[derive(Clone, Debug)]
pub(crate) struct LongRow {
    /// The event id, or the value as text when it is not one.
    id: Result<u64, String>,
    /// The kind, or the text when it is not a known kind.
    kind: Result<Kind, String>,
    /// [`NUMBER_COLUMNS`] then `met_cov_yy`; `None` when null or absent.
    values: [Option<f64>; 11],
    truth: Option<String>,
    row_group: usize,
    row: u64,
}

fn text_column(array: &ArrayRef) -> Vec<Option<String>> {
    let one = |a: &dyn Array, i: usize| -> Option<String> {
        if a.is_null(i) {
            return None;
        }
        Some(match a.data_type() {
            DataType::Utf8 => a.as_string::<i32>().value(i).to_string(),
            _ => a.as_string::<i64>().value(i).to_string(),
        })
    };
    match array.data_type() {
        DataType::Dictionary(_, _) => {
            let d = array.as_any_dictionary();
            let keys = d.normalized_keys();
            let values = d.values();
            (0..array.len())
                .map(|i| {
                    if array.is_null(i) {
                        None
                    } else {
                        one(values.as_ref(), keys[i])
                    }
                })
                .collect()
        }
        _ => (0..array.len()).map(|i| one(array.as_ref(), i)).collect(),
    }
}

/// Types one batch's rows.
pub(crate) fn decode_batch(batch: &RecordBatch, row_group: usize, first_row: u64) -> Vec<LongRow> {
    let number = |name: &str| {
        batch
            .column_by_name(name)
            .and_then(|a| NumberColumn::new(a.as_ref()))
    };
    let event = number("event").expect("schema checked");
    let kinds = text_column(batch.column_by_name("kind").expect("schema checked"));
    let truths = batch.column_by_name("truth").map(text_column);
    let cols: Vec<Option<NumberColumn>> = NUMBER_COLUMNS
        .iter()
        .chain([&COV_YY])
        .map(|n| number(n))
        .collect();
    (0..batch.num_rows())
        .map(|i| {
            let mut values = [None; 11];
            for (v, c) in values.iter_mut().zip(&cols) {
                *v = c.as_ref().and_then(|c| c.get(i));
            }
            LongRow {
                id: match event.get_u64(i) {
                    Ok(Some(id)) => Ok(id),
                    Ok(None) => Err(String::new()),
                    Err(text) => Err(text),
                },
                kind: match kinds[i].as_deref() {
                    Some("jet") => Ok(Kind::Jet),
                    Some("fatjet") => Ok(Kind::FatJet),
                    Some("electron") => Ok(Kind::Electron),
                    Some("muon") => Ok(Kind::Muon),
                    Some("met") => Ok(Kind::Met),
                    other => Err(other.unwrap_or("").to_string()),
                },
                values,
                truth: truths.as_ref().and_then(|t| t[i].clone()),
                row_group,
                row: first_row + i as u64,
            }
        })
        .collect()
}

/// Groups long-form rows into events, in order: rows with the same id in
/// a row are one event; an id seen before, after other events, is a
/// `split-event` bad event (never a silent merge), as in the CSV reader.
pub(crate) struct Grouper {
    file: Arc<str>,
    has_mass: bool,
    max_objects: usize,
    seen: SeenIds,
    current: Option<Block>,
}

struct Block {
    key: Result<u64, String>,
    event: Event,
    weight: Option<(f64, u64)>,
    met_row: Option<u64>,
    objects: usize,
    error: Option<BadRow>,
}

impl Grouper {
    pub(crate) fn new(file: Arc<str>, schema: &Schema, max_objects: usize) -> Grouper {
        Grouper {
            file,
            has_mass: schema.field_with_name("mass").is_ok(),
            max_objects,
            seen: SeenIds::default(),
            current: None,
        }
    }

    /// Adds one row; returns the event it completes, if any.
    pub(crate) fn push(&mut self, row: LongRow) -> Option<Record> {
        let same = self.current.as_ref().is_some_and(|b| b.key == row.id);
        let done = if same {
            None
        } else {
            self.current.take().map(finish)
        };
        if self.current.is_none() {
            let mut block = Block {
                key: row.id.clone(),
                event: Event::new(*row.id.as_ref().unwrap_or(&0)),
                weight: None,
                met_row: None,
                objects: 0,
                error: None,
            };
            match &row.id {
                Ok(id) if !self.seen.insert(*id) => {
                    block.error = Some(self.bad(&row, Some(*id), "event", None, Fault {
                        field: Field::Whole,
                        value: None,
                        reason: BadReason::SplitEvent,
                        message: format!("rows of event {id} appeared earlier, not contiguously (an event's rows must be contiguous)"),
                    }));
                }
                Ok(_) => {}
                Err(text) => {
                    block.error = Some(self.bad(
                        &row,
                        None,
                        "event",
                        None,
                        Fault {
                            field: Field::Whole,
                            value: (!text.is_empty()).then(|| text.clone()),
                            reason: BadReason::BadEventId,
                            message: if text.is_empty() {
                                "is null (expected an event id)".into()
                            } else {
                                "is not an unsigned integer event id".into()
                            },
                        },
                    ));
                }
            }
            self.current = Some(block);
        }
        let mut block = self.current.take().expect("set above");
        if block.error.is_none() {
            if let Err(bad) = self.add(&mut block, &row) {
                block.error = Some(*bad);
            }
        }
        self.current = Some(block);
        done
    }

    /// The last event, at the end of the input.
    pub(crate) fn finish(&mut self) -> Option<Record> {
        self.current.take().map(finish)
    }

    fn bad(
        &self,
        row: &LongRow,
        id: Option<u64>,
        column: &str,
        _e: Option<usize>,
        f: Fault,
    ) -> BadRow {
        BadRow {
            id,
            location: Location {
                file: Arc::clone(&self.file),
                row_group: row.row_group,
                row: row.row,
            },
            column: (!column.is_empty()).then(|| column.to_string()),
            element: None,
            value: f.value,
            reason: f.reason,
            message: f.message,
        }
    }

    fn add(&self, block: &mut Block, row: &LongRow) -> Result<(), Box<BadRow>> {
        let id = block.key.as_ref().ok().copied();
        let v = &row.values;
        let fail = |column: &str, f: Fault| Box::new(self.bad(row, id, column, None, f));
        block.objects += 1;
        if block.objects > self.max_objects {
            return Err(fail(
                "",
                Fault {
                    field: Field::Whole,
                    value: None,
                    reason: BadReason::TooManyObjects,
                    message: format!(
                        "event has more than {} rows (the max_objects_per_event limit)",
                        self.max_objects
                    ),
                },
            ));
        }
        let kind = match &row.kind {
            Ok(k) => *k,
            Err(text) => {
                return Err(fail(
                    "kind",
                    Fault {
                        field: Field::Whole,
                        value: (!text.is_empty()).then(|| text.clone()),
                        reason: if text.is_empty() {
                            BadReason::MissingValue
                        } else {
                            BadReason::UnknownKind
                        },
                        message:
                            "is not a known kind (expected jet, fatjet, electron, muon or met)"
                                .into(),
                    },
                ))
            }
        };
        if let Some(w) = v[7] {
            let w = validate::finite(Field::Weight, Some(w), "an event weight")
                .map_err(|f| fail("weight", f))?;
            match block.weight {
                None => block.weight = Some((w, row.row)),
                Some((first, first_row)) if first != w => {
                    return Err(fail("weight", Fault {
                        field: Field::Weight,
                        value: Some(quarry_csv::format_f64(w)),
                        reason: BadReason::InconsistentWeight,
                        message: format!("differs from this event's weight {} on row {first_row} (weight must be equal on all rows that give it)", quarry_csv::format_f64(first)),
                    }))
                }
                Some(_) => {}
            }
            block.event.weight = w;
        }
        let name = |f: Field| match f {
            Field::Pt | Field::Whole => "pt",
            Field::Eta => "eta",
            Field::Phi => "phi",
            Field::Mass => "mass",
            Field::Energy => "energy",
            Field::Btag => "btag",
            Field::Charge => "charge",
            Field::Truth => "truth",
            Field::Weight => "weight",
            Field::CovXx => "met_cov_xx",
        };
        if kind == Kind::Met {
            if let Some(first) = block.met_row {
                return Err(fail(
                    "",
                    Fault {
                        field: Field::Whole,
                        value: None,
                        reason: BadReason::DuplicateMet,
                        message: format!("second met row in this event (the first is row {first})"),
                    },
                ));
            }
            block.met_row = Some(row.row);
            let pt = validate::finite(Field::Pt, v[0], "pt in GeV").map_err(|f| fail("pt", f))?;
            if pt < 0.0 {
                return Err(fail(
                    "pt",
                    Fault {
                        field: Field::Pt,
                        value: Some(quarry_csv::format_f64(pt)),
                        reason: BadReason::OutOfRange,
                        message: "is negative (expected pt ≥ 0)".into(),
                    },
                ));
            }
            let phi = validate::phi_value(v[2]).map_err(|f| fail("phi", f))?;
            let cov = match (v[8], v[9], v[10]) {
                (None, None, None) => None,
                (Some(xx), Some(xy), Some(yy)) => Some(validate::covariance(xx, xy, yy).map_err(|f| fail("", f))?),
                _ => return Err(fail("", Fault {
                    field: Field::CovXx,
                    value: None,
                    reason: BadReason::BadCovariance,
                    message: "MET covariance needs all of met_cov_xx, met_cov_xy, met_cov_yy, or none".into(),
                })),
            };
            let (s, c) = phi.sin_cos();
            block.event.met = Met {
                px: pt * c,
                py: pt * s,
                cov,
            };
            return Ok(());
        }
        // As in the CSV reader: mass wins when both are given.
        let mass_or_energy = if self.has_mass && v[3].is_some() {
            Ok(v[3])
        } else {
            Err(v[4])
        };
        let p4 = validate::four_momentum(Kinematics {
            pt: v[0],
            eta: v[1],
            phi: v[2],
            mass_or_energy,
            negative_mass: NegativePolicy::Reject,
        })
        .map_err(|f| fail(name(f.field), f))?;
        let truth = match &row.truth {
            None => None,
            Some(t) => Some(validate::truth(Some(t)).map_err(|f| fail("truth", f))?),
        };
        let event = &mut block.event;
        match kind {
            Kind::Jet => {
                let btag = match v[5] {
                    None => 0.0,
                    b => validate::btag(b, NegativePolicy::Reject).map_err(|f| fail("btag", f))?,
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
                let charge = match v[6] {
                    None => 0,
                    q => validate::charge(q).map_err(|f| fail("charge", f))?,
                };
                let (list, flavour) = if kind == Kind::Electron {
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
            Kind::Met => unreachable!("handled above"),
        }
        Ok(())
    }
}

fn finish(block: Block) -> Record {
    match block.error {
        Some(bad) => Record::Bad(bad),
        None => Record::Good(block.event),
    }
}
