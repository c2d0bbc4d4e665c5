//! Catalogue edges: reading FITS, CSV/TSV, Parquet, VOTable and ECSV tables into columns,
//! and writing them back with units, UCDs, descriptions and provenance. Nothing here does
//! physics.

pub mod arrow;
pub mod ascii;
pub mod atomic;
pub mod blocks;
pub mod bulk_flow_file;
mod cfitsio;
pub mod clock;
pub mod column_schema;
pub mod contained;
pub mod covariance_file;
pub mod ecsv;
pub mod field_io;
pub mod fits;
pub mod provenance;
pub mod record;
pub mod storable;
pub mod units;
pub mod votable;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use polars::prelude::DataFrame;
use thiserror::Error;

/// Per-column metadata carried alongside the data: FITS TUNITn / TUCDn, VOTable FIELD
/// `unit`/`ucd`/DESCRIPTION, ECSV `unit`/`description`/`meta.ucd`, Arrow field metadata in
/// Parquet, and the CSV sidecar.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ColumnMeta {
    /// Unit string (FITS standard 4.0 §4.3 unit syntax, e.g. "km/s", "Mpc", "deg", "mag").
    pub unit: Option<String>,
    /// IVOA Unified Content Descriptor (UCD1+), e.g. "src.redshift", "pos.eq.ra".
    pub ucd: Option<String>,
    /// What the column holds, in words (VOTable DESCRIPTION, ECSV `description`, Arrow field
    /// metadata `description`). Absent in sidecars written before it existed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
}

/// A table: the data as a polars DataFrame and metadata by column name.
#[derive(Debug, Clone, Default)]
pub struct Table {
    pub frame: DataFrame,
    pub meta: BTreeMap<String, ColumnMeta>,
    /// What reading the file noted for the run's summary (lines skipped, columns widened).
    pub notes: Vec<String>,
    /// Table-level keywords that state the frames of the columns, as the file gives them
    /// (FITS `RADESYS`, `EQUINOX`, `SPECSYS`; a VOTable's COOSYS gives `RADESYS` and
    /// `EQUINOX` too); empty for formats without them.
    pub keywords: BTreeMap<String, String>,
}

impl Table {
    /// A table of these columns and their metadata, with nothing noted.
    pub fn new(frame: DataFrame, meta: BTreeMap<String, ColumnMeta>) -> Table {
        Table {
            frame,
            meta,
            notes: Vec::new(),
            keywords: BTreeMap::new(),
        }
    }
}

pub use provenance::{read_provenance, sidecar_path, FoundProvenance, Provenance};
pub use record::{read_record, RunRecord};

/// What can go wrong at the edges, always naming the file.
#[derive(Debug, Error)]
pub enum CatalogueError {
    #[error("{path}: {message}")]
    Read { path: PathBuf, message: String },
    #[error("{path}: {message}")]
    Write { path: PathBuf, message: String },
}

