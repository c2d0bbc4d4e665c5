//! Provenance: the ordered key/value entries every output carries, and the one reader that
//! finds them in any format (FITS header cards, Parquet key-value metadata, VOTable INFO
//! elements, the ECSV table `meta`, the CSV/TSV sidecar). The typed record of a run is one of these entries ([`super::record`]).

use std::path::{Path, PathBuf};

use serde_json::Value;

use super::fits::read_fits_provenance;
use super::parquet::{read_parquet_metadata, COLUMNS_KEY};
use super::{CatalogueError, Format, Table};

/// Ordered key/value provenance records written with every output.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct Provenance {
    pub entries: Vec<(String, String)>,
}

impl Provenance {
    /// The value of `key`, if present.
    pub fn get(&self, key: &str) -> Option<&str> {
        self.entries
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.as_str())
    }
}

/// The sidecar provenance file written next to a CSV/TSV output.
pub fn sidecar_path(output: &Path) -> PathBuf {
    let mut s = output.as_os_str().to_owned();
    s.push(".provenance.json");
    PathBuf::from(s)
}

/// The sidecar's content: provenance plus per-column units and UCDs.
pub(crate) fn sidecar(table: &Table, provenance: &Provenance) -> Value {
    let prov: serde_json::Map<String, Value> = provenance
        .entries
        .iter()
        .map(|(k, v)| (k.clone(), Value::String(v.clone())))
        .collect();
    serde_json::json!({ "provenance": prov, "columns": table.meta })
}

/// Provenance as found with a file, and where it was found.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FoundProvenance {
    pub provenance: Provenance,
    /// Where the entries came from, or why there are none ("the FITS header has no
    /// provenance cards").
    pub origin: String,
}

/// The provenance of `path` in whichever place its format keeps it. A file without any is
/// not an error (empty entries, and `origin` says so); an unreadable one is.
pub fn read_provenance(path: &Path, hdu: Option<&str>) -> Result<FoundProvenance, CatalogueError> {
    let found = |entries: Vec<(String, String)>, with: &str, without: &str| FoundProvenance {
        origin: if entries.is_empty() { without } else { with }.to_string(),
        provenance: Provenance { entries },
    };
    if super::partitioned::is_partitioned(path) {
        return super::partitioned::read_partitioned_provenance(path);
    }
    match Format::from_path(path)? {
        Format::Fits => {
            let p = read_fits_provenance(path, hdu)?;
            Ok(found(
                p.entries,
                "FITS header cards PROVnnn",
                "the FITS header has no provenance cards",
            ))
        }
        Format::Csv | Format::Tsv => {
            let side = sidecar_path(path);
            let text = match std::fs::read_to_string(&side) {
                Ok(t) => t,
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                    return Ok(FoundProvenance {
                        provenance: Provenance::default(),
                        origin: format!("no provenance sidecar {}", side.display()),
                    })
                }
                Err(e) => return Err(CatalogueError::read(&side, e.to_string())),
            };
            let v: Value = serde_json::from_str(&text)
                .map_err(|e| CatalogueError::read(&side, format!("sidecar is not JSON: {e}")))?;
            let entries = v
                .get("provenance")
                .and_then(Value::as_object)
                .map(|m| {
                    m.iter()
                        .map(|(k, v)| {
                            let s = match v {
                                Value::String(s) => s.clone(),
                                other => other.to_string(),
                            };
                            (k.clone(), s)
                        })
                        .collect()
                })
                .unwrap_or_default();
            Ok(found(
                entries,
                &format!("sidecar {}", side.display()),
                &format!("the sidecar {} has no provenance entries", side.display()),
            ))
        }
        Format::VoTable => {
            let p = super::votable::read_votable_provenance(path, hdu)?;
            Ok(found(
                p.entries,
                "VOTable INFO elements of the table's RESOURCE",
                "the VOTable has no INFO elements in the table's RESOURCE",
            ))
        }
        Format::Ecsv => {
            let p = super::ecsv::read_ecsv_provenance(path)?;
            Ok(found(
                p.entries,
                "the ECSV header's table meta",
                "the ECSV header has no table meta",
            ))
        }
        Format::Parquet => {
            let entries: Vec<(String, String)> = read_parquet_metadata(path)?
                .into_iter()
                .filter(|(k, _)| k != COLUMNS_KEY)
                .filter_map(|(k, v)| k.strip_prefix("flowsift.").map(|k| (k.to_string(), v)))
                .collect();
            Ok(found(
                entries,
                "Parquet key-value metadata (flowsift.*)",
                "the Parquet key-value metadata has no flowsift entries",
            ))
        }
    }
}
