//! Reading [`EvalRecord`]s from the reconstruction's output CSV.
//!
//! Columns are found by header name, in any order; columns the evaluation
//! does not use are ignored. Only `hypothesis` and `status` are required;
//! every other column may be absent (its field is then `None`) and empty
//! fields mean "does not apply".

use quarry_csv::columns::{
    CHI2, FIT_MASS, FIT_PROB, HYPOTHESIS, MASS_A, MASS_AVG, MASS_B, STATUS, TRUTH_COMPOSITES,
    TRUTH_MATCH,
};
use std::io::Read;

use crate::record::{EvalError, EvalRecord, SampleSpec};

/// The columns of the reconstruction output that can serve as the
/// reconstructed heavy-quark mass: the fitted common mass of the
/// equal-mass pair, the mean of the pair's two masses, and each of the two.
pub const MASS_CANDIDATES: [&str; 4] = [FIT_MASS.name, MASS_AVG.name, MASS_A.name, MASS_B.name];

/// Which column holds the reconstructed mass.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub enum MassColumn {
    /// Chosen per hypothesis from measured closure on the signal samples
    /// ([`crate::choose_mass_columns`]). As read, before that choice, a
    /// record's mass is `fit_mass` where the fit gave one, else `mass_avg`.
    #[default]
    Auto,
    /// This column (e.g. `mass_a`); rows where it is empty have no mass.
    Named(String),
}

impl std::str::FromStr for MassColumn {
    type Err = std::convert::Infallible;

    /// `auto` or a column name.
    ///
    /// ```
    /// use quarry_eval::MassColumn;
    /// assert_eq!("auto".parse::<MassColumn>().unwrap(), MassColumn::Auto);
    /// assert_eq!("mass_a".parse::<MassColumn>().unwrap(), MassColumn::Named("mass_a".into()));
    /// ```
    fn from_str(s: &str) -> Result<MassColumn, Self::Err> {
        Ok(if s == "auto" {
            MassColumn::Auto
        } else {
            MassColumn::Named(s.to_string())
        })
    }
}

/// Reads the reconstruction output of one sample from `path`.
///
/// ```no_run
/// use quarry_eval::{read_sample, MassColumn};
/// let spec = "T1000@1000=t1000.csv".parse().unwrap();
/// let records = read_sample(&spec, &MassColumn::Auto).unwrap();
/// println!("{} rows", records.len());
/// ```
pub fn read_sample(spec: &SampleSpec, mass: &MassColumn) -> Result<Vec<EvalRecord>, EvalError> {
    let io_error = |source| EvalError::Io {
        path: spec.path.clone(),
        source,
    };
    let mut input = std::io::BufReader::new(std::fs::File::open(&spec.path).map_err(io_error)?);
    // `quarry reco -o x.csv.gz` writes gzip: recognised by its magic bytes,
    // whatever the file is called.
    let gzip = std::io::BufRead::fill_buf(&mut input)
        .map_err(io_error)?
        .starts_with(&[0x1f, 0x8b]);
    let input: Box<dyn std::io::Read> = if gzip {
        Box::new(flate2::read::MultiGzDecoder::new(input))
    } else {
        Box::new(input)
    };
    read_records(
        input,
        &spec.path.display().to_string(),
        &spec.name,
        spec.generated_mass,
        mass,
    )
}

