//! Malformed and unusual inputs, one case each: every row accounted for, or a clear error
//! naming the file, line and column; columns flowsift does not use never make a file
//! unreadable; an interrupted run leaves nothing behind. (The seeded mutation fuzz is in
//! `fuzz_inputs.rs`.)

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use flowsift::catalogue::{read_table, ReadOptions};
use polars::prelude::*;
use predicates::prelude::*;

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
}

const HEADER: &str = "ra,dec,z_helio,mu,mu_err";
const ROW1: &str = "10,20,0.02,35.0,0.3";
const ROW2: &str = "30,-20,0.03,35.8,0.3";

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

/// Run `velocities` on `input` (must succeed); the output table and the printed summary.
fn run(input: &Path) -> (flowsift::catalogue::Table, String) {
    let out = input.with_file_name(format!(
        "{}_out.csv",
        input.file_stem().unwrap().to_string_lossy()
    ));
    let done = flowsift()
        .args(["velocities", input.to_str().unwrap(), "-o"])
        .arg(&out)
        .arg("--force")
        .output()
        .unwrap();
    let text =
        String::from_utf8_lossy(&done.stdout).to_string() + &String::from_utf8_lossy(&done.stderr);
    assert!(done.status.success(), "{text}");
    (read_table(&out, &ReadOptions::default()).unwrap(), text)
}

fn refused(input: &Path, message: &str) {
    flowsift()
        .args(["velocities", input.to_str().unwrap(), "-o"])
        .arg(input.with_extension("out.csv"))
        .assert()
        .code(1)
        .stderr(predicate::str::contains(input.to_str().unwrap()))
        .stderr(predicate::str::contains(message));
}

#[test]
fn blank_lines_are_not_rows_and_are_counted() {
    let dir = tempfile::tempdir().unwrap();
    for (name, text) in [
        ("end.csv", format!("{HEADER}\n{ROW1}\n{ROW2}\n\n")),
        ("middle.csv", format!("{HEADER}\n{ROW1}\n\n  \n{ROW2}\n")),
    ] {
        let (t, summary) = run(&write(dir.path(), name, text.as_bytes()));
        assert_eq!(t.frame.height(), 2, "{name}");
        let blanks = if name == "end.csv" { 1 } else { 2 };
        assert!(
            summary.contains(&format!("{blanks} blank line(s) skipped")),
            "{summary}"
        );
        let status = t.frame.column("status").unwrap().str().unwrap().clone();
        assert!(status.iter().all(|s| s == Some("ok")), "{name}");
    }
}

#[test]
fn lf_crlf_and_cr_line_endings_read_the_same_rows() {
    let dir = tempfile::tempdir().unwrap();
    let mut values = vec![];
    for (name, eol) in [("lf.csv", "\n"), ("crlf.csv", "\r\n"), ("cr.csv", "\r")] {
        let text = [HEADER, ROW1, ROW2].join(eol) + eol;
        let (t, _) = run(&write(dir.path(), name, text.as_bytes()));
        assert_eq!(t.frame.height(), 2, "{name}");
        let v: Vec<f64> = t
            .frame
            .column("v_pec")
            .unwrap()
            .f64()
            .unwrap()
            .into_no_null_iter()
            .collect();
        values.push(v);
    }
    assert_eq!(values[0], values[1]);
    assert_eq!(values[0], values[2]);
}

/// `#` starts a comment only before the header; after it, a line starting with `#` is a
/// row (here its RA is not a number, which its status says).
#[test]
fn a_row_starting_with_hash_is_a_row() {
    let dir = tempfile::tempdir().unwrap();
    let text = format!("# survey notes\n#\n{HEADER}\n#{ROW1}\n{ROW2}\n");
    let (t, summary) = run(&write(dir.path(), "hash.csv", text.as_bytes()));
    assert_eq!(t.frame.height(), 2);
    assert!(
        summary.contains("2 comment line(s) before the header skipped"),
        "{summary}"
    );
    let status = t.frame.column("status").unwrap().str().unwrap().clone();
    assert_ne!(status.get(0), Some("ok"));
    assert_eq!(status.get(1), Some("ok"));
}

#[test]
fn repeated_header_names_are_refused_by_name() {
    let dir = tempfile::tempdir().unwrap();
    let text = format!("ra,dec,z_helio,mu,mu\n{ROW1}\n");
    refused(
        &write(dir.path(), "dup.csv", text.as_bytes()),
        "repeated column names: 'mu' (fields 4 and 5)",
    );
}

/// A quoted name with `""` inside is one `"`, and stays so through any number of passes.
#[test]
fn quoted_header_names_are_kept_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let text = format!("{HEADER},\"a \"\"b\"\"\"\n{ROW1},1\n{ROW2},2\n");
    let first = write(dir.path(), "quoted.csv", text.as_bytes());
    let (t1, _) = run(&first);
    assert!(t1.frame.column("a \"b\"").is_ok());
    let second = dir.path().join("quoted_out.csv");
    let (t2, _) = run(&second);
    assert!(
        t2.frame.column("a \"b\"").is_ok(),
        "{:?}",
        t2.frame.get_column_names()
    );
}

