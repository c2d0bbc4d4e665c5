//! One plan for every command: columns found by UCD and unit card in every command, unit
//! cards that contradict a flag stop the run, settings travel with the data through a chain
//! of commands, no output ever replaces an input, and each subcommand has its own help.
//! Velocities are checked against the astropy fixture `tests/reference/galaxy_pv.csv`
//! (astropy 8.0.2, `make_fixtures.py`).

mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use common::fixture;
use flowsift::catalogue::{
    read_record, read_table, write_table, ColumnMeta, Provenance, ReadOptions, Table, WriteOptions,
};
use polars::prelude::*;
use predicates::prelude::*;

fn flowsift() -> Command {
    Command::cargo_bin("flowsift").unwrap()
}

fn run_ok(args: &[&str]) -> String {
    let out = flowsift().args(args).assert().success();
    String::from_utf8_lossy(&out.get_output().stdout).to_string()
}

fn fails(args: &[&str], message: &str) {
    flowsift()
        .args(args)
        .assert()
        .failure()
        .stderr(predicate::str::contains(message));
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

fn meta(unit: &str, ucd: &str) -> ColumnMeta {
    ColumnMeta {
        unit: (!unit.is_empty()).then(|| unit.to_string()),
        ucd: (!ucd.is_empty()).then(|| ucd.to_string()),
        description: None,
    }
}

/// The astropy objects of `galaxy_pv.csv` (observed convention), as a FITS table in the
/// names and units a catalogue service hands out: RAJ2000/DEJ2000 with UCDs only, cz in
/// km s-1, DM in mag with e_DM marked by UCD only. Returns the path and the fixture's v_pec.
fn messy_fits(dir: &Path, distance_unit: &str) -> (PathBuf, Vec<f64>) {
    let recs = fixture("galaxy_pv.csv").records();
    let rows: Vec<_> = recs
        .iter()
        .filter(|r| r.s("dl_convention") == "observed" && r.f("z_helio") < 0.3)
        .collect();
    let col = |k: &str| rows.iter().map(|r| r.f(k)).collect::<Vec<f64>>();
    let n = rows.len();
    let cz: Vec<f64> = col("z_helio").iter().map(|z| z * 299_792.458).collect();
    let e_dm = vec![0.1; n];
    let frame = DataFrame::new(
        n,
        vec![
            Column::new("RAJ2000".into(), col("ra")),
            Column::new("DEJ2000".into(), col("dec")),
            Column::new("cz".into(), cz),
            Column::new("DM".into(), col("mu")),
            Column::new("e_DM".into(), e_dm),
        ],
    )
    .unwrap();
    let mut m = BTreeMap::new();
    m.insert("RAJ2000".into(), meta("deg", "pos.eq.ra;meta.main"));
    m.insert("DEJ2000".into(), meta("deg", "pos.eq.dec;meta.main"));
    m.insert("cz".into(), meta("km s-1", "src.redshift"));
    m.insert("DM".into(), meta(distance_unit, "phot.mag.distMod"));
    m.insert(
        "e_DM".into(),
        meta(distance_unit, "stat.error;phot.mag.distMod"),
    );
    let path = dir.join("messy.fits");
    write_table(
        &path,
        &Table::new(frame, m),
        &Provenance::default(),
        &WriteOptions::default(),
    )
    .unwrap();
    (path, col("v_pec"))
}

fn read(p: &Path) -> Table {
    read_table(p, &ReadOptions::default()).unwrap()
}

/// RA/Dec by UCD, cz by its unit card, the distance modulus by UCD and its error by the
/// UCD `stat.error;phot.mag.distMod`: v_pec as astropy gives it (fixture, to 0.05 km/s),
/// and the error columns are filled.
#[test]
fn velocities_find_every_role_in_a_catalogue_service_table() {
    let dir = tempfile::tempdir().unwrap();
    let (input, v_ref) = messy_fits(dir.path(), "mag");
    let out = dir.path().join("out.fits");
    // The fixture's rows in the observed convention.
    let printed = run_ok(&[
        "velocities",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--dl-convention",
        "observed",
    ]);
    assert!(
        printed.contains("UCD stat.error;phot.mag.distMod"),
        "{printed}"
    );
    let t = read(&out);
    let v = f64s(&t, "v_pec");
    for (a, b) in v.iter().zip(&v_ref) {
        assert!((a - b).abs() < 0.05, "{a} vs astropy {b}");
    }
    assert!(f64s(&t, "v_pec_err")
        .iter()
        .all(|e| e.is_finite() && *e > 0.0));
    // The record names how each role was found.
    let rec = read_record(&out, None).unwrap().expect("a record");
    assert_eq!(rec.settings.columns.distance_err.as_deref(), Some("e_DM"));
    assert!(rec.column_sources["ra"].contains("UCD pos.eq.ra"));
}

/// A unit card that contradicts the stated kind stops the run, naming column, unit and flag.
#[test]
fn a_unit_card_that_contradicts_the_kind_stops_the_run() {
    let dir = tempfile::tempdir().unwrap();
    let (input, _) = messy_fits(dir.path(), "mag");
    let out = dir.path().join("out.fits");
    let args = [
        "velocities",
        input.to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
        "--distance-column",
        "DM",
        "--distance-kind",
        "dl",
    ];
    fails(&args, "the distance column 'DM' has unit 'mag'");
    fails(&args, "--distance-kind");
    assert!(!out.exists());
    // cz read as z against its unit card.
    fails(
        &[
            "velocities",
            input.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--z-unit",
            "z",
        ],
        "--z-unit",
    );
}

/// `correct` finds positions and redshifts as `velocities` does: the service table gives
/// the same corrected redshifts as the plain CSV of the same objects.
#[test]
fn correct_reads_the_catalogue_like_velocities() {
    let dir = tempfile::tempdir().unwrap();
    let (input, _) = messy_fits(dir.path(), "mag");
    let t = read(&input);
    let plain = dir.path().join("plain.csv");
    let frame = DataFrame::new(
        t.frame.height(),
        vec![
            Column::new("ra".into(), f64s(&t, "RAJ2000")),
            Column::new("dec".into(), f64s(&t, "DEJ2000")),
            Column::new(
                "z_helio".into(),
                f64s(&t, "cz")
                    .iter()
                    .map(|c| c / 299_792.458)
                    .collect::<Vec<_>>(),
            ),
        ],
    )
    .unwrap();
    write_table(
        &plain,
        &Table::new(frame, Default::default()),
        &Provenance::default(),
        &WriteOptions::default(),
    )
    .unwrap();
    let a = dir.path().join("a.fits");
    let b = dir.path().join("b.fits");
    for (i, o) in [(&input, &a), (&plain, &b)] {
        run_ok(&[
            "correct",
            i.to_str().unwrap(),
            "-o",
            o.to_str().unwrap(),
            "--uniform-flow",
            "300,-100,50",
        ]);
    }
    let (za, zb) = (
        f64s(&read(&a), "z_cos_model"),
        f64s(&read(&b), "z_cos_model"),
    );
    assert!(za.iter().filter(|z| z.is_finite()).count() > 100);
    for (x, y) in za.iter().zip(&zb) {
        assert!(
            (x - y).abs() < 1e-12 || (x.is_nan() && y.is_nan()),
            "{x} {y}"
        );
    }
    // And a cz column named as z stops naming the flag.
    fails(
        &[
            "correct",
            input.to_str().unwrap(),
            "-o",
            dir.path().join("c.fits").to_str().unwrap(),
            "--uniform-flow",
            "300,-100,50",
            "--z-unit",
            "z",
        ],
        "--z-unit",
    );
}

fn demo_csv() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-data/lantern_survey.csv")
}

