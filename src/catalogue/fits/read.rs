//! Reading a binary table: column classification, raw row blocks and their decoding into
//! polars columns.

use std::collections::HashSet;
use std::os::raw::{c_char, c_int};
use std::ptr;

use fitsio::sys;
use polars::prelude::*;
use rayon::prelude::*;

use super::hdu::{table_shape, HduSummary};
use super::{
    NUM_OVERFLOW, TBIT, TBYTE, TCOMPLEX, TDBLCOMPLEX, TDOUBLE, TFLOAT, TINT, TLOGICAL, TLONG,
    TLONGLONG, TSBYTE, TSHORT, TSTRING, TUINT, TULONG, TULONGLONG, TUSHORT,
};
use crate::catalogue::cfitsio::{ok, status_text, FitsHandle};
use crate::catalogue::{ColumnMeta, Table};

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

/// Table-level keywords kept in [`Table::keywords`].
const FRAME_KEYWORDS: [&str; 3] = ["RADESYS", "EQUINOX", "SPECSYS"];

pub(super) fn read_table_hdu(file: &FitsHandle, hdu: &HduSummary) -> Result<Table, String> {
    read_table_rows(file, hdu, 0, usize::MAX, None)
}

/// Rows `first .. first + count` of the table (clipped to its end), every column or only
/// those named in `only`; row numbers in messages are the table's.
pub(super) fn read_table_rows(
    file: &FitsHandle,
    hdu: &HduSummary,
    first: usize,
    count: usize,
    only: Option<&[String]>,
) -> Result<Table, String> {
    let here = hdu.label();
    let (ncols, table_rows) = table_shape(file)
        .map_err(|s| format!("{here}: cannot read the table shape: {}", status_text(s)))?;
    let first = first.min(table_rows);
    let nrows = count.min(table_rows - first);
    let key = |k: &str| {
        file.key_text(k)
            .map_err(|s| format!("{here}: cannot read keyword {k}: {}", status_text(s)))
    };

    let mut columns = Vec::with_capacity(ncols);
    let mut layout = Vec::with_capacity(ncols);
    let mut meta = std::collections::BTreeMap::new();
    let mut seen = HashSet::new();
    let mut left_out = Vec::new();
    let mut keep = Vec::with_capacity(ncols);
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
        if only.is_some_and(|names| !names.contains(&name)) {
            keep.push(false);
            layout.push(parse_tform(&tform).and_then(|(r, t)| tform_bytes(r, t)));
            columns.push(ReadColumn {
                number,
                name,
                kind: ReadKind::Empty(DataType::Null),
                direct: None,
            });
            continue;
        }
        let kind = match column_kind(file, number)
            .map_err(|s| format!("{here}: column '{name}': {}", status_text(s)))?
        {
            Ok(kind) => kind,
            Err(why) => {
                // A column flowsift cannot hold is left out (and named), so that the rest
                // of the table can still be read.
                left_out.push(why.describe(&name, &tform));
                keep.push(false);
                layout.push(parse_tform(&tform).and_then(|(r, t)| tform_bytes(r, t)));
                columns.push(ReadColumn {
                    number,
                    name,
                    kind: ReadKind::Empty(DataType::Null),
                    direct: None,
                });
                continue;
            }
        };
        keep.push(true);
        let text = |k: String| -> Result<Option<String>, String> {
            Ok(key(&k)?
                .map(|v| v.trim().to_string())
                .filter(|v| !v.is_empty()))
        };
        let unit = text(format!("TUNIT{number}"))?;
        let ucd = text(format!("TUCD{number}"))?;
        if unit.is_some() || ucd.is_some() {
            meta.insert(
                name.clone(),
                ColumnMeta {
                    unit,
                    ucd,
                    description: None,
                },
            );
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
    let mut kept = keep.iter();
    columns.retain(|_| *kept.next().expect("one flag per column"));
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
                    (first + start + 1) as i64,
                    1,
                    (n * row_bytes) as i64,
                    raw.as_mut_ptr(),
                    &mut status,
                )
            };
            ok(status).map_err(|s| {
                format!(
                    "{here}: cannot read rows {}–{}: {}",
                    first + start + 1,
                    first + start + n,
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
                    first + row + 1
                ));
            }
        }
        for (column, buffer) in columns.iter().zip(buffers.iter_mut()) {
            if column.direct.is_some() {
                continue;
            }
            let mut status = 0;
            let mut anynul: c_int = 0;
            let first_row = (first + start + 1) as i64;
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
                                        first + start + i + 1
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
                    first + start + 1,
                    first + start + n
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
    let mut table = Table::new(frame, meta);
    // The frames the header states for the whole table (FITS Standard 4.0 §8: RADESYS and
    // EQUINOX for equatorial coordinates; Greisen et al. 2006, A&A 446, 747, SPECSYS for the
    // rest frame of spectral coordinates such as redshift).
    for k in FRAME_KEYWORDS {
        if let Some(v) = key(k)?
            .map(|v| v.trim().to_string())
            .filter(|v| !v.is_empty())
        {
            table.keywords.insert(k.to_string(), v);
        }
    }
    if !left_out.is_empty() {
        table.notes.push(format!(
            "{here}: columns flowsift cannot read (it reads one number, flag or text per \
             cell) were left out: {}.",
            left_out.join(", ")
        ));
    }
    Ok(table)
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
            Unsupported::Vector { repeat } => {
                format!("'{name}' (a vector of {repeat} values, TFORM '{tform}')")
            }
            Unsupported::StringVector { count, width } => {
                format!("'{name}' ({count} strings of {width} characters, TFORM '{tform}')")
            }
            Unsupported::Type(what) => format!("'{name}' ({what}, TFORM '{tform}')"),
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
