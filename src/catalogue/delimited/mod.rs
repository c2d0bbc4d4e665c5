//! CSV and TSV through polars, with the input's own text kept for the output.
//!
//! A delimited output of a delimited input repeats every input column. When the input
//! allows it, those columns are copied from the input's lines byte for byte (so a value
//! written `0.0230` stays `0.0230`) and only the new columns are formatted; this also
//! halves the formatting work of a CSV → CSV run. The conditions are checked, not assumed
//! ([`SourceText::scan`], [`SourceText::matches`]); when one fails the whole table is
//! written by polars instead, which gives the same values in polars' own number format.

use std::fs::File;
use std::io::Write;
use std::path::Path;

use polars::prelude::*;
use rayon::prelude::*;

use super::{CatalogueError, Table};

pub mod layout;

use layout::Layout;

/// Rows used to infer column types on the fast path.
const INFER_ROWS: usize = 10_000;
/// Entries read as nulls (beside an empty field).
const NULL_WORDS: [&str; 3] = ["", "NA", "null"];
/// Rows per block serialised in one piece (by polars, and by the copying writer).
const BATCH_ROWS: usize = 16_384;
/// Rows per block of the copying writer.
const COPY_BATCH_ROWS: usize = 4_096;
/// Blocks the copying writer formats in parallel at a time; at most as many more wait to be
/// written (memory: about twice this many blocks of COPY_BATCH_ROWS lines).
const BATCHES_PER_WRITE: usize = 4;

/// Read a delimited file with a header line ([`layout`] gives the rules for comments,
/// blank lines, line endings and names). Column types are inferred from the first rows; if
/// a later entry does not fit (a stray word in a number column), the file is read again
/// with types inferred from every row, so that such a column is read as text and each entry
/// is checked by the pipeline (a per-row status, not a failure).
pub fn read_delimited(path: &Path, separator: u8) -> Result<Table, CatalogueError> {
    read(path, separator, false, false).map(|(table, _)| table)
}

/// As [`read_delimited`], with every column read as text exactly as written (an empty field
/// as null, no other word taken for one), for a reader that knows the types from elsewhere
/// (the ECSV header). No note about the comment lines before the header is made.
pub fn read_delimited_as_text(path: &Path, separator: u8) -> Result<Table, CatalogueError> {
    let (mut table, _) = read(path, separator, false, true)?;
    table.notes.retain(|n| !n.contains("comment line(s)"));
    Ok(table)
}

/// As [`read_delimited`], and also the file's text when it can be copied into an output
/// ([`SourceText`]); `None` when it cannot (quoted fields, blank lines among the records,
/// CR line endings …).
pub fn read_delimited_keeping_text(
    path: &Path,
    separator: u8,
) -> Result<(Table, Option<SourceText>), CatalogueError> {
    read(path, separator, true, false)
}

