//! VOTable and ECSV in and out, and the metadata of every writer: the same catalogue as CSV,
//! VOTable (TABLEDATA, BINARY, BINARY2) and ECSV gives the same `velocities` results; every
//! writer's units, UCDs, descriptions and provenance come back; files astropy 8.0.2 wrote
//! (tests/reference/formats/, made by tests/reference/make_format_fixtures.py, values in
//! expected.csv) are read with their values and units; malformed files give errors naming
//! the place, never a panic; a stage's .ecsv or .vot output carries its settings to the next.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use base64::Engine as _;
use polars::prelude::*;

use flowsift::catalogue::{
    ecsv, read_provenance, read_record, read_table, votable, write_table, ColumnMeta, Provenance,
    ReadOptions, Table, WriteOptions,
};

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
}

fn demo_csv() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-data/lantern_survey.csv")
}

fn reference(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference/formats")
        .join(name)
}

fn read(path: &Path) -> Table {
    read_table(path, &ReadOptions::default()).unwrap_or_else(|e| panic!("{e}"))
}

fn write(path: &Path, table: &Table, provenance: &Provenance) {
    write_table(path, table, provenance, &WriteOptions::default()).unwrap_or_else(|e| panic!("{e}"))
}

/// A VOTable in BINARY (or BINARY2) serialisation of `table`'s float, boolean and text
/// columns, written here by the layout of VOTable 1.4 §5 (big-endian doubles, `boolean` as
/// one byte T/F/?, `char` arraysize="*" as a 4-byte count then the bytes; BINARY2 rows
/// start with a null bitmap, most significant bit first).
fn binary_votable(table: &Table, path: &Path, binary2: bool) {
    let cols = table.frame.columns();
    let mut fields = String::new();
    for c in cols {
        let (datatype, size) = match c.dtype() {
            DataType::Float64 => ("double", ""),
            DataType::Boolean => ("boolean", ""),
            DataType::String => ("char", " arraysize=\"*\""),
            d => panic!("{d} not written here"),
        };
        fields.push_str(&format!(
            "<FIELD name=\"{}\" datatype=\"{datatype}\"{size}/>\n",
            c.name()
        ));
    }
    let mut bytes = Vec::new();
    for i in 0..table.frame.height() {
        let mut mask = vec![0u8; cols.len().div_ceil(8)];
        let mut row = Vec::new();
        for (k, c) in cols.iter().enumerate() {
            let v = c.get(i).unwrap();
            if v.is_null() {
                mask[k / 8] |= 0x80 >> (k % 8);
            }
            match v {
                AnyValue::Float64(x) => row.extend_from_slice(&x.to_be_bytes()),
                AnyValue::Boolean(b) => row.push(if b { b'T' } else { b'F' }),
                AnyValue::String(s) => {
                    row.extend_from_slice(&(s.len() as u32).to_be_bytes());
                    row.extend_from_slice(s.as_bytes());
                }
                AnyValue::Null => match c.dtype() {
                    DataType::Float64 => row.extend_from_slice(&f64::NAN.to_be_bytes()),
                    DataType::Boolean => row.push(b'?'),
                    _ => row.extend_from_slice(&0u32.to_be_bytes()),
                },
                other => panic!("{other:?}"),
            }
        }
        if binary2 {
            bytes.extend_from_slice(&mask);
        }
        bytes.extend_from_slice(&row);
    }
    let stream = base64::engine::general_purpose::STANDARD.encode(&bytes);
    // Line breaks every 76 characters, as MIME base64 writers do.
    let wrapped: Vec<String> = stream
        .as_bytes()
        .chunks(76)
        .map(|c| String::from_utf8(c.to_vec()).unwrap())
        .collect();
    let kind = if binary2 { "BINARY2" } else { "BINARY" };
    let text = format!(
        "<?xml version=\"1.0\"?>\n<VOTABLE version=\"1.4\" \
         xmlns=\"http://www.ivoa.net/xml/VOTable/v1.3\">\n<RESOURCE>\n<TABLE name=\"demo\">\n\
         {fields}<DATA><{kind}><STREAM encoding=\"base64\">\n{}\n</STREAM></{kind}></DATA>\n\
         </TABLE>\n</RESOURCE>\n</VOTABLE>\n",
        wrapped.join("\n")
    );
    std::fs::write(path, text).unwrap();
}

