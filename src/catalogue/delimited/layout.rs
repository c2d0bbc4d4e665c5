//! The lines of a delimited file, found before polars parses it, so that every line is
//! accounted for: which line is the header, which are comments or blank, which are records,
//! and that every record has as many fields as the header.
//!
//! The rules (README, "Reliability"):
//! - Line endings may be LF, CRLF or CR alone (the first line break found decides).
//! - Before the header, a line starting with `#` is a comment and a blank line is skipped.
//!   After the header a line starting with `#` is a record like any other (its first field
//!   starts with `#`); only blank lines are skipped. Both are counted.
//! - A blank line holds nothing but spaces (and tabs, when the separator is not a tab).
//!   Inside a quoted field a line break is part of the field.
//! - Header names are taken exactly as written: a quoted name loses its outer quotes and
//!   `""` inside it stands for one `"`. Empty or repeated names are refused.
//! - A record with more or fewer fields than the header, a quote left open, and bytes that
//!   are not UTF-8 are refused, naming the line (and the column).

use std::ops::Range;

use rayon::prelude::*;

/// Where the header and the records of a delimited file are.
#[derive(Debug, Clone)]
pub struct Layout {
    /// The line break: `\n` (LF or CRLF) or `\r` (CR alone).
    pub eol: u8,
    /// The header line, without its line ending (and without a byte-order mark).
    pub header: Range<usize>,
    /// Line number (from 1) of the header.
    pub header_line: usize,
    /// The header's names, exactly as written.
    pub names: Vec<String>,
    /// From the first line after the header to the end of the last record (with its line
    /// ending); blank lines after the last record are outside it.
    pub body: Range<usize>,
    /// Blank lines inside the body (each with its line ending), which are not records.
    pub blanks_inside: Vec<Range<usize>>,
    /// Records (data rows).
    pub records: usize,
    /// Blank lines anywhere in the file.
    pub blank_lines: usize,
    /// Comment lines before the header.
    pub comment_lines: usize,
    /// Whether the body holds a quote character.
    pub quoted: bool,
    /// The first byte of each record, when asked for.
    pub record_starts: Option<Vec<usize>>,
}

impl Layout {
    /// Whether polars can read the file's own bytes from the header to the end of the body
    /// as they are (no blank line among the records).
    pub fn is_contiguous(&self) -> bool {
        self.blanks_inside.is_empty()
    }

    /// The header and the records with blank lines cut out: the text polars reads when the
    /// body is not contiguous.
    pub fn cleaned(&self, bytes: &[u8]) -> Vec<u8> {
        let mut out = Vec::with_capacity(self.header.len() + 1 + self.body.len());
        out.extend_from_slice(&bytes[self.header.clone()]);
        out.push(self.eol);
        let mut at = self.body.start;
        for blank in &self.blanks_inside {
            out.extend_from_slice(&bytes[at..blank.start]);
            at = blank.end;
        }
        out.extend_from_slice(&bytes[at..self.body.end]);
        out
    }
}

/// Find the layout of `bytes` (a whole delimited file). `keep_starts` also records where
/// each record starts. Errors are messages naming the line.
pub fn scan(bytes: &[u8], separator: u8, keep_starts: bool) -> Result<Layout, String> {
    let eol = match (memchr::memchr(b'\n', bytes), memchr::memchr(b'\r', bytes)) {
        (None, Some(_)) => b'\r',
        _ => b'\n',
    };
    let start = if bytes.starts_with(&[0xEF, 0xBB, 0xBF]) {
        3
    } else {
        0
    };
    // Lines before the header.
    let mut at = start;
    let mut line_no = 1usize;
    let mut blank_lines = 0usize;
    let mut comment_lines = 0usize;
    let header = loop {
        if at >= bytes.len() {
            return Err("no header line: the file holds no column names".into());
        }
        let end = memchr::memchr(eol, &bytes[at..]).map_or(bytes.len(), |i| at + i);
        let line = &bytes[at..end];
        if is_blank(line, separator) {
            blank_lines += 1;
        } else if line[0] == b'#' {
            comment_lines += 1;
        } else {
            let mut stop = end;
            if eol == b'\n' && stop > at && bytes[stop - 1] == b'\r' {
                stop -= 1;
            }
            break at..stop;
        }
        at = end + 1;
        line_no += 1;
    };
    let header_line = line_no;
    let body_start = (memchr::memchr(eol, &bytes[header.end..])
        .map_or(bytes.len(), |i| header.end + i + 1))
    .min(bytes.len());
    let names = header_names(&bytes[header.clone()], separator)
        .map_err(|m| format!("line {header_line} (the header): {m}"))?;
    if let Err(e) = std::str::from_utf8(bytes) {
        return Err(utf8_message(bytes, e.valid_up_to(), eol, separator, &names));
    }
    let fields = names.len();
    let body_bytes = &bytes[body_start..];
    let quoted = memchr::memchr(b'"', body_bytes).is_some();
    let found = if quoted {
        scan_quoted(body_bytes, separator, eol, fields, keep_starts)
    } else {
        scan_plain(body_bytes, separator, eol, fields, keep_starts)
    };
    let first_record_line = header_line + 1;
    if let Some(open) = found.open_quote {
        return Err(format!(
            "line {}: a quote opened in this record is never closed",
            first_record_line + open
        ));
    }
    if let Some((line, n, at)) = found.ragged {
        let mut message = ragged_message(first_record_line + line, n, &names);
        if body_bytes.get(at) == Some(&b'#') {
            message.push_str(
                " (a line starting with '#' is a comment only before the header; after it, \
                 it is a row)",
            );
        }
        return Err(message);
    }
    let body_end = body_start + found.last_record_end;
    let blanks_inside: Vec<Range<usize>> = found
        .blanks
        .iter()
        .filter(|r| r.start < found.last_record_end)
        .map(|r| body_start + r.start..body_start + r.end)
        .collect();
    Ok(Layout {
        eol,
        header,
        header_line,
        names,
        body: body_start..body_end,
        blanks_inside,
        records: found.records,
        blank_lines: blank_lines + found.blanks.len(),
        comment_lines,
        quoted,
        record_starts: found
            .starts
            .map(|s| s.into_iter().map(|a| body_start + a).collect()),
    })
}

