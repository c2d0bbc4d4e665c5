//! Sample stages on generated catalogues with a known truth: bulk-flow recovery and the
//! coverage of its reported errors, outlier injection recovery and false-positive rates,
//! group averaging and Malmquist through the command line.

use std::collections::BTreeMap;

use assert_cmd::Command;
use flowsift::catalogue::bulk_flow_file::read_bulk_flow;
use flowsift::catalogue::{read_table, write_table, Provenance, ReadOptions, Table, WriteOptions};
use flowsift::flow::outliers::{flag_outliers, OutlierSettings};
use flowsift::flow::FlowSample;
use flowsift::mock::{generate, MockCatalogue, MockSpec};
use flowsift::physics::cosmology::{Cosmology, CosmologyParams, LengthUnit};
use flowsift::physics::dipole_likelihood::{fit_bulk_flow, FlowData, SigmaStar};
use flowsift::physics::estimators::{DistanceKind, DlConvention, EstimatorOptions};
use flowsift::physics::object::ObjectContext;
use flowsift::physics::restframe::{default_apex, Boost, BoostMethod};
use flowsift::physics::sky::SkyRotations;
use flowsift::pipeline::{derive, InputColumns};
use flowsift::settings::{FitSpace, OutlierChoice};
use polars::prelude::*;

fn cosmology() -> Cosmology {
    Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap()
}

fn mock(spec: &MockSpec) -> MockCatalogue {
    generate(
        spec,
        &cosmology(),
        &Boost::new(&default_apex("cmb")).unwrap(),
        DlConvention::Observed,
    )
    .unwrap()
}

/// Run the per-object pipeline on a mock and return the flow sample.
fn sample_of(m: &MockCatalogue) -> FlowSample {
    let c = cosmology();
    let n = m.len();
    let input = InputColumns {
        ra_deg: m.ra.clone().into(),
        dec_deg: m.dec.clone().into(),
        z_helio: m.z_helio.clone().into(),
        z_err: m.z_err.clone().into(),
        distance: m.mu.clone().into(),
        distance_err: m.mu_err.clone().into(),
        distance_kind: DistanceKind::Mu,
        status: vec![0; n],
        error_missing: vec![false; n],
    };
    let ctx = ObjectContext {
        cosmology: &c,
        rotations: SkyRotations::default(),
        cmb: Boost::new(&default_apex("cmb")).unwrap(),
        method: BoostMethod::Exact,
        options: EstimatorOptions::default(),
        length_unit: LengthUnit::Mpc,
    };
    let d = derive(&ctx, &input, &|_| {});
    let get = |k: &str| d.get(k).unwrap().to_vec();
    let (glon, glat) = (get("glon"), get("glat"));
    FlowSample {
        directions: glon
            .iter()
            .zip(&glat)
            .map(|(l, b)| {
                let (l, b) = (l.to_radians(), b.to_radians());
                [b.cos() * l.cos(), b.cos() * l.sin(), b.sin()]
            })
            .collect(),
        z_cmb: get("z_cmb"),
        v_pec: get("v_pec"),
        v_pec_err: get("v_pec_err"),
        eta: get("eta"),
        eta_err: get("eta_err"),
        d_c: get("d_c"),
        usable: d.status.iter().map(|s| *s == 0).collect(),
    }
}

fn spec(n: usize, seed: u64, flow: [f64; 3]) -> MockSpec {
    MockSpec {
        n,
        seed,
        bulk_flow: flow,
        z_max: 0.05,
        ..MockSpec::demo_survey()
    }
}

/// Bulk flow from 40 generated catalogues of 2000 objects with a known dipole (η fit, σ_*
/// fitted): each component's 1σ interval covers the truth ≈ 68% of the time. With 120
/// trials the binomial standard deviation is 4.3%, so [55%, 81%] is a 3σ band.
#[test]
fn bulk_flow_errors_cover_the_truth() {
    let truth = [180.0, -240.0, 90.0];
    let c = cosmology();
    let (mut covered, mut trials) = (0, 0);
    let mut mean = [0.0; 3];
    for seed in 1..=40 {
        let m = mock(&MockSpec {
            outlier_fraction: 0.0,
            ..spec(2000, seed, truth)
        });
        let s = sample_of(&m);
        let (y, e, k) = flowsift::flow::fit::fit_vectors(&s, &c, FitSpace::Eta);
        let fit = fit_bulk_flow(
            &FlowData {
                directions: &s.directions,
                values: &y,
                errors: &e,
                kappa: &k,
            },
            SigmaStar::Fit,
        )
        .unwrap();
        for i in 0..3 {
            trials += 1;
            if (fit.v[i] - truth[i]).abs() <= fit.cov[i][i].sqrt() {
                covered += 1;
            }
            mean[i] += fit.v[i] / 40.0;
        }
    }
    let f = covered as f64 / trials as f64;
    assert!((0.55..=0.81).contains(&f), "coverage {f}");
    // No component is biased by more than a third of a single-catalogue error (≈ 40 km/s
    // here; the mean of 40 has an error of ≈ 6 km/s).
    for i in 0..3 {
        assert!(
            (mean[i] - truth[i]).abs() < 40.0,
            "component {i}: mean {} vs {}",
            mean[i],
            truth[i]
        );
    }
}