fn velocities(input: &Path, output: &Path) {
    flowsift()
        .args(["velocities", input.to_str().unwrap(), "-o"])
        .arg(output)
        .assert()
        .success();
}

/// The derived columns, bit for bit.
fn derived(path: &Path) -> Vec<(String, Vec<Option<u64>>)> {
    let t = read(path);
    [
        "z_cmb",
        "z_cos",
        "z_pec",
        "v_pec",
        "v_pec_err",
        "eta",
        "d_c",
    ]
    .iter()
    .map(|n| {
        let c = t.frame.column(n).unwrap().f64().unwrap().clone();
        (
            n.to_string(),
            c.iter().map(|v| v.map(f64::to_bits)).collect(),
        )
    })
    .collect()
}

#[test]
fn csv_votable_and_ecsv_inputs_give_identical_velocities() {
    let dir = tempfile::tempdir().unwrap();
    let d = |n: &str| dir.path().join(n);
    let table = read(&demo_csv());
    write(&d("in.vot"), &table, &Provenance::default());
    write(&d("in.ecsv"), &table, &Provenance::default());
    binary_votable(&table, &d("in_binary.votable"), false);
    binary_votable(&table, &d("in_binary2.xml"), true);
    velocities(&demo_csv(), &d("from_csv.csv"));
    let expected = derived(&d("from_csv.csv"));
    assert_eq!(expected[0].1.len(), table.frame.height());
    for input in ["in.vot", "in.ecsv", "in_binary.votable", "in_binary2.xml"] {
        let out = d(&format!("from_{input}.csv"));
        velocities(&d(input), &out);
        assert_eq!(derived(&out), expected, "{input}");
    }
}

fn sample() -> (Table, Provenance) {
    let frame = DataFrame::new(
        3,
        vec![
            Column::new("z".into(), &[Some(0.0123456789012345), None, Some(-1e-300)]),
            Column::new("n".into(), &[Some(7i64), Some(i64::MIN + 1), None]),
            Column::new("ok".into(), &[Some(true), None, Some(false)]),
            Column::new(
                "name".into(),
                &[
                    Some("Ω-cen <&> \"q\" 'a'"),
                    None,
                    Some("two  blanks, comma"),
                ],
            ),
        ],
    )
    .unwrap();
    let meta = [
        (
            "z",
            Some("km/s"),
            Some("src.redshift"),
            Some("a ± b, with <markup> & σ"),
        ),
        ("n", None, Some("meta.number"), None),
        ("name", None, Some("meta.id"), Some("object name")),
    ]
    .into_iter()
    .map(|(n, unit, ucd, d)| {
        (
            n.to_string(),
            ColumnMeta {
                unit: unit.map(String::from),
                ucd: ucd.map(String::from),
                description: d.map(String::from),
            },
        )
    })
    .collect();
    let provenance = Provenance {
        entries: vec![
            ("software".into(), "flowsift 0.1.0".into()),
            (
                "cosmology".into(),
                "flat ΛCDM: \"quoted\", 'single' & <tag>".into(),
            ),
            ("empty".into(), String::new()),
            ("multi".into(), "line one\nline two\ttab".into()),
            (
                "record".into(),
                r#"{"chain":"mock → velocities","x":1.5e-7,"n":null}"#.into(),
            ),
        ],
    };
    (Table::new(frame, meta), provenance)
}

/// What each writer keeps: VOTable and ECSV the values, types, units, UCDs, descriptions and
/// provenance exactly; Parquet too (Arrow field metadata and key-value entries).
#[test]
fn every_writer_round_trips_values_metadata_and_provenance() {
    let dir = tempfile::tempdir().unwrap();
    let (table, provenance) = sample();
    for name in ["t.vot", "t.ecsv", "t.parquet", "t.xml"] {
        let path = dir.path().join(name);
        write(&path, &table, &provenance);
        let back = read(&path);
        assert_eq!(back.frame, table.frame, "{name}");
        assert_eq!(back.meta, table.meta, "{name}");
        let found = read_provenance(&path, None).unwrap();
        assert_eq!(found.provenance, provenance, "{name}: {}", found.origin);
    }
}