/// Reads records from CSV text with a header line.
///
/// `source_name` names the input in errors; `sample` and `generated_mass`
/// are stamped on every record (the rows do not carry them).
///
/// Recognised columns (their names from [`quarry_csv::columns`], the one
/// definition of the output's columns): `hypothesis`, `status` (required); `fit_mass`,
/// `mass_avg` or the [`MassColumn`] chosen; `chi2`; `fit_prob`;
/// `truth_match` (`1`/`0`, or `true`/`false`); `truth_composites`
/// (`name=1;name=0`, per-composite truth match). Numbers must be finite:
/// `NaN` or `inf` is a [`EvalError::BadValue`], never passed on.
///
/// ```
/// use quarry_eval::{read_records, MassColumn};
/// let csv = "ordinal,hypothesis,status,extra,mass_avg,chi2,truth_match\n\
///            0,bwbw-ljets,ok,x,1012.5,1.25,1\n\
///            1,bwbw-ljets,no_valid_assignment,y,,,\n";
/// let r = read_records(csv.as_bytes(), "demo", "T1000", Some(1000.0), &MassColumn::Auto).unwrap();
/// assert_eq!(r.len(), 2);
/// assert_eq!(r[0].mass, Some(1012.5));
/// assert_eq!(r[0].truth_match, Some(true));
/// assert_eq!(r[1].mass, None);
/// ```
pub fn read_records(
    input: impl Read,
    source_name: &str,
    sample: &str,
    generated_mass: Option<f64>,
    mass: &MassColumn,
) -> Result<Vec<EvalRecord>, EvalError> {
    let csv_error = |e: csv::Error| EvalError::Csv {
        source_name: source_name.to_string(),
        message: e.to_string(),
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(false)
        .from_reader(input);
    let header = reader.headers().map_err(csv_error)?.clone();
    let find = |name: &str| header.iter().position(|h| h.trim() == name);
    let required = |name: &str| {
        find(name).ok_or_else(|| EvalError::MissingColumn {
            source_name: source_name.to_string(),
            column: name.to_string(),
        })
    };
    let hyp_col = required(HYPOTHESIS.name)?;
    let status_col = required(STATUS.name)?;
    let (mass_cols, mass_names): (Vec<usize>, Vec<&str>) = match mass {
        MassColumn::Auto => [FIT_MASS.name, MASS_AVG.name]
            .into_iter()
            .filter_map(|n| find(n).map(|c| (c, n)))
            .unzip(),
        MassColumn::Named(n) => (vec![required(n)?], vec![n.as_str()]),
    };
    let mut candidate_cols: Vec<(usize, &str)> = MASS_CANDIDATES
        .into_iter()
        .filter_map(|n| find(n).map(|c| (c, n)))
        .collect();
    if let MassColumn::Named(n) = mass {
        if !MASS_CANDIDATES.contains(&n.as_str()) {
            candidate_cols.push((required(n)?, n.as_str()));
        }
    }
    let chi2_col = find(CHI2.name);
    let prob_col = find(FIT_PROB.name);
    let truth_col = find(TRUTH_MATCH.name);
    let comp_col = find(TRUTH_COMPOSITES.name);

    let mut out = Vec::new();
    let mut row = csv::StringRecord::new();
    while reader.read_record(&mut row).map_err(csv_error)? {
        let line = row.position().map_or(0, |p| p.line());
        let bad = |column: &str, value: &str, why: &str| EvalError::BadValue {
            source_name: source_name.to_string(),
            line,
            column: column.to_string(),
            value: value.to_string(),
            why: why.to_string(),
        };
        let field = |c: usize| row.get(c).unwrap_or("").trim();
        let number = |c: Option<usize>, name: &str| -> Result<Option<f64>, EvalError> {
            let Some(c) = c else { return Ok(None) };
            let text = field(c);
            if text.is_empty() {
                return Ok(None);
            }
            match text.parse::<f64>() {
                Ok(x) if x.is_finite() => Ok(Some(x)),
                Ok(_) => Err(bad(name, text, "not a finite number")),
                Err(_) => Err(bad(name, text, "not a number")),
            }
        };
        let mut mass_value = None;
        let mut mass_column = String::new();
        for (&c, &name) in mass_cols.iter().zip(&mass_names) {
            if let Some(m) = number(Some(c), name)? {
                mass_value = Some(m);
                mass_column = name.to_string();
                break;
            }
        }
        let mut mass_candidates = Vec::new();
        for &(c, name) in &candidate_cols {
            if let Some(m) = number(Some(c), name)? {
                mass_candidates.push((name.to_string(), m));
            }
        }
        let truth_match = match truth_col.map(field) {
            None | Some("") => None,
            Some(t) => {
                Some(parse_flag(t).ok_or_else(|| bad(TRUTH_MATCH.name, t, "expected 1 or 0"))?)
            }
        };
        let composite_matches = match comp_col.map(field) {
            None | Some("") => Vec::new(),
            Some(t) => parse_composites(t)
                .ok_or_else(|| bad(TRUTH_COMPOSITES.name, t, "expected name=1;name=0"))?,
        };
        let hypothesis = field(hyp_col);
        if hypothesis.is_empty() {
            return Err(bad(HYPOTHESIS.name, hypothesis, "empty"));
        }
        let status = field(status_col);
        if status.is_empty() {
            return Err(bad(STATUS.name, status, "empty"));
        }
        out.push(EvalRecord {
            sample: sample.to_string(),
            generated_mass,
            hypothesis: hypothesis.to_string(),
            status: status.to_string(),
            mass: mass_value,
            chi2: number(chi2_col, CHI2.name)?,
            fit_prob: number(prob_col, FIT_PROB.name)?,
            truth_match,
            composite_matches,
            mass_column,
            mass_candidates,
        });
    }
    Ok(out)
}

fn parse_flag(text: &str) -> Option<bool> {
    match text {
        "1" | "true" => Some(true),
        "0" | "false" => Some(false),
        _ => None,
    }
}

/// `name=1;name=0` → pairs; `None` if any item is malformed.
fn parse_composites(text: &str) -> Option<Vec<(String, bool)>> {
    text.split(';')
        .filter(|item| !item.trim().is_empty())
        .map(|item| {
            let (name, flag) = item.split_once('=')?;
            let name = name.trim();
            (!name.is_empty()).then_some(())?;
            Some((name.to_string(), parse_flag(flag.trim())?))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Vec<EvalRecord>, EvalError> {
        read_records(text.as_bytes(), "t.csv", "S", None, &MassColumn::Auto)
    }

    #[test]
    fn columns_in_any_order_and_fit_mass_preferred() {
        let r = read(
            "status,fit_mass,unknown,hypothesis,mass_avg,fit_prob\n\
             ok,990.5,zz,h1,1001,0.4\n\
             ok,,zz,h1,1001,\n",
        )
        .unwrap();
        assert_eq!(r[0].mass, Some(990.5));
        assert_eq!(r[0].fit_prob, Some(0.4));
        assert_eq!(r[1].mass, Some(1001.0));
        assert_eq!(r[1].fit_prob, None);
        assert_eq!(r[0].hypothesis, "h1");
        assert_eq!(r[0].truth_match, None);
    }

    #[test]
    fn named_mass_column_must_exist() {
        let err = read_records(
            "hypothesis,status\nh,ok\n".as_bytes(),
            "t.csv",
            "S",
            None,
            &MassColumn::Named("mass_a".into()),
        )
        .unwrap_err();
        assert!(matches!(err, EvalError::MissingColumn { ref column, .. } if column == "mass_a"));
    }

    #[test]
    fn missing_required_column_is_named() {
        let err = read("hypothesis,mass_avg\nh,1\n").unwrap_err();
        assert_eq!(err.to_string(), "t.csv: missing column 'status'");
    }

    #[test]
    fn nan_and_garbage_are_typed_errors_with_line() {
        let err = read("hypothesis,status,chi2\nh,ok,1\nh,ok,NaN\n").unwrap_err();
        match err {
            EvalError::BadValue { line, column, .. } => {
                assert_eq!(line, 3);
                assert_eq!(column, "chi2");
            }
            e => panic!("unexpected {e}"),
        }
        assert!(read("hypothesis,status,truth_match\nh,ok,maybe\n").is_err());
        assert!(read("hypothesis,status,mass_avg\nh,ok,12x\n").is_err());
        assert!(read("hypothesis,status\nh,\n").is_err());
    }

    #[test]
    fn ragged_rows_are_csv_errors() {
        assert!(matches!(
            read("hypothesis,status\nh,ok,extra\n"),
            Err(EvalError::Csv { .. })
        ));
    }

    #[test]
    fn composites_column_parses_when_present() {
        let r = read(
            "hypothesis,status,truth_match,truth_composites\n\
             h,ok,0,W_had=1;Q_had=0\n\
             h,ok,1,\n",
        )
        .unwrap();
        assert_eq!(
            r[0].composite_matches,
            vec![("W_had".to_string(), true), ("Q_had".to_string(), false)]
        );
        assert!(r[1].composite_matches.is_empty());
        assert!(read("hypothesis,status,truth_composites\nh,ok,W_had\n").is_err());
        assert!(read("hypothesis,status,truth_composites\nh,ok,=1\n").is_err());
    }
}
