//! Reading a VOTable: the XML events walked once, the chosen TABLE's FIELDs and rows
//! decoded into columns (see the [module documentation](super)).

use std::collections::{BTreeMap, HashMap};
use std::path::Path;

use base64::Engine as _;
use polars::prelude::*;
use quick_xml::events::{BytesStart, Event};
use quick_xml::Reader;

use crate::catalogue::{CatalogueError, ColumnMeta, Provenance, Table};

/// A FIELD's `datatype` (VOTable 1.4 §2.1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Datatype {
    Boolean,
    Bit,
    UnsignedByte,
    Short,
    Int,
    Long,
    Char,
    UnicodeChar,
    Float,
    Double,
    FloatComplex,
    DoubleComplex,
}

impl Datatype {
    fn parse(s: &str) -> Option<Datatype> {
        Some(match s {
            "boolean" => Datatype::Boolean,
            "bit" => Datatype::Bit,
            "unsignedByte" => Datatype::UnsignedByte,
            "short" => Datatype::Short,
            "int" => Datatype::Int,
            "long" => Datatype::Long,
            "char" => Datatype::Char,
            "unicodeChar" => Datatype::UnicodeChar,
            "float" => Datatype::Float,
            "double" => Datatype::Double,
            "floatComplex" => Datatype::FloatComplex,
            "doubleComplex" => Datatype::DoubleComplex,
            _ => return None,
        })
    }

    /// Bytes of one element in a binary stream (`bit` is counted in bits, see [`cell_bytes`]).
    fn bytes(self) -> usize {
        match self {
            Datatype::Boolean | Datatype::Bit | Datatype::UnsignedByte | Datatype::Char => 1,
            Datatype::Short | Datatype::UnicodeChar => 2,
            Datatype::Int | Datatype::Float => 4,
            Datatype::Long | Datatype::Double | Datatype::FloatComplex => 8,
            Datatype::DoubleComplex => 16,
        }
    }
}

/// A FIELD's `arraysize`: elements per cell, fixed or with a count in the stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum ArraySize {
    /// `fixed` elements (1 for a scalar); `dimensions` how many axes the arraysize gave.
    Fixed { elements: usize, dimensions: usize },
    /// `factor` × a count read before each cell (`*`, `10*`, `3x*`).
    Variable { factor: usize, dimensions: usize },
}

impl ArraySize {
    fn parse(s: Option<&str>) -> Result<ArraySize, String> {
        let Some(s) = s.map(str::trim).filter(|s| !s.is_empty()) else {
            return Ok(ArraySize::Fixed {
                elements: 1,
                dimensions: 0,
            });
        };
        let parts: Vec<&str> = s.split('x').collect();
        let mut product: usize = 1;
        let last = parts.len() - 1;
        for (i, p) in parts.iter().enumerate() {
            if i == last && p.ends_with('*') {
                // "*" or "N*": the count is in each cell (N is only a maximum).
                let max = p.trim_end_matches('*');
                if !max.is_empty() && max.parse::<u64>().is_err() {
                    return Err(format!("arraysize '{s}' is not a size"));
                }
                return Ok(ArraySize::Variable {
                    factor: product,
                    dimensions: parts.len(),
                });
            }
            let n: usize = p
                .parse()
                .map_err(|_| format!("arraysize '{s}' is not a size"))?;
            product = product
                .checked_mul(n)
                .ok_or_else(|| format!("arraysize '{s}' is larger than any file can hold"))?;
        }
        Ok(ArraySize::Fixed {
            elements: product,
            dimensions: parts.len(),
        })
    }

    fn dimensions(self) -> usize {
        match self {
            ArraySize::Fixed { dimensions, .. } | ArraySize::Variable { dimensions, .. } => {
                dimensions
            }
        }
    }
}

/// What becomes of a FIELD's cells.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Bool,
    Int,
    Float,
    Text,
    /// Not one number, flag or text per cell: left out.
    LeftOut,
}

#[derive(Debug, Clone)]
struct Field {
    name: String,
    datatype: Datatype,
    arraysize: ArraySize,
    kind: Kind,
    meta: ColumnMeta,
    null: Option<String>,
    coosys: Option<String>,
}

