//! A catalogue larger than the run's memory limit goes through `velocities` in blocks of
//! rows (Parquet or FITS in, Parquet out). The property under test is that the blocks change
//! no value: every column (Monte Carlo included, whose streams are seeded by the row's place
//! in the whole catalogue), the status of every row, the row count and the provenance equal
//! those of the same run in one piece. The one-piece run's values are checked against
//! astropy and published values elsewhere (tests/reference_checks.rs, tests/cli_physics.rs).

use std::path::Path;

use assert_cmd::Command;
use flowsift::catalogue::parquet::read_parquet_metadata;
use flowsift::catalogue::{read_table, ReadOptions};

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
}

fn run_ok(args: &[&str]) -> String {
    let out = flowsift().args(args).output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).to_string()
}

/// The invented demo scenario, 600 000 rows (three blocks of the smallest size under a
/// 50 MB limit), to `path`.
fn mock_catalogue(path: &Path, seed: &str, extra: &[&str]) {
    let mut args = vec![
        "mock",
        "--scenario",
        "lantern",
        "--n",
        "600000",
        "--seed",
        seed,
        "-o",
        path.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    run_ok(&args);
}

fn same_tables(a: &Path, b: &Path) {
    let ta = read_table(a, &ReadOptions::default()).unwrap();
    let tb = read_table(b, &ReadOptions::default()).unwrap();
    assert_eq!(ta.frame.height(), tb.frame.height());
    assert_eq!(ta.frame.get_column_names(), tb.frame.get_column_names());
    for name in ta.frame.get_column_names() {
        let (ca, cb) = (
            ta.frame.column(name).unwrap(),
            tb.frame.column(name).unwrap(),
        );
        assert!(
            ca.as_materialized_series()
                .equals_missing(cb.as_materialized_series()),
            "column {name} differs"
        );
    }
    assert_eq!(ta.meta, tb.meta);
}

fn provenance_of(path: &Path) -> Vec<(String, String)> {
    let mut kv = read_parquet_metadata(path).unwrap();
    // The Arrow schema entry holds the same entries again (checked by the astropy reader test).
    kv.retain(|(k, _)| k.starts_with("flowsift."));
    kv.retain(|(k, _)| k != "flowsift.command" && k != "flowsift.date");
    // The record names the output; the two runs wrote different files.
    for (k, v) in kv.iter_mut() {
        *v = v
            .replace("blocks.parquet", "OUT")
            .replace("whole.parquet", "OUT");
        if k == "flowsift.record" {
            let mut record: serde_json::Value = serde_json::from_str(v).unwrap();
            let fields = record.as_object_mut().unwrap();
            fields.remove("command");
            fields.remove("date");
            *v = record.to_string();
        }
    }
    kv
}

#[test]
fn a_catalogue_in_blocks_gives_the_values_of_one_piece() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mock = d.join("mock.parquet");
    mock_catalogue(&mock, "3", &["--outlier-fraction", "0.01"]);
    let whole = d.join("whole.parquet");
    let blocks = d.join("blocks.parquet");
    let common = ["--monte-carlo", "20", "--seed", "5"];
    let a = run_ok(
        &[
            &[
                "velocities",
                mock.to_str().unwrap(),
                "-o",
                whole.to_str().unwrap(),
            ][..],
            &common,
        ]
        .concat(),
    );
    assert!(!a.contains("blocks of"), "{a}");
    let b = run_ok(
        &[
            &[
                "velocities",
                mock.to_str().unwrap(),
                "-o",
                blocks.to_str().unwrap(),
                "--memory-limit",
                "50M",
            ][..],
            &common,
        ]
        .concat(),
    );
    assert!(
        b.contains("in 3 blocks of 262144 rows"),
        "the run was not read in blocks: {b}"
    );
    same_tables(&whole, &blocks);
    assert_eq!(provenance_of(&whole), provenance_of(&blocks));
    // The summaries agree apart from the output's name and the blocks line.
    let strip = |s: &str| {
        s.lines()
            .filter(|l| !l.starts_with("wrote") && !l.contains("blocks of"))
            .map(str::to_string)
            .collect::<Vec<_>>()
    };
    assert_eq!(strip(&a), strip(&b));

    // FITS in, Parquet out, in blocks: the same values again.
    let fits = d.join("mock.fits");
    let from_fits = d.join("from_fits.parquet");
    mock_catalogue(&fits, "3", &["--outlier-fraction", "0.01"]);
    let c = run_ok(
        &[
            &[
                "velocities",
                fits.to_str().unwrap(),
                "-o",
                from_fits.to_str().unwrap(),
                "--memory-limit",
                "50M",
            ][..],
            &common,
        ]
        .concat(),
    );
    assert!(c.contains("in 3 blocks of 262144 rows"), "{c}");
    let tf = read_table(&from_fits, &ReadOptions::default()).unwrap();
    let tw = read_table(&whole, &ReadOptions::default()).unwrap();
    for name in ["v_pec", "v_pec_err", "z_cmb", "v_pec_mc_median", "status"] {
        assert!(
            tf.frame
                .column(name)
                .unwrap()
                .as_materialized_series()
                .equals_missing(tw.frame.column(name).unwrap().as_materialized_series()),
            "{name} differs between the FITS and Parquet inputs"
        );
    }
}

