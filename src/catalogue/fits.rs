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
//! Entry *i* (1-based) of a [`Provenance`] becomes two header cards in the table HDU:
//! `PRVKnnn` holding the key and `PRVVnnn` holding the value, `nnn` being *i* written with at
//! least three digits (`PRVK001` … `PRVK999`, then `PRVK1000` … `PRVK9999`; more than 9999
//! entries is an error). Values longer than one card use the HEASARC long-string convention
//! (`&` and `CONTINUE` cards, announced by `LONGSTRN = 'OGIP 1.0'`), which cfitsio reads back
//! whole. Because header text must be printable ASCII and loses trailing blanks, keys and
//! values are escaped: `%`, every byte outside 0x20–0x7E (so UTF-8 text too) and trailing
//! blanks are written `%XX` (upper-case hex of the UTF-8 byte). Two `COMMENT` cards in the
//! header describe the scheme. [`read_fits_provenance`] reads the pairs back in order (it
//! stops at the first missing `PRVKnnn`) and undoes the escaping, so entries round-trip
//! exactly.

use std::collections::HashSet;
use std::ffi::{CStr, CString};
use std::os::raw::{c_char, c_int, c_long};
use std::path::Path;
use std::ptr;

use fitsio::sys;
use polars::prelude::*;
use rayon::prelude::*;

use super::cfitsio::{ok, status_text, FitsHandle};
use super::{CatalogueError, ColumnMeta, Provenance, Table};

/// `EXTNAME` of the table HDU that [`write_fits`] creates.
pub const EXTNAME: &str = "FLOWSIFT";

/// Most provenance entries [`write_fits`] can store (`PRVK9999` is the last 8-character key).
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
/// Rows per block when cfitsio cannot suggest a number.
const FALLBACK_BLOCK_ROWS: usize = 10_000;

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
    read_table_hdu(&file, &chosen).map_err(err)
}

