//! Typed views of Arrow columns: numbers of any width as `f64`, list
//! columns with 32- or 64-bit offsets, and the schema checks that name a
//! column and what was expected of it.

use arrow_array::cast::AsArray;
use arrow_array::types::*;
use arrow_array::{Array, ArrayRef, BooleanArray, GenericListArray, OffsetSizeTrait};
use arrow_buffer::NullBuffer;
use arrow_schema::DataType;

/// A number column's values, any integer or float width.
#[derive(Clone, Copy)]
pub(crate) enum Numbers<'a> {
    F32(&'a [f32]),
    F64(&'a [f64]),
    I8(&'a [i8]),
    I16(&'a [i16]),
    I32(&'a [i32]),
    I64(&'a [i64]),
    U8(&'a [u8]),
    U16(&'a [u16]),
    U32(&'a [u32]),
    U64(&'a [u64]),
    Bool(&'a BooleanArray),
}

/// Whether a type is one [`NumberColumn`] reads.
pub(crate) fn is_number(t: &DataType) -> bool {
    t.is_integer() || matches!(t, DataType::Float32 | DataType::Float64 | DataType::Boolean)
}

/// The element type of a list type, if it is one.
pub(crate) fn list_element(t: &DataType) -> Option<&DataType> {
    match t {
        DataType::List(f) | DataType::LargeList(f) => Some(f.data_type()),
        _ => None,
    }
}

/// A column of numbers with its nulls.
#[derive(Clone, Copy)]
pub(crate) struct NumberColumn<'a> {
    values: Numbers<'a>,
    nulls: Option<&'a NullBuffer>,
}

impl<'a> NumberColumn<'a> {
    /// A view of `array`; `None` if it is not a number type.
    pub(crate) fn new(array: &'a dyn Array) -> Option<NumberColumn<'a>> {
        let values = match array.data_type() {
            DataType::Float32 => Numbers::F32(array.as_primitive::<Float32Type>().values()),
            DataType::Float64 => Numbers::F64(array.as_primitive::<Float64Type>().values()),
            DataType::Int8 => Numbers::I8(array.as_primitive::<Int8Type>().values()),
            DataType::Int16 => Numbers::I16(array.as_primitive::<Int16Type>().values()),
            DataType::Int32 => Numbers::I32(array.as_primitive::<Int32Type>().values()),
            DataType::Int64 => Numbers::I64(array.as_primitive::<Int64Type>().values()),
            DataType::UInt8 => Numbers::U8(array.as_primitive::<UInt8Type>().values()),
            DataType::UInt16 => Numbers::U16(array.as_primitive::<UInt16Type>().values()),
            DataType::UInt32 => Numbers::U32(array.as_primitive::<UInt32Type>().values()),
            DataType::UInt64 => Numbers::U64(array.as_primitive::<UInt64Type>().values()),
            DataType::Boolean => Numbers::Bool(array.as_boolean()),
            _ => return None,
        };
        Some(NumberColumn {
            values,
            nulls: array.nulls(),
        })
    }

    /// Value `i` as `f64` (exact for floats, 32-bit integers and smaller),
    /// `None` if null.
    #[inline]
    pub(crate) fn get(&self, i: usize) -> Option<f64> {
        if self.nulls.is_some_and(|n| n.is_null(i)) {
            return None;
        }
        Some(match self.values {
            Numbers::F32(v) => f64::from(v[i]),
            Numbers::F64(v) => v[i],
            Numbers::I8(v) => f64::from(v[i]),
            Numbers::I16(v) => f64::from(v[i]),
            Numbers::I32(v) => f64::from(v[i]),
            Numbers::I64(v) => v[i] as f64,
            Numbers::U8(v) => f64::from(v[i]),
            Numbers::U16(v) => f64::from(v[i]),
            Numbers::U32(v) => f64::from(v[i]),
            Numbers::U64(v) => v[i] as f64,
            Numbers::Bool(b) => f64::from(u8::from(b.value(i))),
        })
    }

    /// Value `i` as an unsigned integer: `Ok(None)` if null, `Err(text)`
    /// with the value as text if it is negative or not an integer.
    pub(crate) fn get_u64(&self, i: usize) -> Result<Option<u64>, String> {
        if self.nulls.is_some_and(|n| n.is_null(i)) {
            return Ok(None);
        }
        let signed = |x: i64| u64::try_from(x).map(Some).map_err(|_| x.to_string());
        match self.values {
            Numbers::I8(v) => signed(i64::from(v[i])),
            Numbers::I16(v) => signed(i64::from(v[i])),
            Numbers::I32(v) => signed(i64::from(v[i])),
            Numbers::I64(v) => signed(v[i]),
            Numbers::U8(v) => Ok(Some(u64::from(v[i]))),
            Numbers::U16(v) => Ok(Some(u64::from(v[i]))),
            Numbers::U32(v) => Ok(Some(u64::from(v[i]))),
            Numbers::U64(v) => Ok(Some(v[i])),
            _ => Err(self.get(i).map_or(String::new(), |x| x.to_string())),
        }
    }
}

/// A list column: per row, a range into a number column.
pub(crate) struct ListColumn<'a> {
    offsets: Offsets<'a>,
    nulls: Option<&'a NullBuffer>,
    /// The values of every row, indexed by the offsets.
    pub(crate) values: NumberColumn<'a>,
}

enum Offsets<'a> {
    Small(&'a [i32]),
    Large(&'a [i64]),
}

fn offsets_of<O: OffsetSizeTrait>(list: &GenericListArray<O>) -> &[O] {
    list.value_offsets()
}

impl<'a> ListColumn<'a> {
    /// A view of `array`; `None` unless it is a list of numbers.
    pub(crate) fn new(array: &'a ArrayRef) -> Option<ListColumn<'a>> {
        let (offsets, values) = match array.data_type() {
            DataType::List(_) => {
                let l = array.as_list::<i32>();
                (Offsets::Small(offsets_of(l)), l.values())
            }
            DataType::LargeList(_) => {
                let l = array.as_list::<i64>();
                (Offsets::Large(offsets_of(l)), l.values())
            }
            _ => return None,
        };
        Some(ListColumn {
            offsets,
            nulls: array.nulls(),
            values: NumberColumn::new(values.as_ref())?,
        })
    }

    /// The value range of row `i`, `None` if the row's list is null.
    #[inline]
    pub(crate) fn range(&self, i: usize) -> Option<(usize, usize)> {
        if self.nulls.is_some_and(|n| n.is_null(i)) {
            return None;
        }
        Some(match self.offsets {
            Offsets::Small(o) => (o[i] as usize, o[i + 1] as usize),
            Offsets::Large(o) => (o[i] as usize, o[i + 1] as usize),
        })
    }
}

/// A list-of-strings column (truth labels).
pub(crate) struct StringListColumn<'a> {
    list: &'a ArrayRef,
}

impl<'a> StringListColumn<'a> {
    /// A view of `array`; `None` unless it is a list of strings.
    pub(crate) fn new(array: &'a ArrayRef) -> Option<StringListColumn<'a>> {
        let element = list_element(array.data_type())?;
        matches!(element, DataType::Utf8 | DataType::LargeUtf8)
            .then_some(StringListColumn { list: array })
    }

    /// Row `i`'s strings (`None` for a null list; a null string is `None`).
    pub(crate) fn row(&self, i: usize) -> Option<Vec<Option<String>>> {
        if self.list.is_null(i) {
            return None;
        }
        let values = match self.list.data_type() {
            DataType::List(_) => self.list.as_list::<i32>().value(i),
            _ => self.list.as_list::<i64>().value(i),
        };
        let strings = |k: usize| -> Option<String> {
            if values.is_null(k) {
                return None;
            }
            Some(match values.data_type() {
                DataType::Utf8 => values.as_string::<i32>().value(k).to_string(),
                _ => values.as_string::<i64>().value(k).to_string(),
            })
        };
        Some((0..values.len()).map(strings).collect())
    }
}

/// A short name of an Arrow type for error messages.
pub(crate) fn type_name(t: &DataType) -> String {
    match list_element(t) {
        Some(e) => format!("list<{}>", type_name(e)),
        None => match t {
            DataType::Float32 => "float32".into(),
            DataType::Float64 => "float64".into(),
            DataType::Utf8 | DataType::LargeUtf8 => "string".into(),
            other => other.to_string().to_lowercase(),
        },
    }
}