impl Field {
    fn from_element(e: &BytesStart, number: usize) -> Result<Field, String> {
        let attrs = attributes(e)?;
        let get = |k: &str| attrs.get(k).map(String::as_str);
        let name = get("name")
            .or(get("ID"))
            .map(str::to_string)
            .filter(|s| !s.is_empty())
            .unwrap_or_else(|| format!("col{number}"));
        let label = format!("FIELD {number} ('{name}')");
        let datatype = match get("datatype") {
            None => return Err(format!("{label} has no datatype")),
            Some(d) => Datatype::parse(d)
                .ok_or_else(|| format!("{label}: datatype '{d}' is not a VOTable 1.4 datatype"))?,
        };
        let arraysize = ArraySize::parse(get("arraysize")).map_err(|m| format!("{label}: {m}"))?;
        let scalar = arraysize
            == ArraySize::Fixed {
                elements: 1,
                dimensions: 0,
            }
            || arraysize
                == ArraySize::Fixed {
                    elements: 1,
                    dimensions: 1,
                };
        let kind = match datatype {
            Datatype::Char | Datatype::UnicodeChar if arraysize.dimensions() <= 1 => Kind::Text,
            // A single bit is a flag (astropy writes booleans so).
            Datatype::Boolean | Datatype::Bit if scalar => Kind::Bool,
            Datatype::UnsignedByte | Datatype::Short | Datatype::Int | Datatype::Long if scalar => {
                Kind::Int
            }
            Datatype::Float | Datatype::Double if scalar => Kind::Float,
            _ => Kind::LeftOut,
        };
        let text = |k: &str| {
            get(k)
                .map(str::trim)
                .filter(|s| !s.is_empty())
                .map(String::from)
        };
        Ok(Field {
            name,
            datatype,
            arraysize,
            kind,
            meta: ColumnMeta {
                unit: text("unit"),
                ucd: text("ucd"),
                description: None,
            },
            null: None,
            coosys: text("ref"),
        })
    }

    fn label(&self) -> String {
        format!("column '{}'", self.name)
    }
}

/// One column being filled.
enum Cells {
    Bool(Vec<Option<bool>>),
    Int(Vec<Option<i64>>),
    Float(Vec<Option<f64>>),
    Text(Vec<Option<String>>),
    None,
}

impl Cells {
    fn for_kind(kind: Kind) -> Cells {
        match kind {
            Kind::Bool => Cells::Bool(vec![]),
            Kind::Int => Cells::Int(vec![]),
            Kind::Float => Cells::Float(vec![]),
            Kind::Text => Cells::Text(vec![]),
            Kind::LeftOut => Cells::None,
        }
    }

    fn push_null(&mut self) {
        match self {
            Cells::Bool(v) => v.push(None),
            Cells::Int(v) => v.push(None),
            Cells::Float(v) => v.push(None),
            Cells::Text(v) => v.push(None),
            Cells::None => {}
        }
    }
}

/// A COOSYS element: its system and equinox.
#[derive(Debug, Clone)]
struct CooSys {
    system: String,
    equinox: Option<String>,
}

/// What was found of the chosen table.
#[derive(Default)]
struct Found {
    fields: Vec<Field>,
    cells: Vec<Cells>,
    rows: usize,
    infos: Vec<(String, String)>,
    name: String,
}

/// The text being gathered, and for what.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Gather {
    Description,
    Cell,
    Stream,
}

/// Read the TABLE `select` chooses (see the [module documentation](super)).
pub fn read_votable(path: &Path, select: Option<&str>) -> Result<Table, CatalogueError> {
    let text = read_text(path)?;
    let (found, coosys, notes) =
        parse(&text, select, true).map_err(|m| CatalogueError::read(path, m))?;
    into_table(path, found, &coosys, notes)
}

/// The provenance a VOTable carries: the `INFO` elements (`name`, `value`) of the RESOURCE
/// that holds the TABLE `select` chooses, in order.
pub fn read_votable_provenance(
    path: &Path,
    select: Option<&str>,
) -> Result<Provenance, CatalogueError> {
    let text = read_text(path)?;
    let (found, _, _) = parse(&text, select, false).map_err(|m| CatalogueError::read(path, m))?;
    Ok(Provenance {
        entries: found.infos,
    })
}

fn read_text(path: &Path) -> Result<String, CatalogueError> {
    let bytes = std::fs::read(path).map_err(|e| CatalogueError::read(path, e.to_string()))?;
    String::from_utf8(bytes).map_err(|e| {
        CatalogueError::read(
            path,
            format!(
                "not a VOTable in UTF-8: byte {} is not UTF-8 text",
                e.utf8_error().valid_up_to() + 1
            ),
        )
    })
}