/// A Planck 2018 output taken through `outliers`, then `bulkflow` and `export`, is analysed
/// in Planck 2018 (H0 = 67.66, Planck Collaboration VI 2020 via the preset) and every output
/// records it with the chain of steps; a contradicting flag is refused unless overridden.
#[test]
fn settings_travel_through_a_chain_of_commands() {
    let dir = tempfile::tempdir().unwrap();
    let p = |n: &str| dir.path().join(n).to_str().unwrap().to_string();
    run_ok(&[
        "velocities",
        demo_csv().to_str().unwrap(),
        "-o",
        &p("v.fits"),
        "--preset",
        "planck2018",
    ]);
    let printed = run_ok(&["outliers", &p("v.fits"), "-o", &p("o.parquet")]);
    assert!(printed.contains("recorded with the input"), "{printed}");
    let rec = read_record(Path::new(&p("o.parquet")), None)
        .unwrap()
        .expect("record");
    assert_eq!(rec.step, "outliers");
    assert_eq!(rec.settings.cosmology.h0, Some(67.66));
    assert!(
        rec.chain().ends_with(&["velocities", "outliers"]),
        "{:?}",
        rec.chain()
    );
    assert_eq!(rec.settings.outliers.as_ref().unwrap().threshold, Some(3.5));

    let json = run_ok(&["bulkflow", &p("o.parquet"), "--json"]);
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    let spectrum = v["lcdm"]["power_spectrum"].as_str().unwrap();
    assert!(spectrum.contains("h = 0.6766"), "{spectrum}");

    run_ok(&["export", &p("o.parquet"), "-o", &p("e.csv")]);
    let rec = read_record(Path::new(&p("e.csv")), None).unwrap().unwrap();
    assert_eq!(rec.settings.cosmology.preset.as_deref(), Some("planck2018"));
    assert!(
        rec.chain().ends_with(&["velocities", "outliers", "export"]),
        "{:?}",
        rec.chain()
    );

    // The report shows the chain, read from the record.
    run_ok(&[
        "plot",
        &p("o.parquet"),
        "--out-dir",
        &p("figs"),
        "--format",
        "svg",
    ]);
    let html = std::fs::read_to_string(dir.path().join("figs/report.html")).unwrap();
    assert!(
        html.contains("velocities → outliers"),
        "no chain in the report"
    );

    // A contradicting cosmology is refused, then accepted on purpose and recorded.
    fails(
        &["outliers", &p("v.fits"), "-o", &p("x.fits"), "--h0", "70"],
        "--override-input-settings",
    );
    run_ok(&[
        "outliers",
        &p("v.fits"),
        "-o",
        &p("x.fits"),
        "--h0",
        "70",
        "--override-input-settings",
    ]);
    let rec = read_record(Path::new(&p("x.fits")), None).unwrap().unwrap();
    assert_eq!(rec.settings.cosmology.h0, Some(70.0));
    assert!(
        rec.overridden[0].contains("cosmology"),
        "{:?}",
        rec.overridden
    );
}

