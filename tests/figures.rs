//! Figures and the run report: every file written, PNG sizes, SVG axis labels, and a report
//! that embeds and links every figure. A small mock-like table is made here (seeded), so the
//! tests are fast in debug builds.

use std::path::{Path, PathBuf};

use assert_cmd::Command;
use polars::prelude::{Column, DataFrame};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal, Uniform};

use flowsift::catalogue::bulk_flow_file::{read_bulk_flow, write_bulk_flow};
use flowsift::catalogue::{write_table, Provenance, RunRecord, Table, WriteOptions};
use flowsift::flow::bulk_flow_report::{AxesReport, BulkFlowReport, FitSummary, LcdmComparison};
use flowsift::physics::cosmology::{Cosmology, CosmologyParams};
use flowsift::physics::sky::{galactic_to_supergalactic, Direction, Galactic};
use flowsift::report::{
    render_all, write_report, ImageFormat, PlotOptions, ReportError, SkyChoice,
};
use flowsift::settings::FitSpace;

const C: f64 = 299_792.458;

/// A flowsift-output-like table: `n` rows, the last `bad` with a status other than ok and no
/// numbers, every 40th ok row an outlier with a wild distance modulus.
fn mock_table(n: usize, bad: usize, with_mu: bool) -> Table {
    let cosmo = Cosmology::new(CosmologyParams::flat_lcdm(70.0, 0.3)).unwrap();
    let rot = galactic_to_supergalactic();
    let mut rng = ChaCha8Rng::seed_from_u64(20261201);
    let u = Uniform::new(0.0f64, 1.0).unwrap();
    let g = Normal::new(0.0, 1.0).unwrap();
    let mut cols: Vec<(&str, Vec<f64>)> = [
        "glon",
        "glat",
        "sgl",
        "sgb",
        "z_cmb",
        "z_cos",
        "v_pec",
        "v_pec_err",
        "d_c",
        "mu",
        "mu_err",
        "true_v_pec",
    ]
    .into_iter()
    .map(|c| (c, Vec::with_capacity(n)))
    .collect();
    let mut status = Vec::with_capacity(n);
    let mut outlier = Vec::with_capacity(n);
    let mut reason = Vec::with_capacity(n);
    for i in 0..n {
        let l = 360.0 * u.sample(&mut rng);
        let b = (2.0 * u.sample(&mut rng) - 1.0).asin().to_degrees();
        let (sl, sb) = rot
            .apply(&Direction::<Galactic>::from_lon_lat_deg(l, b).unwrap())
            .lon_lat_deg();
        let z_cos = 0.004 + 0.06 * u.sample(&mut rng).powf(0.6);
        let v_true = 300.0 * g.sample(&mut rng);
        let z_cmb = (1.0 + z_cos) * (1.0 + v_true / C) - 1.0;
        let sigma_mu = 0.2;
        let is_out = i % 40 == 7;
        let mu = cosmo.distance_modulus(z_cos).unwrap()
            + sigma_mu * g.sample(&mut rng)
            + if is_out { 2.5 } else { 0.0 };
        // Distance from μ, velocity to first order: enough for figures.
        let d_true = cosmo.comoving_distance(z_cos).unwrap();
        let mu_true = cosmo.distance_modulus(z_cos).unwrap();
        let d = d_true * 10f64.powf((mu - mu_true) / 5.0);
        let v = C * z_cmb - 70.0 * d;
        let v_err = 70.0 * d * sigma_mu * std::f64::consts::LN_10 / 5.0;
        let not_ok = i >= n - bad;
        let vals = [
            l, b, sl, sb, z_cmb, z_cos, v, v_err, d, mu, sigma_mu, v_true,
        ];
        for (k, (_, c)) in cols.iter_mut().enumerate() {
            let keep = k < 5 || !not_ok;
            c.push(if keep { vals[k] } else { f64::NAN });
        }
        status.push(if not_ok { "no distance" } else { "ok" });
        let flagged = is_out && !not_ok;
        outlier.push(flagged);
        reason.push(if !flagged {
            ""
        } else if i % 80 == 7 {
            "residual,neighbours"
        } else {
            "residual"
        });
    }
    let mut columns: Vec<Column> = cols
        .into_iter()
        .filter(|(name, _)| with_mu || !name.starts_with("mu"))
        .map(|(name, v)| Column::new(name.into(), v))
        .collect();
    columns.push(Column::new("status".into(), status));
    columns.push(Column::new("outlier".into(), outlier));
    columns.push(Column::new("outlier_reason".into(), reason));
    Table::new(DataFrame::new(n, columns).unwrap(), Default::default())
}