fn attributes(e: &BytesStart) -> Result<HashMap<String, String>, String> {
    let mut out = HashMap::new();
    for a in e.attributes() {
        let a = a.map_err(|err| format!("element <{}>: {err}", local(e)))?;
        let key = String::from_utf8_lossy(a.key.local_name().as_ref()).into_owned();
        let value = a
            .unescape_value()
            .map_err(|err| format!("element <{}>, attribute {key}: {err}", local(e)))?
            .into_owned();
        out.insert(key, value);
    }
    Ok(out)
}

fn local(e: &BytesStart) -> String {
    String::from_utf8_lossy(e.local_name().as_ref()).into_owned()
}

/// What one walk of the document gives: the chosen table, the COOSYS elements by ID, and
/// notes for the run's summary.
type Parsed = (Found, HashMap<String, CooSys>, Vec<String>);

/// Walk the document once. `data`: decode the rows (otherwise only FIELDs and INFOs).
fn parse(text: &str, select: Option<&str>, data: bool) -> Result<Parsed, String> {
    let mut reader = Reader::from_str(text);
    reader.config_mut().expand_empty_elements = true;
    let mut stack: Vec<String> = Vec::new();
    let mut tables: Vec<String> = Vec::new();
    let mut coosys: HashMap<String, CooSys> = HashMap::new();
    let mut notes = Vec::new();
    // RESOURCE numbers open now, and the INFOs of each.
    let mut resources: Vec<usize> = Vec::new();
    let mut resource_count = 0usize;
    let mut infos: Vec<(usize, String, String)> = Vec::new();
    let mut chosen_resource: Option<usize> = None;
    let mut in_chosen = false;
    let mut done = false;
    let mut found = Found::default();
    let mut gather: Option<Gather> = None;
    let mut buffer = String::new();
    let mut row: Vec<String> = Vec::new();
    let mut stream_kind = "";
    let mut saw_root = false;

    loop {
        let position = reader.buffer_position();
        let event = reader
            .read_event()
            .map_err(|e| format!("not well-formed XML near byte {position}: {e}"))?;
        match event {
            Event::Start(e) => {
                let name = local(&e);
                if !saw_root {
                    if name != "VOTABLE" {
                        return Err(format!(
                            "not a VOTable: the root element is <{name}>, not <VOTABLE>"
                        ));
                    }
                    saw_root = true;
                }
                let parent = stack.last().map(String::as_str).unwrap_or("");
                match name.as_str() {
                    "RESOURCE" => {
                        resource_count += 1;
                        resources.push(resource_count);
                    }
                    "INFO" if parent == "RESOURCE" => {
                        let a = attributes(&e)?;
                        if let (Some(k), Some(&r)) = (a.get("name"), resources.last()) {
                            infos.push((r, k.clone(), a.get("value").cloned().unwrap_or_default()));
                        }
                    }
                    "COOSYS" => {
                        let a = attributes(&e)?;
                        if let Some(id) = a.get("ID") {
                            coosys.insert(
                                id.clone(),
                                CooSys {
                                    system: a.get("system").cloned().unwrap_or_default(),
                                    equinox: a.get("equinox").cloned(),
                                },
                            );
                        }
                    }
                    "TABLE" => {
                        let a = attributes(&e)?;
                        let label = a.get("name").or(a.get("ID")).cloned().unwrap_or_default();
                        tables.push(label.clone());
                        let number = tables.len();
                        let wanted = match select {
                            None => number == 1,
                            Some(s) if !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit()) => {
                                s.parse::<usize>().ok() == Some(number)
                            }
                            Some(s) => {
                                a.get("name").is_some_and(|n| n.eq_ignore_ascii_case(s))
                                    || a.get("ID").is_some_and(|n| n.eq_ignore_ascii_case(s))
                            }
                        };
                        if wanted && !done {
                            in_chosen = true;
                            chosen_resource = resources.last().copied();
                            found.name = if label.is_empty() {
                                format!("TABLE {number}")
                            } else {
                                format!("TABLE '{label}'")
                            };
                        }
                    }
                    "FIELD" if in_chosen && parent == "TABLE" => {
                        let number = found.fields.len() + 1;
                        let field = Field::from_element(&e, number)
                            .map_err(|m| format!("{}: {m}", found.name))?;
                        found.cells.push(Cells::for_kind(field.kind));
                        found.fields.push(field);
                    }
                    "DESCRIPTION" if in_chosen && parent == "FIELD" => {
                        gather = Some(Gather::Description);
                        buffer.clear();
                    }
                    "VALUES" if in_chosen && parent == "FIELD" => {
                        let a = attributes(&e)?;
                        if let (Some(n), Some(f)) = (a.get("null"), found.fields.last_mut()) {
                            f.null = Some(n.trim().to_string());
                        }
                    }
                    "FITS" if in_chosen && parent == "DATA" => {
                        return Err(format!(
                            "{}: the FITS serialisation inside a VOTable is not read; give \
                             the table as TABLEDATA, BINARY or BINARY2",
                            found.name
                        ));
                    }
                    "BINARY" | "BINARY2" if in_chosen && parent == "DATA" => {
                        stream_kind = if name == "BINARY" {
                            "BINARY"
                        } else {
                            "BINARY2"
                        };
                    }
                    "STREAM" if in_chosen && data => {
                        let a = attributes(&e)?;
                        if a.contains_key("href") {
                            return Err(format!(
                                "{}: the {stream_kind} STREAM refers to another file (href); \
                                 only inline streams are read",
                                found.name
                            ));
                        }
                        match a.get("encoding").map(String::as_str) {
                            Some("base64") => {}
                            other => {
                                return Err(format!(
                                    "{}: STREAM encoding '{}' is not read; only inline base64",
                                    found.name,
                                    other.unwrap_or("none")
                                ))
                            }
                        }
                        gather = Some(Gather::Stream);
                        buffer.clear();
                    }
                    "TR" if in_chosen && data => row.clear(),
                    "TD" if in_chosen && data => {
                        let a = attributes(&e)?;
                        if a.contains_key("encoding") {
                            return Err(format!(
                                "{}, row {}: encoded TD cells are not read",
                                found.name,
                                found.rows + 1
                            ));
                        }
                        gather = Some(Gather::Cell);
                        buffer.clear();
                    }
                    _ => {}
                }
                stack.push(name);
            }
            Event::End(e) => {
                let name = String::from_utf8_lossy(e.local_name().as_ref()).into_owned();
                stack.pop();
                match name.as_str() {
                    "RESOURCE" => {
                        resources.pop();
                    }
                    "TABLE" if in_chosen => {
                        in_chosen = false;
                        done = true;
                    }
                    "DESCRIPTION" if gather == Some(Gather::Description) => {
                        gather = None;
                        if let Some(f) = found.fields.last_mut() {
                            let d = buffer.trim();
                            if !d.is_empty() {
                                f.meta.description = Some(d.to_string());
                            }
                        }
                    }
                    "TD" if gather == Some(Gather::Cell) => {
                        gather = None;
                        row.push(std::mem::take(&mut buffer));
                    }
                    "TR" if in_chosen && data => {
                        push_text_row(&mut found, &row)?;
                    }
                    "STREAM" if gather == Some(Gather::Stream) => {
                        gather = None;
                        push_stream(&mut found, &buffer, stream_kind == "BINARY2")?;
                        buffer.clear();
                    }
                    _ => {}
                }
            }
            Event::Text(t) if gather.is_some() => {
                let s = t
                    .xml10_content()
                    .map_err(|e| format!("{}: text: {e}", found.name))?;
                buffer.push_str(&s);
            }
            Event::CData(t) if gather.is_some() => {
                let s = t
                    .decode()
                    .map_err(|e| format!("{}: CDATA: {e}", found.name))?;
                buffer.push_str(&s);
            }
            Event::GeneralRef(r) if gather.is_some() => {
                if let Some(c) = r
                    .resolve_char_ref()
                    .map_err(|e| format!("{}: {e}", found.name))?
                {
                    buffer.push(c);
                } else {
                    let n = r.decode().map_err(|e| format!("{}: {e}", found.name))?;
                    match quick_xml::escape::resolve_xml_entity(&n) {
                        Some(s) => buffer.push_str(s),
                        None => return Err(format!("{}: unknown entity '&{n};'", found.name)),
                    }
                }
            }
            Event::Eof => break,
            _ => {}
        }
    }
    if !saw_root {
        return Err("not a VOTable: the file holds no XML element".to_string());
    }
    if found.name.is_empty() {
        let list = if tables.is_empty() {
            "the file has no TABLE".to_string()
        } else {
            format!(
                "its tables are {}",
                tables
                    .iter()
                    .enumerate()
                    .map(|(i, n)| if n.is_empty() {
                        format!("{} (no name)", i + 1)
                    } else {
                        format!("{} '{n}'", i + 1)
                    })
                    .collect::<Vec<_>>()
                    .join(", ")
            )
        };
        return Err(match select {
            None => list,
            Some(s) => format!("no TABLE '{s}': {list}"),
        });
    }
    found.infos = infos
        .into_iter()
        .filter(|(r, _, _)| Some(*r) == chosen_resource)
        .map(|(_, k, v)| (k, v))
        .collect();
    let left: Vec<String> = found
        .fields
        .iter()
        .filter(|f| f.kind == Kind::LeftOut)
        .map(|f| format!("'{}'", f.name))
        .collect();
    if !left.is_empty() {
        notes.push(format!(
            "{}: columns flowsift cannot read (it reads one number, flag or text per cell) \
             were left out: {}.",
            found.name,
            left.join(", ")
        ));
    }
    Ok((found, coosys, notes))
}

