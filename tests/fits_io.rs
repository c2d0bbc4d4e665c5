//! FITS binary-table reading and writing (`flowsift::catalogue::fits`).
//!
//! Files are written either by flowsift itself (round trips) or directly with the `fitsio`
//! crate (HDU layouts, vector columns, foreign null conventions). Only the Rust toolchain is
//! needed.

use std::collections::BTreeMap;
use std::path::Path;

use fitsio::images::{ImageDescription, ImageType};
use fitsio::tables::{ColumnDataType, ColumnDescription};
use fitsio::FitsFile;
use polars::prelude::*;

use flowsift::catalogue::fits::{read_fits, read_fits_provenance, write_fits, EXTNAME};
use flowsift::catalogue::{CatalogueError, ColumnMeta, Provenance, Table};

fn tmp() -> tempfile::TempDir {
    tempfile::Builder::new()
        .prefix("flowsift-fits-")
        .tempdir()
        .unwrap()
}

fn f64s(table: &Table, name: &str) -> Vec<Option<f64>> {
    let c = table.frame.column(name).unwrap();
    assert_eq!(c.dtype(), &DataType::Float64, "{name}");
    c.f64().unwrap().iter().collect()
}

fn i64s(table: &Table, name: &str) -> Vec<Option<i64>> {
    let c = table.frame.column(name).unwrap();
    assert_eq!(c.dtype(), &DataType::Int64, "{name}");
    c.i64().unwrap().iter().collect()
}

fn bools(table: &Table, name: &str) -> Vec<Option<bool>> {
    let c = table.frame.column(name).unwrap();
    assert_eq!(c.dtype(), &DataType::Boolean, "{name}");
    c.bool().unwrap().iter().collect()
}

fn strs(table: &Table, name: &str) -> Vec<Option<String>> {
    let c = table.frame.column(name).unwrap();
    assert_eq!(c.dtype(), &DataType::String, "{name}");
    c.str()
        .unwrap()
        .iter()
        .map(|s| s.map(str::to_string))
        .collect()
}

fn names(table: &Table) -> Vec<String> {
    table
        .frame
        .get_column_names()
        .iter()
        .map(|n| n.to_string())
        .collect()
}

fn meta(unit: Option<&str>, ucd: Option<&str>) -> ColumnMeta {
    ColumnMeta {
        unit: unit.map(str::to_string),
        ucd: ucd.map(str::to_string),
        description: None,
    }
}

fn sample_table() -> Table {
    let frame = DataFrame::new(
        4,
        vec![
            Column::new(
                "z".into(),
                &[Some(0.0123), None, Some(-1.5e-300), Some(2.0)],
            ),
            Column::new("n".into(), &[Some(7i64), None, Some(-3), Some(i64::MAX)]),
            Column::new("flag".into(), &[true, false, false, true]),
            Column::new(
                "name".into(),
                &[Some("NGC 4993"), None, Some("Ω-cen"), Some("x")],
            ),
        ],
    )
    .unwrap();
    let mut m = BTreeMap::new();
    m.insert("z".to_string(), meta(None, Some("src.redshift")));
    m.insert("n".to_string(), meta(Some("count"), Some("meta.number")));
    m.insert("name".to_string(), meta(None, Some("meta.id;meta.main")));
    Table::new(frame, m)
}

fn long_value() -> String {
    // 260 characters with quotes, a '%' and runs of blanks (non-ASCII text in a FITS card
    // is spelled out: provenance_cards_are_readable_ascii_with_history).
    let mut s = String::from("flowsift table --input 'cat alogue.fits' --select \"z > 0.01\"  ");
    while s.len() < 240 {
        s.push_str("0123456789 ");
    }
    s.push_str("100% Omega done");
    assert!(s.len() > 200);
    s
}

fn sample_provenance() -> Provenance {
    Provenance {
        entries: vec![
            ("flowsift_version".into(), "0.1.0".into()),
            ("command".into(), long_value()),
            ("empty".into(), String::new()),
            ("leading blanks".into(), "  kept".into()),
            (
                "apex".into(),
                "l=264.021 b=48.253 v=369.82 km/s (it's 'quoted')".into(),
            ),
            (
                "command".into(),
                "a repeated key stays a separate entry".into(),
            ),
            (
                "record".into(),
                r#"{"chain":"mock → velocities","cosmology":"flat ΛCDM","sigma":"σ_* 𝛽"}"#.into(),
            ),
        ],
    }
}

