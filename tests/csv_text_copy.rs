//! A delimited output of a delimited input copies the input columns from the input's own
//! lines when it can, and otherwise lets polars write everything; either way every row is
//! there and every value is the same. Values are checked against the astropy reference
//! (tests/reference/galaxy_pv.csv, astropy 8.0.2) as in velocities_cli.rs.

mod common;

use std::path::Path;

use assert_cmd::Command;
use common::fixture;
use flowsift::catalogue::{read_table, ReadOptions, Table};
use polars::prelude::*;

struct Galaxy {
    ra: f64,
    dec: f64,
    z_helio: f64,
    mu: f64,
    v_pec: f64,
}

fn reference() -> Vec<Galaxy> {
    fixture("galaxy_pv.csv")
        .records()
        .iter()
        .filter(|r| r.s("dl_convention") == "observed")
        .map(|r| Galaxy {
            ra: r.f("ra"),
            dec: r.f("dec"),
            z_helio: r.f("z_helio"),
            mu: r.f("mu"),
            v_pec: r.f("v_pec"),
        })
        .collect()
}

/// The input text: numbers written in several styles polars would not write (trailing
/// zeros, exponents, a leading '+'), a text column; [`write_input`] adds comment lines.
fn input_lines(galaxies: &[Galaxy], sep: char) -> Vec<String> {
    galaxies
        .iter()
        .enumerate()
        .map(|(i, g)| {
            let mu = match i % 3 {
                0 => format!("{:.10}", g.mu),
                1 => format!("{:.12E}", g.mu),
                _ => format!("+{}", g.mu),
            };
            [
                format!("{:.12}0", g.ra),
                format!("{}", g.dec),
                format!("{:.9}", g.z_helio),
                mu,
                format!("survey-{}", i % 4),
            ]
            .join(&sep.to_string())
        })
        .collect()
}

fn write_input(path: &Path, header: &str, lines: &[String], ending: &str, extra: &str) {
    // Comments before the header, a blank line after the last row: neither is a row.
    let mut text =
        format!("# an invented catalogue{extra}{ending}# a second comment{ending}{header}{ending}");
    for l in lines {
        text.push_str(l);
        text.push_str(ending);
    }
    text.push_str(ending);
    std::fs::write(path, text).unwrap();
}