impl CatalogueError {
    pub fn read(path: &Path, message: impl Into<String>) -> Self {
        CatalogueError::Read {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
    pub fn write(path: &Path, message: impl Into<String>) -> Self {
        CatalogueError::Write {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
}

pub mod delimited;
pub mod parquet;
pub mod partitioned;

/// Catalogue file formats, chosen by extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    Fits,
    Csv,
    Tsv,
    Parquet,
    /// IVOA VOTable 1.4 ([`votable`]).
    VoTable,
    /// Astropy's Enhanced CSV 1.0 ([`ecsv`]).
    Ecsv,
}

/// The file types flowsift reads and writes, for messages.
pub const FORMATS_HINT: &str =
    "use .fits/.fit/.fits.gz, .csv, .tsv, .parquet, .ecsv or .vot/.votable/.xml (VOTable)";

/// Extensions of every format, longest first where one ends another (for names derived
/// from an output's).
pub const EXTENSIONS: [&str; 13] = [
    ".fits.gz", ".fit.gz", ".fits", ".fit", ".fts", ".csv", ".tsv", ".parquet", ".pq", ".ecsv",
    ".votable", ".vot", ".xml",
];

impl Format {
    /// The format a path's extension names: `.fits`, `.fit`, `.fits.gz`, `.fit.gz`, `.csv`,
    /// `.tsv`, `.parquet`, `.ecsv`, `.vot`, `.votable` or `.xml` (a VOTable; an `.xml` file
    /// that is not one is refused when read).
    pub fn from_path(path: &Path) -> Result<Format, CatalogueError> {
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().to_ascii_lowercase())
            .unwrap_or_default();
        let f = if name.ends_with(".fits")
            || name.ends_with(".fit")
            || name.ends_with(".fits.gz")
            || name.ends_with(".fit.gz")
            || name.ends_with(".fts")
        {
            Format::Fits
        } else if name.ends_with(".csv") {
            Format::Csv
        } else if name.ends_with(".tsv") {
            Format::Tsv
        } else if name.ends_with(".parquet") || name.ends_with(".pq") {
            Format::Parquet
        } else if name.ends_with(".ecsv") {
            Format::Ecsv
        } else if name.ends_with(".vot") || name.ends_with(".votable") || name.ends_with(".xml") {
            Format::VoTable
        } else {
            return Err(CatalogueError::read(
                path,
                format!("unknown file type: {FORMATS_HINT}"),
            ));
        };
        Ok(f)
    }
}

/// How to read.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// FITS HDU, by EXTNAME or index; a VOTable's TABLE, by name or number (from 1).
    pub hdu: Option<String>,
}

/// Read a catalogue in any supported format.
pub fn read_table(path: &Path, options: &ReadOptions) -> Result<Table, CatalogueError> {
    if partitioned::is_partitioned(path) {
        return partitioned::read_partitioned(path, options).map(|(t, _)| t);
    }
    if !path.exists() {
        return Err(CatalogueError::read(path, "no such file"));
    }
    match Format::from_path(path)? {
        Format::Fits => contained::read(path, "FITS", || {
            fits::read_fits(path, options.hdu.as_deref())
        }),
        Format::Csv => contained::read(path, "CSV", || delimited::read_delimited(path, b',')),
        Format::Tsv => contained::read(path, "TSV", || delimited::read_delimited(path, b'\t')),
        Format::Parquet => contained::read(path, "Parquet", || parquet::read_parquet(path)),
        Format::VoTable => contained::read(path, "VOTable", || {
            votable::read_votable(path, options.hdu.as_deref())
        }),
        Format::Ecsv => contained::read(path, "ECSV", || ecsv::read_ecsv(path)),
    }
}

/// As [`read_table`], and for a CSV/TSV file also its text when an output can copy the
/// input columns from it ([`delimited::SourceText`]; give it to [`write_table_with_text`]).
pub fn read_table_keeping_text(
    path: &Path,
    options: &ReadOptions,
) -> Result<(Table, Option<delimited::SourceText>), CatalogueError> {
    if !path.exists() {
        return Err(CatalogueError::read(path, "no such file"));
    }
    match Format::from_path(path)? {
        Format::Csv => contained::read(path, "CSV", || {
            delimited::read_delimited_keeping_text(path, b',')
        }),
        Format::Tsv => contained::read(path, "TSV", || {
            delimited::read_delimited_keeping_text(path, b'\t')
        }),
        _ => Ok((read_table(path, options)?, None)),
    }
}

/// How to write.
#[derive(Debug, Clone, Default)]
pub struct WriteOptions {
    /// Replace an existing output.
    pub force: bool,
    /// Paths that must never be written (the inputs).
    pub protected: Vec<PathBuf>,
}

/// The note for a run's summary when an output cannot hold some of the table's columns
/// (see [`storable`]); `None` when it holds them all.
pub fn left_out_note(path: &Path, table: &Table) -> Option<String> {
    let format = Format::from_path(path).ok()?;
    let names = storable::left_out(format, table);
    (!names.is_empty()).then(|| {
        format!(
            "{}: columns its format cannot hold were left out: {}.",
            path.display(),
            names.join(", ")
        )
    })
}

/// Write a table atomically: into a temporary file in the output's folder, then renamed
/// over the destination, so that no reader ever sees a partial file. Refuses to write over
/// an input, or over an existing file without `force`. Files are not forced to disk
/// (no fsync), as for the FITS writer: a machine crash right after a run can lose the new
/// output, which the run (seeded, reproducible) can write again.
pub fn write_table(
    path: &Path,
    table: &Table,
    provenance: &Provenance,
    options: &WriteOptions,
) -> Result<(), CatalogueError> {
    write_table_with_text(path, table, provenance, options, None)
}

/// As [`write_table`]; a CSV/TSV output whose leading columns are those of `text` (the
/// input read by [`read_table_keeping_text`]) copies their cells from the input's lines
/// (see [`delimited::write_delimited_with_text`]). Other formats ignore `text`.
pub fn write_table_with_text(
    path: &Path,
    table: &Table,
    provenance: &Provenance,
    options: &WriteOptions,
    text: Option<&delimited::SourceText>,
) -> Result<(), CatalogueError> {
    let format = Format::from_path(path)
        .map_err(|_| CatalogueError::write(path, format!("unknown output type: {FORMATS_HINT}")))?;
    check_destination(path, options)?;
    let prepared = storable::prepare(format, table).map_err(|e| CatalogueError::write(path, e))?;
    let table = prepared.as_ref().unwrap_or(table);
    match format {
        // cfitsio creates its file by name.
        Format::Fits => atomic::write_via_path(path, |tmp| {
            fits::write_fits(tmp, table, provenance).map_err(|e| match e {
                CatalogueError::Read { message, .. } | CatalogueError::Write { message, .. } => {
                    message
                }
            })
        }),
        Format::Csv | Format::Tsv => {
            let sep = if format == Format::Csv { b',' } else { b'\t' };
            atomic::write_via_file(path, |f| {
                delimited::write_delimited_with_text(f, table, sep, text)
            })?;
            write_json_atomically(
                &sidecar_path(path),
                &provenance::sidecar(table, provenance),
                true,
            )
        }
        Format::Parquet => {
            atomic::write_via_file(path, |f| parquet::write_parquet(f, table, provenance))
        }
        Format::VoTable => {
            atomic::write_via_file(path, |f| votable::write_votable(f, table, provenance))
        }
        Format::Ecsv => atomic::write_via_file(path, |f| ecsv::write_ecsv(f, table, provenance)),
    }
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Refuse an output that is an input, or that exists without `force`.
pub fn check_destination(path: &Path, options: &WriteOptions) -> Result<(), CatalogueError> {
    if options.protected.iter().any(|p| same_file(p, path)) {
        return Err(CatalogueError::write(
            path,
            "refusing to overwrite the input file; choose another output",
        ));
    }
    if path.exists() && !options.force {
        return Err(CatalogueError::write(
            path,
            "output exists; pass --force to replace it",
        ));
    }
    Ok(())
}

/// Write JSON atomically (temporary file and rename); an existing file needs `force`.
pub fn write_json_atomically(
    path: &Path,
    value: &serde_json::Value,
    force: bool,
) -> Result<(), CatalogueError> {
    if path.exists() && !force {
        return Err(CatalogueError::write(
            path,
            "file exists; pass --force to replace it",
        ));
    }
    let mut text = serde_json::to_string_pretty(value)
        .map_err(|e| CatalogueError::write(path, e.to_string()))?;
    text.push('\n');
    atomic::write_bytes(path, text.as_bytes())
}