#[test]
fn round_trip_values_meta_and_provenance() {
    let dir = tmp();
    let path = dir.path().join("out.fits");
    let table = sample_table();
    let provenance = sample_provenance();
    write_fits(&path, &table, &provenance).unwrap();

    let back = read_fits(&path, None).unwrap();
    assert_eq!(names(&back), ["z", "n", "flag", "name"]);
    assert_eq!(back.frame.height(), 4);
    assert_eq!(
        f64s(&back, "z"),
        [Some(0.0123), None, Some(-1.5e-300), Some(2.0)]
    );
    assert_eq!(i64s(&back, "n"), [Some(7), None, Some(-3), Some(i64::MAX)]);
    assert_eq!(
        bools(&back, "flag"),
        [Some(true), Some(false), Some(false), Some(true)]
    );
    assert_eq!(
        strs(&back, "name"),
        [
            Some("NGC 4993".to_string()),
            None,
            Some("Ω-cen".to_string()),
            Some("x".to_string())
        ]
    );
    assert_eq!(back.meta, table.meta);

    assert_eq!(read_fits_provenance(&path, None).unwrap(), provenance);
    // The same HDU by its name.
    assert_eq!(
        read_fits_provenance(&path, Some(EXTNAME)).unwrap(),
        provenance
    );
}