/// One TABLEDATA row.
fn push_text_row(found: &mut Found, cells: &[String]) -> Result<(), String> {
    let row = found.rows + 1;
    if cells.len() != found.fields.len() {
        return Err(format!(
            "{}, row {row}: {} TD cells where the table has {} FIELDs",
            found.name,
            cells.len(),
            found.fields.len()
        ));
    }
    for ((field, column), text) in found.fields.iter().zip(&mut found.cells).zip(cells) {
        let t = text.trim();
        let is_null = t.is_empty() || field.null.as_deref() == Some(t);
        let bad = |what: &str| {
            format!(
                "{}, row {row}, {}: '{t}' is not {what}",
                found.name,
                field.label()
            )
        };
        match column {
            Cells::None => {}
            Cells::Text(v) => {
                let s = text.trim_end_matches([' ', '\0']);
                v.push((!s.is_empty()).then(|| s.to_string()));
            }
            _ if is_null => column.push_null(),
            Cells::Bool(v) => v.push(match t {
                "T" | "t" | "1" | "true" | "True" | "TRUE" => Some(true),
                "F" | "f" | "0" | "false" | "False" | "FALSE" => Some(false),
                "?" => None,
                _ => return Err(bad("a boolean (T, F or ?)")),
            }),
            Cells::Int(v) => v.push(Some(parse_int(t).ok_or_else(|| bad("an integer"))?)),
            Cells::Float(v) => {
                let x: f64 = t.parse().map_err(|_| bad("a number"))?;
                v.push((!x.is_nan()).then_some(x));
            }
        }
    }
    found.rows += 1;
    Ok(())
}