/// Injected gross distance errors (2.5–4 mag, 2% of 3000 objects, generated with a known
/// bulk flow): at least 90% are flagged and at most 1% of the clean objects are.
#[test]
fn injected_outliers_are_found() {
    let c = cosmology();
    let settings = OutlierSettings::from_choice(&OutlierChoice::default()).unwrap();
    for seed in [11, 12, 13] {
        let m = mock(&MockSpec {
            outlier_fraction: 0.02,
            ..spec(3000, seed, [200.0, -100.0, 50.0])
        });
        let s = sample_of(&m);
        let r = flag_outliers(&s, &c, &settings).unwrap();
        let (mut tp, mut injected, mut fp, mut clean) = (0, 0, 0, 0);
        for i in 0..m.len() {
            if m.true_outlier[i] {
                injected += 1;
                tp += (r.reasons[i] != 0) as usize;
            } else {
                clean += 1;
                fp += (r.reasons[i] != 0) as usize;
            }
        }
        assert!(injected > 30);
        assert!(
            tp as f64 >= 0.9 * injected as f64,
            "seed {seed}: {tp}/{injected} found"
        );
        assert!(
            fp as f64 <= 0.01 * clean as f64,
            "seed {seed}: {fp}/{clean} false positives"
        );
        // The flow fitted without the outliers is close to the truth.
        for i in 0..3 {
            assert!((r.flow.v[i] - [200.0, -100.0, 50.0][i]).abs() < 4.0 * r.flow.cov[i][i].sqrt());
        }
    }
}

fn write(path: &std::path::Path, t: &Table) {
    write_table(path, t, &Provenance::default(), &WriteOptions::default()).unwrap();
}

fn f64s(t: &Table, name: &str) -> Vec<Option<f64>> {
    t.frame
        .column(name)
        .unwrap()
        .cast(&DataType::Float64)
        .unwrap()
        .f64()
        .unwrap()
        .iter()
        .collect()
}

fn run_ok(args: &[&str]) -> String {
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
    String::from_utf8(out.stdout).unwrap()
}

/// Groups through the command line against a hand computation, and the member mapping.
#[test]
fn groups_command() {
    let dir = tempfile::tempdir().unwrap();
    let ip = dir.path().join("members.csv");
    std::fs::write(
        &ip,
        "ra,dec,z_helio,mu,mu_err,group_id\n\
         150.0,20.0,0.0300,35.50,0.20,7\n\
         150.1,20.1,0.0310,35.80,0.40,7\n\
         200.0,-10.0,0.0200,34.70,0.30,\n\
         10.0,40.0,0.0150,34.10,0.30,9\n",
    )
    .unwrap();
    let gp = dir.path().join("groups.csv");
    let mp = dir.path().join("members_out.csv");
    run_ok(&[
        "groups",
        ip.to_str().unwrap(),
        "-o",
        gp.to_str().unwrap(),
        "--members-out",
        mp.to_str().unwrap(),
    ]);
    let g = read_table(&gp, &ReadOptions::default()).unwrap();
    assert_eq!(g.frame.height(), 3, "two groups and one singleton");
    // Hand computation: weights 25 and 6.25 → μ = (35.5·25 + 35.8·6.25)/31.25 = 35.56,
    // σ = 31.25^−½ = 0.178885.
    let mu = f64s(&g, "mu");
    let mu_err = f64s(&g, "mu_err");
    assert!((mu[0].unwrap() - 35.56).abs() < 1e-12);
    assert!((mu_err[0].unwrap() - 0.178_885_438_199_983_2).abs() < 1e-12);
    assert_eq!(f64s(&g, "n_members"), vec![Some(2.0), Some(1.0), Some(1.0)]);
    assert!(f64s(&g, "v_pec").iter().all(|v| v.is_some()));
    let m = read_table(&mp, &ReadOptions::default()).unwrap();
    assert_eq!(
        f64s(&m, "group_index"),
        vec![Some(0.0), Some(0.0), Some(1.0), Some(2.0)]
    );
}