/// A bulk-flow result, built as the type the bulk-flow stage returns (so it cannot drift from
/// what the stage writes).
fn bulk_flow_fixture() -> BulkFlowReport {
    let cov = [[6400.0, 0.0, 0.0], [0.0, 6400.0, 0.0], [0.0, 0.0, 6400.0]];
    BulkFlowReport {
        galactic: AxesReport {
            v: [80.0, -230.0, 43.0],
            cov,
        },
        amplitude: 250.0,
        amplitude_err: 80.0,
        l: 290.0,
        b: 10.0,
        supergalactic: AxesReport {
            v: [-200.0, 50.0, -120.0],
            cov,
        },
        equatorial: AxesReport {
            v: [-150.0, 180.0, -60.0],
            cov,
        },
        fit: FitSummary {
            quantity: FitSpace::Eta,
            n_used: 380,
            sigma_star: 150.0,
            sigma_star_fitted: true,
            chi2: 391.0,
        },
        lcdm: Some(LcdmComparison {
            lcdm_rms: [110.0, 111.0, 109.0],
            lcdm_cov: [
                [12100.0, 0.0, 0.0],
                [0.0, 12321.0, 0.0],
                [0.0, 0.0, 11881.0],
            ],
            chi2: 4.2,
            dof: 3,
            probability: 0.24,
            growth_rate: 0.52,
            sigma8: 0.81,
            window: "pair sum over the fit's objects".into(),
            power_spectrum: "Eisenstein & Hu (1998)".into(),
        }),
        cautions: vec!["The amplitude of a noisy vector is biased high.".into()],
    }
}

/// Write the fixture to `path` with the one bulk-flow writer, as the stage does.
fn write_bulk_flow_fixture(path: &Path) {
    let record = RunRecord::new(
        "bulkflow",
        "flowsift bulkflow (test fixture)",
        "2026-12-01T00:00:00Z",
    );
    write_bulk_flow(path, &bulk_flow_fixture(), &record, false).unwrap();
}

/// The fixture as `plot` gets it: written, then read back by the one reader.
fn bulk_flow_result() -> BulkFlowReport {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("fixture.bulkflow.json");
    write_bulk_flow_fixture(&path);
    let read = read_bulk_flow(&path).unwrap();
    assert_eq!(
        read,
        bulk_flow_fixture(),
        "the bulk-flow file reads back as written"
    );
    read
}

/// Width and height from a PNG's IHDR chunk (bytes 16–23, big-endian).
fn png_size(path: &Path) -> (u32, u32) {
    let b = std::fs::read(path).unwrap();
    assert!(b.len() > 24, "{}: too short", path.display());
    assert_eq!(
        &b[..8],
        b"\x89PNG\r\n\x1a\n",
        "{}: not a PNG",
        path.display()
    );
    assert_eq!(&b[12..16], b"IHDR");
    let w = u32::from_be_bytes([b[16], b[17], b[18], b[19]]);
    let h = u32::from_be_bytes([b[20], b[21], b[22], b[23]]);
    (w, h)
}

fn named<'a>(files: &'a [PathBuf], name: &str) -> &'a Path {
    files
        .iter()
        .find(|p| p.file_name().unwrap() == name)
        .unwrap_or_else(|| panic!("{name} not written: {files:?}"))
}