/// An integer in decimal or `0x` hexadecimal (VOTable 1.4 §6).
fn parse_int(t: &str) -> Option<i64> {
    let (neg, body) = match t.strip_prefix('-') {
        Some(b) => (true, b),
        None => (false, t.strip_prefix('+').unwrap_or(t)),
    };
    let v = if let Some(h) = body.strip_prefix("0x").or(body.strip_prefix("0X")) {
        i64::from_str_radix(h, 16).ok()?
    } else {
        t.parse::<i64>().ok()?
    };
    Some(if neg && body.starts_with("0x") { -v } else { v })
}

/// Bytes left in a stream, read from the front.
struct Cursor<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Cursor<'a> {
    fn take(&mut self, n: usize) -> Option<&'a [u8]> {
        let end = self.at.checked_add(n)?;
        let s = self.bytes.get(self.at..end)?;
        self.at = end;
        Some(s)
    }
}

/// The rows of a BINARY or BINARY2 stream.
fn push_stream(found: &mut Found, text: &str, with_nulls: bool) -> Result<(), String> {
    let compact: String = text.chars().filter(|c| !c.is_ascii_whitespace()).collect();
    let bytes = base64::engine::general_purpose::STANDARD
        .decode(compact.as_bytes())
        .map_err(|e| format!("{}: the STREAM is not valid base64: {e}", found.name))?;
    let mut cursor = Cursor {
        bytes: &bytes,
        at: 0,
    };
    let mask_bytes = found.fields.len().div_ceil(8);
    while cursor.at < bytes.len() {
        let row = found.rows + 1;
        let ended = |what: &str| {
            format!(
                "{}, row {row}: the stream ends inside the row ({what}); the stream is \
                 truncated or the FIELDs do not describe it",
                found.name
            )
        };
        let mask = if with_nulls {
            cursor
                .take(mask_bytes)
                .ok_or_else(|| ended("null bitmap"))?
                .to_vec()
        } else {
            vec![]
        };
        for (i, (field, column)) in found.fields.iter().zip(&mut found.cells).enumerate() {
            let null_bit = with_nulls && mask[i / 8] & (0x80 >> (i % 8)) != 0;
            let elements = match field.arraysize {
                ArraySize::Fixed { elements, .. } => elements,
                ArraySize::Variable { factor, .. } => {
                    let count = cursor.take(4).ok_or_else(|| ended(&field.label()))?;
                    let count = u32::from_be_bytes([count[0], count[1], count[2], count[3]]);
                    (count as usize).checked_mul(factor).ok_or_else(|| {
                        format!(
                            "{}, row {row}, {}: the cell's size overflows",
                            found.name,
                            field.label()
                        )
                    })?
                }
            };
            let size = if field.datatype == Datatype::Bit {
                elements.div_ceil(8)
            } else {
                elements
                    .checked_mul(field.datatype.bytes())
                    .ok_or_else(|| {
                        format!(
                            "{}, {}: arraysize larger than any stream can hold",
                            found.name,
                            field.label()
                        )
                    })?
            };
            let cell = cursor.take(size).ok_or_else(|| ended(&field.label()))?;
            if null_bit {
                column.push_null();
                continue;
            }
            push_binary_cell(field, column, cell);
        }
        found.rows += 1;
    }
    Ok(())
}

