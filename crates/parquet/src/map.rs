//! The column map: which columns of a per-event Parquet file give each
//! object's values. A small TOML file; `maps/nanoaod.toml` is shipped.

use serde::Deserialize;

use crate::ParquetError;

/// The shipped maps: `(name, one-line description, TOML text)`.
pub const SHIPPED_MAPS: &[(&str, &str, &str)] = &[(
    "nanoaod",
    "NanoAOD-style names: Jet_pt[nJet], Electron_*, Muon_*, FatJet_*, MET_pt/phi/covXX..., event, genWeight",
    include_str!("../maps/nanoaod.toml"),
)];

/// What to do with a value below the range the event model accepts.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum NegativePolicy {
    /// The event becomes `bad_input`, naming the column (the default).
    #[default]
    Reject,
    /// A negative mass is read as 0 (for masses stored with a shortened
    /// mantissa, which come out slightly negative near zero).
    Zero,
    /// A negative b-tag score (a "not computed" marker) is read as 0,
    /// untagged.
    Untagged,
}

/// The columns of one object collection. Every per-object column is a
/// list column with one entry per object of the event.
#[derive(Clone, Debug, Default, PartialEq, Eq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CollectionColumns {
    /// Integer column with the number of objects; when given, every list's
    /// length must equal it (else the file is structurally broken: exit 2).
    pub count: Option<String>,
    /// Transverse momentum \[GeV\].
    pub pt: String,
    /// Pseudorapidity.
    pub eta: String,
    /// Azimuth \[rad\].
    pub phi: String,
    /// Mass \[GeV\] (this or `energy`).
    pub mass: Option<String>,
    /// Energy \[GeV\] (this or `mass`).
    pub energy: Option<String>,
    /// b-tag score in [0, 1] (jets only).
    pub btag: Option<String>,
    /// Electric charge, −1 or +1 (leptons only).
    pub charge: Option<String>,
    /// Simulation truth label, a list of strings.
    pub truth: Option<String>,
    /// What a negative mass means: `reject` (default) or `zero`.
    #[serde(default)]
    pub negative_mass: NegativePolicy,
    /// What a negative b-tag score means: `reject` (default) or `untagged`.
    #[serde(default)]
    pub negative_btag: NegativePolicy,
}

/// The columns of the missing transverse momentum: `pt` and `phi`, or `px`
/// and `py`; the covariance all three or none.
#[derive(Clone, Debug, Default, PartialEq, Eq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MetColumns {
    /// Magnitude \[GeV\].
    pub pt: Option<String>,
    /// Azimuth \[rad\].
    pub phi: Option<String>,
    /// x component \[GeV\].
    pub px: Option<String>,
    /// y component \[GeV\].
    pub py: Option<String>,
    /// Covariance xx \[GeV²\].
    pub cov_xx: Option<String>,
    /// Covariance xy \[GeV²\].
    pub cov_xy: Option<String>,
    /// Covariance yy \[GeV²\].
    pub cov_yy: Option<String>,
}

/// Which columns give what, for the per-event (jagged) layout.
///
/// ```
/// let map = quarry_parquet::ColumnMap::named("nanoaod").unwrap();
/// assert_eq!(map.jets.as_ref().unwrap().pt, "Jet_pt");
/// let mine = quarry_parquet::ColumnMap::from_toml("[jets]\npt='j_pt'\neta='j_eta'\nphi='j_phi'\nmass='j_m'\n", "mine").unwrap();
/// assert!(mine.event.is_none() && mine.muons.is_none());
/// ```
#[derive(Clone, Debug, Default, PartialEq, Eq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ColumnMap {
    /// Event id column (unsigned integer); without it the id is the row's
    /// position in the file (0-based).
    pub event: Option<String>,
    /// Event weight column; without it every weight is 1.
    pub weight: Option<String>,
    /// Small-radius jets.
    pub jets: Option<CollectionColumns>,
    /// Large-radius jets.
    pub fatjets: Option<CollectionColumns>,
    /// Electrons.
    pub electrons: Option<CollectionColumns>,
    /// Muons.
    pub muons: Option<CollectionColumns>,
    /// Missing transverse momentum; without it MET is zero.
    pub met: Option<MetColumns>,
}

impl ColumnMap {
    /// Parses a map from TOML; `source` names it in errors.
    pub fn from_toml(text: &str, source: &str) -> Result<ColumnMap, ParquetError> {
        let map: ColumnMap = toml::from_str(text).map_err(|e| ParquetError::Map {
            source_name: source.to_string(),
            message: e.to_string().trim_end().replace('\n', " "),
        })?;
        map.check(source)?;
        Ok(map)
    }