/// Every way of writing over an input is refused, and the input stays as it was.
#[test]
fn no_output_replaces_an_input() {
    let dir = tempfile::tempdir().unwrap();
    let d = |n: &str| dir.path().join(n).to_str().unwrap().to_string();
    std::fs::copy(demo_csv(), d("in.csv")).unwrap();
    run_ok(&[
        "field",
        "-o",
        &d("f.fits"),
        "--uniform-flow",
        "100,0,0",
        "--cells",
        "8",
    ]);
    std::fs::write(d("p.csv"), "r,n\n1,1\n500,1\n").unwrap();
    std::fs::write(d("run.toml"), "[cosmology]\nh0 = 70.0\n").unwrap();
    let before: Vec<Vec<u8>> = ["in.csv", "f.fits", "p.csv", "run.toml"]
        .iter()
        .map(|f| std::fs::read(d(f)).unwrap())
        .collect();
    let cases: Vec<Vec<String>> = vec![
        vec![
            "velocities",
            &d("in.csv"),
            "-o",
            &d("out.csv"),
            "--outliers",
            "--export",
            &d("out.csv"),
            "--force",
        ],
        vec![
            "correct",
            &d("in.csv"),
            "--field",
            &d("f.fits"),
            "-o",
            &d("f.fits"),
            "--force",
        ],
        vec![
            "mock",
            "-o",
            &d("f.fits"),
            "--field",
            &d("f.fits"),
            "--force",
        ],
        vec![
            "velocities",
            &d("in.csv"),
            "--malmquist-profile",
            &d("p.csv"),
            "-o",
            &d("p.csv"),
            "--force",
        ],
        vec![
            "config",
            "--check",
            &d("run.toml"),
            "-o",
            &d("run.toml"),
            "--force",
        ],
        vec!["velocities", &d("in.csv"), "-o", &d("in.csv"), "--force"],
    ]
    .into_iter()
    .map(|c| c.into_iter().map(String::from).collect())
    .collect();
    for c in &cases {
        let args: Vec<&str> = c.iter().map(String::as_str).collect();
        let out = flowsift().args(&args).assert().failure();
        let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
        assert!(
            err.contains("refusing to overwrite") || err.contains("are the same file"),
            "{args:?}: {err}"
        );
    }
    for (f, b) in ["in.csv", "f.fits", "p.csv", "run.toml"]
        .iter()
        .zip(&before)
    {
        assert_eq!(&std::fs::read(d(f)).unwrap(), b, "{f} changed");
    }
    assert!(!Path::new(&d("out.csv")).exists());
}

/// `config --check` runs the checks of a run: a file it calls valid is one a run accepts.
#[test]
fn config_check_runs_the_checks_of_a_run() {
    let dir = tempfile::tempdir().unwrap();
    for (text, message) in [
        ("[conventions]\nsigma_star = -100.0\n", "sigma_star"),
        ("[errors]\nmonte_carlo = 1\n", "at least 2"),
        ("[errors]\nmonte_carlo = 100000000000\n", "more than"),
        ("[outliers]\nthreshold = -1.0\n", "threshold"),
    ] {
        let p = dir.path().join("run.toml");
        std::fs::write(&p, text).unwrap();
        fails(&["config", "--check", p.to_str().unwrap()], message);
    }
}

/// `groups --help` and `malmquist --help` describe their own commands.
#[test]
fn each_subcommand_has_its_own_help() {
    // `velocities --help` lists the output columns from the one column schema.
    let velocities = run_ok(&["velocities", "--help"]);
    assert!(velocities.contains("Output columns") && velocities.contains("v_pec_mc_median"));
    let groups = run_ok(&["groups", "--help"]);
    assert!(groups.contains("Combine group members") && groups.contains("flowsift groups cat.csv"));
    assert!(!groups.contains("flowsift velocities survey.fits"));
    let malmquist = run_ok(&["malmquist", "--help"]);
    assert!(
        malmquist.contains("Malmquist-bias correction")
            && malmquist.contains("flowsift malmquist cat.csv")
    );
    assert!(!malmquist.contains("flowsift velocities survey.fits"));
}

/// The command line parses flags and reaches the library through plans: no file under
/// src/cli/ uses the physics directly.
#[test]
fn the_command_line_does_not_import_physics() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("src/cli");
    for entry in std::fs::read_dir(&dir).unwrap() {
        let path = entry.unwrap().path();
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(
            !text.contains("flowsift::physics"),
            "{} uses flowsift::physics",
            path.display()
        );
    }
}