#[test]
fn written_file_layout() {
    let dir = tmp();
    let path = dir.path().join("layout.fits");
    write_fits(&path, &sample_table(), &sample_provenance()).unwrap();

    let mut f = FitsFile::open(&path).unwrap();
    assert_eq!(f.num_hdus().unwrap(), 2);
    let primary = f.primary_hdu().unwrap();
    assert_eq!(primary.read_key::<i64>(&mut f, "NAXIS").unwrap(), 0);
    let hdu = f.hdu(1).unwrap();
    assert_eq!(
        hdu.read_key::<String>(&mut f, "EXTNAME").unwrap(),
        "FLOWSIFT"
    );
    let form = |f: &mut FitsFile, k: &str| hdu.read_key::<String>(f, k).unwrap();
    assert_eq!(form(&mut f, "TFORM1"), "1D");
    assert_eq!(form(&mut f, "TFORM2"), "1K");
    assert_eq!(form(&mut f, "TFORM3"), "1L");
    // "Ω-cen" is the longest value: 6 bytes of UTF-8.
    assert_eq!(form(&mut f, "TFORM4"), "8A");
    assert_eq!(hdu.read_key::<i64>(&mut f, "TNULL2").unwrap(), i64::MIN);
    assert_eq!(form(&mut f, "TUNIT2"), "count");
    assert_eq!(form(&mut f, "TUCD1"), "src.redshift");
    assert_eq!(form(&mut f, "PROV001"), "flowsift_version: 0.1.0");
    assert_eq!(form(&mut f, "PROV004"), "leading blanks:   kept");
    // JSON keeps its value in ASCII: non-ASCII characters as \uXXXX escapes (RFC 8259 §7;
    // U+1D6FD as the surrogate pair d835 defd).
    // (A long string: its first card, then CONTINUE cards.)
    let header = String::from_utf8_lossy(&std::fs::read(&path).unwrap()).into_owned();
    assert!(header.contains(
        r#"PROV007 = 'record: {"chain":"mock \u2192 velocities","cosmology":"flat \u039bC&'"#
    ));
    assert!(header.contains(r#"\u03c3_* \ud835\udefd"}'"#));
    assert_eq!(form(&mut f, "LONGSTRN"), "OGIP 1.0");
}

/// Entries that are not JSON are written readable: Greek letters and signs spelled out
/// (flowsift's own table, src/catalogue/ascii.rs), and read back so; HISTORY cards repeat
/// the short settings as sentences.
#[test]
fn provenance_cards_are_readable_ascii_with_history() {
    let dir = tmp();
    let path = dir.path().join("readable.fits");
    let provenance = Provenance {
        entries: vec![
            ("software".into(), "flowsift 0.1.0".into()),
            ("stage".into(), "velocities".into()),
            (
                "cosmology_name".into(),
                "flat ΛCDM, Ω_m = 0.3 ± 0.01".into(),
            ),
            ("sigma_star".into(), "σ_* ≤ 300 km/s".into()),
        ],
    };
    write_fits(&path, &sample_table(), &provenance).unwrap();
    let back = read_fits_provenance(&path, None).unwrap();
    assert_eq!(
        back.entries[2],
        (
            "cosmology_name".to_string(),
            "flat LambdaCDM, Omega_m = 0.3 +/- 0.01".to_string()
        )
    );
    assert_eq!(back.entries[3].1, "sigma_* <= 300 km/s");
    let file = String::from_utf8_lossy(&std::fs::read(&path).unwrap()).into_owned();
    let table_header = &file[file.find("XTENSION").unwrap()..];
    let header = &table_header[..table_header
        .find(&format!("END{}", " ".repeat(77)))
        .unwrap()];
    assert!(header.is_ascii());
    assert!(
        header.contains("HISTORY flowsift 0.1.0 velocities: cosmology_name = flat LambdaCDM"),
        "no HISTORY line"
    );
}

/// Files written before the PROVnnn cards (PRVKnnn key, PRVVnnn value, %XX-escaped UTF-8)
/// are still read.
#[test]
fn earlier_prvk_prvv_cards_are_still_read() {
    let dir = tmp();
    let path = dir.path().join("old.fits");
    write_fits(&path, &sample_table(), &Provenance::default()).unwrap();
    {
        let mut f = FitsFile::edit(&path).unwrap();
        let hdu = f.hdu(1).unwrap();
        hdu.write_key(&mut f, "PRVK001", "cosmology").unwrap();
        hdu.write_key(&mut f, "PRVV001", "flat %CE%9BCDM").unwrap();
        hdu.write_key(&mut f, "PRVK002", "blanks%20").unwrap();
        hdu.write_key(&mut f, "PRVV002", "100%25").unwrap();
    }
    let back = read_fits_provenance(&path, None).unwrap();
    assert_eq!(
        back.entries,
        vec![
            ("cosmology".to_string(), "flat ΛCDM".to_string()),
            ("blanks ".to_string(), "100%".to_string()),
        ]
    );
}

#[test]
fn integer_null_sentinel_avoids_real_values() {
    let dir = tmp();
    let path = dir.path().join("ints.fits");
    let frame = DataFrame::new(
        3,
        vec![
            Column::new("a".into(), &[Some(i64::MIN), None, Some(0)]),
            Column::new("small".into(), &[Some(1i32), Some(-2), None]),
            Column::new("u".into(), &[5u32, 6, 7]),
            Column::new("f32".into(), &[Some(0.1f32), None, Some(-3.5)]),
            Column::new("nan".into(), &[f64::NAN, 1.0, f64::INFINITY]),
            Column::full_null("nothing".into(), 3, &DataType::Null),
            Column::new("maybe".into(), &[None, Some(false), Some(true)]),
        ],
    )
    .unwrap();
    let table = Table::new(frame, BTreeMap::new());
    write_fits(&path, &table, &Provenance::default()).unwrap();
    let back = read_fits(&path, None).unwrap();
    assert_eq!(i64s(&back, "a"), [Some(i64::MIN), None, Some(0)]);
    assert_eq!(i64s(&back, "small"), [Some(1), Some(-2), None]);
    assert_eq!(i64s(&back, "u"), [Some(5), Some(6), Some(7)]);
    assert_eq!(f64s(&back, "f32"), [Some(0.1f32 as f64), None, Some(-3.5)]);
    assert_eq!(f64s(&back, "nan"), [None, Some(1.0), Some(f64::INFINITY)]);
    assert_eq!(f64s(&back, "nothing"), [None, None, None]);
    assert_eq!(bools(&back, "maybe"), [None, Some(false), Some(true)]);
    assert!(back.meta.is_empty());
    assert_eq!(
        read_fits_provenance(&path, None).unwrap(),
        Provenance::default()
    );
}

#[test]
fn gzip_round_trip() {
    let dir = tmp();
    let path = dir.path().join("out.fits.gz");
    let table = sample_table();
    let provenance = sample_provenance();
    write_fits(&path, &table, &provenance).unwrap();

    let bytes = std::fs::read(&path).unwrap();
    assert_eq!(&bytes[..2], &[0x1f, 0x8b], "gzip magic");

    let back = read_fits(&path, None).unwrap();
    assert_eq!(
        f64s(&back, "z"),
        [Some(0.0123), None, Some(-1.5e-300), Some(2.0)]
    );
    assert_eq!(i64s(&back, "n"), [Some(7), None, Some(-3), Some(i64::MAX)]);
    assert_eq!(
        bools(&back, "flag"),
        [Some(true), Some(false), Some(false), Some(true)]
    );
    assert_eq!(
        strs(&back, "name"),
        [
            Some("NGC 4993".to_string()),
            None,
            Some("Ω-cen".to_string()),
            Some("x".to_string())
        ]
    );
    assert_eq!(back.meta, table.meta);
    assert_eq!(read_fits_provenance(&path, None).unwrap(), provenance);

    // Upper-case suffix: still compressed.
    let upper = dir.path().join("OUT.FITS.GZ");
    write_fits(&upper, &table, &provenance).unwrap();
    assert_eq!(&std::fs::read(&upper).unwrap()[..2], &[0x1f, 0x8b]);
    assert_eq!(
        i64s(&read_fits(&upper, None).unwrap(), "n"),
        [Some(7), None, Some(-3), Some(i64::MAX)]
    );
}

#[test]
fn gzip_path_with_bracket_is_refused_cleanly() {
    let dir = tmp();
    let path = dir.path().join("odd[1].fits.gz");
    let e = write_fits(&path, &sample_table(), &Provenance::default()).unwrap_err();
    let msg = e.to_string();
    assert!(matches!(e, CatalogueError::Write { .. }));
    assert!(
        msg.contains("odd[1].fits.gz") && msg.contains("'['"),
        "{msg}"
    );
    assert!(!path.exists());

    // Uncompressed, the same characters are fine: paths are taken literally.
    let plain = dir.path().join("odd[1](2).fits");
    write_fits(&plain, &sample_table(), &Provenance::default()).unwrap();
    assert_eq!(
        i64s(&read_fits(&plain, None).unwrap(), "n"),
        [Some(7), None, Some(-3), Some(i64::MAX)]
    );
}

#[test]
fn writer_refuses_existing_file_and_bad_columns() {
    let dir = tmp();
    let path = dir.path().join("exists.fits");
    std::fs::write(&path, b"keep me").unwrap();
    let e = write_fits(&path, &sample_table(), &Provenance::default()).unwrap_err();
    assert!(e.to_string().contains("already exists"), "{e}");
    assert_eq!(std::fs::read(&path).unwrap(), b"keep me");

    let cases: Vec<(DataFrame, &str)> = vec![
        (
            DataFrame::new(1, vec![Column::new("σ_v".into(), &[1.0f64])]).unwrap(),
            "column name 'σ_v'",
        ),
        (
            DataFrame::new(1, vec![Column::new("big".into(), &[u64::MAX])]).unwrap(),
            "column 'big' (u64) has values outside",
        ),
        (
            DataFrame::new(1, vec![Column::new("bytes".into(), &[b"ab".as_slice()])]).unwrap(),
            "column 'bytes' has type binary",
        ),
        (
            DataFrame::new(2, vec![Column::new("s".into(), &["ok", "a\0b"])]).unwrap(),
            "column 's', row 2: the string contains a NUL",
        ),
    ];
    for (i, (frame, expected)) in cases.into_iter().enumerate() {
        let out = dir.path().join(format!("bad{i}.fits"));
        let table = Table::new(frame, BTreeMap::new());
        let e = write_fits(&out, &table, &Provenance::default()).unwrap_err();
        let msg = e.to_string();
        assert!(msg.contains(expected), "{msg}");
        assert!(msg.contains(&format!("bad{i}.fits")), "{msg}");
        assert!(!out.exists(), "nothing left behind for case {i}");
    }

    // A non-ASCII unit.
    let mut table = sample_table();
    table.meta.insert("z".into(), meta(Some("Å"), None));
    let out = dir.path().join("unit.fits");
    let msg = write_fits(&out, &table, &Provenance::default())
        .unwrap_err()
        .to_string();
    assert!(msg.contains("column 'z': unit 'Å'"), "{msg}");
    assert!(!out.exists());
}

/// Primary image, an image extension, two tables (the second with TNULL and blanks).
fn multi_hdu_file(path: &Path) {
    let mut f = FitsFile::create(path)
        .with_custom_primary(&ImageDescription {
            data_type: ImageType::Short,
            dimensions: &[3, 2],
        })
        .open()
        .unwrap();
    f.create_image(
        "PICTURE",
        &ImageDescription {
            data_type: ImageType::Float,
            dimensions: &[4, 5],
        },
    )
    .unwrap();

    let ra = ColumnDescription::new("RA")
        .with_type(ColumnDataType::Double)
        .create()
        .unwrap();
    let first = f.create_table("FIRST", &[ra]).unwrap();
    first.write_col(&mut f, "RA", &[10.0f64, 20.0]).unwrap();

    let cols = [
        ColumnDescription::new("ID")
            .with_type(ColumnDataType::Int)
            .create()
            .unwrap(),
        ColumnDescription::new("MAG")
            .with_type(ColumnDataType::Float)
            .create()
            .unwrap(),
        ColumnDescription::new("SHORTY")
            .with_type(ColumnDataType::Short)
            .create()
            .unwrap(),
        ColumnDescription::new("LABEL")
            .with_type(ColumnDataType::String)
            .that_repeats(6)
            .create()
            .unwrap(),
    ];
    let second = f.create_table("Second", &cols).unwrap();
    second.write_key(&mut f, "TNULL1", -99i64).unwrap();
    second.write_key(&mut f, "TNULL3", 32767i64).unwrap();
    second.write_key(&mut f, "TUNIT2", "mag").unwrap();
    second
        .write_key(&mut f, "TUCD2", "phot.mag;em.opt.B")
        .unwrap();
    // cfitsio caches TNULL per column: reopen the header before writing data.
    drop(f);
    let mut f = FitsFile::edit(path).unwrap();
    let second = f.hdu("Second").unwrap();
    second.write_col(&mut f, "ID", &[1i32, -99, 3]).unwrap();
    second
        .write_col(&mut f, "MAG", &[12.5f32, f32::NAN, -0.25])
        .unwrap();
    second
        .write_col(&mut f, "SHORTY", &[32767i16, -5, 0])
        .unwrap();
    second
        .write_col(
            &mut f,
            "LABEL",
            &["ab  ".to_string(), "".to_string(), "  c".to_string()],
        )
        .unwrap();
}

#[test]
fn hdu_selection_by_default_name_and_number() {
    let dir = tmp();
    let path = dir.path().join("multi.fits");
    multi_hdu_file(&path);

    // Default: the first binary table, past the primary and the image extension.
    let first = read_fits(&path, None).unwrap();
    assert_eq!(names(&first), ["RA"]);
    assert_eq!(f64s(&first, "RA"), [Some(10.0), Some(20.0)]);

    for spec in ["Second", "SECOND", "second", "3", " 3 "] {
        let t = read_fits(&path, Some(spec)).unwrap();
        assert_eq!(names(&t), ["ID", "MAG", "SHORTY", "LABEL"], "{spec}");
        assert_eq!(i64s(&t, "ID"), [Some(1), None, Some(3)]);
        assert_eq!(f64s(&t, "MAG"), [Some(12.5), None, Some(-0.25)]);
        assert_eq!(i64s(&t, "SHORTY"), [None, Some(-5), Some(0)]);
        assert_eq!(
            strs(&t, "LABEL"),
            [Some("ab".to_string()), None, Some("  c".to_string())]
        );
        let mut expected = BTreeMap::new();
        expected.insert(
            "MAG".to_string(),
            meta(Some("mag"), Some("phot.mag;em.opt.B")),
        );
        assert_eq!(t.meta, expected);
    }
    assert_eq!(names(&read_fits(&path, Some("2")).unwrap()), ["RA"]);
    assert_eq!(names(&read_fits(&path, Some("first")).unwrap()), ["RA"]);
}

#[test]
fn bad_hdu_choices_list_the_hdus() {
    let dir = tmp();
    let path = dir.path().join("multi.fits");
    multi_hdu_file(&path);
    let listing = [
        "0: EXTNAME '_PRIMARY', image 2×3",
        "1: EXTNAME 'PICTURE', image 5×4",
        "2: EXTNAME 'FIRST', binary table (1 columns, 2 rows)",
        "3: EXTNAME 'Second', binary table (4 columns, 3 rows)",
    ];

    let e = read_fits(&path, Some("GALAXIES")).unwrap_err();
    assert!(matches!(e, CatalogueError::Read { .. }));
    let msg = e.to_string();
    assert!(msg.contains(path.to_str().unwrap()), "{msg}");
    assert!(msg.contains("no HDU with EXTNAME 'GALAXIES'"), "{msg}");
    for line in listing {
        assert!(msg.contains(line), "missing {line:?} in\n{msg}");
    }

    let msg = read_fits(&path, Some("7")).unwrap_err().to_string();
    assert!(msg.contains("no HDU number 7"), "{msg}");
    assert!(msg.contains(listing[3]), "{msg}");

    let msg = read_fits(&path, Some("PICTURE")).unwrap_err().to_string();
    assert!(
        msg.contains("HDU 1 (EXTNAME 'PICTURE') is an image 5×4, not a binary table"),
        "{msg}"
    );
    let msg = read_fits_provenance(&path, Some("0"))
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains("HDU 0 (primary, EXTNAME '_PRIMARY') is an image 2×3, not a binary table"),
        "{msg}"
    );

    // No table at all.
    let images = dir.path().join("images.fits");
    FitsFile::create(&images).open().unwrap();
    let msg = read_fits(&images, None).unwrap_err().to_string();
    assert!(msg.contains("no binary-table HDU"), "{msg}");
    assert!(msg.contains("0: no EXTNAME, empty image"), "{msg}");
}

#[test]
fn scaled_and_unsigned_integer_columns() {
    let dir = tmp();
    let path = dir.path().join("scaled.fits");
    {
        let mut f = FitsFile::create(&path).open().unwrap();
        let cols = [
            ColumnDescription::new("VEL")
                .with_type(ColumnDataType::Int)
                .create()
                .unwrap(),
            ColumnDescription::new("COUNT")
                .with_type(ColumnDataType::Short)
                .create()
                .unwrap(),
        ];
        let hdu = f.create_table("SCALED", &cols).unwrap();
        // Raw stored values; the scaling cards are added afterwards.
        hdu.write_col(&mut f, "VEL", &[100i32, -7, 3]).unwrap();
        hdu.write_col(&mut f, "COUNT", &[-32768i16, 0, 32767])
            .unwrap();
        hdu.write_key(&mut f, "TSCAL1", 0.5f64).unwrap();
        hdu.write_key(&mut f, "TZERO1", 10.0f64).unwrap();
        hdu.write_key(&mut f, "TNULL1", -7i64).unwrap();
        hdu.write_key(&mut f, "TZERO2", 32768i64).unwrap();
    }
    let t = read_fits(&path, None).unwrap();
    assert_eq!(f64s(&t, "VEL"), [Some(60.0), None, Some(11.5)]);
    assert_eq!(i64s(&t, "COUNT"), [Some(0), Some(32768), Some(65535)]);
}

#[test]
fn vector_column_is_left_out_by_name() {
    let dir = tmp();
    let path = dir.path().join("vector.fits");
    {
        let mut f = FitsFile::create(&path).open().unwrap();
        let cols = [
            ColumnDescription::new("ID")
                .with_type(ColumnDataType::Int)
                .create()
                .unwrap(),
            ColumnDescription::new("FLUXES")
                .with_type(ColumnDataType::Double)
                .that_repeats(5)
                .create()
                .unwrap(),
        ];
        let hdu = f.create_table("SPECTRA", &cols).unwrap();
        hdu.write_col(&mut f, "ID", &[1i32, 2]).unwrap();
        hdu.write_col(&mut f, "FLUXES", &[0.5f64; 10]).unwrap();
    }
    // The other columns are read; the vector column is named in the table's notes.
    let table = read_fits(&path, None).unwrap();
    assert_eq!(table.frame.get_column_names(), ["ID"]);
    assert_eq!(table.frame.height(), 2);
    let note = table.notes.join(" ");
    assert!(note.contains("HDU 1 (EXTNAME 'SPECTRA')"), "{note}");
    assert!(
        note.contains("'FLUXES' (a vector of 5 values, TFORM '5D')"),
        "{note}"
    );
}

#[test]
fn invalid_utf8_string_names_column_and_row() {
    let dir = tmp();
    let path = dir.path().join("latin1.fits");
    {
        let mut f = FitsFile::create(&path).open().unwrap();
        let col = ColumnDescription::new("OBJECT")
            .with_type(ColumnDataType::String)
            .that_repeats(8)
            .create()
            .unwrap();
        let hdu = f.create_table("NAMES", &[col]).unwrap();
        hdu.write_col(&mut f, "OBJECT", &["ok".to_string(), "fine".to_string()])
            .unwrap();
        // Row 2 rewritten as Latin-1 "Mérope", which is not UTF-8.
        let mut cell: Vec<u8> = b"M\xe9rope\0".to_vec();
        let mut cells = [cell.as_mut_ptr() as *mut std::os::raw::c_char];
        let mut status = 0;
        unsafe {
            fitsio::sys::ffpcls(f.as_raw(), 1, 2, 1, 1, cells.as_mut_ptr(), &mut status);
        }
        assert_eq!(status, 0);
    }
    let msg = read_fits(&path, None).unwrap_err().to_string();
    assert!(msg.contains(path.to_str().unwrap()), "{msg}");
    assert!(
        msg.contains(
            "HDU 1 (EXTNAME 'NAMES'): column 'OBJECT', row 2: the string is not valid UTF-8"
        ),
        "{msg}"
    );
}

#[test]
fn missing_and_non_fits_files_name_the_path() {
    let dir = tmp();
    let missing = dir.path().join("nowhere").join("cat.fits");
    let e = read_fits(&missing, None).unwrap_err();
    assert!(matches!(&e, CatalogueError::Read { path, .. } if *path == missing));
    let msg = e.to_string();
    assert_eq!(msg, format!("{}: no such file", missing.display()));
    assert!(read_fits_provenance(&missing, None).is_err());

    let text = dir.path().join("not.fits");
    std::fs::write(&text, "ra,dec\n1,2\n").unwrap();
    let msg = read_fits(&text, None).unwrap_err().to_string();
    assert!(
        msg.starts_with(&format!("{}: cannot open as FITS", text.display())),
        "{msg}"
    );
}

#[test]
fn empty_table_round_trip() {
    let dir = tmp();
    let path = dir.path().join("empty.fits");
    let frame = DataFrame::new(
        0,
        vec![
            Column::new_empty("z".into(), &DataType::Float64),
            Column::new_empty("name".into(), &DataType::String),
        ],
    )
    .unwrap();
    let table = Table::new(frame, BTreeMap::new());
    write_fits(&path, &table, &Provenance::default()).unwrap();
    let back = read_fits(&path, None).unwrap();
    assert_eq!(back.frame.height(), 0);
    assert_eq!(names(&back), ["z", "name"]);
    assert_eq!(
        back.frame.column("name").unwrap().dtype(),
        &DataType::String
    );
}

/// Many rows cross cfitsio's block boundaries; every value is checked.
#[test]
fn many_rows_round_trip_exactly() {
    let dir = tmp();
    let path = dir.path().join("big.fits");
    let n = 100_003usize;
    let z: Vec<Option<f64>> = (0..n)
        .map(|i| (i % 97 != 0).then(|| i as f64 * 1.0e-5 + 1.0 / 3.0))
        .collect();
    let id: Vec<Option<i64>> = (0..n)
        .map(|i| (i % 101 != 5).then_some(i as i64 * 7 - 3))
        .collect();
    let flag: Vec<Option<bool>> = (0..n)
        .map(|i| (i % 13 != 1).then_some(i % 3 == 0))
        .collect();
    let label: Vec<Option<String>> = (0..n)
        .map(|i| (i % 17 != 2).then(|| format!("G{i}")))
        .collect();
    let frame = DataFrame::new(
        n,
        vec![
            Column::new("z".into(), &z),
            Column::new("id".into(), &id),
            Column::new("flag".into(), &flag),
            Column::new("label".into(), &label),
        ],
    )
    .unwrap();
    let table = Table::new(frame, BTreeMap::new());
    write_fits(&path, &table, &Provenance::default()).unwrap();
    let back = read_fits(&path, None).unwrap();
    assert_eq!(f64s(&back, "z"), z);
    assert_eq!(i64s(&back, "id"), id);
    assert_eq!(bools(&back, "flag"), flag);
    assert_eq!(strs(&back, "label"), label);
}

/// Plain columns are decoded from the raw row bytes; the same columns with neutral
/// `TSCALn = 1` / `TZEROn = 0` (or a `TNULLn` that never matches) go through cfitsio's own
/// conversions. Both readings of identical data must agree cell for cell, across several
/// read blocks, for every cell type flowsift reads (FITS Standard 4.0 Table 18).
#[test]
fn raw_decoding_agrees_with_cfitsio_conversion() {
    let dir = tmp();
    let path = dir.path().join("types.fits");
    let n = 250_000usize; // more than one 8 MiB read block at ≈ 60 bytes per row
    let d: Vec<f64> = (0..n)
        .map(|i| match i % 7 {
            0 => f64::NAN,
            1 => f64::INFINITY,
            2 => -1e300,
            _ => (i as f64).sin() * 1e3,
        })
        .collect();
    let e: Vec<f32> = (0..n).map(|i| (i as f32).cos() * -7.5).collect();
    let j: Vec<i32> = (0..n)
        .map(|i| (i as i32).wrapping_mul(2_654_435_761u32 as i32))
        .collect();
    let k: Vec<i64> = (0..n)
        .map(|i| (i as i64).wrapping_mul(-6_364_136_223_846_793_005))
        .collect();
    let s16: Vec<i16> = (0..n).map(|i| (i % 65_536) as i16).collect();
    let b: Vec<u8> = (0..n).map(|i| (i % 256) as u8).collect();
    let a: Vec<String> = (0..n)
        .map(|i| match i % 4 {
            0 => String::new(),
            1 => format!("g{i} "),
            2 => format!(" x{}", i % 13),
            _ => "ab cd".to_string(),
        })
        .collect();
    {
        let mut f = FitsFile::create(&path).open().unwrap();
        for name in ["PLAIN", "CONVERTED"] {
            let col = |c: &str, t: ColumnDataType| {
                ColumnDescription::new(c).with_type(t).create().unwrap()
            };
            let cols = [
                col("D", ColumnDataType::Double),
                col("E", ColumnDataType::Float),
                col("J", ColumnDataType::Int),
                col("K", ColumnDataType::LongLong),
                col("I", ColumnDataType::Short),
                col("B", ColumnDataType::Byte),
                ColumnDescription::new("A")
                    .with_type(ColumnDataType::String)
                    .that_repeats(9)
                    .create()
                    .unwrap(),
                col("L", ColumnDataType::Logical),
            ];
            let hdu = f.create_table(name, &cols).unwrap();
            if name == "CONVERTED" {
                for c in 1..=6 {
                    hdu.write_key(&mut f, &format!("TSCAL{c}"), 1.0f64).unwrap();
                    hdu.write_key(&mut f, &format!("TZERO{c}"), 0.0f64).unwrap();
                }
                hdu.write_key(&mut f, "TNULL7", "@never@").unwrap();
            }
        }
        drop(f);
        let mut f = FitsFile::edit(&path).unwrap();
        for name in ["PLAIN", "CONVERTED"] {
            let hdu = f.hdu(name).unwrap();
            hdu.write_col(&mut f, "D", &d).unwrap();
            hdu.write_col(&mut f, "E", &e).unwrap();
            hdu.write_col(&mut f, "J", &j).unwrap();
            hdu.write_col(&mut f, "K", &k).unwrap();
            hdu.write_col(&mut f, "I", &s16).unwrap();
            hdu.write_col(&mut f, "B", &b).unwrap();
            hdu.write_col(&mut f, "A", &a).unwrap();
            // Logicals as raw bytes (the last cell of each 37-byte row): true, false, null
            // (0) and a stray byte.
            let mut status = 0;
            for i in 0..n {
                let mut cell = [b'T', b'F', 0, b'?'][i % 4];
                unsafe {
                    fitsio::sys::ffptbb(f.as_raw(), (i + 1) as i64, 37, 1, &mut cell, &mut status);
                }
            }
            assert_eq!(status, 0);
        }
    }
    let plain = read_fits(&path, Some("PLAIN")).unwrap();
    let converted = read_fits(&path, Some("CONVERTED")).unwrap();
    assert_eq!(plain.frame.height(), n);
    for c in ["D", "E"] {
        let (p, q) = (f64s(&plain, c), f64s(&converted, c));
        for (i, (x, y)) in p.iter().zip(&q).enumerate() {
            assert_eq!(x.map(f64::to_bits), y.map(f64::to_bits), "{c} row {i}");
        }
    }
    for c in ["J", "K", "I", "B"] {
        assert_eq!(i64s(&plain, c), i64s(&converted, c), "{c}");
    }
    assert_eq!(strs(&plain, "A"), strs(&converted, "A"));
    // Spot checks against the written values: NaN is a null, ±∞ are values, blanks trail.
    let dp = f64s(&plain, "D");
    assert_eq!(
        (dp[0], dp[1], dp[2]),
        (None, Some(f64::INFINITY), Some(-1e300))
    );
    assert_eq!(i64s(&plain, "K")[3], Some(k[3]));
    assert_eq!(i64s(&plain, "B")[255], Some(255));
    let sp = strs(&plain, "A");
    assert_eq!(
        (sp[0].as_deref(), sp[1].as_deref(), sp[2].as_deref()),
        (None, Some("g1"), Some(" x2"))
    );
    let lp = bools(&plain, "L");
    assert_eq!(&lp[..4], &[Some(true), Some(false), None, Some(true)]);
    // The logical column has no scaling keywords: compare with what cfitsio reads itself.
    let mut f = FitsFile::open(&path).unwrap();
    let hdu = f.hdu("PLAIN").unwrap();
    let via_cfitsio: Vec<i32> = hdu.read_col(&mut f, "J").unwrap();
    assert_eq!(
        i64s(&plain, "J"),
        via_cfitsio
            .iter()
            .map(|v| Some(*v as i64))
            .collect::<Vec<_>>()
    );
}

/// A header whose NAXIS2 is absurd (2³¹, 10¹², 2⁶³ − 1 rows) is refused with a message before
/// anything is allocated for it — it does not abort or panic (FITS standard 4.0 §7.3: the
/// data of a binary table are NAXIS1 × NAXIS2 bytes, which the file must hold).
#[test]
fn absurd_row_counts_are_refused_not_allocated() {
    let dir = tmp();
    let good = dir.path().join("good.fits");
    write_fits(&good, &sample_table(), &Provenance::default()).unwrap();
    let bytes = std::fs::read(&good).unwrap();
    let at = bytes
        .windows(9)
        .position(|w| w == b"NAXIS2  =")
        .expect("a NAXIS2 card");
    for rows in ["2147483648", "1000000000000", "9223372036854775807"] {
        let mut damaged = bytes.clone();
        damaged[at + 10..at + 30].copy_from_slice(format!("{rows:>20}").as_bytes());
        let path = dir.path().join(format!("bad{rows}.fits"));
        std::fs::write(&path, &damaged).unwrap();
        let e = read_fits(&path, None).unwrap_err().to_string();
        assert!(e.contains("NAXIS2") && e.contains("damaged"), "{e}");
    }
}