#[test]
fn ragged_rows_name_the_line() {
    let dir = tempfile::tempdir().unwrap();
    let long = format!("{HEADER}\n{ROW1}\n{ROW2},7\n");
    refused(
        &write(dir.path(), "long.csv", long.as_bytes()),
        "line 3: 6 fields, but the header names 5 columns",
    );
    let short = format!("{HEADER}\n{ROW1}\n30,-20\n");
    refused(
        &write(dir.path(), "short.csv", short.as_bytes()),
        "line 3: 2 fields, but the header names 5 columns (no value for 'z_helio', 'mu', \
         'mu_err')",
    );
    let open = format!("{HEADER}\n{ROW1}\n\"30,-20,0.03,35.8,0.3\n");
    refused(
        &write(dir.path(), "open.csv", open.as_bytes()),
        "line 3: a quote opened in this record is never closed",
    );
}

#[test]
fn invalid_utf8_names_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = format!("{HEADER}\n{ROW1}\n30,-20,0.03,3").into_bytes();
    bytes.push(0xff);
    bytes.extend_from_slice(b"5.8,0.3\n");
    refused(
        &write(dir.path(), "latin.csv", &bytes),
        "line 3, column 'mu': byte 255 is not UTF-8 text",
    );
}

#[test]
fn an_empty_file_or_one_without_header_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    refused(&write(dir.path(), "empty.csv", b""), "the file is empty");
    refused(
        &write(dir.path(), "comments.csv", b"# only\n\n# comments\n"),
        "no header line",
    );
}

/// A FITS table header that cfitsio cannot parse is reported as damaged, with cfitsio's
/// reason, not as a file without a table.
#[test]
fn a_damaged_fits_table_header_is_named_as_such() {
    let dir = tempfile::tempdir().unwrap();
    let good = dir.path().join("good.fits");
    flowsift()
        .args([
            "mock",
            "-o",
            good.to_str().unwrap(),
            "--n",
            "20",
            "--seed",
            "3",
        ])
        .assert()
        .success();
    let mut bytes = std::fs::read(&good).unwrap();
    let card = bytes
        .chunks(80)
        .position(|c| c.starts_with(b"TFORM1  ="))
        .unwrap()
        * 80;
    let text = format!("{:<80}", "TFORM1  = 'QQ      '");
    bytes[card..card + 80].copy_from_slice(text.as_bytes());
    refused(
        &write(dir.path(), "damaged.fits", &bytes),
        "the header of HDU 1 is damaged",
    );
}