fn read(
    path: &Path,
    separator: u8,
    keep_text: bool,
    as_text: bool,
) -> Result<(Table, Option<SourceText>), CatalogueError> {
    let file = File::open(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
    let empty = file.metadata().map(|m| m.len() == 0).unwrap_or(false);
    if empty {
        return Err(CatalogueError::read(
            path,
            "the file is empty: no header line",
        ));
    }
    // SAFETY: the map is read-only; as with polars' own mapping of its inputs, the file
    // must not be changed by another process while flowsift runs.
    let map = unsafe { memmap2::Mmap::map(&file) }
        .map_err(|e| CatalogueError::read(path, format!("cannot map the file: {e}")))?;
    let layout =
        layout::scan(&map, separator, keep_text).map_err(|m| CatalogueError::read(path, m))?;
    let cleaned;
    let text: &[u8] = if layout.is_contiguous() {
        &map[layout.header.start..layout.body.end]
    } else {
        cleaned = layout.cleaned(&map);
        &cleaned
    };
    let parse = |infer: Option<usize>| {
        options(separator, layout.eol, infer, as_text)
            .with_has_header(true)
            .into_reader_with_file_handle(std::io::Cursor::new(text))
            .finish()
    };
    // No rows inferred: every column is text.
    let first = if as_text { Some(0) } else { Some(INFER_ROWS) };
    let mut frame = match parse(first) {
        Ok(f) => f,
        Err(_) => parse(None).map_err(|e| {
            CatalogueError::read(path, format!("cannot read as delimited text: {e}"))
        })?,
    };
    if frame.height() != layout.records || frame.width() != layout.names.len() {
        return Err(CatalogueError::read(
            path,
            format!(
                "the parser found {} rows of {} columns where the file has {} records of {} \
                 fields; nothing was written",
                frame.height(),
                frame.width(),
                layout.records,
                layout.names.len()
            ),
        ));
    }
    frame
        .set_column_names(&layout.names)
        .map_err(|e| CatalogueError::read(path, format!("column names: {e}")))?;
    let mut notes = Vec::new();
    if layout.comment_lines > 0 {
        notes.push(format!(
            "{}: {} comment line(s) before the header skipped.",
            path.display(),
            layout.comment_lines
        ));
    }
    if layout.blank_lines > 0 {
        notes.push(format!(
            "{}: {} blank line(s) skipped (a blank line is not a row).",
            path.display(),
            layout.blank_lines
        ));
    }
    let source = if keep_text {
        SourceText::from_layout(map, layout, separator).filter(|t| t.matches(&frame))
    } else {
        None
    };
    if let Some(t) = &source {
        t.release(0, t.rows.len());
    }
    Ok((
        Table {
            frame,
            meta: Default::default(),
            notes,
            keywords: Default::default(),
        },
        source,
    ))
}

/// The parse options shared by every way of reading: no comment prefix (comments before
/// the header are cut off by [`layout`]), the file's own line break.
fn options(separator: u8, eol: u8, infer: Option<usize>, as_text: bool) -> CsvReadOptions {
    let words: Vec<PlSmallStr> = if as_text {
        vec!["".into()]
    } else {
        NULL_WORDS.iter().map(|w| (*w).into()).collect()
    };
    CsvReadOptions::default()
        .with_infer_schema_length(infer)
        .map_parse_options(|p| {
            p.with_separator(separator)
                .with_eol_char(eol)
                .with_missing_is_null(true)
                .with_null_values(Some(NullValues::AllColumns(words.clone())))
        })
}

/// Write a delimited file with a header line; floats at full precision (shortest text that
/// reads back to the same number).
pub fn write_delimited(file: &File, table: &Table, separator: u8) -> Result<(), String> {
    let mut df = table.frame.clone();
    // Large batches: each is serialised in parallel, then written; polars' default (1024
    // rows) spends much of its time starting and joining the parallel work.
    CsvWriter::new(file)
        .with_batch_size(std::num::NonZeroUsize::new(BATCH_ROWS).expect("non-zero"))
        .include_header(true)
        .with_separator(separator)
        .finish(&mut df)
        .map_err(|e| format!("cannot write delimited text: {e}"))
}

/// Write a delimited file whose leading columns are `text`'s: their cells are copied from
/// the input lines and the other columns formatted as [`write_delimited`] would. Falls back
/// to [`write_delimited`] when `text` is absent, has another separator, or does not match
/// the table (other leading column names, another row count, a column type this writer
/// does not format).
pub fn write_delimited_with_text(
    file: &File,
    table: &Table,
    separator: u8,
    text: Option<&SourceText>,
) -> Result<(), String> {
    let text = text.filter(|t| {
        t.separator == separator
            && t.rows.len() == table.frame.height()
            && table.frame.width() >= t.columns.len()
            && table
                .frame
                .get_column_names()
                .iter()
                .zip(&t.columns)
                .all(|(a, b)| a.as_str() == b)
    });
    let Some(text) = text else {
        return write_delimited(file, table, separator);
    };
    let added: Option<Vec<Cells>> = table.frame.columns()[text.columns.len()..]
        .iter()
        .map(Cells::of)
        .collect();
    let Some(added) = added else {
        return write_delimited(file, table, separator);
    };
    let names: Vec<&str> = table.frame.get_column_names()[text.columns.len()..]
        .iter()
        .map(|n| n.as_str())
        .collect();
    let mut header = text.line_of_header().to_vec();
    for name in &names {
        header.push(separator);
        push_text(&mut header, name, separator);
    }
    header.push(b'\n');
    // Blocks are formatted in parallel, a few at a time, while a writer thread hands the
    // finished ones to the kernel in order; buffers go back to be filled again.
    let n = text.rows.len();
    let starts: Vec<usize> = (0..n).step_by(COPY_BATCH_ROWS).collect();
    let (full_tx, full_rx) = std::sync::mpsc::sync_channel::<(usize, Vec<u8>)>(BATCHES_PER_WRITE);
    let (empty_tx, empty_rx) = std::sync::mpsc::channel::<Vec<u8>>();
    let written = std::thread::scope(|scope| {
        let writer = scope.spawn(move || -> std::io::Result<()> {
            let mut out = file;
            out.write_all(&header)?;
            for (start, block) in full_rx {
                out.write_all(&block)?;
                text.release(start, (start + COPY_BATCH_ROWS).min(n));
                // The formatter may have finished already; a closed channel is no error.
                empty_tx.send(block).ok();
            }
            Ok(())
        });
        'groups: for group in starts.chunks(BATCHES_PER_WRITE) {
            let buffers: Vec<Vec<u8>> = group
                .iter()
                .map(|_| empty_rx.try_recv().unwrap_or_default())
                .collect();
            let blocks: Vec<(usize, Vec<u8>)> = group
                .par_iter()
                .zip(buffers)
                .map(|(&start, mut buf)| {
                    let end = (start + COPY_BATCH_ROWS).min(n);
                    buf.clear();
                    buf.reserve(
                        text.bytes_of_rows(start, end) + (end - start) * (1 + 24 * added.len()),
                    );
                    let len = end - start;
                    let sliced: Vec<Cells> = added.iter().map(|c| c.slice(start, len)).collect();
                    let views: Vec<View> = sliced.iter().map(View::of).collect();
                    for (i, row) in (start..end).enumerate() {
                        buf.extend_from_slice(text.line(row));
                        for view in &views {
                            buf.push(separator);
                            view.push(i, &mut buf, separator);
                        }
                        buf.push(b'\n');
                    }
                    (start, buf)
                })
                .collect();
            for block in blocks {
                if full_tx.send(block).is_err() {
                    // The writer stopped on an error, which join reports.
                    break 'groups;
                }
            }
        }
        drop(full_tx);
        writer.join().expect("the writer thread does not panic")
    });
    written.map_err(|e| format!("cannot write delimited text: {e}"))
}

