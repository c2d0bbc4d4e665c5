//! Writing a VOTable: one RESOURCE with the provenance as INFO elements and one TABLE in
//! TABLEDATA (see the [module documentation](super)).

use std::fs::File;
use std::io::{BufWriter, Write};

use polars::prelude::*;
use quick_xml::escape::escape;

use super::TABLE_NAME;
use crate::catalogue::{Provenance, Table};

/// How one column is written.
enum Out {
    F64(Float64Chunked),
    F32(Float32Chunked),
    I64(Int64Chunked),
    Bool(BooleanChunked),
    Str(StringChunked),
}

/// Write `table` as VOTable 1.4 TABLEDATA with `provenance` as INFO elements.
pub fn write_votable(file: &File, table: &Table, provenance: &Provenance) -> Result<(), String> {
    let mut out = BufWriter::new(file);
    let io = |e: std::io::Error| format!("cannot write: {e}");
    let mut columns: Vec<(String, &'static str, Out)> = Vec::new();
    for column in table.frame.columns() {
        let name = column.name().to_string();
        let s = column.as_materialized_series();
        let bad = |e: PolarsError| format!("column '{name}': {e}");
        let (datatype, cells) = match s.dtype() {
            DataType::Float64 => (
                "double",
                Out::F64(s.f64().map_err(bad)?.rechunk().into_owned()),
            ),
            DataType::Float32 => (
                "float",
                Out::F32(s.f32().map_err(bad)?.rechunk().into_owned()),
            ),
            DataType::Boolean => (
                "boolean",
                Out::Bool(s.bool().map_err(bad)?.rechunk().into_owned()),
            ),
            DataType::String => {
                let ca = s.str().map_err(bad)?.rechunk().into_owned();
                let ascii = ca.iter().flatten().all(|v| v.is_ascii());
                (if ascii { "char" } else { "unicodeChar" }, Out::Str(ca))
            }
            DataType::Null => {
                let cast = s.cast(&DataType::Float64).map_err(bad)?;
                (
                    "double",
                    Out::F64(cast.f64().map_err(bad)?.rechunk().into_owned()),
                )
            }
            d if d.is_integer() => {
                let cast = s.strict_cast(&DataType::Int64).map_err(|_| {
                    format!(
                        "column '{name}' ({d}) has values outside the 64-bit signed integer \
                         range of a VOTable long"
                    )
                })?;
                (
                    "long",
                    Out::I64(cast.i64().map_err(bad)?.rechunk().into_owned()),
                )
            }
            d => {
                return Err(format!(
                    "column '{name}' has type {d}, which the VOTable writer does not store"
                ))
            }
        };
        columns.push((name, datatype, cells));
    }
    writeln!(out, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>").map_err(io)?;
    writeln!(
        out,
        "<VOTABLE version=\"1.4\" xmlns=\"http://www.ivoa.net/xml/VOTable/v1.3\" \
         xmlns:xsi=\"http://www.w3.org/2001/XMLSchema-instance\">"
    )
    .map_err(io)?;
    writeln!(out, " <RESOURCE type=\"results\">").map_err(io)?;
    for (k, v) in &provenance.entries {
        writeln!(
            out,
            "  <INFO name=\"{}\" value=\"{}\"/>",
            attribute(k),
            attribute(v)
        )
        .map_err(io)?;
    }
    writeln!(
        out,
        "  <TABLE name=\"{TABLE_NAME}\" nrows=\"{}\">",
        table.frame.height()
    )
    .map_err(io)?;
    for (name, datatype, cells) in &columns {
        let meta = table.meta.get(name);
        let mut line = format!(
            "   <FIELD name=\"{}\" datatype=\"{datatype}\"",
            attribute(name)
        );
        if matches!(cells, Out::Str(_)) {
            line.push_str(" arraysize=\"*\"");
        }
        if let Some(u) = meta
            .and_then(|m| m.unit.as_deref())
            .filter(|u| !u.is_empty())
        {
            line.push_str(&format!(" unit=\"{}\"", attribute(u)));
        }
        if let Some(u) = meta
            .and_then(|m| m.ucd.as_deref())
            .filter(|u| !u.is_empty())
        {
            line.push_str(&format!(" ucd=\"{}\"", attribute(u)));
        }
        match meta.and_then(|m| m.description.as_deref()) {
            Some(d) if !d.is_empty() => {
                line.push_str(&format!(
                    ">\n    <DESCRIPTION>{}</DESCRIPTION>\n   </FIELD>",
                    escape(d)
                ));
            }
            _ => line.push_str("/>"),
        }
        writeln!(out, "{line}").map_err(io)?;
    }
    writeln!(out, "   <DATA>\n    <TABLEDATA>").map_err(io)?;
    let mut row = String::new();
    for i in 0..table.frame.height() {
        row.clear();
        row.push_str("     <TR>");
        for (_, _, cells) in &columns {
            row.push_str("<TD>");
            push_cell(&mut row, cells, i);
            row.push_str("</TD>");
        }
        row.push_str("</TR>\n");
        out.write_all(row.as_bytes()).map_err(io)?;
    }
    writeln!(
        out,
        "    </TABLEDATA>\n   </DATA>\n  </TABLE>\n </RESOURCE>\n</VOTABLE>"
    )
    .map_err(io)?;
    out.flush().map_err(io)
}

/// Text for an attribute value: XML-escaped, with line breaks and tabs as character
/// references so that they survive attribute-value normalisation.
fn attribute(s: &str) -> String {
    escape(s)
        .replace('\n', "&#10;")
        .replace('\r', "&#13;")
        .replace('\t', "&#9;")
}

/// A float cell: NaN as an empty cell (a null), infinities as `+Inf`/`-Inf` (VOTable 1.4
/// §6), other values as the shortest text that reads back to them.
fn push_float(row: &mut String, x: f64) {
    if x == f64::INFINITY {
        row.push_str("+Inf");
    } else if x == f64::NEG_INFINITY {
        row.push_str("-Inf");
    } else if !x.is_nan() {
        row.push_str(zmij::Buffer::new().format(x));
    }
}

fn push_cell(row: &mut String, cells: &Out, i: usize) {
    match cells {
        Out::F64(ca) => {
            if let Some(x) = ca.get(i) {
                push_float(row, x)
            }
        }
        Out::F32(ca) => {
            if let Some(x) = ca.get(i) {
                if x.is_finite() {
                    row.push_str(zmij::Buffer::new().format(x));
                } else {
                    push_float(row, x as f64)
                }
            }
        }
        Out::I64(ca) => {
            if let Some(x) = ca.get(i) {
                row.push_str(itoa::Buffer::new().format(x));
            }
        }
        Out::Bool(ca) => match ca.get(i) {
            Some(true) => row.push('T'),
            Some(false) => row.push('F'),
            None => {}
        },
        Out::Str(ca) => {
            if let Some(s) = ca.get(i) {
                row.push_str(&escape(s));
            }
        }
    }
}