/// What a scan of the body found (offsets relative to the body; line numbers from 0 at the
/// body's first line).
#[derive(Default)]
struct Found {
    records: usize,
    blanks: Vec<Range<usize>>,
    last_record_end: usize,
    starts: Option<Vec<usize>>,
    /// The first record with another number of fields: (line, fields, first byte).
    ragged: Option<(usize, usize, usize)>,
    /// The line of a record whose quote is never closed.
    open_quote: Option<usize>,
    /// Lines in the scanned piece.
    lines: usize,
}

/// A body without quotes: one record per line, scanned in pieces in parallel.
fn scan_plain(body: &[u8], separator: u8, eol: u8, expected: usize, keep_starts: bool) -> Found {
    let pieces = 64usize;
    let mut cuts = vec![0usize];
    for p in 1..pieces {
        let at = (body.len() * p / pieces).max(*cuts.last().expect("non-empty"));
        let cut = memchr::memchr(eol, &body[at..]).map_or(body.len(), |i| at + i + 1);
        cuts.push(cut);
    }
    cuts.push(body.len());
    cuts.dedup();
    let parts: Vec<Found> = cuts
        .par_windows(2)
        .map(|w| {
            let (from, to) = (w[0], w[1]);
            let mut f = Found {
                starts: keep_starts.then(Vec::new),
                ..Found::default()
            };
            let line = |a: usize, b: usize, next: usize, f: &mut Found| {
                let text = &body[a..b];
                if is_blank(text, separator) {
                    f.blanks.push(a..next);
                } else {
                    let n = 1 + memchr::memchr_iter(separator, text).count();
                    if n != expected && f.ragged.is_none() {
                        f.ragged = Some((f.lines, n, a));
                    }
                    f.records += 1;
                    f.last_record_end = next;
                    if let Some(s) = &mut f.starts {
                        s.push(a);
                    }
                }
                f.lines += 1;
            };
            let mut a = from;
            for i in memchr::memchr_iter(eol, &body[from..to]) {
                let b = from + i;
                line(a, b, b + 1, &mut f);
                a = b + 1;
            }
            if a < to {
                line(a, to, to, &mut f);
            }
            f
        })
        .collect();
    let mut all = Found {
        starts: keep_starts.then(Vec::new),
        ..Found::default()
    };
    for part in parts {
        if all.ragged.is_none() {
            all.ragged = part.ragged.map(|(l, n, a)| (all.lines + l, n, a));
        }
        all.lines += part.lines;
        all.records += part.records;
        all.blanks.extend(part.blanks);
        if part.records > 0 {
            all.last_record_end = part.last_record_end;
        }
        if let (Some(s), Some(p)) = (&mut all.starts, part.starts) {
            s.extend(p);
        }
    }
    all
}