/// Our VOTable is TABLEDATA with FIELD unit, ucd and DESCRIPTION and INFO elements
/// (VOTable 1.4 §3.5, §4).
#[test]
fn votable_output_layout() {
    let dir = tempfile::tempdir().unwrap();
    let (table, provenance) = sample();
    let path = dir.path().join("t.vot");
    write(&path, &table, &provenance);
    let text = std::fs::read_to_string(&path).unwrap();
    assert!(text.contains("<VOTABLE version=\"1.4\""));
    assert!(text.contains("<INFO name=\"software\" value=\"flowsift 0.1.0\"/>"));
    assert!(
        text.contains("<FIELD name=\"z\" datatype=\"double\" unit=\"km/s\" ucd=\"src.redshift\">")
    );
    assert!(text.contains("<DESCRIPTION>a ± b, with &lt;markup&gt; &amp; σ</DESCRIPTION>"));
    assert!(text.contains("datatype=\"unicodeChar\" arraysize=\"*\""));
    assert!(text.contains("<TABLEDATA>"));
}

/// Our ECSV header is YAML with `datatype`, `unit`, `description`, `meta: {ucd}` per column
/// and the provenance as the table `meta` (ECSV 1.0, Astropy APE 6).
#[test]
fn ecsv_output_layout() {
    let dir = tempfile::tempdir().unwrap();
    let (table, provenance) = sample();
    let path = dir.path().join("t.ecsv");
    write(&path, &table, &provenance);
    let text = std::fs::read_to_string(&path).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines[0], "# %ECSV 1.0");
    assert_eq!(lines[1], "# ---");
    assert!(text.contains("# delimiter: \",\""));
    assert!(text.contains("#     datatype: float64"));
    assert!(text.contains("#       ucd: src.redshift"));
    assert!(text.contains("#   software: flowsift 0.1.0"));
    assert!(text.contains("\nz,n,ok,name\n"));
    assert!(text.contains("True"));
}

struct Expected {
    names: Vec<String>,
    rows: Vec<Vec<String>>,
}

fn expected() -> Expected {
    let text = std::fs::read_to_string(reference("expected.csv")).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let names = lines.next().unwrap().split(',').map(String::from).collect();
    let rows = lines
        .map(|l| l.split(',').map(String::from).collect())
        .collect();
    Expected { names, rows }
}

