//! ECSV, the Enhanced Character Separated Values format (Astropy APE 6, version 1.0):
//! a YAML header in `# ` comment lines, then delimited text.
//!
//! ```text
//! # %ECSV 1.0
//! # ---
//! # delimiter: ','
//! # datatype:
//! # - {name: v_pec, datatype: float64, unit: km/s, description: ..., meta: {ucd: phys.veloc}}
//! # meta: {key: value, ...}
//! name,v_pec
//! ...
//! ```
//!
//! # Reading ([`read_ecsv`])
//!
//! The first line must be `# %ECSV <version>` (1.0, or the 0.9 of older writers), the header
//! lines up to the column names each start with `#` and hold one YAML document (read by the
//! `yaml-rust2` crate). `delimiter` is a space (the default) or a comma. The `datatype` list
//! must name the header line's columns, in order. Types: `bool` → `Boolean` (`True`,
//! `False`, `true`, `false`, `1`, `0`), integers of any width → `Int64` (an unsigned value
//! beyond the signed range is an error naming the column and row), floats of any width →
//! `Float64` (`nan` stays NaN, as in CSV), `string` and every other type → `String`. An
//! empty field is null. Each column's `unit`, `description` and `meta.ucd` go into
//! [`Table::meta`]; the table's `meta` mapping is the provenance
//! ([`read_ecsv_provenance`]), scalar values as their text and nested ones as YAML.
//! The data part is read by the CSV machinery of [`super::delimited`], so its rules (line
//! endings, quoting, ragged rows refused with their line) hold here too.
//!
//! # Writing ([`write_ecsv`])
//!
//! Comma-delimited (the standard allows a space or a comma; a comma keeps text with blanks
//! unquoted and is what every CSV reader expects), `datatype` for every column (`float64`,
//! `float32`, `int64`, `bool`, `string`), with `unit`, `description` and `meta: {ucd}` from
//! [`Table::meta`], and the provenance as the table's `meta` mapping, in order. Booleans are
//! written `True`/`False` (as Python writes them), nulls as empty fields, floats as the
//! shortest text that reads back to the same number.

use std::fs::File;
use std::io::Write;
use std::path::Path;

use polars::prelude::*;
use yaml_rust2::yaml::Hash;
use yaml_rust2::{Yaml, YamlEmitter, YamlLoader};

use super::delimited::{read_delimited_as_text, write_delimited};
use super::{CatalogueError, ColumnMeta, Provenance, Table};

/// The header of an ECSV file, as read.
struct Header {
    delimiter: u8,
    columns: Vec<HeaderColumn>,
    meta: Vec<(String, String)>,
}

struct HeaderColumn {
    name: String,
    datatype: String,
    meta: ColumnMeta,
}

/// Read an ECSV file (see the [module documentation](self)).
pub fn read_ecsv(path: &Path) -> Result<Table, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, m);
    let header = read_header(path)?;
    let raw = read_delimited_as_text(path, header.delimiter)?;
    let names: Vec<String> = raw
        .frame
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .collect();
    let declared: Vec<&str> = header.columns.iter().map(|c| c.name.as_str()).collect();
    if names != declared {
        return Err(err(format!(
            "the header line names the columns {} but the ECSV header's datatype list names {}",
            names.join(", "),
            declared.join(", ")
        )));
    }
    let mut columns = Vec::with_capacity(names.len());
    let mut meta = std::collections::BTreeMap::new();
    for (c, column) in header.columns.iter().zip(raw.frame.columns()) {
        let text = column
            .as_materialized_series()
            .str()
            .map_err(|e| err(format!("column '{}': {e}", c.name)))?
            .clone();
        columns.push(typed(&c.name, &c.datatype, &text).map_err(err)?);
        if c.meta != ColumnMeta::default() {
            meta.insert(c.name.clone(), c.meta.clone());
        }
    }
    let frame = DataFrame::new(raw.frame.height(), columns)
        .map_err(|e| err(format!("cannot assemble the table: {e}")))?;
    let mut table = Table::new(frame, meta);
    table.notes = raw.notes;
    Ok(table)
}

