//! A draft column map from a file's schema, for `quarry columns template`.

use arrow_schema::Schema;

use crate::columns::{list_element, type_name};

/// Object collections and the name fragments that suggest them, most
/// specific first (a `FatJet` prefix is a large-radius jet, not a jet).
const KINDS: [(&str, &[&str]); 4] = [
    ("fatjets", &["fatjet", "largerjet", "ak8", "ljet"]),
    ("jets", &["jet"]),
    ("electrons", &["electron", "ele", "el"]),
    ("muons", &["muon", "mu"]),
];

/// A column map in TOML for a file with `schema`: each collection whose
/// list columns `<P>_pt`, `<P>_eta`, `<P>_phi` exist is filled in with
/// `<P>_mass` (or `<P>_energy`), `n<P>` as count, a `<P>_btag…` column and
/// `<P>_charge` where present; MET from scalar `<P>_pt`/`<P>_phi` columns
/// whose prefix contains "met". Every column is listed in a comment with
/// its type, so the user can correct any guess.
///
/// ```
/// use arrow_schema::{DataType, Field, Schema};
/// let list = |n: &str| Field::new(n, DataType::new_list(DataType::Float32, false), false);
/// let schema = Schema::new(vec![list("Jet_pt"), list("Jet_eta"), list("Jet_phi"), list("Jet_mass"),
///     Field::new("nJet", DataType::UInt32, false)]);
/// let text = quarry_parquet::template(&schema, "f.parquet");
/// assert!(text.contains("[jets]\ncount = \"nJet\"\npt = \"Jet_pt\""));
/// quarry_parquet::ColumnMap::from_toml(&text, "template").unwrap();
/// ```
pub fn template(schema: &Schema, file: &str) -> String {
    let fields = schema.fields();
    let has = |n: &str| fields.iter().any(|f| f.name() == n);
    let is_list = |n: &str| {
        fields
            .iter()
            .any(|f| f.name() == n && list_element(f.data_type()).is_some())
    };
    let is_scalar = |n: &str| {
        fields
            .iter()
            .any(|f| f.name() == n && list_element(f.data_type()).is_none())
    };
    let mut out = format!(
        "# quarry column map drafted from the columns of {file}.\n\
         # Check every name; remove sections the file does not have.\n\
         # Columns in the file:\n"
    );
    for f in fields {
        out.push_str(&format!(
            "#   {} : {}\n",
            f.name(),
            type_name(f.data_type())
        ));
    }
    out.push('\n');
    for event in ["event", "evt", "eventNumber", "event_number"] {
        if is_scalar(event) {
            out.push_str(&format!("event = \"{event}\"\n"));
            break;
        }
    }
    for weight in ["genWeight", "weight", "mcWeight", "event_weight"] {
        if is_scalar(weight) {
            out.push_str(&format!("weight = \"{weight}\"\n"));
            break;
        }
    }
    // Prefixes P with list columns P_pt, P_eta, P_phi.
    let prefixes: Vec<&str> = fields
        .iter()
        .filter_map(|f| f.name().strip_suffix("_pt"))
        .filter(|p| {
            is_list(&format!("{p}_pt"))
                && is_list(&format!("{p}_eta"))
                && is_list(&format!("{p}_phi"))
        })
        .collect();
    let mut used: Vec<&str> = Vec::new();
    for (section, hints) in KINDS {
        let found = prefixes.iter().find(|p| {
            !used.contains(p) && {
                let lower = p.to_lowercase();
                hints
                    .iter()
                    .any(|h| lower.starts_with(h) || lower.contains(h))
            }
        });
        let Some(&p) = found else { continue };
        used.push(p);
        out.push_str(&format!("\n[{section}]\n"));
        let count = format!("n{p}");
        if is_scalar(&count) {
            out.push_str(&format!("count = \"{count}\"\n"));
        }
        for v in ["pt", "eta", "phi"] {
            out.push_str(&format!("{v} = \"{p}_{v}\"\n"));
        }
        if is_list(&format!("{p}_mass")) {
            out.push_str(&format!("mass = \"{p}_mass\"\n"));
        } else if is_list(&format!("{p}_energy")) {
            out.push_str(&format!("energy = \"{p}_energy\"\n"));
        } else if is_list(&format!("{p}_e")) {
            out.push_str(&format!("energy = \"{p}_e\"\n"));
        } else {
            out.push_str(&format!(
                "mass = \"{p}_mass\"  # no such column: fill in mass or energy\n"
            ));
        }
        if section == "jets" {
            let btag = fields.iter().find(|f| {
                f.name().starts_with(&format!("{p}_btag")) && list_element(f.data_type()).is_some()
            });
            if let Some(b) = btag {
                out.push_str(&format!("btag = \"{}\"\n", b.name()));
                out.push_str("negative_btag = \"reject\"  # or \"untagged\" for negative \"not computed\" scores\n");
            }
        }
        if matches!(section, "electrons" | "muons") && is_list(&format!("{p}_charge")) {
            out.push_str(&format!("charge = \"{p}_charge\"\n"));
        }
        out.push_str("negative_mass = \"reject\"  # or \"zero\" for masses stored with a shortened mantissa\n");
    }
    let met = fields
        .iter()
        .filter_map(|f| f.name().strip_suffix("_pt"))
        .find(|p| {
            p.to_lowercase().contains("met")
                && is_scalar(&format!("{p}_pt"))
                && is_scalar(&format!("{p}_phi"))
        });
    if let Some(p) = met {
        out.push_str(&format!("\n[met]\npt = \"{p}_pt\"\nphi = \"{p}_phi\"\n"));
        let cov = ["covXX", "covXY", "covYY"].map(|c| format!("{p}_{c}"));
        if cov.iter().all(|c| has(c)) {
            out.push_str(&format!(
                "cov_xx = \"{}\"\ncov_xy = \"{}\"\ncov_yy = \"{}\"\n",
                cov[0], cov[1], cov[2]
            ));
        }
    }
    out
}

/// [`template`] for the Parquet file at `path` (only its footer is read).
pub fn template_of_file(path: &std::path::Path) -> Result<String, crate::ParquetError> {
    let name = path.display().to_string();
    if !crate::is_parquet(path).map_err(|source| crate::ParquetError::Io {
        file: name.clone(),
        source,
    })? {
        return Err(crate::ParquetError::NotParquet { file: name });
    }
    let file = std::fs::File::open(path).map_err(|source| crate::ParquetError::Io {
        file: name.clone(),
        source,
    })?;
    let metadata =
        parquet::arrow::arrow_reader::ArrowReaderMetadata::load(&file, Default::default())
            .map_err(|e| crate::ParquetError::Decode {
                file: name.clone(),
                context: "footer".into(),
                message: e.to_string(),
            })?;
    Ok(template(metadata.schema(), &name))
}