#[test]
fn all_figures_in_both_formats_and_a_self_contained_report() {
    let table = mock_table(400, 12, true);
    let dir = tempfile::tempdir().unwrap();
    let options = PlotOptions {
        bulkflow: Some(bulk_flow_result()),
        label: Some("mock.fits".into()),
        ..PlotOptions::default()
    };
    let files = render_all(&table, &options, dir.path()).unwrap();
    assert_eq!(files.len(), 8, "{files:?}");
    for f in &files {
        let len = std::fs::metadata(f).unwrap().len();
        assert!(len > 1000, "{}: {len} bytes", f.display());
        if f.extension().unwrap() == "png" {
            assert_eq!(png_size(f), (1600, 1000), "{}", f.display());
        }
    }
    // No temporary files left behind.
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| {
            e.file_name()
                .to_string_lossy()
                .starts_with(".flowsift-partial")
        })
        .collect();
    assert!(leftovers.is_empty());

    let svg = |name: &str| std::fs::read_to_string(named(&files, name)).unwrap();
    let hubble = svg("hubble_diagram.svg");
    assert!(hubble.starts_with("<svg") && hubble.contains("width=\"1600\""));
    for label in [
        "z_cmb",
        "distance modulus μ (mag)",
        "μ − μ_model (mag)",
        "388 of 400 rows used",
    ] {
        assert!(hubble.contains(label), "Hubble diagram lacks {label:?}");
    }
    assert!(hubble.contains("12 with a status other than ok"));
    let vd = svg("velocity_distance.svg");
    for label in [
        "v_pec (km/s)",
        "D_C (Mpc)",
        "running median",
        "outliers (10)",
    ] {
        assert!(
            vd.contains(label),
            "velocity-distance figure lacks {label:?}"
        );
    }
    let sky = svg("sky_galactic.svg");
    for label in [
        "v_pec (km/s)",
        "Galactic longitude l (deg)",
        "Mollweide",
        "CMB dipole",
        "bulk flow (from the bulk-flow JSON)",
    ] {
        assert!(sky.contains(label), "sky map lacks {label:?}");
    }
    let pulls = svg("velocity_pulls.svg");
    for label in ["(v_pec − true_v_pec) / σ_v", "unit normal", "rows per bin"] {
        assert!(pulls.contains(label), "histogram lacks {label:?}");
    }

    // The report: one file, every figure embedded (PNG preferred) and linked.
    let report = dir.path().join("report.html");
    let input = dir.path().join("mock.fits");
    write_report(&table, &input, &files, Some(&bulk_flow_result()), &report).unwrap();
    let html = std::fs::read_to_string(&report).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>"));
    for f in &files {
        let name = f.file_name().unwrap().to_string_lossy();
        assert!(
            html.contains(&format!("href=\"{name}\"")),
            "report does not link {name}"
        );
    }
    assert_eq!(html.matches("src=\"data:image/png;base64,").count(), 4);
    for needle in [
        "no distance",
        "residual",
        "residual + neighbours",
        "Bulk flow",
        "250 ± 80 km/s towards l = 290.0°, b = 10.0°",
        "ΛCDM rms",
        "4.20 for 3 degrees of freedom",
        "No provenance was found",
    ] {
        assert!(html.contains(needle), "report lacks {needle:?}");
    }
    // Self-contained: no scripts, no external style sheets or images.
    for bad in ["<script", "<link", "src=\"http", "url(http"] {
        assert!(!html.contains(bad), "report contains {bad:?}");
    }
}

#[test]
fn svg_only_supergalactic_without_mu_or_bulk_flow() {
    let table = mock_table(150, 0, false);
    let dir = tempfile::tempdir().unwrap();
    let options = PlotOptions {
        sky: SkyChoice::Supergalactic,
        format: ImageFormat::Svg,
        ..PlotOptions::default()
    };
    let files = render_all(&table, &options, dir.path()).unwrap();
    assert_eq!(files.len(), 4);
    assert!(files.iter().all(|f| f.extension().unwrap() == "svg"));
    let hubble = std::fs::read_to_string(named(&files, "hubble_diagram.svg")).unwrap();
    assert!(hubble.contains("comoving distance D_C (Mpc)") && hubble.contains("z_cmb"));
    let sky = std::fs::read_to_string(named(&files, "sky_supergalactic.svg")).unwrap();
    assert!(sky.contains("supergalactic longitude SGL (deg)"));
    assert!(sky.contains("bulk flow not marked"));
    // SVG figures are embedded inline when there is no PNG.
    let report = dir.path().join("sub").join("report.html");
    std::fs::create_dir_all(report.parent().unwrap()).unwrap();
    write_report(&table, Path::new("mock.csv"), &files, None, &report).unwrap();
    let html = std::fs::read_to_string(&report).unwrap();
    assert_eq!(html.matches("<svg").count(), 4);
    for f in &files {
        let name = f.file_name().unwrap().to_string_lossy();
        assert!(html.contains(&*name), "report does not link {name}");
    }
}

#[test]
fn png_size_follows_the_options() {
    let table = mock_table(60, 3, true);
    let dir = tempfile::tempdir().unwrap();
    let options = PlotOptions {
        format: ImageFormat::Png,
        width: 1000,
        height: 640,
        ..PlotOptions::default()
    };
    let files = render_all(&table, &options, dir.path()).unwrap();
    assert_eq!(files.len(), 4);
    for f in &files {
        assert_eq!(png_size(f), (1000, 640), "{}", f.display());
    }
}