/// The provenance an ECSV file carries: its table `meta` mapping, in order.
pub fn read_ecsv_provenance(path: &Path) -> Result<Provenance, CatalogueError> {
    Ok(Provenance {
        entries: read_header(path)?.meta,
    })
}

/// A column of text as the ECSV datatype says, naming column and row on a bad entry.
fn typed(name: &str, datatype: &str, text: &StringChunked) -> Result<Column, String> {
    let bad = |row: usize, v: &str, what: &str| {
        format!("column '{name}', row {}: '{v}' is not {what}", row + 1)
    };
    let values = text
        .iter()
        .map(|v| v.map(str::trim).filter(|v| !v.is_empty()));
    let n: PlSmallStr = name.into();
    Ok(match datatype {
        "bool" => {
            let mut out = Vec::with_capacity(text.len());
            for (row, v) in values.enumerate() {
                out.push(match v {
                    None => None,
                    Some("True" | "true" | "1") => Some(true),
                    Some("False" | "false" | "0") => Some(false),
                    Some(v) => return Err(bad(row, v, "a bool (True or False)")),
                });
            }
            Column::new(n, out)
        }
        "int8" | "int16" | "int32" | "int64" | "uint8" | "uint16" | "uint32" | "uint64" => {
            let mut out = Vec::with_capacity(text.len());
            for (row, v) in values.enumerate() {
                out.push(match v {
                    None => None,
                    Some(v) => Some(v.parse::<i64>().map_err(|_| {
                        bad(
                            row,
                            v,
                            "an integer in the 64-bit signed range flowsift reads",
                        )
                    })?),
                });
            }
            Column::new(n, out)
        }
        "float16" | "float32" | "float64" | "float128" => {
            let mut out = Vec::with_capacity(text.len());
            for (row, v) in values.enumerate() {
                out.push(match v {
                    None => None,
                    Some(v) => Some(v.parse::<f64>().map_err(|_| bad(row, v, "a number"))?),
                });
            }
            Column::new(n, out)
        }
        _ => {
            let out: Vec<Option<&str>> = text.iter().map(|v| v.filter(|v| !v.is_empty())).collect();
            Column::new(n, out)
        }
    })
}

fn read_header(path: &Path) -> Result<Header, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, m);
    let bytes = std::fs::read(path).map_err(|e| err(e.to_string()))?;
    let mut lines = Vec::new();
    for (i, line) in bytes.split(|&b| b == b'\n').enumerate() {
        if !line.starts_with(b"#") {
            break;
        }
        let line = std::str::from_utf8(line)
            .map_err(|_| err(format!("line {}: the ECSV header is not UTF-8 text", i + 1)))?;
        lines.push(line.trim_end_matches('\r'));
    }
    let first = lines.first().copied().unwrap_or("");
    let version = first
        .strip_prefix("# %ECSV ")
        .map(str::trim)
        .ok_or_else(|| err("not an ECSV file: the first line is not '# %ECSV 1.0'".into()))?;
    if !matches!(version, "1.0" | "0.9") {
        return Err(err(format!(
            "ECSV version {version}: flowsift reads ECSV 1.0 (and 0.9)"
        )));
    }
    if lines.get(1).map(|l| l.trim_end()) != Some("# ---") {
        return Err(err(
            "not an ECSV file: the second line is not '# ---' (the YAML header's start)".into(),
        ));
    }
    let yaml: String = lines[1..]
        .iter()
        .map(|l| {
            let l = l.strip_prefix('#').unwrap_or(l);
            let l = l.strip_prefix(' ').unwrap_or(l);
            format!("{l}\n")
        })
        .collect();
    let docs = YamlLoader::load_from_str(&yaml)
        .map_err(|e| err(format!("the ECSV header is not YAML: {e}")))?;
    let doc = docs
        .first()
        .ok_or_else(|| err("the ECSV header is empty".into()))?;
    let delimiter = match &doc["delimiter"] {
        Yaml::BadValue | Yaml::Null => b' ',
        Yaml::String(s) if s == " " => b' ',
        Yaml::String(s) if s == "," => b',',
        other => {
            return Err(err(format!(
                "ECSV delimiter {}: the standard allows a space or a comma",
                scalar_text(other)
            )))
        }
    };
    let columns = header_columns(doc).map_err(err)?;
    Ok(Header {
        delimiter,
        columns,
        meta: mapping_entries(&doc["meta"]),
    })
}