/// Files written by astropy 8.0.2 (VOTable TABLEDATA, BINARY and BINARY2, ECSV, Parquet):
/// every value as expected.csv gives it (written by the same script with '%.17g'), masked
/// cells null, and the units astropy wrote (`km / s` in ECSV and Parquet, `km.s**-1` in
/// VOTable: FITS standard 4.0 §4.3 spellings) with the UCDs and descriptions. astropy's
/// Parquet writer stores a masked column as its values plus a boolean `<name>.mask` column
/// (named in its `__serialized_columns__` meta); flowsift reads both columns as they are
/// (no row or column dropped), so there a masked cell holds astropy's fill value.
#[test]
fn files_astropy_wrote_are_read_with_values_and_units() {
    let e = expected();
    for name in [
        "astropy_tabledata.vot",
        "astropy_binary.vot",
        "astropy_binary2.vot",
        "astropy.ecsv",
        "astropy.parquet",
    ] {
        let t = read(&reference(name));
        let names: Vec<String> = t
            .frame
            .get_column_names()
            .iter()
            .map(|n| n.to_string())
            .filter(|n| !n.ends_with(".mask"))
            .collect();
        assert_eq!(names, e.names, "{name}");
        let masks = name.ends_with(".parquet");
        for (r, row) in e.rows.iter().enumerate() {
            for (c, want) in row.iter().enumerate() {
                let got = t.frame.column(&e.names[c]).unwrap().get(r).unwrap();
                let ok = match (&got, want.as_str()) {
                    (AnyValue::Null, "") => true,
                    (_, "") if masks => {
                        let mask = t.frame.column(&format!("{}.mask", e.names[c])).unwrap();
                        mask.get(r).unwrap() == AnyValue::Boolean(true)
                    }
                    (AnyValue::Float64(x), w) => w.parse::<f64>().unwrap().to_bits() == x.to_bits(),
                    (AnyValue::Int64(x), w) => w.parse::<i64>().unwrap() == *x,
                    (AnyValue::Boolean(b), w) => w == if *b { "true" } else { "false" },
                    (AnyValue::String(s), w) => *s == w,
                    (AnyValue::StringOwned(s), w) => s.as_str() == w,
                    _ => false,
                };
                assert!(
                    ok,
                    "{name}: row {r}, column {}: {got:?} != {want}",
                    e.names[c]
                );
            }
        }
        let unit = |c: &str| t.meta.get(c).and_then(|m| m.unit.clone());
        assert_eq!(
            flowsift::catalogue::units::parse_unit(&unit("v").unwrap()),
            flowsift::catalogue::units::Unit::KmPerS,
            "{name}"
        );
        assert_eq!(unit("ra").as_deref(), Some("deg"), "{name}");
        assert_eq!(t.meta["ra"].ucd.as_deref(), Some("pos.eq.ra"), "{name}");
        assert_eq!(
            t.meta["z_helio"].description.as_deref(),
            Some("heliocentric redshift"),
            "{name}"
        );
    }
    let p = read_provenance(&reference("astropy.ecsv"), None).unwrap();
    assert_eq!(p.provenance.get("survey"), Some("fixture"));
}

/// A COOSYS the position FIELDs refer to states the frame as FITS RADESYS/EQUINOX do
/// (VOTable 1.4 §3.1); the run then converts from FK4 B1950.
#[test]
fn coosys_states_the_sky_frame() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("fk4.vot");
    std::fs::write(
        &path,
        r#"<?xml version="1.0"?>
<VOTABLE version="1.4"><RESOURCE>
<COOSYS ID="sys" system="FK4" equinox="B1950"/>
<TABLE><FIELD name="ra" datatype="double" unit="deg" ucd="pos.eq.ra" ref="sys"/>
<FIELD name="dec" datatype="double" unit="deg" ucd="pos.eq.dec" ref="sys"/>
<DATA><TABLEDATA><TR><TD>10</TD><TD>20</TD></TR></TABLEDATA></DATA></TABLE>
</RESOURCE></VOTABLE>"#,
    )
    .unwrap();
    let t = read(&path);
    assert_eq!(t.keywords.get("RADESYS").map(String::as_str), Some("FK4"));
    assert_eq!(t.keywords.get("EQUINOX").map(String::as_str), Some("1950"));
}

fn votable_error(body: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.vot");
    std::fs::write(&path, body).unwrap();
    let e = read_table(&path, &ReadOptions::default())
        .expect_err("a malformed VOTable is refused")
        .to_string();
    assert!(e.contains("bad.vot"), "{e}");
    e
}

fn table_of(fields: &str, data: &str) -> String {
    format!(
        "<?xml version=\"1.0\"?><VOTABLE version=\"1.4\"><RESOURCE><TABLE name=\"t\">{fields}\
         <DATA>{data}</DATA></TABLE></RESOURCE></VOTABLE>"
    )
}

