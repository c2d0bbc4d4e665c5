//! The numbers a figure plots, as a CSV table beside it (`NAME.data.csv`), so that they can be
//! re-plotted in another style. Written atomically; numbers in full precision (shortest
//! round-trip form), empty where not a number.

use std::fmt::Write as _;
use std::path::Path;

use super::ReportError;

/// One value of a data table.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Value {
    Number(f64),
    Count(usize),
    Text(String),
}

impl From<f64> for Value {
    fn from(v: f64) -> Self {
        Value::Number(v)
    }
}

impl From<usize> for Value {
    fn from(v: usize) -> Self {
        Value::Count(v)
    }
}

impl From<&str> for Value {
    fn from(v: &str) -> Self {
        Value::Text(v.to_string())
    }
}

/// A table: column names and rows of values.
#[derive(Debug, Clone, Default, PartialEq)]
pub(crate) struct DataTable {
    pub columns: Vec<&'static str>,
    pub rows: Vec<Vec<Value>>,
}

impl DataTable {
    pub(crate) fn new(columns: &[&'static str]) -> DataTable {
        DataTable {
            columns: columns.to_vec(),
            rows: Vec::new(),
        }
    }

    pub(crate) fn push(&mut self, row: Vec<Value>) {
        debug_assert_eq!(row.len(), self.columns.len());
        self.rows.push(row);
    }
}

fn field(v: &Value) -> String {
    match v {
        Value::Number(x) if x.is_finite() => format!("{x}"),
        Value::Number(_) => String::new(),
        Value::Count(n) => n.to_string(),
        Value::Text(t) => {
            if t.contains([',', '"', '\n']) {
                format!("\"{}\"", t.replace('"', "\"\""))
            } else {
                t.clone()
            }
        }
    }
}

/// The table as CSV text (RFC 4180 quoting; header line first).
pub(crate) fn csv_text(t: &DataTable) -> String {
    let mut s = t.columns.join(",");
    s.push('\n');
    for r in &t.rows {
        let line: Vec<String> = r.iter().map(field).collect();
        let _ = writeln!(s, "{}", line.join(","));
    }
    s
}

pub(crate) fn write_csv(path: &Path, t: &DataTable) -> Result<(), ReportError> {
    crate::catalogue::atomic::write_bytes(path, csv_text(t).as_bytes()).map_err(ReportError::from)
}