/// The columns of a header document's `datatype` list, with their metadata.
fn header_columns(doc: &Yaml) -> Result<Vec<HeaderColumn>, String> {
    let list = doc["datatype"]
        .as_vec()
        .ok_or_else(|| "the ECSV header has no datatype list".to_string())?;
    let mut columns = Vec::with_capacity(list.len());
    for (i, c) in list.iter().enumerate() {
        let text = |k: &str| match &c[k] {
            Yaml::BadValue | Yaml::Null => None,
            v => Some(scalar_text(v)).filter(|s| !s.is_empty()),
        };
        let name = text("name").ok_or_else(|| format!("ECSV datatype entry {}: no name", i + 1))?;
        let datatype = text("datatype")
            .ok_or_else(|| format!("ECSV datatype entry {} ('{name}'): no datatype", i + 1))?;
        let ucd = mapping_entries(&c["meta"])
            .into_iter()
            .find(|(k, _)| k == "ucd")
            .map(|(_, v)| v)
            .filter(|v| !v.is_empty());
        columns.push(HeaderColumn {
            name,
            datatype,
            meta: ColumnMeta {
                unit: text("unit"),
                ucd,
                description: text("description"),
            },
        });
    }
    Ok(columns)
}

/// Column metadata from an ECSV-style YAML header without `#` prefixes (astropy's Parquet
/// `table_meta_yaml`); `None` when it is not one or names no metadata.
pub(crate) fn column_meta_from_yaml(
    text: &str,
) -> Option<std::collections::BTreeMap<String, ColumnMeta>> {
    let docs = YamlLoader::load_from_str(text).ok()?;
    let columns = header_columns(docs.first()?).ok()?;
    let out: std::collections::BTreeMap<String, ColumnMeta> = columns
        .into_iter()
        .filter(|c| c.meta != ColumnMeta::default())
        .map(|c| (c.name, c.meta))
        .collect();
    (!out.is_empty()).then_some(out)
}

/// A mapping's entries in order; an `!!omap` (a list of one-entry mappings) too.
fn mapping_entries(y: &Yaml) -> Vec<(String, String)> {
    match y {
        Yaml::Hash(h) => h
            .iter()
            .map(|(k, v)| (scalar_text(k), scalar_text(v)))
            .collect(),
        Yaml::Array(a) => a.iter().flat_map(mapping_entries).collect(),
        _ => vec![],
    }
}

/// A YAML value as text: scalars as written, anything else as YAML.
fn scalar_text(y: &Yaml) -> String {
    match y {
        Yaml::String(s) | Yaml::Real(s) => s.clone(),
        Yaml::Integer(i) => i.to_string(),
        Yaml::Boolean(b) => b.to_string(),
        Yaml::Null | Yaml::BadValue => String::new(),
        other => {
            let mut s = String::new();
            let mut e = YamlEmitter::new(&mut s);
            e.compact(true);
            if e.dump(other).is_err() {
                return String::new();
            }
            s.trim_start_matches("---").trim().to_string()
        }
    }
}

/// The ECSV `datatype` of a polars type.
fn datatype_of(d: &DataType) -> Option<&'static str> {
    Some(match d {
        DataType::Float64 | DataType::Null => "float64",
        DataType::Float32 => "float32",
        DataType::Boolean => "bool",
        DataType::String => "string",
        d if d.is_integer() => "int64",
        _ => return None,
    })
}

