//! A partitioned survey (a folder of Parquet files, Hive-style `key=value/` folders) through
//! `velocities`: one catalogue in, one dataset out in the same layout, with the same values —
//! Monte Carlo columns included, whose streams are seeded by the row's index in the whole
//! catalogue — as the same catalogue in one file. The reference is flowsift's own one-file run
//! (whose values the astropy fixtures check elsewhere); here the property under test is that
//! the split changes nothing.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use flowsift::catalogue::{read_table, write_table, Provenance, ReadOptions, Table, WriteOptions};
use polars::prelude::*;

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
}

fn demo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/lantern_survey.fits")
}

fn run_ok(args: &[&str]) {
    let out = flowsift().args(args).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

fn column(t: &Table, name: &str) -> Vec<Option<f64>> {
    t.frame
        .column(name)
        .unwrap_or_else(|_| panic!("no column {name}"))
        .cast(&DataType::Float64)
        .unwrap()
        .f64()
        .unwrap()
        .iter()
        .collect()
}

#[test]
fn twelve_partitions_give_the_one_file_result() {
    let dir = tempfile::tempdir().unwrap();
    let whole = read_table(&demo(), &ReadOptions::default()).unwrap();
    let n = whole.frame.height();
    let one = dir.path().join("one.parquet");
    write_table(
        &one,
        &whole,
        &Provenance::default(),
        &WriteOptions::default(),
    )
    .unwrap();

    // 12 partitions of unequal size under two Hive-style folders; the names sort in row order.
    let survey = dir.path().join("survey");
    let cuts: Vec<usize> = (0..=12).map(|k| k * k * n / 144).collect();
    for p in 0..12 {
        let folder = if p < 6 { "half=a" } else { "half=b" };
        let path = survey.join(folder).join(format!("part-{p:02}.parquet"));
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        let piece = Table {
            frame: whole.frame.slice(cuts[p] as i64, cuts[p + 1] - cuts[p]),
            ..whole.clone()
        };
        write_table(
            &path,
            &piece,
            &Provenance::default(),
            &WriteOptions::default(),
        )
        .unwrap();
    }
    std::fs::write(survey.join("_SUCCESS"), "").unwrap();

    let args = ["--monte-carlo", "50", "--seed", "7"];
    let one_out = dir.path().join("one_out.parquet");
    let mut a = vec![
        "velocities",
        one.to_str().unwrap(),
        "-o",
        one_out.to_str().unwrap(),
    ];
    a.extend(args);
    run_ok(&a);
    let out = dir.path().join("out");
    let mut b = vec![
        "velocities",
        survey.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ];
    b.extend(args);
    run_ok(&b);

    let expected = read_table(&one_out, &ReadOptions::default()).unwrap();
    let mut offset = 0;
    for p in 0..12 {
        let folder = if p < 6 { "half=a" } else { "half=b" };
        let path = out.join(folder).join(format!("part-{p:02}.parquet"));
        let got = read_table(&path, &ReadOptions::default()).unwrap();
        let rows = cuts[p + 1] - cuts[p];
        assert_eq!(got.frame.height(), rows, "{}", path.display());
        for name in [
            "z_cmb",
            "v_pec",
            "v_pec_err",
            "eta",
            "v_pec_mc_median",
            "v_pec_mc_p16",
        ] {
            let want = column(&expected, name);
            assert_eq!(
                column(&got, name),
                want[offset..offset + rows].to_vec(),
                "{name}, part {p}"
            );
        }
        assert_eq!(
            got.meta.get("v_pec").and_then(|m| m.unit.as_deref()),
            Some("km/s")
        );
        offset += rows;
    }
    assert_eq!(offset, n, "no row added or dropped");

    // The dataset reads back as one catalogue, and it is not overwritten without --force.
    let again = read_table(&out, &ReadOptions::default()).unwrap();
    assert_eq!(again.frame.height(), n);
    let o = flowsift().args(&b).output().unwrap();
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("--force"));
    // A table file name as the output of a folder is refused with the reason.
    let o = flowsift()
        .args([
            "velocities",
            survey.to_str().unwrap(),
            "-o",
            dir.path().join("x.parquet").to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("partitioned survey"));
}