#[test]
fn malformed_votables_are_refused_by_place() {
    let f = "<FIELD name=\"x\" datatype=\"double\"/><FIELD name=\"s\" datatype=\"char\" \
             arraysize=\"*\"/>";
    let e = votable_error(&table_of(
        f,
        "<TABLEDATA><TR><TD>1</TD><TD>a</TD></TR><TR><TD>2</TD></TR></TABLEDATA>",
    ));
    assert!(
        e.contains("row 2") && e.contains("1 TD cells") && e.contains("2 FIELDs"),
        "{e}"
    );
    let e = votable_error(&table_of(
        f,
        "<TABLEDATA><TR><TD>abc</TD><TD>a</TD></TR></TABLEDATA>",
    ));
    assert!(
        e.contains("row 1") && e.contains("column 'x'") && e.contains("'abc'"),
        "{e}"
    );
    // Truncated base64, and a stream that ends inside a row.
    let e = votable_error(&table_of(
        f,
        "<BINARY><STREAM encoding=\"base64\">QAAAAAAAAA</STREAM></BINARY>",
    ));
    assert!(e.contains("base64"), "{e}");
    let e = votable_error(&table_of(
        f,
        "<BINARY><STREAM encoding=\"base64\">P/AAAAAAAAAAAAA=</STREAM></BINARY>",
    ));
    assert!(
        e.contains("row 1") && e.contains("ends inside the row"),
        "{e}"
    );
    // A huge arraysize is refused without allocating.
    let e = votable_error(&table_of(
        "<FIELD name=\"v\" datatype=\"double\" arraysize=\"4000000000x4000000000\"/>",
        "<BINARY><STREAM encoding=\"base64\">AAAA</STREAM></BINARY>",
    ));
    assert!(e.contains("arraysize") || e.contains("ends inside"), "{e}");
    let e = votable_error(&table_of(
        "<FIELD name=\"v\" datatype=\"char\" arraysize=\"*\"/>",
        "<BINARY><STREAM encoding=\"base64\">/////w==</STREAM></BINARY>",
    ));
    assert!(e.contains("ends inside the row"), "{e}");
    let e = votable_error(&table_of(
        "<FIELD name=\"v\" datatype=\"complex\"/>",
        "<TABLEDATA/>",
    ));
    assert!(e.contains("datatype 'complex'"), "{e}");
    let e = votable_error("<html><body>not a table</body></html>");
    assert!(e.contains("not a VOTable") && e.contains("<html>"), "{e}");
    let e = votable_error("<VOTABLE><RESOURCE><TABLE><FIELD name=\"a\"");
    assert!(e.contains("XML"), "{e}");
    let e = votable_error("<VOTABLE><RESOURCE/></VOTABLE>");
    assert!(e.contains("no TABLE"), "{e}");
}

#[test]
fn votable_tables_are_chosen_by_name_or_number() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("two.vot");
    std::fs::write(
        &path,
        "<VOTABLE><RESOURCE><TABLE name=\"first\"><FIELD name=\"a\" datatype=\"int\"/>\
         <DATA><TABLEDATA><TR><TD>1</TD></TR></TABLEDATA></DATA></TABLE>\
         <TABLE name=\"Second\"><FIELD name=\"b\" datatype=\"short\"/>\
         <DATA><TABLEDATA><TR><TD>0x10</TD></TR></TABLEDATA></DATA></TABLE></RESOURCE></VOTABLE>",
    )
    .unwrap();
    let by = |hdu: &str| {
        read_table(
            &path,
            &ReadOptions {
                hdu: Some(hdu.into()),
            },
        )
    };
    let t = by("second").unwrap();
    assert_eq!(t.frame.column("b").unwrap().i64().unwrap().get(0), Some(16));
    assert!(by("2").unwrap().frame.column("b").is_ok());
    let e = by("third").unwrap_err().to_string();
    assert!(e.contains("1 'first'") && e.contains("2 'Second'"), "{e}");
}

fn ecsv_error(body: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.ecsv");
    std::fs::write(&path, body).unwrap();
    let e = read_table(&path, &ReadOptions::default())
        .expect_err("a malformed ECSV is refused")
        .to_string();
    assert!(e.contains("bad.ecsv"), "{e}");
    e
}