/// Text written the way polars writes a string cell when quoting only where necessary: an
/// empty string as `""` (an empty cell is a null), quoted when it holds the separator, a
/// quote or a line break, with inner quotes doubled.
fn push_text(buf: &mut Vec<u8>, s: &str, separator: u8) {
    let b = s.as_bytes();
    if b.is_empty() {
        buf.extend_from_slice(b"\"\"");
    } else if b
        .iter()
        .any(|&c| c == separator || c == b'"' || c == b'\n' || c == b'\r')
    {
        buf.push(b'"');
        for &c in b {
            if c == b'"' {
                buf.push(b'"');
            }
            buf.push(c);
        }
        buf.push(b'"');
    } else {
        buf.extend_from_slice(b);
    }
}

/// An added column, ready to be formatted cell by cell (nulls as empty cells).
enum Cells {
    F64(Float64Chunked),
    F32(Float32Chunked),
    I64(Int64Chunked),
    U64(UInt64Chunked),
    Bool(BooleanChunked),
    Str(StringChunked),
}

impl Cells {
    /// The column in one chunk, or `None` for a type left to polars' writer.
    fn of(column: &Column) -> Option<Cells> {
        let s = column.as_materialized_series();
        let cells = match s.dtype() {
            DataType::Float64 => Cells::F64(s.f64().ok()?.rechunk().into_owned()),
            DataType::Float32 => Cells::F32(s.f32().ok()?.rechunk().into_owned()),
            DataType::Int8 | DataType::Int16 | DataType::Int32 | DataType::Int64 => Cells::I64(
                s.cast(&DataType::Int64)
                    .ok()?
                    .i64()
                    .ok()?
                    .rechunk()
                    .into_owned(),
            ),
            DataType::UInt8 | DataType::UInt16 | DataType::UInt32 | DataType::UInt64 => Cells::U64(
                s.cast(&DataType::UInt64)
                    .ok()?
                    .u64()
                    .ok()?
                    .rechunk()
                    .into_owned(),
            ),
            DataType::Boolean => Cells::Bool(s.bool().ok()?.rechunk().into_owned()),
            DataType::String => Cells::Str(s.str().ok()?.rechunk().into_owned()),
            _ => return None,
        };
        Some(cells)
    }

