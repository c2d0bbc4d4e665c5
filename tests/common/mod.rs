//! Helpers shared by the integration tests: reading the committed reference fixtures.
#![allow(dead_code)]

use std::collections::HashMap;
use std::path::PathBuf;

/// One fixture table: header names and rows of text fields.
pub struct Table {
    pub header: Vec<String>,
    pub rows: Vec<Vec<String>>,
}

impl Table {
    /// Column index by name (panics with the file's header when missing).
    pub fn col(&self, name: &str) -> usize {
        self.header
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("column {name} not in {:?}", self.header))
    }

    /// Rows as maps of name → f64 for the numeric columns, text kept aside.
    pub fn records(&self) -> Vec<Record> {
        self.rows
            .iter()
            .map(|r| Record {
                fields: self.header.iter().cloned().zip(r.iter().cloned()).collect(),
            })
            .collect()
    }
}

pub struct Record {
    fields: HashMap<String, String>,
}

impl Record {
    pub fn f(&self, name: &str) -> f64 {
        self.fields[name]
            .parse()
            .unwrap_or_else(|_| panic!("{name}={} is not a number", self.fields[name]))
    }
    pub fn s(&self, name: &str) -> &str {
        &self.fields[name]
    }
}

/// Read `tests/reference/<name>`: lines starting with '#' are comments, then a header.
pub fn fixture(name: &str) -> Table {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference")
        .join(name);
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut lines = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.trim().is_empty());
    let header = lines
        .next()
        .expect("header")
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    Table { header, rows }
}