#[test]
fn malformed_ecsv_files_are_refused_by_place() {
    let head = "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: float64}\n\
                # - {name: b, datatype: int64}\n";
    let e = ecsv_error("a,b\n1,2\n");
    assert!(e.contains("not an ECSV file"), "{e}");
    let e = ecsv_error(&format!("{head}a b\n1 2\n2.5 x\n"));
    assert!(
        e.contains("column 'b'") && e.contains("row 2") && e.contains("'x'"),
        "{e}"
    );
    let e = ecsv_error(&format!("{head}a c\n1 2\n"));
    assert!(e.contains("datatype list names a, b"), "{e}");
    let e = ecsv_error(&format!("{head}a b\n1 2 3\n"));
    assert!(e.contains("line"), "{e}");
    let e = ecsv_error("# %ECSV 1.0\n# ---\n# datatype: [unclosed\na\n1\n");
    assert!(e.contains("not YAML"), "{e}");
    let e = ecsv_error("# %ECSV 1.0\n# ---\n# delimiter: ';'\n# datatype: []\na\n");
    assert!(e.contains("delimiter"), "{e}");
    let e = ecsv_error("# %ECSV 2.0\n# ---\n");
    assert!(e.contains("version 2.0"), "{e}");
}

/// Seeded byte mutations of a VOTable (TABLEDATA and BINARY) and an ECSV file: every read
/// ends in a table or an error, never a panic (the readers are called directly, without
/// the guard that turns a panic into an error).
#[test]
fn mutated_votable_and_ecsv_files_never_panic() {
    use rand::{Rng, SeedableRng};
    let dir = tempfile::tempdir().unwrap();
    let (table, provenance) = sample();
    let seed_text = dir.path().join("seed.vot");
    write(&seed_text, &table, &provenance);
    let seed_ecsv = dir.path().join("seed.ecsv");
    write(&seed_ecsv, &table, &provenance);
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(20261203);
    let seeds = [
        std::fs::read(&seed_text).unwrap(),
        std::fs::read(reference("astropy_binary2.vot")).unwrap(),
        std::fs::read(&seed_ecsv).unwrap(),
    ];
    for case in 0..600 {
        let which = case % 3;
        let mut bytes = seeds[which].clone();
        for _ in 0..rng.random_range(1..6) {
            if bytes.len() < 2 {
                break;
            }
            let at = rng.random_range(0..bytes.len());
            match rng.random_range(0..3) {
                0 => bytes[at] = rng.random(),
                1 => {
                    bytes.remove(at);
                }
                _ => bytes.truncate(at.max(1)),
            }
        }
        let path = dir.path().join(if which == 2 { "m.ecsv" } else { "m.vot" });
        std::fs::write(&path, &bytes).unwrap();
        let run = std::panic::catch_unwind(|| {
            if which == 2 {
                ecsv::read_ecsv(&path).map(|_| ())
            } else {
                votable::read_votable(&path, None).map(|_| ())
            }
        });
        assert!(run.is_ok(), "case {case}: the reader panicked");
    }
}

/// A stage whose output is .ecsv or .vot passes its settings on: `outliers` on it records
/// the chain and keeps the cosmology of the `velocities` run.
#[test]
fn stage_outputs_in_ecsv_and_votable_carry_settings_on() {
    let dir = tempfile::tempdir().unwrap();
    let p = |n: &str| dir.path().join(n).to_str().unwrap().to_string();
    for ext in ["ecsv", "vot"] {
        flowsift()
            .args(["velocities", demo_csv().to_str().unwrap(), "-o"])
            .arg(p(&format!("v.{ext}")))
            .args(["--preset", "planck2018"])
            .assert()
            .success();
        flowsift()
            .args([
                "outliers",
                &p(&format!("v.{ext}")),
                "-o",
                &p(&format!("o.{ext}")),
            ])
            .assert()
            .success();
        let rec = read_record(Path::new(&p(&format!("o.{ext}"))), None)
            .unwrap()
            .expect("a record");
        assert_eq!(rec.settings.cosmology.h0, Some(67.66), "{ext}");
        assert!(
            rec.chain().ends_with(&["velocities", "outliers"]),
            "{ext}: {:?}",
            rec.chain()
        );
        let t = read(Path::new(&p(&format!("o.{ext}"))));
        assert_eq!(t.meta["v_pec"].unit.as_deref(), Some("km/s"), "{ext}");
        assert_eq!(t.meta["v_pec"].ucd.as_deref(), Some("phys.veloc"), "{ext}");
        assert!(t.meta["v_pec"].description.is_some(), "{ext}");
    }
}