/// One binary cell of a kept column (VOTable 1.4 §5.3: big-endian, IEEE floats).
fn push_binary_cell(field: &Field, column: &mut Cells, cell: &[u8]) {
    let null_int = field.null.as_deref().and_then(parse_int);
    match column {
        Cells::None => {}
        // A single bit is the byte's most significant bit, the rest padding (VOTable 1.4
        // §5.3); astropy 8.0.2 writes a set bit as 0x08 (seen in the fixture
        // astropy_binary.vot), so any set bit counts.
        Cells::Bool(v) if field.datatype == Datatype::Bit => v.push(Some(cell[0] != 0)),
        Cells::Bool(v) => v.push(match cell[0] {
            b'T' | b't' | b'1' => Some(true),
            b'F' | b'f' | b'0' => Some(false),
            _ => None,
        }),
        Cells::Int(v) => {
            let x = match field.datatype {
                Datatype::UnsignedByte => cell[0] as i64,
                Datatype::Short => i16::from_be_bytes([cell[0], cell[1]]) as i64,
                Datatype::Int => i32::from_be_bytes([cell[0], cell[1], cell[2], cell[3]]) as i64,
                _ => i64::from_be_bytes(cell.try_into().unwrap_or([0; 8])),
            };
            v.push((null_int != Some(x)).then_some(x));
        }
        Cells::Float(v) => {
            let x = if field.datatype == Datatype::Float {
                f32::from_be_bytes([cell[0], cell[1], cell[2], cell[3]]) as f64
            } else {
                f64::from_be_bytes(cell.try_into().unwrap_or([0; 8]))
            };
            let null = x.is_nan()
                || field
                    .null
                    .as_deref()
                    .and_then(|n| n.parse::<f64>().ok())
                    .is_some_and(|n| n == x);
            v.push((!null).then_some(x));
        }
        Cells::Text(v) => {
            let s = if field.datatype == Datatype::UnicodeChar {
                let units: Vec<u16> = cell
                    .chunks_exact(2)
                    .map(|p| u16::from_be_bytes([p[0], p[1]]))
                    .collect();
                String::from_utf16_lossy(&units)
            } else {
                String::from_utf8_lossy(cell).into_owned()
            };
            // A fixed-size string ends at its first NUL (VOTable 1.4 §2.1).
            let s = s.split('\0').next().unwrap_or("").trim_end();
            v.push((!s.is_empty()).then(|| s.to_string()));
        }
    }
}

