//! Writing a binary table: column definitions, null stand-ins, and rows written block by
//! block in the FITS layout.

use std::collections::HashSet;
use std::ffi::CString;
use std::os::raw::{c_char, c_int};
use std::ptr;

use fitsio::sys;
use polars::prelude::*;
use rayon::prelude::*;

use super::cards::header_text_ok;
use super::{BINARY_TBL, EXTNAME};
use crate::catalogue::cfitsio::{ok, status_text, FitsHandle};
use crate::catalogue::Table;

/// One column ready for cfitsio.
pub(super) struct WriteColumn {
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

pub(super) fn prepare_columns(table: &Table) -> Result<Vec<WriteColumn>, String> {
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

pub(super) fn write_table_hdu(
    file: &FitsHandle,
    nrows: usize,
    columns: &[WriteColumn],
    provenance: &[(String, String, &'static str)],
    history: &[String],
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
            "Provenance: entry nnn is PROVnnn = 'key: value', in ASCII (Greek letters",
            "and signs spelled out, other characters \\uXXXX; JSON values exact).",
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
    for line in history {
        file.write_history(line)
            .map_err(|s| fail("cannot write a HISTORY card", s))?;
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
#[cfg(test)]
mod tests {
    use super::*;

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