    /// Rows `start..start + len`, sharing the column's buffers.
    fn slice(&self, start: usize, len: usize) -> Cells {
        let at = start as i64;
        match self {
            Cells::F64(ca) => Cells::F64(ca.slice(at, len)),
            Cells::F32(ca) => Cells::F32(ca.slice(at, len)),
            Cells::I64(ca) => Cells::I64(ca.slice(at, len)),
            Cells::U64(ca) => Cells::U64(ca.slice(at, len)),
            Cells::Bool(ca) => Cells::Bool(ca.slice(at, len)),
            Cells::Str(ca) => Cells::Str(ca.slice(at, len)),
        }
    }
}

/// A block of an added column, read out for formatting row by row.
enum View<'a> {
    /// No nulls: the values themselves.
    Dense(&'a [f64]),
    F64(Vec<Option<f64>>),
    F32(Vec<Option<f32>>),
    I64(Vec<Option<i64>>),
    U64(Vec<Option<u64>>),
    Bool(Vec<Option<bool>>),
    Str(Vec<Option<&'a str>>),
}

impl<'a> View<'a> {
    fn of(cells: &'a Cells) -> View<'a> {
        match cells {
            Cells::F64(ca) => match ca.cont_slice() {
                Ok(values) => View::Dense(values),
                Err(_) => View::F64(ca.iter().collect()),
            },
            Cells::F32(ca) => View::F32(ca.iter().collect()),
            Cells::I64(ca) => View::I64(ca.iter().collect()),
            Cells::U64(ca) => View::U64(ca.iter().collect()),
            Cells::Bool(ca) => View::Bool(ca.iter().collect()),
            Cells::Str(ca) => View::Str(ca.iter().collect()),
        }
    }

    /// Cell `i` of the block as [`write_delimited`] writes it (a null as an empty cell).
    fn push(&self, i: usize, buf: &mut Vec<u8>, separator: u8) {
        let float = |buf: &mut Vec<u8>, v: f64| {
            buf.extend_from_slice(zmij::Buffer::new().format(v).as_bytes())
        };
        match self {
            View::Dense(values) => float(buf, values[i]),
            View::F64(values) => {
                if let Some(v) = values[i] {
                    float(buf, v)
                }
            }
            View::F32(values) => {
                if let Some(v) = values[i] {
                    buf.extend_from_slice(zmij::Buffer::new().format(v).as_bytes());
                }
            }
            View::I64(values) => {
                if let Some(v) = values[i] {
                    buf.extend_from_slice(itoa::Buffer::new().format(v).as_bytes());
                }
            }
            View::U64(values) => {
                if let Some(v) = values[i] {
                    buf.extend_from_slice(itoa::Buffer::new().format(v).as_bytes());
                }
            }
            View::Bool(values) => match values[i] {
                Some(true) => buf.extend_from_slice(b"true"),
                Some(false) => buf.extend_from_slice(b"false"),
                None => {}
            },
            View::Str(values) => {
                if let Some(v) = values[i] {
                    push_text(buf, v, separator);
                }
            }
        }
    }
}

/// A delimited file's text, line by line: the header and one line per data row, without
/// line endings (`\n`, or `\r\n`). Only files that polars reads one row per line, with
/// every field unquoted, qualify; [`SourceText::scan`] checks that.
pub struct SourceText {
    map: memmap2::Mmap,
    separator: u8,
    header: (usize, usize),
    /// First byte of each data line (a line runs to its `\n`, or the end of the file).
    rows: Vec<usize>,
    /// The header's field names.
    columns: Vec<String>,
}

impl SourceText {
    /// The text of a file whose layout allows copying: no quote character (a quoted field
    /// may hold separators or line breaks), no blank line among the records, LF or CRLF
    /// line endings, and the records' starts found by the scan.
    pub fn from_layout(map: memmap2::Mmap, layout: Layout, separator: u8) -> Option<SourceText> {
        if layout.quoted || !layout.is_contiguous() || layout.eol != b'\n' {
            return None;
        }
        let rows = layout.record_starts?;
        Some(SourceText {
            map,
            separator,
            header: (layout.header.start, layout.header.len()),
            rows,
            columns: layout.names,
        })
    }

    /// Whether polars read `frame` from this text one row per line: the same column names
    /// in the same order, one row per data line, every line with as many fields as the
    /// header, and a numeric column whose every cell reads back from its line to the same
    /// number (or null). A table with no such column is not matched.
    pub fn matches(&self, frame: &DataFrame) -> bool {
        if frame.height() != self.rows.len()
            || frame.width() != self.columns.len()
            || frame
                .get_column_names()
                .iter()
                .zip(&self.columns)
                .any(|(a, b)| a.as_str() != b)
        {
            return false;
        }
        let Some((index, values)) = frame
            .columns()
            .iter()
            .enumerate()
            .find_map(|(i, c)| Some((i, c.as_materialized_series().f64().ok()?)))
        else {
            return false;
        };
        let separators = self.columns.len() - 1;
        let sep = self.separator;
        (0..self.rows.len()).into_par_iter().all(|row| {
            let line = self.line(row);
            let mut bounds = memchr::memchr_iter(sep, line);
            let start = if index == 0 {
                0
            } else {
                match bounds.nth(index - 1) {
                    Some(p) => p + 1,
                    None => return false,
                }
            };
            let (end, before) = match bounds.next() {
                Some(p) => (p, index + 1),
                None => (line.len(), index),
            };
            if before + bounds.count() != separators {
                return false;
            }
            let Ok(field) = std::str::from_utf8(&line[start..end]) else {
                return false;
            };
            match values.get(row) {
                None => NULL_WORDS.contains(&field),
                Some(v) => field
                    .parse::<f64>()
                    .is_ok_and(|x| x.to_bits() == v.to_bits() || (x.is_nan() && v.is_nan())),
            }
        })
    }

    fn line_of_header(&self) -> &[u8] {
        &self.map[self.header.0..self.header.0 + self.header.1]
    }

    fn line(&self, row: usize) -> &[u8] {
        line_at(&self.map, self.rows[row])
    }

    /// Bytes of rows `first..end`, line endings included (an upper bound for a buffer).
    fn bytes_of_rows(&self, first: usize, end: usize) -> usize {
        if first >= end {
            return 0;
        }
        let to = self.rows.get(end).copied().unwrap_or(self.map.len());
        to - self.rows[first]
    }

    /// Let the kernel drop this process's pages of rows `first..end` (they are read again
    /// from the page cache if touched), so that the input's text does not stay in memory
    /// beside the table while the run goes on.
    fn release(&self, first: usize, end: usize) {
        if first >= end {
            return;
        }
        let page = 4096usize;
        let from = self.rows[first] / page * page;
        let to = match self.rows.get(end) {
            Some(&next) => next / page * page,
            None => self.map.len(),
        };
        if to > from {
            // SAFETY: DontNeed on a read-only file mapping only drops page-table entries;
            // the next access faults the same file contents back in.
            unsafe {
                self.map
                    .unchecked_advise_range(memmap2::UncheckedAdvice::DontNeed, from, to - from)
                    .ok();
            }
        }
    }
}

/// The line of `bytes` that starts at `from`, without its `\n` or `\r\n`.
fn line_at(bytes: &[u8], from: usize) -> &[u8] {
    let rest = &bytes[from..];
    let line = memchr::memchr(b'\n', rest).map_or(rest, |i| &rest[..i]);
    match line {
        [head @ .., b'\r'] => head,
        _ => line,
    }
}
