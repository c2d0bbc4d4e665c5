//! FITS binary tables: one catalogue HDU in, one catalogue HDU out.
//!
//! Everything goes through the bundled cfitsio (via `fitsio::sys`), reading and writing whole
//! blocks of rows per call, one pass over the file, so a 10⁶-row table takes a fraction of a
//! second. Paths are taken literally: cfitsio's "extended filename syntax" (`file.fits[1]`,
//! `!file.fits`, `mem://`…) is never applied to them.
//!
//! # Reading ([`read_fits`])
//!
//! * Files may be plain (`.fits`, `.fit`, …) or gzip-compressed (`.fits.gz`): cfitsio
//!   recognises compression by content and decompresses into memory.
//! * HDU choice: `None` takes the first binary-table HDU (an empty primary array is skipped);
//!   `Some("3")` (digits only) takes HDU number 3, counting the primary as 0;
//!   `Some("GALAXIES")` takes the first HDU whose `EXTNAME` matches, ignoring case. A miss,
//!   or an HDU that is not a binary table, is an error listing every HDU (number, EXTNAME,
//!   type).
//! * Column types (by cfitsio's *equivalent* type, so `TSCALn`/`TZEROn` are applied):
//!
//!   | FITS                                  | polars    | nulls                          |
//!   |---------------------------------------|-----------|--------------------------------|
//!   | `E`, `D`                              | `Float64` | NaN (±∞ stay values)           |
//!   | integers with non-integer `TSCALn`/`TZEROn` | `Float64` | `TNULLn` (on the stored value) |
//!   | `B`, `I`, `J`, `K` (incl. unsigned)   | `Int64`   | `TNULLn` when the card exists  |
//!   | `L`                                   | `Boolean` | the FITS null byte             |
//!   | `rA`                                  | `String`  | empty after trimming trailing blanks |
//!
//!   Vector columns (repeat > 1, or several strings per cell), bit (`X`), complex (`C`, `M`)
//!   and variable-length (`P`, `Q`) columns are refused with an error naming the column.
//!   Strings must be UTF-8 (ASCII being the usual case); anything else is an error naming the
//!   column and row. A column without `TTYPEn` is called `col<n>`.
//! * `TUNITn` and `TUCDn` go into [`Table::meta`]; only columns with at least one of them get
//!   an entry.
//!
//! # Writing ([`write_fits`])
//!
//! The file must not exist yet. It gets an empty primary HDU and one binary table with
//! `EXTNAME = 'FLOWSIFT'` ([`EXTNAME`]). Column types: `Float64` (and other floats) → `D`,
//! `Float32` → `E` (nulls as NaN); every integer type → `K` (nulls as a `TNULLn` value,
//! `i64::MIN` unless the column holds that value, then another unused one; values outside
//! the `i64` range are an error); `Boolean` → `L` (nulls as the FITS null byte);
//! `String` → `wA` with `w` the longest value in bytes (at least 1); an all-null column of
//! type `Null` → `D` of NaN. Other types (dates, lists, binary, …) are an error naming the
//! column. `TUNITn`/`TUCDn` are written from `meta`. Column names, units and UCDs must be
//! printable ASCII (a FITS header requirement) — names at most 68 characters, without
//! trailing blanks.
//!
//! Round trips are exact except where FITS cannot tell things apart: a NaN in a float column
//! is written like a null (FITS has no other float null) and comes back as null; FITS strings
//! lose trailing blanks and have no empty-but-present value, so `""` or `"  "` comes back as
//! null and `"a  "` as `"a"`; `E` and integer columns come back as `Float64` and `Int64`.
//!
//! If the file name ends in `.gz` (any case) cfitsio builds the file in memory and writes it
//! gzip-compressed when it is closed; such a path must not contain `(` or `[` (cfitsio would
//! parse them), an error says so. Other paths are used exactly as given. All paths must be
//! UTF-8 and shorter than 1024 bytes (cfitsio limits).
//!
//! # Provenance keywords
//!
//! Entry *i* (1-based) of a [`Provenance`] becomes one header card `PROVnnn` in the table
//! HDU whose value is `key: value`, `nnn` being *i* written with at least three digits
//! (`PROV001` … `PROV999`, then `PROV1000` … `PROV9999`; more than 9999 entries is an
//! error). Values longer than one card use the HEASARC long-string convention (`&` and
//! `CONTINUE` cards, announced by `LONGSTRN = 'OGIP 1.0'`), which cfitsio reads back whole.
//! Header text must be printable ASCII, so text is made ASCII by [`crate::catalogue::ascii`]:
//! Greek letters and signs are spelled out from one table (`flat ΛCDM` → `flat LambdaCDM`,
//! `±` → `+/-`), anything else becomes `\uXXXX`; such entries read back in their ASCII
//! form. Entries whose value is JSON (the run record, structured settings) keep every
//! character: non-ASCII characters inside their strings are written as JSON `\uXXXX`
//! escapes, which the reader undoes, so they round-trip exactly. Trailing blanks of a value
//! are lost (FITS strings drop them). Two `COMMENT` cards describe the scheme, and HISTORY
//! cards repeat the short settings as sentences (`flowsift 0.1.0 velocities: cosmology =
//! …`). [`read_fits_provenance`] reads the `PROVnnn` cards in order (it stops at the first
//! missing number); a file without them is read in the earlier layout, `PRVKnnn` (key) and
//! `PRVVnnn` (value) with `%XX` escapes, which is still understood.
//!
//! The code is in four parts: `hdu` (opening a file's HDU list and choosing the table),
//! `read` (column decoding and raw row blocks), `write` (column definitions and row blocks)
//! and `cards` (typed header cards, long strings, provenance cards and their escaping).