fn into_table(
    path: &Path,
    found: Found,
    coosys: &HashMap<String, CooSys>,
    notes: Vec<String>,
) -> Result<Table, CatalogueError> {
    let err = |m: String| CatalogueError::read(path, format!("{}: {m}", found.name));
    let mut columns = Vec::new();
    let mut meta = BTreeMap::new();
    let mut seen = std::collections::HashSet::new();
    for (field, cells) in found.fields.iter().zip(found.cells) {
        if field.kind == Kind::LeftOut {
            continue;
        }
        if !seen.insert(field.name.clone()) {
            return Err(err(format!(
                "two FIELDs are named '{}'; column names must differ",
                field.name
            )));
        }
        let name: PlSmallStr = field.name.as_str().into();
        let column = match cells {
            Cells::Bool(v) => Column::new(name, v),
            Cells::Int(v) => Column::new(name, v),
            Cells::Float(v) => Column::new(name, v),
            Cells::Text(v) => Column::new(name, v),
            Cells::None => continue,
        };
        columns.push(column);
        if field.meta != ColumnMeta::default() {
            meta.insert(field.name.clone(), field.meta.clone());
        }
    }
    let frame =
        DataFrame::new(found.rows, columns).map_err(|e| err(format!("cannot assemble: {e}")))?;
    let mut table = Table::new(frame, meta);
    table.notes = notes
        .into_iter()
        .map(|n| format!("{}: {n}", path.display()))
        .collect();
    // The COOSYS the positions refer to: that of an equatorial FIELD first, else any.
    let referenced = |eq: bool| {
        found
            .fields
            .iter()
            .filter(|f| {
                !eq || f
                    .meta
                    .ucd
                    .as_deref()
                    .is_some_and(|u| u.starts_with("pos.eq"))
            })
            .find_map(|f| f.coosys.as_ref().and_then(|r| coosys.get(r)))
    };
    if let Some(c) = referenced(true).or_else(|| referenced(false)) {
        frame_keywords(path, c, &mut table);
    }
    Ok(table)
}

/// The FITS-style frame keywords a COOSYS states (see the [module documentation](super)).
fn frame_keywords(path: &Path, c: &CooSys, table: &mut Table) {
    let system = c.system.trim();
    let equinox = |default: &str| {
        let e = c.equinox.as_deref().map(str::trim).unwrap_or(default);
        e.trim_start_matches(['J', 'B', 'j', 'b']).to_string()
    };
    let k = &mut table.keywords;
    match system.to_ascii_uppercase().as_str() {
        "ICRS" => {
            k.insert("RADESYS".into(), "ICRS".into());
        }
        "FK5" | "EQ_FK5" => {
            k.insert("RADESYS".into(), "FK5".into());
            k.insert("EQUINOX".into(), equinox("J2000"));
        }
        "FK4" | "EQ_FK4" => {
            k.insert("RADESYS".into(), "FK4".into());
            k.insert("EQUINOX".into(), equinox("B1950"));
        }
        "GALACTIC" | "SUPERGALACTIC" => table.notes.push(format!(
            "{}: the positions' COOSYS states system=\"{system}\"; the columns' names and \
             UCDs choose the sky frame.",
            path.display()
        )),
        "" => {}
        _ => {
            k.insert("RADESYS".into(), system.to_string());
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn arraysizes() {
        assert_eq!(
            ArraySize::parse(Some("*")).unwrap(),
            ArraySize::Variable {
                factor: 1,
                dimensions: 1
            }
        );
        assert_eq!(
            ArraySize::parse(Some("3x10*")).unwrap(),
            ArraySize::Variable {
                factor: 3,
                dimensions: 2
            }
        );
        assert_eq!(
            ArraySize::parse(Some("12")).unwrap(),
            ArraySize::Fixed {
                elements: 12,
                dimensions: 1
            }
        );
        assert!(ArraySize::parse(Some("99999999999x99999999999x99999")).is_err());
        assert!(ArraySize::parse(Some("x")).is_err());
    }

    #[test]
    fn integers_in_decimal_and_hexadecimal() {
        // VOTable 1.4 §6: integers may be written in hexadecimal with a 0x prefix.
        assert_eq!(parse_int("42"), Some(42));
        assert_eq!(parse_int("-7"), Some(-7));
        assert_eq!(parse_int("0x1F"), Some(31));
        assert_eq!(parse_int("-0x10"), Some(-16));
        assert_eq!(parse_int("4.5"), None);
    }
}