/// Parquet columns of narrow integer, half-precision, date, timestamp, decimal and nested
/// types: the file reads; narrow numbers are widened with their values unchanged; a FITS
/// output writes dates and decimals as text and leaves the nested column out, naming it;
/// a Parquet output keeps them all.
#[test]
fn parquet_columns_of_other_types_pass_through() {
    let dir = tempfile::tempdir().unwrap();
    let n = 3;
    let f = |name: &str, v: Vec<f64>| Column::new(name.into(), v);
    let mut frame = DataFrame::new(
        n,
        vec![
            f("ra", vec![10.0, 30.0, 50.0]),
            f("dec", vec![20.0, -20.0, 5.0]),
            f("z_helio", vec![0.02, 0.03, 0.025]),
            f("mu", vec![35.0, 35.8, 35.4]),
            f("mu_err", vec![0.3; 3]),
        ],
    )
    .unwrap();
    let ints = Series::new("small".into(), [1i64, -2, 3]);
    let extra = [
        ints.cast(&DataType::Int8).unwrap(),
        ints.cast(&DataType::Int16)
            .unwrap()
            .with_name("medium".into()),
        Series::new("count".into(), [1u64, 2, 3])
            .cast(&DataType::UInt8)
            .unwrap(),
        Series::new("half".into(), [0.5f64, 1.25, 2.0])
            .cast(&DataType::Float16)
            .unwrap(),
        Series::new("observed".into(), [18_000i32, 18_001, 18_002])
            .cast(&DataType::Date)
            .unwrap(),
        Series::new("taken".into(), [0i64, 3_600_000, 7_200_000])
            .cast(&DataType::Datetime(TimeUnit::Milliseconds, None))
            .unwrap(),
    ];
    for s in extra {
        frame.with_column(s.into_column()).unwrap();
    }
    let nested = StructChunked::from_series(
        "nested".into(),
        n,
        [Series::new("a".into(), [1i64, 2, 3])].iter(),
    )
    .unwrap()
    .into_series();
    frame.with_column(nested.into_column()).unwrap();
    let input = dir.path().join("typed.parquet");
    ParquetWriter::new(std::fs::File::create(&input).unwrap())
        .finish(&mut frame)
        .unwrap();

    let fits = dir.path().join("typed_out.fits");
    let done = flowsift()
        .args(["velocities", input.to_str().unwrap(), "-o"])
        .arg(&fits)
        .output()
        .unwrap();
    let summary =
        String::from_utf8_lossy(&done.stdout).to_string() + &String::from_utf8_lossy(&done.stderr);
    assert!(done.status.success(), "{summary}");
    assert!(summary.contains("'small' (i8 → i32)"), "{summary}");
    assert!(summary.contains("'half' (f16 → f32)"), "{summary}");
    assert!(
        summary.contains("columns its format cannot hold were left out: 'nested'"),
        "{summary}"
    );
    let t = read_table(&fits, &ReadOptions::default()).unwrap();
    assert_eq!(t.frame.height(), n);
    let small: Vec<i64> = t
        .frame
        .column("small")
        .unwrap()
        .cast(&DataType::Int64)
        .unwrap()
        .i64()
        .unwrap()
        .into_no_null_iter()
        .collect();
    assert_eq!(small, [1, -2, 3]);
    let half: Vec<f64> = t
        .frame
        .column("half")
        .unwrap()
        .cast(&DataType::Float64)
        .unwrap()
        .f64()
        .unwrap()
        .into_no_null_iter()
        .collect();
    assert_eq!(half, [0.5, 1.25, 2.0], "exact in half precision");
    // 18 000 days after 1970-01-01 is 2019-04-14 (proleptic Gregorian calendar).
    let observed = t.frame.column("observed").unwrap().str().unwrap().clone();
    assert_eq!(observed.get(0), Some("2019-04-14"));
    assert!(t.frame.column("nested").is_err());

    let parquet = dir.path().join("typed_out.parquet");
    flowsift()
        .args(["velocities", input.to_str().unwrap(), "-o"])
        .arg(&parquet)
        .assert()
        .success();
    let t = read_table(&parquet, &ReadOptions::default()).unwrap();
    assert!(matches!(
        t.frame.column("nested").unwrap().dtype(),
        DataType::Struct(_)
    ));
    assert_eq!(t.frame.column("observed").unwrap().dtype(), &DataType::Date);
}

/// A temporary file left by a killed run is named in the next run's summary.
#[test]
fn a_left_over_partial_file_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let input = write(
        dir.path(),
        "cat.csv",
        format!("{HEADER}\n{ROW1}\n").as_bytes(),
    );
    let stale = dir.path().join(".flowsift-partial-abc123-cat_out.csv");
    std::fs::write(&stale, b"half a file").unwrap();
    let (_, summary) = run(&input);
    assert!(summary.contains("killed while writing"), "{summary}");
    assert!(
        summary.contains(".flowsift-partial-abc123-cat_out.csv"),
        "{summary}"
    );
}

/// SIGTERM and SIGINT at any moment of a run: the run ends with 143 or 130 (or has
/// finished, 0), and no temporary file is left in the output's folder.
#[cfg(unix)]
#[test]
fn a_signal_leaves_no_temporary_file() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("big.csv");
    flowsift()
        .args([
            "mock",
            "-o",
            input.to_str().unwrap(),
            "--n",
            "60000",
            "--seed",
            "9",
        ])
        .assert()
        .success();
    let mut interrupted = 0;
    for (k, (signal, code)) in [("TERM", 143), ("INT", 130)]
        .iter()
        .cycle()
        .take(6)
        .enumerate()
    {
        let out = dir.path().join(format!("out{k}.csv"));
        let child = std::process::Command::new(env!("CARGO_BIN_EXE_flowsift"))
            .args(["velocities", input.to_str().unwrap(), "-o"])
            .arg(&out)
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(std::time::Duration::from_millis(150 + 120 * k as u64));
        std::process::Command::new("kill")
            .args([&format!("-{signal}"), &child.id().to_string()])
            .status()
            .unwrap();
        let status = child.wait_with_output().unwrap().status;
        match status.code() {
            Some(0) => {}
            Some(c) => {
                assert_eq!(c, *code, "SIG{signal}");
                interrupted += 1;
                assert!(!out.exists(), "no output from an interrupted run");
            }
            None => panic!("SIG{signal} killed the process without its handler"),
        }
        let left: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .flatten()
            .filter(|e| {
                e.file_name()
                    .to_string_lossy()
                    .starts_with(".flowsift-partial-")
            })
            .map(|e| e.file_name())
            .collect();
        assert!(left.is_empty(), "SIG{signal}: left behind {left:?}");
    }
    assert!(
        interrupted > 0,
        "no run was interrupted: the test saw nothing"
    );
}