#[test]
fn tables_with_no_usable_rows_still_give_every_figure() {
    let dir = tempfile::tempdir().unwrap();
    for (n, bad) in [(5, 5), (1, 0), (2, 0)] {
        let table = mock_table(n, bad, true);
        let options = PlotOptions {
            format: ImageFormat::Svg,
            width: 800,
            height: 500,
            ..PlotOptions::default()
        };
        let files = render_all(&table, &options, dir.path()).unwrap();
        assert_eq!(files.len(), 4);
        let hubble = std::fs::read_to_string(named(&files, "hubble_diagram.svg")).unwrap();
        let used = n - bad;
        assert!(
            hubble.contains(&format!("{used} of {n} rows used")),
            "{n}, {bad}"
        );
        let report = dir.path().join("report.html");
        write_report(&table, Path::new("x.parquet"), &files, None, &report).unwrap();
    }
}

#[test]
fn a_table_that_is_not_a_flowsift_output_is_refused() {
    let frame = DataFrame::new(2, vec![Column::new("x".into(), [1.0, 2.0])]).unwrap();
    let table = Table::new(frame, Default::default());
    let dir = tempfile::tempdir().unwrap();
    let e = render_all(&table, &PlotOptions::default(), dir.path()).unwrap_err();
    assert!(
        matches!(&e, ReportError::MissingColumn { name } if name == "z_cmb"),
        "{e:?}"
    );
    assert_eq!(
        e.to_string(),
        "no column z_cmb: is this a flowsift output table?"
    );
}

#[test]
fn plot_command_writes_figures_and_report_with_provenance() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("sample.csv");
    let provenance = Provenance {
        entries: vec![
            ("software".into(), "flowsift test".into()),
            (
                "cosmology".into(),
                r#"{"params":{"h0":70.0,"omega_m":0.3,"omega_de":0.7,"omega_r":0.0,"w0":-1.0,"wa":0.0},"omega_k":0.0,"source":"test"}"#.into(),
            ),
            ("dl_convention".into(), "observed".into()),
        ],
    };
    write_table(
        &input,
        &mock_table(120, 4, true),
        &provenance,
        &WriteOptions::default(),
    )
    .unwrap();
    let bulk = dir.path().join("sample.csv.bulkflow.json");
    write_bulk_flow_fixture(&bulk);
    let out = dir.path().join("figs");
    let assert = Command::cargo_bin("flowsift")
        .unwrap()
        .args(["plot"])
        .arg(&input)
        .arg("--out-dir")
        .arg(&out)
        .args(["--format", "png", "--h0", "73", "--omega-m", "0.31"])
        .assert()
        .success();
    let stdout = String::from_utf8_lossy(&assert.get_output().stdout).to_string();
    assert!(stdout.contains("found next to the input"), "{stdout}");
    for name in [
        "hubble_diagram.png",
        "velocity_distance.png",
        "sky_galactic.png",
        "velocity_pulls.png",
        "report.html",
    ] {
        assert!(out.join(name).exists(), "{name} missing; stdout: {stdout}");
    }
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        html.contains("H0 = 70 km/s/Mpc, Ω_m = 0.3"),
        "cosmology from the sidecar"
    );
    assert!(html.contains("observed"));
    assert!(html.contains("sample.csv.provenance.json"));
    assert_eq!(html.matches("data:image/png;base64,").count(), 4);
    assert!(
        html.contains("250 ± 80 km/s towards l = 290.0°, b = 10.0°"),
        "bulk flow from the file next to the input"
    );
    // A JSON file that is not a bulk-flow result: one message naming it, exit 1.
    let other = dir.path().join("other.json");
    std::fs::write(&other, r#"{"amplitude": 250.0, "l": 290.0, "b": 10.0}"#).unwrap();
    let assert = Command::cargo_bin("flowsift")
        .unwrap()
        .args(["plot"])
        .arg(&input)
        .arg("--out-dir")
        .arg(&out)
        .arg("--bulkflow")
        .arg(&other)
        .assert()
        .failure()
        .code(1);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    assert!(
        stderr.contains(&format!(
            "{}: not a flowsift bulk-flow result",
            other.display()
        )) && stderr.contains("missing field"),
        "{stderr}"
    );
    // Bad input: one message, exit 1.
    Command::cargo_bin("flowsift")
        .unwrap()
        .args(["plot", "no-such-file.csv", "--out-dir"])
        .arg(&out)
        .assert()
        .failure()
        .code(1);
}