use std::os::raw::c_int;
use std::path::Path;

use super::cfitsio::{status_text, FitsHandle};
use super::{CatalogueError, Provenance, Table};

mod cards;
mod hdu;
mod read;
mod write;

use cards::{history_lines, provenance_cards, read_provenance_cards};
use hdu::select_hdu;
use read::{read_table_hdu, read_table_rows};
use write::{prepare_columns, write_table_hdu};

/// `EXTNAME` of the table HDU that [`write_fits`] creates.
pub const EXTNAME: &str = "FLOWSIFT";

/// Most provenance entries [`write_fits`] can store (`PROV9999` is the last 8-character key).
pub const MAX_PROVENANCE_ENTRIES: usize = 9999;

// cfitsio constants, as the C `int`s the functions take.
const IMAGE_HDU: c_int = 0;
const ASCII_TBL: c_int = 1;
const BINARY_TBL: c_int = 2;
const KEY_NO_EXIST: c_int = 202;
const NUM_OVERFLOW: c_int = 412;
const TBIT: c_int = 1;
const TBYTE: c_int = 11;
const TSBYTE: c_int = 12;
const TLOGICAL: c_int = 14;
const TSTRING: c_int = 16;
const TUSHORT: c_int = 20;
const TSHORT: c_int = 21;
const TUINT: c_int = 30;
const TINT: c_int = 31;
const TULONG: c_int = 40;
const TLONG: c_int = 41;
const TFLOAT: c_int = 42;
const TULONGLONG: c_int = 80;
const TLONGLONG: c_int = 81;
const TDOUBLE: c_int = 82;
const TCOMPLEX: c_int = 83;
const TDBLCOMPLEX: c_int = 163;

// ---------------------------------------------------------------------------------------------
// Public API
// ---------------------------------------------------------------------------------------------

/// Read one binary-table HDU of a FITS file (plain or gzip-compressed) into a [`Table`].
///
/// `hdu`: `None` for the first binary table; `Some` EXTNAME (case-insensitive) or HDU number
/// (digits only, primary = 0). See the [module documentation](self) for the type mapping.
pub fn read_fits(path: &Path, hdu: Option<&str>) -> Result<Table, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, m);
    let file = FitsHandle::open(path).map_err(err)?;
    let chosen = select_hdu(&file, hdu).map_err(err)?;
    check_size_against_file(&file, path).map_err(err)?;
    read_table_hdu(&file, &chosen).map_err(err)
}

/// A FITS binary table opened for reading a block of rows at a time (the HDU chosen as
/// [`read_fits`] chooses it, the header checked once); each [`FitsBlocks::read`] reads its
/// rows' bytes only.
pub struct FitsBlocks {
    path: std::path::PathBuf,
    hdu: Option<String>,
    rows: usize,
    columns: usize,
}

impl FitsBlocks {
    pub fn open(path: &Path, hdu: Option<&str>) -> Result<FitsBlocks, CatalogueError> {
        let err = |m: String| CatalogueError::read(path, m);
        let file = FitsHandle::open(path).map_err(err)?;
        select_hdu(&file, hdu).map_err(err)?;
        check_size_against_file(&file, path).map_err(err)?;
        let (columns, rows) = hdu::table_shape(&file)
            .map_err(|s| err(format!("cannot read the table shape: {}", status_text(s))))?;
        Ok(FitsBlocks {
            path: path.to_path_buf(),
            hdu: hdu.map(str::to_string),
            rows,
            columns,
        })
    }