    /// A shipped map by name (see [`SHIPPED_MAPS`]).
    pub fn named(name: &str) -> Option<ColumnMap> {
        let (_, _, text) = SHIPPED_MAPS.iter().find(|(n, _, _)| *n == name)?;
        ColumnMap::from_toml(text, name).ok()
    }

    /// A shipped map by name, or else a TOML file at that path.
    pub fn load(name_or_path: &str) -> Result<ColumnMap, ParquetError> {
        if let Some(m) = ColumnMap::named(name_or_path) {
            return Ok(m);
        }
        let text = std::fs::read_to_string(name_or_path).map_err(|e| ParquetError::Map {
            source_name: name_or_path.to_string(),
            message: format!(
                "is neither a shipped map ({}) nor a readable file: {e}",
                SHIPPED_MAPS
                    .iter()
                    .map(|(n, _, _)| *n)
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        })?;
        ColumnMap::from_toml(&text, name_or_path)
    }

    /// The collections present, with their section names.
    pub fn collections(&self) -> impl Iterator<Item = (&'static str, &CollectionColumns)> {
        [
            ("jets", &self.jets),
            ("fatjets", &self.fatjets),
            ("electrons", &self.electrons),
            ("muons", &self.muons),
        ]
        .into_iter()
        .filter_map(|(n, c)| c.as_ref().map(|c| (n, c)))
    }

    fn check(&self, source: &str) -> Result<(), ParquetError> {
        let err = |message: String| ParquetError::Map {
            source_name: source.to_string(),
            message,
        };
        for (name, c) in self.collections() {
            if c.mass.is_some() == c.energy.is_some() {
                return Err(err(format!(
                    "[{name}] needs exactly one of 'mass' or 'energy'"
                )));
            }
            if c.btag.is_some() && name != "jets" {
                return Err(err(format!("[{name}] 'btag' applies to jets only")));
            }
            if c.charge.is_some() && !matches!(name, "electrons" | "muons") {
                return Err(err(format!("[{name}] 'charge' applies to leptons only")));
            }
            if c.negative_mass == NegativePolicy::Untagged {
                return Err(err(format!(
                    "[{name}] negative_mass must be \"reject\" or \"zero\""
                )));
            }
            if c.negative_btag == NegativePolicy::Zero {
                return Err(err(format!(
                    "[{name}] negative_btag must be \"reject\" or \"untagged\""
                )));
            }
        }
        if let Some(m) = &self.met {
            let polar = m.pt.is_some() || m.phi.is_some();
            let cartesian = m.px.is_some() || m.py.is_some();
            let complete = (m.pt.is_some() && m.phi.is_some() && !cartesian)
                || (m.px.is_some() && m.py.is_some() && !polar);
            if !complete {
                return Err(err(
                    "[met] needs 'pt' and 'phi', or 'px' and 'py' (not a mix)".into(),
                ));
            }
            let cov = [&m.cov_xx, &m.cov_xy, &m.cov_yy];
            let n = cov.iter().filter(|c| c.is_some()).count();
            if n != 0 && n != 3 {
                return Err(err(
                    "[met] covariance needs all of cov_xx, cov_xy, cov_yy, or none".into(),
                ));
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shipped_maps_parse() {
        for (name, _, text) in SHIPPED_MAPS {
            ColumnMap::from_toml(text, name).unwrap();
        }
    }

    #[test]
    fn bad_maps_say_what_is_wrong() {
        let cases = [
            (
                "[jets]\npt='a'\neta='b'\nphi='c'\n",
                "exactly one of 'mass' or 'energy'",
            ),
            (
                "[jets]\npt='a'\neta='b'\nphi='c'\nmass='m'\nbogus='x'\n",
                "unknown field",
            ),
            ("[met]\npt='a'\npx='b'\n", "not a mix"),
            ("[met]\npt='a'\nphi='b'\ncov_xx='c'\n", "all of cov_xx"),
            (
                "[muons]\npt='a'\neta='b'\nphi='c'\nmass='m'\nbtag='t'\n",
                "jets only",
            ),
        ];
        for (text, want) in cases {
            let e = ColumnMap::from_toml(text, "t.toml")
                .unwrap_err()
                .to_string();
            assert!(e.contains(want), "{e}");
            assert!(e.starts_with("column map t.toml"), "{e}");
        }
    }
}
