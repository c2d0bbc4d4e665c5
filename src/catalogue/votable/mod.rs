//! VOTable (IVOA VOTable Format Definition, Version 1.4, 2019): one TABLE in, one TABLE out.
//!
//! # Reading ([`read_votable`])
//!
//! * The file must be an XML document whose root element is `VOTABLE` (an `.xml` file that
//!   is anything else is refused with an error naming its root element). Namespaces and
//!   prefixes are ignored; the XML itself is parsed by the `quick-xml` crate.
//! * Table choice: `None` takes the first `TABLE` in the document (the first of the first
//!   `RESOURCE`); `Some("2")` (digits only) takes the second `TABLE` in document order
//!   (counting from 1, as a FITS file's first table is HDU 1); `Some(name)` takes the first
//!   `TABLE` whose `name` (or `ID`) matches, ignoring case. A miss lists every table.
//! * Serialisations: `TABLEDATA`, and `BINARY` or `BINARY2` with an inline base64 `STREAM`
//!   (VOTable 1.4 §5). `FITS`, and streams by `href`, are refused by name.
//! * Column types (VOTable 1.4 §2.1, Table 1):
//!
//!   | FIELD `datatype`                             | polars    | null                        |
//!   |----------------------------------------------|-----------|-----------------------------|
//!   | `boolean`, a single `bit`                    | `Boolean` | `?`, blank, NUL             |
//!   | `unsignedByte`, `short`, `int`, `long`       | `Int64`   | `VALUES null=`; empty `TD`  |
//!   | `float`, `double`                            | `Float64` | NaN; empty `TD`; `VALUES null=` |
//!   | `char`, `unicodeChar` (any one-dimensional `arraysize`) | `String` | empty after trimming trailing blanks and NULs |
//!
//!   `BINARY2` rows start with a null bitmap, one bit per FIELD, most significant bit first
//!   (§5.5); a set bit makes the cell null whatever its bytes. Arrays of numbers, `bit`,
//!   complex types, arrays of bits and multi-dimensional character arrays are left out by name (the run's
//!   summary says so); their bytes are still accounted for in a binary stream.
//! * `unit`, `ucd` and the FIELD's `DESCRIPTION` go into [`Table::meta`].
//! * A `COOSYS` (§3.1) referenced by a FIELD's `ref` states the sky frame as a FITS header
//!   does: `system="ICRS"` becomes `RADESYS = ICRS`; `FK5`/`eq_FK5` and `FK4`/`eq_FK4`
//!   become `RADESYS` with `EQUINOX` (the COOSYS `equinox`, J2000 and B1950 when absent);
//!   `galactic` and `supergalactic` are noted (the columns' names and UCDs decide); any
//!   other system is passed on as `RADESYS`, which the column plan refuses by name.
//! * `INFO` elements of the table's `RESOURCE` are the provenance ([`read_votable_provenance`]).
//!
//! Malformed input is an error naming the file, the element or column, and the row: a
//! `TR` with more or fewer `TD`s than FIELDs, text that is not a number of the FIELD's type,
//! a stream that is not base64 or ends inside a row, an `arraysize` no stream could hold.
//! Nothing is allocated from a size the file states before the bytes are there.
//!
//! # Writing ([`write_votable`])
//!
//! A `VOTABLE version="1.4"` document with one `RESOURCE` holding the provenance as `INFO`
//! elements (`name` = key, `value` = value, in order) and one `TABLE name="flowsift"` in
//! `TABLEDATA` (readable, and robust to any text). FIELDs: floats → `double` (`float` for
//! 32-bit), integers → `long`, booleans → `boolean` (`T`/`F`), text → `char` with
//! `arraysize="*"` (`unicodeChar` when a value is not ASCII); `unit`, `ucd` and
//! `DESCRIPTION` from [`Table::meta`]. Floats are written as the shortest text that reads
//! back to the same number; a null is an empty `TD` (VOTable 1.4 §6), infinities `+Inf` and
//! `-Inf`.

mod read;
mod write;

pub use read::{read_votable, read_votable_provenance};
pub use write::write_votable;

/// `name` of the TABLE that [`write_votable`] writes.
pub const TABLE_NAME: &str = "flowsift";