/// The YAML header document: `delimiter` (when given), `datatype` for every column with its
/// unit, description and UCD, and the provenance as the table `meta`.
fn header_document(
    table: &Table,
    provenance: &Provenance,
    delimiter: Option<&str>,
) -> Result<String, String> {
    let s = |v: &str| Yaml::String(v.to_string());
    let mut list = Vec::new();
    for column in table.frame.columns() {
        let name = column.name().as_str();
        // Beside a Parquet file's own types the header only carries the metadata: any
        // type will do there.
        let datatype = match (datatype_of(column.dtype()), delimiter) {
            (Some(d), _) => d,
            (None, None) => "string",
            (None, Some(_)) => {
                return Err(format!(
                    "column '{name}' has type {}, which the ECSV writer does not store",
                    column.dtype()
                ))
            }
        };
        let mut h = Hash::new();
        h.insert(s("name"), s(name));
        if let Some(m) = table.meta.get(name) {
            if let Some(u) = m.unit.as_deref().filter(|u| !u.is_empty()) {
                h.insert(s("unit"), s(u));
            }
        }
        h.insert(s("datatype"), s(datatype));
        if let Some(m) = table.meta.get(name) {
            if let Some(d) = m.description.as_deref().filter(|d| !d.is_empty()) {
                h.insert(s("description"), s(d));
            }
            if let Some(u) = m.ucd.as_deref().filter(|u| !u.is_empty()) {
                let mut inner = Hash::new();
                inner.insert(s("ucd"), s(u));
                h.insert(s("meta"), Yaml::Hash(inner));
            }
        }
        list.push(Yaml::Hash(h));
    }
    let mut doc = Hash::new();
    if let Some(d) = delimiter {
        doc.insert(s("delimiter"), s(d));
    }
    doc.insert(s("datatype"), Yaml::Array(list));
    if !provenance.entries.is_empty() {
        let mut m = Hash::new();
        for (k, v) in &provenance.entries {
            m.insert(s(k), s(v));
        }
        doc.insert(s("meta"), Yaml::Hash(m));
    }
    let mut yaml = String::new();
    YamlEmitter::new(&mut yaml)
        .dump(&Yaml::Hash(doc))
        .map_err(|e| format!("cannot write the ECSV header: {e}"))?;
    Ok(yaml)
}

/// The ECSV-style YAML header (without `delimiter`) that astropy's Parquet reader takes from
/// a Parquet file's `table_meta_yaml` key-value entry for column units, descriptions and
/// meta (astropy/io/misc/parquet.py, `read_table_parquet`).
pub(crate) fn table_meta_yaml(table: &Table, provenance: &Provenance) -> Result<String, String> {
    header_document(table, provenance, None)
}

/// Write `table` as ECSV 1.0 (see the [module documentation](self)).
pub fn write_ecsv(file: &File, table: &Table, provenance: &Provenance) -> Result<(), String> {
    let yaml = header_document(table, provenance, Some(","))?;
    let mut header = String::from("# %ECSV 1.0\n");
    for line in yaml.lines() {
        header.push_str("# ");
        header.push_str(line);
        header.push('\n');
    }
    let mut f = file;
    f.write_all(header.as_bytes())
        .map_err(|e| format!("cannot write: {e}"))?;
    // Booleans as Python writes them, which every ECSV reader takes.
    let mut frame = table.frame.clone();
    for name in frame.get_column_names_owned() {
        let c = frame.column(&name).map_err(|e| e.to_string())?;
        if c.dtype() == &DataType::Boolean {
            let text: StringChunked = c
                .as_materialized_series()
                .bool()
                .map_err(|e| e.to_string())?
                .iter()
                .map(|v| v.map(|b| if b { "True" } else { "False" }))
                .collect();
            frame
                .replace(&name, text.with_name(name.clone()).into_column())
                .map_err(|e| e.to_string())?;
        }
    }
    write_delimited(file, &Table::new(frame, Default::default()), b',')
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn omap_and_plain_mappings_keep_their_order() {
        // An `!!omap` as astropy writes a table's meta (APE 6 examples).
        let docs = YamlLoader::load_from_str("meta: !!omap\n- b: 1\n- a: x\n").unwrap();
        assert_eq!(
            mapping_entries(&docs[0]["meta"]),
            vec![("b".into(), "1".into()), ("a".into(), "x".into())]
        );
        let docs = YamlLoader::load_from_str("meta: {z: '2', y: true}\n").unwrap();
        assert_eq!(
            mapping_entries(&docs[0]["meta"]),
            vec![("z".into(), "2".into()), ("y".into(), "true".into())]
        );
    }
}