/// A body with quotes: a line break or separator inside a quoted field belongs to it.
fn scan_quoted(body: &[u8], separator: u8, eol: u8, expected: usize, keep_starts: bool) -> Found {
    let mut f = Found {
        starts: keep_starts.then(Vec::new),
        ..Found::default()
    };
    let mut record_start = 0usize;
    let mut record_line = 0usize;
    let mut fields = 1usize;
    let mut content = false;
    let mut in_quotes = false;
    let end_record =
        |f: &mut Found, start: usize, next: usize, line: usize, fields: usize, content: bool| {
            if !content {
                f.blanks.push(start..next);
                return;
            }
            if fields != expected && f.ragged.is_none() {
                f.ragged = Some((line, fields, start));
            }
            f.records += 1;
            f.last_record_end = next;
            if let Some(s) = &mut f.starts {
                s.push(start);
            }
        };
    for (k, &c) in body.iter().enumerate() {
        if c == b'"' {
            in_quotes = !in_quotes;
            content = true;
        } else if c == eol {
            if in_quotes {
                f.lines += 1;
                continue;
            }
            end_record(&mut f, record_start, k + 1, record_line, fields, content);
            f.lines += 1;
            record_start = k + 1;
            record_line = f.lines;
            fields = 1;
            content = false;
        } else if in_quotes {
            continue;
        } else if c == separator {
            fields += 1;
            content = true;
        } else if !(c == b' ' || c == b'\r' || (c == b'\t' && separator != b'\t')) {
            content = true;
        }
    }
    if in_quotes {
        f.open_quote = Some(record_line);
        return f;
    }
    if record_start < body.len() {
        end_record(
            &mut f,
            record_start,
            body.len(),
            record_line,
            fields,
            content,
        );
        f.lines += 1;
    }
    f
}

/// A line of nothing but spaces (and tabs, when the separator is not a tab).
fn is_blank(line: &[u8], separator: u8) -> bool {
    line.iter()
        .all(|&c| c == b' ' || c == b'\r' || (c == b'\t' && separator != b'\t'))
}

/// The header's fields, unquoted.
fn header_names(line: &[u8], separator: u8) -> Result<Vec<String>, String> {
    let mut names = Vec::new();
    let mut field = Vec::new();
    let mut in_quotes = false;
    let mut i = 0;
    let mut was_quoted = false;
    while i < line.len() {
        let c = line[i];
        if in_quotes {
            if c == b'"' {
                if line.get(i + 1) == Some(&b'"') {
                    field.push(b'"');
                    i += 1;
                } else {
                    in_quotes = false;
                }
            } else {
                field.push(c);
            }
        } else if c == b'"' && field.is_empty() && !was_quoted {
            in_quotes = true;
            was_quoted = true;
        } else if c == separator {
            names.push(std::mem::take(&mut field));
            was_quoted = false;
        } else {
            field.push(c);
        }
        i += 1;
    }
    if in_quotes {
        return Err("a quoted name is never closed".into());
    }
    names.push(field);
    let names: Vec<String> = names
        .into_iter()
        .map(|n| String::from_utf8_lossy(&n).into_owned())
        .collect();
    if let Some(k) = names.iter().position(|n| n.trim().is_empty()) {
        return Err(format!(
            "field {} of the header is empty; every column needs a name",
            k + 1
        ));
    }
    let mut seen = std::collections::BTreeMap::new();
    let mut repeated = Vec::new();
    for (k, n) in names.iter().enumerate() {
        if let Some(first) = seen.insert(n.as_str(), k) {
            repeated.push(format!("'{n}' (fields {} and {})", first + 1, k + 1));
        }
    }
    if !repeated.is_empty() {
        return Err(format!(
            "repeated column names: {}; rename them so each column has its own name",
            repeated.join(", ")
        ));
    }
    Ok(names)
}

fn ragged_message(line: usize, found: usize, names: &[String]) -> String {
    let expected = names.len();
    if found > expected {
        format!(
            "line {line}: {found} fields, but the header names {expected} columns (the last \
             named column is '{}'); quote a field that holds the separator",
            names[expected - 1]
        )
    } else {
        format!(
            "line {line}: {found} fields, but the header names {expected} columns (no value \
             for {}); leave a field empty rather than out",
            names[found..]
                .iter()
                .map(|n| format!("'{n}'"))
                .collect::<Vec<_>>()
                .join(", ")
        )
    }
}

/// Where the first byte that is not UTF-8 is: line and column.
fn utf8_message(bytes: &[u8], at: usize, eol: u8, separator: u8, names: &[String]) -> String {
    let line = 1 + memchr::memchr_iter(eol, &bytes[..at]).count();
    let line_start = memchr::memrchr(eol, &bytes[..at]).map_or(0, |i| i + 1);
    let field = memchr::memchr_iter(separator, &bytes[line_start..at]).count();
    let column = match names.get(field) {
        Some(name) => format!("column '{name}'"),
        None => format!("field {}", field + 1),
    };
    format!(
        "line {line}, {column}: byte {} is not UTF-8 text (byte {at} of the file); save the \
         file as UTF-8",
        bytes[at]
    )
}