    pub fn rows(&self) -> usize {
        self.rows
    }

    pub fn columns(&self) -> usize {
        self.columns
    }

    /// Rows `start .. start + len`, every column or only those named.
    pub fn read(
        &self,
        start: usize,
        len: usize,
        only: Option<&[String]>,
    ) -> Result<Table, CatalogueError> {
        let err = |m: String| CatalogueError::read(&self.path, m);
        let file = FitsHandle::open(&self.path).map_err(err)?;
        let chosen = select_hdu(&file, self.hdu.as_deref()).map_err(err)?;
        read_table_rows(&file, &chosen, start, len, only).map_err(err)
    }
}

/// The table's size from its header (NAXIS1 bytes per row × NAXIS2 rows) must fit in the
/// file before anything is allocated for it: a damaged header must not ask for terabytes.
/// A gzip-compressed file may hold up to about 1032 times its size (deflate's largest ratio;
/// from memory), so it is allowed 1100 times.
fn check_size_against_file(file: &FitsHandle, path: &Path) -> Result<(), String> {
    let card = |k: &str| -> Result<u64, String> {
        file.key_text(k)
            .map_err(|s| format!("cannot read keyword {k}: {}", status_text(s)))?
            .and_then(|v| v.trim().parse::<u64>().ok())
            .ok_or_else(|| format!("the table header has no valid {k}: the header is damaged"))
    };
    let (row_bytes, rows) = (card("NAXIS1")?, card("NAXIS2")?);
    let len = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    let compressed = path
        .file_name()
        .map(|n| n.to_string_lossy().to_ascii_lowercase().ends_with(".gz"))
        .unwrap_or(false);
    let limit = if compressed {
        len.saturating_mul(1100)
    } else {
        len
    };
    match row_bytes.checked_mul(rows) {
        Some(b) if b <= limit => Ok(()),
        _ => Err(format!(
            "the table header says {rows} rows of {row_bytes} bytes, more than the file's {len} bytes can hold: the header is damaged (NAXIS1/NAXIS2)"
        )),
    }
}

/// Read the provenance entries that [`write_fits`] stored (`PROVnnn` cards, or the earlier
/// `PRVKnnn`/`PRVVnnn` pairs) from the
/// HDU `hdu` selects (same rules as [`read_fits`]). A table without such cards gives an empty
/// [`Provenance`].
pub fn read_fits_provenance(path: &Path, hdu: Option<&str>) -> Result<Provenance, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, m);
    let file = FitsHandle::open(path).map_err(err)?;
    let chosen = select_hdu(&file, hdu).map_err(err)?;
    read_provenance_cards(&file, &chosen).map_err(err)
}

/// Write `table` as a new FITS file at `path` (which must not exist): an empty primary HDU and
/// one binary table, `EXTNAME = 'FLOWSIFT'`, with `TUNITn`/`TUCDn` from `table.meta` and the
/// provenance as `PROVnnn` cards and HISTORY lines. A name ending in `.gz` gives a gzip-compressed
/// file. On error nothing is left at `path`.
pub fn write_fits(
    path: &Path,
    table: &Table,
    provenance: &Provenance,
) -> Result<(), CatalogueError> {
    let err = |m: String| CatalogueError::write(path, m);
    if path.symlink_metadata().is_ok() {
        return Err(err(
            "already exists; the FITS writer only creates new files".to_string(),
        ));
    }
    // Everything that can be refused is checked before the file is created.
    let columns = prepare_columns(table).map_err(err)?;
    let cards = provenance_cards(provenance).map_err(err)?;
    let history = history_lines(provenance);
    let compress = path
        .file_name()
        .map(|n| n.to_string_lossy().to_ascii_lowercase().ends_with(".gz"))
        .unwrap_or(false);

    let file = FitsHandle::create(path, compress).map_err(err)?;
    let result =
        write_table_hdu(&file, table.frame.height(), &columns, &cards, &history).and_then(|()| {
            file.close()
                .map_err(|s| format!("cannot finish writing the file: {}", status_text(s)))
        });
    if let Err(message) = result {
        // A failed close has already released the handle; otherwise dropping it closes it.
        let _ = std::fs::remove_file(path);
        return Err(err(message));
    }
    Ok(())
}