/// Malmquist through the command line: the published homogeneous factor exp(3.5 Δ²),
/// Δ = (ln 10/5) σ_μ (Lynden-Bell et al. 1988), applied to μ as + 5 log10 of the factor.
#[test]
fn malmquist_command() {
    let dir = tempfile::tempdir().unwrap();
    let ip = dir.path().join("in.csv");
    std::fs::write(&ip, "ra,dec,z_helio,mu,mu_err\n150.0,20.0,0.03,35.5,0.4\n").unwrap();
    let op = dir.path().join("out.csv");
    run_ok(&[
        "malmquist",
        ip.to_str().unwrap(),
        "-o",
        op.to_str().unwrap(),
    ]);
    let t = read_table(&op, &ReadOptions::default()).unwrap();
    let delta: f64 = std::f64::consts::LN_10 / 5.0 * 0.4;
    let factor = (3.5 * delta * delta).exp();
    assert!((f64s(&t, "malmquist_factor")[0].unwrap() - factor).abs() < 1e-12);
    assert!(
        (f64s(&t, "distance_malmquist")[0].unwrap() - (35.5 + 5.0 * factor.log10())).abs() < 1e-12
    );
    // The correction moves the object further away, so its velocity goes down.
    let plain = dir.path().join("plain.csv");
    run_ok(&[
        "velocities",
        ip.to_str().unwrap(),
        "-o",
        plain.to_str().unwrap(),
    ]);
    let p = read_table(&plain, &ReadOptions::default()).unwrap();
    assert!(f64s(&t, "v_pec")[0].unwrap() < f64s(&p, "v_pec")[0].unwrap());
}

/// The whole chain from a run file on a mock with outliers: groups off, outliers, bulk flow
/// JSON and the export, every row accounted for.
#[test]
fn stages_from_a_run_file() {
    let dir = tempfile::tempdir().unwrap();
    let m = mock(&MockSpec {
        outlier_fraction: 0.02,
        ..spec(1500, 5, [150.0, 0.0, 0.0])
    });
    let ip = dir.path().join("mock.parquet");
    write(&ip, &m.to_table());
    let cfg = dir.path().join("run.toml");
    std::fs::write(&cfg, "[outliers]\n[bulk_flow]\nlcdm = false\n[export]\n").unwrap();
    let op = dir.path().join("out.fits");
    let stdout = run_ok(&[
        "velocities",
        ip.to_str().unwrap(),
        "-o",
        op.to_str().unwrap(),
        "--config",
        cfg.to_str().unwrap(),
    ]);
    assert!(stdout.contains("outliers:"), "{stdout}");
    assert!(stdout.contains("bulk flow:"), "{stdout}");
    let out = read_table(&op, &ReadOptions::default()).unwrap();
    assert_eq!(out.frame.height(), 1500);
    let flags: Vec<bool> = out
        .frame
        .column("outlier")
        .unwrap()
        .bool()
        .unwrap()
        .iter()
        .map(|b| b.unwrap())
        .collect();
    let found = flags
        .iter()
        .zip(&m.true_outlier)
        .filter(|(f, t)| **f && **t)
        .count();
    let injected = m.true_outlier.iter().filter(|t| **t).count();
    assert!(found as f64 >= 0.9 * injected as f64);
    let json: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("out.fits.bulkflow.json")).unwrap(),
    )
    .unwrap();
    for k in ["galactic", "amplitude", "l", "b", "fit"] {
        assert!(json.get(k).is_some(), "{k} missing");
    }
    for k in [
        "quantity",
        "n_used",
        "sigma_star",
        "sigma_star_fitted",
        "chi2",
    ] {
        assert!(json["fit"].get(k).is_some(), "fit.{k} missing");
    }
    assert!(json["galactic"]["v"].is_array() && json["galactic"]["cov"].is_array());
    assert!(json["supergalactic"]["v"].is_array() && json["equatorial"]["v"].is_array());
    // The typed reader reads every key the stage wrote: written again, the report is the file
    // without its record.
    let typed = read_bulk_flow(&dir.path().join("out.fits.bulkflow.json")).unwrap();
    let mut without_record = json.clone();
    without_record.as_object_mut().unwrap().remove("record");
    assert_eq!(serde_json::to_value(&typed).unwrap(), without_record);
    let export = read_table(&dir.path().join("out.flow.fits"), &ReadOptions::default()).unwrap();
    let kept = flags.iter().filter(|f| !**f).count();
    assert_eq!(export.frame.height(), kept);
    for c in [
        "row",
        "sgx",
        "sgy",
        "sgz",
        "sgx_h",
        "v_pec",
        "v_pec_err",
        "eta",
        "outlier",
    ] {
        assert!(export.frame.column(c).is_ok(), "{c}");
    }
    let sgx = f64s(&export, "sgx");
    let sgx_h = f64s(&export, "sgx_h");
    assert!(
        (sgx_h[0].unwrap() - 0.7 * sgx[0].unwrap()).abs() < 1e-9,
        "h⁻¹ Mpc = h × Mpc"
    );
    // Stand-alone stages on the output agree with the in-run ones.
    let bf = run_ok(&["bulkflow", op.to_str().unwrap(), "--json", "--no-lcdm"]);
    let j: serde_json::Value = serde_json::from_str(&bf).unwrap();
    assert!(json["fit"]["n_used"].as_u64().unwrap() > 0);
    assert_eq!(j["fit"]["n_used"], json["fit"]["n_used"]);
    let _ = BTreeMap::<(), ()>::new();
}