/// Read the provenance entries that [`write_fits`] stored (`PRVKnnn`/`PRVVnnn` cards) from the
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
/// provenance as `PRVKnnn`/`PRVVnnn` cards. A name ending in `.gz` gives a gzip-compressed
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
    let compress = path
        .file_name()
        .map(|n| n.to_string_lossy().to_ascii_lowercase().ends_with(".gz"))
        .unwrap_or(false);

    let file = FitsHandle::create(path, compress).map_err(err)?;
    let result = write_table_hdu(&file, table.frame.height(), &columns, &cards).and_then(|()| {
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

// ---------------------------------------------------------------------------------------------
// Header and table calls on the shared cfitsio handle
// ---------------------------------------------------------------------------------------------

impl FitsHandle {
    /// Close, reporting the status of the final flush.
    /// Move to HDU `index` (0 = primary); returns the HDU type.
    /// A keyword's value as text (long-string convention understood), `None` if absent.
    fn key_text(&self, key: &str) -> Result<Option<String>, c_int> {
        let c_key = CString::new(key).expect("keyword names have no NUL");
        let mut value: *mut c_char = ptr::null_mut();
        let mut status = 0;
        // SAFETY: open handle; cfitsio allocates `value`, freed below with fffree.
        unsafe {
            sys::ffgkls(
                self.raw(),
                c_key.as_ptr(),
                &mut value,
                ptr::null_mut(),
                &mut status,
            )
        };
        let text = if value.is_null() {
            None
        } else {
            // SAFETY: cfitsio returns a NUL-terminated string it allocated.
            let text = unsafe { CStr::from_ptr(value) }.to_bytes().to_vec();
            let mut free_status = 0;
            unsafe { sys::fffree(value as *mut _, &mut free_status) };
            Some(text)
        };
        match status {
            0 => Ok(text.map(|t| String::from_utf8_lossy(&t).into_owned())),
            KEY_NO_EXIST => Ok(None),
            s => Err(s),
        }
    }

    fn write_key_text(&self, key: &str, value: &str, comment: Option<&str>) -> Result<(), c_int> {
        let c_key = CString::new(key).expect("keyword names have no NUL");
        // Callers pass printable ASCII only.
        let c_value = CString::new(value).expect("checked header text has no NUL");
        let c_comment = comment.map(|c| CString::new(c).expect("comments have no NUL"));
        let mut status = 0;
        // SAFETY: open handle, valid C strings (comment may be NULL).
        unsafe {
            sys::ffpkls(
                self.raw(),
                c_key.as_ptr(),
                c_value.as_ptr(),
                c_comment.as_ref().map_or(ptr::null(), |c| c.as_ptr()),
                &mut status,
            )
        };
        ok(status)
    }

    /// Rows per block that cfitsio's buffers hold for the current table.
    fn block_rows(&self) -> usize {
        let mut rows: c_long = 0;
        let mut status = 0;
        // SAFETY: open handle positioned on a table.
        unsafe { sys::ffgrsz(self.raw(), &mut rows, &mut status) };
        if status == 0 && rows > 0 {
            rows as usize
        } else {
            FALLBACK_BLOCK_ROWS
        }
    }
}

// ---------------------------------------------------------------------------------------------
// HDUs
// ---------------------------------------------------------------------------------------------

/// What the HDU listing in error messages shows about one HDU.
struct HduSummary {
    index: usize,
    hdu_type: c_int,
    extname: Option<String>,
    what: String,
}

impl HduSummary {
    /// "HDU 2 (EXTNAME 'GALAXIES')", for messages about this HDU.
    fn label(&self) -> String {
        match (&self.extname, self.index) {
            (None, 0) => "HDU 0 (primary)".to_string(),
            (Some(name), 0) => format!("HDU 0 (primary, EXTNAME '{name}')"),
            (Some(name), i) => format!("HDU {i} (EXTNAME '{name}')"),
            (None, i) => format!("HDU {i}"),
        }
    }

    fn line(&self) -> String {
        let name = match &self.extname {
            Some(name) => format!("EXTNAME '{name}'"),
            None => "no EXTNAME".to_string(),
        };
        format!("{}: {}, {}", self.index, name, self.what)
    }
}

fn list_hdus(file: &FitsHandle) -> Result<Vec<HduSummary>, String> {
    let mut count: c_int = 0;
    let mut status = 0;
    // SAFETY: open handle.
    unsafe { sys::ffthdu(file.raw(), &mut count, &mut status) };
    if status != 0 {
        return Err(format!("cannot count the HDUs: {}", status_text(status)));
    }
    let mut out = Vec::with_capacity(count.max(0) as usize);
    for index in 0..count.max(0) as usize {
        let hdu_type = file
            .move_to(index)
            .map_err(|s| format!("cannot read HDU {index}: {}", status_text(s)))?;
        let extname = file
            .key_text("EXTNAME")
            .map_err(|s| format!("cannot read HDU {index}: {}", status_text(s)))?
            .map(|n| n.trim().to_string())
            .filter(|n| !n.is_empty());
        let what = match hdu_type {
            IMAGE_HDU => describe_image(file),
            ASCII_TBL => format!("ASCII table ({})", describe_table(file)),
            BINARY_TBL => format!("binary table ({})", describe_table(file)),
            other => format!("HDU of unknown type {other}"),
        };
        out.push(HduSummary {
            index,
            hdu_type,
            extname,
            what,
        });
    }
    Ok(out)
}

fn describe_image(file: &FitsHandle) -> String {
    let mut naxis: c_int = 0;
    let mut status = 0;
    // SAFETY: open handle on an image HDU.
    unsafe { sys::ffgidm(file.raw(), &mut naxis, &mut status) };
    if status != 0 || naxis <= 0 {
        return "empty image".to_string();
    }
    let mut sizes = vec![0i64; naxis as usize];
    // SAFETY: `sizes` holds `naxis` elements.
    unsafe { sys::ffgiszll(file.raw(), naxis, sizes.as_mut_ptr(), &mut status) };
    if status != 0 {
        return "image".to_string();
    }
    let dims: Vec<String> = sizes.iter().map(|s| s.to_string()).collect();
    format!("image {}", dims.join("×"))
}

fn describe_table(file: &FitsHandle) -> String {
    let (ncols, nrows) = table_shape(file).unwrap_or((0, 0));
    format!("{ncols} columns, {nrows} rows")
}

fn table_shape(file: &FitsHandle) -> Result<(usize, usize), c_int> {
    let mut ncols: c_int = 0;
    let mut nrows: i64 = 0;
    let mut status = 0;
    // SAFETY: open handle on a table HDU.
    unsafe {
        sys::ffgncl(file.raw(), &mut ncols, &mut status);
        sys::ffgnrwll(file.raw(), &mut nrows, &mut status);
    }
    ok(status).map(|()| (ncols.max(0) as usize, nrows.max(0) as usize))
}

fn hdu_listing(hdus: &[HduSummary]) -> String {
    let lines: Vec<String> = hdus.iter().map(|h| format!("\n  {}", h.line())).collect();
    format!("HDUs in this file:{}", lines.concat())
}

/// Choose the HDU, leaving the handle positioned on it.
fn select_hdu(file: &FitsHandle, hdu: Option<&str>) -> Result<HduSummary, String> {
    let hdus = list_hdus(file)?;
    let index = match hdu.map(str::trim) {
        None => match hdus.iter().find(|h| h.hdu_type == BINARY_TBL) {
            Some(h) => h.index,
            None => return Err(format!("no binary-table HDU; {}", hdu_listing(&hdus))),
        },
        Some(spec) if !spec.is_empty() && spec.bytes().all(|b| b.is_ascii_digit()) => {
            match spec.parse::<usize>().ok().filter(|&i| i < hdus.len()) {
                Some(i) => i,
                None => {
                    return Err(format!(
                        "no HDU number {spec} (HDUs are numbered from 0, the primary); {}",
                        hdu_listing(&hdus)
                    ))
                }
            }
        }
        Some(spec) => match hdus.iter().find(|h| {
            h.extname
                .as_deref()
                .is_some_and(|n| n.eq_ignore_ascii_case(spec))
        }) {
            Some(h) => h.index,
            None => {
                return Err(format!(
                    "no HDU with EXTNAME '{spec}' (give an EXTNAME or an HDU number); {}",
                    hdu_listing(&hdus)
                ))
            }
        },
    };
    let chosen = &hdus[index];
    if chosen.hdu_type != BINARY_TBL {
        return Err(format!(
            "{} is an {}, not a binary table; {}",
            chosen.label(),
            chosen.what,
            hdu_listing(&hdus)
        ));
    }
    file.move_to(index)
        .map_err(|s| format!("cannot read {}: {}", chosen.label(), status_text(s)))?;
    let mut hdus = hdus;
    Ok(hdus.swap_remove(index))
}

// ---------------------------------------------------------------------------------------------
// Reading
// ---------------------------------------------------------------------------------------------

/// How a column's cells are read.
enum ReadKind {
    /// Stored as floats (NaN marks nulls; ±∞ are values), or as scaled integers (`TNULLn`
    /// marks nulls) when `scaled_integers`.
    Float {
        scaled_integers: bool,
    },
    Int,
    Bool,
    /// A string of at most `width` bytes per cell.
    Str {
        width: usize,
    },
    /// `repeat` = 0: no data; a column of nulls of this type.
    Empty(DataType),
}

struct ReadColumn {
    number: c_int,
    name: String,
    kind: ReadKind,
    /// Byte offset in the row and cell type, for a column decoded straight from the raw
    /// row bytes (no scaling, no null value, one element); `None`: read through cfitsio.
    direct: Option<(usize, Direct)>,
}

/// Cell types decoded from raw row bytes (FITS Standard 4.0 §7.3.3: big-endian two's
/// complement integers and IEEE 754 floats; 'T'/'F'/0 logicals; blank-padded text).
#[derive(Clone, Copy, Debug, PartialEq)]
enum Direct {
    F64,
    F32,
    U8,
    I16,
    I32,
    I64,
    Bool,
    Str(usize),
}

/// The repeat count and type letter of a binary-table TFORMn value (`rTa`).
fn parse_tform(tform: &str) -> Option<(usize, char)> {
    let t = tform.trim();
    let digits = t.bytes().take_while(u8::is_ascii_digit).count();
    let repeat = if digits == 0 {
        1
    } else {
        t[..digits].parse().ok()?
    };
    let letter = t[digits..].chars().next()?.to_ascii_uppercase();
    Some((repeat, letter))
}

/// Bytes of one cell of a binary-table column (FITS Standard 4.0 Table 18).
fn tform_bytes(repeat: usize, letter: char) -> Option<usize> {
    Some(match letter {
        'L' | 'B' | 'A' => repeat,
        'X' => repeat.div_ceil(8),
        'I' => 2 * repeat,
        'J' | 'E' => 4 * repeat,
        'K' | 'D' | 'C' => 8 * repeat,
        'M' => 16 * repeat,
        'P' => 8 * repeat,
        'Q' => 16 * repeat,
        _ => return None,
    })
}

/// The direct decoding of a column, if its cells need neither scaling nor null values.
fn direct_kind(kind: &ReadKind, repeat: usize, letter: char, plain: bool) -> Option<Direct> {
    if !plain {
        return None;
    }
    match (kind, letter) {
        (
            ReadKind::Float {
                scaled_integers: false,
            },
            'D',
        ) if repeat == 1 => Some(Direct::F64),
        (
            ReadKind::Float {
                scaled_integers: false,
            },
            'E',
        ) if repeat == 1 => Some(Direct::F32),
        (ReadKind::Int, 'B') if repeat == 1 => Some(Direct::U8),
        (ReadKind::Int, 'I') if repeat == 1 => Some(Direct::I16),
        (ReadKind::Int, 'J') if repeat == 1 => Some(Direct::I32),
        (ReadKind::Int, 'K') if repeat == 1 => Some(Direct::I64),
        (ReadKind::Bool, 'L') if repeat == 1 => Some(Direct::Bool),
        (ReadKind::Str { width }, 'A') if *width == repeat => Some(Direct::Str(repeat)),
        _ => None,
    }
}

/// Decode rows `start..start + n` of a direct column from `raw` (n rows of `row_bytes`).
fn decode_direct(
    buffer: &mut ReadBuffer,
    (offset, direct): (usize, Direct),
    raw: &[u8],
    row_bytes: usize,
    start: usize,
    n: usize,
) -> Result<(), usize> {
    let rows = raw.chunks_exact(row_bytes).take(n);
    fn be<const W: usize>(row: &[u8], offset: usize) -> [u8; W] {
        row[offset..offset + W].try_into().expect("cell width")
    }
    match (buffer, direct) {
        (ReadBuffer::Float { values, .. }, Direct::F64) => {
            for (v, row) in values[start..start + n].iter_mut().zip(rows) {
                *v = f64::from_be_bytes(be(row, offset));
            }
        }
        (ReadBuffer::Float { values, .. }, Direct::F32) => {
            for (v, row) in values[start..start + n].iter_mut().zip(rows) {
                *v = f32::from_be_bytes(be(row, offset)) as f64;
            }
        }
        (ReadBuffer::Int { values, .. }, d) => {
            for (v, row) in values[start..start + n].iter_mut().zip(rows) {
                *v = match d {
                    Direct::U8 => row[offset] as i64,
                    Direct::I16 => i16::from_be_bytes(be(row, offset)) as i64,
                    Direct::I32 => i32::from_be_bytes(be(row, offset)) as i64,
                    _ => i64::from_be_bytes(be(row, offset)),
                };
            }
        }
        // As cfitsio: 'T' true, 'F' false, 0 null, any other byte true.
        (ReadBuffer::Bool { values, nulls }, _) => {
            for ((v, z), row) in values[start..start + n]
                .iter_mut()
                .zip(&mut nulls[start..start + n])
                .zip(rows)
            {
                let b = row[offset];
                *v = (b != b'F' && b != 0) as c_char;
                *z = (b == 0) as c_char;
            }
        }
        // As cfitsio: the text ends at the first NUL; trailing blanks are dropped; empty
        // text is a null.
        (ReadBuffer::Str { builder, .. }, Direct::Str(width)) => {
            for (i, row) in rows.enumerate() {
                let cell = &row[offset..offset + width];
                let end = cell.iter().position(|&b| b == 0).unwrap_or(width);
                let mut bytes = &cell[..end];
                while let [rest @ .., b' '] = bytes {
                    bytes = rest;
                }
                if bytes.is_empty() {
                    builder.append_null();
                } else {
                    match std::str::from_utf8(bytes) {
                        Ok(text) => builder.append_value(text),
                        Err(_) => return Err(start + i),
                    }
                }
            }
        }
        _ => unreachable!("direct kinds match their buffers"),
    }
    Ok(())
}

/// Per-column storage filled block by block.
enum ReadBuffer {
    /// `nulls` is empty unless the column is stored as scaled integers.
    Float {
        values: Vec<f64>,
        nulls: Vec<c_char>,
    },
    Int {
        values: Vec<i64>,
        nulls: Vec<c_char>,
    },
    Bool {
        values: Vec<c_char>,
        nulls: Vec<c_char>,
    },
    Str {
        width: usize,
        scratch: Vec<u8>,
        builder: StringChunkedBuilder,
    },
    Empty,
}

fn read_table_hdu(file: &FitsHandle, hdu: &HduSummary) -> Result<Table, String> {
    let here = hdu.label();
    let (ncols, nrows) = table_shape(file)
        .map_err(|s| format!("{here}: cannot read the table shape: {}", status_text(s)))?;
    let key = |k: &str| {
        file.key_text(k)
            .map_err(|s| format!("{here}: cannot read keyword {k}: {}", status_text(s)))
    };

    let mut columns = Vec::with_capacity(ncols);
    let mut layout = Vec::with_capacity(ncols);
    let mut meta = std::collections::BTreeMap::new();
    let mut seen = HashSet::new();
    for i in 0..ncols {
        let number = (i + 1) as c_int;
        let name = key(&format!("TTYPE{number}"))?
            .map(|n| n.trim_end().to_string())
            .filter(|n| !n.is_empty())
            .unwrap_or_else(|| format!("col{number}"));
        if !seen.insert(name.clone()) {
            return Err(format!(
                "{here}: two columns are named '{name}'; column names must be unique"
            ));
        }
        let tform = key(&format!("TFORM{number}"))?.unwrap_or_default();
        let kind = column_kind(file, number)
            .map_err(|s| format!("{here}: column '{name}': {}", status_text(s)))
            .and_then(|k| {
                k.map_err(|why| format!("{here}: {why}", why = why.describe(&name, &tform)))
            })?;
        let text = |k: String| -> Result<Option<String>, String> {
            Ok(key(&k)?
                .map(|v| v.trim().to_string())
                .filter(|v| !v.is_empty()))
        };
        let unit = text(format!("TUNIT{number}"))?;
        let ucd = text(format!("TUCD{number}"))?;
        if unit.is_some() || ucd.is_some() {
            meta.insert(name.clone(), ColumnMeta { unit, ucd });
        }
        // Raw-byte decoding needs the cell's place in the row, and no scaling or null value.
        let plain = ["TSCAL", "TZERO", "TNULL"]
            .iter()
            .map(|k| key(&format!("{k}{number}")))
            .collect::<Result<Vec<_>, _>>()?
            .iter()
            .all(Option::is_none);
        let cell = parse_tform(&tform).and_then(|(r, t)| Some((tform_bytes(r, t)?, r, t)));
        let direct = cell.and_then(|(_, r, t)| direct_kind(&kind, r, t, plain));
        layout.push(cell.map(|(bytes, _, _)| bytes));
        columns.push(ReadColumn {
            number,
            name,
            kind,
            direct: direct.map(|d| (0, d)),
        });
    }
    // Offsets from the cell widths; if they do not add up to the row length (NAXIS1),
    // every column goes through cfitsio.
    let row_bytes: Option<usize> = key("NAXIS1")?.and_then(|v| v.trim().parse().ok());
    let widths: Option<Vec<usize>> = layout.into_iter().collect();
    match (row_bytes, widths) {
        (Some(rb), Some(w)) if w.iter().sum::<usize>() == rb && rb > 0 => {
            let mut offset = 0;
            for (c, width) in columns.iter_mut().zip(w) {
                if let Some((o, _)) = &mut c.direct {
                    *o = offset;
                }
                offset += width;
            }
        }
        _ => columns.iter_mut().for_each(|c| c.direct = None),
    }
    let row_bytes = row_bytes.unwrap_or(0);
    let any_direct = columns.iter().any(|c| c.direct.is_some());

    let mut buffers: Vec<ReadBuffer> = columns
        .iter()
        .map(|c| match &c.kind {
            ReadKind::Float { scaled_integers } => ReadBuffer::Float {
                values: vec![0.0; nrows],
                nulls: if *scaled_integers {
                    vec![0; nrows]
                } else {
                    Vec::new()
                },
            },
            ReadKind::Int => ReadBuffer::Int {
                values: vec![0; nrows],
                nulls: vec![0; nrows],
            },
            ReadKind::Bool => ReadBuffer::Bool {
                values: vec![0; nrows],
                nulls: vec![0; nrows],
            },
            ReadKind::Str { width } => ReadBuffer::Str {
                width: *width,
                scratch: Vec::new(),
                builder: StringChunkedBuilder::new(c.name.as_str().into(), nrows),
            },
            ReadKind::Empty(_) => ReadBuffer::Empty,
        })
        .collect();

    // One pass over the file: a block of rows at a time, every column of that block. Plain
    // columns are decoded (in parallel) from the block's raw bytes, read in one call; the
    // others go through cfitsio's conversions.
    let block = if any_direct {
        ((8 << 20) / row_bytes.max(1)).max(1)
    } else {
        file.block_rows().max(1)
    };
    let fptr = file.raw();
    let mut raw: Vec<u8> = Vec::new();
    let mut start = 0;
    while start < nrows {
        let n = block.min(nrows - start);
        if any_direct {
            raw.clear();
            raw.resize(n * row_bytes, 0);
            let mut status = 0;
            // SAFETY: open handle on this table; `raw` holds exactly n rows of NAXIS1 bytes.
            unsafe {
                sys::ffgtbb(
                    fptr,
                    (start + 1) as i64,
                    1,
                    (n * row_bytes) as i64,
                    raw.as_mut_ptr(),
                    &mut status,
                )
            };
            ok(status).map_err(|s| {
                format!(
                    "{here}: cannot read rows {}–{}: {}",
                    start + 1,
                    start + n,
                    status_text(s)
                )
            })?;
            let bad = columns
                .par_iter()
                .zip(buffers.par_iter_mut())
                .filter_map(|(c, b)| c.direct.map(|d| (c, b, d)))
                .map(|(c, b, d)| {
                    decode_direct(b, d, &raw, row_bytes, start, n).map_err(|row| (c, row))
                })
                .find_first(Result::is_err);
            if let Some(Err((column, row))) = bad {
                return Err(format!(
                    "{here}: column '{}', row {}: the string is not valid UTF-8 (or ASCII) text",
                    column.name,
                    row + 1
                ));
            }
        }
        for (column, buffer) in columns.iter().zip(buffers.iter_mut()) {
            if column.direct.is_some() {
                continue;
            }
            let mut status = 0;
            let mut anynul: c_int = 0;
            let first_row = (start + 1) as i64;
            let col = column.number;
            // SAFETY (all arms): open handle on this table; each destination holds at least
            // `n` elements from `start` (string scratch: n cells of width + 1 bytes).
            match buffer {
                // cfitsio's own null check would also turn ±∞ into nulls, so stored floats
                // are read unchecked (null value 0) and NaN is looked for afterwards.
                ReadBuffer::Float { values, nulls } if nulls.is_empty() => unsafe {
                    sys::ffgcvd(
                        fptr,
                        col,
                        first_row,
                        1,
                        n as i64,
                        0.0,
                        values[start..].as_mut_ptr(),
                        &mut anynul,
                        &mut status,
                    );
                },
                ReadBuffer::Float { values, nulls } => unsafe {
                    sys::ffgcfd(
                        fptr,
                        col,
                        first_row,
                        1,
                        n as i64,
                        values[start..].as_mut_ptr(),
                        nulls[start..].as_mut_ptr(),
                        &mut anynul,
                        &mut status,
                    );
                },
                ReadBuffer::Int { values, nulls } => unsafe {
                    sys::ffgcfjj(
                        fptr,
                        col,
                        first_row,
                        1,
                        n as i64,
                        values[start..].as_mut_ptr(),
                        nulls[start..].as_mut_ptr(),
                        &mut anynul,
                        &mut status,
                    );
                },
                ReadBuffer::Bool { values, nulls } => unsafe {
                    sys::ffgcfl(
                        fptr,
                        col,
                        first_row,
                        1,
                        n as i64,
                        values[start..].as_mut_ptr(),
                        nulls[start..].as_mut_ptr(),
                        &mut anynul,
                        &mut status,
                    );
                },
                ReadBuffer::Str {
                    width,
                    scratch,
                    builder,
                } => {
                    let stride = *width + 1;
                    scratch.clear();
                    scratch.resize(n * stride, 0);
                    let base = scratch.as_mut_ptr();
                    // SAFETY: each pointer addresses its own `stride` bytes inside `scratch`.
                    let mut cells: Vec<*mut c_char> = (0..n)
                        .map(|i| unsafe { base.add(i * stride) } as *mut c_char)
                        .collect();
                    let mut empty = [0 as c_char; 1];
                    unsafe {
                        sys::ffgcvs(
                            fptr,
                            col,
                            first_row,
                            1,
                            n as i64,
                            empty.as_mut_ptr(),
                            cells.as_mut_ptr(),
                            &mut anynul,
                            &mut status,
                        );
                    }
                    if status == 0 {
                        for (i, cell) in scratch.chunks_exact(stride).enumerate() {
                            let end = cell.iter().position(|&b| b == 0).unwrap_or(cell.len());
                            let mut bytes = &cell[..end];
                            while let [rest @ .., b' '] = bytes {
                                bytes = rest;
                            }
                            if bytes.is_empty() {
                                builder.append_null();
                                continue;
                            }
                            match std::str::from_utf8(bytes) {
                                Ok(s) => builder.append_value(s),
                                Err(_) => {
                                    return Err(format!(
                                        "{here}: column '{}', row {}: the string is not valid \
                                         UTF-8 (or ASCII) text",
                                        column.name,
                                        start + i + 1
                                    ))
                                }
                            }
                        }
                    }
                }
                ReadBuffer::Empty => {}
            }
            if status != 0 {
                let why = if status == NUM_OVERFLOW {
                    "values do not fit in a 64-bit signed integer".to_string()
                } else {
                    status_text(status)
                };
                return Err(format!(
                    "{here}: column '{}': cannot read rows {}–{}: {why}",
                    column.name,
                    start + 1,
                    start + n
                ));
            }
        }
        start += n;
    }

    let frame_columns: Vec<Column> = columns
        .into_iter()
        .zip(buffers)
        .map(|(column, buffer)| finish_column(column, buffer, nrows))
        .collect();
    let frame = DataFrame::new(nrows, frame_columns)
        .map_err(|e| format!("{here}: cannot assemble the table: {e}"))?;
    Ok(Table { frame, meta })
}

fn finish_column(column: ReadColumn, buffer: ReadBuffer, nrows: usize) -> Column {
    let name: PlSmallStr = column.name.as_str().into();
    match buffer {
        ReadBuffer::Float { values, nulls } => {
            if !nulls.is_empty() && nulls.iter().any(|&f| f != 0) {
                let cells = values
                    .iter()
                    .zip(&nulls)
                    .map(|(&v, &f)| (f == 0 && !v.is_nan()).then_some(v));
                Float64Chunked::from_iter_options(name, cells).into_column()
            } else if values.iter().any(|v| v.is_nan()) {
                let cells = values.iter().map(|&v| (!v.is_nan()).then_some(v));
                Float64Chunked::from_iter_options(name, cells).into_column()
            } else {
                Float64Chunked::from_vec(name, values).into_column()
            }
        }
        ReadBuffer::Int { values, nulls } => {
            if nulls.iter().any(|&f| f != 0) {
                let cells = values
                    .iter()
                    .zip(&nulls)
                    .map(|(&v, &f)| (f == 0).then_some(v));
                Int64Chunked::from_iter_options(name, cells).into_column()
            } else {
                Int64Chunked::from_vec(name, values).into_column()
            }
        }
        ReadBuffer::Bool { values, nulls } => {
            let cells = values
                .iter()
                .zip(&nulls)
                .map(|(&v, &f)| (f == 0).then_some(v != 0));
            BooleanChunked::from_iter_options(name, cells).into_column()
        }
        ReadBuffer::Str { builder, .. } => builder.finish().into_column(),
        ReadBuffer::Empty => {
            let dtype = match column.kind {
                ReadKind::Empty(dtype) => dtype,
                _ => DataType::Float64,
            };
            Column::full_null(name, nrows, &dtype)
        }
    }
}

/// Why a column cannot be read.
enum Unsupported {
    Vector { repeat: i64 },
    StringVector { count: i64, width: i64 },
    Type(&'static str),
}

impl Unsupported {
    fn describe(&self, name: &str, tform: &str) -> String {
        let tform = tform.trim();
        match self {
            Unsupported::Vector { repeat } => format!(
                "vector column '{name}' (repeat {repeat}, TFORM '{tform}') is not supported; \
                 flowsift reads one value per cell — split it into scalar columns first"
            ),
            Unsupported::StringVector { count, width } => format!(
                "vector column '{name}' (repeat {count} strings of {width} characters, TFORM \
                 '{tform}') is not supported; flowsift reads one value per cell — split it \
                 into scalar columns first"
            ),
            Unsupported::Type(what) => format!(
                "column '{name}' (TFORM '{tform}') holds {what}, which is not supported; \
                 supported are E, D, B, I, J, K, L and A columns with one value per cell"
            ),
        }
    }
}

/// Classify column `number` by cfitsio's equivalent type (after TSCAL/TZERO).
fn column_kind(file: &FitsHandle, number: c_int) -> Result<Result<ReadKind, Unsupported>, c_int> {
    let mut typecode: c_int = 0;
    let mut repeat: i64 = 0;
    let mut width: i64 = 0;
    let mut status = 0;
    // SAFETY: open handle on a binary table; valid out-pointers.
    unsafe {
        sys::ffeqtyll(
            file.raw(),
            number,
            &mut typecode,
            &mut repeat,
            &mut width,
            &mut status,
        )
    };
    ok(status)?;
    if typecode < 0 {
        return Ok(Err(Unsupported::Type("variable-length arrays")));
    }
    let scalar = match typecode {
        TFLOAT | TDOUBLE => {
            let mut stored: c_int = 0;
            // SAFETY: as above; only the stored type code is wanted.
            unsafe {
                sys::ffgtclll(
                    file.raw(),
                    number,
                    &mut stored,
                    ptr::null_mut(),
                    ptr::null_mut(),
                    &mut status,
                )
            };
            ok(status)?;
            let scaled_integers = !matches!(stored, TFLOAT | TDOUBLE);
            (ReadKind::Float { scaled_integers }, DataType::Float64)
        }
        TBYTE | TSBYTE | TUSHORT | TSHORT | TUINT | TINT | TULONG | TLONG | TLONGLONG
        | TULONGLONG => (ReadKind::Int, DataType::Int64),
        TLOGICAL => (ReadKind::Bool, DataType::Boolean),
        TSTRING => {
            if repeat == 0 {
                return Ok(Ok(ReadKind::Empty(DataType::String)));
            }
            if width > 0 && repeat > width {
                return Ok(Err(Unsupported::StringVector {
                    count: repeat / width,
                    width,
                }));
            }
            return Ok(Ok(ReadKind::Str {
                width: repeat as usize,
            }));
        }
        TBIT => return Ok(Err(Unsupported::Type("bits"))),
        TCOMPLEX | TDBLCOMPLEX => return Ok(Err(Unsupported::Type("complex numbers"))),
        _ => return Ok(Err(Unsupported::Type("an unknown data type"))),
    };
    Ok(match repeat {
        0 => Ok(ReadKind::Empty(scalar.1)),
        1 => Ok(scalar.0),
        _ => Err(Unsupported::Vector { repeat }),
    })
}

fn read_provenance_cards(file: &FitsHandle, hdu: &HduSummary) -> Result<Provenance, String> {
    let here = hdu.label();
    let mut entries = Vec::new();
    for i in 1..=MAX_PROVENANCE_ENTRIES {
        let (key_card, value_card) = provenance_keywords(i);
        let read = |card: &str| {
            file.key_text(card)
                .map_err(|s| format!("{here}: cannot read keyword {card}: {}", status_text(s)))
        };
        let Some(key) = read(&key_card)? else { break };
        let value = read(&value_card)?
            .ok_or_else(|| format!("{here}: keyword {key_card} has no matching {value_card}"))?;
        let decode = |card: &str, text: &str| {
            unescape(text).ok_or_else(|| {
                format!("{here}: keyword {card}: the %-escaped text does not decode to UTF-8")
            })
        };
        entries.push((decode(&key_card, &key)?, decode(&value_card, &value)?));
    }
    Ok(Provenance { entries })
}

// ---------------------------------------------------------------------------------------------
// Writing
// ---------------------------------------------------------------------------------------------

/// One column ready for cfitsio.
struct WriteColumn {
    name: String,
    tform: String,
    tnull: Option<i64>,
    unit: Option<String>,
    ucd: Option<String>,
    data: WriteData,
}

/// A column's cells, held as polars arrays (shared buffers, not copies); rows are converted
/// block by block while the file is written.
enum WriteData {
    F64(Float64Chunked),
    F32(Float32Chunked),
    /// With the value written for nulls (the column's TNULLn).
    I64(Int64Chunked, i64),
    Bool(BooleanChunked),
    Str {
        values: StringChunked,
        width: usize,
    },
}

fn header_text_ok(s: &str) -> bool {
    s.bytes().all(|b| (0x20..=0x7e).contains(&b))
}

fn prepare_columns(table: &Table) -> Result<Vec<WriteColumn>, String> {
    let mut out = Vec::with_capacity(table.frame.width());
    for column in table.frame.columns() {
        let name = column.name().as_str();
        if name.is_empty() {
            return Err("a column has an empty name; FITS columns need names".to_string());
        }
        if !header_text_ok(name) || name.ends_with(' ') {
            return Err(format!(
                "column name '{name}' cannot go in a FITS header (printable ASCII only, no \
                 trailing blanks); rename the column"
            ));
        }
        if name.len() > 68 {
            return Err(format!(
                "column name '{name}' is longer than the 68 characters a FITS TTYPE card holds"
            ));
        }
        let meta = table.meta.get(name);
        let header_value = |what: &str, v: Option<&String>| -> Result<Option<String>, String> {
            match v.map(|s| s.trim()).filter(|s| !s.is_empty()) {
                None => Ok(None),
                Some(s) if header_text_ok(s) => Ok(Some(s.to_string())),
                Some(s) => Err(format!(
                    "column '{name}': {what} '{s}' cannot go in a FITS header (printable ASCII \
                     only)"
                )),
            }
        };
        let unit = header_value("unit", meta.and_then(|m| m.unit.as_ref()))?;
        let ucd = header_value("UCD", meta.and_then(|m| m.ucd.as_ref()))?;

        let series = column.as_materialized_series();
        let dtype = series.dtype();
        let polars_err = |e: PolarsError| format!("column '{name}': {e}");
        let (tform, tnull, data) = if *dtype == DataType::Float32 {
            let ca = series.f32().map_err(polars_err)?.clone();
            ("1E".to_string(), None, WriteData::F32(ca))
        } else if dtype.is_float() || *dtype == DataType::Null {
            let cast = series.cast(&DataType::Float64).map_err(polars_err)?;
            let ca = cast.f64().map_err(polars_err)?.clone();
            ("1D".to_string(), None, WriteData::F64(ca))
        } else if dtype.is_integer() {
            let cast = series.strict_cast(&DataType::Int64).map_err(|_| {
                format!(
                    "column '{name}' ({dtype}) has values outside the 64-bit signed integer \
                     range that FITS K columns hold"
                )
            })?;
            let ca = cast.i64().map_err(polars_err)?.clone();
            let tnull = (ca.null_count() > 0).then(|| unused_integer(&ca));
            let fill = tnull.unwrap_or(0);
            ("1K".to_string(), tnull, WriteData::I64(ca, fill))
        } else if *dtype == DataType::Boolean {
            let ca = series.bool().map_err(polars_err)?.clone();
            ("1L".to_string(), None, WriteData::Bool(ca))
        } else if *dtype == DataType::String {
            let ca = series.str().map_err(polars_err)?.clone();
            let mut width = 1;
            for (row, v) in ca.iter().enumerate() {
                if let Some(s) = v {
                    if s.as_bytes().contains(&0) {
                        return Err(format!(
                            "column '{name}', row {}: the string contains a NUL character, \
                             which FITS strings cannot hold",
                            row + 1
                        ));
                    }
                    width = width.max(s.len());
                }
            }
            (
                format!("{width}A"),
                None,
                WriteData::Str { values: ca, width },
            )
        } else {
            return Err(format!(
                "column '{name}' has type {dtype}, which the FITS writer does not store; cast \
                 it to a number, boolean or string first"
            ));
        };
        out.push(WriteColumn {
            name: name.to_string(),
            tform,
            tnull,
            unit,
            ucd,
            data,
        });
    }
    Ok(out)
}

/// A value absent from the column, to stand for null: `i64::MIN` if possible.
fn unused_integer(ca: &Int64Chunked) -> i64 {
    if ca.min() != Some(i64::MIN) {
        return i64::MIN;
    }
    if ca.max() != Some(i64::MAX) {
        return i64::MAX;
    }
    let used: HashSet<i64> = ca.iter().flatten().collect();
    ((i64::MIN + 1)..)
        .find(|v| !used.contains(v))
        .expect("a column has fewer distinct values than i64 has")
}

fn provenance_keywords(i: usize) -> (String, String) {
    (format!("PRVK{i:03}"), format!("PRVV{i:03}"))
}

/// Header cards (keyword, escaped text, comment) for the provenance entries.
fn provenance_cards(
    provenance: &Provenance,
) -> Result<Vec<(String, String, &'static str)>, String> {
    if provenance.entries.len() > MAX_PROVENANCE_ENTRIES {
        return Err(format!(
            "{} provenance entries; a FITS header stores at most {MAX_PROVENANCE_ENTRIES}",
            provenance.entries.len()
        ));
    }
    let mut cards = Vec::with_capacity(2 * provenance.entries.len());
    for (i, (key, value)) in provenance.entries.iter().enumerate() {
        let (key_card, value_card) = provenance_keywords(i + 1);
        cards.push((key_card, escape(key), "provenance key"));
        cards.push((value_card, escape(value), "provenance value"));
    }
    Ok(cards)
}

fn write_table_hdu(
    file: &FitsHandle,
    nrows: usize,
    columns: &[WriteColumn],
    provenance: &[(String, String, &'static str)],
) -> Result<(), String> {
    let fptr = file.raw();
    let fail = |what: &str, s: c_int| format!("{what}: {}", status_text(s));
    let mut status = 0;
    // SAFETY: open handle; an empty primary array (BITPIX 8, NAXIS 0).
    unsafe { sys::ffphps(fptr, 8, 0, ptr::null_mut(), &mut status) };
    ok(status).map_err(|s| fail("cannot write the primary HDU", s))?;

    let names: Vec<CString> = columns
        .iter()
        .map(|c| CString::new(c.name.as_str()).expect("checked: no NUL"))
        .collect();
    let forms: Vec<CString> = columns
        .iter()
        .map(|c| CString::new(c.tform.as_str()).expect("no NUL"))
        .collect();
    let mut name_ptrs: Vec<*mut c_char> = names.iter().map(|c| c.as_ptr() as *mut c_char).collect();
    let mut form_ptrs: Vec<*mut c_char> = forms.iter().map(|c| c.as_ptr() as *mut c_char).collect();
    let extname = CString::new(EXTNAME).expect("no NUL");
    // The table starts with no rows: header cards go in first, so that cfitsio never has to
    // move data to make room, and rows are appended afterwards.
    // SAFETY: arrays of `columns.len()` valid C strings, which cfitsio only reads; no units
    // here (NULL), they are written as cards below.
    unsafe {
        sys::ffcrtb(
            fptr,
            BINARY_TBL,
            0,
            columns.len() as c_int,
            name_ptrs.as_mut_ptr(),
            form_ptrs.as_mut_ptr(),
            ptr::null_mut(),
            extname.as_ptr(),
            &mut status,
        )
    };
    ok(status).map_err(|s| fail("cannot create the table HDU", s))?;

    let needs_longstrn = columns
        .iter()
        .flat_map(|c| [c.unit.as_deref(), c.ucd.as_deref()])
        .flatten()
        .chain(provenance.iter().map(|(_, text, _)| text.as_str()))
        .any(|t| t.len() + t.matches('\'').count() > 68);
    if needs_longstrn {
        // SAFETY: open handle on the new table.
        unsafe { sys::ffplsw(fptr, &mut status) };
        ok(status).map_err(|s| fail("cannot write the LONGSTRN keyword", s))?;
    }
    for (i, column) in columns.iter().enumerate() {
        let n = i + 1;
        let context = |s| {
            fail(
                &format!("column '{}': cannot write its header cards", column.name),
                s,
            )
        };
        if let Some(tnull) = column.tnull {
            file.write_key_i64(&format!("TNULL{n}"), tnull, "value marking a null cell")
                .map_err(context)?;
        }
        if let Some(unit) = &column.unit {
            file.write_key_text(&format!("TUNIT{n}"), unit, None)
                .map_err(context)?;
        }
        if let Some(ucd) = &column.ucd {
            file.write_key_text(&format!("TUCD{n}"), ucd, None)
                .map_err(context)?;
        }
    }
    if !provenance.is_empty() {
        let comments = [
            "Provenance: entry nnn is PRVKnnn (key) = PRVVnnn (value). '%', bytes",
            "outside printable ASCII and trailing blanks are written %XX (hex, UTF-8).",
        ];
        for c in comments {
            file.write_comment(c)
                .map_err(|s| fail("cannot write a COMMENT card", s))?;
        }
        for (keyword, text, comment) in provenance {
            file.write_key_text(keyword, text, Some(comment))
                .map_err(|s| fail(&format!("cannot write provenance keyword {keyword}"), s))?;
        }
    }
    // SAFETY: open handle; re-reads the header so cfitsio knows the new TNULLn cards.
    unsafe { sys::ffrdef(fptr, &mut status) };
    ok(status).map_err(|s| fail("cannot update the table header", s))?;

    // Rows are assembled in memory in the FITS binary-table layout (big-endian, row after
    // row; FITS Standard 4.0 §7.3.3) and handed to cfitsio as raw bytes, a few MiB at a
    // time: one call per block instead of one per column and block.
    let widths: Vec<usize> = columns
        .iter()
        .map(|c| match &c.data {
            WriteData::F64(_) | WriteData::I64(..) => 8,
            WriteData::F32(_) => 4,
            WriteData::Bool(_) => 1,
            WriteData::Str { width, .. } => *width,
        })
        .collect();
    let row_bytes: usize = widths.iter().sum();
    let block = ((4 << 20) / row_bytes.max(1)).max(1);
    // Rows `start..start + n` into `buffer`, in parallel over groups of rows.
    let fill = |buffer: &mut Vec<u8>, start: usize, n: usize| {
        const GROUP: usize = 2048;
        buffer.clear();
        buffer.resize(n * row_bytes, 0);
        buffer
            .par_chunks_mut(GROUP * row_bytes)
            .enumerate()
            .for_each(|(k, part)| fill_rows(part, columns, &widths, row_bytes, start + k * GROUP));
    };
    // The next block is filled on another thread while this one writes the current block.
    std::thread::scope(|scope| {
        let (full_tx, full_rx) = std::sync::mpsc::sync_channel::<(usize, usize, Vec<u8>)>(1);
        let (empty_tx, empty_rx) = std::sync::mpsc::channel::<Vec<u8>>();
        scope.spawn(move || {
            let mut start = 0;
            while start < nrows {
                let n = block.min(nrows - start);
                let mut buffer = empty_rx.try_recv().unwrap_or_default();
                fill(&mut buffer, start, n);
                // The writer hung up after an error: stop.
                if full_tx.send((start, n, buffer)).is_err() {
                    break;
                }
                start += n;
            }
        });
        for (start, n, mut buffer) in full_rx {
            let mut status = 0;
            // SAFETY: open handle on the table (the last HDU, no heap, so cfitsio extends
            // it); `buffer` holds exactly `n` rows of `row_bytes`, which cfitsio only reads.
            unsafe {
                sys::ffptbb(
                    fptr,
                    (start + 1) as i64,
                    1,
                    (n * row_bytes) as i64,
                    buffer.as_mut_ptr(),
                    &mut status,
                )
            };
            ok(status)
                .map_err(|s| fail(&format!("cannot write rows {}–{}", start + 1, start + n), s))?;
            let _ = empty_tx.send(buffer);
        }
        Ok(())
    })
}

/// Whole rows from `start` into `part` (a multiple of `row_bytes`), in the FITS
/// binary-table layout.
fn fill_rows(
    part: &mut [u8],
    columns: &[WriteColumn],
    widths: &[usize],
    row_bytes: usize,
    start: usize,
) {
    let n = part.len() / row_bytes;
    let mut offset = 0;
    for (column, width) in columns.iter().zip(widths) {
        let cells = part[offset..]
            .chunks_mut(row_bytes)
            .map(|row| &mut row[..*width]);
        let (from, len) = (start as i64, n);
        match &column.data {
            WriteData::F64(ca) => {
                let part = ca.slice(from, len);
                match part.cont_slice() {
                    Ok(v) => cells
                        .zip(v)
                        .for_each(|(c, x)| c.copy_from_slice(&x.to_be_bytes())),
                    // Nulls are written as NaN (FITS floats have no other null).
                    Err(_) => cells
                        .zip(part.iter())
                        .for_each(|(c, x)| c.copy_from_slice(&x.unwrap_or(f64::NAN).to_be_bytes())),
                }
            }
            WriteData::F32(ca) => cells
                .zip(ca.slice(from, len).iter())
                .for_each(|(c, x)| c.copy_from_slice(&x.unwrap_or(f32::NAN).to_be_bytes())),
            WriteData::I64(ca, fill) => cells
                .zip(ca.slice(from, len).iter())
                .for_each(|(c, x)| c.copy_from_slice(&x.unwrap_or(*fill).to_be_bytes())),
            // FITS logical: 'T', 'F', or 0 for null.
            WriteData::Bool(ca) => cells.zip(ca.slice(from, len).iter()).for_each(|(c, x)| {
                c[0] = match x {
                    Some(true) => b'T',
                    Some(false) => b'F',
                    None => 0,
                }
            }),
            // Strings are padded with blanks (a null is all blanks, read back as null).
            WriteData::Str { values, .. } => {
                cells
                    .zip(values.slice(from, len).iter())
                    .for_each(|(c, x)| {
                        c.fill(b' ');
                        if let Some(s) = x {
                            c[..s.len()].copy_from_slice(s.as_bytes());
                        }
                    })
            }
        }
        offset += width;
    }
}

// ---------------------------------------------------------------------------------------------
// Header text escaping
// ---------------------------------------------------------------------------------------------

/// `%XX`-escape `%`, bytes outside printable ASCII and trailing blanks.
fn escape(text: &str) -> String {
    let bytes = text.as_bytes();
    let keep = bytes.iter().rposition(|&b| b != b' ').map_or(0, |p| p + 1);
    let mut out = String::with_capacity(bytes.len());
    for (i, &b) in bytes.iter().enumerate() {
        if b == b'%' || !(0x20..=0x7e).contains(&b) || i >= keep {
            out.push_str(&format!("%{b:02X}"));
        } else {
            out.push(b as char);
        }
    }
    out
}

fn hex_digit(b: u8) -> Option<u8> {
    (b as char).to_digit(16).map(|d| d as u8)
}

/// Undo [`escape`]; a `%` not followed by two hex digits is kept as it is. `None` if the
/// result is not UTF-8.
fn unescape(text: &str) -> Option<String> {
    let bytes = text.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] == b'%' && i + 2 < bytes.len() {
            if let (Some(hi), Some(lo)) = (hex_digit(bytes[i + 1]), hex_digit(bytes[i + 2])) {
                out.push(hi * 16 + lo);
                i += 3;
                continue;
            }
        }
        out.push(bytes[i]);
        i += 1;
    }
    String::from_utf8(out).ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_round_trips() {
        for s in [
            "",
            "plain",
            "50% off",
            "trailing  ",
            "  leading",
            "é ü ∑",
            "a'b\"c",
            "%zz",
            "%4",
        ] {
            assert_eq!(unescape(&escape(s)).as_deref(), Some(s), "{s:?}");
            assert!(header_text_ok(&escape(s)));
        }
        assert_eq!(escape("a b "), "a b%20");
        assert_eq!(escape("100%"), "100%25");
        assert_eq!(unescape("%zz%4").as_deref(), Some("%zz%4"));
    }

    #[test]
    fn unused_integer_avoids_collisions() {
        let ca = Int64Chunked::from_iter_options(
            "x".into(),
            [Some(i64::MIN), None, Some(i64::MAX)].into_iter(),
        );
        assert_eq!(unused_integer(&ca), i64::MIN + 1);
        let ca = Int64Chunked::from_iter_options("x".into(), [Some(1), None].into_iter());
        assert_eq!(unused_integer(&ca), i64::MIN);
    }
}