/// A partitioned survey larger than the limit goes partition after partition, in blocks,
/// one output file per partition: the same files (values, statuses, record) as the survey
/// run in memory, and the same values as the catalogue in one file.
#[test]
fn a_partitioned_survey_in_blocks_gives_the_files_of_one_piece() {
    use flowsift::catalogue::{write_table, Provenance, Table, WriteOptions};
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mock = d.join("mock.parquet");
    mock_catalogue(&mock, "4", &[]);
    let whole = read_table(&mock, &ReadOptions::default()).unwrap();
    // Partitions smaller than a block, one empty, and two longer than a block.
    let cuts = [0usize, 1000, 1000, 7000, 300_000, 600_000];
    let survey = d.join("survey");
    let part_path = |root: &Path, p: usize| {
        root.join(if p < 3 { "sky=north" } else { "sky=south" })
            .join(format!("part-{p}.parquet"))
    };
    for p in 0..cuts.len() - 1 {
        let path = part_path(&survey, p);
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
    let common = ["--monte-carlo", "10", "--seed", "9"];
    let run = |input: &Path, out: &Path, limit: Option<&str>| {
        let mut args = vec![
            "velocities",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ];
        args.extend(common);
        if let Some(l) = limit {
            args.extend(["--memory-limit", l]);
        }
        run_ok(&args)
    };
    let (in_memory, in_blocks) = (d.join("mem_out"), d.join("blk_out"));
    let a = run(&survey, &in_memory, None);
    assert!(!a.contains("blocks of"), "{a}");
    let b = run(&survey, &in_blocks, Some("50M"));
    // 1 + 1 + 2 + 2 blocks (the empty partition has none).
    assert!(b.contains("in 6 blocks of 262144 rows"), "{b}");
    let one_file = d.join("one_out.parquet");
    run(&mock, &one_file, None);
    let expected = read_table(&one_file, &ReadOptions::default()).unwrap();

    let normalised = |path: &Path| {
        let mut kv = provenance_of(path);
        for (_, v) in kv.iter_mut() {
            *v = v.replace("mem_out", "OUT").replace("blk_out", "OUT");
        }
        kv
    };
    for p in 0..cuts.len() - 1 {
        let (m, s) = (part_path(&in_memory, p), part_path(&in_blocks, p));
        same_tables(&m, &s);
        assert_eq!(normalised(&m), normalised(&s), "record of part {p}");
        let got = read_table(&s, &ReadOptions::default()).unwrap();
        assert_eq!(
            got.frame.height(),
            cuts[p + 1] - cuts[p],
            "rows of part {p}"
        );
        for name in ["v_pec", "v_pec_err", "v_pec_mc_median", "status"] {
            let want = expected
                .frame
                .column(name)
                .unwrap()
                .slice(cuts[p] as i64, cuts[p + 1] - cuts[p]);
            assert!(
                got.frame
                    .column(name)
                    .unwrap()
                    .as_materialized_series()
                    .equals_missing(want.as_materialized_series()),
                "{name} of part {p} differs from the one-file run"
            );
        }
    }
    // No staging folder is left beside the dataset.
    let left: Vec<_> = std::fs::read_dir(d)
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().starts_with('.'))
        .collect();
    assert!(left.is_empty(), "{left:?}");
}

#[test]
fn memory_sizes_are_read_as_typed() {
    use flowsift::plan::velocities::parse_memory_size;
    assert_eq!(parse_memory_size("1.5G").unwrap(), 3 << 29);
    assert_eq!(parse_memory_size("800M").unwrap(), 800 << 20);
    assert_eq!(parse_memory_size("2GiB").unwrap(), 2 << 30);
    assert_eq!(parse_memory_size("4096").unwrap(), 4096);
    assert!(parse_memory_size("lots").is_err());
    assert!(parse_memory_size("-1G").is_err());
}