/// `--eta-range LOW,HIGH` in one argument, a negative bound first, as the README writes it:
/// a narrower range flags more rows for `eta_range`; a malformed range is refused.
#[test]
fn eta_range_flag_takes_a_comma_separated_pair() {
    let dir = tempfile::tempdir().unwrap();
    let ip = dir.path().join("in.csv");
    run_ok(&[
        "mock",
        "-o",
        ip.to_str().unwrap(),
        "--n",
        "300",
        "--seed",
        "8",
        "--distance-error",
        "0.2",
    ]);
    let count = |range: &str, name: &str| {
        let op = dir.path().join(name);
        run_ok(&[
            "velocities",
            ip.to_str().unwrap(),
            "-o",
            op.to_str().unwrap(),
            "--outliers",
            "--eta-range",
            range,
        ]);
        let t = read_table(&op, &ReadOptions::default()).unwrap();
        let reasons = t
            .frame
            .column("outlier_reason")
            .unwrap()
            .str()
            .unwrap()
            .clone();
        reasons
            .iter()
            .flatten()
            .filter(|r| r.contains("eta_range"))
            .count()
    };
    assert!(count("-0.05,0.05", "narrow.csv") > count("-0.6,0.6", "wide.csv"));
    let out = Command::cargo_bin("flowsift")
        .unwrap()
        .args([
            "velocities",
            ip.to_str().unwrap(),
            "-o",
            dir.path().join("bad.csv").to_str().unwrap(),
            "--outliers",
            "--eta-range",
            "-0.5",
        ])
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("expected two numbers"));
}

/// The flow-sample export keeps each object's name beside its `row`, so the exported rows can
/// be matched back to the catalogue by either.
#[test]
fn export_keeps_the_object_name() {
    let dir = tempfile::tempdir().unwrap();
    let demo = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/demo-data/lantern_survey.csv"
    ))
    .unwrap();
    let mut text = String::new();
    for (i, line) in demo.lines().take(301).enumerate() {
        if i == 0 {
            text.push_str(&format!("Name,{line}\n"));
        } else {
            text.push_str(&format!("obj-{:04},{line}\n", i - 1));
        }
    }
    let ip = dir.path().join("named.csv");
    std::fs::write(&ip, text).unwrap();
    let op = dir.path().join("out.csv");
    let ep = dir.path().join("flow.csv");
    run_ok(&[
        "velocities",
        ip.to_str().unwrap(),
        "-o",
        op.to_str().unwrap(),
        "--export",
        ep.to_str().unwrap(),
    ]);
    let export = read_table(&ep, &ReadOptions::default()).unwrap();
    let rows: Vec<i64> = export
        .frame
        .column("row")
        .unwrap()
        .cast(&DataType::Int64)
        .unwrap()
        .i64()
        .unwrap()
        .into_no_null_iter()
        .collect();
    let names: Vec<String> = export
        .frame
        .column("Name")
        .unwrap()
        .str()
        .unwrap()
        .iter()
        .map(|v| v.unwrap_or_default().to_string())
        .collect();
    assert!(rows.len() > 250, "{} rows exported", rows.len());
    for (r, n) in rows.iter().zip(&names) {
        assert_eq!(n, &format!("obj-{r:04}"));
    }
}