/// Run flowsift; it must succeed.
fn flowsift(args: &[&str]) {
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

fn run(input: &Path, output: &Path) {
    // The fixture's rows in the observed convention (galaxy_pv.csv).
    flowsift(&[
        "velocities",
        input.to_str().unwrap(),
        "-o",
        output.to_str().unwrap(),
        "--dl-convention",
        "observed",
    ]);
}

fn f64s(t: &Table, name: &str) -> Vec<f64> {
    t.frame
        .column(name)
        .unwrap()
        .cast(&DataType::Float64)
        .unwrap()
        .f64()
        .unwrap()
        .iter()
        .map(|v| v.unwrap_or(f64::NAN))
        .collect()
}

const DERIVED: [&str; 8] = [
    "glon",
    "sgx",
    "z_cmb",
    "z_cos",
    "v_pec",
    "v_pec_err",
    "eta",
    "d_c",
];

/// The derived columns of two outputs are identical, bit for bit.
fn same_derived(a: &Table, b: &Table) {
    for name in DERIVED {
        let (x, y) = (f64s(a, name), f64s(b, name));
        assert_eq!(x.len(), y.len());
        for (i, (p, q)) in x.iter().zip(&y).enumerate() {
            assert!(
                p.to_bits() == q.to_bits() || (p.is_nan() && q.is_nan()),
                "{name} row {i}: {p} vs {q}"
            );
        }
    }
}

#[test]
fn input_columns_are_copied_as_written() {
    let galaxies = reference();
    let dir = tempfile::tempdir().unwrap();
    for (sep, ext) in [(',', "csv"), ('\t', "tsv")] {
        let header = ["ra", "dec", "z_helio", "mu", "source"].join(&sep.to_string());
        let lines = input_lines(&galaxies, sep);
        for (k, ending) in ["\n", "\r\n"].iter().enumerate() {
            let input = dir.path().join(format!("in{k}.{ext}"));
            write_input(&input, &header, &lines, ending, "");
            let output = dir.path().join(format!("out{k}.{ext}"));
            run(&input, &output);
            let text = std::fs::read_to_string(&output).unwrap();
            let mut out_lines = text.lines();
            let out_header = out_lines.next().unwrap();
            assert!(
                out_header.starts_with(&format!("{header}{sep}glon{sep}")),
                "{out_header}"
            );
            let body: Vec<&str> = out_lines.collect();
            assert_eq!(body.len(), lines.len(), "rows in = rows out");
            for (i, (o, l)) in body.iter().zip(&lines).enumerate() {
                assert!(
                    o.starts_with(&format!("{l}{sep}")) && !o.contains('\r'),
                    "{ext} row {i}: {o} does not start with the input line {l}"
                );
            }
            let t = read_table(&output, &ReadOptions::default()).unwrap();
            for (i, (v, g)) in f64s(&t, "v_pec").iter().zip(&galaxies).enumerate() {
                assert!((v - g.v_pec).abs() < 1.0, "row {i}: {v} vs {}", g.v_pec);
            }
        }
    }
}

/// Files the copy cannot follow line by line — a quoted field, a blank line among the
/// rows — are written by polars: the same rows and the same derived values, the input
/// columns in polars' number format. A quote in a comment before the header does not stop
/// the copy; a row with a missing field is refused, naming its line.
#[test]
fn files_the_copy_cannot_follow_are_written_whole() {
    let galaxies = reference();
    let dir = tempfile::tempdir().unwrap();
    let header = "ra,dec,z_helio,mu,source";
    let lines = input_lines(&galaxies, ',');
    let copied = dir.path().join("plain.csv");
    write_input(&copied, header, &lines, "\n", "");
    let copied_out = dir.path().join("plain_out.csv");
    run(&copied, &copied_out);
    let reference_table = read_table(&copied_out, &ReadOptions::default()).unwrap();

    let mut quoted = lines.clone();
    quoted[5] = quoted[5].replace("survey-1", "\"survey, wide\"");
    let mut ragged = lines.clone();
    ragged[7] = ragged[7].rsplit_once(',').unwrap().0.to_string();
    let ragged_input = dir.path().join("ragged_row.csv");
    write_input(&ragged_input, header, &ragged, "\n", "");
    // Two comment lines, the header, then rows: the eighth row is line 11.
    Command::cargo_bin("flowsift")
        .unwrap()
        .args(["velocities", ragged_input.to_str().unwrap(), "-o"])
        .arg(dir.path().join("ragged_out.csv"))
        .assert()
        .failure()
        .stderr(predicates::str::contains(
            "line 11: 4 fields, but the header names 5 columns (no value for 'source')",
        ));
    let quote_in_comment = dir.path().join("quote_in_comment.csv");
    write_input(&quote_in_comment, header, &lines, "\n", " (\"quoted\")");
    let quote_out = dir.path().join("quote_in_comment_out.csv");
    run(&quote_in_comment, &quote_out);
    let text = std::fs::read_to_string(&quote_out).unwrap();
    assert!(
        text.lines()
            .nth(1)
            .unwrap()
            .starts_with(&format!("{},", lines[0])),
        "a quote in a comment before the header leaves the rows to be copied"
    );
    let mut blank = lines.clone();
    blank.insert(9, String::new());
    let cases: [(&str, Vec<String>, &str); 2] =
        [("quoted_field", quoted, ""), ("blank_line", blank, "")];
    for (name, body, extra) in cases {
        let input = dir.path().join(format!("{name}.csv"));
        write_input(&input, header, &body, "\n", extra);
        let output = dir.path().join(format!("{name}_out.csv"));
        run(&input, &output);
        let t = read_table(&output, &ReadOptions::default()).unwrap();
        let text = std::fs::read_to_string(&output).unwrap();
        let first = text.lines().nth(1).unwrap();
        // Polars writes 0.1 as 0.1, not with the input's 13 decimals and trailing zero.
        assert!(
            !first.starts_with(&format!("{},", lines[0].split(',').next().unwrap())),
            "{name}: the input text was copied: {first}"
        );
        // A blank line is not a row.
        assert_eq!(
            t.frame.height(),
            galaxies.len(),
            "{name}: rows in = rows out"
        );
        same_derived(&t, &reference_table);
    }
}

/// Every column the sample stages add (group index as integers, outlier flags as
/// true/false, reasons as text that holds the separator) reads back the same from the
/// copying writer as from polars' writer. The input is an invented mock catalogue; the
/// second copy carries a quote in a comment, which sends it through polars.
#[test]
fn stage_columns_match_polars_output() {
    let dir = tempfile::tempdir().unwrap();
    let mock = dir.path().join("mock.csv");
    flowsift(&[
        "mock",
        "-o",
        mock.to_str().unwrap(),
        "--scenario",
        "lantern",
        "--n",
        "600",
        "--seed",
        "4",
        "--outlier-fraction",
        "0.05",
    ]);
    let quoted = dir.path().join("mock_quoted.csv");
    let text = std::fs::read_to_string(&mock).unwrap();
    std::fs::write(&quoted, format!("# \"via polars\"\n{text}")).unwrap();
    let mut tables = vec![];
    for (input, output) in [(&mock, "copied.csv"), (&quoted, "whole.csv")] {
        let output = dir.path().join(output);
        flowsift(&[
            "velocities",
            input.to_str().unwrap(),
            "-o",
            output.to_str().unwrap(),
            "--outliers",
        ]);
        tables.push(read_table(&output, &ReadOptions::default()).unwrap());
    }
    // The first output is the copy: its lines begin with the input's.
    let copied = std::fs::read_to_string(dir.path().join("copied.csv")).unwrap();
    for (o, i) in copied.lines().zip(text.lines()).skip(1) {
        assert!(o.starts_with(&format!("{i},")), "{o}");
    }
    let (a, b) = (&tables[0], &tables[1]);
    assert_eq!(a.frame.get_column_names(), b.frame.get_column_names());
    assert_eq!(a.frame.height(), 600);
    let reasons = a
        .frame
        .column("outlier_reason")
        .unwrap()
        .str()
        .unwrap()
        .clone();
    assert!(
        reasons.iter().flatten().any(|r| r.contains(',')),
        "some object is flagged for two reasons"
    );
    for name in a.frame.get_column_names() {
        let (x, y) = (
            a.frame.column(name).unwrap().as_materialized_series(),
            b.frame.column(name).unwrap().as_materialized_series(),
        );
        assert!(x.equals_missing(y), "column {name} differs");
    }
}

/// `correct` too: a CSV output of a CSV input repeats its lines, then the model columns.
#[test]
fn correct_copies_the_input_lines() {
    let galaxies = reference();
    let dir = tempfile::tempdir().unwrap();
    let header = "ra,dec,z_helio,mu,source";
    let lines = input_lines(&galaxies, ',');
    let input = dir.path().join("sne.csv");
    write_input(&input, header, &lines, "\n", "");
    let output = dir.path().join("sne_corrected.csv");
    flowsift(&[
        "correct",
        input.to_str().unwrap(),
        "-o",
        output.to_str().unwrap(),
        "--uniform-flow",
        "150,-200,80",
    ]);
    let text = std::fs::read_to_string(&output).unwrap();
    let body: Vec<&str> = text.lines().skip(1).collect();
    assert_eq!(body.len(), lines.len());
    for (o, l) in body.iter().zip(&lines) {
        assert!(o.starts_with(&format!("{l},")), "{o}");
    }
    let t = read_table(&output, &ReadOptions::default()).unwrap();
    assert!(f64s(&t, "v_model").iter().all(|v| v.is_finite()));
}
